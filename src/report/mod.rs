//! Reports: the tree outline, budgets as tables, JSON and CSV. Every writer takes any
//! `std::io::Write`; the library itself never prints.

pub mod budget;
pub mod cells;
pub mod compare;
pub mod heat;
pub mod html;
pub mod json;
pub mod outline;
pub mod plot;
pub mod rows;
pub mod runtime;
pub mod text;

/// Output format of a report.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// Aligned text tables with engineering units.
    Table,
    /// JSON in SI units (DESIGN section 7).
    Json,
    /// CSV in SI units.
    Csv,
}

/// The caution shown with results (DESIGN section 9).
pub const CAUTION: &str = "Caution: these are estimates from models and datasheet values; confirm them on the real \
hardware with measurements. Lithium cells can overheat, vent or ignite when shorted, \
over-discharged, overcharged or loaded beyond their limits: respect the cell maker's limits, \
the applicable safety standards (for example IEC 62133-2 for portable lithium cells) and local \
codes. Junction temperatures from theta_ja are estimates for a standard test board.";

/// Wrap `text` at `width` columns, never separating a number from its unit.
pub fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut words: Vec<String> = Vec::new();
    for word in text.split_whitespace() {
        let is_unit =
            word.chars().count() <= 4 && !word.chars().any(|c| c.is_ascii_digit() || c == '`');
        match words.last_mut() {
            Some(prev) if is_unit && prev.ends_with(|c: char| c.is_ascii_digit()) => {
                prev.push(' ');
                prev.push_str(word);
            }
            _ => words.push(word.to_string()),
        }
    }
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in &words {
        if !line.is_empty() && line.chars().count() + 1 + word.chars().count() > width {
            lines.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}
