//! Human-readable rendering of SI values for reports.

/// Shown in place of a value that is NaN or infinite.
const NOT_FINITE: &str = "—";

/// Engineering prefixes from pico to giga, indexed by power of ten.
const ENG_PREFIXES: [(i32, &str); 8] = [
    (-12, "p"),
    (-9, "n"),
    (-6, "\u{b5}"),
    (-3, "m"),
    (0, ""),
    (3, "k"),
    (6, "M"),
    (9, "G"),
];

/// The decimal digits of `|x|` rounded to `sig` significant digits, and the
/// power of ten of the first digit after rounding (so 999.7 at 3 digits gives
/// `("100", 3)`). `x` must be finite and non-zero.
fn sig_digits(x: f64, sig: usize) -> (String, i32) {
    let sig = sig.clamp(1, 17);
    let text = format!("{:.*e}", sig - 1, x.abs());
    let (mantissa, exp) = text.split_once('e').unwrap_or((&text, "0"));
    (mantissa.replace('.', ""), exp.parse().unwrap_or(0))
}

/// Writes `digits` (first digit at 10^`exp`) as a plain decimal number.
fn place_point(digits: &str, exp: i32) -> String {
    let n = digits.len();
    match usize::try_from(exp) {
        Ok(e) if e + 1 >= n => format!("{digits}{}", "0".repeat(e + 1 - n)),
        Ok(e) => format!("{}.{}", &digits[..=e], &digits[e + 1..]),
        Err(_) => {
            let zeros = usize::try_from(-exp - 1).unwrap_or(0);
            format!("0.{}{digits}", "0".repeat(zeros))
        }
    }
}

/// Writes `digits` at power `exp`: plainly when short, otherwise as `d.dde±n`.
fn render(digits: &str, exp: i32) -> String {
    if (-4..=5).contains(&exp) {
        place_point(digits, exp)
    } else if digits.len() > 1 {
        format!("{}.{}e{exp}", &digits[..1], &digits[1..])
    } else {
        format!("{digits}e{exp}")
    }
}

fn sign(value: f64) -> &'static str {
    if value < 0.0 { "-" } else { "" }
}

/// Formats `value` (in the SI unit `unit`) with three significant digits and
/// an engineering prefix: `fmt_eng(0.0025, "A")` is `"2.50 mA"`. Prefixes run
/// from `p` to `G`; values outside that range keep the end prefix.
pub fn fmt_eng(value: f64, unit: &str) -> String {
    if !value.is_finite() {
        return NOT_FINITE.to_string();
    }
    let join = |number: &str, prefix: &str| {
        if prefix.is_empty() && unit.is_empty() {
            number.to_string()
        } else {
            format!("{number} {prefix}{unit}")
        }
    };
    if value == 0.0 {
        return join("0", "");
    }
    let (digits, exp) = sig_digits(value, 3);
    let eng = (exp.div_euclid(3) * 3).clamp(-12, 9);
    let prefix = ENG_PREFIXES
        .iter()
        .find(|(e, _)| *e == eng)
        .map_or("", |(_, p)| p);
    let number = format!("{}{}", sign(value), render(&digits, exp - eng));
    join(&number, prefix)
}

/// Formats a plain number with `sig` significant digits (at least one, at
/// most 17). Magnitudes from 1e-4 up to 1e6 never use an exponent.
pub fn fmt_sig(value: f64, sig: usize) -> String {
    if !value.is_finite() {
        return NOT_FINITE.to_string();
    }
    if value == 0.0 {
        return "0".to_string();
    }
    let (digits, exp) = sig_digits(value, sig);
    format!("{}{}", sign(value), render(&digits, exp))
}

/// Drops trailing zeros after a decimal point (keeping any exponent).
fn trim_zeros(text: &str) -> String {
    let (mantissa, exp) = match text.split_once('e') {
        Some((m, e)) => (m, format!("e{e}")),
        None => (text, String::new()),
    };
    let mantissa = if mantissa.contains('.') {
        mantissa.trim_end_matches('0').trim_end_matches('.')
    } else {
        mantissa
    };
    format!("{mantissa}{exp}")
}

/// Formats a fraction as a percentage with up to three significant digits:
/// 0.8634 gives `"86.3 %"`, 1.0 gives `"100 %"`, 0.0012 gives `"0.12 %"`.
pub fn fmt_percent(fraction: f64) -> String {
    if !fraction.is_finite() {
        return NOT_FINITE.to_string();
    }
    format!("{} %", trim_zeros(&fmt_sig(fraction * 100.0, 3)))
}

/// Formats a temperature in degrees Celsius with one decimal: `"38.7 °C"`.
pub fn fmt_celsius(c: f64) -> String {
    if !c.is_finite() {
        return NOT_FINITE.to_string();
    }
    let text = format!("{c:.1}");
    if text == "-0.0" {
        "0.0 °C".to_string()
    } else {
        format!("{text} °C")
    }
}

/// Formats a duration in seconds with a unit a person would pick: `"850 ms"`,
/// `"42.0 s"`, `"35.2 min"`, `"13.5 h"`, `"41.3 d (991 h)"`, `"2.57 y (938 d)"`.
pub fn fmt_duration(seconds: f64) -> String {
    const MINUTE: f64 = 60.0;
    const HOUR: f64 = 3600.0;
    const DAY: f64 = 86_400.0;
    const YEAR: f64 = 365.25 * DAY;
    if !seconds.is_finite() {
        return NOT_FINITE.to_string();
    }
    if seconds < 0.0 {
        return format!("-{}", fmt_duration(-seconds));
    }
    let s = seconds;
    if s < 1.0 {
        fmt_eng(s, "s")
    } else if s < 2.0 * MINUTE {
        format!("{} s", fmt_sig(s, 3))
    } else if s < 2.0 * HOUR {
        format!("{} min", fmt_sig(s / MINUTE, 3))
    } else if s < 2.0 * DAY {
        format!("{} h", fmt_sig(s / HOUR, 3))
    } else if s < 2.0 * YEAR {
        format!("{} d ({} h)", fmt_sig(s / DAY, 3), fmt_sig(s / HOUR, 3))
    } else {
        format!("{} y ({} d)", fmt_sig(s / YEAR, 3), fmt_sig(s / DAY, 3))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn engineering_values() {
        let cases: &[(f64, &str, &str)] = &[
            (0.0025, "A", "2.50 mA"),
            (3.3, "V", "3.30 V"),
            (1234.0, "Ω", "1.23 kΩ"),
            (0.0, "A", "0 A"),
            (-0.0, "A", "0 A"),
            (-0.0025, "A", "-2.50 mA"),
            (2.5e-6, "A", "2.50 µA"),
            (47e-9, "A", "47.0 nA"),
            (1.5e-12, "A", "1.50 pA"),
            (2.2e6, "Ω", "2.20 MΩ"),
            (3.1e9, "W", "3.10 GW"),
            (1e12, "W", "1000 GW"),
            (1.234e13, "W", "12300 GW"),
            (1e-15, "A", "0.00100 pA"),
            (999.7e-3, "V", "1.00 V"),
            (999.4e-3, "V", "999 mV"),
            (99.96, "V", "100 V"),
            (9.996, "V", "10.0 V"),
            (999_700.0, "W", "1.00 MW"),
            (1.0, "", "1.00"),
            (2500.0, "", "2.50 k"),
            (f64::NAN, "V", "—"),
            (f64::INFINITY, "V", "—"),
        ];
        for &(value, unit, want) in cases {
            assert_eq!(fmt_eng(value, unit), want, "fmt_eng({value}, {unit:?})");
        }
        let mw = fmt_eng(0.1205, "W");
        assert!(mw == "120 mW" || mw == "121 mW", "{mw}");
    }

    #[test]
    fn significant_digits() {
        let cases: &[(f64, usize, &str)] = &[
            (1.234_56, 3, "1.23"),
            (3.3, 3, "3.30"),
            (12345.0, 3, "12300"),
            (999_999.0, 2, "1.0e6"),
            (0.000_123_4, 2, "0.00012"),
            (0.000_012_34, 2, "1.2e-5"),
            (2.5e7, 3, "2.50e7"),
            (-42.0, 2, "-42"),
            (0.0, 3, "0"),
            (7.0, 0, "7"),
            (0.999_96, 4, "1.000"),
            (f64::NAN, 3, "—"),
        ];
        for &(value, sig, want) in cases {
            assert_eq!(fmt_sig(value, sig), want, "fmt_sig({value}, {sig})");
        }
    }

    #[test]
    fn percentages_and_temperatures() {
        assert_eq!(fmt_percent(0.8634), "86.3 %");
        assert_eq!(fmt_percent(1.0), "100 %");
        assert_eq!(fmt_percent(0.0012), "0.12 %");
        assert_eq!(fmt_percent(0.5), "50 %");
        assert_eq!(fmt_percent(0.0), "0 %");
        assert_eq!(fmt_percent(-0.25), "-25 %");
        assert_eq!(fmt_percent(1e-9), "1e-7 %");
        assert_eq!(fmt_percent(f64::NAN), "—");
        assert_eq!(fmt_celsius(38.738), "38.7 °C");
        assert_eq!(fmt_celsius(-5.0), "-5.0 °C");
        assert_eq!(fmt_celsius(-0.01), "0.0 °C");
        assert_eq!(fmt_celsius(f64::INFINITY), "—");
    }

    #[test]
    fn durations() {
        let cases: &[(f64, &str)] = &[
            (0.85, "850 ms"),
            (0.0, "0 s"),
            (2e-6, "2.00 µs"),
            (0.9996, "1.00 s"),
            (42.0, "42.0 s"),
            (1.5, "1.50 s"),
            (35.2 * 60.0, "35.2 min"),
            (13.5 * 3600.0, "13.5 h"),
            (3_568_800.0, "41.3 d (991 h)"),
            (-42.0, "-42.0 s"),
            (f64::NAN, "—"),
        ];
        for &(secs, want) in cases {
            assert_eq!(fmt_duration(secs), want, "fmt_duration({secs})");
        }
        assert_eq!(fmt_duration(81_100_000.0), "2.57 y (939 d)");
        assert_eq!(fmt_duration(81_050_000.0), "2.57 y (938 d)");
    }
}
