//! The operating point of a source with internal resistance feeding a nonlinear demand: the
//! terminal voltage V at which the demand F(V) equals what the source line gives,
//! (v_open - V) / r. Found by a bracketed search, so it always ends; where no such voltage
//! exists the demand exceeds what the source can give, and that is reported as a collapse.

use super::numerics::{
    BISECT_MAX_ITER, BISECT_REL, FIXED_POINT_MAX_ITER, FIXED_POINT_REL, SCAN_STEPS,
};

/// Where the source settles.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Settle {
    /// No terminal voltage makes demand and supply meet: the source collapses.
    Collapse,
    /// The operating point lies between two voltages `v_a >= v_b` a hair apart: evaluate the
    /// demand at both and take `alpha` of the first and `1 - alpha` of the second. Where the
    /// demand is continuous both are the same point; where it jumps (a converter at a state
    /// boundary) the blend is the time average of a converter switching between its two states,
    /// which holds the terminal voltage at the boundary.
    Point {
        /// Upper voltage (demand at least the line current).
        v_a: f64,
        /// Lower voltage (demand at most the line current).
        v_b: f64,
        /// Weight of the evaluation at `v_a`.
        alpha: f64,
        /// The source current at the point.
        current: f64,
    },
}

/// The relative difference of the demand at the two ends of a settled bracket under which the
/// demand counts as continuous there (the bracket is [`BISECT_REL`] wide: a smooth demand moves
/// by about that share times its slope, far below this; a converter switching state moves it by
/// its whole quiescent or loss step).
const CONTINUOUS_REL: f64 = 1e-11;

fn finite_or_inf(x: f64) -> f64 {
    if x.is_nan() { f64::INFINITY } else { x }
}

/// Settle a source of open-circuit voltage `v_open` and resistance `r` feeding `demand(V)`
/// (current drawn at terminal voltage V), taking the highest terminal voltage that balances
/// (the lowest source current), as DESIGN section 5 asks.
///
/// # Formula
///
/// Find the highest V in (0, v_open] where g(V) = (v_open - V) / r - F(V) changes sign from
/// negative (above) to non-negative (below). For a constant-power load on a resistive source the
/// answer is V = (v_open + sqrt(v_open^2 - 4 P r)) / 2, and none exists above
/// P_max = v_open^2 / (4 r) (maximum power transfer; Alexander & Sadiku, Fundamentals of Electric
/// Circuits, 5th ed., section 4.8, from memory).
///
/// (The worked case of a constant-power load is the unit test `constant_power_on_a_resistive_source`.)
pub fn settle(v_open: f64, r: f64, demand: &mut dyn FnMut(f64) -> f64) -> Settle {
    let mut f = |v: f64| finite_or_inf(demand(v));
    let f_top = match settled_at_once(v_open, r, &mut f) {
        Ok(f_top) => f_top,
        Err(settled) => return settled,
    };
    let g = |v: f64, fv: f64| (v_open - v) / r - fv;
    // Fixed-point iteration on the current from the no-sag guess: for a demand that rises as the
    // voltage falls it climbs monotonically to the lowest-current balance without passing it.
    // The lowest voltage known to be above the balance, and the demand there.
    let (mut v_upper, mut f_upper) = (v_open, f_top);
    let mut i = f_top;
    // The iterate before `i`, for the extrapolation of a geometric approach.
    let mut before: Option<f64> = None;
    for _ in 0..FIXED_POINT_MAX_ITER {
        let v = v_open - r * i;
        if v <= 0.0 {
            break;
        }
        let fv = f(v);
        if fv.to_bits() == i.to_bits() {
            // The demand is the same at v as at the iterate above it (a constant current): v
            // is where the line gives it, and the iteration, which never passes the highest
            // balance, stands on it.
            return Settle::Point {
                v_a: v,
                v_b: v,
                alpha: 1.0,
                current: fv,
            };
        }
        if g(v, fv) >= 0.0 {
            // The balance is at or just above v: try a bracket a few units in the last place
            // wide before bisecting the whole step.
            let up = v + (r * fv * 8.0 * FIXED_POINT_REL).max(8.0 * f64::EPSILON * v_open);
            if up < v_upper {
                let fu = f(up);
                if g(up, fu) < 0.0 {
                    return bisect(v_open, r, &mut f, (v, fv), (up, fu));
                }
            }
            return bisect(v_open, r, &mut f, (v, fv), (v_upper, f_upper));
        }
        (v_upper, f_upper) = (v, fv);
        if fv - i <= FIXED_POINT_REL * fv {
            // Converged from below: a point a hair lower should already balance.
            if let Ok(s) = around(v_open, r, &mut f, fv, (v_upper, f_upper)) {
                return s;
            }
        } else if let Some(ib) = before {
            // The currents climb geometrically (each step under a quarter of the one before,
            // a demand far from the source's limit): Aitken's extrapolation of the sequence
            // (Aitken's delta-squared process; from memory) lands within rounding of the
            // balance after three or four iterates instead of six to eight. A probe below it
            // that does not balance is still above the balance: the iteration goes on from it.
            let (d1, d2) = (i - ib, fv - i);
            if d1 > 0.0 && d2 > 0.0 && d2 < 0.25 * d1 {
                let q = d2 / d1;
                match around(
                    v_open,
                    r,
                    &mut f,
                    fv + d2 * q / (1.0 - q),
                    (v_upper, f_upper),
                ) {
                    Ok(s) => return s,
                    Err(Some((p, fp))) => {
                        (v_upper, f_upper) = (p, fp);
                        (before, i) = (None, fp);
                        continue;
                    }
                    Err(None) => {}
                }
            }
        }
        before = Some(i);
        i = fv;
    }
    // Slow or no convergence (near the power limit, or a demand that falls with voltage).
    scan_down(v_open, r, &mut f, (v_upper, f_upper))
}

/// The balance bracketed around `est`, an estimate of its current, with `upper` the lowest
/// voltage known to be above it (and the demand there): a point a hair below `est`'s voltage
/// should balance, and one a hair above it should not (a bracket of a few units in the last
/// place, a dozen halvings from a single voltage rather than some fifty from the last iterate).
/// The line current (v_open - V) / r loses digits when r I is small next to v_open: the hair
/// is at least a few units in the last place of v_open. `Err` with the lower point (and the
/// demand there) where it does not balance yet, `Err(None)` where it lies at or below 0 V.
fn around(
    v_open: f64,
    r: f64,
    f: &mut dyn FnMut(f64) -> f64,
    est: f64,
    upper: (f64, f64),
) -> Result<Settle, Option<(f64, f64)>> {
    let g = |v: f64, fv: f64| (v_open - v) / r - fv;
    let margin = (r * est * 8.0 * FIXED_POINT_REL).max(8.0 * f64::EPSILON * v_open);
    let probe = v_open - r * est - margin;
    if probe <= 0.0 {
        return Err(None);
    }
    let fp = f(probe);
    if g(probe, fp) < 0.0 {
        return Err(Some((probe, fp)));
    }
    let up = v_open - r * est + margin;
    if up < upper.0 {
        let fu = f(up);
        if g(up, fu) < 0.0 {
            return Ok(bisect(v_open, r, f, (probe, fp), (up, fu)));
        }
    }
    Ok(bisect(v_open, r, f, (probe, fp), upper))
}

/// The cases settled without a search: a source with no voltage (a point at 0 V when nothing
/// is drawn, else a collapse), a source with no resistance or a load drawing nothing at
/// `v_open`, and a demand with no finite value there. Otherwise `Ok` with the demand at
/// `v_open`.
fn settled_at_once(v_open: f64, r: f64, f: &mut dyn FnMut(f64) -> f64) -> Result<f64, Settle> {
    if v_open.is_nan() || v_open <= 0.0 {
        let i = f(0.0);
        return Err(if i == 0.0 {
            Settle::Point {
                v_a: 0.0,
                v_b: 0.0,
                alpha: 1.0,
                current: 0.0,
            }
        } else {
            Settle::Collapse
        });
    }
    let f_top = f(v_open);
    if r <= 0.0 || f_top == 0.0 {
        return Err(if f_top.is_finite() {
            Settle::Point {
                v_a: v_open,
                v_b: v_open,
                alpha: 1.0,
                current: f_top,
            }
        } else {
            Settle::Collapse
        });
    }
    if !f_top.is_finite() {
        return Err(Settle::Collapse);
    }
    Ok(f_top)
}

/// Scan down from `v_upper`, a voltage known to be above the balance (with the demand there),
/// in [`SCAN_STEPS`] steps, and bisect the first step that crosses it; a collapse when none
/// does.
fn scan_down(
    v_open: f64,
    r: f64,
    f: &mut dyn FnMut(f64) -> f64,
    (v_upper, f_upper): (f64, f64),
) -> Settle {
    let g = |v: f64, fv: f64| (v_open - v) / r - fv;
    let step = v_upper / SCAN_STEPS as f64;
    let mut prev = (v_upper, f_upper);
    for j in 1..SCAN_STEPS {
        let v = v_upper - step * j as f64;
        let fv = f(v);
        if g(v, fv) >= 0.0 {
            return bisect(v_open, r, f, (v, fv), prev);
        }
        prev = (v, fv);
    }
    Settle::Collapse
}

/// A first narrowing of the bracket [lo, hi] (g(lo) >= 0 > g(hi), each end with the demand
/// there) before it is halved: where g is close to a straight line across it (a smooth demand,
/// the bracket a few parts in 1e13 wide), the line's zero is the balance to well within the
/// bisection's width, and two probes a hair either side of it ([`BISECT_REL`] apart) bracket it
/// at once, where halving would take a dozen evaluations. Where they do not (a jump in the
/// demand), the bracket is narrowed as far as they show and halving goes on from there. A
/// bracket already within four halvings of the width is returned as it is.
fn secant_pair(
    v_open: f64,
    r: f64,
    f: &mut dyn FnMut(f64) -> f64,
    lo: (f64, f64),
    hi: (f64, f64),
) -> ((f64, f64), (f64, f64)) {
    let g = |v: f64, fv: f64| (v_open - v) / r - fv;
    let (g_lo, g_hi) = (g(lo.0, lo.1), g(hi.0, hi.1));
    if hi.0 - lo.0 <= 16.0 * BISECT_REL * hi.0 || !(g_lo.is_finite() && g_hi.is_finite()) {
        return (lo, hi);
    }
    let x = lo.0 + (hi.0 - lo.0) * (g_lo / (g_lo - g_hi));
    let half = 0.25 * BISECT_REL * x;
    let (a, b) = (x - half, x + half);
    if !(a > lo.0 && b < hi.0) {
        return (lo, hi);
    }
    let fa = f(a);
    if g(a, fa) < 0.0 {
        return (lo, (a, fa));
    }
    let fb = f(b);
    if g(b, fb) < 0.0 {
        ((a, fa), (b, fb))
    } else {
        ((b, fb), hi)
    }
}

/// Narrow [lo, hi] (g(lo) >= 0 > g(hi)) to a hair and weigh the two ends. Each end comes with
/// the demand there (the demand is a function of the voltage alone: the values already found
/// are not asked for again).
fn bisect(
    v_open: f64,
    r: f64,
    f: &mut dyn FnMut(f64) -> f64,
    lo: (f64, f64),
    hi: (f64, f64),
) -> Settle {
    let ((mut lo, mut fb), (mut hi, mut fa)) = secant_pair(v_open, r, f, lo, hi);
    for _ in 0..BISECT_MAX_ITER {
        if hi - lo <= BISECT_REL * hi {
            break;
        }
        let mid = 0.5 * (lo + hi);
        let fm = f(mid);
        if (v_open - mid) / r - fm >= 0.0 {
            (lo, fb) = (mid, fm);
        } else {
            (hi, fa) = (mid, fm);
        }
    }
    let target = (v_open - 0.5 * (hi + lo)) / r;
    let alpha = if fa.is_finite() && fa - fb > f64::EPSILON * fa.abs().max(1e-300) {
        ((target - fb) / (fa - fb)).clamp(0.0, 1.0)
    } else {
        0.5
    };
    if !fa.is_finite() && !fb.is_finite() {
        return Settle::Collapse;
    }
    let (alpha, fa) = if fa.is_finite() {
        (alpha, fa)
    } else {
        (0.0, 0.0)
    };
    if fa.is_finite() && (fa - fb).abs() <= CONTINUOUS_REL * fa.abs().max(fb.abs()) {
        // The demand is continuous across the bracket (no converter at a state boundary):
        // both ends are the same point to within rounding, so the upper one stands for it and
        // the caller walks the tree once instead of twice.
        return Settle::Point {
            v_a: hi,
            v_b: hi,
            alpha: 1.0,
            current: fa,
        };
    }
    Settle::Point {
        v_a: hi,
        v_b: lo,
        alpha,
        current: alpha * fa + (1.0 - alpha) * fb,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(s: Settle) -> (f64, f64) {
        match s {
            Settle::Point {
                v_a, v_b, current, ..
            } => (0.5 * (v_a + v_b), current),
            Settle::Collapse => panic!("unexpected collapse"),
        }
    }

    #[test]
    fn constant_power_on_a_resistive_source() {
        // REFERENCES C35 (algebra of C34): 3.7 V, 0.1 Ω, 5 W -> I = 1.405 A, V = 3.560 V;
        // boost 2.5 W at 90 % (2.778 W) -> 0.7666 A, 3.623 V; coin cell 3.0 V, 20 Ω,
        // 20 mW -> 6.993 mA, 2.860 V.
        for (voc, r, p) in [(3.7, 0.1, 5.0), (3.7, 0.1, 2.5 / 0.9), (3.0, 20.0, 0.02)] {
            let (v, i) = point(settle(voc, r, &mut |v: f64| p / v));
            let v_exact = 0.5 * (voc + (voc * voc - 4.0 * p * r).sqrt());
            assert!(
                ((v - v_exact) / v_exact).abs() < 1e-12,
                "{voc} {r} {p}: {v}"
            );
            assert!(((v * i - p) / p).abs() < 1e-12);
        }
    }

    #[test]
    fn a_geometric_approach_is_extrapolated() {
        // The same closed form as above (REFERENCES C35): far from the power limit the currents
        // climb geometrically and Aitken's extrapolation lands on the balance: the search asks
        // for the demand five times, the plain iteration seven.
        let (voc, r, p) = (3.0, 0.3, 0.1);
        let mut calls = 0;
        let (v, i) = point(settle(voc, r, &mut |v: f64| {
            calls += 1;
            p / v
        }));
        let v_exact = 0.5 * (voc + (voc * voc - 4.0 * p * r).sqrt());
        assert!(((v - v_exact) / v_exact).abs() < 1e-13, "{v} vs {v_exact}");
        assert!(((v * i - p) / p).abs() < 1e-12);
        assert!(calls <= 5, "{calls} demand evaluations");
    }

    #[test]
    fn a_constant_current_settles_at_once() {
        // Ohm's law: 20 mA through 15 ohm from 3 V leaves 2.7 V. The demand is the same at the
        // first iterate as at the open-circuit voltage, so two evaluations settle it.
        let mut calls = 0;
        let (v, i) = point(settle(3.0, 15.0, &mut |_| {
            calls += 1;
            0.02
        }));
        assert!(
            (v - 2.7).abs() < 1e-14 && (i - 0.02).abs() < 1e-17,
            "{v} {i}"
        );
        assert_eq!(calls, 2);
    }

    #[test]
    fn maximum_power_transfer_limit() {
        // Maximum power transfer (Alexander & Sadiku, Fundamentals of Electric Circuits, 5th
        // ed., section 4.8; from memory): P_max = Voc^2 / 4R at V = Voc / 2.
        let (voc, r) = (3.0, 20.0);
        let pmax = voc * voc / (4.0 * r);
        let (v, _) = point(settle(voc, r, &mut |v: f64| 0.999 * pmax / v));
        assert!(
            v > voc / 2.0 && v < 0.52 * voc,
            "just below P_max solves near Voc/2: {v}"
        );
        assert_eq!(
            settle(voc, r, &mut |v: f64| 1.001 * pmax / v),
            Settle::Collapse
        );
    }

    #[test]
    fn resistive_and_constant_current_loads() {
        // A 10 Ω load on 3 V with 0.5 Ω: I = 3 / 10.5 (Ohm's law).
        let (_, i) = point(settle(3.0, 0.5, &mut |v: f64| v / 10.0));
        assert!((i - 3.0 / 10.5).abs() < 1e-12);
        let (v, i) = point(settle(3.0, 0.5, &mut |_| 0.2));
        assert!((i - 0.2).abs() < 1e-12 && (v - 2.9).abs() < 1e-12);
        // A constant current the source cannot give even at 0 V.
        assert_eq!(settle(3.0, 0.5, &mut |_| 7.0), Settle::Collapse);
    }

    #[test]
    fn a_smooth_demand_settles_in_few_evaluations() {
        // A 10 Ω load behind 0.5 Ω on 3 V (Ohm's law: 3 / 10.5 A) and a constant power on a
        // resistive source (the closed form above): the line through the bracket's ends finds
        // the balance, so the search ends in a handful of evaluations rather than dozens.
        let mut calls = 0;
        let (_, i) = point(settle(3.0, 0.5, &mut |v: f64| {
            calls += 1;
            v / 10.0
        }));
        assert!((i - 3.0 / 10.5).abs() < 1e-12);
        assert!(calls <= 8, "{calls} evaluations");
        let (voc, r, p) = (3.7, 0.1, 5.0);
        calls = 0;
        let (v, _) = point(settle(voc, r, &mut |v: f64| {
            calls += 1;
            p / v
        }));
        let v_exact = 0.5 * (voc + (voc * voc - 4.0 * p * r).sqrt());
        assert!(((v - v_exact) / v_exact).abs() < 1e-12);
        assert!(calls <= 16, "{calls} evaluations");
    }

    #[test]
    fn holds_at_a_jump_with_no_balance_on_either_side() {
        // Demand 1 A above 2.5 V and 0.2 A below: with 3 V and 1 Ω neither side balances, so the
        // voltage is held at 2.5 V and the current is the line's 0.5 A.
        let (v, i) = point(settle(3.0, 1.0, &mut |v: f64| {
            if v >= 2.5 { 1.0 } else { 0.2 }
        }));
        assert!((v - 2.5).abs() < 1e-12 && (i - 0.5).abs() < 1e-9);
    }

    #[test]
    fn takes_the_lower_current_of_two_balances() {
        // Demand 0.2 A above 2.5 V and 1 A below, 3 V, 1 Ω: both 2.8 V (0.2 A) and 2.0 V (1 A)
        // balance; the lower current wins.
        let (v, i) = point(settle(3.0, 1.0, &mut |v: f64| {
            if v > 2.5 { 0.2 } else { 1.0 }
        }));
        assert!((v - 2.8).abs() < 1e-12 && (i - 0.2).abs() < 1e-12);
    }
}
