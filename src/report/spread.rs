//! The spread report: runtime percentiles across units, the share reaching a target, end
//! reasons, each varied value's swing and rank correlation, and the corners.

use std::fmt::Write as _;
use std::io::{self, Write};

use serde::Serialize;

use super::heat::capitalize;
use super::text::{Align, TextTable};
use super::{Format, caution_for, wrap};
use crate::model::{Design, Knob};
use crate::spread::{Corners, Outcome, Spread, Swing};
use crate::units::{Dim, fmt_celsius, fmt_duration, fmt_eng, fmt_percent, fmt_sig};

/// A varied value for people: in its unit, with a prefix.
pub fn fmt_value(d: &Design, knob: &Knob, v: f64) -> String {
    match knob.dim(d) {
        Dim::Voltage => fmt_eng(v, "V"),
        Dim::Current => fmt_eng(v, "A"),
        Dim::Power => fmt_eng(v, "W"),
        Dim::Resistance => fmt_eng(v, "Ω"),
        Dim::Charge => fmt_eng(v / 3600.0, "Ah"),
        Dim::Energy => fmt_eng(v / 3600.0, "Wh"),
        Dim::Time => fmt_duration(v),
        Dim::Temperature => fmt_celsius(v),
        Dim::ThermalResistance => format!("{} K/W", fmt_sig(v, 3)),
        Dim::Fraction => fmt_percent(v),
        Dim::Rate => format!("{} %/month", fmt_sig(v * 100.0 * crate::model::MONTH_S, 3)),
        Dim::Number => fmt_sig(v, 4),
        Dim::Mass => fmt_eng(v * 1000.0, "g"),
        Dim::Length => fmt_eng(v, "m"),
        Dim::MolarEnergy => format!("{} kJ/mol", fmt_sig(v / 1000.0, 3)),
        Dim::Capacitance => fmt_eng(v, "F"),
    }
}

/// One run of the design in JSON: runtime (null when the run failed) and end reason.
#[derive(Debug, Clone, Serialize)]
pub struct RunJson {
    /// Runtime, s.
    pub runtime_s: Option<f64>,
    /// End reason, or `failed`.
    pub end: String,
    /// Why the run failed.
    pub error: Option<String>,
}

impl RunJson {
    fn of(o: &Outcome) -> Self {
        Self {
            runtime_s: o.runtime.as_ref().ok().copied(),
            end: o.end.map_or("failed", |e| e.name()).into(),
            error: o.runtime.as_ref().err().map(ToString::to_string),
        }
    }
}

/// A varied value's swing in JSON.
#[derive(Debug, Clone, Serialize)]
pub struct SwingJson {
    /// The path as written in `tolerances:`.
    pub path: String,
    /// The design's value, SI.
    pub nominal: f64,
    /// The low bound, SI.
    pub low: f64,
    /// The high bound, SI.
    pub high: f64,
    /// The run at the low bound, the rest nominal.
    pub at_low: RunJson,
    /// The run at the high bound, the rest nominal.
    pub at_high: RunJson,
    /// Runtime at the high bound minus at the low bound, s.
    pub swing_s: Option<f64>,
    /// Spearman's rank correlation of the value with the runtime over the samples.
    pub rank_correlation: Option<f64>,
}

/// A corner in JSON: its run and its values by path.
#[derive(Debug, Clone, Serialize)]
pub struct CornerJson {
    /// The run.
    #[serde(flatten)]
    pub run: RunJson,
    /// Each varied value, SI, by path.
    pub values: indexmap::IndexMap<String, f64>,
}

/// Share of samples ending one way.
#[derive(Debug, Clone, Serialize)]
pub struct EndJson {
    /// End reason.
    pub reason: String,
    /// Samples.
    pub count: usize,
    /// Share of all samples, 0..1.
    pub share: f64,
}

/// `spread --format json`.
#[derive(Debug, Clone, Serialize)]
pub struct SpreadJson {
    /// Design title.
    pub design: String,
    /// Samples run.
    pub samples: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// The design as written.
    pub nominal: RunJson,
    /// 5th percentile of the runtime, s.
    pub p5_s: f64,
    /// Median runtime, s.
    pub p50_s: f64,
    /// 95th percentile, s.
    pub p95_s: f64,
    /// Least runtime, s.
    pub min_s: f64,
    /// Greatest runtime, s.
    pub max_s: f64,
    /// Mean runtime, s.
    pub mean_s: f64,
    /// Standard deviation, s.
    pub std_dev_s: f64,
    /// The target, s.
    pub target_s: Option<f64>,
    /// Share of units reaching it, 0..1.
    pub reach_share: Option<f64>,
    /// Its sampling standard error.
    pub reach_std_err: Option<f64>,
    /// End reasons, most common first.
    pub ends: Vec<EndJson>,
    /// Samples that gave no runtime.
    pub failed: usize,
    /// Values drawn again because they fell outside their physical range.
    pub redrawn: usize,
    /// Values clipped to their physical range.
    pub clipped: usize,
    /// Each varied value, largest swing first.
    pub sensitivity: Vec<SwingJson>,
    /// The worst corner.
    pub worst: Option<CornerJson>,
    /// The best corner.
    pub best: Option<CornerJson>,
    /// Every sample's runtime, s, in sample order (null for a failed run).
    pub runtimes_s: Vec<Option<f64>>,
}

fn swing_json(s: &Swing) -> SwingJson {
    let d = s.delta_s();
    SwingJson {
        path: s.path.clone(),
        nominal: s.nominal,
        low: s.bounds.0,
        high: s.bounds.1,
        at_low: RunJson::of(&s.at.0),
        at_high: RunJson::of(&s.at.1),
        swing_s: d.is_finite().then_some(d),
        rank_correlation: s.rank_correlation,
    }
}

fn corner_json(sp: &Spread, o: &Outcome) -> CornerJson {
    CornerJson {
        run: RunJson::of(o),
        values: sp
            .tolerances
            .iter()
            .zip(&o.values)
            .map(|(t, v)| (t.path.clone(), *v))
            .collect(),
    }
}

/// The JSON mirror of a spread.
pub fn spread_json(d: &Design, sp: &Spread) -> SpreadJson {
    let n = sp.samples.len();
    let s = &sp.summary;
    SpreadJson {
        design: d.title.clone(),
        samples: n,
        seed: sp.options.seed,
        nominal: RunJson::of(&sp.nominal),
        p5_s: s.p5,
        p50_s: s.p50,
        p95_s: s.p95,
        min_s: s.min,
        max_s: s.max,
        mean_s: s.mean,
        std_dev_s: s.std_dev,
        target_s: sp.reach.map(|r| r.target_s),
        reach_share: sp.reach.map(|r| r.share),
        reach_std_err: sp.reach.map(|r| r.std_err),
        ends: sp
            .ends
            .iter()
            .map(|(e, c)| EndJson {
                reason: e.name().into(),
                count: *c,
                share: *c as f64 / n as f64,
            })
            .collect(),
        failed: sp.failed,
        redrawn: sp.redrawn,
        clipped: sp.clipped,
        sensitivity: sp.swings.iter().map(swing_json).collect(),
        worst: sp.corners.as_ref().map(|c| corner_json(sp, &c.worst)),
        best: sp.corners.as_ref().map(|c| corner_json(sp, &c.best)),
        runtimes_s: sp
            .samples
            .iter()
            .map(|o| o.runtime.as_ref().ok().copied())
            .collect(),
    }
}

/// The answer in one sentence: what most units do, what nearly all do, and the target.
pub fn spread_sentence(sp: &Spread) -> String {
    let s = &sp.summary;
    let n = sp.samples.len();
    let mut text = format!(
        "across {n} simulated units, half run longer than {} and 95 % run at least {} (the 5th percentile)",
        fmt_duration(s.p50),
        fmt_duration(s.p5)
    );
    if let Some(r) = sp.reach {
        let _ = write!(
            text,
            "; {} reach the {} target",
            fmt_percent(r.share),
            fmt_duration(r.target_s)
        );
    }
    if let Some(top) = sp.swings.first().filter(|x| x.delta_s().is_finite()) {
        let _ = write!(
            text,
            "; `{}` moves it most ({} between its bounds)",
            top.path,
            fmt_duration(top.delta_s().abs())
        );
    }
    text
}

/// A run's runtime and end reason in words (`no result`, `failed` for a failed run).
pub(crate) fn run_text(o: &Outcome) -> (String, String) {
    match (&o.runtime, o.end) {
        (Ok(t), Some(e)) => (fmt_duration(*t), e.name().into()),
        (Ok(t), None) => (fmt_duration(*t), String::new()),
        (Err(_), _) => ("no result".into(), "failed".into()),
    }
}

/// Write a spread.
///
/// # Errors
///
/// Those of the writer.
pub fn write_spread(w: &mut dyn Write, d: &Design, sp: &Spread, format: Format) -> io::Result<()> {
    match format {
        Format::Json => {
            serde_json::to_writer_pretty(&mut *w, &spread_json(d, sp))?;
            writeln!(w)
        }
        Format::Csv => write_samples_csv(w, sp),
        Format::Table => write_table(w, d, sp),
    }
}

/// One row per sample: its index, runtime, end reason, and each varied value (SI).
fn write_samples_csv(w: &mut dyn Write, sp: &Spread) -> io::Result<()> {
    let mut out = csv::WriterBuilder::new()
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(w);
    let mut header = vec!["sample".to_string(), "runtime_s".into(), "end".into()];
    header.extend(sp.tolerances.iter().map(|t| t.path.clone()));
    out.write_record(&header).map_err(io::Error::other)?;
    for (i, o) in sp.samples.iter().enumerate() {
        let mut rec = vec![
            i.to_string(),
            o.runtime
                .as_ref()
                .map_or_else(|_| String::new(), |t| format!("{t}")),
            o.end.map_or("failed", |e| e.name()).to_string(),
        ];
        rec.extend(o.values.iter().map(|v| format!("{v}")));
        out.write_record(&rec).map_err(io::Error::other)?;
    }
    out.flush()
}

fn write_table(w: &mut dyn Write, d: &Design, sp: &Spread) -> io::Result<()> {
    let n = sp.samples.len();
    for line in wrap(&format!("{}.", capitalize(&spread_sentence(sp))), 96) {
        writeln!(w, "{line}")?;
    }
    writeln!(w)?;
    let s = &sp.summary;
    let (nominal_t, nominal_end) = run_text(&sp.nominal);
    let mut t = TextTable::new(&[("runtime", Align::Left), ("", Align::Right)]);
    for (name, v) in s.named() {
        t.row(vec![name.into(), fmt_duration(v)]);
    }
    t.row(vec![
        "as designed".into(),
        format!("{nominal_t}, ends: {nominal_end}"),
    ]);
    t.write(w, "  ")?;
    writeln!(w)?;
    if let Some(r) = sp.reach {
        writeln!(
            w,
            "Units reaching {}: {} (sampling standard error {}).",
            fmt_duration(r.target_s),
            fmt_percent(r.share),
            fmt_percent(r.std_err)
        )?;
    }
    let ends: Vec<String> = sp
        .ends
        .iter()
        .map(|(e, c)| format!("{} {} ({})", e.name(), c, fmt_percent(*c as f64 / n as f64)))
        .collect();
    let mut why = format!("Why units stop: {}", ends.join(", "));
    if sp.failed > 0 {
        let _ = write!(why, "; {} runs gave no result", sp.failed);
    }
    for line in wrap(&format!("{why}."), 96) {
        writeln!(w, "{line}")?;
    }
    writeln!(w)?;
    writeln!(
        w,
        "What moves the runtime (each value at its low and high bound, the rest as designed):"
    )?;
    swing_table(d, sp).write(w, "  ")?;
    if let Some(c) = &sp.corners {
        write_corners(w, d, sp, c)?;
    }
    writeln!(w)?;
    let mut note = format!(
        "{}: {n} samples, seed {}, {} values varied.",
        d.title,
        sp.options.seed,
        sp.tolerances.len()
    );
    if sp.redrawn + sp.clipped > 0 {
        let _ = write!(
            note,
            " {} drawn values fell outside their physical range and were drawn again; {} were clipped to it.",
            sp.redrawn, sp.clipped
        );
    }
    for line in wrap(&note, 96) {
        writeln!(w, "{line}")?;
    }
    for line in wrap(&caution_for([d]), 96) {
        writeln!(w, "{line}")?;
    }
    Ok(())
}

/// The tornado table: each value at its low and high bound, the runtimes there, the swing
/// and the rank correlation.
fn swing_table(d: &Design, sp: &Spread) -> TextTable {
    let mut t = TextTable::new(&[
        ("value", Align::Left),
        ("as designed", Align::Right),
        ("low", Align::Right),
        ("high", Align::Right),
        ("runtime at low", Align::Right),
        ("at high", Align::Right),
        ("swing", Align::Right),
        ("rank corr.", Align::Right),
    ]);
    for x in &sp.swings {
        let k = &sp.tolerances[x.tolerance].knob;
        let (lo_t, lo_e) = run_text(&x.at.0);
        let (hi_t, hi_e) = run_text(&x.at.1);
        let delta = x.delta_s();
        t.row(vec![
            x.path.clone(),
            fmt_value(d, k, x.nominal),
            fmt_value(d, k, x.bounds.0),
            fmt_value(d, k, x.bounds.1),
            with_end(lo_t, &lo_e, &sp.nominal),
            with_end(hi_t, &hi_e, &sp.nominal),
            if delta.is_finite() {
                format!(
                    "{}{}",
                    if delta < 0.0 { "-" } else { "+" },
                    fmt_duration(delta.abs())
                )
            } else {
                "—".into()
            },
            x.rank_correlation
                .map_or_else(|| "—".into(), |r| format!("{r:+.2}")),
        ]);
    }
    t
}

/// The corners: every value at the bound that shortens, resp. lengthens, the runtime, and the
/// values of the worst.
fn write_corners(w: &mut dyn Write, d: &Design, sp: &Spread, c: &Corners) -> io::Result<()> {
    writeln!(w)?;
    writeln!(
        w,
        "Corners (every value at the bound that shortens, resp. lengthens, the runtime):"
    )?;
    let mut t = TextTable::new(&[
        ("corner", Align::Left),
        ("runtime", Align::Right),
        ("ends", Align::Left),
    ]);
    for (name, o) in [("worst", &c.worst), ("best", &c.best)] {
        let (rt, end) = run_text(o);
        t.row(vec![name.into(), rt, end]);
    }
    t.write(w, "  ")?;
    let values: Vec<String> = sp
        .tolerances
        .iter()
        .zip(&c.worst.values)
        .map(|(tol, v)| format!("{} {}", tol.path, fmt_value(d, &tol.knob, *v)))
        .collect();
    for line in wrap(&format!("Worst corner: {}.", values.join(", ")), 96) {
        writeln!(w, "  {line}")?;
    }
    Ok(())
}

/// A runtime, with its end reason when it differs from the design as written.
fn with_end(t: String, end: &str, nominal: &Outcome) -> String {
    if nominal.end.map(crate::solve::EndReason::name) == Some(end) {
        t
    } else {
        format!("{t} ({end})")
    }
}
