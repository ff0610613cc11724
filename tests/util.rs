//! A fluent builder for running the `joulepath` binary on a design written to a temporary
//! directory, and helpers for reading its JSON.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;

/// What a run of the binary produced.
#[derive(Debug)]
pub struct Output {
    /// Exit code.
    pub code: i32,
    /// Standard output.
    pub stdout: String,
    /// Standard error.
    pub stderr: String,
}

impl Output {
    /// Parse standard output as JSON.
    pub fn json(&self) -> serde_json::Value {
        serde_json::from_str(&self.stdout)
            .unwrap_or_else(|e| panic!("stdout is not JSON ({e}):\n{}", self.stdout))
    }
}

/// A test run: a design (optional), arguments, and what to expect.
pub struct Test {
    dir: tempfile::TempDir,
    args: Vec<String>,
    design: Option<String>,
}

impl Test {
    /// A run with no design file yet.
    pub fn new() -> Self {
        Self {
            dir: tempfile::tempdir().expect("temp dir"),
            args: Vec::new(),
            design: None,
        }
    }

    /// Write `yaml` as `design.yaml` in the temporary directory; `{file}` in args names it.
    pub fn design(mut self, yaml: &str) -> Self {
        self.design = Some(yaml.to_string());
        self
    }

    /// The example file `path` as the design, with the example captures beside it (in
    /// `captures/`, as in `examples/`).
    pub fn example(path: &Path) -> Self {
        let text =
            std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
        let t = Self::new().design(&text);
        let from = root().join("examples/captures");
        let to = t.dir().join("captures");
        std::fs::create_dir_all(&to).expect("captures dir");
        for e in std::fs::read_dir(&from)
            .expect("examples/captures")
            .flatten()
        {
            std::fs::copy(e.path(), to.join(e.file_name())).expect("copy a capture");
        }
        t
    }

    /// Arguments; `{file}` is replaced by the design's path.
    pub fn args(mut self, args: &[&str]) -> Self {
        self.args = args.iter().map(|s| (*s).to_string()).collect();
        self
    }

    /// The temporary directory.
    pub fn dir(&self) -> &Path {
        self.dir.path()
    }

    /// Path of the design file.
    pub fn file(&self) -> PathBuf {
        self.dir.path().join("design.yaml")
    }

    /// Run the binary.
    pub fn run(&self) -> Output {
        if let Some(d) = &self.design {
            std::fs::write(self.file(), d).expect("write design");
        }
        let file = self.file().display().to_string();
        let args: Vec<String> = self
            .args
            .iter()
            .map(|a| a.replace("{file}", &file))
            .collect();
        let out = Command::new(env!("CARGO_BIN_EXE_joulepath"))
            .args(&args)
            .current_dir(self.dir.path())
            .output()
            .expect("run joulepath");
        Output {
            code: out.status.code().unwrap_or(-1),
            stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
            stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
        }
    }

    /// Run and require exit code `code`.
    pub fn expect_code(&self, code: i32) -> Output {
        let out = self.run();
        assert_eq!(
            out.code, code,
            "exit code {} (wanted {code})\nstdout:\n{}\nstderr:\n{}",
            out.code, out.stdout, out.stderr
        );
        out
    }
}

/// Root of the repository.
pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Every `examples/*.yaml`, sorted.
pub fn example_files() -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(root().join("examples"))
        .expect("examples/")
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.extension().is_some_and(|x| x == "yaml"))
        .collect();
    v.sort();
    v
}

/// |a - b| <= rel x |b|.
pub fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * b.abs()
}

/// A minimal valid cell block, for designs written in tests.
pub const CELL: &str = "cells:
  test-cell:
    chemistry: li-ion
    capacity: 1000 mAh
    ocv: [[0 %, 3.0 V], [100 %, 4.2 V]]
    resistance: 100 mΩ
    cutoff: 3.0 V
";
