//! Showing the problems of a design file: place, path, message, the source line, the fix.

use std::io::{self, Write};

use joulepath::Diagnostic;

/// Write every diagnostic of `file` with the source line it points at, then a summary line.
pub fn render_diagnostics(
    w: &mut dyn Write,
    file: &str,
    text: &str,
    ds: &[Diagnostic],
) -> io::Result<()> {
    // Line breaks as YAML counts them: `\r\n`, `\r` or `\n`.
    let normalized = text.replace("\r\n", "\n").replace('\r', "\n");
    let lines: Vec<&str> = normalized.split('\n').collect();
    for d in ds {
        let place = match d.location() {
            Some(l) => format!("{file}:{}:{}", l.line, l.col),
            None => file.to_string(),
        };
        let path = if d.path().is_empty() {
            String::new()
        } else {
            format!("{}: ", d.path())
        };
        writeln!(w, "error: {place}: {path}{}", d.message())?;
        if let Some(l) = d.location() {
            if let Some(src) = lines.get(l.line.wrapping_sub(1)) {
                let num = l.line.to_string();
                writeln!(w, "  {num} | {src}")?;
                let caret_pad: String = src
                    .chars()
                    .take(l.col.saturating_sub(1))
                    .map(|c| if c == '\t' { '\t' } else { ' ' })
                    .collect();
                writeln!(w, "  {} | {caret_pad}^", " ".repeat(num.len()))?;
            }
        }
        if let Some(h) = d.hint() {
            writeln!(w, "  fix: {h}")?;
        }
    }
    let n = ds.len();
    writeln!(
        w,
        "{n} problem{} in {file}; nothing was computed",
        if n == 1 { "" } else { "s" }
    )
}
