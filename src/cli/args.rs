//! The command line.

use std::path::PathBuf;

use clap::{Parser, Subcommand, ValueEnum};

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
    Check {
        /// The design file (YAML).
        file: PathBuf,
    },
    /// The operating point of every mode: pack, stages and loads.
    Budget {
        /// The design file (YAML).
        file: PathBuf,
        /// Override one value of the design, e.g. `--set battery.parallel=2` or
        /// `--set loads.radio.draw.tx="90 mA"` (list items by id); may be repeated.
        #[arg(long = "set", value_name = "PATH=VALUE")]
        sets: Vec<String>,
        /// State of charge of the pack (default: the design's `battery.start`), e.g. `30%` or 0.3.
        #[arg(long, value_parser = parse_soc)]
        soc: Option<f64>,
        /// Only this mode.
        #[arg(long)]
        mode: Option<String>,
        /// Output format.
        #[arg(long, value_enum, default_value_t = FormatArg::Table)]
        format: FormatArg,
        /// Write to this file instead of standard output.
        #[arg(short = 'o', long = "output")]
        output: Option<PathBuf>,
    },
    /// How long the product runs in the way it is used, why it stops, and where the energy goes.
    Runtime {
        /// The design file (YAML).
        file: PathBuf,
        /// Override one value of the design, e.g. `--set battery.parallel=2` or
        /// `--set loads.radio.draw.tx="90 mA"` (list items by id); may be repeated.
        #[arg(long = "set", value_name = "PATH=VALUE")]
        sets: Vec<String>,
        #[command(flatten)]
        run: RunArgs,
        /// Add a decimated time series (t, SoC, OCV, V, I) that keeps the pulses' lowest voltages:
        /// with `--format json` beside the result, with `--format csv` alone (a table leaves it out).
        #[arg(long)]
        trace: bool,
        /// Output format.
        #[arg(long, value_enum, default_value_t = FormatArg::Table)]
        format: FormatArg,
        /// Write to this file instead of standard output.
        #[arg(short = 'o', long = "output")]
        output: Option<PathBuf>,
    },
    /// The stages and the pack ranked by the energy they turn into heat over the runtime.
    Heat {
        /// The design file (YAML).
        file: PathBuf,
        /// Override one value of the design, e.g. `--set battery.parallel=2` or
        /// `--set loads.radio.draw.tx="90 mA"` (list items by id); may be repeated.
        #[arg(long = "set", value_name = "PATH=VALUE")]
        sets: Vec<String>,
        #[command(flatten)]
        run: RunArgs,
        /// Output format.
        #[arg(long, value_enum, default_value_t = FormatArg::Table)]
        format: FormatArg,
        /// Write to this file instead of standard output.
        #[arg(short = 'o', long = "output")]
        output: Option<PathBuf>,
    },
    /// Runtime across units: a Monte Carlo over the design's `tolerances:` (percentiles, the
    /// share reaching a target, why units stop, what moves the runtime most, the corners).
    Spread {
        /// The design file (YAML), with a `tolerances:` block.
        file: PathBuf,
        /// Override one value of the design (as for `runtime`); may be repeated.
        #[arg(long = "set", value_name = "PATH=VALUE")]
        sets: Vec<String>,
        #[command(flatten)]
        run: RunArgs,
        /// Number of simulated units.
        #[arg(long, default_value_t = 1000, value_parser = clap::value_parser!(u32).range(1..=1_000_000))]
        samples: u32,
        /// Seed of the random draws: the same seed gives the same numbers on any machine and
        /// any number of cores.
        #[arg(long, default_value_t = 1)]
        seed: u64,
        /// The life every unit should reach, e.g. `2 y` or `90 d`: the share that does is shown.
        #[arg(long, value_parser = parse_duration)]
        target: Option<f64>,
        /// Also run the worst and best case: every value at the bound that shortens (resp.
        /// lengthens) the runtime.
        #[arg(long)]
        corners: bool,
        /// Output format (CSV: one row per simulated unit, its runtime, end and values).
        #[arg(long, value_enum, default_value_t = FormatArg::Table)]
        format: FormatArg,
        /// Write to this file instead of standard output.
        #[arg(short = 'o', long = "output")]
        output: Option<PathBuf>,
        #[command(flatten)]
        pictures: SpreadPictures,
    },
    /// The built-in cell presets, or one of them in full.
    Cells {
        /// A preset to show in full: every parameter, its OCV curve and where its values come from.
        name: Option<String>,
        /// Output format (JSON and CSV give the summary: chemistry, designated nominal voltage,
        /// mean open-circuit voltage, capacity, energy, cutoff).
        #[arg(long, value_enum, default_value_t = FormatArg::Table)]
        format: FormatArg,
        /// Write to this file instead of standard output.
        #[arg(short = 'o', long = "output")]
        output: Option<PathBuf>,
    },
    /// The runtime analysis of several designs side by side, and which one wins.
    ///
    /// `compare FILE [--set PATH=VALUE]... FILE [--set PATH=VALUE]... [--format F] [-o OUT]
    /// [--plot OUT.svg] [--ambient T] [--horizon D] [--exact]`: each `--set` applies to the file
    /// before it, so one file can be compared with its variants.
    Compare {
        /// Design files, each followed by its own `--set` overrides, then options.
        #[arg(trailing_var_arg = true, allow_hyphen_values = true, num_args = 1.., required = true)]
        words: Vec<String>,
    },
    /// A cell fitted from datasheet discharge curves, printed as a `cells:` block.
    FitCell {
        /// A discharge curve at a constant current: `CURRENT:FILE`, e.g. `"200 mA:low.csv"`; the
        /// CSV has a header naming each column's quantity and unit (`capacity [mAh]`,
        /// `voltage [V]`). Two or more curves.
        #[arg(long = "curve", value_name = "CURRENT:FILE", required = true)]
        curves: Vec<String>,
        /// Name of the fitted cell (default `fitted-cell`).
        #[arg(long)]
        name: Option<String>,
        /// Current of the capacity rating (default the lowest curve current), e.g. `200 mA`.
        #[arg(long)]
        rated_current: Option<String>,
        /// End-of-discharge voltage (default the lowest final voltage of the curves), e.g. `3.0 V`.
        #[arg(long)]
        cutoff: Option<String>,
        /// Output format: table (YAML block and report), json (the cell and the report) or csv
        /// (the fitted table, a row per state of charge).
        #[arg(long, value_enum, default_value_t = FormatArg::Table)]
        format: FormatArg,
        /// Write to this file instead of standard output.
        #[arg(short = 'o', long = "output")]
        output: Option<PathBuf>,
    },
    /// A picture of the discharge, the losses or the converters' efficiency (SVG or PNG, by the
    /// output's extension).
    Plot {
        /// The design file (YAML).
        file: PathBuf,
        /// Override one value of the design (as for `runtime`); may be repeated.
        #[arg(long = "set", value_name = "PATH=VALUE")]
        sets: Vec<String>,
        #[command(flatten)]
        run: RunArgs,
        /// What to draw.
        #[arg(long, value_enum, default_value_t = PlotKind::Discharge)]
        kind: PlotKind,
        /// The picture to write: `.svg` or `.png`.
        #[arg(short = 'o', long = "output", required = true)]
        output: PathBuf,
        /// Width in pixels.
        #[arg(long, default_value_t = 1200)]
        width: u32,
        /// Height in pixels.
        #[arg(long, default_value_t = 800)]
        height: u32,
    },
    /// One self-contained HTML report: the tree, the budget of every mode, the runtime and its
    /// end, the heat ranking, the violations, the pictures and the caution.
    Report {
        /// The design file (YAML).
        file: PathBuf,
        /// Override one value of the design; may be repeated.
        #[arg(long = "set", value_name = "PATH=VALUE")]
        sets: Vec<String>,
        #[command(flatten)]
        run: RunArgs,
        /// State of charge of the budget tables (default: the design's `battery.start`).
        #[arg(long, value_parser = parse_soc)]
        soc: Option<f64>,
        #[command(flatten)]
        spread: ReportSpread,
        /// The HTML file to write.
        #[arg(short = 'o', long = "output", required = true)]
        output: PathBuf,
    },
    /// Print the JSON Schema of the design file.
    Schema {
        /// Write to this file instead of standard output.
        #[arg(short = 'o', long = "output")]
        output: Option<PathBuf>,
    },
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
