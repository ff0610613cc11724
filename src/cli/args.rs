//! The command line.

use std::path::PathBuf;

use clap::{Parser, Subcommand, ValueEnum};

use super::groups::Group;

/// Battery runtime, pack current and heat per stage of a product's power tree.
#[derive(Debug, Parser)]
#[command(name = "joulepath", version, about, long_about = None)]
pub struct Args {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// What `plot` draws.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum PlotKind {
    /// Pack voltage and open-circuit voltage against time, the cutoff, the end; SoC below.
    Discharge,
    /// Energy lost per stage and in the pack, ranked, split by mode.
    Losses,
    /// Each switching stage's efficiency against output current, with each mode's point.
    Efficiency,
}

/// Output format.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum FormatArg {
    /// Aligned tables with engineering units.
    Table,
    /// JSON in SI units.
    Json,
    /// CSV in SI units.
    Csv,
}

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Check a design file and print its power tree.
    Check(CheckArgs),
    /// The operating point of every mode: pack, stages and loads.
    Budget(BudgetArgs),
    /// How long the product runs in the way it is used, why it stops, and where the energy goes.
    Runtime(RuntimeArgs),
    /// The stages and the pack ranked by the energy they turn into heat over the runtime.
    Heat(HeatArgs),
    /// Runtime across units: a Monte Carlo over the design's `tolerances:` (percentiles, the
    /// share reaching a target, why units stop, what moves the runtime most, the corners).
    Spread(SpreadArgs),
    /// The built-in cell presets, or one of them in full.
    Cells(CellsArgs),
    /// The runtime analysis of several designs side by side, and which one wins.
    ///
    /// Each `--set` applies to the file before it (one before every file applies to all), so one
    /// file can be compared with its variants: `compare a.yaml a.yaml --set battery.parallel=2`.
    Compare(CompareArgs),
    /// A cell fitted from datasheet discharge curves, printed as a `cells:` block.
    FitCell(FitCellArgs),
    /// A measured current capture (CSV of time and current): its duration, mean, RMS and peak
    /// current, charge per event, the segments a design runs it as, and a suggested `modes:`
    /// block.
    Capture(CaptureArgs),
    /// A picture of the discharge, the losses or the converters' efficiency (SVG or PNG, by the
    /// output's extension).
    Plot(PlotArgs),
    /// One self-contained HTML report: the tree, the budget of every mode, the runtime and its
    /// end, the heat ranking, the violations, the pictures and the caution.
    Report(ReportArgs),
    /// The lightest (or smallest) pack that keeps the design running for a target time: every
    /// cell in every count in series and parallel, ranked.
    Size(SizeArgs),
    /// Print the JSON Schema of the design file.
    Schema(SchemaArgs),
}

/// The arguments of `check`.
#[derive(Debug, Clone, clap::Args)]
pub struct CheckArgs {
    /// The design file (YAML).
    pub file: PathBuf,
}

/// The arguments of `budget`.
#[derive(Debug, Clone, clap::Args)]
pub struct BudgetArgs {
    /// The design file (YAML).
    pub file: PathBuf,
    /// Override one value of the design, e.g. `--set battery.parallel=2` or
    /// `--set loads.radio.draw.tx="90 mA"` (list items by id); may be repeated.
    #[arg(long = "set", value_name = "PATH=VALUE")]
    pub sets: Vec<String>,
    /// State of charge of the pack (default: the design's `battery.start`), e.g. `30%` or 0.3.
    #[arg(long, value_parser = parse_soc)]
    pub soc: Option<f64>,
    /// Only this mode.
    #[arg(long)]
    pub mode: Option<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = FormatArg::Table)]
    pub format: FormatArg,
    /// Write to this file instead of standard output.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
}

/// The arguments of `runtime`.
#[derive(Debug, Clone, clap::Args)]
pub struct RuntimeArgs {
    /// The design file (YAML).
    pub file: PathBuf,
    /// Override one value of the design, e.g. `--set battery.parallel=2` or
    /// `--set loads.radio.draw.tx="90 mA"` (list items by id); may be repeated.
    #[arg(long = "set", value_name = "PATH=VALUE")]
    pub sets: Vec<String>,
    #[command(flatten)]
    pub run: RunArgs,
    /// Add a decimated time series (t, SoC, OCV, V, I) that keeps the pulses' lowest voltages:
    /// with `--format json` beside the result, with `--format csv` alone (a table leaves it out).
    #[arg(long)]
    pub trace: bool,
    /// Output format.
    #[arg(long, value_enum, default_value_t = FormatArg::Table)]
    pub format: FormatArg,
    /// Write to this file instead of standard output.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
}

/// The arguments of `heat`.
#[derive(Debug, Clone, clap::Args)]
pub struct HeatArgs {
    /// The design file (YAML).
    pub file: PathBuf,
    /// Override one value of the design, e.g. `--set battery.parallel=2` or
    /// `--set loads.radio.draw.tx="90 mA"` (list items by id); may be repeated.
    #[arg(long = "set", value_name = "PATH=VALUE")]
    pub sets: Vec<String>,
    #[command(flatten)]
    pub run: RunArgs,
    /// Output format.
    #[arg(long, value_enum, default_value_t = FormatArg::Table)]
    pub format: FormatArg,
    /// Write to this file instead of standard output.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
}

/// The arguments of `spread`.
#[derive(Debug, Clone, clap::Args)]
pub struct SpreadArgs {
    /// The design file (YAML), with a `tolerances:` block.
    pub file: PathBuf,
    /// Override one value of the design (as for `runtime`); may be repeated.
    #[arg(long = "set", value_name = "PATH=VALUE")]
    pub sets: Vec<String>,
    #[command(flatten)]
    pub run: RunArgs,
    /// Number of simulated units.
    #[arg(long, default_value_t = 1000, value_parser = clap::value_parser!(u32).range(1..=1_000_000))]
    pub samples: u32,
    /// Seed of the random draws: the same seed gives the same numbers on any machine and
    /// any number of cores.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// The life every unit should reach, e.g. `2 y` or `90 d`: the share that does is shown.
    #[arg(long, value_parser = parse_duration)]
    pub target: Option<f64>,
    /// Also run the worst and best case: every value at the bound that shortens (resp.
    /// lengthens) the runtime.
    #[arg(long)]
    pub corners: bool,
    /// Output format (CSV: one row per simulated unit, its runtime, end and values).
    #[arg(long, value_enum, default_value_t = FormatArg::Table)]
    pub format: FormatArg,
    /// Write to this file instead of standard output.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
    #[command(flatten)]
    pub pictures: SpreadPictures,
}

/// The arguments of `cells`.
#[derive(Debug, Clone, clap::Args)]
pub struct CellsArgs {
    /// A preset to show in full: every parameter, its OCV curve and where its values come from.
    pub name: Option<String>,
    /// Output format (JSON and CSV give the summary: chemistry, designated nominal voltage,
    /// mean open-circuit voltage, capacity, energy, cutoff).
    #[arg(long, value_enum, default_value_t = FormatArg::Table)]
    pub format: FormatArg,
    /// Write to this file instead of standard output.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
}

/// The arguments of `compare`.
#[derive(Debug, Clone, clap::Args)]
pub struct CompareArgs {
    /// The design files, each optionally followed by its own `--set` overrides.
    #[arg(required = true, num_args = 1..)]
    pub files: Vec<PathBuf>,
    /// Override one value of the design file before it; may be repeated.
    #[arg(long = "set", value_name = "PATH=VALUE")]
    pub sets: Vec<String>,
    #[command(flatten)]
    pub run: RunArgs,
    /// A chart of every design's discharge (SVG or PNG, by the extension).
    #[arg(long)]
    pub plot: Option<PathBuf>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = FormatArg::Table)]
    pub format: FormatArg,
    /// Write to this file instead of standard output.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
    /// The files with their own overrides, from where each `--set` stands on the command line
    /// (filled in by `cli::parse`).
    #[arg(skip)]
    pub groups: Vec<Group>,
}

/// The arguments of `fit-cell`.
#[derive(Debug, Clone, clap::Args)]
pub struct FitCellArgs {
    /// A discharge curve at a constant current: `CURRENT:FILE`, e.g. `"200 mA:low.csv"`; the
    /// CSV has a header naming each column's quantity and unit (`capacity [mAh]`,
    /// `voltage [V]`). Two or more curves.
    #[arg(long = "curve", value_name = "CURRENT:FILE", required = true)]
    pub curves: Vec<String>,
    /// Name of the fitted cell (default `fitted-cell`).
    #[arg(long)]
    pub name: Option<String>,
    /// Current of the capacity rating (default the lowest curve current), e.g. `200 mA`.
    #[arg(long)]
    pub rated_current: Option<String>,
    /// End-of-discharge voltage (default the lowest final voltage of the curves), e.g. `3.0 V`.
    #[arg(long)]
    pub cutoff: Option<String>,
    /// Output format: table (YAML block and report), json (the cell and the report) or csv
    /// (the fitted table, a row per state of charge).
    #[arg(long, value_enum, default_value_t = FormatArg::Table)]
    pub format: FormatArg,
    /// Write to this file instead of standard output.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
}

/// The arguments of `capture`.
#[derive(Debug, Clone, clap::Args)]
pub struct CaptureArgs {
    /// The capture: a header naming each column's quantity and unit (`time [ms]`,
    /// `current [mA]`, optionally `voltage [V]`), then one row per sample.
    pub file: PathBuf,
    /// The cell the terminal-voltage tolerance is held on: a built-in preset, taken alone
    /// (one cell) at 25 °C.
    #[arg(long, default_value = "li-mno2-cr2032")]
    pub cell: String,
    /// How far the segments may move the cell's lowest terminal voltage, e.g. `5 mV`.
    #[arg(long, default_value = "5 mV")]
    pub tolerance: String,
    /// The load's id in the suggested block (default: the file's name).
    #[arg(long)]
    pub load: Option<String>,
    /// Accept negative samples (a probe's offset), which a design refuses.
    #[arg(long)]
    pub allow_negative: bool,
    /// Also draw the capture and its segments to this file (`.svg` or `.png`).
    #[arg(long, value_name = "FILE")]
    pub plot: Option<PathBuf>,
    /// Output format: table (the figures, the segments and the suggested block) or json.
    #[arg(long, value_enum, default_value_t = FormatArg::Table)]
    pub format: FormatArg,
    /// Write to this file instead of standard output.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
}

/// The arguments of `plot`.
#[derive(Debug, Clone, clap::Args)]
pub struct PlotArgs {
    /// The design file (YAML).
    pub file: PathBuf,
    /// Override one value of the design (as for `runtime`); may be repeated.
    #[arg(long = "set", value_name = "PATH=VALUE")]
    pub sets: Vec<String>,
    #[command(flatten)]
    pub run: RunArgs,
    /// What to draw.
    #[arg(long, value_enum, default_value_t = PlotKind::Discharge)]
    pub kind: PlotKind,
    /// The picture to write: `.svg` or `.png`.
    #[arg(short = 'o', long = "output", required = true)]
    pub output: PathBuf,
    /// Width in pixels.
    #[arg(long, default_value_t = 1200)]
    pub width: u32,
    /// Height in pixels.
    #[arg(long, default_value_t = 800)]
    pub height: u32,
}

/// The arguments of `report`.
#[derive(Debug, Clone, clap::Args)]
pub struct ReportArgs {
    /// The design file (YAML).
    pub file: PathBuf,
    /// Override one value of the design; may be repeated.
    #[arg(long = "set", value_name = "PATH=VALUE")]
    pub sets: Vec<String>,
    #[command(flatten)]
    pub run: RunArgs,
    /// State of charge of the budget tables (default: the design's `battery.start`).
    #[arg(long, value_parser = parse_soc)]
    pub soc: Option<f64>,
    #[command(flatten)]
    pub spread: ReportSpread,
    /// The HTML file to write.
    #[arg(short = 'o', long = "output", required = true)]
    pub output: PathBuf,
}

/// The arguments of `schema`.
#[derive(Debug, Clone, clap::Args)]
pub struct SchemaArgs {
    /// Write to this file instead of standard output.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
}

/// The pictures `spread` can also write.
#[derive(Debug, Clone, clap::Args)]
pub struct SpreadPictures {
    /// Also draw the histogram of the runtimes to this file (`.svg` or `.png`).
    #[arg(long, value_name = "FILE")]
    pub histogram: Option<PathBuf>,
    /// Also draw the tornado chart of the swings to this file (`.svg` or `.png`).
    #[arg(long, value_name = "FILE")]
    pub tornado: Option<PathBuf>,
}

/// How `report` runs the spread of a design with `tolerances:`.
#[derive(Debug, Clone, clap::Args)]
pub struct ReportSpread {
    /// Number of simulated units of the spread section (designs with `tolerances:` only).
    #[arg(long, default_value_t = 1000, value_parser = clap::value_parser!(u32).range(1..=1_000_000))]
    pub samples: u32,
    /// Seed of the spread's random draws.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// The life every unit should reach, e.g. `2 y`: the spread section shows the share that does.
    #[arg(long, value_parser = parse_duration)]
    pub target: Option<f64>,
}

fn parse_soc(s: &str) -> Result<f64, String> {
    let v = joulepath::units::parse_fraction(s).map_err(|e| {
        let hint = e.hint().map(|h| format!(" ({h})")).unwrap_or_default();
        format!("{e}{hint}")
    })?;
    if (0.0..=1.0).contains(&v) {
        Ok(v)
    } else {
        Err(format!("`{s}` is outside 0 %..100 %"))
    }
}

/// Options of a discharge run.
#[derive(Debug, Clone, clap::Args)]
pub struct RunArgs {
    /// Ambient temperature instead of the design's, e.g. `-10 °C` or `-10degC`.
    #[arg(long, value_parser = parse_temperature, allow_hyphen_values = true)]
    pub ambient: Option<f64>,
    /// Stop simulating after this long (default 20 y), e.g. `5 y` or `90 d`.
    #[arg(long, value_parser = parse_duration)]
    pub horizon: Option<f64>,
    /// Use the chronological reference solver (every pass executed; slow, for checking).
    #[arg(long)]
    pub exact: bool,
}

pub(super) fn parse_with(s: &str, dim: joulepath::units::Dim) -> Result<f64, String> {
    let q = joulepath::units::parse_quantity(s, &[dim]).map_err(|e| {
        let hint = e.hint().map(|h| format!(" ({h})")).unwrap_or_default();
        format!("{e}{hint}")
    })?;
    joulepath::units::physical(q, s).map_err(|e| e.to_string())?;
    Ok(q.value())
}

pub(super) fn parse_temperature(s: &str) -> Result<f64, String> {
    parse_with(s, joulepath::units::Dim::Temperature)
}

pub(super) fn parse_duration(s: &str) -> Result<f64, String> {
    let v = parse_with(s, joulepath::units::Dim::Time)?;
    if v > 0.0 {
        Ok(v)
    } else {
        Err(format!("`{s}` is not a duration above zero"))
    }
}

// ---- `size` ----------------------------------------------------------------------------------

/// What `size` ranks the packs by.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum RankArg {
    /// The mass of the pack's cells.
    Mass,
    /// The volume of the pack's cells.
    Volume,
}

/// The arguments of `size`.
#[derive(Debug, Clone, clap::Args)]
pub struct SizeArgs {
    /// The design file (YAML).
    pub file: PathBuf,
    /// The runtime a pack must reach, e.g. `2 y`, `90 d`, `500 h`.
    #[arg(long, value_parser = parse_duration, required = true)]
    pub target: f64,
    /// For a design with tolerances: the percentile of the runtime that must reach the target.
    #[arg(long, default_value_t = 5.0, value_parser = parse_percentile)]
    pub percentile: f64,
    /// For a design with tolerances: simulated units per candidate pack.
    #[arg(long, default_value_t = 200, value_parser = clap::value_parser!(u32).range(1..=100_000))]
    pub samples: u32,
    /// For a design with tolerances: seed of the random draws.
    #[arg(long, default_value_t = 1)]
    pub seed: u64,
    /// The cells to try, comma-separated: presets and the design's own cells (default: every
    /// preset and every cell of the design).
    #[arg(long, value_delimiter = ',')]
    pub cells: Vec<String>,
    /// Counts in series to try: `1..4` or a single count such as `2`.
    #[arg(long, default_value = "1..4", value_parser = parse_count_range)]
    pub series: (u32, u32),
    /// Counts in parallel to try: `1..6` or a single count such as `1`.
    #[arg(long, default_value = "1..6", value_parser = parse_count_range)]
    pub parallel: (u32, u32),
    /// Rank by the mass or the volume of the cells.
    #[arg(long = "by", value_enum, default_value_t = RankArg::Mass)]
    pub by: RankArg,
    /// Ambient temperature instead of the design's, e.g. `-10 °C`.
    #[arg(long, value_parser = parse_temperature, allow_hyphen_values = true)]
    pub ambient: Option<f64>,
    /// Override one value of the design before sizing; may be repeated.
    #[arg(long = "set", value_name = "PATH=VALUE")]
    pub sets: Vec<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = FormatArg::Table)]
    pub format: FormatArg,
    /// Write to this file instead of standard output.
    #[arg(short = 'o', long = "output")]
    pub output: Option<PathBuf>,
}

/// The most cells in series or in parallel a range may name (the checker's own limit).
pub const MAX_COUNT: u32 = 1000;

/// A range of counts: `1..4` (also `1..=4`) or one count `2`, from 1 to [`MAX_COUNT`].
pub(super) fn parse_count_range(s: &str) -> Result<(u32, u32), String> {
    let t = s.trim();
    let (a, b) = match t.split_once("..") {
        Some((a, b)) => (a.trim(), b.trim_start_matches('=').trim()),
        None => (t, t),
    };
    let count = |x: &str| -> Result<u32, String> {
        match x.parse::<u32>() {
            Ok(n) if (1..=MAX_COUNT).contains(&n) => Ok(n),
            _ => Err(format!(
                "`{s}` is not a range of whole counts from 1 to {MAX_COUNT}: write `1..4` or a single count such as `2`"
            )),
        }
    };
    let (lo, hi) = (count(a)?, count(b)?);
    if lo > hi {
        return Err(format!(
            "the range `{s}` runs backwards: write the lower count first, such as `{hi}..{lo}`"
        ));
    }
    Ok((lo, hi))
}

fn parse_percentile(s: &str) -> Result<f64, String> {
    match s.trim().trim_end_matches('%').trim().parse::<f64>() {
        Ok(p) if p > 0.0 && p < 100.0 => Ok(p),
        _ => Err(format!(
            "`{s}` is not a percentile above 0 and below 100, such as `5`"
        )),
    }
}
