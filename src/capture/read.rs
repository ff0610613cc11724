//! Reading a capture: CSV text of time and current (and optionally voltage), units in the header.

use std::io::Read as _;
use std::path::Path;

use super::{Capture, MAX_BYTES, MAX_SAMPLES};
use crate::error::Diagnostic;
use crate::fit::header::{
    data_lines, missing_column, named_twice, named_unit, split_into, width_error,
};
use crate::units::fmt_eng;

/// A gap: a step between samples more than this many times the median step (common practice,
/// no source: an instrument samples at a fixed rate, so a step ten times longer is lost data).
pub const GAP_FACTOR: f64 = 10.0;

/// A column of a capture file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Column {
    Time,
    Current,
    Voltage,
}

impl Column {
    fn word(self) -> &'static str {
        match self {
            Column::Time => "time",
            Column::Current => "current",
            Column::Voltage => "voltage",
        }
    }

    /// Units accepted and their factor to SI.
    fn units(self) -> &'static [(&'static str, f64)] {
        match self {
            Column::Time => &[
                ("s", 1.0),
                ("ms", 1e-3),
                ("us", 1e-6),
                ("µs", 1e-6),
                ("ns", 1e-9),
            ],
            Column::Current => &[
                ("A", 1.0),
                ("mA", 1e-3),
                ("uA", 1e-6),
                ("µA", 1e-6),
                ("nA", 1e-9),
            ],
            Column::Voltage => &[("V", 1.0), ("mV", 1e-3)],
        }
    }
}

/// The header to suggest in messages.
const HEADER_EXAMPLE: &str = "`time [ms], current [mA]` (optionally `, voltage [V]`)";

/// Where each column is: index and SI scale.
#[derive(Debug, Clone, Copy)]
struct Layout {
    time: (usize, f64),
    current: (usize, f64),
    voltage: Option<(usize, f64)>,
    columns: usize,
}

fn header(row: &str, line: usize, sep: char, name: &str) -> Result<Layout, Diagnostic> {
    let mut fields = Vec::new();
    split_into(row, sep, &mut fields);
    let mut found: [Option<(usize, f64)>; 3] = [None, None, None];
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
            "current" | "i" => Column::Current,
            "voltage" | "v" => Column::Voltage,
            _ => {
                return err(
                    format!(
                        "the header's column {} `{cell}` is not time, current or voltage",
                        i + 1
                    ),
                    format!("a capture has the columns {HEADER_EXAMPLE}; remove any other"),
                );
            }
        };
        let Some(&(_, scale)) = kind.units().iter().find(|(u, _)| *u == unit) else {
            let names: Vec<String> = kind.units().iter().map(|(u, _)| format!("`{u}`")).collect();
            let near = kind
                .units()
                .iter()
                .find(|(u, _)| u.eq_ignore_ascii_case(unit))
                .map_or_else(String::new, |(u, _)| format!(": did you mean `{u}`?"));
            return err(
                format!("unknown unit `{unit}` for {}{near}", kind.word()),
                format!(
                    "{} takes {} (prefixes are case-sensitive)",
                    kind.word(),
                    names.join(", ")
                ),
            );
        };
        let slot = &mut found[kind as usize];
        if let Some((first, _)) = slot {
            let (what, fix) = named_twice(kind.word(), *first, i, HEADER_EXAMPLE);
            return err(what, fix);
        }
        *slot = Some((i, scale));
    }
    let missing = |what: &str| missing_column(name, what, HEADER_EXAMPLE, line);
    let time = found[0].ok_or_else(|| missing("time"))?;
    let current = found[1].ok_or_else(|| missing("current"))?;
    Ok(Layout {
        time,
        current,
        voltage: found[2],
        columns: fields.len(),
    })
}

fn number(
    (col, field): (usize, &str),
    what: &str,
    line: usize,
    name: &str,
) -> Result<f64, Diagnostic> {
    let t = field.trim().trim_matches('"').trim();
    if t.is_empty() {
        return Err(Diagnostic::new(
            name,
            format!("line {line}, column {col}: the {what} is missing"),
        )
        .with_hint("a capture must have every sample: fill in the value or cut the capture before the missing part")
        .at_line_col(line, col));
    }
    match t.parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x),
        Ok(_) => Err(Diagnostic::new(
            name,
            format!("line {line}, column {col}: the {what} `{t}` is not a finite number"),
        )
        .with_hint("the instrument lost this sample (NaN or infinity): cut the capture before it or fill it in")
        .at_line_col(line, col)),
        Err(_) => Err(Diagnostic::new(
            name,
            format!("line {line}, column {col}: the {what} `{t}` is not a number"),
        )
        .with_hint("write a plain decimal number such as `3.712`; the unit belongs in the header only")
        .at_line_col(line, col)),
    }
}

/// Read a capture from CSV text; `name` (the file name) labels its errors.
///
/// The first line that is neither blank nor a `#` comment is the header: `time` and `current`,
/// optionally `voltage`, each with its unit in brackets (`time [ms]`, `current [mA]`,
/// `voltage [V]`), in any order, separated by commas (or semicolons or tabs, as the header
/// shows). Each further line is one sample. Each sample holds until the next one (the sample and
/// hold rule: an instrument's sample is its mean over the interval); the last holds for the
/// median step.
///
/// # Errors
///
/// With the line and column at fault and a fix: no header or an unknown column or unit, a missing
/// value, a value that is not a finite number (NaN, infinity), a time that does not increase, a
/// gap (a step more than ten times the median step), a negative current unless
/// `allow_negative`, a voltage not above zero, fewer than two samples, more than
/// [`MAX_SAMPLES`], text longer than [`MAX_BYTES`].
///
/// # Examples
///
/// ```
/// let text = "time [ms], current [mA]\n0, 1\n1, 3\n2, 1\n";
/// let c = joulepath::capture::read_capture(text, "pulse.csv", false).unwrap();
/// assert!((c.duration_s() - 3e-3).abs() < 1e-15);
/// assert!((c.charge_c() - 5e-6).abs() < 1e-18);
/// let e = joulepath::capture::read_capture("time [ms], current\n", "p.csv", false).unwrap_err();
/// assert!(e.message().contains("no unit"));
/// ```
pub fn read_capture(text: &str, name: &str, allow_negative: bool) -> Result<Capture, Diagnostic> {
    if text.len() > MAX_BYTES {
        return Err(too_big(name, text.len() as u64));
    }
    let mut lines = data_lines(text);
    let Some((header_line, head)) = lines.next() else {
        return Err(
            Diagnostic::new(name, "the file is empty").with_hint(format!(
                "write a header row such as {HEADER_EXAMPLE}, then one row per sample"
            )),
        );
    };
    let sep = [',', ';', '\t']
        .into_iter()
        .find(|c| head.contains(*c))
        .unwrap_or(',');
    let lay = header(head, header_line, sep, name)?;
    let s = read_samples(lines, sep, &lay, name, allow_negative)?;
    let dt = sampling_steps(&s.times, &s.at_line, name)?;
    Ok(Capture {
        name: name.to_string(),
        start_s: s.times[0],
        dt,
        current: s.current,
        voltage: lay.voltage.map(|_| s.voltage),
    })
}

/// The samples of a capture as read, before the steps between them are checked.
struct Samples {
    /// Time of each sample, s.
    times: Vec<f64>,
    /// Current of each sample, A.
    current: Vec<f64>,
    /// Voltage of each sample, V (empty when the file has no voltage column).
    voltage: Vec<f64>,
    /// The line of each sample, to name the place of a gap found after reading.
    at_line: Vec<u32>,
}

/// Every sample of the rows after the header, checked one by one; a message at the row's place
/// for the first bad one, or when there are more than [`MAX_SAMPLES`].
fn read_samples<'t>(
    lines: impl Iterator<Item = (usize, &'t str)>,
    sep: char,
    lay: &Layout,
    name: &str,
    allow_negative: bool,
) -> Result<Samples, Diagnostic> {
    let mut s = Samples {
        times: Vec::new(),
        current: Vec::new(),
        voltage: Vec::new(),
        at_line: Vec::new(),
    };
    let mut fields: Vec<(usize, &str)> = Vec::with_capacity(lay.columns);
    for (line, row) in lines {
        if s.times.len() >= MAX_SAMPLES {
            return Err(Diagnostic::new(
                name,
                format!("the capture has more than {MAX_SAMPLES} samples"),
            )
            .with_hint("cut the capture to one event, or export it at a lower sampling rate")
            .at_line_col(line, 1));
        }
        fields.clear();
        split_into(row, sep, &mut fields);
        let (t, i, v) = read_row(
            &fields,
            lay,
            line,
            name,
            s.times.last().copied(),
            allow_negative,
        )?;
        if let Some(v) = v {
            s.voltage.push(v);
        }
        s.times.push(t);
        s.current.push(i);
        s.at_line.push(u32::try_from(line).unwrap_or(u32::MAX));
    }
    Ok(s)
}

/// The step after each sample, s (the last one the median step); a message when there are
/// fewer than two samples, or at the line after a gap.
fn sampling_steps(times: &[f64], at_line: &[u32], name: &str) -> Result<Vec<f64>, Diagnostic> {
    if times.len() < 2 {
        return Err(Diagnostic::new(
            name,
            format!(
                "the capture has {} sample{}; it needs at least two",
                times.len(),
                if times.len() == 1 { "" } else { "s" }
            ),
        )
        .with_hint("add one row per sample: time, current"));
    }
    let mut steps: Vec<f64> = times.windows(2).map(|w| w[1] - w[0]).collect();
    let median = median(&steps);
    if let Some(k) = steps.iter().position(|&s| s > GAP_FACTOR * median) {
        let line = at_line[k + 1] as usize;
        return Err(Diagnostic::new(
            name,
            format!(
                "line {line}: a gap of {} before this sample, more than {GAP_FACTOR} times the sampling step ({})",
                fmt_eng(steps[k], "s"),
                fmt_eng(median, "s")
            ),
        )
        .with_hint("the capture lost samples there: capture again, or cut the capture before the gap")
        .at_line_col(line, 1));
    }
    steps.push(median);
    Ok(steps)
}

/// One sample from the fields of row `line` (after the sample at `prev_t`, when there is one):
/// time, s, current, A, and voltage, V, with the layout's scales; a message at the row's place
/// when a value is missing, unreadable, out of order, negative or not above zero.
fn read_row(
    fields: &[(usize, &str)],
    lay: &Layout,
    line: usize,
    name: &str,
    prev_t: Option<f64>,
    allow_negative: bool,
) -> Result<(f64, f64, Option<f64>), Diagnostic> {
    if fields.len() != lay.columns {
        return Err(width_error(fields.len(), lay.columns, line, name));
    }
    let t = number(fields[lay.time.0], "time", line, name)? * lay.time.1;
    let i = number(fields[lay.current.0], "current", line, name)? * lay.current.1;
    if let Some(prev) = prev_t {
        if t <= prev {
            let (col, txt) = fields[lay.time.0];
            return Err(Diagnostic::new(
                name,
                format!(
                    "line {line}: the time `{}` is not after the time of the sample before; time must increase from row to row",
                    txt.trim()
                ),
            )
            .with_hint("sort the rows by time and remove repeated samples")
            .at_line_col(line, col));
        }
    }
    if i < 0.0 && !allow_negative {
        let (col, txt) = fields[lay.current.0];
        return Err(Diagnostic::new(
            name,
            format!("line {line}: the current `{}` is negative; a load only draws", txt.trim()),
        )
        .with_hint("subtract the probe's offset from the capture, or cut out the part where the product charges")
        .at_line_col(line, col));
    }
    if let Some((vc, vs)) = lay.voltage {
        let v = number(fields[vc], "voltage", line, name)? * vs;
        if v <= 0.0 {
            return Err(Diagnostic::new(
                name,
                format!(
                    "line {line}: the voltage `{}` is not above zero",
                    fields[vc].1.trim()
                ),
            )
            .with_hint("the voltage column is the supply of the load while it was captured")
            .at_line_col(line, fields[vc].0));
        }
        return Ok((t, i, Some(v)));
    }
    Ok((t, i, None))
}

/// The median of `xs` (not empty).
fn median(xs: &[f64]) -> f64 {
    let mut v = xs.to_vec();
    let mid = v.len() / 2;
    let (_, m, _) = v.select_nth_unstable_by(mid, f64::total_cmp);
    *m
}

fn too_big(name: &str, len: u64) -> Diagnostic {
    Diagnostic::new(
        name,
        format!(
            "the capture is {len} bytes, more than the {MAX_BYTES} bytes (10 MiB) a capture may have"
        ),
    )
    .with_hint("cut the capture to one event, or export it at a lower sampling rate")
    .at_line_col(1, 1)
}

/// Read a capture file: a regular file of at most [`MAX_BYTES`], UTF-8 text, read as
/// [`read_capture`] does; errors are labelled with the path as given.
///
/// # Errors
///
/// A file that cannot be opened or is not a regular file, one over the size limit, text that is
/// not UTF-8, and every error of [`read_capture`].
pub fn read_capture_file(path: &Path, allow_negative: bool) -> Result<Capture, Diagnostic> {
    let name = path.display().to_string();
    let text = read_capped(path, MAX_BYTES, "capture", &|len| too_big(&name, len))?;
    read_capture(&text, &name, allow_negative)
}

/// The text of the file at `path`, a regular UTF-8 file of at most `max` bytes; `noun` names
/// the file in messages (`capture`), `too_big` words the error of a file over the limit from
/// its length. Errors are labelled with the path as given. Shared by the capture and the
/// ambient readers.
pub(crate) fn read_capped(
    path: &Path,
    max: usize,
    noun: &str,
    too_big: &dyn Fn(u64) -> Diagnostic,
) -> Result<String, Diagnostic> {
    let name = path.display().to_string();
    let cannot = |e: std::io::Error| {
        Diagnostic::new(&name, format!("cannot read the {noun}: {e}"))
            .with_hint("check the path: it is relative to the design file's directory")
    };
    let meta = std::fs::metadata(path).map_err(cannot)?;
    if !meta.is_file() {
        return Err(
            Diagnostic::new(&name, format!("the {noun} is not a regular file"))
                .with_hint("name a CSV file"),
        );
    }
    let file = std::fs::File::open(path).map_err(cannot)?;
    let mut bytes = Vec::with_capacity(usize::try_from(meta.len()).unwrap_or(0).min(max + 1));
    // One byte past the limit tells a file over it, whatever its size said.
    file.take(max as u64 + 1)
        .read_to_end(&mut bytes)
        .map_err(cannot)?;
    if bytes.len() > max {
        return Err(too_big(meta.len().max(bytes.len() as u64)));
    }
    String::from_utf8(bytes).map_err(|e| {
        let at = e.utf8_error().valid_up_to();
        let before = &e.as_bytes()[..at];
        let line = String::from_utf8_lossy(before).split('\n').count();
        Diagnostic::new(&name, format!("the {noun} is not UTF-8 text (line {line})"))
            .with_hint(format!("export the {noun} as plain CSV text"))
            .at_line_col(line, 1)
    })
}
