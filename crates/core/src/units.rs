//! SI quantities: strict parsing ("150 ns", "1.8 MHz", "4.5V", "85 °C") and engineering printing.
//!
//! Values travel through the program as `f64` with the unit in the field name (`_ns`, `_hz`, `_v`,
//! `_pf`, `_c`); this module is the only place that turns text into those numbers and back.
//! Rules (BIPM SI Brochure §3.1/§5.4): the prefix is attached to the unit symbol, case-sensitive,
//! never compound; `u` may stand for `µ`. "1.8 mhz" is an error, never read as MHz.

use std::fmt;

/// A physical quantity kind the parser understands.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kind {
    /// Seconds, returned in nanoseconds.
    Time,
    /// Hertz, returned in hertz.
    Frequency,
    /// Volts, returned in volts.
    Voltage,
    /// Farads, returned in picofarads.
    Capacitance,
    /// Amperes, returned in milliamperes.
    Current,
    /// Ohms ("Ω" or "ohm"), returned in ohms.
    Resistance,
    /// Metres, returned in metres.
    Length,
}

impl Kind {
    fn symbol(self) -> &'static str {
        match self {
            Kind::Time => "s",
            Kind::Frequency => "Hz",
            Kind::Voltage => "V",
            Kind::Capacitance => "F",
            Kind::Current => "A",
            Kind::Resistance => "\u{3a9}",
            Kind::Length => "m",
        }
    }
    /// Other spellings of the unit symbol ("ohm", and the OHM SIGN beside the Greek omega).
    fn alternatives(self) -> &'static [&'static str] {
        match self {
            Kind::Resistance => &["ohm", "\u{2126}"],
            _ => &[],
        }
    }
    fn noun(self) -> &'static str {
        match self {
            Kind::Time => "a time",
            Kind::Frequency => "a frequency",
            Kind::Voltage => "a voltage",
            Kind::Capacitance => "a capacitance",
            Kind::Current => "a current",
            Kind::Resistance => "a resistance",
            Kind::Length => "a length",
        }
    }
    fn example(self) -> &'static str {
        match self {
            Kind::Time => "\"150 ns\" or \"0.15 us\"",
            Kind::Frequency => "\"1.8 MHz\" or \"250 kHz\"",
            Kind::Voltage => "\"4.75 V\" or \"4750 mV\"",
            Kind::Capacitance => "\"50 pF\"",
            Kind::Current => "\"120 mA\" or \"1.5 A\"",
            Kind::Resistance => "\"1 k\u{3a9}\", \"330 ohm\" or \"20 m\u{3a9}\"",
            Kind::Length => "\"0.6 m\" or \"450 mm\"",
        }
    }
    /// Power of ten from the SI base unit to the unit this module returns.
    fn out_exp(self) -> i32 {
        match self {
            Kind::Time => 9,
            Kind::Capacitance => 12,
            Kind::Current => 3,
            Kind::Frequency | Kind::Voltage | Kind::Resistance | Kind::Length => 0,
        }
    }
}

/// Why a quantity could not be read; the message says what was expected.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum UnitError {
    /// No number at the start.
    #[error("\"{text}\" does not start with a number; write {example}")]
    NoNumber { text: String, example: &'static str },
    /// A number but no unit where one is required.
    #[error("\"{text}\" has no unit; {noun} needs one, e.g. {example}")]
    MissingUnit {
        text: String,
        noun: &'static str,
        example: &'static str,
    },
    /// A unit that is not the expected one (with a suggestion when only the case is wrong).
    #[error("\"{unit}\" is not a unit of {noun}{hint}")]
    WrongUnit {
        unit: String,
        noun: &'static str,
        hint: String,
    },
    /// Not finite (NaN, infinity).
    #[error("\"{text}\" is not a finite number")]
    NotFinite { text: String },
    /// A duty cycle outside 0…1 (or 0…100 %).
    #[error("duty cycle \"{text}\" must lie strictly between 0 and 1 (or 0 % and 100 %)")]
    DutyRange { text: String },
}

/// Prefixes with their power of ten (integers, so "150 ns" becomes exactly 150.0 ns).
const PREFIXES: &[(&str, i32)] = &[
    ("p", -12),
    ("n", -9),
    ("u", -6),
    ("\u{b5}", -6),  // MICRO SIGN
    ("\u{3bc}", -6), // GREEK SMALL LETTER MU
    ("m", -3),
    ("", 0),
    ("k", 3),
    ("M", 6),
    ("G", 9),
];

/// Split "  1.5e3 kHz " into the number and the trimmed rest.
fn split_number(text: &str) -> Option<(f64, &str)> {
    let t = text.trim();
    let bytes = t.as_bytes();
    let mut end = 0;
    let mut seen_digit = false;
    let mut seen_exp = false;
    while end < bytes.len() {
        let c = bytes[end];
        let ok = match c {
            b'0'..=b'9' => {
                seen_digit = true;
                true
            }
            b'.' => !seen_exp,
            b'+' | b'-' => end == 0 || matches!(bytes[end - 1], b'e' | b'E'),
            // an exponent only when followed by a digit or sign, so "1 e" is not eaten
            b'e' | b'E' => {
                seen_digit
                    && !seen_exp
                    && bytes
                        .get(end + 1)
                        .is_some_and(|n| n.is_ascii_digit() || *n == b'-' || *n == b'+')
                    && {
                        seen_exp = true;
                        true
                    }
            }
            _ => false,
        };
        if !ok {
            break;
        }
        end += 1;
    }
    if !seen_digit {
        return None;
    }
    let value: f64 = t[..end].parse().ok()?;
    Some((value, t[end..].trim()))
}

/// All spellings accepted for a kind, for suggestions.
fn spellings(kind: Kind) -> impl Iterator<Item = String> {
    PREFIXES
        .iter()
        .map(move |(p, _)| format!("{p}{}", kind.symbol()))
}

/// How to write quantities, for diagnostics.
pub const HELP: &str = "quantities are text with an SI unit, case-sensitive, space optional: \
\"4.75 V\", \"150 ns\", \"1.8 MHz\", \"50 pF\"; temperatures \"85 °C\"; duty \"0.3\" or \"30%\"";

/// Parse a quantity of `kind`; the unit is required. Returns ns, Hz, V or pF (see [`Kind`]).
pub fn parse(text: &str, kind: Kind) -> Result<f64, UnitError> {
    let (number, unit) = split_number(text).ok_or_else(|| UnitError::NoNumber {
        text: text.to_string(),
        example: kind.example(),
    })?;
    if !number.is_finite() {
        return Err(UnitError::NotFinite {
            text: text.to_string(),
        });
    }
    if unit.is_empty() {
        return Err(UnitError::MissingUnit {
            text: text.to_string(),
            noun: kind.noun(),
            example: kind.example(),
        });
    }
    for (prefix, exp) in PREFIXES {
        if let Some(sym) = unit.strip_prefix(prefix)
            && (sym == kind.symbol() || kind.alternatives().contains(&sym))
        {
            let e = exp + kind.out_exp();
            // multiply or divide by an exact power of ten so whole values stay whole
            return Ok(if e >= 0 {
                number * 10f64.powi(e)
            } else {
                number / 10f64.powi(-e)
            });
        }
    }
    let close: Vec<String> = spellings(kind)
        .filter(|s| s.eq_ignore_ascii_case(unit))
        .map(|s| format!("\"{s}\""))
        .collect();
    let hint = if close.is_empty() {
        format!("; write {}", kind.example())
    } else {
        format!(
            "; units are case-sensitive (m is milli, M is mega): did you mean {}?",
            close.join(" or ")
        )
    };
    Err(UnitError::WrongUnit {
        unit: unit.to_string(),
        noun: kind.noun(),
        hint,
    })
}

/// Time in nanoseconds from "150 ns", "0.15 us", "1.2 µs".
pub fn parse_time_ns(text: &str) -> Result<f64, UnitError> {
    parse(text, Kind::Time)
}

/// Frequency in hertz from "1.8 MHz", "250kHz".
pub fn parse_freq_hz(text: &str) -> Result<f64, UnitError> {
    parse(text, Kind::Frequency)
}

/// Voltage in volts from "4.75 V", "4750 mV".
pub fn parse_voltage_v(text: &str) -> Result<f64, UnitError> {
    parse(text, Kind::Voltage)
}

/// Capacitance in picofarads from "50 pF", "0.1 nF".
pub fn parse_capacitance_pf(text: &str) -> Result<f64, UnitError> {
    parse(text, Kind::Capacitance)
}

/// Current in milliamperes from "120 mA", "1.5 A".
pub fn parse_current_ma(text: &str) -> Result<f64, UnitError> {
    parse(text, Kind::Current)
}

/// Resistance in ohms from "1 kΩ", "330 ohm", "20 mΩ".
pub fn parse_resistance_ohm(text: &str) -> Result<f64, UnitError> {
    parse(text, Kind::Resistance)
}

/// Length in metres from "0.6 m", "450 mm".
pub fn parse_length_m(text: &str) -> Result<f64, UnitError> {
    parse(text, Kind::Length)
}

/// Temperature in °C from "85", "85C", "85 °C", "-40 °C" (only degrees Celsius are accepted).
pub fn parse_temp_c(text: &str) -> Result<f64, UnitError> {
    let (number, unit) = split_number(text).ok_or_else(|| UnitError::NoNumber {
        text: text.to_string(),
        example: "\"85 °C\" or \"85\"",
    })?;
    if !number.is_finite() {
        return Err(UnitError::NotFinite {
            text: text.to_string(),
        });
    }
    match unit {
        "" | "C" | "°C" | "\u{2103}" => Ok(number),
        other => Err(UnitError::WrongUnit {
            unit: other.to_string(),
            noun: "a temperature",
            hint: "; temperatures are in degrees Celsius: write \"85\", \"85C\" or \"85 °C\""
                .into(),
        }),
    }
}

/// Duty cycle (high-time fraction) from "0.3", "30%" or "30 %"; must be strictly inside 0…1.
pub fn parse_duty(text: &str) -> Result<f64, UnitError> {
    let (number, unit) = split_number(text).ok_or_else(|| UnitError::NoNumber {
        text: text.to_string(),
        example: "\"0.3\" or \"30%\"",
    })?;
    let fraction = match unit {
        "" => number,
        "%" => number / 100.0,
        other => {
            return Err(UnitError::WrongUnit {
                unit: other.to_string(),
                noun: "a duty cycle",
                hint: "; write a fraction (\"0.3\") or a percentage (\"30%\")".into(),
            });
        }
    };
    if !(fraction > 0.0 && fraction < 1.0) {
        return Err(UnitError::DutyRange {
            text: text.to_string(),
        });
    }
    Ok(fraction)
}

/// A value printed with an engineering prefix and a fixed count of significant digits.
pub struct Si {
    value: f64,
    symbol: &'static str,
    digits: usize,
}

/// Print `value` (in base units) with a prefix: `si(1.6e6, "Hz", 4)` → "1.600 MHz".
pub fn si(value: f64, symbol: &'static str, digits: usize) -> Si {
    Si {
        value,
        symbol,
        digits,
    }
}

/// Print a time given in nanoseconds: `ns(625.0)` → "625.0 ns".
pub fn ns(value_ns: f64) -> Si {
    si(value_ns * 1e-9, "s", 4)
}

/// Print a frequency given in hertz: `hz(1.6e6)` → "1.600 MHz".
pub fn hz(value_hz: f64) -> Si {
    si(value_hz, "Hz", 4)
}

impl fmt::Display for Si {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let v = self.value;
        if !v.is_finite() {
            return write!(f, "{v} {}", self.symbol);
        }
        if v == 0.0 {
            // a zero time reads best in the unit the column uses
            let unit = if self.symbol == "s" {
                "ns"
            } else {
                self.symbol
            };
            return write!(f, "0 {unit}");
        }
        const STEPS: &[(f64, &str)] = &[
            (1e9, "G"),
            (1e6, "M"),
            (1e3, "k"),
            (1.0, ""),
            (1e-3, "m"),
            (1e-6, "µ"),
            (1e-9, "n"),
            (1e-12, "p"),
        ];
        let mag = v.abs();
        let mut k = STEPS
            .iter()
            .position(|(s, _)| mag >= *s * 0.999_999_5)
            .unwrap_or(STEPS.len() - 1);
        loop {
            let (scale, prefix) = STEPS[k];
            let m = v / scale;
            let int_digits = if m.abs() >= 99.999_5 {
                3
            } else if m.abs() >= 9.999_5 {
                2
            } else {
                1
            };
            let decimals = self.digits.saturating_sub(int_digits);
            let text = format!("{m:.decimals$}");
            // rounding can carry into a fourth integer digit: move up one prefix
            if k > 0
                && text
                    .trim_start_matches('-')
                    .split('.')
                    .next()
                    .is_some_and(|i| i.len() > 3)
            {
                k -= 1;
                continue;
            }
            return write!(f, "{text} {prefix}{}", self.symbol);
        }
    }
}

/// A share (0…1) and its uncertainty as per cent, with as many decimals as the uncertainty
/// needs for two significant digits, at most `max_decimals`; an uncertainty too small for those
/// reads "< 0.001 %" rather than zero. Returns `(value ± U, value alone)`.
pub fn percent_pm(share: f64, uncertainty: f64, max_decimals: usize) -> (String, String) {
    let max = max_decimals.clamp(1, 9);
    let want = (1 - (uncertainty * 100.0).max(1e-12).log10().floor() as i32).max(1) as usize;
    let digits = want.min(max);
    let value = format!("{:.digits$} %", share * 100.0);
    let u = if want > max {
        format!("< {:.digits$} %", 10f64.powi(-(digits as i32)))
    } else {
        format!("{:.digits$} %", uncertainty * 100.0)
    };
    (format!("{value} ± {u}"), value)
}

/// A value and its uncertainty in one unit (the value's prefix): "2.0000000 MHz ± 0.0000017 MHz",
/// "250.00 ns ± 0.80 ns". The value keeps four significant digits, or as many decimals as the
/// uncertainty needs for two significant digits; `symbol` is the base unit ("Hz", "s").
pub fn pm(value: f64, uncertainty: f64, symbol: &str) -> String {
    const STEPS: &[(f64, &str)] = &[
        (1e9, "G"),
        (1e6, "M"),
        (1e3, "k"),
        (1.0, ""),
        (1e-3, "m"),
        (1e-6, "µ"),
        (1e-9, "n"),
        (1e-12, "p"),
    ];
    if !value.is_finite() || !uncertainty.is_finite() {
        return format!("{value} {symbol} ± {uncertainty} {symbol}");
    }
    let lead = if value != 0.0 { value } else { uncertainty };
    let (scale, prefix) = STEPS
        .iter()
        .copied()
        .find(|(s, _)| lead.abs() >= *s * 0.999_999_5)
        .unwrap_or(STEPS[STEPS.len() - 1]);
    let (m, u) = (value / scale, uncertainty.abs() / scale);
    let int_digits = if m.abs() >= 99.999_5 {
        3
    } else if m.abs() >= 9.999_5 {
        2
    } else {
        1
    };
    let value_decimals = 4 - int_digits;
    let unc_decimals = if u > 0.0 {
        (1 - u.log10().floor() as i32).max(0) as usize
    } else {
        0
    };
    let d = value_decimals.max(unc_decimals).min(12);
    // a time that is zero reads best in ns, as `units::ns` prints it
    let unit = if prefix.is_empty() && symbol == "s" && value == 0.0 && uncertainty == 0.0 {
        "ns".to_string()
    } else {
        format!("{prefix}{symbol}")
    };
    format!("{m:.d$} {unit} ± {u:.d$} {unit}")
}

#[cfg(test)]
mod tests {

    #[test]
    fn currents_resistances_and_lengths() {
        // SI prefixes (BIPM SI Brochure §3.1); ohm may be spelt out, Ω or the OHM SIGN
        assert_eq!(parse_current_ma("120 mA"), Ok(120.0));
        assert_eq!(parse_current_ma("1.5A"), Ok(1500.0));
        assert_eq!(parse_resistance_ohm("1 k\u{3a9}"), Ok(1000.0));
        assert_eq!(parse_resistance_ohm("330 ohm"), Ok(330.0));
        assert_eq!(parse_resistance_ohm("20 m\u{2126}"), Ok(0.02));
        assert_eq!(parse_length_m("450 mm"), Ok(0.45));
        assert_eq!(parse_length_m("2 m"), Ok(2.0));
        assert!(parse_length_m("2 ft").is_err());
        assert!(parse_current_ma("5 ma").is_err());
    }

    use super::*;

    // Spelling rules: BIPM SI Brochure (9th ed.) §3.1 and §5.4; NIST SP 811 ch. 6.
    #[test]
    fn accepts_prefixed_units_with_or_without_space() {
        assert_eq!(parse_time_ns("150 ns").unwrap(), 150.0);
        assert!((parse_time_ns("0.15 us").unwrap() - 150.0).abs() < 1e-9);
        assert_eq!(parse_time_ns("2 us").unwrap(), 2000.0);
        assert!((parse_time_ns("0.15 µs").unwrap() - 150.0).abs() < 1e-9);
        assert!((parse_time_ns("0.15 μs").unwrap() - 150.0).abs() < 1e-9);
        assert_eq!(parse_freq_hz("1.8 MHz").unwrap(), 1.8e6);
        assert_eq!(parse_freq_hz("1.8MHz").unwrap(), 1.8e6);
        assert_eq!(parse_voltage_v("4.75 V").unwrap(), 4.75);
        assert_eq!(parse_voltage_v("4.5V").unwrap(), 4.5);
        assert!((parse_voltage_v("4750 mV").unwrap() - 4.75).abs() < 1e-12);
        assert!((parse_capacitance_pf("50 pF").unwrap() - 50.0).abs() < 1e-9);
        assert!((parse_time_ns("1e3 ns").unwrap() - 1000.0).abs() < 1e-9);
        assert!((parse_freq_hz("2.5e-3 kHz").unwrap() - 2.5).abs() < 1e-12);
    }

    #[test]
    fn case_matters_and_wrong_case_gets_a_hint() {
        let err = parse_freq_hz("1.8 mhz").unwrap_err().to_string();
        assert!(err.contains("case-sensitive"), "{err}");
        assert!(err.contains("\"mHz\" or \"MHz\""), "{err}");
        // "mHz" is a real unit (millihertz), so it parses, and is not MHz.
        assert!((parse_freq_hz("1.8 mHz").unwrap() - 1.8e-3).abs() < 1e-15);
        assert!(parse_time_ns("5 NS").is_err());
        assert!(parse_voltage_v("5 v").is_err());
    }

    #[test]
    fn rejects_missing_wrong_and_compound_units() {
        assert!(matches!(
            parse_time_ns("150"),
            Err(UnitError::MissingUnit { .. })
        ));
        assert!(matches!(
            parse_time_ns("150 Hz"),
            Err(UnitError::WrongUnit { .. })
        ));
        assert!(parse_time_ns("1 mns").is_err(), "no compound prefixes");
        assert!(matches!(
            parse_time_ns("ns"),
            Err(UnitError::NoNumber { .. })
        ));
        assert!(parse_time_ns("").is_err());
        assert!(parse_time_ns("1.2.3 ns").is_err());
        assert!(parse_time_ns("inf ns").is_err());
    }

    #[test]
    fn temperatures_in_celsius() {
        assert_eq!(parse_temp_c("85").unwrap(), 85.0);
        assert_eq!(parse_temp_c("85C").unwrap(), 85.0);
        assert_eq!(parse_temp_c("85 °C").unwrap(), 85.0);
        assert_eq!(parse_temp_c("85°C").unwrap(), 85.0);
        assert_eq!(parse_temp_c("-40 °C").unwrap(), -40.0);
        assert!(parse_temp_c("85 F").is_err());
        assert!(parse_temp_c("300 K").is_err());
    }

    #[test]
    fn duty_as_fraction_or_percent() {
        assert_eq!(parse_duty("0.3").unwrap(), 0.3);
        assert!((parse_duty("30%").unwrap() - 0.3).abs() < 1e-12);
        assert!((parse_duty("30 %").unwrap() - 0.3).abs() < 1e-12);
        assert!(parse_duty("0").is_err());
        assert!(parse_duty("100%").is_err());
        assert!(parse_duty("1.5").is_err());
        assert!(parse_duty("30 percent").is_err());
    }

    #[test]
    fn prints_with_engineering_prefix() {
        assert_eq!(hz(1.6e6).to_string(), "1.600 MHz");
        assert_eq!(ns(625.0).to_string(), "625.0 ns");
        assert_eq!(ns(1000.0).to_string(), "1.000 µs");
        assert_eq!(ns(12.5).to_string(), "12.50 ns");
        assert_eq!(hz(999.99e3).to_string(), "1.000 MHz");
        assert_eq!(si(-0.0025, "V", 3).to_string(), "-2.50 mV");
        assert_eq!(ns(0.0).to_string(), "0 ns");
    }

    #[test]
    fn printing_round_trips_through_parsing() {
        for v in [1.0, 3.3e3, 47e6, 0.125, 12.5e-6] {
            let text = si(v, "Hz", 6).to_string().replace('µ', "u");
            let back = parse_freq_hz(&text).unwrap();
            assert!((back - v).abs() / v < 1e-5, "{v} -> {text} -> {back}");
        }
    }

    #[test]
    fn a_share_keeps_two_significant_digits_of_its_uncertainty() {
        assert_eq!(percent_pm(0.5, 0.0029, 9).0, "50.00 % ± 0.29 %");
        assert_eq!(percent_pm(0.5, 0.000_006_3, 9).0, "50.00000 % ± 0.00063 %");
        // a cap on the decimals never shows a non-zero uncertainty as zero
        assert_eq!(percent_pm(0.5, 0.000_000_63, 3).0, "50.000 % ± < 0.001 %");
        assert_eq!(percent_pm(0.25, 0.02, 3).1, "25.0 %");
    }
}
