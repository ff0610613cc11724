//! Command-line front end (binary only): arguments, dispatch, and the rendering of problems.

mod args;
mod capture;
mod files;
mod fit_cell;
mod groups;
mod pictures;
mod render;
mod run;
mod size;

pub use args::Args;
pub use run::run;

use clap::{CommandFactory, FromArgMatches};

/// The command line, parsed: clap's matches, with `compare`'s files grouped with the `--set`
/// values that follow each. Exits as clap does on a usage error (code 2) or `--help`.
pub fn parse() -> Args {
    let matches = Args::command().get_matches();
    let mut args = Args::from_arg_matches(&matches).unwrap_or_else(|e| e.exit());
    if let (args::Command::Compare(c), Some((_, sub))) = (&mut args.command, matches.subcommand()) {
        c.groups = groups::groups(sub);
    }
    args
}
