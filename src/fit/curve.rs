//! One discharge curve at constant current, and reading it from CSV text.

use super::FitError;
use super::header::{HEADER_EXAMPLE, data_lines, header_columns, split};

/// Fewest rows a curve may have.
const MIN_POINTS: usize = 5;

/// A discharge curve: terminal voltage against delivered charge at one constant current.
///
/// Charges are in coulombs (1 mAh = 3.6 C), voltages in volts, strictly increasing in charge.
#[derive(Debug, Clone, PartialEq)]
pub struct Curve {
    name: String,
    current_a: f64,
    points: Vec<(f64, f64)>,
}

impl Curve {
    /// A curve from `(charge C, voltage V)` points in order of increasing charge.
    ///
    /// # Errors
    ///
    /// A current that is not above zero, fewer than 5 points, a non-finite or negative charge, a
    /// voltage not above zero, or charges that do not increase from row to row.
    ///
    /// # Examples
    ///
    /// ```
    /// use joulepath::fit::Curve;
    /// let pts: Vec<(f64, f64)> = (0..6).map(|n| (f64::from(n) * 360.0, 4.0 - 0.1 * f64::from(n))).collect();
    /// let c = Curve::new("bench", 0.5, pts).unwrap();
    /// assert!((c.capacity_c() - 1800.0).abs() < 1e-9);
    /// assert!(Curve::new("bench", 0.5, vec![(0.0, 4.0)]).is_err());
    /// ```
    pub fn new(
        name: impl Into<String>,
        current_a: f64,
        points: Vec<(f64, f64)>,
    ) -> Result<Self, FitError> {
        let name = name.into();
        check_current(&name, current_a)?;
        for (i, &(q, v)) in points.iter().enumerate() {
            if !(q.is_finite() && v.is_finite()) || q < 0.0 || v <= 0.0 {
                return Err(FitError::new(
                    &name,
                    format!(
                        "point {} ({q} C, {v} V) is not a finite charge >= 0 and voltage > 0",
                        i + 1
                    ),
                ));
            }
            if i > 0 && q <= points[i - 1].0 {
                return Err(FitError::new(
                    &name,
                    format!(
                        "the capacity does not increase at point {}: {q} C after {} C",
                        i + 1,
                        points[i - 1].0
                    ),
                )
                .with_hint("give the points in order of increasing delivered capacity"));
            }
        }
        check_count(&name, points.len())?;
        Ok(Self {
            name,
            current_a,
            points,
        })
    }

    /// The curve's name (its file name when read from CSV).
    pub fn name(&self) -> &str {
        &self.name
    }

    /// The constant discharge current, A.
    pub fn current_a(&self) -> f64 {
        self.current_a
    }

    /// The `(charge C, voltage V)` points, charge increasing.
    pub fn points(&self) -> &[(f64, f64)] {
        &self.points
    }

    /// The delivered capacity: the charge of the last point, C.
    pub fn capacity_c(&self) -> f64 {
        self.points[self.points.len() - 1].0
    }

    /// The charge of the first point, C (usually 0).
    pub fn first_c(&self) -> f64 {
        self.points[0].0
    }

    /// The voltage of the last point, V.
    pub fn final_v(&self) -> f64 {
        self.points[self.points.len() - 1].1
    }

    /// The voltage at delivered charge `q`, linear between points and extended along the first
    /// or last segment beyond the ends.
    pub fn voltage_at(&self, q: f64) -> f64 {
        let p = &self.points;
        let i = p.partition_point(|pt| pt.0 <= q).clamp(1, p.len() - 1);
        let ((q0, v0), (q1, v1)) = (p[i - 1], p[i]);
        v0 + (v1 - v0) * (q - q0) / (q1 - q0)
    }
}

/// The rise of voltage from one row to the next still read as digitizing noise, relative to the
/// row before (common practice, no source); more is a typing error or rows out of order.
const RISE_TOLERANCE: f64 = 0.005;

/// The greatest discharge current of a curve, A (the physical range of a current in a design).
const MAX_CURRENT_A: f64 = 1e4;

fn check_current(name: &str, current_a: f64) -> Result<(), FitError> {
    if current_a.is_finite() && current_a > MAX_CURRENT_A {
        Err(FitError::new(
            name,
            format!("the discharge current {current_a} A is above 10 kA, the most accepted"),
        )
        .with_hint("check the number and its unit prefix, such as `200 mA`"))
    } else if current_a.is_finite() && current_a > 0.0 {
        Ok(())
    } else {
        Err(FitError::new(
            name,
            format!("the discharge current {current_a} A is not above zero"),
        )
        .with_hint("give the constant current of the curve, such as `200 mA`"))
    }
}

fn check_count(name: &str, n: usize) -> Result<(), FitError> {
    if n >= MIN_POINTS {
        return Ok(());
    }
    Err(FitError::new(
        name,
        format!("only {n} data rows; a curve needs at least {MIN_POINTS} to be fitted"),
    )
    .with_hint("digitize more points along the curve, including its start and its end"))
}

/// Reads a discharge curve at `current_a` amperes from CSV text; `name` (the file name) labels
/// the curve and its errors.
///
/// The first line that is neither blank nor a `#` comment is the header: two columns, each a
/// quantity and its unit in brackets, in either order: `capacity [Ah]` or `capacity [mAh]`, and
/// `voltage [V]` or `voltage [mV]`. Columns are separated by commas (or semicolons or tabs, as
/// the header shows). Each further line is one point: delivered capacity, terminal voltage.
///
/// # Errors
///
/// With the line (and column) at fault and a fix: an empty file, a header column without a unit,
/// an unknown unit or column, a missing, repeated or extra column, a row with the wrong number of
/// values, a value that is not a number, a negative capacity or a voltage not above zero, a
/// capacity that does not increase from row to row, a voltage that rises from one row to the next
/// by more than 0.5 %, fewer than 5 rows, a current not above zero or above 10 kA.
///
/// # Examples
///
/// ```
/// let text = "voltage [mV], capacity [Ah]\n4100, 0\n3900, 0.1\n3800, 0.2\n3700, 0.3\n3300, 0.4\n";
/// let c = joulepath::fit::read_curve(text, 0.2, "low.csv").unwrap();
/// assert!((c.capacity_c() - 1440.0).abs() < 1e-9);
/// assert!((c.final_v() - 3.3).abs() < 1e-12);
/// ```
pub fn read_curve(text: &str, current_a: f64, name: &str) -> Result<Curve, FitError> {
    check_current(name, current_a)?;
    let mut lines = data_lines(text);
    let Some((header_line, header)) = lines.next() else {
        return Err(FitError::new(name, "the file is empty").with_hint(format!(
            "write a header row such as {HEADER_EXAMPLE}, then one row per point"
        )));
    };
    let sep = [',', ';', '\t']
        .into_iter()
        .find(|c| header.contains(*c))
        .unwrap_or(',');
    let cols = header_columns(header, header_line, sep, name)?;
    let mut points: Vec<(f64, f64)> = Vec::new();
    let mut previous: Option<(usize, &str)> = None;
    for (line, row) in lines {
        let fields = split(row, sep);
        let (q, v, cap_text) = read_point(&fields, cols, line, name)?;
        if let (Some(&last), Some(prev)) = (points.last(), previous) {
            check_order((q, v), last, prev, (&fields, cols), line, name)?;
        }
        previous = Some((line, cap_text));
        points.push((q, v));
    }
    if points.is_empty() {
        return Err(
            FitError::new(name, "the file has a header but no data rows")
                .with_hint("add one row per point: delivered capacity, terminal voltage"),
        );
    }
    check_count(name, points.len())?;
    Ok(Curve {
        name: name.to_string(),
        current_a,
        points,
    })
}

/// The columns of a curve file: capacity column and its scale to coulombs, voltage column and
/// its scale to volts.
type Columns = (usize, f64, usize, f64);

/// One point from the fields of row `line`: capacity, C, voltage, V, and the capacity as
/// written; a message at its place when the row has not two values, or a value is not a
/// number, the capacity is negative or out of range, or the voltage is not above zero.
fn read_point<'a>(
    fields: &[(usize, &'a str)],
    (cap_col, cap_scale, v_col, v_scale): Columns,
    line: usize,
    name: &str,
) -> Result<(f64, f64, &'a str), FitError> {
    if fields.len() != 2 {
        return Err(FitError::new(
            name,
            format!(
                "line {line} has {} {}; the header names 2 columns",
                fields.len(),
                if fields.len() == 1 { "value" } else { "values" }
            ),
        )
        .with_hint("write one capacity and one voltage per row, separated like the header")
        .at_line_col(line, 1));
    }
    let cap = number(fields[cap_col], line, name)?;
    let v = number(fields[v_col], line, name)?;
    let (cap_text, v_text) = (fields[cap_col].1.trim(), fields[v_col].1.trim());
    if cap < 0.0 {
        return Err(FitError::new(
            name,
            format!("line {line}: the capacity `{cap_text}` is negative"),
        )
        .with_hint("the capacity column is the charge delivered since the start, from 0")
        .at_line_col(line, fields[cap_col].0));
    }
    if v <= 0.0 {
        return Err(FitError::new(
            name,
            format!("line {line}: the voltage `{v_text}` is not above zero"),
        )
        .at_line_col(line, fields[v_col].0));
    }
    let q = cap * cap_scale;
    if !q.is_finite() {
        return Err(FitError::new(
            name,
            format!("line {line}: the capacity `{cap_text}` is out of range"),
        )
        .at_line_col(line, fields[cap_col].0));
    }
    Ok((q, v * v_scale, cap_text))
}

/// Point `(q, v)` of row `line` against the point `(q_prev, v_prev)` of the row before
/// (`prev_line`, its capacity written `prev_text`): the capacity must increase, and the voltage
/// must not rise by more than [`RISE_TOLERANCE`].
fn check_order(
    (q, v): (f64, f64),
    (q_prev, v_prev): (f64, f64),
    (prev_line, prev_text): (usize, &str),
    (fields, (cap_col, _, v_col, _)): (&[(usize, &str)], Columns),
    line: usize,
    name: &str,
) -> Result<(), FitError> {
    let (cap_text, v_text) = (fields[cap_col].1.trim(), fields[v_col].1.trim());
    if q <= q_prev {
        return Err(FitError::new(
            name,
            format!(
                "line {line}: the capacity `{cap_text}` is not above `{prev_text}` on line {prev_line}; the capacity must increase from row to row"
            ),
        )
        .with_hint("sort the rows by delivered capacity and remove repeated points")
        .at_line_col(line, fields[cap_col].0));
    }
    if v > v_prev * (1.0 + RISE_TOLERANCE) {
        return Err(FitError::new(
            name,
            format!(
                "line {line}: the voltage `{v_text}` is above the voltage of line {prev_line}; a discharge curve's voltage must not rise as charge is drawn"
            ),
        )
        .with_hint("check the row for a typing error and the order of the rows (rises within 0.5 %, digitizing noise, are accepted)")
        .at_line_col(line, fields[v_col].0));
    }
    Ok(())
}

fn number((col, field): (usize, &str), line: usize, name: &str) -> Result<f64, FitError> {
    let t = field.trim().trim_matches('"').trim();
    match t.parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x),
        _ => {
            let hint = if t.is_empty() {
                "fill in the missing value or remove the row".to_string()
            } else if t.starts_with(|c: char| c.is_ascii_digit() || c == '.' || c == '-') {
                "write a plain decimal number such as `3.712`; the unit belongs in the header only"
                    .to_string()
            } else {
                "write a plain decimal number such as `3.712`".to_string()
            };
            let shown = if t.is_empty() { "(empty)" } else { t };
            Err(FitError::new(
                name,
                format!("line {line}, column {col}: `{shown}` is not a number"),
            )
            .with_hint(hint)
            .at_line_col(line, col))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::fmt::Write as _;

    fn rows(n: usize) -> String {
        let mut out = String::new();
        for i in 0..n {
            let _ = writeln!(out, "{}, {}", i * 100, 4.0 - 0.1 * i as f64);
        }
        out
    }

    #[test]
    fn reads_either_column_order_and_units() {
        let a = read_curve(
            &format!("capacity [mAh],voltage [V]\n{}", rows(6)),
            0.1,
            "a",
        )
        .unwrap();
        let text = "# from a datasheet\n\nvoltage [mV];capacity [Ah]\r\n4000;0\r\n3900;0.1\r\n3800;0.2\r\n3700;0.3\r\n3600;0.4\r\n";
        let b = read_curve(text, 0.1, "b").unwrap();
        assert_eq!(a.points().len(), 6);
        assert!((a.points()[1].0 - 360.0).abs() < 1e-9);
        assert!((b.points()[4].0 - 1440.0).abs() < 1e-9);
        assert!((b.points()[4].1 - 3.6).abs() < 1e-12);
        assert!((a.voltage_at(150.0 * 3.6) - 3.85).abs() < 1e-12);
        // Beyond the end, the last segment is extended.
        assert!((a.voltage_at(600.0 * 3.6) - 3.4).abs() < 1e-12);
    }

    #[test]
    fn errors_name_the_line_and_column() {
        let e = read_curve(
            "capacity [mAh], voltage [V]\n0, 4.0\n100, 3.9x\n",
            0.1,
            "f.csv",
        )
        .unwrap_err();
        assert_eq!(e.line(), Some(3));
        assert_eq!(e.location().map(|l| l.col), Some(6));
        assert!(e.message().contains("`3.9x` is not a number"), "{e}");
        let e = read_curve("capacity [mAh], voltage [V]\n0, 4.0, 1\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("line 2 has 3 values"), "{e}");
        let e = read_curve("capacity [mAh], voltage [V]\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("no data rows"), "{e}");
        let e = read_curve("capacity [mAh], voltage [V]\n0, 4\n", 0.0, "f.csv").unwrap_err();
        assert!(e.message().contains("not above zero"), "{e}");
        let e = read_curve("capacity [mAh], capacity [Ah]\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("twice"), "{e}");
        let e = read_curve("capacity [V], voltage [V]\n", 0.1, "f.csv").unwrap_err();
        assert!(
            e.message().contains("unit of voltage, not of capacity"),
            "{e}"
        );
        let e = read_curve("capacity [mah], voltage [V]\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("did you mean `mAh`"), "{e}");
        let e = read_curve("capacity [mAh] voltage [V]\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("not separated by commas"), "{e}");
        let e = read_curve("capacity [mAh], voltage [V]\n0 4\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("line 2 has 1 value;"), "{e}");
        let e = read_curve("capacity [mAh, voltage [V]\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("does not end with `]`"), "{e}");
        let e = read_curve("capacity [mAh], voltage [V]\n1e309, 4\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("`1e309` is not a number"), "{e}");
        let e = read_curve("capacity [Ah], voltage [V]\n1e306, 4\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("out of range"), "{e}");
        let e = read_curve("capacity [mAh], voltage [V]\n-1, 4\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("negative"), "{e}");
        let e = read_curve("capacity [mAh], voltage [V]\n1, 0\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("not above zero"), "{e}");
        let e = read_curve(
            "capacity [mAh], voltage [V]\n0, 4.0\n100, 3.9\n200, 4.1\n",
            0.1,
            "f.csv",
        )
        .unwrap_err();
        assert!(
            e.message()
                .contains("line 4: the voltage `4.1` is above the voltage of line 3"),
            "{e}"
        );
        assert_eq!(e.location().map(|l| (l.line, l.col)), Some((4, 6)));
        let e = read_curve("capacity [mAh], voltage [V]\n0, 4\n", 1e308, "f.csv").unwrap_err();
        assert!(e.message().contains("above 10 kA"), "{e}");
        let e = read_curve("capacity [mAh]\n", 0.1, "f.csv").unwrap_err();
        assert!(e.message().contains("no voltage column"), "{e}");
    }

    #[test]
    fn curve_new_checks_its_points() {
        let pts = |v: &[(f64, f64)]| v.to_vec();
        let ok = pts(&[(0.0, 4.0), (1.0, 3.9), (2.0, 3.8), (3.0, 3.7), (4.0, 3.6)]);
        assert!(Curve::new("c", 1.0, ok.clone()).is_ok());
        assert!(Curve::new("c", -1.0, ok.clone()).is_err());
        let mut bad = ok.clone();
        bad[2].0 = 1.0;
        assert!(
            Curve::new("c", 1.0, bad)
                .unwrap_err()
                .message()
                .contains("does not increase")
        );
        let mut bad = ok;
        bad[1].1 = f64::NAN;
        assert!(Curve::new("c", 1.0, bad).is_err());
    }
}
