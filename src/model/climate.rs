//! Ambient temperature that changes along the run: a yearly cycle of monthly means and a daily
//! swing around them, or a recorded series of times and temperatures (`ambient:` as a mapping
//! in the design file).

use std::sync::Arc;

/// A Julian year, s.
const YEAR_S: f64 = 365.25 * 86_400.0;

/// Length of a month of the cycle, s: a twelfth of a year of 365.25 days.
pub const MONTH_OF_YEAR_S: f64 = YEAR_S / 12.0;
/// Seconds in a day.
const DAY_S: f64 = 86_400.0;

/// How the ambient departs from its mean over time. The run starts at midnight on the first
/// day of `start_month`.
///
/// # Formula
///
/// `T(t) = mean + m(t) + (range / 2) cos(2 pi (h(t) - warmest) / 24 h)`, with `h(t)` the middle
/// of the hour of the day t falls in and `m(t)` the monthly mean less the year's mean: the trigonometric polynomial of
/// period one year through the twelve monthly means, each taken at the middle of its month
/// (discrete Fourier interpolation, harmonics 0 to 6). Unlike straight lines between the
/// months it has no corner, so the runtime's rates stay smooth along the year and the fast
/// solver can skip across months.
///
/// # Examples
///
/// ```
/// use joulepath::model::Climate;
/// let c = Climate::new(None, 0, 10.0, 15.5 * 3600.0);
/// // Warmest at 15:30: the hour from 15:00 is 5 K above the mean, the one from 03:00 5 K below.
/// assert!((c.deviation(15.2 * 3600.0) - 5.0).abs() < 1e-12);
/// assert!((c.deviation(3.9 * 3600.0) + 5.0).abs() < 1e-12);
/// // Each hour is held at the value of its middle.
/// assert_eq!(c.deviation(9.0 * 3600.0), c.deviation(9.99 * 3600.0));
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct Climate {
    /// Monthly means, January first, less their mean, °C (none: no yearly cycle).
    pub(crate) monthly_c: Option<[f64; 12]>,
    /// The month the run starts in, 0 (January) to 11.
    pub(crate) start_month: usize,
    /// Warmest less coldest hour of the day, °C (0: no daily swing).
    pub(crate) daily_range_c: f64,
    /// Time of day of the warmest hour, s after midnight.
    pub(crate) warmest_s: f64,
    /// Coefficients of the yearly curve: `a_1, b_1, ..., a_5, b_5, a_6` (zero without a yearly
    /// cycle).
    harmonics: [f64; 11],
    /// A recorded series in place of the cycles (none: the cycles above).
    recorded: Option<Arc<Recorded>>,
}

/// The shortest step the ambient of a recorded series is held over, s: a minute (bounds the
/// work of a series sampled every second).
const RECORDED_STEP_MIN_S: f64 = 60.0;
/// The longest, s: an hour, as with a daily swing.
const RECORDED_STEP_MAX_S: f64 = 3600.0;

/// A recorded ambient (`ambient: { file: ... }`): temperatures at times, joined by straight
/// lines. After the last row the series starts again from its first (`repeat`) or holds the
/// last temperature.
///
/// # Examples
///
/// ```
/// use joulepath::model::Recorded;
/// let (mean, r) = Recorded::new(&[0.0, 3600.0, 7200.0], &[10.0, 20.0, 20.0], false);
/// // Time-weighted mean: (15 + 20) / 2.
/// assert!((mean - 17.5).abs() < 1e-12);
/// assert!((mean + r.at(1800.0) - 15.0).abs() < 1e-12);
/// assert!((mean + r.at(1e9) - 20.0).abs() < 1e-12);
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct Recorded {
    /// Times from the first row, s: 0 first, strictly increasing.
    t_s: Vec<f64>,
    /// Temperatures less their time-weighted mean, °C.
    dev_c: Vec<f64>,
    /// Start again from the first row after the last (else hold the last temperature).
    repeat: bool,
    /// The longest step the ambient may be held over, s (infinite for a constant series).
    step_s: f64,
}

impl Recorded {
    /// A series from times (s, strictly increasing, at least two) and temperatures (°C): its
    /// time-weighted mean (the area under the straight lines over the rows' span, divided by the
    /// span; exactly the temperature of a constant series) and the series around that mean.
    pub fn new(times_s: &[f64], temp_c: &[f64], repeat: bool) -> (f64, Self) {
        let t0 = times_s.first().copied().unwrap_or(0.0);
        let t_s: Vec<f64> = times_s.iter().map(|t| t - t0).collect();
        let first = temp_c.first().copied().unwrap_or(0.0);
        // Exactly equal: only then is the series less its mean exactly zero.
        #[allow(clippy::float_cmp)]
        let constant = temp_c.iter().all(|&v| v == first);
        let span = t_s.last().copied().unwrap_or(0.0);
        let mean = if constant || span <= 0.0 {
            first
        } else {
            let area: f64 = t_s
                .windows(2)
                .zip(temp_c.windows(2))
                .map(|(t, v)| 0.5 * (v[0] + v[1]) * (t[1] - t[0]))
                .sum();
            area / span
        };
        let step_s = if constant {
            f64::INFINITY
        } else {
            t_s.windows(2)
                .map(|t| t[1] - t[0])
                .fold(RECORDED_STEP_MAX_S, f64::min)
                .max(RECORDED_STEP_MIN_S)
        };
        let dev_c = temp_c.iter().map(|v| v - mean).collect();
        (
            mean,
            Self {
                t_s,
                dev_c,
                repeat,
                step_s,
            },
        )
    }

    /// The departure from the mean at `t_s` seconds into the run, °C: on the straight line
    /// between the rows around it.
    pub fn at(&self, t_s: f64) -> f64 {
        let n = self.t_s.len();
        let (Some(&last_t), Some(&last_v)) = (self.t_s.last(), self.dev_c.last()) else {
            return 0.0;
        };
        let t = if self.repeat && last_t > 0.0 {
            t_s.rem_euclid(last_t)
        } else if t_s >= last_t {
            return last_v;
        } else {
            t_s.max(0.0)
        };
        // The first row after `t` (at least the second row).
        let k = self.t_s.partition_point(|&x| x <= t).clamp(1, n - 1);
        let (ta, tb) = (self.t_s[k - 1], self.t_s[k]);
        let (va, vb) = (self.dev_c[k - 1], self.dev_c[k]);
        va + (vb - va) * ((t - ta) / (tb - ta))
    }

    /// The lowest and highest departure over the first `t_s` seconds of the run, °C.
    fn range(&self, t_s: f64) -> (f64, f64) {
        let span = self.t_s.last().copied().unwrap_or(0.0);
        let whole = t_s >= span || !t_s.is_finite();
        let seen = self
            .t_s
            .iter()
            .zip(&self.dev_c)
            .filter(|&(&t, _)| whole || t <= t_s)
            .map(|(_, &v)| v)
            .chain([self.at(t_s.min(span))]);
        seen.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), d| {
            (lo.min(d), hi.max(d))
        })
    }

    /// Rows in the series.
    pub fn len(&self) -> usize {
        self.t_s.len()
    }

    /// Whether the series has no rows (never so for a series read from a file).
    pub fn is_empty(&self) -> bool {
        self.t_s.is_empty()
    }

    /// Whether the series starts again after its last row.
    pub fn repeats(&self) -> bool {
        self.repeat
    }
}

impl Climate {
    /// A recorded series in place of the cycles.
    pub fn recorded(series: Arc<Recorded>) -> Self {
        Self {
            recorded: Some(series),
            ..Self::new(None, 0, 0.0, 0.0)
        }
    }

    /// The recorded series, if this climate is one.
    pub fn series(&self) -> Option<&Recorded> {
        self.recorded.as_deref()
    }

    /// A climate: monthly means less their mean (January first), the month the run starts in
    /// (0 = January), the daily range (warmest less coldest hour, °C) and the time of day of
    /// the warmest hour (s after midnight).
    pub fn new(
        monthly_c: Option<[f64; 12]>,
        start_month: usize,
        daily_range_c: f64,
        warmest_s: f64,
    ) -> Self {
        let mut harmonics = [0.0; 11];
        if let Some(m) = &monthly_c {
            // Discrete Fourier coefficients of twelve equally spaced samples: a_k = (2/N) sum
            // m_j cos(2 pi k j / N), b_k likewise with sin, and a_(N/2) = (1/N) sum m_j (-1)^j.
            for k in 1..=6 {
                let (mut a, mut b) = (0.0, 0.0);
                for (j, v) in m.iter().enumerate() {
                    let th = std::f64::consts::TAU * (k * j) as f64 / 12.0;
                    a += v * th.cos();
                    b += v * th.sin();
                }
                if k < 6 {
                    harmonics[2 * (k - 1)] = a / 6.0;
                    harmonics[2 * (k - 1) + 1] = b / 6.0;
                } else {
                    harmonics[10] = a / 12.0;
                }
            }
        }
        Self {
            monthly_c,
            start_month: start_month.min(11),
            daily_range_c,
            warmest_s,
            harmonics,
            recorded: None,
        }
    }

    /// The yearly part at `x` months after the middle of January, °C.
    fn yearly(&self, x: f64) -> f64 {
        let (s1, c1) = (std::f64::consts::TAU * x / 12.0).sin_cos();
        let (mut s, mut c) = (s1, c1);
        let h = &self.harmonics;
        let mut v = 0.0;
        for k in 0..5 {
            v += h[2 * k] * c + h[2 * k + 1] * s;
            // The next harmonic: a rotation by the first.
            (s, c) = (s * c1 + c * s1, c * c1 - s * s1);
        }
        v + h[10] * c
    }

    /// The ambient's departure from its mean at `t_s` seconds into the run, °C.
    pub fn deviation(&self, t_s: f64) -> f64 {
        if let Some(r) = &self.recorded {
            return r.at(t_s);
        }
        let mut dev = 0.0;
        if self.monthly_c.is_some() {
            dev += self.yearly(t_s / MONTH_OF_YEAR_S + self.start_month as f64 - 0.5);
        }
        if self.daily_range_c > 0.0 {
            // Held over each hour of the day at the value of its middle.
            let hour = (t_s / 3600.0).floor() * 3600.0 + 1800.0;
            let phase = (hour - self.warmest_s).rem_euclid(DAY_S) / DAY_S;
            dev += 0.5 * self.daily_range_c * (std::f64::consts::TAU * phase).cos();
        }
        dev
    }

    /// The longest step over which the ambient may be taken as constant, s: an hour with a daily
    /// swing (the ambient then moves by at most range x pi / 24 in a step), a day with a yearly
    /// cycle alone; for a recorded series the shortest time between its rows, from a minute to
    /// an hour (none for a constant series).
    pub fn step_s(&self) -> f64 {
        if let Some(r) = &self.recorded {
            r.step_s
        } else if self.daily_range_c > 0.0 {
            3600.0
        } else if self.monthly_c.is_some() {
            DAY_S
        } else {
            f64::INFINITY
        }
    }

    /// The lowest and highest departure from the mean over the first `t_s` seconds of the run,
    /// °C. A run shorter than a day is sampled every ten minutes; a longer one sees the whole
    /// daily swing on top of the yearly curve, sampled 100 times a year.
    pub fn range(&self, t_s: f64) -> (f64, f64) {
        if let Some(r) = &self.recorded {
            return r.range(t_s);
        }
        let span = t_s.clamp(0.0, YEAR_S + DAY_S);
        let (step, half) = if span < DAY_S {
            (600.0, 0.0)
        } else {
            (YEAR_S / 100.0, 0.5 * self.daily_range_c)
        };
        let yearly = Climate {
            daily_range_c: if span < DAY_S {
                self.daily_range_c
            } else {
                0.0
            },
            ..self.clone()
        };
        let n = ((span / step).ceil() as usize).max(1);
        let (lo, hi) = (0..=n)
            .map(|j| yearly.deviation(span * j as f64 / n as f64))
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), d| {
                (lo.min(d), hi.max(d))
            });
        (lo - half, hi + half)
    }
}

/// Read access to the checked values (the fields stay private: only the checker builds a `Climate`).
impl Climate {
    /// Monthly means, January first, less their mean, °C (none: no yearly cycle).
    pub fn monthly_c(&self) -> Option<[f64; 12]> {
        self.monthly_c
    }

    /// The month the run starts in, 0 (January) to 11.
    pub fn start_month(&self) -> usize {
        self.start_month
    }

    /// Warmest less coldest hour of the day, °C (0: no daily swing).
    pub fn daily_range_c(&self) -> f64 {
        self.daily_range_c
    }

    /// Time of day of the warmest hour, s after midnight.
    pub fn warmest_s(&self) -> f64 {
        self.warmest_s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_yearly_curve_passes_through_each_monthly_mean_and_wraps_around() {
        let raw = [
            -6.0, -4.0, 1.0, 5.0, 9.0, 12.0, 14.0, 13.0, 9.0, 4.0, -1.0, -8.0,
        ];
        let mean = raw.iter().sum::<f64>() / 12.0;
        let m = raw.map(|v| v - mean);
        let c = Climate::new(Some(m), 0, 0.0, 0.0);
        // The middle of each month is its mean (the interpolation is exact at the samples).
        for (j, want) in m.iter().enumerate() {
            let got = c.deviation((j as f64 + 0.5) * MONTH_OF_YEAR_S);
            assert!((got - want).abs() < 1e-9, "month {j}: {got} vs {want}");
        }
        // A year later it is the same, and it runs on smoothly from December into January.
        let t = 0.2 * MONTH_OF_YEAR_S;
        assert!((c.deviation(t) - c.deviation(t + YEAR_S)).abs() < 1e-9);
        let dec = c.deviation(11.5 * MONTH_OF_YEAR_S);
        let jan = c.deviation(12.5 * MONTH_OF_YEAR_S);
        let between = c.deviation(12.0 * MONTH_OF_YEAR_S);
        assert!(between < dec.max(jan) + 1.0 && between > dec.min(jan) - 1.0);
        // A run starting in December is at December's mean half a month in.
        let from_dec = Climate::new(Some(m), 11, 0.0, 0.0);
        assert!((from_dec.deviation(0.5 * MONTH_OF_YEAR_S) - m[11]).abs() < 1e-9);
        assert!((c.step_s() - DAY_S).abs() < 1e-9);
        // Over two years the range holds the coldest and warmest months.
        let (lo, hi) = c.range(2.0 * YEAR_S);
        assert!(lo <= m[11] + 1e-9 && hi >= m[6] - 1e-9, "{lo} {hi}");
        // The daily swing adds half its range either side.
        let swing = Climate::new(Some(m), 0, 10.0, 15.0 * 3600.0);
        let (lo2, hi2) = swing.range(2.0 * YEAR_S);
        assert!((lo2 - (lo - 5.0)).abs() < 1e-9 && (hi2 - (hi + 5.0)).abs() < 1e-9);
    }
}
