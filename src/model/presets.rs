//! The built-in cell presets. Each is one YAML file under `presets/` holding the keys of a
//! `cells:` entry plus a `description:`, with the origin of every value in a comment beside it.
//! The files are embedded at build time and read with the same code as a design file's cells,
//! so their values pass the same checks.

use super::cell::{Cell, Chemistry};
use super::lower;
use crate::error::{Diagnostic, Error, did_you_mean};
use crate::spec::{CellSpec, SourceMap, backticked, read_cell};

/// Every built-in preset as (name, text of `presets/NAME.yaml`), in the order
/// `joulepath cells` lists them.
pub const PRESETS: &[(&str, &str)] = &[
    (
        "alkaline-aa",
        include_str!("../../presets/alkaline-aa.yaml"),
    ),
    (
        "alkaline-aaa",
        include_str!("../../presets/alkaline-aaa.yaml"),
    ),
    ("nimh-aa", include_str!("../../presets/nimh-aa.yaml")),
    (
        "li-mno2-cr2032",
        include_str!("../../presets/li-mno2-cr2032.yaml"),
    ),
    (
        "li-socl2-aa",
        include_str!("../../presets/li-socl2-aa.yaml"),
    ),
    (
        "li-ion-18650",
        include_str!("../../presets/li-ion-18650.yaml"),
    ),
    (
        "lifepo4-18650",
        include_str!("../../presets/lifepo4-18650.yaml"),
    ),
    (
        "li-ion-pouch-500",
        include_str!("../../presets/li-ion-pouch-500.yaml"),
    ),
];

/// A built-in preset, read and checked.
///
/// # Examples
///
/// ```
/// use joulepath::model::Preset;
/// let p = Preset::load("alkaline-aa").unwrap();
/// assert_eq!(p.cell().chemistry().name(), "alkaline");
/// assert!((p.cell().cutoff_v() - 0.9).abs() < 1e-12);
/// assert!(Preset::load("alkaline-a").is_err());
/// ```
#[derive(Debug, Clone)]
pub struct Preset {
    /// Its name, as written in `battery.cell` or `preset:`.
    pub(crate) name: &'static str,
    /// One line saying what cell it is.
    pub(crate) description: String,
    /// The checked cell.
    pub(crate) cell: Cell,
}

impl Preset {
    /// The names of the presets, in listing order.
    pub fn names() -> impl Iterator<Item = &'static str> {
        PRESETS.iter().map(|p| p.0)
    }

    /// The YAML text of the preset called `name`.
    pub fn text(name: &str) -> Option<&'static str> {
        PRESETS.iter().find(|p| p.0 == name).map(|p| p.1)
    }

    /// What to suggest for an unknown preset name: the nearest name, or the list of all.
    pub fn suggestion(name: &str) -> String {
        match did_you_mean(name, Self::names()) {
            Some(s) => format!("did you mean `{s}`?"),
            None => {
                let names: Vec<&str> = Self::names().collect();
                format!("the presets are {}", backticked(&names))
            }
        }
    }

    /// Read and check the preset called `name`.
    ///
    /// # Errors
    ///
    /// An unknown name (with a did-you-mean), or a preset file that fails the checks of a
    /// `cells:` entry (a fault of the build, caught by the tests), each problem with its place
    /// in `presets/NAME.yaml`.
    pub fn load(name: &str) -> Result<Self, Error> {
        let Some(&(name, text)) = PRESETS.iter().find(|p| p.0 == name) else {
            return Err(Error::single(
                Diagnostic::new("", format!("unknown cell preset `{name}`"))
                    .with_hint(Self::suggestion(name)),
            ));
        };
        let (spec, source) =
            spec_of(name, text).map_err(|m| Error::single(Diagnostic::new("", m)))?;
        let cell = lower::lone_cell(name, &spec, &source).map_err(|ds| {
            let file = format!("presets/{name}.yaml");
            Error::Invalid(
                ds.into_iter()
                    .map(|d| {
                        let path = d.path().trim_start_matches('.').to_string();
                        let at = source.nearest(&path);
                        Diagnostic::new(path, format!("{file}: {}", d.message()))
                            .with_hint_opt(d.hint().map(str::to_string))
                            .at(at)
                    })
                    .collect(),
            )
        })?;
        Ok(Self {
            name,
            description: spec.description.unwrap_or_default(),
            cell,
        })
    }

    /// Every preset, read and checked, in listing order.
    ///
    /// # Errors
    ///
    /// The problems of the first preset that fails its checks (a fault of the build).
    pub fn all() -> Result<Vec<Self>, Error> {
        Self::names().map(Self::load).collect()
    }

    /// Nominal voltage: the designated voltage of the cell's chemistry ([`Nominal::of`]), or the
    /// mean open-circuit voltage for a chemistry without one, V.
    pub fn nominal_v(&self) -> f64 {
        Nominal::of(self.cell.chemistry).map_or_else(|| self.mean_ocv_v(), |n| n.volts)
    }

    /// The mean open-circuit voltage over 0..100 % SoC, V: the energy the cell holds per unit
    /// of charge.
    pub fn mean_ocv_v(&self) -> f64 {
        self.cell.ocv.mean(0.0, 1.0)
    }

    /// Rated capacity, Ah.
    pub fn capacity_ah(&self) -> f64 {
        self.cell.capacity_c / 3600.0
    }

    /// Energy as cells are rated: rated capacity x nominal voltage, Wh.
    pub fn energy_wh(&self) -> f64 {
        self.capacity_ah() * self.nominal_v()
    }
}

/// The designated nominal voltage of a chemistry: the voltage the standards give the system (or
/// the trade marks cells with where the standard leaves it to the maker), not a measured mean.
///
/// # Examples
///
/// ```
/// use joulepath::model::{Chemistry, Nominal};
/// assert_eq!(Nominal::of(Chemistry::Alkaline).unwrap().volts(), 1.5);
/// assert!(Nominal::of(Chemistry::Other).is_none());
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Nominal {
    /// The designated voltage per cell, V.
    pub(crate) volts: f64,
    /// Where it comes from, in a few words.
    pub(crate) source: &'static str,
}

impl Nominal {
    /// The designated nominal voltage of `chemistry`; `None` for `other`.
    pub fn of(chemistry: Chemistry) -> Option<Self> {
        // Status of each value, as the team's reference list gives it (../shared/REFERENCES.md):
        // system letters L 1.5 V and C 3.0 V [C19, confirmed], E 3.6 V [C19, from memory];
        // NiMH 1.2 V and lead-acid 2.0 V per cell [C21, confirmed; the standards' numbers are
        // from memory]; Li-ion 3.6 V and LiFePO4 3.2 V [C21, from memory / common practice].
        let (volts, source) = match chemistry {
            Chemistry::Alkaline => (1.5, "IEC 60086-1, system L"),
            Chemistry::LiMnO2 => (3.0, "IEC 60086-1, system C"),
            Chemistry::LiSoCl2 => (3.6, "IEC 60086-1, system E"),
            Chemistry::NiMh => (1.2, "IEC 61951-2"),
            Chemistry::LiIon => (3.6, "IEC 61960-3; makers mark 3.6 to 3.7 V"),
            Chemistry::LiFePo4 => (3.2, "IEC 61960-3; makers mark 3.2 V"),
            Chemistry::LeadAcid => (2.0, "IEC 60896-11 and IEC 61056-1"),
            Chemistry::Other => return None,
        };
        Some(Self { volts, source })
    }
}

/// The unchecked cell of the preset called `name`: `None` for an unknown name, an error message
/// for a file that is not a cell.
pub(super) fn spec(name: &str) -> Option<Result<CellSpec, String>> {
    PRESETS
        .iter()
        .find(|p| p.0 == name)
        .map(|&(name, text)| spec_of(name, text).map(|(spec, _)| spec))
}

/// The cell of a preset's text and the places of its values.
fn spec_of(name: &str, text: &str) -> Result<(CellSpec, SourceMap), String> {
    let (spec, source) =
        read_cell(text).map_err(|e| format!("the built-in preset `{name}` cannot be read: {e}"))?;
    if spec.preset.is_some() {
        return Err(format!(
            "the built-in preset `{name}` names a `preset:` of its own; a preset gives every key itself"
        ));
    }
    Ok((spec, source))
}

/// Read access to the checked values (the fields stay private: only the checker builds a `Preset`).
impl Preset {
    /// Its name, as written in `battery.cell` or `preset:`.
    pub fn name(&self) -> &'static str {
        self.name
    }

    /// One line saying what cell it is.
    pub fn description(&self) -> &str {
        &self.description
    }

    /// The checked cell.
    pub fn cell(&self) -> &Cell {
        &self.cell
    }
}

/// Read access to the checked values (the fields stay private: only the checker builds a `Nominal`).
impl Nominal {
    /// The designated voltage per cell, V.
    pub fn volts(&self) -> f64 {
        self.volts
    }

    /// Where it comes from, in a few words.
    pub fn source(&self) -> &'static str {
        self.source
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_preset_lowers_without_error() {
        for name in Preset::names() {
            let p = Preset::load(name).unwrap_or_else(|e| panic!("preset `{name}`:\n{e}"));
            assert_eq!(p.cell.name, name);
            assert!(
                !p.description.is_empty(),
                "preset `{name}` has no description"
            );
        }
    }

    #[test]
    fn every_preset_gives_every_key() {
        // A preset stands alone: no key is left to a default.
        for &(name, text) in PRESETS {
            let s = CellSpec::from_yaml(text).unwrap();
            let given = [
                s.description.is_some(),
                s.chemistry.is_some(),
                s.capacity.is_some(),
                s.rated_current.is_some(),
                s.ocv.is_some(),
                s.resistance.is_some(),
                s.polarization.is_some(),
                s.peukert.is_some(),
                s.cutoff.is_some(),
                s.max_current.is_some(),
                s.self_discharge.is_some(),
                s.temperature.is_some(),
                s.mass.is_some(),
                s.size.is_some(),
            ];
            assert!(given.iter().all(|g| *g), "preset `{name}` leaves a key out");
        }
    }

    #[test]
    fn names_are_unique_lowercase_and_hyphenated() {
        let mut seen = std::collections::HashSet::new();
        for name in Preset::names() {
            assert!(seen.insert(name), "`{name}` twice");
            assert!(
                name.chars()
                    .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-'),
                "`{name}`"
            );
        }
    }

    #[test]
    fn every_value_line_names_its_origin() {
        // Each line holding a number carries a comment: the origin of its values.
        for &(name, text) in PRESETS {
            for line in text.lines().filter(|l| !l.trim_start().starts_with('#')) {
                let has_number = line.chars().any(|c| c.is_ascii_digit());
                let is_text = line.starts_with("description:") || line.starts_with("chemistry:");
                if has_number && !is_text {
                    assert!(
                        line.contains(" # "),
                        "preset `{name}`: no origin beside `{line}`"
                    );
                }
            }
        }
    }

    #[test]
    fn unknown_names_get_a_suggestion() {
        let e = Preset::load("li-ion-1865").unwrap_err();
        let d = &e.diagnostics()[0];
        assert_eq!(d.message(), "unknown cell preset `li-ion-1865`");
        assert_eq!(d.hint(), Some("did you mean `li-ion-18650`?"));
        assert!(Preset::suggestion("zinc-air").starts_with("the presets are `alkaline-aa`"));
    }
}
