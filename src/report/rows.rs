//! CSV tables: each table is one row type serialised with serde through the `csv` crate, so a
//! field holding a comma, a quote or a line break is quoted and never shifts the columns.

use std::io::{self, Write};

use serde::Serialize;

/// A row of a CSV table: its column names, in the order of the struct's fields.
pub trait CsvRow: Serialize {
    /// The header, the same names as the serialised fields (written even for an empty table).
    const HEADER: &'static [&'static str];
}

/// Write `rows` as a CSV table with its header; `None` fields are empty cells.
///
/// # Examples
///
/// ```
/// use joulepath::report::rows::{CsvRow, write_rows};
/// #[derive(serde::Serialize)]
/// struct Row { id: String, loss_w: Option<f64> }
/// impl CsvRow for Row { const HEADER: &'static [&'static str] = &["id", "loss_w"]; }
/// let mut out = Vec::new();
/// write_rows(&mut out, &[Row { id: "a,b".into(), loss_w: None }]).unwrap();
/// assert_eq!(String::from_utf8(out).unwrap(), "id,loss_w\n\"a,b\",\n");
/// ```
pub fn write_rows<T: CsvRow>(w: &mut dyn Write, rows: &[T]) -> io::Result<()> {
    debug_assert!(
        rows.first()
            .and_then(header_of)
            .is_none_or(|h| h == T::HEADER.join(",")),
        "CsvRow::HEADER differs from the serialised field names"
    );
    let mut out = csv::WriterBuilder::new()
        .has_headers(false)
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(w);
    out.write_record(T::HEADER).map_err(into_io)?;
    for r in rows {
        out.serialize(r).map_err(into_io)?;
    }
    out.flush()
}

/// The header the serialiser itself would write for `row` (none for a row it cannot name the
/// columns of, such as a rank before a row struct: the serialiser writes such rows, but not
/// their header).
fn header_of<T: Serialize>(row: &T) -> Option<String> {
    let mut out = csv::Writer::from_writer(Vec::new());
    out.serialize(row).ok()?;
    let bytes = out.into_inner().ok()?;
    Some(
        String::from_utf8_lossy(&bytes)
            .lines()
            .next()
            .unwrap_or_default()
            .to_string(),
    )
}

fn into_io(e: csv::Error) -> io::Error {
    match e.into_kind() {
        csv::ErrorKind::Io(e) => e,
        other => io::Error::other(format!("{other:?}")),
    }
}
