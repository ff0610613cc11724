//! Rated capacity and Peukert exponent from the capacities delivered at several currents.

use super::FitError;
use crate::units::fmt_eng;

/// The conservative Peukert factor f(I) = max(1, I / I_rated)^(k - 1): the effective current is
/// I f(I), so a full cell delivers Q / f(I) at the constant current I.
///
/// # Formula
///
/// I_eff = I max(1, I / I_rated)^(k - 1) (DESIGN section 5: no capacity bonus below the rated
/// current).
///
/// # Examples
///
/// ```
/// use joulepath::fit::peukert_factor;
/// assert!((peukert_factor(0.1, 0.2, 1.2) - 1.0).abs() < 1e-12);
/// assert!((peukert_factor(0.4, 0.2, 1.2) - 2f64.powf(0.2)).abs() < 1e-12);
/// ```
pub fn peukert_factor(current_a: f64, rated_a: f64, k: f64) -> f64 {
    (current_a / rated_a).max(1.0).powf(k - 1.0)
}

/// The Peukert exponent from the discharge times t1, t2 at two constant currents I1, I2.
///
/// # Formula
///
/// k = (ln t2 - ln t1) / (ln I1 - ln I2), from t = Cp / I^k (the one-ampere form; REFERENCES
/// C15 two-point fit). It equals [`peukert_from_capacities`] with C = I t.
///
/// # Examples
///
/// ```
/// // REFERENCES C15: (5 A, 20 h) and (10 A, 8.7055 h) give k = 1.200.
/// let k = joulepath::fit::peukert_from_times(5.0, 20.0, 10.0, 8.7055);
/// assert!((k - 1.2).abs() < 5e-5);
/// ```
pub fn peukert_from_times(i1: f64, t1: f64, i2: f64, t2: f64) -> f64 {
    (t2.ln() - t1.ln()) / (i1.ln() - i2.ln())
}

/// The Peukert exponent from the capacities C1, C2 delivered at two constant currents I1, I2
/// (both at or above the rated current).
///
/// # Formula
///
/// k = 1 + ln(C1 / C2) / ln(I2 / I1), from C = Q (I / I_rated)^(1 - k), the conservative form
/// of DESIGN section 5 above the rated current. With C = I t it is the same number as the
/// two-point time formula of [`peukert_from_times`]: both forms make C proportional to
/// I^(1 - k), they differ only in the constant.
///
/// # Examples
///
/// ```
/// // The REFERENCES C15 example in capacities: 100 Ah at 5 A, 87.055 Ah at 10 A.
/// let k = joulepath::fit::peukert_from_capacities(5.0, 100.0, 10.0, 87.055);
/// assert!((k - 1.2).abs() < 5e-5);
/// ```
pub fn peukert_from_capacities(i1: f64, c1: f64, i2: f64, c2: f64) -> f64 {
    1.0 + (c1 / c2).ln() / (i2 / i1).ln()
}

/// The capacity law fitted to the curves' delivered capacities.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct RateFit {
    /// Rated capacity, C.
    pub q_c: f64,
    /// Peukert exponent, within [1, 2].
    pub k: f64,
    /// The exponent before it was held at 1 (equal to `k` unless clamped).
    pub raw_k: f64,
}

/// Least squares of ln C_j = ln Q - (k - 1) x_j with x_j = max(0, ln(I_j / I_rated)): the
/// conservative law in logarithms. With two currents the line passes through both points and k
/// is the two-point formula. A k below 1 (capacity rising with current) is held at 1, with
/// Q the geometric mean of the capacities.
///
/// `points` holds (current A, capacity C) pairs.
pub(crate) fn fit_rate(points: &[(f64, f64)], rated_a: f64) -> Result<RateFit, FitError> {
    let xs: Vec<f64> = points
        .iter()
        .map(|&(i, _)| (i / rated_a).ln().max(0.0))
        .collect();
    let ys: Vec<f64> = points.iter().map(|&(_, c)| c.ln()).collect();
    let n = xs.len() as f64;
    let (xm, ym) = (xs.iter().sum::<f64>() / n, ys.iter().sum::<f64>() / n);
    let sxx: f64 = xs.iter().map(|x| (x - xm).powi(2)).sum();
    let sxy: f64 = xs.iter().zip(&ys).map(|(x, y)| (x - xm) * (y - ym)).sum();
    if sxx <= 1e-12 * n {
        return Err(FitError::new(
            "",
            format!(
                "every curve's current is at or below the rated current {}, so the Peukert exponent cannot be fitted",
                fmt_eng(rated_a, "A")
            ),
        )
        .with_hint("give curves at two or more currents at or above the rated current"));
    }
    let slope = -sxy / sxx;
    let raw_k = 1.0 + slope;
    if raw_k > 2.0 {
        return Err(FitError::new(
            "",
            format!(
                "the delivered capacities give a Peukert exponent of {raw_k:.3}, above the limit of 2"
            ),
        )
        .with_hint("check the current given with each curve (mA or A?) and the capacity units"));
    }
    if raw_k < 1.0 {
        return Ok(RateFit {
            q_c: ym.exp(),
            k: 1.0,
            raw_k,
        });
    }
    Ok(RateFit {
        q_c: (ym + slope * xm).exp(),
        k: raw_k,
        raw_k,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn time_and_capacity_forms_agree_on_the_reference_example() {
        // REFERENCES C15 two-point fit: (5 A, 20 h) and (10 A, 8.7055 h) -> k = 1.200.
        let kt = peukert_from_times(5.0, 20.0, 10.0, 8.7055);
        let kc = peukert_from_capacities(5.0, 5.0 * 20.0, 10.0, 10.0 * 8.7055);
        assert!((kt - 1.2).abs() < 5e-5, "{kt}");
        assert!((kt - kc).abs() < 1e-12, "{kt} vs {kc}");
        // The least-squares law through the same two points, rated at 5 A.
        let f = fit_rate(&[(5.0, 100.0 * 3600.0), (10.0, 87.055 * 3600.0)], 5.0).unwrap();
        assert!((f.k - kt).abs() < 1e-12);
        assert!((f.q_c / 3600.0 - 100.0).abs() < 1e-9);
    }

    #[test]
    fn rated_current_between_the_curves_uses_the_hinge() {
        // The conservative law: no capacity bonus below 0.2 A (DESIGN section 5).
        let (q, k, rated) = (7200.0, 1.15, 0.2);
        let pts: Vec<(f64, f64)> = [0.1, 0.5, 2.0]
            .iter()
            .map(|&i| (i, q / peukert_factor(i, rated, k)))
            .collect();
        let f = fit_rate(&pts, rated).unwrap();
        assert!((f.k - k).abs() < 1e-12 && (f.q_c - q).abs() < 1e-9, "{f:?}");
    }

    #[test]
    fn exponent_out_of_range() {
        let f = fit_rate(&[(1.0, 1000.0), (2.0, 1010.0)], 1.0).unwrap();
        assert!((f.k - 1.0).abs() < 1e-15 && f.raw_k < 1.0);
        assert!((f.q_c - (1000.0f64 * 1010.0).sqrt()).abs() < 1e-9);
        let e = fit_rate(&[(1.0, 1000.0), (2.0, 400.0)], 1.0).unwrap_err();
        assert!(e.message().contains("above the limit of 2"), "{e}");
        let e = fit_rate(&[(1.0, 1000.0), (2.0, 900.0)], 5.0).unwrap_err();
        assert!(e.message().contains("cannot be fitted"), "{e}");
    }
}
