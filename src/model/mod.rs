//! The checked model of a design: typed physics in SI units (pack, stages, loads, modes,
//! profile) plus the tree. A [`Design`] can only be made by [`Design::from_text`] or
//! [`Design::from_spec`], which check every rule of the design file.

mod ambient_file;
mod cell;
mod climate;
mod load;
mod lower;
mod mode;
mod pack;
mod presets;
mod stage;
mod table;
mod tolerance;

pub use ambient_file::{MAX_AMBIENT_BYTES, MAX_AMBIENT_ROWS, read_ambient, read_ambient_file};
pub use cell::{
    Cell, CellSize, Chemistry, DEFAULT_RATE_WINDOW_S, GAS_CONSTANT, MONTH_S, SelfDischargeLaw,
};
pub use climate::{Climate, MONTH_OF_YEAR_S, Recorded};
pub use load::{Captured, Draw, Load};
pub use mode::{Mode, RepeatUntil, Step, longest_holds};
pub use pack::{Buffer, Pack};
pub use presets::{Nominal, PRESETS, Preset};
pub use stage::{EffCurve, LossMemo, LossModel, Stage, StageKind};
pub use table::{Table, TableError};
pub use tolerance::{Dist, Knob, Range, Tolerance};

use crate::error::Error;
use crate::spec::{self, DesignSpec, SourceMap};
use crate::tree::Tree;

/// Name of the pack's own rail.
pub const BATTERY: &str = "battery";

/// A checked design.
#[derive(Debug, Clone)]
pub struct Design {
    /// Title shown in reports.
    pub(crate) title: String,
    /// Ambient temperature, °C.
    pub(crate) ambient_c: f64,
    /// How the ambient moves around `ambient_c` along the run (a yearly and a daily cycle;
    /// none: constant).
    pub(crate) climate: Option<Climate>,
    /// The pack.
    pub(crate) pack: Pack,
    /// Stages, in file order.
    pub(crate) stages: Vec<Stage>,
    /// Loads, in file order.
    pub(crate) loads: Vec<Load>,
    /// Modes, in file order.
    pub(crate) modes: Vec<Mode>,
    /// The duty profile.
    pub(crate) profile: Vec<Step>,
    /// The tree.
    pub(crate) tree: Tree,
    /// The values that spread from unit to unit (`tolerances:`), in file order.
    pub(crate) tolerances: Vec<Tolerance>,
}

impl Design {
    /// Read and check a design file's text.
    ///
    /// # Errors
    ///
    /// [`Error::Invalid`] with every problem found, each with its YAML path and place.
    ///
    /// # Examples
    ///
    /// ```
    /// let text = r#"
    /// cells:
    ///   c: { capacity: 1 Ah, ocv: [[0 %, 3 V], [100 %, 4 V]], resistance: 0.1 ohm, cutoff: 3 V }
    /// battery: { cell: c }
    /// loads: [{ id: lamp, rail: battery, draw: { on: 100 mA } }]
    /// modes: { lit: { lamp: on } }
    /// profile: [{ mode: lit, for: 1 h }]
    /// "#;
    /// let d = joulepath::Design::from_text(text).unwrap();
    /// assert_eq!(d.loads()[0].id(), "lamp");
    /// assert!((d.pack().ocv(0.5) - 3.5).abs() < 1e-12);
    /// ```
    pub fn from_text(text: &str) -> Result<Self, Error> {
        Self::from_text_with(text, &[])
    }

    /// Read and check a design file's text with `--set` overrides applied.
    ///
    /// # Errors
    ///
    /// [`Error::Invalid`] with every problem found, overrides included.
    pub fn from_text_with(text: &str, overrides: &[spec::Override]) -> Result<Self, Error> {
        Self::from_text_at(text, overrides, None)
    }

    /// Read and check a design file's text with overrides; files it names (captures, a recorded ambient) are read
    /// relative to `dir`, the design file's directory.
    ///
    /// # Errors
    ///
    /// [`Error::Invalid`] with every problem found, those of the files it names included.
    pub fn from_text_in(
        text: &str,
        overrides: &[spec::Override],
        dir: &std::path::Path,
    ) -> Result<Self, Error> {
        Self::from_text_at(text, overrides, Some(dir))
    }

    /// Read and check a design file; files it names (captures, a recorded ambient) are read relative to its
    /// directory.
    ///
    /// # Errors
    ///
    /// [`Error::Io`] when the file cannot be read, else as [`Design::from_text_in`].
    pub fn from_file(path: &std::path::Path) -> Result<Self, Error> {
        let text = std::fs::read_to_string(path).map_err(Error::Io)?;
        let dir = match path.parent() {
            Some(p) if !p.as_os_str().is_empty() => p,
            _ => std::path::Path::new("."),
        };
        Self::from_text_in(&text, &[], dir)
    }

    fn from_text_at(
        text: &str,
        overrides: &[spec::Override],
        dir: Option<&std::path::Path>,
    ) -> Result<Self, Error> {
        match spec::parse_partial(text, overrides) {
            Ok(mut parsed) => {
                if let Some(d) = dir {
                    parsed.source.set_base_dir(d);
                }
                Self::from_spec(&parsed.spec, &parsed.source)
            }
            // The checker looks at what could be read, so that every problem is reported at once.
            Err((mut diags, Some(mut partial))) => {
                if let Some(d) = dir {
                    partial.source.set_base_dir(d);
                }
                diags.extend(lower::partial(&partial));
                Err(Error::Invalid(diags))
            }
            Err((diags, None)) => Err(Error::Invalid(diags)),
        }
    }

    /// Check a parsed design; `source` gives the places of values for messages.
    ///
    /// # Errors
    ///
    /// [`Error::Invalid`] with every problem found.
    pub fn from_spec(spec: &DesignSpec, source: &SourceMap) -> Result<Self, Error> {
        lower::lower(spec, source).map_err(Error::Invalid)
    }

    /// The rail's name: `battery` or the stage id.
    pub fn rail_name(&self, rail: usize) -> &str {
        if rail == 0 {
            BATTERY
        } else {
            &self.stages[rail - 1].id
        }
    }

    /// The modes the file names, by index (not the segments of captures).
    pub fn file_modes(&self) -> Vec<usize> {
        (0..self.modes.len())
            .filter(|&m| self.modes[m].in_file())
            .collect()
    }

    /// The mode of the file that mode `m` is (itself, or the mode a segment is part of).
    pub fn file_mode(&self, m: usize) -> usize {
        self.modes[m].part_of.unwrap_or(m)
    }

    /// Index of the mode called `name`.
    pub fn mode_index(&self, name: &str) -> Option<usize> {
        self.modes.iter().position(|m| m.name == name)
    }

    /// Give the design another title (reports show it; the `--set` changes it was run with).
    pub fn set_title(&mut self, title: String) {
        self.title = title;
    }

    /// Run this design at one constant ambient temperature `ambient_c` (°C), without its climate
    /// (the `--ambient` option).
    ///
    /// # Errors
    ///
    /// The physical range of an ambient temperature, when `ambient_c` is outside it (the design
    /// is then unchanged).
    pub fn set_ambient(&mut self, ambient_c: f64) -> Result<(), Range> {
        let range = Knob::Ambient.range();
        if !range.contains(ambient_c) {
            return Err(range);
        }
        self.ambient_c = ambient_c;
        self.climate = None;
        Ok(())
    }
}

/// Read access to the checked values (the fields stay private: only the checker builds a `Design`).
impl Design {
    /// Title shown in reports.
    pub fn title(&self) -> &str {
        &self.title
    }

    /// Ambient temperature, °C.
    pub fn ambient_c(&self) -> f64 {
        self.ambient_c
    }

    /// How the ambient moves around `ambient_c` along the run (a yearly and a daily cycle;
    /// none: constant).
    pub fn climate(&self) -> Option<&Climate> {
        self.climate.as_ref()
    }

    /// The pack.
    pub fn pack(&self) -> &Pack {
        &self.pack
    }

    /// Stages, in file order.
    pub fn stages(&self) -> &[Stage] {
        &self.stages
    }

    /// Loads, in file order.
    pub fn loads(&self) -> &[Load] {
        &self.loads
    }

    /// Modes, in file order.
    pub fn modes(&self) -> &[Mode] {
        &self.modes
    }

    /// The duty profile.
    pub fn profile(&self) -> &[Step] {
        &self.profile
    }

    /// The tree.
    pub fn tree(&self) -> &Tree {
        &self.tree
    }

    /// Whether a stage has a buffer capacitor on its output rail.
    pub fn has_rail_buffers(&self) -> bool {
        self.stages.iter().any(|s| s.buffer.is_some())
    }

    /// The values that spread from unit to unit (`tolerances:`), in file order.
    pub fn tolerances(&self) -> &[Tolerance] {
        &self.tolerances
    }
}
