//! What `joulepath capture` prints: the capture's figures, its segments and a suggested
//! `modes:` block.

use std::fmt::Write as _;
use std::io::{self, Write};

use serde::Serialize;

use super::{Capture, Compressed, Sensitivity};
use crate::units::{fmt_eng, fmt_sig};

/// The figures of one capture and its compression.
#[derive(Debug, Clone, PartialEq)]
pub struct Summary {
    /// File name.
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
    /// Energy per event at the captured voltage, J (with a voltage column).
    pub energy_j: Option<f64>,
    /// The compression.
    pub compressed: Compressed,
    /// What the compression assumed: the pack the tolerance is held on, in words.
    pub on: String,
}

/// The summary of `capture` compressed on `on` (a pack described in words) with `s` within
/// `compressed`'s tolerance.
pub fn summarize(c: &Capture, compressed: Compressed, on: &str) -> Summary {
    let dur = c.duration_s();
    let sq: f64 = c.current().iter().zip(c.dt()).map(|(i, t)| i * i * t).sum();
    let mut steps = c.dt().to_vec();
    let mid = steps.len() / 2;
    let step_s = *steps.select_nth_unstable_by(mid, f64::total_cmp).1;
    Summary {
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
        compressed,
        on: on.to_string(),
    }
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
        let segs = &self.compressed.segments;
        let mut order: Vec<usize> = (0..segs.len()).collect();
        order.sort_by(|&a, &b| segs[a].value.total_cmp(&segs[b].value));
        let mut level_of = vec![0; segs.len()];
        let (mut sums, mut first): (Vec<(f64, f64)>, f64) = (Vec::new(), f64::NEG_INFINITY);
        for &k in &order {
            let v = segs[k].value;
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
            4.0 * self.compressed.tolerance_v / ohmic
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
        let segs = &self.compressed.segments;
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

    /// The JSON form (SI units).
    pub fn json(&self, load: &str, s: &Sensitivity) -> SummaryJson {
        let mut t = 0.0;
        SummaryJson {
            file: self.name.clone(),
            samples: self.samples,
            duration_s: self.duration_s,
            step_s: self.step_s,
            mean_a: self.mean_a,
            rms_a: self.rms_a,
            peak_a: self.peak_a,
            min_a: self.min_a,
            charge_c: self.charge_c,
            energy_j: self.energy_j,
            tolerance_v: self.compressed.tolerance_v,
            bound_v: self.compressed.bound_v,
            on: self.on.clone(),
            segments: self
                .compressed
                .segments
                .iter()
                .map(|g| {
                    let j = SegmentJson {
                        start_s: t,
                        seconds: g.seconds,
                        current_a: g.value,
                        samples: g.samples,
                    };
                    t += g.seconds;
                    j
                })
                .collect(),
            suggested: self.suggested_yaml(load, s.ohmic),
        }
    }
}

/// `joulepath capture --format json`.
#[derive(Debug, Clone, Serialize)]
pub struct SummaryJson {
    /// File name.
    pub file: String,
    /// Number of samples.
    pub samples: usize,
    /// Duration of one capture, s.
    pub duration_s: f64,
    /// Median sampling step, s.
    pub step_s: f64,
    /// Mean current, A.
    pub mean_a: f64,
    /// RMS current, A.
    pub rms_a: f64,
    /// Highest sample, A.
    pub peak_a: f64,
    /// Lowest sample, A.
    pub min_a: f64,
    /// Charge per event, C.
    pub charge_c: f64,
    /// Energy per event at the captured voltage, J (null without a voltage column).
    pub energy_j: Option<f64>,
    /// The tolerance on the lowest terminal voltage, V.
    pub tolerance_v: f64,
    /// The bound the segments keep, V.
    pub bound_v: f64,
    /// The pack the tolerance is held on.
    pub on: String,
    /// The segments in time order.
    pub segments: Vec<SegmentJson>,
    /// The suggested `loads:`/`modes:`/`profile:` block, YAML text.
    pub suggested: String,
}

/// One segment in JSON.
#[derive(Debug, Clone, Serialize)]
pub struct SegmentJson {
    /// Start from the capture's start, s.
    pub start_s: f64,
    /// Duration, s.
    pub seconds: f64,
    /// Mean current, A.
    pub current_a: f64,
    /// Samples merged.
    pub samples: usize,
}

/// The summary as text: the figures, the segments, the suggested block.
///
/// # Errors
///
/// Any error of `out`.
pub fn write_summary(
    out: &mut dyn Write,
    s: &Summary,
    load: &str,
    sens: &Sensitivity,
) -> io::Result<()> {
    let c = &s.compressed;
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
            c.segments.len(),
            fmt_eng(c.tolerance_v, "V"),
            s.on,
            fmt_eng(c.bound_v, "V")
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
    let mut t = 0.0;
    for (k, g) in c.segments.iter().enumerate() {
        writeln!(
            out,
            "  {:>4}  {:>10}  {:>10}  {:>10}  {:>8}",
            k + 1,
            fmt_eng(t, "s"),
            fmt_eng(g.seconds, "s"),
            fmt_eng(g.value, "A"),
            g.samples
        )?;
        t += g.seconds;
    }
    writeln!(out)?;
    write!(out, "{}", s.suggested_yaml(load, sens.ohmic))
}
