//! Load states that follow a measured capture: reading and compressing each capture on the
//! design's pack, and turning each profile step of a mode with captures into the captures'
//! segments.

#[allow(clippy::wildcard_imports)]
use super::*;

use std::sync::Arc;

use crate::capture::{
    Capture, CompressError, Compressed, DEFAULT_TOLERANCE_V, MAX_SEGMENTS, compress, sensitivity,
};
use crate::spec::{CaptureScale, CaptureSpec, DrawSpec};

/// Internal mark of a step `for: capture` until the profile is expanded.
pub(super) const ONE_CAPTURE: f64 = -1.0;

/// Most profile steps the captures may add in all (segments of each mode with captures, once
/// per mode): bounds the model of a design with many captured modes.
const MAX_CAPTURE_STEPS: usize = 20_000;

impl Lower<'_> {
    /// Read every capture of the loads, compress it on the pack (as seen from the load's rail)
    /// and give the load its mean and its segments. False when a capture could not be used.
    pub(super) fn captures(
        &mut self,
        spec: &DesignSpec,
        pack: &Pack,
        stages: &[Stage],
        loads: &mut [Load],
        ambient_c: f64,
    ) -> bool {
        let mut ok = true;
        for (i, l) in spec.loads.iter().enumerate() {
            for (name, d) in &l.draw {
                let DrawSpec::Capture(c) = d else { continue };
                let Some(state) = loads[i].states.iter().position(|(n, _)| n == name) else {
                    continue;
                };
                let path = format!("loads[{i}].draw.{name}");
                match self.capture(c, &path, pack, stages, &mut loads[i], state, ambient_c) {
                    Some(()) => {}
                    None => ok = false,
                }
            }
        }
        ok
    }

    #[allow(clippy::too_many_arguments)]
    fn capture(
        &mut self,
        c: &CaptureSpec,
        path: &str,
        pack: &Pack,
        stages: &[Stage],
        load: &mut Load,
        state: usize,
        ambient_c: f64,
    ) -> Option<()> {
        let file_path = format!("{path}.capture");
        let cap = self.captured_file(c, &file_path)?;
        let tolerance_v = match &c.tolerance {
            None => DEFAULT_TOLERANCE_V,
            Some(q) => self.value(
                q,
                format_args!("{path}.tolerance"),
                Dim::Voltage,
                Bound::AtLeastZero,
            )?,
        };
        let power = self.scales_with_power(c, path, cap.voltage().is_some())?;
        let values: Vec<f64> = if power {
            cap.power().unwrap_or_default()
        } else {
            cap.current().to_vec()
        };
        let lo = values.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        // Per unit of the value: a power becomes a current at the rail's lowest voltage.
        let v_low = rail_low(load.rail, pack, stages);
        let per_unit = if power { 1.0 / v_low } else { 1.0 };
        let gain = pack_gain(load.rail, pack, stages, lo * per_unit, hi * per_unit) * per_unit;
        let sens = sensitivity(pack, ambient_c, gain);
        let comp = match compress(&values, cap.dt(), &sens, tolerance_v, MAX_SEGMENTS) {
            Ok(x) => x,
            Err(e) => {
                self.compress_failed(c, path, &e, tolerance_v, cap.len());
                return None;
            }
        };
        load_segments(load, state, c, &cap, &values, &comp, power, tolerance_v);
        Some(())
    }

    /// The capture file `c` names, read (and cached) relative to the design's directory; its
    /// problem reported at `file_path` (with the capture's line and column) when it cannot be.
    fn captured_file(&mut self, c: &CaptureSpec, file_path: &str) -> Option<Arc<Capture>> {
        match self.source.capture(&c.capture) {
            Ok(x) => Some(x),
            Err(d) => {
                let at = d.location().map_or_else(String::new, |l| {
                    format!(" (line {}, column {})", l.line, l.col)
                });
                let msg = if d.message().starts_with("line ") || at.is_empty() {
                    format!("capture `{}`: {}", c.capture, d.message())
                } else {
                    format!("capture `{}`{at}: {}", c.capture, d.message())
                };
                self.err(file_path, msg, d.hint().map(str::to_string));
                None
            }
        }
    }

    /// Whether the captured draw of `c` scales as a power (`scale: power`) rather than as a
    /// current: a capture with a voltage column must say, and a power needs that column.
    fn scales_with_power(
        &mut self,
        c: &CaptureSpec,
        path: &str,
        has_voltage: bool,
    ) -> Option<bool> {
        match (c.scale, has_voltage) {
            (None, true) => {
                self.err(
                    path,
                    format!("the capture `{}` has a voltage column, so say how the draw scales with the rail's voltage", c.capture),
                    Some("add `scale: current` (the captured current at any voltage) or `scale: power` (the captured power)".into()),
                );
                None
            }
            (Some(CaptureScale::Power), false) => {
                self.err(
                    &format!("{path}.scale"),
                    format!(
                        "`scale: power` needs a voltage column, and the capture `{}` has none",
                        c.capture
                    ),
                    Some("add a `voltage [V]` column to the capture, or remove `scale`".into()),
                );
                None
            }
            (s, _) => Some(s == Some(CaptureScale::Power)),
        }
    }

    /// Report that capture `c` (of `samples` samples) could not be compressed within
    /// `tolerance_v`.
    fn compress_failed(
        &mut self,
        c: &CaptureSpec,
        path: &str,
        e: &CompressError,
        tolerance_v: f64,
        samples: usize,
    ) {
        if let CompressError::TooMany { max, at_sample } = e {
            self.err(
                path,
                format!(
                    "the capture `{}` needs more than {max} segments to keep the pack's lowest terminal voltage within {} (the first {max} reach sample {at_sample} of {})",
                    c.capture,
                    fmt_eng(tolerance_v, "V"),
                    samples
                ),
                Some("raise `tolerance` (e.g. `tolerance: 20 mV`), or cut the capture to one event".into()),
            );
        } else {
            self.err(path, e.to_string(), None);
        }
    }

    /// Each step in a mode with captured loads becomes a block of the captures' segments,
    /// repeated for the step's duration (the last pass cut short), or once for `for: capture`;
    /// the segments' modes are added to `modes`.
    pub(super) fn expand_captures(
        &mut self,
        profile: &mut [Step],
        modes: &mut Vec<Mode>,
        loads: &[Load],
    ) -> bool {
        let mut made: FastMap<usize, Option<Vec<Step>>> = FastMap::default();
        let mut ok = true;
        let mut added = 0;
        self.expand_in(
            profile, "profile", modes, loads, &mut made, &mut added, &mut ok,
        );
        ok
    }

    #[allow(clippy::too_many_arguments)]
    fn expand_in(
        &mut self,
        steps: &mut [Step],
        path: &str,
        modes: &mut Vec<Mode>,
        loads: &[Load],
        made: &mut FastMap<usize, Option<Vec<Step>>>,
        added: &mut usize,
        ok: &mut bool,
    ) {
        for (i, st) in steps.iter_mut().enumerate() {
            let here = format!("{path}[{i}]");
            match st {
                Step::Repeat { steps: inner, .. } => {
                    let p = format!("{here}.repeat");
                    self.expand_in(inner, &p, modes, loads, made, added, ok);
                }
                Step::Hold { mode, seconds } => {
                    let (m, secs) = (*mode, *seconds);
                    if let std::collections::hash_map::Entry::Vacant(e) = made.entry(m) {
                        e.insert(self.segment_modes(m, modes, loads, added));
                    }
                    let Some(block) = made.get(&m) else { continue };
                    match block {
                        None if secs == ONE_CAPTURE => {
                            self.err(
                                &format!("{here}.for"),
                                format!(
                                    "`for: capture` needs a mode with a load that follows a capture, and no load follows one in mode `{}`",
                                    modes[m].name
                                ),
                                Some("give a duration such as `for: 10 s`".into()),
                            );
                            *ok = false;
                        }
                        None => {}
                        Some(steps) if steps.is_empty() => *ok = false,
                        Some(steps) => {
                            let until = if secs == ONE_CAPTURE {
                                RepeatUntil::Times(1)
                            } else {
                                RepeatUntil::Seconds(secs)
                            };
                            *st = Step::Repeat {
                                steps: steps.clone(),
                                until,
                            };
                        }
                    }
                }
            }
        }
    }

    /// The steps of one pass of mode `m`'s captures (each a new mode), `None` when no load
    /// follows a capture in `m`, and an empty list after a reported problem.
    fn segment_modes(
        &mut self,
        m: usize,
        modes: &mut Vec<Mode>,
        loads: &[Load],
        added: &mut usize,
    ) -> Option<Vec<Step>> {
        let caps = captures_of_mode(&modes[m], loads);
        let first = caps.first()?;
        let name = modes[m].name.clone();
        if !self.same_durations(&name, &caps, loads) {
            return Some(Vec::new());
        }
        let span = first.1.duration_s;
        let cuts = segment_cuts(&caps, span);
        if *added + cuts.len() > MAX_CAPTURE_STEPS {
            self.err(
                &format!("modes.{name}"),
                format!(
                    "the captures of the design's modes add more than {MAX_CAPTURE_STEPS} steps"
                ),
                Some("raise the captures' `tolerance`, so that each has fewer segments".into()),
            );
            return Some(Vec::new());
        }
        *added += cuts.len();
        let mut out = Vec::with_capacity(cuts.len());
        let mut start = 0.0;
        let mut at = vec![0_usize; caps.len()];
        let mut ends: Vec<f64> = caps.iter().map(|(_, c)| c.segments[0].0).collect();
        for &end in &cuts {
            let mid = 0.5 * (start + end);
            let mut states = modes[m].load_states.clone();
            for (k, (l, c)) in caps.iter().enumerate() {
                while mid > ends[k] && at[k] + 1 < c.segments.len() {
                    at[k] += 1;
                    ends[k] += c.segments[at[k]].0;
                }
                states[*l] = Some(c.segments[at[k]].1);
            }
            let stage_on = modes[m].stage_on.clone();
            out.push(Step::Hold {
                mode: modes.len(),
                seconds: end - start,
            });
            modes.push(Mode {
                name: name.clone(),
                load_states: states,
                stage_on,
                rail_draws: Vec::new(),
                longest_hold_s: f64::INFINITY,
                part_of: Some(m),
            });
            start = end;
        }
        Some(out)
    }

    /// Whether the captures `caps` of mode `name` all last the same (reported if not: a mode's
    /// pieces take every capture's segment at the same time).
    fn same_durations(&mut self, name: &str, caps: &[(usize, &Captured)], loads: &[Load]) -> bool {
        let first = caps[0];
        for (l, c) in &caps[1..] {
            if (c.duration_s - first.1.duration_s).abs() > 1e-9 * first.1.duration_s {
                self.err(
                    &format!("modes.{name}"),
                    format!(
                        "in mode `{name}`, `{}` follows `{}` ({}) and `{}` follows `{}` ({}): captures in one mode must last the same",
                        loads[first.0].id,
                        first.1.file,
                        fmt_eng(first.1.duration_s, "s"),
                        loads[*l].id,
                        c.file,
                        fmt_eng(c.duration_s, "s")
                    ),
                    Some("cut the captures to the same event, or put the loads in different modes".into()),
                );
                return false;
            }
        }
        true
    }
}

/// The loads of `mode` that follow a capture in it, each with its capture.
fn captures_of_mode<'l>(mode: &Mode, loads: &'l [Load]) -> Vec<(usize, &'l Captured)> {
    mode.load_states
        .iter()
        .enumerate()
        .filter_map(|(l, s)| {
            let s = (*s)?;
            loads[l]
                .captured
                .iter()
                .find(|c| c.state == s)
                .map(|c| (l, c))
        })
        .collect()
}

/// The ends of a mode's pieces: the union of the boundaries of the segments of `caps`, which
/// all last `span`.
fn segment_cuts(caps: &[(usize, &Captured)], span: f64) -> Vec<f64> {
    // The union of the segments' boundaries: each piece takes every load's segment there.
    let mut cuts: Vec<f64> = Vec::new();
    for (_, c) in caps {
        let mut t = 0.0;
        for &(s, _) in &c.segments {
            t += s;
            cuts.push(t);
        }
    }
    cuts.sort_by(f64::total_cmp);
    // Boundaries closer than a billionth of the capture are one.
    cuts.dedup_by(|a, b| (*a - *b).abs() <= 1e-9 * span);
    if let Some(last) = cuts.last_mut() {
        *last = span;
    }
    cuts
}

/// Give `load`'s captured `state` the mean of the capture's `values` (a power when `power`, else
/// a current) and add the segments of `comp` as new states of the same name, recorded in
/// `load.captured`.
#[allow(clippy::too_many_arguments)]
fn load_segments(
    load: &mut Load,
    state: usize,
    c: &CaptureSpec,
    cap: &Capture,
    values: &[f64],
    comp: &Compressed,
    power: bool,
    tolerance_v: f64,
) {
    let make = |x: f64| {
        if power {
            Draw::Power(x)
        } else {
            Draw::Current(x)
        }
    };
    let duration_s = cap.duration_s();
    let total: f64 = values.iter().zip(cap.dt()).map(|(v, t)| v * t).sum();
    let name = load.states[state].0.clone();
    load.states[state].1 = make(total / duration_s);
    let mut segments = Vec::with_capacity(comp.segments.len());
    for s in &comp.segments {
        segments.push((s.seconds, load.states.len()));
        load.states.push((name.clone(), make(s.value)));
    }
    load.captured.push(Captured {
        state,
        file: c.capture.clone(),
        samples: cap.len(),
        duration_s,
        segments,
        tolerance_v,
        bound_v: comp.bound_v,
    });
}

/// The lowest voltage of a rail while the product runs: the pack's cutoff, or a stage's
/// setpoint (a switch passes its input's).
fn rail_low(rail: usize, pack: &Pack, stages: &[Stage]) -> f64 {
    if rail == 0 {
        return pack.cutoff_v();
    }
    let s = &stages[rail - 1];
    if s.kind == StageKind::Switch {
        rail_low(s.input, pack, stages)
    } else {
        s.setpoint
    }
}

/// How much the pack's current moves per ampere the rail's load moves, between `lo` and `hi`
/// amperes at the load: 1 through linear regulators and switches; through a converter, the
/// slope of its input power over that range at its lowest input voltage (at least 1 for a buck,
/// which passes its current through in dropout).
fn pack_gain(rail: usize, pack: &Pack, stages: &[Stage], lo: f64, hi: f64) -> f64 {
    if rail == 0 {
        return 1.0;
    }
    let s = &stages[rail - 1];
    let vin = rail_low(s.input, pack, stages);
    let g = if s.kind.is_switching() && vin > 0.0 {
        let p = |i: f64| s.setpoint * i + s.loss.loss(vin, s.setpoint, i, s.quiescent);
        let slope = if hi > lo {
            (p(hi) - p(lo)) / (vin * (hi - lo))
        } else {
            // One level only: the ratio at it, with a small step.
            let h = hi.abs().max(1e-6) * 1e-3;
            (p(hi + h) - p(hi)) / (vin * h)
        };
        if s.kind == StageKind::Buck {
            slope.max(1.0)
        } else {
            slope
        }
    } else {
        1.0
    };
    let g = if g.is_finite() && g > 0.0 { g } else { 1.0 };
    g * pack_gain(s.input, pack, stages, lo * g, hi * g)
}
