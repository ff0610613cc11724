//! The fast solver's pass skipping, with error control: after an exact pass, many passes at once
//! at the rates of a pass simulated in the middle of the stretch (second order in the state of
//! charge), the polarization relaxed toward its periodic value, then at Simpson's rates from the
//! passes at its start, middle and end. The stretch is halved while Simpson and the midpoint rule
//! differ by more than a set share, and whenever a simulated pass stops the product, so that the
//! last passes before the end are always executed exactly. Pass counts are `f64` (whole numbers):
//! a profile of nanosecond steps may need more passes than a `u64` holds.

#[allow(clippy::wildcard_imports)]
use super::*;
use crate::solve::tolerance::SKIP_REL_ERR;

impl<'a> Sim<'a> {
    /// Advance `k` passes of length `pass` at the rates of `delta`.
    pub(super) fn advance(&mut self, k: f64, pass: f64, delta: &Delta) {
        self.t.add(k * pass);
        self.s.add(-k * delta.ds);
        self.ledger.add_scaled(&delta.ledger, k);
        // Polarization relaxes toward its periodic value over the skipped passes.
        let decay = delta.decay.powf(k);
        self.vp = delta.vp_star + (self.vp - delta.vp_star) * decay;
    }

    /// How many passes the fast solver may skip after a pass that changed things by `delta`,
    /// with `remaining` passes of the block left.
    pub(super) fn plan_skip(&self, delta: &Delta, remaining: f64, pass: f64) -> f64 {
        let to_horizon = ((self.c.opt.horizon_s - self.now()) / pass).floor() - 1.0;
        let mut k = if delta.ds > 0.0 {
            let by_ds = (SKIP_MAX_DS / delta.ds).floor();
            let by_empty = (self.soc() / delta.ds).floor() - 2.0;
            by_ds.min(by_empty)
        } else if self.c.opt.exact || delta.ds < 0.0 {
            return 0.0;
        } else {
            // Nothing changes from pass to pass: skip to the horizon.
            f64::INFINITY
        };
        k = k.min(to_horizon).min(remaining - 1.0);
        if k.is_finite() && k > 0.0 {
            k.floor()
        } else {
            0.0
        }
    }

    /// Execute `n` passes (a whole number, possibly infinite) of `steps`, each `pass` seconds;
    /// true if the product stopped.
    pub(super) fn passes(&mut self, steps: &[Step], pass: f64, n: f64) -> bool {
        let mut done = 0.0;
        let mut last: Option<Delta> = None;
        // Passes within which a skip found the product stopping (from the current state).
        let mut stop_within: Option<f64> = None;
        while done < n {
            if let Some(delta) = last.as_ref() {
                let mut k = self.plan_skip(delta, n - done, pass);
                if let Some(c) = stop_within {
                    k = k.min(c);
                }
                let allowed = !self.c.opt.exact || delta.ds == 0.0;
                if allowed && k >= SKIP_MIN_PASSES as f64 {
                    let mut found = None;
                    match self.skip(steps, pass, k, delta, &mut found) {
                        None => return true,
                        Some((j, d)) => {
                            done += j;
                            last = Some(d);
                            stop_within =
                                found.or(stop_within).map(|c| c - j).filter(|&c| c >= 1.0);
                            continue;
                        }
                    }
                }
            }
            let Some(delta) = self.run_pass(steps, pass) else {
                return true;
            };
            last = Some(delta);
            done += 1.0;
            stop_within = stop_within.map(|c| c - 1.0).filter(|&c| c >= 1.0);
            if let Some(report) = self.c.progress {
                let s0 = self.c.d.pack.start_soc;
                let used = if s0 > 0.0 { 1.0 - self.soc() / s0 } else { 0.0 };
                report(used.max(self.now() / self.c.opt.horizon_s).clamp(0.0, 1.0));
            }
        }
        false
    }

    /// Skip at most `k` passes, then execute one; `None` if the product stopped, else the passes
    /// done and the last pass's changes. `delta` holds the rates at the start of the stretch.
    ///
    /// The rates of a pass in the middle of the stretch carry the state to its end, where a pass
    /// is simulated too. With the rates at start, middle and end, Simpson's rule gives the
    /// stretch's totals, and the difference from the midpoint rule, k |r0 - 2 rm + rk| / 6,
    /// estimates the error; beyond [`SKIP_REL_ERR`] of the stretch's fall in state of charge the
    /// stretch is halved. It is halved too whenever a simulated pass stops the product;
    /// `stop_within` then records within how many passes of the start the product stops, so the
    /// caller's next stretches end before it and the last passes run exactly. The accepted
    /// stretch is advanced at Simpson's rates and the pass after it executed.
    ///
    /// Below [`SKIP_MIN_PASSES`] the pass is executed exactly.
    pub(super) fn skip(
        &mut self,
        steps: &[Step],
        pass: f64,
        mut k: f64,
        delta: &Delta,
        stop_within: &mut Option<f64>,
    ) -> Option<(f64, Delta)> {
        let min = SKIP_MIN_PASSES as f64;
        while k >= min && !self.c.failed() {
            let h = (k / 2.0).floor();
            let mut mid = self.clone();
            mid.advance(h, pass, delta);
            let Some(rm) = mid.run_pass(steps, pass) else {
                *stop_within = Some(h + 1.0);
                k = h;
                continue;
            };
            if rm.ds.is_nan() || (rm.ds <= 0.0 && delta.ds > 0.0) {
                // A pass in the middle that gains charge cannot be extrapolated: pass by pass.
                break;
            }
            let mut probe = self.clone();
            probe.advance(k, pass, &rm);
            let Some(rk) = probe.run_pass(steps, pass) else {
                *stop_within = Some(k + 1.0);
                k = h;
                continue;
            };
            let bend = (delta.ds - 2.0 * rm.ds + rk.ds).abs() / 6.0;
            if bend.is_nan() || bend > SKIP_REL_ERR * rm.ds.abs() {
                k = h;
                continue;
            }
            let rates = Delta::simpson(delta, &rm, &rk);
            let mut trial = self.clone();
            trial.advance(k, pass, &rates);
            let Some(done) = trial.run_pass(steps, pass) else {
                *stop_within = Some(k + 1.0);
                k = h;
                continue;
            };
            trial.trace_skipped(self, steps, pass, k, &rates);
            *self = trial;
            return Some((k + 1.0, done));
        }
        self.run_pass(steps, pass).map(|d| (1.0, d))
    }

    /// With a trace, fill the skipped stretch: passes simulated at a few places inside it (from
    /// `base`, at the rates used for the skip) give their points to the trace and nothing else,
    /// so a run with a trace has exactly the result of one without.
    pub(super) fn trace_skipped(
        &mut self,
        base: &Sim<'a>,
        steps: &[Step],
        pass: f64,
        k: f64,
        rates: &Delta,
    ) {
        if self.tracer.is_none() {
            return;
        }
        let probes = (TRACE_PROBES_PER_SKIP as f64).min(k);
        let mut j = 1.0;
        while j < probes {
            let mut probe = base.clone();
            probe.advance((j * k / probes).floor(), pass, rates);
            probe.steps(steps, pass);
            if let (Some(mine), Some(theirs)) = (&mut self.tracer, &probe.tracer) {
                for p in theirs.points() {
                    mine.offer(p);
                }
            }
            j += 1.0;
        }
    }
}
