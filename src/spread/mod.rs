//! Runtime across the units of a product: a Monte Carlo over the design's tolerances
//! ([`spread`]), the one-at-a-time swing of each varied value, and the worst and best corners.
//!
//! Each sample draws every varied value from its own random stream (ChaCha8, seeded by the seed
//! and numbered by the sample), applies them to a copy of the checked design (no text is read
//! again) and runs the fast solver. Samples run in parallel on every core; the result depends on
//! the seed alone, not on the number of threads.

mod stats;

use std::sync::atomic::{AtomicUsize, Ordering};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use rayon::prelude::*;

pub use stats::{percentile, rank_correlation};

use crate::model::{Design, Dist, Tolerance};
use crate::solve::{EndReason, RunError, RunOptions, run};

/// Most samples one spread runs.
pub const MAX_SAMPLES: usize = 1_000_000;
/// Tries at drawing a value inside its physical range before it is clipped to it.
const REDRAWS: usize = 100;

/// How to run a spread.
#[derive(Debug, Clone, PartialEq)]
pub struct SpreadOptions {
    /// Number of Monte Carlo samples.
    pub samples: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// The runtime a unit must reach, s (the share of units that do is reported).
    pub target_s: Option<f64>,
    /// Run the worst and best corners too.
    pub corners: bool,
    /// The options of every run (the ambient is each sample's own).
    pub run: RunOptions,
}

impl SpreadOptions {
    /// 1,000 samples, seed 1, no target, no corners, the design's default run options.
    pub fn for_design(design: &Design) -> Self {
        Self {
            samples: 1000,
            seed: 1,
            target_s: None,
            corners: false,
            run: RunOptions::for_design(design),
        }
    }
}

/// Why a spread gave no result.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum SpreadError {
    /// The design varies nothing.
    NoTolerances,
    /// The number of samples is zero or above [`MAX_SAMPLES`].
    Samples(usize),
    /// The design as written (every value nominal) gives no result.
    Nominal(RunError),
}

impl std::fmt::Display for SpreadError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            SpreadError::NoTolerances => f.write_str(
                "the design has no `tolerances:` block, so every unit is the same; add one, e.g. `tolerances: { loads.radio.draw.tx: ±10 % }`",
            ),
            SpreadError::Samples(n) => write!(
                f,
                "{n} samples: give from 1 to {MAX_SAMPLES} samples"
            ),
            SpreadError::Nominal(e) => write!(f, "the design as written: {e}"),
        }
    }
}

impl std::error::Error for SpreadError {}

/// One run of the design with some values changed.
#[derive(Debug, Clone, PartialEq)]
pub struct Outcome {
    /// The value of each tolerance, SI, in the order of [`Design::tolerances`].
    pub values: Vec<f64>,
    /// Runtime, s, or why the run gave none.
    pub runtime: Result<f64, RunError>,
    /// Why the product stopped (none when the run failed).
    pub end: Option<EndReason>,
    /// State of charge left at the end (none when the run failed).
    pub end_soc: Option<f64>,
    /// The mode the product stopped in.
    pub end_mode: Option<usize>,
}

/// Runtime statistics over the samples that gave a runtime.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Summary {
    /// 5th percentile, s.
    pub p5: f64,
    /// Median, s.
    pub p50: f64,
    /// 95th percentile, s.
    pub p95: f64,
    /// Least, s.
    pub min: f64,
    /// Greatest, s.
    pub max: f64,
    /// Mean, s.
    pub mean: f64,
    /// Sample standard deviation, s.
    pub std_dev: f64,
}

impl Summary {
    /// The statistics with their names, in the order the reports list them, s.
    pub fn named(&self) -> [(&'static str, f64); 7] {
        [
            ("5th percentile", self.p5),
            ("median", self.p50),
            ("95th percentile", self.p95),
            ("shortest", self.min),
            ("mean", self.mean),
            ("longest", self.max),
            ("standard deviation", self.std_dev),
        ]
    }
}

/// The share of units reaching a target runtime.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Reach {
    /// The target, s.
    pub target_s: f64,
    /// Share of the samples with a runtime at or above it, 0..1.
    pub share: f64,
    /// Its standard error from sampling, sqrt(p (1 - p) / N) (binomial proportion).
    pub std_err: f64,
}

/// How much one varied value moves the runtime.
#[derive(Debug, Clone, PartialEq)]
pub struct Swing {
    /// Index of the tolerance in [`Design::tolerances`].
    pub tolerance: usize,
    /// The path as written.
    pub path: String,
    /// The design's value, SI.
    pub nominal: f64,
    /// The low and high values, SI.
    pub bounds: (f64, f64),
    /// The runs at the low and at the high value, the rest nominal.
    pub at: (Outcome, Outcome),
    /// Spearman's rank correlation of the value with the runtime over the samples (none when the
    /// value or the runtime does not vary).
    pub rank_correlation: Option<f64>,
}

impl Swing {
    /// Runtime at the high value minus runtime at the low value, s (NaN when a run failed).
    pub fn delta_s(&self) -> f64 {
        match (&self.at.0.runtime, &self.at.1.runtime) {
            (Ok(lo), Ok(hi)) => hi - lo,
            _ => f64::NAN,
        }
    }
}

/// The worst and best units: every value at the bound of its swing that shortens (resp.
/// lengthens) the runtime.
#[derive(Debug, Clone, PartialEq)]
pub struct Corners {
    /// The shortest-lived corner.
    pub worst: Outcome,
    /// The longest-lived corner.
    pub best: Outcome,
}

/// The result of a spread.
#[derive(Debug, Clone, PartialEq)]
pub struct Spread {
    /// The options it ran with.
    pub options: SpreadOptions,
    /// The varied values.
    pub tolerances: Vec<Tolerance>,
    /// The design as written.
    pub nominal: Outcome,
    /// Every sample, in order.
    pub samples: Vec<Outcome>,
    /// Statistics of the runtimes.
    pub summary: Summary,
    /// The share reaching the target, when one was given.
    pub reach: Option<Reach>,
    /// How many samples ended for each reason, most common first.
    pub ends: Vec<(EndReason, usize)>,
    /// Samples that gave no runtime.
    pub failed: usize,
    /// Each varied value's swing, largest first.
    pub swings: Vec<Swing>,
    /// The corners, when asked for.
    pub corners: Option<Corners>,
    /// Values drawn outside their physical range and drawn again.
    pub redrawn: usize,
    /// Values clipped to their physical range after many draws outside it.
    pub clipped: usize,
}

/// Run `design` with the values `values` (one per tolerance, SI).
pub fn run_with(design: &Design, values: &[f64], run_options: &RunOptions) -> Outcome {
    let mut d = design.clone();
    for (t, &v) in design.tolerances.iter().zip(values) {
        t.knob.set(&mut d, v);
    }
    let o = RunOptions {
        ambient_c: d.ambient_c,
        ..run_options.clone()
    };
    match run(&d, &o) {
        Ok(r) => Outcome {
            values: values.to_vec(),
            runtime: Ok(r.runtime_s()),
            end: Some(r.end.reason),
            end_soc: Some(r.end.soc),
            end_mode: r.end.mode,
        },
        Err(e) => Outcome {
            values: values.to_vec(),
            runtime: Err(e),
            end: None,
            end_soc: None,
            end_mode: None,
        },
    }
}

/// A standard normal draw within ±3: a part beyond its band of three standard deviations is
/// screened out by its maker (common practice, no source), so a `±` band is also the least and
/// greatest value a unit can have, and the corners bound every sample of a monotone design.
/// Beyond 3 sigma lie 0.27 % of the draws (the normal distribution's 3-sigma rule).
fn truncated_normal(rng: &mut ChaCha8Rng) -> f64 {
    for _ in 0..1000 {
        let z: f64 = rng.sample(StandardNormal);
        if z.abs() <= 3.0 {
            return z;
        }
    }
    0.0
}

/// How a value came to be.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Drawn {
    First,
    Redrawn,
    Clipped,
}

/// One value of `t` from `rng`, inside the value's physical range.
fn draw(t: &Tolerance, rng: &mut ChaCha8Rng) -> (f64, Drawn) {
    let range = t.knob.range();
    let mut v = f64::NAN;
    for k in 0..REDRAWS {
        v = match &t.dist {
            Dist::Normal { mean, sigma } => mean + sigma * truncated_normal(rng),
            Dist::Uniform { lo, hi } => lo + (hi - lo) * rng.random::<f64>(),
            // An empty pick (possible only for a caller who built the distribution by hand) draws
            // nothing: the value is clipped into range below.
            Dist::Pick(choices) if choices.is_empty() => f64::NAN,
            Dist::Pick(choices) => choices[rng.random_range(0..choices.len())],
        };
        if range.whole {
            v = v.round();
        }
        if range.contains(v) {
            return (v, if k == 0 { Drawn::First } else { Drawn::Redrawn });
        }
    }
    (range.clip(v, t.nominal), Drawn::Clipped)
}

/// The values of sample `i`: its own random stream, so any thread draws the same ones.
fn sample_values(tolerances: &[Tolerance], seed: u64, i: usize) -> (Vec<f64>, usize, usize) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(i as u64);
    let (mut redrawn, mut clipped) = (0, 0);
    let values = tolerances
        .iter()
        .map(|t| {
            let (v, how) = draw(t, &mut rng);
            match how {
                Drawn::Redrawn => redrawn += 1,
                Drawn::Clipped => clipped += 1,
                Drawn::First => {}
            }
            v
        })
        .collect();
    (values, redrawn, clipped)
}

/// A Monte Carlo over the design's tolerances: runtime statistics, the share reaching the
/// target, the mix of end reasons, each value's swing and rank correlation, and the corners.
///
/// # Errors
///
/// [`SpreadError`] when the design varies nothing, the number of samples is out of range, or
/// the design as written gives no runtime.
///
/// # Examples
///
/// ```
/// let text = r#"
/// cells:
///   c: { capacity: 1 Ah, ocv: [[0 %, 3 V], [100 %, 3 V]], resistance: 0 ohm, cutoff: 2 V }
/// battery: { cell: c }
/// loads: [{ id: lamp, rail: battery, draw: { on: 100 mA } }]
/// modes: { lit: { lamp: on } }
/// profile: [{ mode: lit, for: 1 h }]
/// tolerances: { cells.c.capacity: ±10 % }
/// "#;
/// let d = joulepath::Design::from_text(text).unwrap();
/// let mut o = joulepath::spread::SpreadOptions::for_design(&d);
/// o.samples = 200;
/// let s = joulepath::spread::spread(&d, &o).unwrap();
/// // Q / I = 10 h at the median, within the sampling error.
/// assert!((s.summary.p50 / 3600.0 - 10.0).abs() < 0.1);
/// ```
pub fn spread(design: &Design, opts: &SpreadOptions) -> Result<Spread, SpreadError> {
    spread_observed(design, opts, &|_| {})
}

/// [`spread`], calling `progress` with the number of samples done now and then (from any
/// thread), for a progress bar.
///
/// # Errors
///
/// As [`spread`].
pub fn spread_observed(
    design: &Design,
    opts: &SpreadOptions,
    progress: &(dyn Fn(usize) + Sync),
) -> Result<Spread, SpreadError> {
    let tolerances = &design.tolerances;
    if tolerances.is_empty() {
        return Err(SpreadError::NoTolerances);
    }
    if opts.samples == 0 || opts.samples > MAX_SAMPLES {
        return Err(SpreadError::Samples(opts.samples));
    }
    let nominal_values: Vec<f64> = tolerances.iter().map(|t| t.nominal).collect();
    let nominal = run_with(design, &nominal_values, &opts.run);
    if let Err(e) = &nominal.runtime {
        return Err(SpreadError::Nominal(e.clone()));
    }
    let done = AtomicUsize::new(0);
    let drawn: Vec<(Outcome, usize, usize)> = (0..opts.samples)
        .into_par_iter()
        .map(|i| {
            let (values, r, c) = sample_values(tolerances, opts.seed, i);
            let out = run_with(design, &values, &opts.run);
            progress(done.fetch_add(1, Ordering::Relaxed) + 1);
            (out, r, c)
        })
        .collect();
    let redrawn = drawn.iter().map(|x| x.1).sum();
    let clipped = drawn.iter().map(|x| x.2).sum();
    let samples: Vec<Outcome> = drawn.into_iter().map(|x| x.0).collect();

    let runtimes: Vec<f64> = samples
        .iter()
        .filter_map(|s| s.runtime.as_ref().ok().copied())
        .collect();
    let failed = samples.len() - runtimes.len();
    let summary = stats::summary(&runtimes);
    let reach = opts.target_s.map(|target_s| {
        let n = runtimes.len().max(1) as f64;
        let share = runtimes.iter().filter(|&&t| t >= target_s).count() as f64 / n;
        Reach {
            target_s,
            share,
            std_err: (share * (1.0 - share) / n).sqrt(),
        }
    });
    let mut ends: Vec<(EndReason, usize)> = Vec::new();
    for s in &samples {
        if let Some(r) = s.end {
            match ends.iter_mut().find(|(e, _)| *e == r) {
                Some(e) => e.1 += 1,
                None => ends.push((r, 1)),
            }
        }
    }
    ends.sort_by_key(|e| std::cmp::Reverse(e.1));

    let swings = swings(design, &samples, &nominal_values, &opts.run);
    let corners = opts
        .corners
        .then(|| corners(design, &swings, &nominal_values, &opts.run));
    Ok(Spread {
        options: opts.clone(),
        tolerances: tolerances.clone(),
        nominal,
        samples,
        summary,
        reach,
        ends,
        failed,
        swings,
        corners,
        redrawn,
        clipped,
    })
}

impl Spread {
    /// The sample whose runtime lies nearest the `p`-th percentile (0..100) of the runtimes: a
    /// unit that stands for it, with its end reason.
    pub fn sample_near(&self, p: f64) -> Option<&Outcome> {
        let mut ok: Vec<&Outcome> = self.samples.iter().filter(|s| s.runtime.is_ok()).collect();
        ok.sort_by(|a, b| {
            let (x, y) = (a.runtime.as_ref().ok(), b.runtime.as_ref().ok());
            x.partial_cmp(&y).unwrap_or(std::cmp::Ordering::Equal)
        });
        let k =
            ((ok.len().saturating_sub(1)) as f64 * (p / 100.0).clamp(0.0, 1.0)).round() as usize;
        ok.get(k).copied()
    }

    /// The `p`-th percentile (0..100) of the runtimes, s.
    pub fn percentile_s(&self, p: f64) -> f64 {
        let mut v: Vec<f64> = self
            .samples
            .iter()
            .filter_map(|s| s.runtime.as_ref().ok().copied())
            .collect();
        v.sort_by(f64::total_cmp);
        percentile(&v, p)
    }
}

/// Each value at its low and high bound with the rest nominal, and its rank correlation with
/// the runtime over the samples; largest swing first.
fn swings(
    design: &Design,
    samples: &[Outcome],
    nominal: &[f64],
    run_options: &RunOptions,
) -> Vec<Swing> {
    let ok: Vec<&Outcome> = samples.iter().filter(|s| s.runtime.is_ok()).collect();
    let runtimes: Vec<f64> = ok.iter().filter_map(|s| s.runtime.clone().ok()).collect();
    let mut out: Vec<Swing> = design
        .tolerances
        .par_iter()
        .enumerate()
        .map(|(k, t)| {
            let bounds = t.swing_bounds();
            let at = |v: f64| {
                let mut values = nominal.to_vec();
                values[k] = v;
                run_with(design, &values, run_options)
            };
            let xs: Vec<f64> = ok.iter().map(|s| s.values[k]).collect();
            Swing {
                tolerance: k,
                path: t.path.clone(),
                nominal: t.nominal,
                bounds,
                at: (at(bounds.0), at(bounds.1)),
                rank_correlation: rank_correlation(&xs, &runtimes),
            }
        })
        .collect();
    out.sort_by(|a, b| {
        let (x, y) = (a.delta_s().abs(), b.delta_s().abs());
        // A failed swing (NaN) first: it needs looking at.
        y.partial_cmp(&x)
            .unwrap_or_else(|| x.is_nan().cmp(&y.is_nan()).reverse())
            .then(a.tolerance.cmp(&b.tolerance))
    });
    out
}

/// The worst and best corners from the swings: each value at the bound that shortens (resp.
/// lengthens) the runtime; a value whose bounds give the same runtime stays nominal.
fn corners(
    design: &Design,
    swings: &[Swing],
    nominal: &[f64],
    run_options: &RunOptions,
) -> Corners {
    let mut worst = nominal.to_vec();
    let mut best = nominal.to_vec();
    for s in swings {
        let d = s.delta_s();
        if d > 0.0 {
            worst[s.tolerance] = s.bounds.0;
            best[s.tolerance] = s.bounds.1;
        } else if d < 0.0 {
            worst[s.tolerance] = s.bounds.1;
            best[s.tolerance] = s.bounds.0;
        } else if d.is_nan() {
            // A bound where the run fails is the worse one.
            let lo_failed = s.at.0.runtime.is_err();
            worst[s.tolerance] = if lo_failed { s.bounds.0 } else { s.bounds.1 };
            best[s.tolerance] = if lo_failed { s.bounds.1 } else { s.bounds.0 };
        }
    }
    Corners {
        worst: run_with(design, &worst, run_options),
        best: run_with(design, &best, run_options),
    }
}
