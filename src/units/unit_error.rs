//! The error type for unreadable values, with messages and fix hints.

use std::fmt;

use super::dim::Dim;
use super::table::{apply_exp10, prefix_exponent};

/// Why a value could not be read.
#[derive(Debug, Clone, PartialEq)]
pub enum UnitError {
    /// The text was empty or only whitespace.
    Empty {
        /// The kinds the caller would have accepted.
        expected: Vec<Dim>,
    },
    /// The text does not start with a number.
    NotANumber {
        /// The (trimmed) text.
        text: String,
        /// The kinds the caller would have accepted.
        expected: Vec<Dim>,
    },
    /// The number is infinite or NaN, or overflows once its unit is applied.
    NotFinite {
        /// The (trimmed) text.
        text: String,
    },
    /// A physical value was written without a unit.
    MissingUnit {
        /// The number as written.
        number: String,
        /// The kinds the caller would have accepted.
        expected: Vec<Dim>,
    },
    /// The unit is not one this crate knows.
    UnknownUnit {
        /// The (trimmed) text.
        text: String,
        /// The number as written.
        number: String,
        /// The unrecognised unit.
        unit: String,
        /// A valid spelling the user probably meant.
        suggestion: Option<String>,
        /// The kinds the caller would have accepted.
        expected: Vec<Dim>,
    },
    /// A metric prefix was put on a unit that does not take one (`k%`, `mh`).
    PrefixNotAllowed {
        /// The (trimmed) text.
        text: String,
        /// The number as written.
        number: String,
        /// The prefix that was used.
        prefix: String,
        /// The unit the prefix was attached to.
        unit: String,
    },
    /// The unit was a bare `C`, which could mean coulombs or degrees Celsius.
    BareC {
        /// The (trimmed) text.
        text: String,
        /// The number as written.
        number: String,
    },
    /// The unit is valid but measures something other than what is needed.
    WrongDimension {
        /// The (trimmed) text.
        text: String,
        /// The kind the unit belongs to.
        found: Dim,
        /// The kinds the caller would have accepted.
        expected: Vec<Dim>,
    },
}

/// "a current, a power or a resistance".
fn describe(dims: &[Dim]) -> String {
    let nouns: Vec<&str> = dims.iter().map(|d| d.noun()).collect();
    join_or(&nouns).unwrap_or_else(|| "a value".to_string())
}

/// "a current (`A`, `mA`, `µA`) or a power (`W`, `mW`, `µW`)".
fn choices(dims: &[Dim]) -> String {
    let parts: Vec<String> = dims
        .iter()
        .map(|d| format!("{} ({})", d.noun(), d.common_units()))
        .collect();
    let parts: Vec<&str> = parts.iter().map(String::as_str).collect();
    join_or(&parts).unwrap_or_else(|| "a number followed by a unit".to_string())
}

fn join_or(items: &[&str]) -> Option<String> {
    match items {
        [] => None,
        [one] => Some((*one).to_string()),
        [init @ .., last] => Some(format!("{} or {last}", init.join(", "))),
    }
}

fn first_example(dims: &[Dim]) -> &'static str {
    dims.first().map_or("3.3 V", |d| d.example())
}

impl fmt::Display for UnitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            UnitError::Empty { expected } => {
                write!(f, "empty value where {} is expected", describe(expected))
            }
            UnitError::NotANumber { text, .. } => {
                write!(f, "`{text}` does not start with a number")
            }
            UnitError::NotFinite { text } => write!(f, "`{text}` is not a finite number"),
            UnitError::MissingUnit { number, expected } => write!(
                f,
                "`{number}` has no unit, but {} is expected here and needs one",
                describe(expected)
            ),
            UnitError::UnknownUnit { text, unit, .. } => {
                write!(f, "unknown unit `{unit}` in `{text}`")
            }
            UnitError::PrefixNotAllowed {
                text, prefix, unit, ..
            } => write!(
                f,
                "`{unit}` does not take a prefix, so `{prefix}{unit}` in `{text}` is not a unit"
            ),
            UnitError::BareC { text, .. } => {
                write!(
                    f,
                    "`{text}` is ambiguous: a bare `C` is not accepted as a unit"
                )
            }
            UnitError::WrongDimension {
                text,
                found,
                expected,
            } => write!(
                f,
                "`{text}` is {}, but {} is expected here, e.g. `{}`",
                found.noun(),
                describe(expected),
                first_example(expected)
            ),
        }
    }
}

impl std::error::Error for UnitError {}

/// Whether `unit` is a spelling of degrees Fahrenheit where a temperature is expected.
fn fahrenheit(unit: &str, expected: &[Dim]) -> bool {
    let temperature = expected.is_empty() || expected.contains(&Dim::Temperature);
    temperature
        && matches!(
            unit,
            "°F" | "ºF" | "\u{2109}" | "F" | "degF" | "deg F" | "°f" | "fahrenheit" | "Fahrenheit"
        )
}

impl UnitError {
    /// The kind of problem, as the checker reports it.
    pub fn kind(&self) -> crate::error::DiagnosticKind {
        use crate::error::DiagnosticKind as K;
        match self {
            UnitError::Empty { .. }
            | UnitError::NotANumber { .. }
            | UnitError::NotFinite { .. } => K::NotANumber,
            UnitError::MissingUnit { .. } => K::MissingUnit,
            UnitError::UnknownUnit { .. }
            | UnitError::PrefixNotAllowed { .. }
            | UnitError::BareC { .. } => K::UnknownUnit,
            UnitError::WrongDimension { .. } => K::WrongUnit,
        }
    }

    /// A short suggestion telling the user how to fix the value.
    pub fn hint(&self) -> Option<String> {
        let hint = match self {
            UnitError::Empty { expected } => {
                format!("write a value such as `{}`", first_example(expected))
            }
            UnitError::NotANumber { expected, .. } => format!(
                "write a number followed by its unit, such as `{}`",
                first_example(expected)
            ),
            UnitError::NotFinite { .. } => {
                "use an ordinary finite number (no `inf` or `NaN`, magnitude below about 1e308)"
                    .to_string()
            }
            UnitError::MissingUnit { number, expected } => missing_unit_hint(number, expected),
            UnitError::UnknownUnit {
                text,
                number,
                unit,
                suggestion,
                expected,
            } => match suggestion {
                _ if fahrenheit(unit, expected) => {
                    let c = number
                        .parse::<f64>()
                        .map(|f| ((f - 32.0) * 5.0 / 9.0 * 100.0).round() / 100.0);
                    match c {
                        Ok(c) if c.is_finite() => format!(
                            "Fahrenheit is not accepted: {number} °F is {c} °C; write `{c} °C`"
                        ),
                        _ => "Fahrenheit is not accepted; give the temperature in `°C` or `K`"
                            .to_string(),
                    }
                }
                Some(s) => format!("did you mean `{s}`? write `{number} {s}`"),
                None if unit.starts_with(',') => format!(
                    "use `.` as the decimal separator: `{}`",
                    text.replacen(',', ".", 1)
                ),
                None => format!("use a unit for {}", choices(expected)),
            },
            UnitError::PrefixNotAllowed {
                number,
                prefix,
                unit,
                ..
            } => {
                let scaled = number
                    .parse::<f64>()
                    .ok()
                    .zip(prefix_exponent(prefix))
                    .map(|(n, e)| apply_exp10(n, e));
                match scaled {
                    Some(v) if v.is_finite() => {
                        format!("drop the prefix and convert the number: `{v} {unit}`")
                    }
                    _ => format!("drop the prefix `{prefix}` and write the value in `{unit}`"),
                }
            }
            UnitError::BareC { number, .. } => format!(
                "a bare `C` could mean coulombs or degrees Celsius: write `{number} °C` \
                 (or `{number} degC`) for a temperature, or a charge in `mAh`/`Ah`"
            ),
            UnitError::WrongDimension { expected, .. } => {
                format!("this value takes {}", choices(expected))
            }
        };
        Some(hint)
    }
}

fn missing_unit_hint(n: &str, expected: &[Dim]) -> String {
    match expected.first().copied().unwrap_or(Dim::Voltage) {
        Dim::Voltage => format!("write `{n} V` (or `{n} mV` if you meant millivolts)"),
        Dim::Current => format!("write `{n} A` (or `{n} mA` if you meant milliamps)"),
        Dim::Power => format!("write `{n} W` (or `{n} mW` if you meant milliwatts)"),
        Dim::Resistance => format!("write `{n} Ω` (or `{n} mΩ` if you meant milliohms)"),
        Dim::Charge => format!("write `{n} Ah` (or `{n} mAh` if you meant milliamp-hours)"),
        Dim::Energy => format!("write `{n} Wh` (or `{n} J` for joules)"),
        Dim::Time => format!("write `{n} s` (or `{n} ms`, `{n} h`, `{n} d` as meant)"),
        Dim::Temperature => format!("write `{n} °C`"),
        Dim::ThermalResistance => format!("write `{n} °C/W`"),
        Dim::Rate => format!("write `{n} %/month` (or another period such as `%/year`)"),
        Dim::Fraction => format!("write `{n} %`"),
        Dim::Number => format!("write `{n}`"),
        Dim::Mass => format!("write `{n} g` (or `{n} kg` if you meant kilograms)"),
        Dim::Length => format!("write `{n} mm` (or `{n} cm`, `{n} m` as meant)"),
        Dim::MolarEnergy => format!("write `{n} kJ/mol` (or `{n} eV` per particle)"),
        Dim::Capacitance => format!("write `{n} µF` (or `{n} mF`, `{n} F` as meant)"),
    }
}

#[cfg(test)]
mod tests {
    use super::super::parse::parse_quantity;
    use super::*;

    /// Parses `text`, expecting an error whose message and hint contain the
    /// given fragments.
    fn fails(text: &str, expected: &[Dim], msg: &[&str], hint: &[&str]) -> UnitError {
        let err = parse_quantity(text, expected).expect_err(text);
        let (m, h) = (err.to_string(), err.hint().unwrap_or_default());
        for frag in msg {
            assert!(m.contains(frag), "{text}: message {m:?} lacks {frag:?}");
        }
        for frag in hint {
            assert!(h.contains(frag), "{text}: hint {h:?} lacks {frag:?}");
        }
        assert!(!m.starts_with(|c: char| c.is_uppercase()), "{m}");
        err
    }

    #[test]
    fn empty_and_not_a_number() {
        use Dim::Voltage;
        let e = fails("   ", &[Voltage], &["empty", "a voltage"], &["`3.3 V`"]);
        assert!(matches!(e, UnitError::Empty { .. }));
        let e = fails("abc", &[Voltage], &["`abc`", "number"], &["`3.3 V`"]);
        assert!(matches!(e, UnitError::NotANumber { .. }));
        for text in [".", "-", "+.e5", "V 3.3", "--5 V"] {
            let e = fails(text, &[Voltage], &["number"], &[]);
            assert!(matches!(e, UnitError::NotANumber { .. }), "{text}");
        }
    }

    #[test]
    fn non_finite_numbers() {
        for text in [
            "inf", "-inf V", "NaN", "nan V", "infinity", "1e999 V", "1e308 GV",
        ] {
            let e = fails(text, &[Dim::Voltage], &["finite"], &["finite"]);
            assert!(matches!(e, UnitError::NotFinite { .. }), "{text}");
        }
    }

    #[test]
    fn missing_units() {
        let e = fails(
            "3.3",
            &[Dim::Voltage],
            &["`3.3` has no unit", "a voltage"],
            &[],
        );
        assert_eq!(
            e.hint().unwrap(),
            "write `3.3 V` (or `3.3 mV` if you meant millivolts)"
        );
        assert!(matches!(e, UnitError::MissingUnit { .. }));
        fails(
            "120",
            &[Dim::Current, Dim::Power],
            &["a current or a power"],
            &["`120 A`", "`120 mA` if you meant milliamps"],
        );
        fails("1200", &[Dim::Charge], &[], &["`1200 mAh`"]);
        fails("25", &[Dim::Temperature], &[], &["`25 °C`"]);
        fails("3", &[Dim::Rate], &[], &["`3 %/month`"]);
        fails("0", &[Dim::Time], &[], &["`0 s`"]);
    }

    #[test]
    fn unknown_units() {
        let e = fails(
            "4 ma",
            &[Dim::Current],
            &["unknown unit `ma`", "`4 ma`"],
            &["did you mean `mA`?", "`4 mA`"],
        );
        assert!(matches!(e, UnitError::UnknownUnit { suggestion: Some(ref s), .. } if s == "mA"));
        fails("3 v", &[Dim::Voltage], &[], &["`V`"]);
        // Fahrenheit: the conversion, not a guess at `°C` with the same number.
        let e = fails(
            "77 °F",
            &[Dim::Temperature],
            &["`°F`"],
            &["Fahrenheit is not accepted: 77 °F is 25 °C", "`25 °C`"],
        );
        assert!(!e.hint().unwrap_or_default().contains("`77 °C`"));
        fails("-40 degF", &[Dim::Temperature], &[], &["-40 °F is -40 °C"]);
        fails("1200 mAH", &[Dim::Charge], &[], &["`mAh`"]);
        fails("10 KOHM", &[Dim::Resistance], &[], &["`10 kohm`"]);
        fails("85 DEGC", &[Dim::Temperature], &[], &["`degC`"]);
        fails("5 sec", &[Dim::Time], &[], &["`5 s`"]);
        fails("5 msec", &[Dim::Time], &[], &["`5 ms`"]);
        fails("2 hrs", &[Dim::Time], &[], &["`2 h`"]);
        fails("3 days", &[Dim::Time], &[], &["`3 d`"]);
        fails("3 %/mo", &[Dim::Rate], &[], &["`3 %/month`"]);
        fails("3 %/mnth", &[Dim::Rate], &[], &["`3 %/month`"]);
        fails("1200 mAhr", &[Dim::Charge], &[], &["`mAh`"]);
        fails("10 ohmz", &[Dim::Resistance], &[], &["`ohm"]);
        fails(
            "3,3 V",
            &[Dim::Voltage],
            &["`,3 V`"],
            &["decimal separator", "`3.3 V`"],
        );
        // A voltage in the wrong case where a current is needed: no guess.
        let e = fails(
            "4 mv",
            &[Dim::Current],
            &["`mv`"],
            &["a current (`A`, `mA`, `µA`)"],
        );
        assert!(matches!(
            e,
            UnitError::UnknownUnit {
                suggestion: None,
                ..
            }
        ));
        let e = fails(
            "4 xyzzy",
            &[Dim::Current, Dim::Power],
            &[],
            &["a current", "or a power"],
        );
        assert!(matches!(
            e,
            UnitError::UnknownUnit {
                suggestion: None,
                ..
            }
        ));
        fails("1.05 x", &[Dim::Number], &[], &["no unit at all"]);
    }

    #[test]
    fn bare_c_is_ambiguous() {
        let hint = "a bare `C` could mean coulombs or degrees Celsius: write `25 °C` \
                    (or `25 degC`) for a temperature, or a charge in `mAh`/`Ah`";
        for expected in [&[Dim::Temperature][..], &[Dim::Charge], &[]] {
            let e = fails("25 C", expected, &["`25 C`", "ambiguous"], &[hint]);
            assert!(matches!(e, UnitError::BareC { .. }));
        }
        fails("25c", &[Dim::Temperature], &["ambiguous"], &["`25 °C`"]);
    }

    #[test]
    fn prefixes_where_none_belong() {
        let e = fails(
            "3 k%",
            &[Dim::Fraction],
            &["`%` does not take a prefix", "`k%`"],
            &["`3000 %`"],
        );
        assert!(matches!(e, UnitError::PrefixNotAllowed { .. }));
        fails(
            "2 mh",
            &[Dim::Time],
            &["`h` does not take a prefix"],
            &["`0.002 h`"],
        );
        fails("300 mK", &[Dim::Temperature], &["prefix"], &["`0.3 K`"]);
        fails("1 m%/month", &[Dim::Rate], &["`%/month`"], &[]);
        fails("1 k°C", &[Dim::Temperature], &["`°C`"], &["`1000 °C`"]);
        // Not the kind asked for: treated as an unknown unit with a guess.
        fails("2 mh", &[Dim::Current], &["unknown unit `mh`"], &["`mA`"]);
    }

    #[test]
    fn wrong_dimensions() {
        let e = fails(
            "4 mV",
            &[Dim::Current],
            &["`4 mV` is a voltage, but a current is expected here, e.g. `120 mA`"],
            &["`mA`"],
        );
        assert_eq!(
            e,
            UnitError::WrongDimension {
                text: "4 mV".into(),
                found: Dim::Voltage,
                expected: vec![Dim::Current],
            }
        );
        fails(
            "5 V",
            &[Dim::Current, Dim::Power, Dim::Resistance],
            &["a current, a power or a resistance is expected"],
            &["a resistance (`Ω`"],
        );
        fails(
            "91 %",
            &[Dim::Number],
            &["a fraction", "a plain number"],
            &["no unit"],
        );
        fails(
            "3 %/month",
            &[Dim::Fraction],
            &["a rate per time"],
            &["`%`"],
        );
        fails(
            "8 Wh",
            &[Dim::Charge],
            &["an energy", "a charge"],
            &["`mAh`"],
        );
        fails("1 %", &[Dim::Rate], &["a fraction"], &["`%/month`"]);
    }
}
