//! Piecewise-linear tables: a quantity against state of charge, temperature or log current.

/// Tables up to this many points are searched by a forward scan, longer ones by halving.
const SHORT_TABLE: usize = 16;

/// A piecewise-linear function through points sorted by x, held constant beyond the ends.
///
/// # Formula
///
/// y(x) = y_i + (y_{i+1} - y_i) (x - x_i) / (x_{i+1} - x_i) for x_i <= x <= x_{i+1};
/// y(x) = y_0 below x_0 and y_n above x_n (the same as `numpy.interp`).
///
/// # Examples
///
/// ```
/// use joulepath::model::Table;
/// // numpy.interp's documented example: xp = [1, 2, 3], fp = [3, 2, 0].
/// let t = Table::new(vec![(1.0, 3.0), (2.0, 2.0), (3.0, 0.0)]).unwrap();
/// assert!((t.at(2.5) - 1.0).abs() < 1e-12);
/// assert!((t.at(0.0) - 3.0).abs() < 1e-12);
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct Table {
    xs: Vec<f64>,
    ys: Vec<f64>,
}

/// Why a table cannot be built.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum TableError {
    /// No points at all.
    Empty,
    /// Two points share an x value (the index of the second, in sorted order).
    Repeated(usize),
    /// A value is NaN or infinite.
    NotFinite,
}

impl Table {
    /// A table from points in any order.
    ///
    /// # Errors
    ///
    /// No points, a repeated x, or a non-finite number.
    pub fn new(mut points: Vec<(f64, f64)>) -> Result<Self, TableError> {
        if points.is_empty() {
            return Err(TableError::Empty);
        }
        if points.iter().any(|(x, y)| !x.is_finite() || !y.is_finite()) {
            return Err(TableError::NotFinite);
        }
        points.sort_by(|a, b| a.0.total_cmp(&b.0));
        for i in 1..points.len() {
            if points[i].0 <= points[i - 1].0 {
                return Err(TableError::Repeated(i));
            }
        }
        Ok(Self {
            xs: points.iter().map(|p| p.0).collect(),
            ys: points.iter().map(|p| p.1).collect(),
        })
    }

    /// A table with the same value everywhere.
    pub fn constant(y: f64) -> Self {
        Self {
            xs: vec![0.0],
            ys: vec![y],
        }
    }

    /// The value at `x`.
    #[inline]
    pub fn at(&self, x: f64) -> f64 {
        let xs = &self.xs[..];
        let n = xs.len();
        let ys = &self.ys[..n];
        if x <= xs[0] {
            return ys[0];
        }
        if x.is_nan() {
            // No place in the table: the caller sees NaN and refuses it.
            return f64::NAN;
        }
        if x >= xs[n - 1] {
            return ys[n - 1];
        }
        // First index with xs[i] > x; 1 <= i <= n - 1 here. Tables are short (a dozen points):
        // a forward scan costs less than a binary search's unpredictable branches.
        let i = if n <= SHORT_TABLE {
            1 + xs[1..].iter().position(|&v| v > x).unwrap_or(n - 2)
        } else {
            xs.partition_point(|&v| v <= x)
        };
        let (x0, x1) = (xs[i - 1], xs[i]);
        let (y0, y1) = (ys[i - 1], ys[i]);
        y0 + (y1 - y0) * (x - x0) / (x1 - x0)
    }

    /// The points, sorted by x.
    pub fn points(&self) -> impl Iterator<Item = (f64, f64)> + '_ {
        self.xs.iter().copied().zip(self.ys.iter().copied())
    }

    /// Smallest and largest x.
    pub fn x_range(&self) -> (f64, f64) {
        (self.xs[0], self.xs[self.xs.len() - 1])
    }

    /// Whether y never falls as x rises.
    pub fn is_non_decreasing(&self) -> bool {
        self.ys.windows(2).all(|w| w[1] >= w[0])
    }

    /// The mean of y over [a, b] (exact for the piecewise-linear function).
    pub fn mean(&self, a: f64, b: f64) -> f64 {
        if b <= a {
            return self.at(a);
        }
        // Integrate over the breakpoints inside (a, b) with the trapezoid rule, exact here.
        let mut xs: Vec<f64> = vec![a];
        xs.extend(self.xs.iter().copied().filter(|&x| x > a && x < b));
        xs.push(b);
        let area: f64 = xs
            .windows(2)
            .map(|w| 0.5 * (self.at(w[0]) + self.at(w[1])) * (w[1] - w[0]))
            .sum();
        area / (b - a)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * b.abs().max(1.0)
    }

    #[test]
    #[allow(clippy::approx_constant)] // 3.14 is the documented input, not pi
    fn numpy_interp_documented_values() {
        // NumPy reference, numpy.interp: xp = [1, 2, 3], fp = [3, 2, 0];
        // interp([0, 1, 1.5, 2.72, 3.14]) = [3, 3, 2.5, 0.56, 0].
        let t = Table::new(vec![(3.0, 0.0), (1.0, 3.0), (2.0, 2.0)]).unwrap();
        for (x, y) in [
            (0.0, 3.0),
            (1.0, 3.0),
            (1.5, 2.5),
            (2.72, 0.56),
            (3.14, 0.0),
        ] {
            assert!(close(t.at(x), y), "interp({x}) = {} not {y}", t.at(x));
        }
    }

    #[test]
    fn nan_lookup_is_nan_not_a_panic() {
        let t = Table::new(vec![(0.0, 3.0), (0.5, 3.7), (1.0, 4.2)]).unwrap();
        assert!(t.at(f64::NAN).is_nan());
        assert!(t.mean(0.0, f64::NAN).is_nan());
    }

    #[test]
    fn rejects_repeats_and_empty() {
        assert_eq!(Table::new(vec![]), Err(TableError::Empty));
        assert_eq!(
            Table::new(vec![(0.5, 1.0), (0.5, 2.0)]),
            Err(TableError::Repeated(1))
        );
        assert_eq!(
            Table::new(vec![(f64::NAN, 1.0)]),
            Err(TableError::NotFinite)
        );
    }

    #[test]
    fn mean_is_exact_for_piecewise_linear() {
        let t = Table::new(vec![(0.0, 3.0), (0.5, 3.5), (1.0, 4.2)]).unwrap();
        // Trapezoids by hand: 0.5 x (3 + 3.5) / 2 + 0.5 x (3.5 + 4.2) / 2 = 3.55.
        assert!(close(t.mean(0.0, 1.0), 3.55));
        assert!(close(t.mean(0.0, 0.5), 3.25));
    }
}
