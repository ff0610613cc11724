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
    /// Print the JSON Schema of the design file.
    Schema {
        /// Write to this file instead of standard output.
        #[arg(short = 'o', long = "output")]
        output: Option<PathBuf>,
    },
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
