//! The physical range of each kind of value: anything outside it is a typing error (a wrong
//! exponent or prefix), and would push the solver into overflow or a NaN. The ranges are wide
//! on purpose, from a coin cell's leakage to a vehicle pack; common practice, no source.

use std::fmt;

use super::dim::{Dim, Quantity};

/// The accepted range of a kind of value: the least magnitude above zero and the greatest, with
/// the text shown in messages. Zero and the sign are the caller's to judge.
struct Range {
    lo: f64,
    hi: f64,
    lo_text: &'static str,
    hi_text: &'static str,
}

const YEAR: f64 = 365.25 * 86_400.0;

/// Absolute zero in degrees Celsius.
pub const ABSOLUTE_ZERO_C: f64 = -273.15;

/// The highest temperature accepted anywhere (ambient, junction limits, cell tables).
pub const MAX_TEMPERATURE_C: f64 = 200.0;

fn range(dim: Dim) -> Option<Range> {
    let r = |lo, hi, lo_text, hi_text| {
        Some(Range {
            lo,
            hi,
            lo_text,
            hi_text,
        })
    };
    match dim {
        Dim::Voltage => r(1e-6, 1e3, "1 µV", "1 kV"),
        Dim::Current => r(1e-12, 1e4, "1 pA", "10 kA"),
        Dim::Power => r(1e-12, 1e5, "1 pW", "100 kW"),
        Dim::Resistance => r(1e-6, 1e9, "1 µΩ", "1 GΩ"),
        Dim::Charge => r(3.6e-3, 3.6e8, "1 µAh", "100 kAh"),
        Dim::Energy => r(3.6e-3, 3.6e9, "1 µWh", "1 MWh"),
        Dim::Time => r(1e-9, 100.0 * YEAR, "1 ns", "100 y"),
        Dim::ThermalResistance => r(1e-3, 1e4, "0.001 °C/W", "10000 °C/W"),
        Dim::Fraction => r(1e-4, 1e4, "0.01 %", "1000000 %"),
        Dim::Rate => r(1e-5 / YEAR, 1.0 / 86_400.0, "0.001 %/year", "100 %/d"),
        // From a fraction of a coin cell's gram to a vehicle pack's tonnes; from a thin film's
        // micrometres to a stationary bank's metres.
        Dim::Mass => r(1e-6, 1e4, "1 mg", "10 t"),
        Dim::Length => r(1e-6, 100.0, "1 µm", "100 m"),
        // Activation energies of chemical reactions: a few kJ/mol to a few hundred.
        Dim::MolarEnergy => r(1.0, 1e6, "1 J/mol", "1000 kJ/mol"),
        // From a ceramic capacitor's picofarads to a supercapacitor bank's kilofarads.
        Dim::Capacitance => r(1e-12, 1e4, "1 pF", "10 kF"),
        // Temperatures are bounded absolutely; plain numbers by each field.
        Dim::Temperature | Dim::Number => None,
    }
}

/// A value outside the physical range of its kind.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct OutOfRange {
    message: String,
    hint: String,
}

impl OutOfRange {
    /// What is wrong: the value as written and the limit it passes.
    pub fn message(&self) -> &str {
        &self.message
    }

    /// How to fix it.
    pub fn hint(&self) -> &str {
        &self.hint
    }
}

impl fmt::Display for OutOfRange {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} ({})", self.message, self.hint)
    }
}

/// Whether `q` (written as `text`) lies in the physical range of its kind: magnitudes above
/// zero from the least to the greatest of [`Dim`]'s range, temperatures from absolute zero to
/// 200 °C. Zero passes (where it is allowed is the caller's rule), and so does the sign.
///
/// # Errors
///
/// [`OutOfRange`], saying the limit and how to fix the value.
///
/// # Examples
///
/// ```
/// use joulepath::units::{Dim, parse_quantity, physical};
/// let ok = parse_quantity("120 mA", &[Dim::Current]).unwrap();
/// assert!(physical(ok, "120 mA").is_ok());
/// let tiny = parse_quantity("1e-308 mA", &[Dim::Current]).unwrap();
/// let e = physical(tiny, "1e-308 mA").unwrap_err();
/// assert!(e.message().contains("below 1 pA"));
/// ```
pub fn physical(q: Quantity, text: &str) -> Result<(), OutOfRange> {
    let v = q.value();
    let article = q.dim().noun();
    let noun = article
        .strip_prefix("an ")
        .or_else(|| article.strip_prefix("a "))
        .unwrap_or(article);
    if q.dim() == Dim::Temperature {
        if v < ABSOLUTE_ZERO_C || v.is_nan() {
            return Err(OutOfRange {
                message: format!("the temperature `{text}` is below absolute zero (-273.15 °C)"),
                hint: "check the sign and the unit: `K` counts from absolute zero, `°C` from the melting point of ice".into(),
            });
        }
        if v > MAX_TEMPERATURE_C {
            return Err(OutOfRange {
                message: format!(
                    "the temperature `{text}` is above {MAX_TEMPERATURE_C} °C, the most accepted"
                ),
                hint: "give a temperature from -273.15 °C to 200 °C; check the number and the unit"
                    .into(),
            });
        }
        return Ok(());
    }
    let Some(r) = range(q.dim()) else {
        return Ok(());
    };
    let m = v.abs();
    let span = format!("{article} lies from {} to {}", r.lo_text, r.hi_text);
    if m > r.hi || m.is_nan() {
        return Err(OutOfRange {
            message: format!(
                "the {noun} `{text}` is above {}, the most accepted",
                r.hi_text
            ),
            hint: format!("check the number and its unit prefix ({span})"),
        });
    }
    if m > 0.0 && m < r.lo {
        return Err(OutOfRange {
            message: format!(
                "the {noun} `{text}` is below {}, the least accepted above zero",
                r.lo_text
            ),
            hint: format!("check the number and its unit prefix ({span}, or is zero)"),
        });
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::parse_quantity;

    fn judge(text: &str, dim: Dim) -> Result<(), OutOfRange> {
        let q = parse_quantity(text, &[dim]).unwrap();
        physical(q, text)
    }

    #[test]
    fn ordinary_values_and_their_limits_pass() {
        for (text, dim) in [
            ("0 A", Dim::Current),
            ("1 pA", Dim::Current),
            ("10 kA", Dim::Current),
            ("-5 mA", Dim::Current),
            ("1 kV", Dim::Voltage),
            ("2.5 µA", Dim::Current),
            ("100 y", Dim::Time),
            ("1 ns", Dim::Time),
            ("-273.15 °C", Dim::Temperature),
            ("0 K", Dim::Temperature),
            ("200 °C", Dim::Temperature),
            ("0.01 %", Dim::Fraction),
            ("3 %/month", Dim::Rate),
            ("1 µAh", Dim::Charge),
            ("1e300", Dim::Number),
        ] {
            assert_eq!(judge(text, dim), Ok(()), "{text}");
        }
    }

    #[test]
    fn absurd_values_name_the_limit() {
        for (text, dim, limit) in [
            ("1e-308 mA", Dim::Current, "below 1 pA"),
            ("20 kA", Dim::Current, "above 10 kA"),
            ("1e300 V", Dim::Voltage, "above 1 kV"),
            ("1e-300 %", Dim::Fraction, "below 0.01 %"),
            ("101 y", Dim::Time, "above 100 y"),
            ("1e9 K/W", Dim::ThermalResistance, "above 10000 °C/W"),
            ("-300 °C", Dim::Temperature, "below absolute zero"),
            ("250 °C", Dim::Temperature, "above 200 °C"),
            ("1e308 A", Dim::Current, "above 10 kA"),
        ] {
            let e = judge(text, dim).unwrap_err();
            assert!(e.message().contains(limit), "{text}: {e}");
            assert!(e.message().contains(&format!("`{text}`")), "{e}");
            assert!(!e.hint().is_empty());
        }
    }
}
