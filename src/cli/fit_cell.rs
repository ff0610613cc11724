//! `fit-cell`: a cell fitted from datasheet discharge curves, as a `cells:` block, JSON or CSV.

use std::io::Write;
use std::path::PathBuf;

use joulepath::error::Diagnostic;
use joulepath::report::Format;

use super::args::{FitCellArgs, parse_with};
use super::run::{Failure, emit, format, io_fail, read};

/// `joulepath fit-cell`: the cell fitted from the `--curve` files.
pub(super) fn fit_cell_command(a: &FitCellArgs) -> Result<(), Failure> {
    let mut buf = Vec::new();
    let (rated, cutoff) = (a.rated_current.as_deref(), a.cutoff.as_deref());
    let name = a.name.as_deref();
    fit_cell(&a.curves, name, rated, cutoff, format(a.format), &mut buf)?;
    emit(&buf, a.output.as_deref())
}

/// The fitted cell of `curves` (each `CURRENT:FILE`) into `buf` in `fmt`.
fn fit_cell(
    curves: &[String],
    name: Option<&str>,
    rated: Option<&str>,
    cutoff: Option<&str>,
    fmt: Format,
    buf: &mut Vec<u8>,
) -> Result<(), Failure> {
    use joulepath::units::Dim;
    let mut read_curves = Vec::new();
    for c in curves {
        let Some((current, file)) = c.split_once(':') else {
            return Err(Failure::Usage(format!(
                "`--curve {c}` is not CURRENT:FILE (for example `--curve \"200 mA:low.csv\"`)"
            )));
        };
        let current_a = parse_with(current.trim(), Dim::Current)
            .map_err(|e| Failure::Usage(format!("`--curve {c}`: {e}")))?;
        let path = PathBuf::from(file.trim());
        let text = read(&path)?;
        let curve = joulepath::fit::read_curve(&text, current_a, &path.display().to_string())
            .map_err(|e| Failure::Invalid {
                file: path.clone(),
                text: text.clone(),
                diagnostics: vec![e],
            })?;
        read_curves.push(curve);
    }
    let mut opts = joulepath::fit::FitOptions::default();
    if let Some(r) = rated {
        opts.rated_current_a = Some(parse_with(r, Dim::Current).map_err(Failure::Usage)?);
    }
    if let Some(v) = cutoff {
        opts.cutoff_v = Some(parse_with(v, Dim::Voltage).map_err(Failure::Usage)?);
    }
    let fit = joulepath::fit::fit(&read_curves, &opts)
        .map_err(|e| Failure::Input(render_fit_error(&e)))?;
    let name = name.unwrap_or("fitted-cell");
    match fmt {
        Format::Json => {
            serde_json::to_writer_pretty(&mut *buf, &joulepath::fit::cell_json(&fit, name))
                .map_err(|e| Failure::Input(e.to_string()))?;
            writeln!(buf).map_err(io_fail)
        }
        Format::Csv => joulepath::fit::write_cell_csv(buf, &fit, name).map_err(io_fail),
        Format::Table => {
            write!(buf, "{}", joulepath::fit::cell_yaml(&fit, name)).map_err(io_fail)?;
            writeln!(buf).map_err(io_fail)?;
            for line in joulepath::fit::report(&fit).to_string().lines() {
                writeln!(buf, "# {line}").map_err(io_fail)?;
            }
            Ok(())
        }
    }
}

fn render_fit_error(e: &joulepath::fit::FitError) -> String {
    let d: Diagnostic = e.clone();
    let hint = d.hint().map(|h| format!(" ({h})")).unwrap_or_default();
    if d.path().is_empty() {
        format!("{}{hint}", d.message())
    } else {
        format!("{}: {}{hint}", d.path(), d.message())
    }
}
