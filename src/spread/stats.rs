//! Order statistics and rank correlation for the spread.

use super::Summary;

/// The `p`-th percentile (0..100) of sorted values, linear between order statistics: the
/// sample quantile of Hyndman and Fan's definition 7 (Hyndman, R. J. and Fan, Y., "Sample
/// Quantiles in Statistical Packages", The American Statistician 50(4), 1996), the default of
/// R's `quantile` and NumPy's `percentile`. NaN for no values.
///
/// # Examples
///
/// ```
/// use joulepath::spread::percentile;
/// let v = [1.0, 2.0, 3.0, 4.0];
/// assert_eq!(percentile(&v, 50.0), 2.5);
/// assert_eq!(percentile(&v, 0.0), 1.0);
/// assert!((percentile(&v, 5.0) - 1.15).abs() < 1e-12);
/// ```
pub fn percentile(sorted: &[f64], p: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let h = (sorted.len() - 1) as f64 * (p / 100.0).clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// Ranks 1..n, ties given their mean rank.
fn ranks(x: &[f64]) -> Vec<f64> {
    let mut idx: Vec<usize> = (0..x.len()).collect();
    idx.sort_by(|&a, &b| x[a].total_cmp(&x[b]));
    let mut r = vec![0.0; x.len()];
    let mut i = 0;
    while i < idx.len() {
        let mut j = i;
        while j + 1 < idx.len() && x[idx[j + 1]].total_cmp(&x[idx[i]]).is_eq() {
            j += 1;
        }
        let mean = (i + j) as f64 / 2.0 + 1.0;
        for &k in &idx[i..=j] {
            r[k] = mean;
        }
        i = j + 1;
    }
    r
}

/// Spearman's rank correlation: Pearson's correlation of the ranks, ties at their mean rank
/// (Spearman, C., "The proof and measurement of association between two things", 1904; the
/// tie rule as in most statistics texts). `None` when either side does not vary.
///
/// # Examples
///
/// ```
/// use joulepath::spread::rank_correlation;
/// let x = [1.0, 2.0, 3.0, 4.0, 5.0];
/// let y = [2.0, 4.0, 9.0, 16.0, 100.0]; // monotone: rho = 1
/// assert!((rank_correlation(&x, &y).unwrap() - 1.0).abs() < 1e-12);
/// assert_eq!(rank_correlation(&x, &[1.0; 5]), None);
/// ```
pub fn rank_correlation(x: &[f64], y: &[f64]) -> Option<f64> {
    let n = x.len().min(y.len());
    if n < 2 {
        return None;
    }
    let (rx, ry) = (ranks(&x[..n]), ranks(&y[..n]));
    let mean = f64::midpoint(n as f64, 1.0);
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in rx.iter().zip(&ry) {
        let (dx, dy) = (a - mean, b - mean);
        sxy += dx * dy;
        sxx += dx * dx;
        syy += dy * dy;
    }
    (sxx > 0.0 && syy > 0.0).then(|| sxy / (sxx * syy).sqrt())
}

/// Percentiles, extremes, mean and standard deviation of `values` (NaN for none).
pub(super) fn summary(values: &[f64]) -> Summary {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    let n = v.len() as f64;
    let mean = v.iter().sum::<f64>() / n;
    let var = if v.len() > 1 {
        v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)
    } else {
        0.0
    };
    Summary {
        p5: percentile(&v, 5.0),
        p50: percentile(&v, 50.0),
        p95: percentile(&v, 95.0),
        min: v.first().copied().unwrap_or(f64::NAN),
        max: v.last().copied().unwrap_or(f64::NAN),
        mean,
        std_dev: var.sqrt(),
    }
}
