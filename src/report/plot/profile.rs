//! What the profile does over a run, for pictures: the time each mode takes, and the long
//! stretches of one mode (or of one repeat block) worth shading on a time axis.

use crate::model::{Design, Step};

/// A stretch of time on the time axis given to one mode, or to a repeat block of short cycles
/// (then `mode` is the mode that takes most of its time).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Band {
    /// Start, s.
    pub t0: f64,
    /// End, s.
    pub t1: f64,
    /// Mode index.
    pub mode: usize,
    /// Whether the stretch cycles through short steps.
    pub cycling: bool,
}

/// Seconds each mode takes over the first `limit` seconds of the profile, repeated as it runs.
pub fn mode_seconds(design: &Design, limit: f64) -> Vec<f64> {
    let mut acc = vec![0.0; design.modes.len()];
    let pass: f64 = design.profile.iter().map(Step::duration).sum();
    if !(pass > 0.0 && limit > 0.0) {
        return acc;
    }
    let full = (limit / pass).floor();
    if full >= 1.0 {
        walk(&design.profile, pass, full, &mut acc);
    }
    let rest = limit - full * pass;
    if rest > 0.0 {
        walk(&design.profile, rest, 1.0, &mut acc);
    }
    to_file_modes(design, &mut acc);
    acc
}

/// Move the seconds of captures' segments to the modes of the file they are part of.
fn to_file_modes(design: &Design, acc: &mut [f64]) {
    for (m, mode) in design.modes.iter().enumerate() {
        if let Some(p) = mode.part_of {
            acc[p] += acc[m];
            acc[m] = 0.0;
        }
    }
}

/// Add `weight` x the seconds each mode takes in the first `budget` seconds of `steps`.
fn walk(steps: &[Step], budget: f64, weight: f64, acc: &mut [f64]) -> f64 {
    let mut used = 0.0;
    for step in steps {
        let left = budget - used;
        if left <= 0.0 {
            break;
        }
        match step {
            Step::Hold { mode, seconds } => {
                let d = seconds.min(left);
                acc[*mode] += weight * d;
                used += d;
            }
            Step::Repeat { steps: inner, .. } => {
                let pass: f64 = inner.iter().map(Step::duration).sum();
                let span = step.duration().min(left);
                if pass > 0.0 {
                    let full = (span / pass).floor();
                    if full >= 1.0 {
                        walk(inner, pass, weight * full, acc);
                    }
                    let rest = span - full * pass;
                    if rest > 0.0 {
                        walk(inner, rest, weight, acc);
                    }
                }
                used += span;
            }
        }
    }
    used
}

/// The mode taking most of one pass of `steps`.
fn dominant(steps: &[Step], design: &Design) -> usize {
    let mut acc = vec![0.0; design.modes.len()];
    let pass: f64 = steps.iter().map(Step::duration).sum();
    walk(steps, pass, 1.0, &mut acc);
    to_file_modes(design, &mut acc);
    acc.iter()
        .enumerate()
        .max_by(|a, b| a.1.total_cmp(b.1))
        .map_or(0, |(m, _)| m)
}

/// The long stretches of the run `[0, end_s]` worth shading: steps and blocks at least a
/// hundredth of the run, repeated per pass; a block whose passes are shorter than that is one
/// cycling band. Neighbours with the same mode merge; stretches too short to see are dropped.
/// Empty when the whole profile pass is short (the run is one uniform cycle) or only one kind of
/// stretch would show (shading it alone says little).
pub fn bands(design: &Design, end_s: f64) -> Vec<Band> {
    let pass: f64 = design.profile.iter().map(Step::duration).sum();
    let min_len = 0.01 * end_s;
    if !(end_s > 0.0 && pass >= min_len && pass > 0.0) {
        return Vec::new();
    }
    let mut out = Vec::new();
    let mut t = 0.0;
    while t < end_s {
        lay(design, &design.profile, t, end_s, min_len, &mut out);
        t += pass;
    }
    let mut merged: Vec<Band> = Vec::with_capacity(out.len());
    for b in out {
        match merged.last_mut() {
            Some(m)
                if m.mode == b.mode
                    && m.cycling == b.cycling
                    && (b.t0 - m.t1).abs() <= 1e-9 * end_s.max(1.0) =>
            {
                m.t1 = b.t1;
            }
            _ => merged.push(b),
        }
    }
    merged.retain(|b| b.t1 - b.t0 >= 0.003 * end_s);
    let first = merged.first().map(|b| (b.mode, b.cycling));
    if merged.iter().all(|b| Some((b.mode, b.cycling)) == first) {
        return Vec::new();
    }
    merged
}

/// Lay one execution of `steps` from `t` (cut at `limit`) into `out`; returns the time after it.
fn lay(
    design: &Design,
    steps: &[Step],
    mut t: f64,
    limit: f64,
    min_len: f64,
    out: &mut Vec<Band>,
) -> f64 {
    for step in steps {
        if t >= limit {
            break;
        }
        let total = step.duration();
        let end = (t + total).min(limit);
        match step {
            Step::Hold { mode, .. } => out.push(Band {
                t0: t,
                t1: end,
                mode: design.file_mode(*mode),
                cycling: false,
            }),
            Step::Repeat { steps: inner, .. } => {
                let pass: f64 = inner.iter().map(Step::duration).sum();
                if pass >= min_len && pass > 0.0 {
                    let mut tp = t;
                    while tp < end {
                        lay(design, inner, tp, end, min_len, out);
                        tp += pass;
                    }
                } else {
                    out.push(Band {
                        t0: t,
                        t1: end,
                        mode: dominant(inner, design),
                        cycling: true,
                    });
                }
            }
        }
        t += total;
    }
    t
}

#[cfg(test)]
mod tests {
    use super::*;

    const BAND: &str = r"
cells:
  c: { capacity: 1 Ah, ocv: [[0 %, 3.6 V], [100 %, 4.0 V]], resistance: 0.1 ohm, cutoff: 3 V }
battery: { cell: c }
loads: [{ id: l, rail: battery, draw: { on: 10 mA, lo: 1 mA } }]
modes: { a: { l: on }, b: { l: lo }, c: {} }
profile:
  - repeat: [{ mode: a, for: 1 s }, { mode: c, for: 3 s }]
    for: 16 h
  - { mode: b, for: 8 h }
";

    #[test]
    fn seconds_per_mode_follow_the_profile() {
        let d = Design::from_text(BAND).unwrap();
        // One day: 16 h of 1 s in 4 s for `a`, 3 s in 4 for `c`, then 8 h of `b`; then 4 h more.
        let s = mode_seconds(&d, 28.0 * 3600.0);
        assert!((s[0] - 5.0 * 3600.0).abs() < 1e-6);
        assert!((s[2] - 15.0 * 3600.0).abs() < 1e-6);
        assert!((s[1] - 8.0 * 3600.0).abs() < 1e-6);
    }

    #[test]
    fn long_steps_become_bands() {
        let d = Design::from_text(BAND).unwrap();
        let b = bands(&d, 10.0 * 86_400.0);
        assert_eq!(b.len(), 20);
        assert!(b[0].cycling && b[0].mode == 2);
        assert!(!b[1].cycling && b[1].mode == 1);
        assert!((b[1].t0 - 16.0 * 3600.0).abs() < 1e-6);
        // A run of a year makes each day shorter than a hundredth of it: no bands.
        assert!(bands(&d, 365.0 * 86_400.0).is_empty());
    }
}
