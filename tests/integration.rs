//! The integration tests: one binary, one module per concern.

mod util;

mod cli;
mod errors;
mod examples;
mod json;
mod properties;
mod reference;
mod runtime;
mod schema;
