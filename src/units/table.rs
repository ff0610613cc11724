//! The table of accepted unit spellings, prefix handling and spelling suggestions.

use super::dim::Dim;
use crate::hash::FastMap;

const DAY: f64 = 86_400.0;
const WEEK: f64 = 7.0 * DAY;
const MONTH: f64 = 30.44 * DAY;
const YEAR: f64 = 365.25 * DAY;

/// One accepted spelling of a unit: SI value = number × `scale` + `offset`.
pub(super) struct UnitDef {
    pub(super) spelling: &'static str,
    pub(super) dim: Dim,
    pub(super) scale: f64,
    pub(super) offset: f64,
    prefixable: bool,
}

const fn unit(spelling: &'static str, dim: Dim, scale: f64, prefixable: bool) -> UnitDef {
    UnitDef {
        spelling,
        dim,
        scale,
        offset: 0.0,
        prefixable,
    }
}

const fn per(spelling: &'static str, period: f64) -> UnitDef {
    unit(spelling, Dim::Rate, 0.01 / period, false)
}

static UNITS: &[UnitDef] = &[
    unit("V", Dim::Voltage, 1.0, true),
    unit("A", Dim::Current, 1.0, true),
    unit("W", Dim::Power, 1.0, true),
    unit("\u{3a9}", Dim::Resistance, 1.0, true),
    unit("\u{2126}", Dim::Resistance, 1.0, true),
    unit("ohm", Dim::Resistance, 1.0, true),
    unit("ohms", Dim::Resistance, 1.0, true),
    unit("Ohm", Dim::Resistance, 1.0, true),
    unit("Ohms", Dim::Resistance, 1.0, true),
    unit("Ah", Dim::Charge, 3600.0, true),
    unit("Wh", Dim::Energy, 3600.0, true),
    unit("J", Dim::Energy, 1.0, true),
    unit("s", Dim::Time, 1.0, true),
    unit("min", Dim::Time, 60.0, false),
    unit("h", Dim::Time, 3600.0, false),
    unit("d", Dim::Time, DAY, false),
    unit("week", Dim::Time, WEEK, false),
    unit("wk", Dim::Time, WEEK, false),
    unit("y", Dim::Time, YEAR, false),
    unit("yr", Dim::Time, YEAR, false),
    unit("°C", Dim::Temperature, 1.0, false),
    unit("\u{2103}", Dim::Temperature, 1.0, false),
    unit("degC", Dim::Temperature, 1.0, false),
    UnitDef {
        spelling: "K",
        dim: Dim::Temperature,
        scale: 1.0,
        offset: -273.15,
        prefixable: false,
    },
    unit("°C/W", Dim::ThermalResistance, 1.0, false),
    unit("\u{2103}/W", Dim::ThermalResistance, 1.0, false),
    unit("degC/W", Dim::ThermalResistance, 1.0, false),
    unit("K/W", Dim::ThermalResistance, 1.0, false),
    unit("%", Dim::Fraction, 0.01, false),
    per("%/month", MONTH),
    per("%/year", YEAR),
    per("%/yr", YEAR),
    per("%/y", YEAR),
    per("%/week", WEEK),
    per("%/wk", WEEK),
    per("%/day", DAY),
    per("%/d", DAY),
    per("%/h", 3600.0),
    // Mass is stored in kilograms: a gram is 1e-3 of it, and takes the prefixes (`kg`, `mg`).
    unit("g", Dim::Mass, 1e-3, true),
    unit("m", Dim::Length, 1.0, true),
    // The centimetre's prefix is not in the table of prefixes (it is seldom used elsewhere).
    unit("cm", Dim::Length, 1e-2, false),
    // An activation energy; one electronvolt per particle is the Faraday constant times one
    // volt per mole, 96 485.332 J/mol (CODATA 2018: F = 96 485.332 12 C/mol, exact).
    unit("J/mol", Dim::MolarEnergy, 1.0, true),
    unit("eV", Dim::MolarEnergy, 96_485.332_12, false),
    unit("F", Dim::Capacitance, 1.0, true),
];

/// Metric prefixes and their powers of ten. Case matters: `m` is milli, `M` mega.
static PREFIXES: &[(&str, i32)] = &[
    ("p", -12),
    ("n", -9),
    ("u", -6),
    ("\u{b5}", -6),
    ("\u{3bc}", -6),
    ("m", -3),
    ("k", 3),
    ("M", 6),
    ("G", 9),
];

/// Common spellings that are not accepted, mapped to the accepted one.
static NEAR_MISSES: &[(&str, &str)] = &[
    ("sec", "s"),
    ("secs", "s"),
    ("second", "s"),
    ("seconds", "s"),
    ("mins", "min"),
    ("minute", "min"),
    ("minutes", "min"),
    ("hr", "h"),
    ("hrs", "h"),
    ("hour", "h"),
    ("hours", "h"),
    ("day", "d"),
    ("days", "d"),
    ("weeks", "week"),
    ("year", "y"),
    ("years", "y"),
    ("amp", "A"),
    ("amps", "A"),
    ("volt", "V"),
    ("volts", "V"),
    ("watt", "W"),
    ("watts", "W"),
    ("kelvin", "K"),
    ("celsius", "°C"),
    ("deg", "°C"),
    ("ºc", "°C"),
    ("c/w", "°C/W"),
    ("percent", "%"),
    ("pct", "%"),
    ("%/mo", "%/month"),
    ("%/days", "%/day"),
    ("%/hr", "%/h"),
];

pub(super) fn prefix_exponent(prefix: &str) -> Option<i32> {
    PREFIXES.iter().find(|(p, _)| *p == prefix).map(|&(_, e)| e)
}

/// Multiplies by a power of ten, dividing for negative powers so that values
/// such as `2.5 µ` land on the nearest double.
pub(super) fn apply_exp10(x: f64, exp: i32) -> f64 {
    if exp >= 0 {
        x * 10f64.powi(exp)
    } else {
        x / 10f64.powi(-exp)
    }
}

/// Result of looking a unit spelling up in the table.
#[derive(Clone, Copy)]
pub(super) enum Lookup {
    /// A known unit, with the power of ten of its prefix (0 without one).
    Found(&'static UnitDef, i32),
    /// A known unit that does not take the prefix in front of it.
    NoPrefix(&'static str, &'static UnitDef),
    /// Not a unit at all.
    Unknown,
}

/// Looks a unit spelling up: one hash lookup in an index of every spelling with and without
/// prefix, built on first use (a design has tens of thousands of quantities).
pub(super) fn lookup(unit: &str) -> Lookup {
    static INDEX: std::sync::OnceLock<FastMap<String, Lookup>> = std::sync::OnceLock::new();
    let index = INDEX.get_or_init(|| {
        let mut map = FastMap::default();
        for def in UNITS {
            map.entry(def.spelling.to_string())
                .or_insert(Lookup::Found(def, 0));
        }
        // Prefixes in table order, as the scan below tries them.
        for &(prefix, exp) in PREFIXES {
            for def in UNITS {
                let found = if def.prefixable {
                    Lookup::Found(def, exp)
                } else {
                    Lookup::NoPrefix(prefix, def)
                };
                map.entry(format!("{prefix}{}", def.spelling))
                    .or_insert(found);
            }
        }
        map
    });
    index.get(unit).copied().unwrap_or(Lookup::Unknown)
}

/// The same lookup by scanning the tables: the definition the index is checked against.
#[cfg(test)]
fn lookup_by_scan(unit: &str) -> Lookup {
    if let Some(def) = UNITS.iter().find(|d| d.spelling == unit) {
        return Lookup::Found(def, 0);
    }
    for &(prefix, exp) in PREFIXES {
        let Some(rest) = unit.strip_prefix(prefix) else {
            continue;
        };
        if let Some(def) = UNITS.iter().find(|d| d.spelling == rest) {
            return if def.prefixable {
                Lookup::Found(def, exp)
            } else {
                Lookup::NoPrefix(prefix, def)
            };
        }
    }
    Lookup::Unknown
}

/// Every accepted spelling (with prefixes) of the given kinds; all kinds if empty.
fn spellings(dims: &[Dim]) -> Vec<String> {
    let mut out = Vec::new();
    for def in UNITS {
        if !dims.is_empty() && !dims.contains(&def.dim) {
            continue;
        }
        out.push(def.spelling.to_string());
        if def.prefixable {
            out.extend(PREFIXES.iter().map(|(p, _)| format!("{p}{}", def.spelling)));
        }
    }
    out
}

/// Guesses which accepted spelling of the expected kinds `unit` was meant to be.
pub(super) fn suggest(unit: &str, expected: &[Dim]) -> Option<String> {
    let lower = unit.to_lowercase();
    let candidates = spellings(expected);
    if let Some(c) = candidates.iter().find(|c| c.to_lowercase() == lower) {
        return Some(c.clone());
    }
    let near_miss = |word: &str| {
        let word = word.to_lowercase();
        NEAR_MISSES
            .iter()
            .find(|(miss, _)| *miss == word)
            .map(|&(_, fix)| fix)
    };
    let mut guesses: Vec<String> = near_miss(unit).map(str::to_string).into_iter().collect();
    for &(prefix, _) in PREFIXES {
        if let Some(fix) = unit.strip_prefix(prefix).and_then(near_miss) {
            guesses.push(format!("{prefix}{fix}"));
        }
    }
    if let Some(g) = guesses.into_iter().find(|g| candidates.contains(g)) {
        return Some(g);
    }
    // A valid unit of another kind typed in the wrong case: no fuzzy guess,
    // the hint listing the expected units is more honest.
    if spellings(&[]).iter().any(|c| c.to_lowercase() == lower) {
        return None;
    }
    let len = lower.chars().count();
    let limit = if len <= 3 { 1 } else { 2 };
    candidates
        .iter()
        .map(|c| (strsim::levenshtein(&lower, &c.to_lowercase()), c))
        .filter(|(dist, c)| *dist <= limit && *dist < len.max(c.chars().count()))
        .min_by_key(|(dist, _)| *dist)
        .map(|(_, c)| c.clone())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// What a lookup found, comparable.
    fn key(l: Lookup) -> (u8, &'static str, &'static str, i32) {
        match l {
            Lookup::Found(d, e) => (0, d.spelling, "", e),
            Lookup::NoPrefix(p, d) => (1, d.spelling, p, 0),
            Lookup::Unknown => (2, "", "", 0),
        }
    }

    #[test]
    fn the_index_finds_what_the_scan_finds() {
        let mut texts: Vec<String> = spellings(&[]);
        for def in UNITS {
            for (p, _) in PREFIXES {
                texts.push(format!("{p}{}", def.spelling));
                texts.push(format!("{p}{p}{}", def.spelling));
            }
            texts.push(def.spelling.to_lowercase());
            texts.push(def.spelling.to_uppercase());
        }
        texts.extend(NEAR_MISSES.iter().map(|(m, _)| (*m).to_string()));
        texts.extend(["", "m", "µ", "x", "mAh", "kWh", "mK", "m%"].map(String::from));
        for t in &texts {
            assert_eq!(key(lookup(t)), key(lookup_by_scan(t)), "`{t}`");
        }
    }

    #[test]
    fn every_spelling_is_unambiguous() {
        let all = spellings(&[]);
        for (i, s) in all.iter().enumerate() {
            assert!(!all[..i].contains(s), "`{s}` is listed twice");
            assert!(
                matches!(lookup(s), Lookup::Found(..)),
                "`{s}` does not resolve"
            );
        }
        for &(miss, fix) in NEAR_MISSES {
            assert!(
                all.iter().any(|s| s == fix),
                "near miss `{miss}` -> unknown `{fix}`"
            );
            assert!(
                !all.iter().any(|s| s.to_lowercase() == miss),
                "`{miss}` is valid"
            );
        }
    }

    #[test]
    fn suggestions() {
        let cases: &[(&str, &[Dim], Option<&str>)] = &[
            ("ma", &[Dim::Current], Some("mA")),
            ("MAH", &[Dim::Charge], Some("mAh")),
            ("kwh", &[Dim::Energy], Some("kWh")),
            ("µsec", &[Dim::Time], Some("µs")),
            ("volts", &[Dim::Voltage], Some("V")),
            ("volts", &[Dim::Current], None),
            ("mv", &[Dim::Current], None),
            ("x", &[Dim::Voltage], None),
            ("ohmz", &[Dim::Resistance], Some("ohm")),
            ("°c/w", &[Dim::ThermalResistance], Some("°C/W")),
            ("", &[Dim::Voltage], None),
        ];
        for &(unit, dims, want) in cases {
            assert_eq!(suggest(unit, dims).as_deref(), want, "{unit} for {dims:?}");
        }
    }

    #[test]
    fn prefix_powers() {
        assert_eq!(prefix_exponent("µ"), Some(-6));
        assert_eq!(prefix_exponent("M"), Some(6));
        assert_eq!(prefix_exponent("x"), None);
        assert!((apply_exp10(2.5, -6) - 2.5e-6).abs() < 1e-21);
        assert!((apply_exp10(2.5, 3) - 2500.0).abs() < 1e-9);
    }
}
