//! Plain-text tables with aligned columns.

use std::io::{self, Write};

/// How a column lines up.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Align {
    /// Text columns.
    Left,
    /// Number columns.
    Right,
}

/// A table: a header row and rows of cells, written with aligned columns.
///
/// # Examples
///
/// ```
/// use joulepath::report::text::{Align, TextTable};
/// let mut t = TextTable::new(&[("stage", Align::Left), ("loss", Align::Right)]);
/// t.row(vec!["buck".into(), "24.5 mW".into()]);
/// let mut out = Vec::new();
/// t.write(&mut out, "").unwrap();
/// assert_eq!(String::from_utf8(out).unwrap(), "stage     loss\nbuck   24.5 mW\n");
/// ```
#[derive(Debug, Clone)]
pub struct TextTable {
    header: Vec<String>,
    align: Vec<Align>,
    rows: Vec<Vec<String>>,
}

impl TextTable {
    /// A table with these column titles and alignments.
    pub fn new(columns: &[(&str, Align)]) -> Self {
        Self {
            header: columns.iter().map(|c| c.0.to_string()).collect(),
            align: columns.iter().map(|c| c.1).collect(),
            rows: Vec::new(),
        }
    }

    /// Add a row (missing cells are blank).
    pub fn row(&mut self, cells: Vec<String>) {
        self.rows.push(cells);
    }

    /// Whether there are no rows.
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// Write the table, each line starting with `indent`.
    pub fn write(&self, w: &mut dyn Write, indent: &str) -> io::Result<()> {
        let n = self.header.len();
        let mut width = vec![0usize; n];
        for r in std::iter::once(&self.header).chain(&self.rows) {
            for (i, c) in r.iter().enumerate().take(n) {
                width[i] = width[i].max(c.chars().count());
            }
        }
        for r in std::iter::once(&self.header).chain(&self.rows) {
            let mut line = String::from(indent);
            for (i, w) in width.iter().enumerate() {
                let cell = r.get(i).map_or("", String::as_str);
                let pad = w - cell.chars().count();
                if i > 0 {
                    line.push_str("  ");
                }
                match self.align[i] {
                    Align::Left => {
                        line.push_str(cell);
                        if i + 1 < n {
                            line.push_str(&" ".repeat(pad));
                        }
                    }
                    Align::Right => {
                        line.push_str(&" ".repeat(pad));
                        line.push_str(cell);
                    }
                }
            }
            writeln!(w, "{}", line.trim_end())?;
        }
        Ok(())
    }
}
