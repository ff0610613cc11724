//! Reading input files and writing output files, safely.
//!
//! Inputs (design files, `fit-cell` curves) must be regular files of at most [`READ_LIMIT`]
//! bytes; they are read through a reader that stops one byte past the limit, so a file that
//! grows while it is read (or lies about its size) is bounded too.
//!
//! Outputs (`-o`) are written whole or not at all: to a hidden temporary file beside the target,
//! then renamed over it. A symbolic link is followed and its target replaced, so the link stays.
//! Anything that is not a regular file (a device such as `/dev/null`, a named pipe) is written
//! directly, never replaced, and a failed write is reported. On any failure the temporary file is
//! removed.

use std::fs::{self, File, OpenOptions};
use std::io::{self, Read, Write};
use std::path::{Path, PathBuf};

use super::run::Failure;

/// The largest input file read, bytes (64 MiB: design files and discharge curves are a few
/// kilobytes; a bigger file is the wrong file).
pub const READ_LIMIT: u64 = 64 * 1024 * 1024;

/// Most symbolic links followed from an output path (the usual operating-system limit).
const MAX_LINKS: usize = 40;

/// What kind of thing a path is, in words, for a message.
fn kind_words(t: fs::FileType) -> &'static str {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if t.is_char_device() {
            return "a character device";
        }
        if t.is_block_device() {
            return "a block device";
        }
        if t.is_fifo() {
            return "a named pipe";
        }
        if t.is_socket() {
            return "a socket";
        }
    }
    if t.is_dir() {
        "a directory"
    } else {
        "not a regular file"
    }
}

/// Read the text of the input file `path`: a regular file of at most [`READ_LIMIT`] bytes, in
/// UTF-8.
pub fn read_input(path: &Path) -> Result<Vec<u8>, Failure> {
    read_bounded(path, READ_LIMIT)
}

/// [`read_input`] with any limit (tests use a small one).
fn read_bounded(path: &Path, limit: u64) -> Result<Vec<u8>, Failure> {
    let shown = path.display();
    let fail = |e: &io::Error| Failure::Input(format!("cannot read `{shown}`: {e}"));
    // The kind is checked before opening: opening a named pipe waits for a writer.
    let before = std::fs::metadata(path).map_err(|e| fail(&e))?;
    if !before.is_file() {
        return Err(Failure::Input(format!(
            "cannot read `{shown}`: it is {}, not a regular file; save the input to a file and give that file's path",
            kind_words(before.file_type())
        )));
    }
    let file = File::open(path).map_err(|e| fail(&e))?;
    let meta = file.metadata().map_err(|e| fail(&e))?;
    if !meta.is_file() {
        return Err(Failure::Input(format!(
            "cannot read `{shown}`: it is {}, not a regular file; save the input to a file and give that file's path",
            kind_words(meta.file_type())
        )));
    }
    let mib = limit / (1024 * 1024);
    let too_big = |size: &str| {
        Failure::Input(format!(
            "cannot read `{shown}`: it holds {size}, more than the {mib} MiB an input file may hold; design files and discharge curves are a few kilobytes, so check that this is the right file"
        ))
    };
    if meta.len() > limit {
        return Err(too_big(&format!("{} bytes", meta.len())));
    }
    let Some(bytes) = read_capped(file, meta.len(), limit).map_err(|e| fail(&e))? else {
        return Err(too_big(&format!(
            "more than {mib} MiB (it grew while being read)"
        )));
    };
    Ok(bytes)
}

/// All of `reader` if it holds at most `limit` bytes (`None` if more): never more than
/// `limit + 1` bytes are read, whatever the reader (a file that grows, a device that never ends).
fn read_capped(reader: impl Read, expected: u64, limit: u64) -> io::Result<Option<Vec<u8>>> {
    let mut bytes = Vec::with_capacity(usize::try_from(expected.min(limit)).unwrap_or(0));
    reader.take(limit + 1).read_to_end(&mut bytes)?;
    Ok((bytes.len() as u64 <= limit).then_some(bytes))
}

/// Write `bytes` to standard output. A reader that stops early (`| head`) is not an error.
pub fn write_stdout(bytes: &[u8]) -> Result<(), Failure> {
    let mut out = io::stdout().lock();
    match out.write_all(bytes).and_then(|()| out.flush()) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(Failure::Input(format!(
            "cannot write to standard output: {e}; check where it is redirected"
        ))),
    }
}

/// The path a write to `path` lands on: `path` itself, or the end of its chain of symbolic
/// links (which need not exist yet).
fn follow_links(path: &Path) -> io::Result<PathBuf> {
    let mut p = path.to_path_buf();
    for _ in 0..MAX_LINKS {
        match fs::symlink_metadata(&p) {
            Ok(m) if m.file_type().is_symlink() => {
                let to = fs::read_link(&p)?;
                p = match p.parent() {
                    Some(dir) if to.is_relative() => dir.join(to),
                    _ => to,
                };
            }
            _ => return Ok(p),
        }
    }
    Err(io::Error::other(format!(
        "more than {MAX_LINKS} symbolic links in a chain"
    )))
}

/// Write `bytes` to the file `path`, whole or not at all (see the module documentation).
pub fn write_output(bytes: &[u8], path: &Path) -> Result<(), Failure> {
    let shown = path.display();
    let fail = |e: &io::Error| {
        let fix = match e.kind() {
            io::ErrorKind::StorageFull => "free some space or write elsewhere",
            io::ErrorKind::PermissionDenied | io::ErrorKind::ReadOnlyFilesystem => {
                "write to a place you may change"
            }
            io::ErrorKind::NotFound => "create the directory first or write elsewhere",
            _ => "check the path or write elsewhere",
        };
        Failure::Input(format!("cannot write `{shown}`: {e}; {fix}"))
    };
    let target = follow_links(path).map_err(|e| fail(&e))?;
    let existing = fs::metadata(&target).ok();
    if let Some(m) = &existing {
        if m.is_dir() {
            return Err(Failure::Input(format!(
                "cannot write `{shown}`: it is a directory; name a file inside it"
            )));
        }
        if !m.is_file() {
            // A device or a pipe: it cannot be replaced, only written to.
            let mut f = OpenOptions::new()
                .write(true)
                .open(&target)
                .map_err(|e| fail(&e))?;
            return f
                .write_all(bytes)
                .and_then(|()| f.flush())
                .map_err(|e| fail(&e));
        }
    }
    let name = target
        .file_name()
        .map_or_else(|| "out".into(), |n| n.to_string_lossy().into_owned());
    let tmp = target.with_file_name(format!(".{name}.partial"));
    let written = (|| {
        let mut f = File::create(&tmp)?;
        if let Some(m) = &existing {
            // The replacement keeps the permissions of the file it replaces.
            f.set_permissions(m.permissions())?;
        }
        f.write_all(bytes)?;
        f.sync_all()?;
        drop(f);
        fs::rename(&tmp, &target)
    })();
    written.map_err(|e| {
        let _ = fs::remove_file(&tmp);
        fail(&e)
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_reader_that_never_ends_is_cut_one_byte_past_the_limit() {
        // `io::repeat` never ends, like a file that keeps growing while it is read.
        assert_eq!(read_capped(io::repeat(b'x'), 0, 1000).unwrap(), None);
        let small = read_capped(&b"abc"[..], 3, 3).unwrap();
        assert_eq!(small.as_deref(), Some(&b"abc"[..]));
    }

    #[test]
    fn a_file_above_the_limit_is_refused_and_one_at_it_read() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.yaml");
        fs::write(&p, "x".repeat(100)).unwrap();
        assert!(read_bounded(&p, 100).is_ok());
        fs::write(&p, "x".repeat(101)).unwrap();
        let Err(Failure::Input(m)) = read_bounded(&p, 100) else {
            panic!("a file above the limit is read");
        };
        assert!(m.contains("holds 101 bytes, more than"), "{m}");
    }

    #[test]
    fn links_are_followed_to_their_end() {
        let dir = tempfile::tempdir().unwrap();
        let end = dir.path().join("end.txt");
        #[cfg(unix)]
        {
            std::os::unix::fs::symlink("mid", dir.path().join("first")).unwrap();
            std::os::unix::fs::symlink("end.txt", dir.path().join("mid")).unwrap();
            assert_eq!(follow_links(&dir.path().join("first")).unwrap(), end);
        }
        assert_eq!(follow_links(&end).unwrap(), end);
    }
}
