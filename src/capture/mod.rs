//! Measured current captures as loads.
//!
//! A capture is a CSV of time and current (and optionally the supply voltage) taken on a
//! development kit with a current probe or a power analyser. [`read_capture`] reads it (units
//! from the header, every bad row named with its line); [`compress`] reduces its waveform to a
//! few piecewise-constant segments that keep the charge exactly and the pack's lowest terminal
//! voltage within a tolerance; [`Summary`] is what `joulepath capture` prints. A design uses a
//! capture as a load state's draw (`draw: { advertise: { capture: adv.csv } }`): the checker
//! turns each phase of that state into the capture's segments (`model::lower`).
//!
//! Integration rule: sample and hold. Sample k holds from its time until the next sample's; the
//! last holds for the median step, so a capture of n samples at a fixed step lasts n steps (an
//! instrument's sample is its mean over the interval).

mod compress;
mod read;
mod summary;

pub use compress::{CompressError, Compressed, Segment, Sensitivity, compress};
pub(crate) use read::read_capped;
pub use read::{GAP_FACTOR, read_capture, read_capture_file};
pub use summary::{SegmentRow, Summary, summarize, write_summary};

use crate::model::Pack;

/// Largest capture file, bytes (10 MiB).
pub const MAX_BYTES: usize = 10 * 1024 * 1024;

/// Most samples in one capture.
pub const MAX_SAMPLES: usize = 2_000_000;

/// Most segments a compressed capture may have (each is a step of the profile).
pub const MAX_SEGMENTS: usize = 2_000;

/// The default tolerance on the lowest terminal voltage, V (common practice, no source: below
/// the resolution of most cutoff settings).
pub const DEFAULT_TOLERANCE_V: f64 = 0.005;

/// A capture read from CSV: samples in SI units, each held for its step.
#[derive(Debug, Clone, PartialEq)]
pub struct Capture {
    name: String,
    start_s: f64,
    dt: Vec<f64>,
    current: Vec<f64>,
    voltage: Option<Vec<f64>>,
}

impl Capture {
    /// A capture from samples: the step each holds, s (above zero), its current, A, and
    /// optionally its supply voltage, V (above zero).
    ///
    /// # Errors
    ///
    /// Slices of different lengths or empty, a step not above zero, or a value that is not
    /// finite.
    pub fn new(
        name: impl Into<String>,
        dt: Vec<f64>,
        current: Vec<f64>,
        voltage: Option<Vec<f64>>,
    ) -> Result<Self, String> {
        let n = dt.len();
        if n == 0 || current.len() != n || voltage.as_ref().is_some_and(|v| v.len() != n) {
            return Err(
                "the steps, currents and voltages differ in number, or there are none".into(),
            );
        }
        if dt.iter().any(|&t| !(t.is_finite() && t > 0.0))
            || current.iter().any(|i| !i.is_finite())
            || voltage
                .as_ref()
                .is_some_and(|v| v.iter().any(|&x| !(x.is_finite() && x > 0.0)))
        {
            return Err("a step or voltage is not above zero, or a value is not finite".into());
        }
        Ok(Self {
            name: name.into(),
            start_s: 0.0,
            dt,
            current,
            voltage,
        })
    }

    /// The file name it was read from.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// Time of the first sample in the file, s.
    pub fn start_s(&self) -> f64 {
        self.start_s
    }

    /// Number of samples.
    pub fn len(&self) -> usize {
        self.dt.len()
    }

    /// Whether there are no samples (never, for a capture that was read).
    pub fn is_empty(&self) -> bool {
        self.dt.is_empty()
    }

    /// How long each sample holds, s.
    pub fn dt(&self) -> &[f64] {
        &self.dt
    }

    /// The current of each sample, A.
    pub fn current(&self) -> &[f64] {
        &self.current
    }

    /// The supply voltage of each sample, V, when the file has a voltage column.
    pub fn voltage(&self) -> Option<&[f64]> {
        self.voltage.as_deref()
    }

    /// The power of each sample, W, when the file has a voltage column.
    pub fn power(&self) -> Option<Vec<f64>> {
        self.voltage
            .as_ref()
            .map(|v| v.iter().zip(&self.current).map(|(v, i)| v * i).collect())
    }

    /// Duration of one capture, s.
    pub fn duration_s(&self) -> f64 {
        self.dt.iter().sum()
    }

    /// Charge of one capture, C.
    pub fn charge_c(&self) -> f64 {
        self.current.iter().zip(&self.dt).map(|(i, t)| i * t).sum()
    }

    /// Energy of one capture at the captured voltage, J, when the file has a voltage column.
    pub fn energy_j(&self) -> Option<f64> {
        self.voltage.as_ref().map(|v| {
            v.iter()
                .zip(&self.current)
                .zip(&self.dt)
                .map(|((v, i), t)| v * i * t)
                .sum()
        })
    }

    /// Time of each sample from the first, s.
    pub fn times(&self) -> Vec<f64> {
        let mut t = 0.0;
        self.dt
            .iter()
            .map(|d| {
                let now = t;
                t += d;
                now
            })
            .collect()
    }
}

/// How the pack's terminal voltage moves per ampere drawn at the pack: the largest ohmic
/// resistance over the state of charge at `ambient_c`, and the polarization branch, times
/// `gain` (pack current per unit of the captured value).
pub fn sensitivity(pack: &Pack, ambient_c: f64, gain: f64) -> Sensitivity {
    let r0 = pack
        .cell
        .resistance
        .points()
        .map(|(s, _)| pack.r0(s, ambient_c))
        .fold(0.0_f64, f64::max);
    let (r1, tau) = pack.polarization(ambient_c).unwrap_or((0.0, 0.0));
    Sensitivity {
        ohmic: r0 * gain,
        polarization: r1 * gain,
        tau_s: tau,
    }
}
