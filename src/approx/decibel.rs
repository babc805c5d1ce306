//! Decibel levels turned into the power ratios the approximations use.
//!
//! Every `10^(dB/10) - 1` goes through `exp_m1`, so a small ripple such as
//! 0.001 dB keeps full relative precision (the plain form loses about
//! `1e-16 / 2.3e-4`, four digits).

use std::f64::consts::LN_10;

/// `10^(db/10) - 1`, accurate for small `db`.
pub(crate) fn power_ratio_m1(db: f64) -> f64 {
    (db * LN_10 / 10.0).exp_m1()
}

/// The ripple factor eps = sqrt(10^(db/10) - 1).
pub(crate) fn ripple_factor(db: f64) -> f64 {
    power_ratio_m1(db).sqrt()
}
