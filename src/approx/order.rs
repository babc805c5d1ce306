//! Minimum order of a normalized lowpass mask: passband edge 1, stopband
//! edge `ws` > 1, loss at most `ap_db` in the passband and at least `as_db`
//! in the stopband.
//!
//! Invariant: the real-valued order each formula gives is rounded up with a
//! relative tolerance [`ORDER_TOLERANCE`], so a mask built from an exact
//! order n (a ratio like 3.0000000001 after rounding) gives n, not n + 1.

use super::decibel::power_ratio_m1;
use super::equiripple::discrimination;
use super::error::{check_attenuation, ApproxError};
use super::jacobi::{Landen, Modulus};
use super::{Family, Params, Prototype, Variant};

/// Relative slack when rounding the real-valued order up. The formulas are
/// accurate to about 1e-14 relative (each step keeps full precision, see
/// below), so 1e-9 only absorbs rounding; accepting an order short by this
/// fraction misses the stopband attenuation by about 1e-9 * As dB (1e-7 dB
/// at 100 dB), far below the precision any mask is written with.
pub const ORDER_TOLERANCE: f64 = 1e-9;

/// Minimum order of `family` for the mask (1, `ws`, `ap_db`, `as_db`):
/// - Butterworth: log10((10^(As/10)-1)/(10^(Ap/10)-1)) / (2 log10 ws);
/// - Chebyshev: acosh(sqrt(that ratio)) / acosh(ws);
/// - elliptic: the degree equation K(k) K'(k1) / (K'(k) K(k1)) with
///   k = 1/ws and k1 = eps/eps_s (Daniels 1974, ch. 5, from memory);
/// - inverse Chebyshev: the Chebyshev formula;
/// - Bessel and Legendre (no closed form): the least order whose loss at
///   `ws` reaches `as_db`, within [`ORDER_TOLERANCE`] relative.
///
/// Errors when `ws` is not finite and above 1, on levels out of range (the
/// attenuation must exceed the ripple), and when the order needed exceeds
/// [`Family::max_order`].
pub fn min_order(family: Family, ws: f64, ap_db: f64, as_db: f64) -> Result<usize, ApproxError> {
    if !(ws > 1.0 && ws.is_finite()) {
        return Err(ApproxError::StopbandEdgeOutOfRange { ws });
    }
    check_attenuation(ap_db, as_db)?;
    let ratio = power_ratio_m1(as_db) / power_ratio_m1(ap_db);
    let needed = match family {
        // ln_1p: ws - 1 is exact for ws in (1, 2], so a narrow transition
        // keeps its digits.
        Family::Butterworth => ratio.ln() / (2.0 * (ws - 1.0).ln_1p()),
        // The inverse Chebyshev shares the formula: its R at the stopband
        // edge is T_n(ws), as the Chebyshev's is (scipy's cheb2ord agrees,
        // tests/families.rs).
        Family::Chebyshev | Family::InverseChebyshev => acosh(ratio.sqrt()) / acosh(ws),
        Family::Elliptic => elliptic_degree(ws, ap_db, as_db),
        Family::Bessel | Family::Legendre => return searched_order(family, ws, ap_db, as_db),
    };
    let max = family.max_order();
    let order = (needed * (1.0 - ORDER_TOLERANCE)).ceil().max(1.0);
    if order > max as f64 {
        return Err(ApproxError::OrderTooHigh {
            family,
            needed,
            max,
        });
    }
    Ok(order as usize)
}

/// The least order of a family with a monotonic loss (Bessel, Legendre)
/// whose loss at `ws` reaches `as_db`, by trying each order in turn: the
/// loss at a fixed stopband edge grows with the order for both.
fn searched_order(family: Family, ws: f64, ap_db: f64, as_db: f64) -> Result<usize, ApproxError> {
    let max = family.max_order();
    let mut reached_db = 0.0;
    for order in 1..=max {
        let proto = Prototype::new(Params {
            family,
            order,
            passband_ripple_db: ap_db,
            stopband_attenuation_db: as_db,
            variant: Variant::Standard,
        })?;
        reached_db = proto.attenuation_db(ws);
        if reached_db >= as_db * (1.0 - ORDER_TOLERANCE) {
            return Ok(order);
        }
    }
    Err(ApproxError::MaskBeyondMaxOrder {
        family,
        max,
        reached_db,
    })
}

/// acosh(x) for x >= 1 as ln(1 + (x - 1) + sqrt((x - 1)(x + 1))), which
/// keeps full relative accuracy near x = 1, where ln(x + sqrt(x^2 - 1))
/// loses it.
pub(crate) fn acosh(x: f64) -> f64 {
    let d = x - 1.0;
    (d + (d * (x + 1.0)).sqrt()).ln_1p()
}

/// The real-valued elliptic degree K(k) K(k1') / (K(k') K(k1)).
fn elliptic_degree(ws: f64, ap_db: f64, as_db: f64) -> f64 {
    let selectivity = Modulus {
        k: 1.0 / ws,
        kc: ((ws - 1.0) * (ws + 1.0)).sqrt() / ws,
    };
    let k1 = discrimination(ap_db, as_db);
    let quarter = |m: Modulus| Landen::new(m).quarter_period();
    quarter(selectivity) * quarter(k1.complement())
        / (quarter(selectivity.complement()) * quarter(k1))
}
