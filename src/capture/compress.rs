//! Compression: a capture's waveform as a short list of piecewise-constant segments.
//!
//! Each segment holds the mean of its samples (sample and hold), so the charge of every segment,
//! and of the whole capture, is kept exactly. Replacing a waveform `x(t)` by its segments' means
//! leaves an error `e(t)` with zero mean over each segment. On a cell modelled as an ohmic
//! resistance R0 in series with one RC branch (R1, time constant tau), that error moves the
//! terminal voltage by
//!
//! dV(t) = R0 e(t) + dVp(t), tau dVp/dt = R1 e - dVp.
//!
//! With `d_k` the largest deviation of a sample from its segment's mean and `E_k` the largest
//! excursion of the charge error inside segment k (the integral of e from the segment's start,
//! which is zero again at its end), integration by parts of the RC response over each segment
//! gives |dVp| <= 2 R1 max_k min(E_k / tau, d_k), and always |dVp| <= R1 max_k d_k. So
//!
//! |dV| <= R0 max_k d_k + R1 min(max_k d_k, 2 max_k min(E_k / tau, d_k)),
//!
//! the bound reported. It bounds the error at every instant, so the lowest terminal voltage of
//! the segments is within it of the waveform's. The segments are found greedily: a segment grows
//! sample by sample while R0 d + R1 min(d L / tau, 2 d) stays within a target (E <= d L / 2 for a
//! segment of length L); when the exact bound of the result is above the tolerance, the target is
//! lowered and the search repeated (half the tolerance always meets it).

/// How a deviation of the captured value moves the pack's terminal voltage, V per unit of the
/// value (per ampere for a current, per watt for a power).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sensitivity {
    /// Through the ohmic resistance.
    pub ohmic: f64,
    /// Through the polarization branch's resistance (0 without one).
    pub polarization: f64,
    /// The polarization branch's time constant, s.
    pub tau_s: f64,
}

/// One piecewise-constant part of a compressed capture.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Segment {
    /// First sample.
    pub first: usize,
    /// Number of samples.
    pub samples: usize,
    /// Duration, s.
    pub seconds: f64,
    /// The mean of its samples (A or W).
    pub value: f64,
}

/// A compressed capture.
#[derive(Debug, Clone, PartialEq)]
pub struct Compressed {
    /// The segments in time order.
    pub segments: Vec<Segment>,
    /// The bound on the terminal-voltage error of the segments against the waveform, V.
    pub bound_v: f64,
    /// The tolerance asked for, V.
    pub tolerance_v: f64,
}

impl Compressed {
    /// The total of value x duration over the segments (C for a current).
    pub fn integral(&self) -> f64 {
        self.segments.iter().map(|s| s.value * s.seconds).sum()
    }
}

/// Why a capture cannot be compressed.
#[derive(Debug, Clone, PartialEq)]
pub enum CompressError {
    /// The waveform needs more segments than allowed to stay within the tolerance.
    TooMany {
        /// The limit.
        max: usize,
        /// Where the search stopped: the first sample not covered.
        at_sample: usize,
    },
    /// The tolerance or a sensitivity is negative or not finite.
    Invalid(String),
}

impl std::fmt::Display for CompressError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            CompressError::TooMany { max, at_sample } => write!(
                f,
                "the capture needs more than {max} segments to stay within the tolerance (the first {max} reach sample {at_sample})"
            ),
            CompressError::Invalid(m) => f.write_str(m),
        }
    }
}

/// Compress `values` (each held for `dt[k]` seconds) into segments whose terminal-voltage error
/// is at most `tolerance_v`, using at most `max_segments`.
///
/// # Errors
///
/// [`CompressError::TooMany`] when more segments are needed, [`CompressError::Invalid`] for a
/// negative or non-finite tolerance or sensitivity, or slices of different lengths.
///
/// # Examples
///
/// ```
/// use joulepath::capture::{Sensitivity, compress};
/// // A 1 ms pulse of 10 mA in 9 ms of 0.1 mA, sampled every 0.1 ms.
/// let values: Vec<f64> = (0..100).map(|k| if (40..50).contains(&k) { 0.01 } else { 1e-4 }).collect();
/// let dt = vec![1e-4; 100];
/// let s = Sensitivity { ohmic: 10.0, polarization: 0.0, tau_s: 1.0 };
/// let c = compress(&values, &dt, &s, 0.005, 1000).unwrap();
/// assert_eq!(c.segments.len(), 3);
/// assert!(c.bound_v <= 0.005);
/// ```
pub fn compress(
    values: &[f64],
    dt: &[f64],
    s: &Sensitivity,
    tolerance_v: f64,
    max_segments: usize,
) -> Result<Compressed, CompressError> {
    if values.len() != dt.len() || values.is_empty() {
        return Err(CompressError::Invalid(
            "the values and their durations differ in number, or there are none".into(),
        ));
    }
    let ok = |x: f64| x.is_finite() && x >= 0.0;
    if !(ok(tolerance_v) && ok(s.ohmic) && ok(s.polarization) && ok(s.tau_s)) {
        return Err(CompressError::Invalid(format!(
            "the tolerance ({tolerance_v} V) and the sensitivities must be finite and not negative"
        )));
    }
    let mut target = tolerance_v;
    let mut attempt = 0;
    loop {
        let segments = greedy(values, dt, s, target, max_segments)?;
        let bound_v = bound(values, dt, s, &segments);
        if bound_v <= tolerance_v * (1.0 + 1e-12) || attempt == 7 {
            return Ok(Compressed {
                segments,
                bound_v,
                tolerance_v,
            });
        }
        // Lower the target in proportion, and at the last try to half the tolerance, which
        // always meets it (each of the bound's two terms is then within half).
        target = if attempt == 6 {
            tolerance_v / 2.0
        } else {
            (target * tolerance_v / bound_v * 0.98).max(tolerance_v / 2.0)
        };
        attempt += 1;
    }
}

fn cost(s: &Sensitivity, d: f64, len: f64) -> f64 {
    let pol = if s.tau_s > 0.0 {
        (d * len / s.tau_s).min(2.0 * d)
    } else {
        2.0 * d
    };
    s.ohmic * d + s.polarization * pol
}

fn greedy(
    values: &[f64],
    dt: &[f64],
    s: &Sensitivity,
    target: f64,
    max_segments: usize,
) -> Result<Vec<Segment>, CompressError> {
    let n = values.len();
    let mut out = Vec::new();
    let mut a = 0;
    while a < n {
        if out.len() == max_segments {
            return Err(CompressError::TooMany {
                max: max_segments,
                at_sample: a,
            });
        }
        let (mut q, mut len) = (values[a] * dt[a], dt[a]);
        let (mut hi, mut lo) = (values[a], values[a]);
        let mut b = a + 1;
        while b < n {
            let (v, t) = (values[b], dt[b]);
            let (q2, len2) = (q + v * t, len + t);
            let (hi2, lo2) = (hi.max(v), lo.min(v));
            let mean = q2 / len2;
            let d = (hi2 - mean).max(mean - lo2).max(0.0);
            if d > 0.0 && cost(s, d, len2) > target {
                break;
            }
            (q, len, hi, lo) = (q2, len2, hi2, lo2);
            b += 1;
        }
        out.push(Segment {
            first: a,
            samples: b - a,
            seconds: len,
            value: q / len,
        });
        a = b;
    }
    Ok(out)
}

/// The bound of the module's documentation, from each segment's exact deviation and charge
/// excursion.
fn bound(values: &[f64], dt: &[f64], s: &Sensitivity, segments: &[Segment]) -> f64 {
    let (mut d_max, mut p_max) = (0.0_f64, 0.0_f64);
    for seg in segments {
        let range = seg.first..seg.first + seg.samples;
        let (mut d, mut e, mut cum) = (0.0_f64, 0.0_f64, 0.0_f64);
        for k in range {
            let dev = values[k] - seg.value;
            d = d.max(dev.abs());
            cum += dev * dt[k];
            e = e.max(cum.abs());
        }
        d_max = d_max.max(d);
        let p = if s.tau_s > 0.0 {
            (e / s.tau_s).min(d)
        } else {
            d
        };
        p_max = p_max.max(p);
    }
    s.ohmic * d_max + s.polarization * d_max.min(2.0 * p_max)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn charge_is_kept_and_the_bound_holds() {
        // A noisy ramp and pulses: every segment's mean keeps its charge.
        let n = 5000;
        let values: Vec<f64> = (0..n)
            .map(|k| {
                let x = k as f64;
                1e-3 * (1.0 + (x / 37.0).sin()) + if k % 700 < 40 { 0.02 } else { 0.0 }
            })
            .collect();
        let dt: Vec<f64> = (0..n)
            .map(|k| 1e-5 * (1.0 + 0.01 * (k % 3) as f64))
            .collect();
        let s = Sensitivity {
            ohmic: 12.0,
            polarization: 8.0,
            tau_s: 2e-3,
        };
        let c = compress(&values, &dt, &s, 0.005, 10_000).unwrap();
        let q: f64 = values.iter().zip(&dt).map(|(v, t)| v * t).sum();
        assert!(
            (c.integral() - q).abs() <= 1e-12 * q,
            "{} {q}",
            c.integral()
        );
        assert!(c.bound_v <= 0.005, "{}", c.bound_v);
        assert!(c.segments.len() < n / 10, "{}", c.segments.len());
        let covered: usize = c.segments.iter().map(|s| s.samples).sum();
        assert_eq!(covered, n);
    }

    #[test]
    fn a_flat_waveform_is_one_segment_and_too_many_is_an_error() {
        let s = Sensitivity {
            ohmic: 1.0,
            polarization: 0.0,
            tau_s: 0.0,
        };
        let c = compress(&[2.0; 10], &[1.0; 10], &s, 0.0, 5).unwrap();
        assert_eq!(c.segments.len(), 1);
        assert!(c.bound_v.abs() < 1e-15);
        let alternating: Vec<f64> = (0..10).map(|k| f64::from(k % 2)).collect();
        let e = compress(&alternating, &[1.0; 10], &s, 0.1, 5).unwrap_err();
        assert!(matches!(e, CompressError::TooMany { max: 5, .. }), "{e}");
        assert!(compress(&[1.0], &[1.0], &s, -1.0, 5).is_err());
    }
}
