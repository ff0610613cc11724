//! The integration tests: one binary, one module per concern.

mod util;

mod ambient;
mod browser;
mod buffer;
mod capture;
mod cli;
mod errors;
mod examples;
mod fit;
mod fuzz;
mod hardening;
mod json;
mod led;
mod plots;
mod presets;
mod properties;
mod rail_buffer;
mod reference;
mod reports;
mod runtime;
mod schema;
mod size;
mod spread;
