//! Reading a recorded ambient: CSV text of time and temperature, units in the header
//! (`ambient: { file: temps.csv }` in a design).

use std::path::Path;

use super::Recorded;
use crate::capture::read_capped;
use crate::error::Diagnostic;
use crate::fit::header::{
    data_lines, missing_column, named_twice, named_unit, split_into, width_error,
};

/// Largest ambient file, bytes (4 MiB: twenty years of hourly rows fit in well under it).
pub const MAX_AMBIENT_BYTES: usize = 4 * 1024 * 1024;

/// Most rows of an ambient file (twenty years of hourly rows, 175,320, fit).
pub const MAX_AMBIENT_ROWS: usize = 200_000;

/// Most bad rows reported from one file: the rest are counted, not listed.
const MAX_REPORTED: usize = 10;

/// Lowest temperature a row may give, °C: absolute zero (excluded).
const T_MIN_C: f64 = -273.15;
/// Highest temperature a row may give, °C (the bound every ambient of a run has).
const T_MAX_C: f64 = 200.0;

/// The header to suggest in messages.
const HEADER_EXAMPLE: &str = "`time [h], temperature [°C]`";

/// A column of an ambient file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Column {
    Time,
    Temperature,
}

impl Column {
    fn word(self) -> &'static str {
        match self {
            Column::Time => "time",
            Column::Temperature => "temperature",
        }
    }

    /// Units accepted, their factor to SI (s, °C) and their offset (K to °C).
    fn units(self) -> &'static [(&'static str, f64, f64)] {
        match self {
            Column::Time => &[
                ("s", 1.0, 0.0),
                ("min", 60.0, 0.0),
                ("h", 3600.0, 0.0),
                ("d", 86_400.0, 0.0),
            ],
            Column::Temperature => &[
                ("°C", 1.0, 0.0),
                ("℃", 1.0, 0.0),
                ("degC", 1.0, 0.0),
                ("K", 1.0, -273.15),
            ],
        }
    }
}

/// Where each column is: index, SI scale and offset.
#[derive(Debug, Clone, Copy)]
struct Layout {
    time: (usize, f64, f64),
    temperature: (usize, f64, f64),
    columns: usize,
}

fn header(row: &str, line: usize, sep: char, name: &str) -> Result<Layout, Diagnostic> {
    let mut fields = Vec::new();
    split_into(row, sep, &mut fields);
    let mut found: [Option<(usize, f64, f64)>; 2] = [None, None];
    for (i, (col, field)) in fields.iter().enumerate() {
        let cell = field.trim().trim_matches('"').trim();
        let err = |msg: String, hint: String| {
            Err(Diagnostic::new(name, msg)
                .with_hint(hint)
                .at_line_col(line, *col))
        };
        let (word, unit) = match named_unit(field, i + 1, HEADER_EXAMPLE) {
            Ok(parts) => parts,
            Err((msg, hint)) => return err(msg, hint),
        };
        let kind = match word.to_lowercase().as_str() {
            "time" | "t" => Column::Time,
            "temperature" | "temp" | "ambient" => Column::Temperature,
            _ => {
                return err(
                    format!(
                        "the header's column {} `{cell}` is not time or temperature",
                        i + 1
                    ),
                    format!("an ambient file has the columns {HEADER_EXAMPLE}; remove any other"),
                );
            }
        };
        let Some(&(_, scale, offset)) = kind.units().iter().find(|(u, _, _)| *u == unit) else {
            let names: Vec<String> = kind
                .units()
                .iter()
                .map(|(u, _, _)| format!("`{u}`"))
                .collect();
            return err(
                format!("unknown unit `{unit}` for {}", kind.word()),
                format!("{} takes {}", kind.word(), names.join(", ")),
            );
        };
        let slot = &mut found[kind as usize];
        if let Some((first, _, _)) = slot {
            let (what, fix) = named_twice(kind.word(), *first, i, HEADER_EXAMPLE);
            return err(what, fix);
        }
        *slot = Some((i, scale, offset));
    }
    let missing = |what: &str| missing_column(name, what, HEADER_EXAMPLE, line);
    Ok(Layout {
        time: found[0].ok_or_else(|| missing("time"))?,
        temperature: found[1].ok_or_else(|| missing("temperature"))?,
        columns: fields.len(),
    })
}

/// One number of a row, or the message at its place.
fn number(
    (col, field): (usize, &str),
    what: &str,
    line: usize,
    name: &str,
) -> Result<f64, Diagnostic> {
    let t = field.trim().trim_matches('"').trim();
    let bad = |msg: String, hint: &str| {
        Diagnostic::new(name, format!("line {line}, column {col}: {msg}"))
            .with_hint(hint)
            .at_line_col(line, col)
    };
    if t.is_empty() {
        return Err(bad(
            format!("the {what} is missing"),
            "fill in the value, or remove the row (the ambient is a straight line between the rows around it)",
        ));
    }
    match t.parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x),
        Ok(_) => Err(bad(
            format!("the {what} `{t}` is not a finite number"),
            "fill in the value, or remove the row",
        )),
        Err(_) => Err(bad(
            format!("the {what} `{t}` is not a number"),
            "write a plain decimal number such as `21.5`; the unit belongs in the header only",
        )),
    }
}

/// Read a recorded ambient from CSV text; `name` (the file name) labels its errors.
///
/// The first line that is neither blank nor a `#` comment is the header: `time` and
/// `temperature`, each with its unit in brackets (`time [h]`, `temperature [°C]`; time in `s`,
/// `min`, `h` or `d`, temperature in `°C`, `degC` or `K`), in either order, separated by commas
/// (or semicolons or tabs, as the header shows). Each further line is one row; the run starts at
/// the first row's time.
///
/// # Errors
///
/// Every bad row (up to ten, the rest counted), each at its line and column with a fix: a
/// missing value or one that is not a finite number, a time not after the row before, a
/// temperature at or below absolute zero or above 200 °C. Before any row: text longer than
/// [`MAX_AMBIENT_BYTES`], no header, an unknown column or unit. After: more than
/// [`MAX_AMBIENT_ROWS`] rows, or fewer than two.
///
/// # Examples
///
/// ```
/// let text = "time [h], temperature [°C]\n0, 10\n12, 30\n24, 10\n";
/// let (mean, r) = joulepath::model::read_ambient(text, "t.csv", true).unwrap();
/// assert!((mean - 20.0).abs() < 1e-12);
/// assert!((mean + r.at(6.0 * 3600.0) - 20.0).abs() < 1e-12);
/// let e = joulepath::model::read_ambient("time [h], temperature [°C]\n0, 10\n0, 11\n", "t.csv", false)
///     .unwrap_err();
/// assert!(e[0].message().contains("not after"));
/// ```
pub fn read_ambient(
    text: &str,
    name: &str,
    repeat: bool,
) -> Result<(f64, Recorded), Vec<Diagnostic>> {
    if text.len() > MAX_AMBIENT_BYTES {
        return Err(vec![too_big(name, text.len() as u64)]);
    }
    let mut lines = data_lines(text);
    let Some((header_line, head)) = lines.next() else {
        return Err(vec![Diagnostic::new(name, "the file is empty").with_hint(
            format!("write a header row such as {HEADER_EXAMPLE}, then one row per time"),
        )]);
    };
    let sep = [',', ';', '\t']
        .into_iter()
        .find(|c| head.contains(*c))
        .unwrap_or(',');
    let lay = header(head, header_line, sep, name).map_err(|d| vec![d])?;
    let (times, temps) = read_rows(lines, sep, &lay, name)?;
    if times.len() < 2 {
        return Err(vec![
            Diagnostic::new(
                name,
                format!(
                    "the file has {} row{}; an ambient over time needs at least two",
                    times.len(),
                    if times.len() == 1 { "" } else { "s" }
                ),
            )
            .with_hint("add one row per time (time, temperature), or give the ambient as one temperature such as `ambient: 20 °C`"),
        ]);
    }
    Ok(Recorded::new(&times, &temps, repeat))
}

/// The times (s) and temperatures (°C) of the data rows `lines` (after the header), at most
/// `MAX_AMBIENT_ROWS`; every bad row reported (the first `MAX_REPORTED`, then their count).
fn read_rows<'a>(
    lines: impl Iterator<Item = (usize, &'a str)>,
    sep: char,
    lay: &Layout,
    name: &str,
) -> Result<(Vec<f64>, Vec<f64>), Vec<Diagnostic>> {
    let mut times: Vec<f64> = Vec::new();
    let mut temps: Vec<f64> = Vec::new();
    let mut bad: Vec<Diagnostic> = Vec::new();
    let mut bad_rows = 0_usize;
    let mut fields: Vec<(usize, &str)> = Vec::with_capacity(lay.columns);
    let mut rows = 0_usize;
    for (line, row) in lines {
        rows += 1;
        if rows > MAX_AMBIENT_ROWS {
            bad.push(
                Diagnostic::new(
                    name,
                    format!("line {line}: the file has more than {MAX_AMBIENT_ROWS} rows"),
                )
                .with_hint("give a row every hour at most, or cut the file to the part the run needs (`repeat: true` starts it again)")
                .at_line_col(line, 1),
            );
            break;
        }
        match read_row(
            row,
            line,
            sep,
            lay,
            name,
            times.last().copied(),
            &mut fields,
        ) {
            Ok((t, v)) => {
                times.push(t);
                temps.push(v);
            }
            Err(d) => {
                bad_rows += 1;
                if bad.len() < MAX_REPORTED {
                    bad.push(d);
                }
            }
        }
    }
    if bad_rows > bad.len() {
        let more = bad_rows - bad.len();
        bad.push(
            Diagnostic::new(name, format!("{more} more bad rows are not listed"))
                .with_hint("fix the rows above, then check the file again"),
        );
    }
    if bad.is_empty() {
        Ok((times, temps))
    } else {
        Err(bad)
    }
}

/// One row: its time (s) and temperature (°C), checked against the time of the row before.
fn read_row<'a>(
    row: &'a str,
    line: usize,
    sep: char,
    lay: &Layout,
    name: &str,
    before: Option<f64>,
    fields: &mut Vec<(usize, &'a str)>,
) -> Result<(f64, f64), Diagnostic> {
    fields.clear();
    split_into(row, sep, fields);
    if fields.len() != lay.columns {
        return Err(width_error(fields.len(), lay.columns, line, name));
    }
    let (tc, ts, _) = lay.time;
    let (vc, vs, vo) = lay.temperature;
    let t = number(fields[tc], "time", line, name)? * ts;
    let v = number(fields[vc], "temperature", line, name)? * vs + vo;
    if let Some(prev) = before {
        if t <= prev {
            let (col, txt) = fields[tc];
            return Err(Diagnostic::new(
                name,
                format!(
                    "line {line}, column {col}: the time `{}` is not after the row before; time must increase from row to row",
                    txt.trim()
                ),
            )
            .with_hint("sort the rows by time and remove repeated times")
            .at_line_col(line, col));
        }
    }
    if v <= T_MIN_C || v > T_MAX_C {
        let (col, txt) = fields[vc];
        return Err(Diagnostic::new(
            name,
            format!(
                "line {line}, column {col}: the temperature `{}` is outside the physical range (above -273.15 °C, at most 200 °C)",
                txt.trim()
            ),
        )
        .with_hint("check the value and the header's unit (`°C` or `K`)")
        .at_line_col(line, col));
    }
    Ok((t, v))
}

fn too_big(name: &str, len: u64) -> Diagnostic {
    Diagnostic::new(
        name,
        format!(
            "the ambient file is {len} bytes, more than the {MAX_AMBIENT_BYTES} bytes (4 MiB) it may have"
        ),
    )
    .with_hint("give a row every hour at most, or cut the file to the part the run needs (`repeat: true` starts it again)")
    .at_line_col(1, 1)
}

/// Read a recorded ambient file: a regular file of at most [`MAX_AMBIENT_BYTES`], UTF-8 text,
/// read as [`read_ambient`] does; errors are labelled with the path as given.
///
/// # Errors
///
/// A file that cannot be opened or is not a regular file, one over the size limit, text that is
/// not UTF-8, and every error of [`read_ambient`].
pub fn read_ambient_file(path: &Path, repeat: bool) -> Result<(f64, Recorded), Vec<Diagnostic>> {
    let name = path.display().to_string();
    let text = read_capped(path, MAX_AMBIENT_BYTES, "ambient file", &|len| {
        too_big(&name, len)
    })
    .map_err(|d| vec![d])?;
    read_ambient(&text, &name, repeat)
}
