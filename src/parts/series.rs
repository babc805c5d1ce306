//! The IEC 60063 preferred-number series as the published tables
//! (IEC 60063:2015, tables 1 and 2, from memory; tests/parts.rs checks
//! where each departs from round(10^(i/N)) against the same standard).
//!
//! The tables are kept as written rather than computed from
//! round(10^(i/N)): E24 differs from that formula at eight values and E192
//! at one, and a part catalogue sells the table, not the formula.
//!
//! Each table holds the mantissas of one decade as integers (two digits for
//! E3 to E24, three for E48 to E192), so a preferred value is
//! mantissa x 10^k, formed with one correctly rounded multiplication or
//! division by an exact power of ten: 4.7 nF comes out as the same double
//! as the literal `4.7e-9`.

use std::fmt;
use std::str::FromStr;

use super::PartsError;

/// Smallest value [`Series::nearest`] and the snaps accept: 1 aF, below
/// any part, and small enough in magnitude that every power of ten the
/// snapping forms (down to 10^-21) is exact in f64.
pub(crate) const MIN_VALUE: f64 = 1e-18;

/// Largest value accepted (1e18 ohm is beyond any resistor sold).
pub(crate) const MAX_VALUE: f64 = 1e18;

/// A preferred-number series of IEC 60063 (`E3` .. `E192` in a design
/// file; its [`fmt::Display`] is the same name).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
pub enum Series {
    /// 3 values per decade (about 40 % steps).
    E3,
    /// 6 values per decade (20 % parts).
    E6,
    /// 12 values per decade (10 % parts).
    E12,
    /// 24 values per decade (5 % parts).
    E24,
    /// 48 values per decade (2 % parts).
    E48,
    /// 96 values per decade (1 % parts).
    E96,
    /// 192 values per decade (0.5 % and better).
    E192,
}

const E3: [u16; 3] = [10, 22, 47];

const E6: [u16; 6] = [10, 15, 22, 33, 47, 68];

const E12: [u16; 12] = [10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82];

const E24: [u16; 24] = [
    10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30, 33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91,
];

const E48: [u16; 48] = [
    100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169, 178, 187, 196, 205, 215, 226, 237,
    249, 261, 274, 287, 301, 316, 332, 348, 365, 383, 402, 422, 442, 464, 487, 511, 536, 562, 590,
    619, 649, 681, 715, 750, 787, 825, 866, 909, 953,
];

const E96: [u16; 96] = [
    100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143, 147, 150, 154,
    158, 162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210, 215, 221, 226, 232, 237, 243,
    249, 255, 261, 267, 274, 280, 287, 294, 301, 309, 316, 324, 332, 340, 348, 357, 365, 374, 383,
    392, 402, 412, 422, 432, 442, 453, 464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604,
    619, 634, 649, 665, 681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953,
    976,
];

const E192: [u16; 192] = [
    100, 101, 102, 104, 105, 106, 107, 109, 110, 111, 113, 114, 115, 117, 118, 120, 121, 123, 124,
    126, 127, 129, 130, 132, 133, 135, 137, 138, 140, 142, 143, 145, 147, 149, 150, 152, 154, 156,
    158, 160, 162, 164, 165, 167, 169, 172, 174, 176, 178, 180, 182, 184, 187, 189, 191, 193, 196,
    198, 200, 203, 205, 208, 210, 213, 215, 218, 221, 223, 226, 229, 232, 234, 237, 240, 243, 246,
    249, 252, 255, 258, 261, 264, 267, 271, 274, 277, 280, 284, 287, 291, 294, 298, 301, 305, 309,
    312, 316, 320, 324, 328, 332, 336, 340, 344, 348, 352, 357, 361, 365, 370, 374, 379, 383, 388,
    392, 397, 402, 407, 412, 417, 422, 427, 432, 437, 442, 448, 453, 459, 464, 470, 475, 481, 487,
    493, 499, 505, 511, 517, 523, 530, 536, 542, 549, 556, 562, 569, 576, 583, 590, 597, 604, 612,
    619, 626, 634, 642, 649, 657, 665, 673, 681, 690, 698, 706, 715, 723, 732, 741, 750, 759, 768,
    777, 787, 796, 806, 816, 825, 835, 845, 856, 866, 876, 887, 898, 909, 920, 931, 942, 953, 965,
    976, 988,
];

impl Series {
    /// Every series, coarsest first.
    pub const ALL: [Series; 7] = [
        Series::E3,
        Series::E6,
        Series::E12,
        Series::E24,
        Series::E48,
        Series::E96,
        Series::E192,
    ];

    /// The table: one decade's mantissas as integers, ascending.
    fn table(self) -> &'static [u16] {
        match self {
            Series::E3 => &E3,
            Series::E6 => &E6,
            Series::E12 => &E12,
            Series::E24 => &E24,
            Series::E48 => &E48,
            Series::E96 => &E96,
            Series::E192 => &E192,
        }
    }

    /// Significant digits of the table (2 up to E24, 3 from E48).
    fn digits(self) -> i32 {
        if self.table()[0] < 100 {
            2
        } else {
            3
        }
    }

    /// The values of the decade [1, 10), ascending (1.0, 2.2, 4.7 for E3).
    pub fn mantissas(self) -> Vec<f64> {
        self.decade(0).collect()
    }

    /// The series values of the decade [10^k, 10^(k+1)), ascending.
    fn decade(self, k: i32) -> impl Iterator<Item = f64> {
        let exponent = k - (self.digits() - 1);
        self.table().iter().map(move |&m| scaled(m, exponent))
    }

    /// Series values of the decade holding `value` and of both
    /// neighbours, ascending: enough to bracket any value even when
    /// log10 rounds across a decade boundary.
    fn around(self, value: f64) -> Result<impl Iterator<Item = f64>, PartsError> {
        if !(MIN_VALUE..=MAX_VALUE).contains(&value) {
            return Err(PartsError::BadValue { value });
        }
        // |log10| <= 20 here, so the cast cannot overflow.
        let k = value.log10().floor() as i32;
        Ok((k - 1..=k + 1).flat_map(move |d| self.decade(d)))
    }

    /// The series value nearest to `value` on a logarithmic scale (the
    /// smaller relative step), across decades: 9.6 snaps to 10 in E12.
    /// A value exactly between two (geometrically) goes to the lower.
    pub fn nearest(self, value: f64) -> Result<f64, PartsError> {
        let distance = |c: f64| (c / value).ln().abs();
        // min_by keeps the first of equal candidates: the lower one.
        let best = self
            .around(value)?
            .min_by(|&a, &b| distance(a).total_cmp(&distance(b)));
        // `around` always yields three decades of candidates.
        Ok(best.unwrap_or(f64::NAN))
    }

    /// The series values from `low` to `high` (inclusive), ascending;
    /// none for a range outside the values the series snaps.
    pub fn between(self, low: f64, high: f64) -> impl Iterator<Item = f64> {
        let valid =
            (MIN_VALUE..=MAX_VALUE).contains(&low) && (MIN_VALUE..=MAX_VALUE).contains(&high);
        // |log10| <= 20 here, so the casts cannot overflow; an invalid
        // range takes no decade.
        let decades = match valid {
            true => low.log10().floor() as i32 - 1..high.log10().floor() as i32 + 2,
            false => 0..0,
        };
        decades
            .flat_map(move |d| self.decade(d))
            .filter(move |&v| (low..=high).contains(&v))
    }

    /// The smallest series value at or above `value`.
    pub fn snap_up(self, value: f64) -> Result<f64, PartsError> {
        let above = self.around(value)?.find(|&c| c >= value);
        // The top decade of `around` starts above `value`, so one exists.
        Ok(above.unwrap_or(f64::NAN))
    }

    /// The largest series value at or below `value`.
    pub fn snap_down(self, value: f64) -> Result<f64, PartsError> {
        let below = self.around(value)?.filter(|&c| c <= value).last();
        // The bottom decade of `around` lies below `value`, so one exists.
        Ok(below.unwrap_or(f64::NAN))
    }
}

/// m x 10^exponent with one rounding: 10^|exponent| is exact in f64 up
/// to 10^22, and the values accepted keep |exponent| <= 21.
fn scaled(m: u16, exponent: i32) -> f64 {
    let power = 10f64.powi(exponent.abs());
    if exponent >= 0 {
        f64::from(m) * power
    } else {
        f64::from(m) / power
    }
}

impl fmt::Display for Series {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "E{}", self.table().len())
    }
}

impl FromStr for Series {
    type Err = PartsError;

    /// "E96" (either case) to [`Series::E96`]; anything else is an
    /// [`PartsError::UnknownSeries`] listing the names accepted.
    fn from_str(s: &str) -> Result<Series, PartsError> {
        Series::ALL
            .into_iter()
            .find(|series| series.to_string().eq_ignore_ascii_case(s))
            .ok_or_else(|| PartsError::UnknownSeries { got: s.to_string() })
    }
}
