//! Engineering notation: a mantissa with a fixed number of significant
//! digits and a power of ten that is a multiple of 3, spelled with an SI
//! prefix for people ([`format()`]) and with a SPICE suffix for decks
//! ([`crate::export::spice::value`]).
//!
//! The digits come from Rust's own correctly rounded `{:e}` formatting
//! and are only moved around as text, so no second rounding happens (a
//! value that rounds up to 1000 of a prefix lands on the next prefix).

/// Significant digits for people: 5 tells 1.5963 mH from 1.5964 mH, finer
/// than any part tolerance, and stays easy to read.
pub const HUMAN_DIGITS: usize = 5;

/// SI prefixes from 1e-15 to 1e12 in steps of 1e3. `u` for micro keeps the
/// output plain ASCII for terminals, CSV files and SPICE comments.
const SI_PREFIXES: [&str; 10] = ["f", "p", "n", "u", "m", "", "k", "M", "G", "T"];

/// Power of ten of the first entry of the prefix tables.
pub(crate) const LOWEST_EXPONENT: i32 = -15;

/// `value` = sign * mantissa * 10^exponent with `digits` significant
/// digits (at least 3), 1 <= mantissa < 1000 and `exponent` a multiple of
/// 3; `None` for 0 and non-finite values. The mantissa is decimal text.
pub(crate) fn split(value: f64, digits: usize) -> Option<(String, i32)> {
    if !value.is_finite() || value == 0.0 {
        return None;
    }
    let digits = digits.max(3);
    let text = format!("{:.*e}", digits - 1, value.abs());
    let (mantissa, exponent) = text.split_once('e')?;
    let exponent: i32 = exponent.parse().ok()?;
    let all: String = mantissa.chars().filter(char::is_ascii_digit).collect();
    let exp3 = exponent.div_euclid(3) * 3;
    let int_len = (exponent - exp3 + 1) as usize;
    let (int, frac) = all.split_at(int_len.min(all.len()));
    let sign = if value < 0.0 { "-" } else { "" };
    let mantissa = if frac.is_empty() {
        format!("{sign}{int}")
    } else {
        format!("{sign}{int}.{frac}")
    };
    Some((mantissa, exp3))
}

/// The table entry for a multiple-of-3 exponent, if the table reaches it.
pub(crate) fn prefix<'a>(table: &[&'a str], exp3: i32) -> Option<&'a str> {
    let index = (exp3 - LOWEST_EXPONENT) / 3;
    usize::try_from(index)
        .ok()
        .and_then(|i| table.get(i).copied())
}

/// `value` with [`HUMAN_DIGITS`] significant digits, an SI prefix and the
/// unit: "1.5963 mH", "47.000 nF", "0.0000 V". Beyond the prefixes
/// (below 1e-15 or from 1e15) the power of ten is written out instead.
pub fn format(value: f64, unit: &str) -> String {
    compose(value, unit, false)
}

/// [`format()`] without the trailing zeros of the mantissa, the way a
/// parts list or an axis label spells a value: "47 nF", "1.02 kohm",
/// "1 k". Dropping zeros after the decimal point loses nothing, so a
/// value still shows all of its [`HUMAN_DIGITS`] digits when it has them
/// ("1.5963 mH").
pub fn format_trimmed(value: f64, unit: &str) -> String {
    compose(value, unit, true)
}

/// The common body of [`format()`] and [`format_trimmed`].
fn compose(value: f64, unit: &str, trim: bool) -> String {
    let tidy = |m: String| {
        if trim && m.contains('.') {
            m.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            m
        }
    };
    let number = match split(value, HUMAN_DIGITS) {
        Some((mantissa, exp3)) => match prefix(&SI_PREFIXES, exp3) {
            Some(p) => format!("{} {p}{unit}", tidy(mantissa)),
            None => format!("{}e{exp3} {unit}", tidy(mantissa)),
        },
        None if value == 0.0 => format!("{} {unit}", tidy(format!("{:.*}", HUMAN_DIGITS - 1, 0.0))),
        None => format!("{value} {unit}"),
    };
    number.trim_end().to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn splits_at_multiples_of_three() {
        assert_eq!(split(1.5963e-3, 5), Some(("1.5963".into(), -3)));
        assert_eq!(split(47e-9, 5), Some(("47.000".into(), -9)));
        assert_eq!(split(-470e3, 5), Some(("-470.00".into(), 3)));
        // Rounding up crosses into the next prefix.
        assert_eq!(split(999.996, 5), Some(("1.0000".into(), 3)));
        assert_eq!(split(0.0, 5), None);
    }

    #[test]
    fn trims_only_zeros_after_the_point() {
        assert_eq!(format_trimmed(47e-9, "F"), "47 nF");
        assert_eq!(format_trimmed(1.02e3, "ohm"), "1.02 kohm");
        assert_eq!(format_trimmed(100.0, ""), "100");
        assert_eq!(format_trimmed(1e3, ""), "1 k");
        assert_eq!(format_trimmed(1.5963e-3, "H"), "1.5963 mH");
        assert_eq!(format_trimmed(0.0, "V"), "0 V");
        assert_eq!(format_trimmed(-2.5e6, "Hz"), "-2.5 MHz");
    }
}
