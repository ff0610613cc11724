//! The header row of a curve file: which column is capacity, which is voltage, and their units.

use super::FitError;
use crate::error::Diagnostic;

/// A column of the CSV file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Column {
    Capacity,
    Voltage,
}

impl Column {
    fn word(self) -> &'static str {
        match self {
            Column::Capacity => "capacity",
            Column::Voltage => "voltage",
        }
    }

    /// Units accepted and their factor to SI (coulombs, volts).
    fn units(self) -> &'static [(&'static str, f64)] {
        match self {
            Column::Capacity => &[("Ah", 3600.0), ("mAh", 3.6)],
            Column::Voltage => &[("V", 1.0), ("mV", 1e-3)],
        }
    }

    fn other(self) -> Self {
        match self {
            Column::Capacity => Column::Voltage,
            Column::Voltage => Column::Capacity,
        }
    }
}

/// The header to suggest in messages.
pub(super) const HEADER_EXAMPLE: &str = "`capacity [mAh], voltage [V]`";

/// The fields of a row with the 1-based column (in characters) where each starts.
pub(super) fn split(row: &str, sep: char) -> Vec<(usize, &str)> {
    let mut out = Vec::new();
    split_into(row, sep, &mut out);
    out
}

/// [`split`] into `out` (cleared by the caller), so that a reader of many rows reuses one
/// buffer. Shared by the discharge-curve and the capture readers.
pub(crate) fn split_into<'a>(row: &'a str, sep: char, out: &mut Vec<(usize, &'a str)>) {
    // Columns in characters; most rows are ASCII, where bytes are characters.
    let ascii = row.is_ascii();
    let mut col = 1;
    for field in row.split(sep) {
        let lead = field.len() - field.trim_start().len();
        if ascii {
            out.push((col + lead, field));
            col += field.len() + 1;
        } else {
            out.push((col + field[..lead].chars().count(), field));
            col += field.chars().count() + 1;
        }
    }
}

/// The rows of a CSV text that hold data or a header, with their 1-based line numbers: a
/// byte-order mark is read past, blank lines and `#` comments are left out.
pub(crate) fn data_lines(text: &str) -> impl Iterator<Item = (usize, &str)> {
    text.strip_prefix('\u{feff}')
        .unwrap_or(text)
        .lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l))
        .filter(|(_, l)| !l.trim().is_empty() && !l.trim_start().starts_with('#'))
}

/// One header cell `name [unit]` (quotes and spaces around it ignored) as its name and unit;
/// else the message and the fix, in the words of both readers, `example` being the header
/// the reader suggests. `column` is the cell's 1-based index.
pub(crate) fn named_unit<'a>(
    field: &'a str,
    column: usize,
    example: &str,
) -> Result<(&'a str, &'a str), (String, String)> {
    let cell = field.trim().trim_matches('"').trim();
    let Some((word, rest)) = cell.split_once('[') else {
        let what = if cell.is_empty() {
            "is empty"
        } else {
            "has no unit in brackets"
        };
        return Err((
            format!("the header's column {column} `{cell}` {what}"),
            format!("name each column with its unit in square brackets: {example}"),
        ));
    };
    let Some(unit) = rest.strip_suffix(']').map(str::trim) else {
        return Err((
            format!("the header's column {column} `{cell}` does not end with `]`"),
            format!("write the header as {example}"),
        ));
    };
    Ok((word.trim(), unit))
}

/// Reads the header: the index and SI scale of the capacity and of the voltage column.
pub(super) fn header_columns(
    header: &str,
    line: usize,
    sep: char,
    name: &str,
) -> Result<(usize, f64, usize, f64), FitError> {
    let mut found: [Option<(usize, f64)>; 2] = [None, None];
    if header.matches('[').count() > 1 && split(header, sep).len() == 1 {
        return Err(FitError::new(
            name,
            "the header is one column: its names are not separated by commas",
        )
        .with_hint(format!("write the header as {HEADER_EXAMPLE}"))
        .at_line_col(line, 1));
    }
    for (i, (col, field)) in split(header, sep).into_iter().enumerate() {
        let cell = field.trim().trim_matches('"').trim();
        let err = |msg: String, hint: String| {
            Err(FitError::new(name, msg)
                .with_hint(hint)
                .at_line_col(line, col))
        };
        let (word, unit) = match named_unit(field, i + 1, HEADER_EXAMPLE) {
            Ok(parts) => parts,
            Err((msg, hint)) => return err(msg, hint),
        };
        let word = word.to_lowercase();
        let kind = match word.as_str() {
            "capacity" => Column::Capacity,
            "voltage" => Column::Voltage,
            _ => {
                return err(
                    format!(
                        "the header's column {} `{cell}` is neither capacity nor voltage; a curve file has exactly these two columns",
                        i + 1
                    ),
                    format!("keep exactly two columns, {HEADER_EXAMPLE}, and remove any other"),
                );
            }
        };
        let Some(&(_, scale)) = kind.units().iter().find(|(u, _)| *u == unit) else {
            return err(unknown_unit(kind, unit), unit_hint(kind));
        };
        let slot = &mut found[kind as usize];
        if let Some((first, _)) = slot {
            return err(
                format!(
                    "the header names {} twice, in columns {} and {}",
                    kind.word(),
                    *first + 1,
                    i + 1
                ),
                format!("keep exactly two columns, {HEADER_EXAMPLE}"),
            );
        }
        *slot = Some((i, scale));
    }
    match found {
        [Some((c, cs)), Some((v, vs))] => Ok((c, cs, v, vs)),
        _ => {
            let missing = if found[0].is_none() {
                "capacity"
            } else {
                "voltage"
            };
            Err(
                FitError::new(name, format!("the header has no {missing} column"))
                    .with_hint(format!("write the header as {HEADER_EXAMPLE}"))
                    .at_line_col(line, 1),
            )
        }
    }
}

fn unknown_unit(kind: Column, unit: &str) -> String {
    if kind.other().units().iter().any(|(u, _)| *u == unit) {
        format!(
            "`{unit}` is a unit of {}, not of {}",
            kind.other().word(),
            kind.word()
        )
    } else if let Some((u, _)) = kind
        .units()
        .iter()
        .find(|(u, _)| u.eq_ignore_ascii_case(unit))
    {
        format!(
            "unknown unit `{unit}` for {}: did you mean `{u}`?",
            kind.word()
        )
    } else {
        format!("unknown unit `{unit}` for {}", kind.word())
    }
}

fn unit_hint(kind: Column) -> String {
    let names: Vec<String> = kind.units().iter().map(|(u, _)| format!("`{u}`")).collect();
    format!(
        "{} takes {} (prefixes are case-sensitive)",
        kind.word(),
        names.join(" or ")
    )
}

/// A data row of a CSV file (`name`) with `found` values where its header names `columns`.
pub(crate) fn width_error(found: usize, columns: usize, line: usize, name: &str) -> Diagnostic {
    Diagnostic::new(
        name,
        format!(
            "line {line} has {found} {}; the header names {columns} columns",
            if found == 1 { "value" } else { "values" },
        ),
    )
    .with_hint("write one value per column on every row, separated like the header")
    .at_line_col(line, 1)
}

/// A header (on `line` of `name`) without a `what` column; `example` is a good header.
pub(crate) fn missing_column(name: &str, what: &str, example: &str, line: usize) -> Diagnostic {
    Diagnostic::new(name, format!("the header has no {what} column"))
        .with_hint(format!("write the header as {example}"))
        .at_line_col(line, 1)
}

/// The words for a header that names `what` in two columns (0-based `first` and `second`), and
/// the fix, given a good header `example`.
pub(crate) fn named_twice(
    what: &str,
    first: usize,
    second: usize,
    example: &str,
) -> (String, String) {
    (
        format!(
            "the header names {what} twice, in columns {} and {}",
            first + 1,
            second + 1
        ),
        format!("keep one of each: {example}"),
    )
}
