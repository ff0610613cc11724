//! Turning `"<number> <unit>"` strings into SI quantities.

use super::dim::{Dim, Quantity};
use super::table::{Lookup, apply_exp10, lookup, suggest};
use super::unit_error::UnitError;

/// Splits the leading number (sign, digits, fraction, exponent) from the rest.
/// Returns `None` when there is no digit. Only ASCII bytes are consumed, so the
/// split point is always a character boundary.
fn split_number(s: &str) -> Option<(&str, &str)> {
    let b = s.as_bytes();
    let digits_from = |mut i: usize| {
        while i < b.len() && b[i].is_ascii_digit() {
            i += 1;
        }
        i
    };
    let mut i = usize::from(matches!(b.first(), Some(b'+' | b'-')));
    let int_end = digits_from(i);
    let mut digit_count = int_end - i;
    i = int_end;
    if b.get(i) == Some(&b'.') {
        let frac_end = digits_from(i + 1);
        digit_count += frac_end - (i + 1);
        i = frac_end;
    }
    if digit_count == 0 {
        return None;
    }
    if matches!(b.get(i), Some(b'e' | b'E')) {
        let mut j = i + 1;
        if matches!(b.get(j), Some(b'+' | b'-')) {
            j += 1;
        }
        let exp_end = digits_from(j);
        if exp_end > j {
            i = exp_end;
        }
    }
    Some(s.split_at(i))
}

/// Trims the unit and removes blanks around `/` (`°C / W` reads as `°C/W`); borrowed unless
/// there are such blanks.
fn normalize_unit(rest: &str) -> std::borrow::Cow<'_, str> {
    let t = rest.trim();
    if t.contains('/') && t.split('/').any(|part| part.trim() != part) {
        t.split('/')
            .map(str::trim)
            .collect::<Vec<_>>()
            .join("/")
            .into()
    } else {
        t.into()
    }
}

/// Parses `"<number> <unit>"` into a quantity of one of the `expected` kinds
/// (any kind if `expected` is empty). The unit decides the kind; a plain number
/// is only accepted when `expected` contains [`Dim::Fraction`] or
/// [`Dim::Number`] (taken as-is), never guessed for a physical value.
pub fn parse_quantity(text: &str, expected: &[Dim]) -> Result<Quantity, UnitError> {
    let text = text.trim();
    let expected_vec = || expected.to_vec();
    if text.is_empty() {
        return Err(UnitError::Empty {
            expected: expected_vec(),
        });
    }
    let not_a_number = || {
        let bare = text.trim_start_matches(['+', '-']).to_ascii_lowercase();
        if bare.starts_with("inf") || bare.starts_with("nan") {
            UnitError::NotFinite {
                text: text.to_string(),
            }
        } else {
            UnitError::NotANumber {
                text: text.to_string(),
                expected: expected_vec(),
            }
        }
    };
    let (number_text, rest) = split_number(text).ok_or_else(not_a_number)?;
    let number: f64 = number_text.parse().map_err(|_| not_a_number())?;
    let not_finite = || UnitError::NotFinite {
        text: text.to_string(),
    };
    if !number.is_finite() {
        return Err(not_finite());
    }
    let unit = normalize_unit(rest);
    if unit.is_empty() {
        let plain = if expected.is_empty() {
            Some(Dim::Number)
        } else {
            expected
                .iter()
                .copied()
                .find(|d| matches!(d, Dim::Fraction | Dim::Number))
        };
        return plain
            .map(|dim| Quantity::new(number, dim))
            .ok_or_else(|| UnitError::MissingUnit {
                number: number_text.to_string(),
                expected: expected_vec(),
            });
    }
    if unit.eq_ignore_ascii_case("c") {
        return Err(UnitError::BareC {
            text: text.to_string(),
            number: number_text.to_string(),
        });
    }
    with_unit(text, (number, number_text), &unit, expected)
}

/// The quantity `number` (written `number_text`) in `unit`, of one of the `expected` kinds
/// (any if empty); `text` is the whole value as written, for messages.
fn with_unit(
    text: &str,
    (number, number_text): (f64, &str),
    unit: &str,
    expected: &[Dim],
) -> Result<Quantity, UnitError> {
    let expected_vec = || expected.to_vec();
    let accepts = |dim: Dim| expected.is_empty() || expected.contains(&dim);
    match lookup(unit) {
        Lookup::Found(def, exp) => {
            if !accepts(def.dim) {
                return Err(UnitError::WrongDimension {
                    text: text.to_string(),
                    found: def.dim,
                    expected: expected_vec(),
                });
            }
            let value = apply_exp10(number, exp) * def.scale + def.offset;
            if value.is_finite() {
                Ok(Quantity::new(value, def.dim))
            } else {
                Err(UnitError::NotFinite {
                    text: text.to_string(),
                })
            }
        }
        Lookup::NoPrefix(prefix, def) if accepts(def.dim) => Err(UnitError::PrefixNotAllowed {
            text: text.to_string(),
            number: number_text.to_string(),
            prefix: prefix.to_string(),
            unit: def.spelling.to_string(),
        }),
        Lookup::NoPrefix(..) | Lookup::Unknown => Err(UnitError::UnknownUnit {
            text: text.to_string(),
            number: number_text.to_string(),
            suggestion: suggest(unit, expected),
            unit: unit.to_string(),
            expected: expected_vec(),
        }),
    }
}

/// Parses a fraction: `"30%"`, `"30 %"` and `"0.3"` all give 0.3.
pub fn parse_fraction(text: &str) -> Result<f64, UnitError> {
    parse_quantity(text, &[Dim::Fraction]).map(Quantity::value)
}

#[cfg(test)]
mod tests {
    use super::*;

    const DAY: f64 = 86_400.0;
    const YEAR: f64 = 365.25 * DAY;

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * a.abs().max(b.abs()).max(1e-300)
    }

    /// Spellings of each kind of quantity and their values in SI units.
    const VALID: &[(&str, Dim, f64)] = {
        use Dim::*;
        &[
            ("3.3 V", Voltage, 3.3),
            ("3.3V", Voltage, 3.3),
            ("  -1.8 mV\t", Voltage, -1.8e-3),
            ("12 kV", Voltage, 12e3),
            ("120mA", Current, 0.12),
            ("2.5 µA", Current, 2.5e-6),
            ("2.5 μA", Current, 2.5e-6),
            ("2.5 uA", Current, 2.5e-6),
            ("40 nA", Current, 40e-9),
            ("3 pA", Current, 3e-12),
            ("1e-3 A", Current, 1e-3),
            ("1E3mA", Current, 1.0),
            ("250 mW", Power, 0.25),
            ("2.5E6 W", Power, 2.5e6),
            ("1.2 GW", Power, 1.2e9),
            ("50 mΩ", Resistance, 0.05),
            ("50 m\u{2126}", Resistance, 0.05),
            ("10 Ω", Resistance, 10.0),
            ("10 ohm", Resistance, 10.0),
            ("10 ohms", Resistance, 10.0),
            ("10 Ohm", Resistance, 10.0),
            ("4.7 kΩ", Resistance, 4700.0),
            ("4.7 kohm", Resistance, 4700.0),
            ("20 mohm", Resistance, 0.02),
            ("1 MΩ", Resistance, 1e6),
            ("1200 mAh", Charge, 4320.0),
            ("2 Ah", Charge, 7200.0),
            ("500 µAh", Charge, 1.8),
            ("8.4 Wh", Energy, 30_240.0),
            ("100 mWh", Energy, 360.0),
            ("1 kWh", Energy, 3.6e6),
            ("5 J", Energy, 5.0),
            ("20 mJ", Energy, 0.02),
            ("2 kJ", Energy, 2000.0),
            ("5 ms", Time, 5e-3),
            ("10 µs", Time, 10e-6),
            ("10 us", Time, 10e-6),
            ("30 ns", Time, 30e-9),
            ("2 ks", Time, 2000.0),
            ("1.5 s", Time, 1.5),
            ("3 min", Time, 180.0),
            ("2 h", Time, 7200.0),
            ("1.5 d", Time, 1.5 * DAY),
            ("2 week", Time, 14.0 * DAY),
            ("2 wk", Time, 14.0 * DAY),
            ("1 y", Time, YEAR),
            ("2 yr", Time, 2.0 * YEAR),
            ("25 °C", Temperature, 25.0),
            ("25°C", Temperature, 25.0),
            ("-40 ℃", Temperature, -40.0),
            ("85 degC", Temperature, 85.0),
            ("298.15 K", Temperature, 25.0),
            ("60 °C/W", ThermalResistance, 60.0),
            ("60 °C / W", ThermalResistance, 60.0),
            ("60 K/W", ThermalResistance, 60.0),
            ("60 degC/W", ThermalResistance, 60.0),
            ("60 ℃/W", ThermalResistance, 60.0),
            ("91 %", Fraction, 0.91),
            ("91%", Fraction, 0.91),
            ("3 %/month", Rate, 0.03 / (30.44 * DAY)),
            ("3 % / month", Rate, 0.03 / (30.44 * DAY)),
            ("5 %/year", Rate, 0.05 / YEAR),
            ("5 %/y", Rate, 0.05 / YEAR),
            ("5 %/yr", Rate, 0.05 / YEAR),
            ("1 %/week", Rate, 0.01 / (7.0 * DAY)),
            ("0.1 %/d", Rate, 0.001 / DAY),
            ("0.1 %/day", Rate, 0.001 / DAY),
            ("0.01 %/h", Rate, 0.0001 / 3600.0),
            (".5 V", Voltage, 0.5),
            ("2. V", Voltage, 2.0),
            ("+5 V", Voltage, 5.0),
        ]
    };

    #[test]
    fn valid_values() {
        for &(text, dim, want) in VALID {
            let q = parse_quantity(text, &[dim]).unwrap_or_else(|e| panic!("{text}: {e}"));
            assert_eq!(q.dim(), dim, "{text}");
            assert!(close(q.value(), want), "{text}: {} != {want}", q.value());
        }
    }

    #[test]
    fn the_unit_decides_among_expected_kinds() {
        let load = [Dim::Current, Dim::Power, Dim::Resistance];
        assert_eq!(parse_quantity("5 mA", &load).unwrap().dim(), Dim::Current);
        assert_eq!(parse_quantity("5 mW", &load).unwrap().dim(), Dim::Power);
        assert_eq!(
            parse_quantity("5 kΩ", &load).unwrap().dim(),
            Dim::Resistance
        );
        assert_eq!(parse_quantity("5 V", &[]).unwrap().dim(), Dim::Voltage);
        assert_eq!(
            parse_quantity("5", &[]).unwrap(),
            Quantity::new(5.0, Dim::Number)
        );
    }

    #[test]
    fn plain_numbers() {
        assert_eq!(parse_fraction("30%"), Ok(0.3));
        assert_eq!(parse_fraction("30 %"), Ok(0.3));
        assert_eq!(parse_fraction("0.3"), Ok(0.3));
        let q = parse_quantity("1.05", &[Dim::Number]).unwrap();
        assert_eq!((q.value(), q.dim()), (1.05, Dim::Number));
        let q = parse_quantity("0.91", &[Dim::Voltage, Dim::Fraction]).unwrap();
        assert_eq!((q.value(), q.dim()), (0.91, Dim::Fraction));
        let q = parse_quantity("-3", &[Dim::Number, Dim::Fraction]).unwrap();
        assert_eq!((q.value(), q.dim()), (-3.0, Dim::Number));
    }

    #[test]
    fn number_splitting() {
        assert_eq!(split_number("1e-3A"), Some(("1e-3", "A")));
        assert_eq!(split_number("5 e"), Some(("5", " e")));
        assert_eq!(split_number("5em"), Some(("5", "em")));
        assert_eq!(split_number("2.µA"), Some(("2.", "µA")));
        assert_eq!(split_number("-.5"), Some(("-.5", "")));
        assert_eq!(split_number("."), None);
        assert_eq!(split_number("-"), None);
        assert_eq!(split_number("µ5"), None);
    }
}
