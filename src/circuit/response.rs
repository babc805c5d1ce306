//! Reading a [`Response`]: magnitude, unwrapped phase, group delay, and
//! the log-spaced frequency grid sweeps are usually run on.
//!
//! [`Response::group_delay_s`] differentiates the unwrapped phase on the
//! response's own grid (second-order finite differences), so it is only as
//! good as the grid is fine; [`super::AcSystem::group_delay`] gives the
//! exact value from the circuit when one is at hand.

use std::f64::consts::TAU;

use super::{CircuitError, Response};

impl Response {
    /// 20 log10 |H| at each frequency (minus infinity where H = 0).
    pub fn db(&self) -> Vec<f64> {
        self.h.iter().map(|h| 20.0 * h.norm().log10()).collect()
    }

    /// Phase in degrees, unwrapped: the first point is in (-180, 180] and
    /// every later one differs from its predecessor by less than 180.
    pub fn phase_deg(&self) -> Vec<f64> {
        self.phase_rad().into_iter().map(f64::to_degrees).collect()
    }

    /// The unwrapped phase in radians.
    fn phase_rad(&self) -> Vec<f64> {
        let mut out: Vec<f64> = Vec::with_capacity(self.h.len());
        for h in &self.h {
            let raw = h.arg();
            let next = match out.last() {
                // Shift by whole turns to land within half a turn of the last.
                Some(&last) => raw + TAU * ((last - raw) / TAU).round(),
                None => raw,
            };
            out.push(next);
        }
        out
    }

    /// Group delay -d(phase)/d(omega), seconds, from the unwrapped phase by
    /// second-order finite differences on the (possibly non-uniform) grid:
    /// the three-point formula at interior points and at both ends (two
    /// points give the plain difference). Needs at least two finite,
    /// strictly ascending frequencies, and phase steps under 180 degrees
    /// between neighbours (a grid too coarse to unwrap gives garbage).
    pub fn group_delay_s(&self) -> Result<Vec<f64>, CircuitError> {
        self.check_grid()?;
        let w: Vec<f64> = self.freq_hz.iter().map(|f| TAU * f).collect();
        let phi = self.phase_rad();
        let n = w.len();
        let delay = (0..n)
            .map(|i| {
                if n == 2 {
                    return -(phi[1] - phi[0]) / (w[1] - w[0]);
                }
                // Three points around i (shifted inward at the ends).
                let j = i.clamp(1, n - 2);
                -three_point_slope(
                    [w[j - 1], w[j], w[j + 1]],
                    [phi[j - 1], phi[j], phi[j + 1]],
                    w[i],
                )
            })
            .collect();
        Ok(delay)
    }

    /// At least two points, finite and strictly ascending.
    fn check_grid(&self) -> Result<(), CircuitError> {
        if self.freq_hz.len() < 2 || self.h.len() != self.freq_hz.len() {
            return Err(CircuitError::BadResponseGrid {
                index: self.freq_hz.len().min(self.h.len()),
                freq_hz: f64::NAN,
            });
        }
        for (i, pair) in self.freq_hz.windows(2).enumerate() {
            if !(pair[0].is_finite() && pair[1].is_finite() && pair[1] > pair[0]) {
                return Err(CircuitError::BadResponseGrid {
                    index: i + 1,
                    freq_hz: pair[1],
                });
            }
        }
        Ok(())
    }
}

/// Derivative at `at` of the parabola through three points (Lagrange
/// form, differentiated).
fn three_point_slope(x: [f64; 3], y: [f64; 3], at: f64) -> f64 {
    let [x0, x1, x2] = x;
    let [y0, y1, y2] = y;
    y0 * (2.0 * at - x1 - x2) / ((x0 - x1) * (x0 - x2))
        + y1 * (2.0 * at - x0 - x2) / ((x1 - x0) * (x1 - x2))
        + y2 * (2.0 * at - x0 - x1) / ((x2 - x0) * (x2 - x1))
}

/// `points` frequencies from `from_hz` to `to_hz`, equally spaced in
/// log(f), both ends included exactly.
pub fn log_grid(from_hz: f64, to_hz: f64, points: usize) -> Result<Vec<f64>, CircuitError> {
    let finite = from_hz.is_finite() && to_hz.is_finite();
    if !(finite && from_hz > 0.0 && to_hz > from_hz && points >= 2) {
        return Err(CircuitError::BadGrid {
            from_hz,
            to_hz,
            points,
        });
    }
    let (a, b) = (from_hz.ln(), to_hz.ln());
    let last = points - 1;
    Ok((0..points)
        .map(|i| match i {
            0 => from_hz,
            i if i == last => to_hz,
            i => (a + (b - a) * i as f64 / last as f64).exp(),
        })
        .collect())
}

/// `points_each` frequencies of [`log_grid`] in each `[from, to]` band,
/// in order (a band kind's passbands, say); the first bad band is the
/// error.
pub fn band_grid(bands: &[[f64; 2]], points_each: usize) -> Result<Vec<f64>, CircuitError> {
    let mut grid = Vec::with_capacity(bands.len() * points_each);
    for &[from_hz, to_hz] in bands {
        grid.extend(log_grid(from_hz, to_hz, points_each)?);
    }
    Ok(grid)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A parabola's derivative is reproduced exactly by the three-point
    /// formula (it is exact for polynomials of degree 2).
    #[test]
    fn three_point_slope_is_exact_on_parabolas() {
        let p = |x: f64| 3.0 * x * x - 2.0 * x + 0.5;
        let dp = |x: f64| 6.0 * x - 2.0;
        let x = [0.3, 1.1, 2.9];
        let y = x.map(p);
        for at in x {
            assert!((three_point_slope(x, y, at) - dp(at)).abs() < 1e-12);
        }
    }

    #[test]
    fn unwrap_follows_a_steady_phase_ramp() {
        // Phase falling 100 degrees per point: wrapped values jump by 360.
        let r = Response {
            freq_hz: (1..=10).map(f64::from).collect(),
            h: (0..10)
                .map(|i| num_complex::Complex64::from_polar(1.0, -(i as f64) * 100f64.to_radians()))
                .collect(),
        };
        for (i, p) in r.phase_deg().iter().enumerate() {
            assert!((p + 100.0 * i as f64).abs() < 1e-9, "point {i}: {p}");
        }
    }
}
