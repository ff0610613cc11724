//! joulepath: the operating point of every stage of a battery-powered product's power tree,
//! its runtime across the discharge, and where the energy goes.
//!
//! Data flows one way: text -> [`spec`] (serde mirror) -> [`model`] (checked physics) +
//! [`tree`] (the graph and its walk order) -> [`solve`] (operating points) -> [`report`]
//! (tables, JSON, CSV); [`size`] tries packs against a target runtime. The library never
//! prints; reports write to any `std::io::Write`.

pub mod error;
pub mod fit;
mod hash;
pub mod model;
pub mod report;
pub mod size;
pub mod solve;
pub mod spec;
pub mod tree;
pub mod units;

pub use error::{Diagnostic, Error, Location};
pub use model::Design;
