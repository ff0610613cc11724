//! The fast solver's pass skipping: after an exact pass, many passes at once at mid-stretch
//! rates, the polarization relaxed toward its periodic value, and the stopping pass found by
//! bisection on the number of skipped passes.

#[allow(clippy::wildcard_imports)]
use super::*;

impl<'a> Sim<'a> {
    /// Advance `k` passes of length `pass` at the rates of `delta`.
    pub(super) fn advance(&mut self, k: u64, pass: f64, delta: &Delta) {
        let kf = k as f64;
        self.t += kf * pass;
        self.s -= kf * delta.ds;
        self.ledger.add_scaled(&delta.ledger, kf);
        // Polarization relaxes toward its periodic value over the skipped passes.
        let decay = delta.decay.powf(kf);
        self.vp = delta.vp_star + (self.vp - delta.vp_star) * decay;
    }

    /// How many passes the fast solver may skip after a pass that changed things by `delta`.
    pub(super) fn plan_skip(&self, delta: &Delta, remaining: u64, pass: f64) -> u64 {
        let to_horizon = ((self.c.opt.horizon_s - self.t) / pass).floor() - 1.0;
        let mut k = if delta.ds > 0.0 {
            let by_ds = (SKIP_MAX_DS / delta.ds).floor();
            let by_empty = (self.s / delta.ds).floor() - 2.0;
            by_ds.min(by_empty)
        } else if self.c.opt.exact || delta.ds < 0.0 {
            return 0;
        } else {
            // Nothing changes from pass to pass: skip to the horizon.
            f64::INFINITY
        };
        k = k.min(to_horizon).min(remaining.saturating_sub(1) as f64);
        if k.is_finite() && k > 0.0 {
            k as u64
        } else {
            0
        }
    }

    /// Execute `n` passes of `steps` (each `pass` seconds); true if the product stopped.
    pub(super) fn passes(&mut self, steps: &[Step], pass: f64, n: u64) -> bool {
        let mut done = 0u64;
        let mut last: Option<Delta> = None;
        while done < n {
            if let Some(delta) = last.as_ref() {
                let k = self.plan_skip(delta, n - done, pass);
                let allowed = !self.c.opt.exact || delta.ds == 0.0;
                if allowed && k >= SKIP_MIN_PASSES {
                    match self.skip(steps, pass, k, delta) {
                        None => return true,
                        Some((j, d)) => {
                            done += j;
                            last = Some(d);
                            continue;
                        }
                    }
                }
            }
            let before = self.mark();
            if self.steps(steps, pass) {
                return true;
            }
            last = Some(Delta::between(&before, self, pass));
            done += 1;
            if let Some(report) = self.c.progress {
                let s0 = self.c.d.pack.start_soc;
                let used = if s0 > 0.0 { 1.0 - self.s / s0 } else { 0.0 };
                report(used.max(self.t / self.c.opt.horizon_s).clamp(0.0, 1.0));
            }
        }
        false
    }

    /// Skip `k` passes then execute one; `None` if the product stopped, else the passes done and
    /// the last pass's changes.
    pub(super) fn skip(
        &mut self,
        steps: &[Step],
        pass: f64,
        k: u64,
        delta: &Delta,
    ) -> Option<(u64, Delta)> {
        let base = self.clone();
        // Rates of a pass in the middle of the stretch (second-order in SoC).
        let h = k / 2;
        let mut mid = base.clone();
        mid.advance(h, pass, delta);
        let mm = mid.mark();
        if mid.steps(steps, pass) {
            return self.finish_within(&base, steps, pass, delta, h);
        }
        let rates = Delta::between(&mm, &mid, pass);
        if rates.ds.is_nan() || (rates.ds <= 0.0 && delta.ds > 0.0) {
            // A pass in the middle that gains charge cannot be extrapolated: go pass by pass.
            let before = self.mark();
            if self.steps(steps, pass) {
                return None;
            }
            return Some((1, Delta::between(&before, self, pass)));
        }
        self.advance(k, pass, &rates);
        let before = self.mark();
        if self.steps(steps, pass) {
            return self.finish_within(&base, steps, pass, &rates, k);
        }
        let done = Delta::between(&before, self, pass);
        self.trace_skipped(&base, steps, pass, k, &rates);
        Some((k + 1, done))
    }

    /// With a trace, fill the skipped stretch: passes simulated at a few places inside it (from
    /// `base`, at the rates used for the skip) give their points to the trace and nothing else,
    /// so a run with a trace has exactly the result of one without.
    pub(super) fn trace_skipped(
        &mut self,
        base: &Sim<'a>,
        steps: &[Step],
        pass: f64,
        k: u64,
        rates: &Delta,
    ) {
        if self.tracer.is_none() {
            return;
        }
        let probes = TRACE_PROBES_PER_SKIP.min(k);
        for j in 1..probes {
            let mut probe = base.clone();
            probe.advance(j * k / probes, pass, rates);
            probe.steps(steps, pass);
            if let (Some(mine), Some(theirs)) = (&mut self.tracer, &probe.tracer) {
                for p in theirs.points() {
                    mine.offer(p);
                }
            }
        }
    }

    /// The product stopped during the pass after `kmax` skipped passes from `base`: find the
    /// first pass that stops it and execute it exactly.
    pub(super) fn finish_within(
        &mut self,
        base: &Sim<'a>,
        steps: &[Step],
        pass: f64,
        delta: &Delta,
        kmax: u64,
    ) -> Option<(u64, Delta)> {
        let stops = |j: u64| {
            let mut probe = base.clone();
            probe.advance(j, pass, delta);
            probe.steps(steps, pass)
        };
        let (mut lo, mut hi) = (0u64, kmax);
        while lo < hi {
            let m = lo + (hi - lo) / 2;
            if stops(m) {
                hi = m;
            } else {
                lo = m + 1;
            }
        }
        *self = base.clone();
        self.advance(lo, pass, delta);
        let before = self.mark();
        if self.steps(steps, pass) {
            return None;
        }
        Some((lo + 1, Delta::between(&before, self, pass)))
    }
}
