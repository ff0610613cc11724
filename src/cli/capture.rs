//! `capture`: read a measured capture, compress it on a cell, write its summary (and picture).

use std::io::Write;
use std::path::Path;

use joulepath::capture::{
    DEFAULT_TOLERANCE_V, MAX_BYTES, MAX_SEGMENTS, compress, read_capture_file, sensitivity,
    summarize, write_summary,
};
use joulepath::model::{Pack, Preset};
use joulepath::report::plot;
use joulepath::units::{Dim, fmt_eng};

use super::args::{CaptureArgs, FormatArg, parse_with};
use super::run::{Failure, emit};

/// A load id from a file name: letters, digits and hyphens.
fn id_of(path: &Path) -> String {
    let stem = path
        .file_stem()
        .map(|s| s.to_string_lossy().to_lowercase())
        .unwrap_or_default();
    let id: String = stem
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() { c } else { '-' })
        .collect();
    let id = id.trim_matches('-').to_string();
    if id.is_empty() { "load".into() } else { id }
}

/// Run `capture`.
pub fn capture_command(a: &CaptureArgs, buf: &mut Vec<u8>) -> Result<(), Failure> {
    let tolerance_v = parse_with(a.tolerance.trim(), Dim::Voltage)
        .map_err(|e| Failure::Usage(format!("`--tolerance {}`: {e}", a.tolerance)))?;
    if tolerance_v.is_nan() || tolerance_v < 0.0 {
        return Err(Failure::Usage(format!(
            "`--tolerance {}` is negative; give a voltage such as `5 mV` (default {})",
            a.tolerance,
            fmt_eng(DEFAULT_TOLERANCE_V, "V")
        )));
    }
    if Preset::text(&a.cell).is_none() {
        return Err(Failure::Usage(format!(
            "unknown cell preset `{}` ({})",
            a.cell,
            Preset::suggestion(&a.cell)
        )));
    }
    let picture = match a.plot.as_deref() {
        Some(p) => Some((p, super::pictures::format_of(p)?)),
        None => None,
    };
    let cap = read_capture_file(&a.file, a.allow_negative).map_err(|d| {
        // The text for the source line, when the file is small enough to be shown.
        let text = std::fs::metadata(&a.file)
            .ok()
            .filter(|m| m.len() <= MAX_BYTES as u64)
            .and_then(|_| std::fs::read_to_string(&a.file).ok())
            .unwrap_or_default();
        Failure::Invalid {
            file: a.file.clone(),
            text,
            diagnostics: vec![d],
        }
    })?;
    let preset = Preset::load(&a.cell).map_err(|e| Failure::Input(e.to_string()))?;
    let pack = Pack::one_cell(preset.cell().clone());
    let sens = sensitivity(&pack, 25.0, 1.0);
    let on = format!("one {} cell at 25 °C", a.cell);
    let z = compress(cap.current(), cap.dt(), &sens, tolerance_v, MAX_SEGMENTS).map_err(|e| {
        Failure::Input(format!(
            "{}: {e}; raise `--tolerance` (now {})",
            a.file.display(),
            fmt_eng(tolerance_v, "V")
        ))
    })?;
    let load = a
        .load
        .as_deref()
        .map_or_else(|| id_of(&a.file), str::to_string);
    if let Some((path, fmt)) = picture {
        let bytes = plot::capture(&cap, &z, &on, fmt, (1200, 700))
            .map_err(|e| Failure::Input(format!("cannot draw the picture: {e}")))?;
        emit(&bytes, Some(path))?;
    }
    let s = summarize(&cap, &z, &on, &load, &sens);
    let io_fail = |e: std::io::Error| Failure::Input(format!("cannot write the output: {e}"));
    match a.format {
        FormatArg::Json => {
            serde_json::to_writer_pretty(&mut *buf, &s)
                .map_err(|e| Failure::Input(e.to_string()))?;
            writeln!(buf).map_err(io_fail)
        }
        FormatArg::Csv => Err(Failure::Usage(
            "`capture` writes a table or JSON; for the segments as data use `--format json`".into(),
        )),
        FormatArg::Table => write_summary(buf, &s).map_err(io_fail),
    }
}
