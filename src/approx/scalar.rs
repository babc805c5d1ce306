//! The arithmetic shared by real (jw-axis) and complex (pole) evaluations.
//!
//! The Landen recursions and the w^2 frequency maps are the same formula
//! for a real frequency and for a complex root; writing them once over this
//! trait keeps the two paths from drifting apart. Only `f64` and
//! `Complex64` implement it.

use num_complex::Complex64;
use std::ops::{Add, Div, Mul, Sub};

/// `f64` or `Complex64`.
pub(crate) trait Scalar:
    Copy
    + Add<f64, Output = Self>
    + Sub<f64, Output = Self>
    + Mul<f64, Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Div<f64, Output = Self>
{
    /// Sine.
    fn sine(self) -> Self;
}

impl Scalar for f64 {
    fn sine(self) -> Self {
        self.sin()
    }
}

impl Scalar for Complex64 {
    fn sine(self) -> Self {
        self.sin()
    }
}
