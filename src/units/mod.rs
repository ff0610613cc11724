//! Physical quantities: reading `"<number> <unit>"` strings and printing results.
//!
//! Every physical value in a design file is written as a number followed by a
//! unit, for example `"3.3 V"`, `"120mA"`, `"1200 mAh"` or `"3 %/month"`. The
//! unit decides what kind of value it is ([`Dim`]); the caller states which
//! kinds it accepts. Internally every value is kept in SI units: volts,
//! amperes, watts, ohms, coulombs, joules, seconds, degrees Celsius, kelvin
//! per watt, plain fractions and fractions per second.
//!
//! A physical value without a unit is always an error, never a guess: reading
//! `120` as amperes when milliamperes were meant is too easy a mistake to let
//! through silently. Errors carry a message and a [`UnitError::hint`] saying
//! how to fix the value.
//!
//! The formatting helpers ([`fmt_eng`], [`fmt_duration`], ...) turn SI values
//! back into short, readable text for reports.

mod bounds;
mod dim;
mod format;
mod parse;
mod table;
mod unit_error;

pub use bounds::{ABSOLUTE_ZERO_C, MAX_TEMPERATURE_C, OutOfRange, physical};
pub use dim::{Dim, Quantity};
pub use format::{fmt_celsius, fmt_duration, fmt_eng, fmt_percent, fmt_sig};
pub use parse::{parse_fraction, parse_quantity};
pub use unit_error::UnitError;

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    const ALL: [Dim; 16] = [
        Dim::Voltage,
        Dim::Current,
        Dim::Power,
        Dim::Resistance,
        Dim::Charge,
        Dim::Energy,
        Dim::Time,
        Dim::Temperature,
        Dim::ThermalResistance,
        Dim::Fraction,
        Dim::Rate,
        Dim::Number,
        Dim::Mass,
        Dim::Length,
        Dim::MolarEnergy,
        Dim::Capacitance,
    ];

    /// Every kind's example must parse back as that kind.
    #[test]
    fn examples_parse_as_their_kind() {
        for dim in ALL {
            let q = parse_quantity(dim.example(), &[dim]).unwrap_or_else(|e| panic!("{e}"));
            assert_eq!(q.dim(), dim);
            assert!(dim.noun().starts_with('a'));
        }
    }

    #[test]
    fn formatted_values_parse_back() {
        let q = parse_quantity(&fmt_eng(0.0025, "A"), &[Dim::Current]).unwrap();
        assert!((q.value() - 0.0025).abs() < 1e-12);
        let q = parse_quantity(&fmt_percent(0.8634), &[Dim::Fraction]).unwrap();
        assert!((q.value() - 0.863).abs() < 1e-12);
        let q = parse_quantity(&fmt_celsius(38.738), &[Dim::Temperature]).unwrap();
        assert!((q.value() - 38.7).abs() < 1e-12);
    }

    fn fragment() -> impl Strategy<Value = String> {
        prop::sample::select(vec![
            "0", "1", "7", "42", ".", "-", "+", "e", "E", "e-", " ", "  ", "\t", "m", "M", "k",
            "u", "µ", "μ", "p", "V", "A", "W", "Ah", "Wh", "J", "s", "h", "d", "min", "y", "%",
            "/", "month", "°", "C", "°C", "℃", "K", "K/W", "Ω", "\u{2126}", "ohm", "C/W", "inf",
            "NaN", "1e308", "1e-400", "é", "中", "🔋", ",", "0x", "\u{0}", "_",
        ])
        .prop_map(str::to_string)
    }

    fn dims() -> impl Strategy<Value = Vec<Dim>> {
        prop::collection::vec(prop::sample::select(ALL.to_vec()), 0..4)
    }

    fn check_no_panic(text: &str, expected: &[Dim]) {
        match parse_quantity(text, expected) {
            Ok(q) => {
                assert!(q.value().is_finite());
                assert!(expected.is_empty() || expected.contains(&q.dim()));
            }
            Err(e) => {
                let msg = e.to_string();
                assert!(!msg.is_empty());
                assert!(!msg.starts_with(|c: char| c.is_uppercase()), "{msg}");
                assert!(e.hint().is_some());
            }
        }
    }

    proptest! {
        #[test]
        fn never_panics_on_any_text(text in ".*", expected in dims()) {
            check_no_panic(&text, &expected);
        }

        #[test]
        fn never_panics_on_unit_like_text(
            parts in prop::collection::vec(fragment(), 0..7),
            expected in dims(),
        ) {
            check_no_panic(&parts.concat(), &expected);
        }

        #[test]
        fn eng_format_roundtrips(exp in -12.0f64..9.0, neg in any::<bool>()) {
            let magnitude = 10f64.powf(exp);
            let value = if neg { -magnitude } else { magnitude };
            for (unit, dim) in [
                ("V", Dim::Voltage),
                ("A", Dim::Current),
                ("W", Dim::Power),
                ("Ω", Dim::Resistance),
            ] {
                let text = fmt_eng(value, unit);
                let q = parse_quantity(&text, &[dim]).map_err(|e| {
                    TestCaseError::fail(format!("{text}: {e}"))
                })?;
                prop_assert_eq!(q.dim(), dim);
                let rel = ((q.value() - value) / value).abs();
                prop_assert!(rel <= 0.005, "{} -> {} -> {}", value, text, q.value());
            }
        }

        #[test]
        fn plain_numbers_roundtrip_as_numbers(value in -1e6f64..1e6) {
            let text = format!("{value}");
            let q = parse_quantity(&text, &[Dim::Number]).unwrap();
            prop_assert_eq!(q.value().to_bits(), value.to_bits());
        }
    }
}
