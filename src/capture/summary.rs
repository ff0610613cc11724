//! What `joulepath capture` prints: the capture's figures, its segments and a suggested
//! `modes:` block.

use std::fmt::Write as _;
use std::io::{self, Write};

use serde::Serialize;

use super::{Capture, Compressed, Sensitivity};
use crate::units::{fmt_eng, fmt_sig};

/// The figures of one capture and its compression: the text summary and `joulepath capture
/// --format json` (SI units) are both written from it.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Summary {
    /// File name.
    #[serde(rename = "file")]
    pub name: String,
    /// Number of samples.
    pub samples: usize,
    /// Duration of one capture (one event), s.
    pub duration_s: f64,
    /// The median sampling step, s.
    pub step_s: f64,
    /// Mean current, A.
    pub mean_a: f64,
    /// Root-mean-square current, A.
    pub rms_a: f64,
    /// Highest sample, A.
    pub peak_a: f64,
    /// Lowest sample, A.
    pub min_a: f64,
    /// Charge per event (one capture), C.
    pub charge_c: f64,
    /// Energy per event at the captured voltage, J (with a voltage column; null without).
    pub energy_j: Option<f64>,
    /// The tolerance on the pack's lowest terminal voltage, V.
    pub tolerance_v: f64,
    /// The bound the segments keep, V.
    pub bound_v: f64,
    /// What the compression assumed: the pack the tolerance is held on, in words.
    pub on: String,
    /// The segments in time order.
    pub segments: Vec<SegmentRow>,
    /// The suggested `loads:`/`modes:`/`profile:` block, YAML text.
    pub suggested: String,
}

/// One segment of the compressed capture: a row of the text table and of the JSON.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SegmentRow {
    /// Start from the capture's start, s.
    pub start_s: f64,
    /// Duration, s.
    pub seconds: f64,
    /// Mean current, A.
    pub current_a: f64,
    /// Samples merged.
    pub samples: usize,
}

/// The summary of `capture` compressed on `on` (a pack described in words) within
/// `compressed`'s tolerance; the suggested block names its load `load` and merges levels of
/// current by the pack's sensitivity `sens`.
pub fn summarize(
    c: &Capture,
    compressed: &Compressed,
    on: &str,
    load: &str,
    sens: &Sensitivity,
) -> Summary {
    let dur = c.duration_s();
    let sq: f64 = c.current().iter().zip(c.dt()).map(|(i, t)| i * i * t).sum();
    let mut steps = c.dt().to_vec();
    let mid = steps.len() / 2;
    let step_s = *steps.select_nth_unstable_by(mid, f64::total_cmp).1;
    let mut t = 0.0;
    let segments = compressed
        .segments
        .iter()
        .map(|g| {
            let row = SegmentRow {
                start_s: t,
                seconds: g.seconds,
                current_a: g.value,
                samples: g.samples,
            };
            t += g.seconds;
            row
        })
        .collect();
    let mut s = Summary {
        name: c.name().to_string(),
        samples: c.len(),
        duration_s: dur,
        step_s,
        mean_a: c.charge_c() / dur,
        rms_a: (sq / dur).sqrt(),
        peak_a: c
            .current()
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max),
        min_a: c.current().iter().copied().fold(f64::INFINITY, f64::min),
        charge_c: c.charge_c(),
        energy_j: c.energy_j(),
        tolerance_v: compressed.tolerance_v,
        bound_v: compressed.bound_v,
        on: on.to_string(),
        segments,
        suggested: String::new(),
    };
    s.suggested = s.suggested_yaml(load, sens.ohmic);
    s
}

/// A current in the design file's notation with four significant digits (`2.051 mA`).
fn qty_a(a: f64) -> String {
    let (scale, unit) = if a.abs() >= 1.0 {
        (1.0, "A")
    } else if a.abs() >= 1e-3 {
        (1e-3, "mA")
    } else if a.abs() >= 1e-6 || a == 0.0 {
        (1e-6, "µA")
    } else {
        (1e-9, "nA")
    };
    format!("{} {unit}", fmt_sig(a / scale, 4))
}

/// A duration in the design file's notation with four significant digits (`1.25 ms`).
fn qty_s(s: f64) -> String {
    let (scale, unit) = if s >= 1.0 {
        (1.0, "s")
    } else if s >= 1e-3 {
        (1e-3, "ms")
    } else {
        (1e-6, "µs")
    };
    format!("{} {unit}", fmt_sig(s / scale, 4))
}

impl Summary {
    /// Levels of the segments: values within `merge` of a level's lowest member share it.
    /// Returns each level's time-weighted mean and each segment's level.
    fn levels(&self, merge: f64) -> (Vec<f64>, Vec<usize>) {
        let segs = &self.segments;
        let mut order: Vec<usize> = (0..segs.len()).collect();
        order.sort_by(|&a, &b| segs[a].current_a.total_cmp(&segs[b].current_a));
        let mut level_of = vec![0; segs.len()];
        let (mut sums, mut first): (Vec<(f64, f64)>, f64) = (Vec::new(), f64::NEG_INFINITY);
        for &k in &order {
            let v = segs[k].current_a;
            if sums.is_empty() || v - first > merge.max(0.25 * first.abs()) {
                sums.push((0.0, 0.0));
                first = v;
            }
            let l = sums.len() - 1;
            sums[l].0 += v * segs[k].seconds;
            sums[l].1 += segs[k].seconds;
            level_of[k] = l;
        }
        (sums.iter().map(|(q, t)| q / t).collect(), level_of)
    }

    /// A suggested block for a design without the capture: one load state per level of current
    /// (segments within 25 %, or four times the tolerance's current, merged, by their time-weighted mean, so
    /// the charge stays the capture's), one mode per level, and the profile steps of one event.
    pub fn suggested_yaml(&self, load: &str, ohmic: f64) -> String {
        let merge = if ohmic > 0.0 {
            4.0 * self.tolerance_v / ohmic
        } else {
            0.0
        };
        let (levels, level_of) = self.levels(merge);
        let mut y = String::new();
        let _ = writeln!(
            y,
            "# Suggested from {}: {} levels of current, the same charge per event ({}).",
            self.name,
            levels.len(),
            fmt_eng(self.charge_c, "C")
        );
        let _ = writeln!(y, "loads:\n  - id: {load}\n    rail: battery\n    draw:");
        for (l, v) in levels.iter().enumerate() {
            let _ = writeln!(y, "      level-{}: {}", l + 1, qty_a(*v));
        }
        let _ = writeln!(y, "modes:");
        for l in 0..levels.len() {
            let _ = writeln!(y, "  {load}-{}: {{ {load}: level-{} }}", l + 1, l + 1);
        }
        let _ = writeln!(y, "profile:\n  - repeat:");
        // Neighbouring segments of one level are one step.
        let segs = &self.segments;
        let mut k = 0;
        while k < segs.len() {
            let l = level_of[k];
            let mut t = 0.0;
            while k < segs.len() && level_of[k] == l {
                t += segs[k].seconds;
                k += 1;
            }
            let _ = writeln!(y, "      - {{ mode: {load}-{}, for: {} }}", l + 1, qty_s(t));
        }
        let _ = writeln!(y, "    times: 1");
        y
    }
}

/// The summary as text: the figures, the segments, the suggested block.
///
/// # Errors
///
/// Any error of `out`.
pub fn write_summary(out: &mut dyn Write, s: &Summary) -> io::Result<()> {
    writeln!(out, "Capture {}", s.name)?;
    let rows: Vec<(&str, String)> = vec![
        ("samples", s.samples.to_string()),
        ("sampling step", fmt_eng(s.step_s, "s")),
        ("duration (one event)", fmt_eng(s.duration_s, "s")),
        ("mean current", fmt_eng(s.mean_a, "A")),
        ("RMS current", fmt_eng(s.rms_a, "A")),
        ("peak current", fmt_eng(s.peak_a, "A")),
        ("lowest current", fmt_eng(s.min_a, "A")),
        (
            "charge per event",
            format!(
                "{} ({})",
                fmt_eng(s.charge_c, "C"),
                fmt_eng(s.charge_c / 3600.0, "Ah")
            ),
        ),
    ];
    let mut rows = rows;
    if let Some(e) = s.energy_j {
        rows.push(("energy per event", fmt_eng(e, "J")));
    }
    rows.push((
        "segments",
        format!(
            "{} (terminal voltage within {} on {}; bound {})",
            s.segments.len(),
            fmt_eng(s.tolerance_v, "V"),
            s.on,
            fmt_eng(s.bound_v, "V")
        ),
    ));
    let w = rows.iter().map(|(k, _)| k.len()).max().unwrap_or(0);
    for (k, v) in &rows {
        writeln!(out, "  {k:<w$}  {v}")?;
    }
    writeln!(out)?;
    writeln!(
        out,
        "  {:>4}  {:>10}  {:>10}  {:>10}  {:>8}",
        "#", "start", "length", "current", "samples"
    )?;
    for (k, g) in s.segments.iter().enumerate() {
        writeln!(
            out,
            "  {:>4}  {:>10}  {:>10}  {:>10}  {:>8}",
            k + 1,
            fmt_eng(g.start_s, "s"),
            fmt_eng(g.seconds, "s"),
            fmt_eng(g.current_a, "A"),
            g.samples
        )?;
    }
    writeln!(out)?;
    write!(out, "{}", s.suggested)
}
