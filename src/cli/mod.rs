//! Command-line front end (binary only): arguments, dispatch, and the rendering of problems.

mod args;
mod files;
mod groups;
mod pictures;
mod render;
mod run;
mod size;

pub use args::Args;
pub use run::run;
