//! The filter kind and its band edges, one type per kind, so that the
//! shape of every edge (one frequency, or a `[low, high]` pair) always
//! matches the kind, and the frequency mapping into the normalized
//! lowpass prototype follows from it.
//!
//! A [`Band`] is made only by [`Band::new`], which checks what a design
//! file or command-line flags give: every frequency finite and positive,
//! a pair ascending, the stopband on the stopping side of the passband.
//! Problems name a [`MaskField`]; each caller turns it into its own key
//! or flag name.

use crate::approx::{MAX_LEVEL_DB, MIN_RIPPLE_DB};

/// The kind of filter, as a design file and the command line name it.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Kind {
    /// Passes below the passband edge.
    Lowpass,
    /// Passes above the passband edge.
    Highpass,
    /// Passes between two edges.
    Bandpass,
    /// Stops between two edges.
    Bandstop,
}

impl Kind {
    /// Whether the kind takes `[low, high]` edges.
    pub fn is_band(self) -> bool {
        matches!(self, Kind::Bandpass | Kind::Bandstop)
    }
}

impl std::fmt::Display for Kind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Kind::Lowpass => "lowpass",
            Kind::Highpass => "highpass",
            Kind::Bandpass => "bandpass",
            Kind::Bandstop => "bandstop",
        })
    }
}

/// The band edges of one filter, Hz: the passband edge(s) and, when the
/// specification gives one, the stopband edge(s) of the same shape.
///
/// The frequency mapping (the classical reactance transformations, see
/// the module documentation of [`crate::transform`]) uses the passband
/// edges only.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Band {
    /// Passes below the passband edge.
    Lowpass {
        /// Passband edge, Hz.
        passband_edge_hz: f64,
        /// Stopband edge, Hz (above the passband edge).
        stopband_edge_hz: Option<f64>,
    },
    /// Passes above the passband edge.
    Highpass {
        /// Passband edge, Hz.
        passband_edge_hz: f64,
        /// Stopband edge, Hz (below the passband edge).
        stopband_edge_hz: Option<f64>,
    },
    /// Passes between the passband edges.
    Bandpass {
        /// Lower and upper passband edges, Hz.
        passband_edge_hz: [f64; 2],
        /// Lower and upper stopband edges, Hz (outside the passband).
        stopband_edge_hz: Option<[f64; 2]>,
    },
    /// Stops between the stopband edges, passes outside the passband
    /// edges.
    Bandstop {
        /// Lower and upper passband edges, Hz.
        passband_edge_hz: [f64; 2],
        /// Lower and upper stopband edges, Hz (inside the passband edges).
        stopband_edge_hz: Option<[f64; 2]>,
    },
}

/// A field of a mask.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MaskField {
    /// The passband edge(s).
    Passband,
    /// The stopband edge(s).
    Stopband,
    /// The passband ripple.
    Ripple,
    /// The stopband attenuation.
    Attenuation,
}

/// What is wrong with one field: the value as written and what would be
/// accepted.
#[derive(Debug, Clone, PartialEq)]
pub struct MaskProblem {
    /// The field.
    pub field: MaskField,
    /// The value as written.
    pub got: String,
    /// What would be accepted.
    pub expected: String,
}

/// Edges as written: `1000` or `[300, 3400]`.
fn show(edges: &[f64]) -> String {
    match edges {
        [f] => format!("{f}"),
        many => format!(
            "[{}]",
            many.iter()
                .map(f64::to_string)
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

/// The edge frequencies a design may name, Hz: from 1 mHz (the slowest
/// sensor-conditioning filters) to 100 MHz (far above any op-amp
/// filter). Outside it the scaled element values, 1 / (2 pi f R) farads
/// and R / (2 pi f) henries, run towards what a double cannot hold (an
/// edge of 5e-324 Hz gave an infinite capacitor); inside it, with
/// terminations in [`TERMINATION_RANGE_OHM`], they stay within about
/// 1e-20 to 1e20 (a choice of the project).
pub const FREQUENCY_RANGE_HZ: (f64, f64) = (1e-3, 1e8);

/// The terminations a design may name, ohm (see [`FREQUENCY_RANGE_HZ`]).
pub const TERMINATION_RANGE_OHM: (f64, f64) = (1e-3, 1e9);

/// The edges as given when their shape fits `kind` (one frequency for
/// lowpass and highpass, an ascending pair for a band kind), every
/// frequency within [`FREQUENCY_RANGE_HZ`].
fn edges(field: MaskField, kind: Kind, given: &[f64]) -> Result<Vec<f64>, MaskProblem> {
    let (lo, hi) = FREQUENCY_RANGE_HZ;
    let ok = |f: f64| (lo..=hi).contains(&f);
    let fits = match (kind.is_band(), given) {
        (false, &[f]) => ok(f),
        (true, &[lo, hi]) => ok(lo) && ok(hi) && lo < hi,
        _ => false,
    };
    if fits {
        return Ok(given.to_vec());
    }
    Err(MaskProblem {
        field,
        got: show(given),
        expected: if kind.is_band() {
            format!(
                "expected [low, high] in Hz with {lo:e} <= low < high <= {hi:e}, for a band kind"
            )
        } else {
            format!("expected one frequency in Hz from {lo:e} to {hi:e}, for a lowpass or highpass")
        },
    })
}

impl Band {
    /// The band of `kind` with these passband edges and, when given,
    /// stopband edges (one frequency for lowpass and highpass, `[low,
    /// high]` for the band kinds), checked as the module documentation
    /// says.
    pub fn new(
        kind: Kind,
        passband_hz: &[f64],
        stopband_hz: Option<&[f64]>,
    ) -> Result<Band, MaskProblem> {
        let p = edges(MaskField::Passband, kind, passband_hz)?;
        let s = match stopband_hz {
            Some(s) => Some(edges(MaskField::Stopband, kind, s)?),
            None => None,
        };
        // `edges` gave one frequency for lowpass and highpass, two for
        // the band kinds, so the indexing below stays in bounds.
        let pair = [p[0], p[p.len() - 1]];
        let stop_one = s.as_ref().map(|s| s[0]);
        let stop_pair = s.as_ref().map(|s| [s[0], s[s.len() - 1]]);
        let (band, sides_ok, expected) = match kind {
            Kind::Lowpass => (
                Band::Lowpass {
                    passband_edge_hz: p[0],
                    stopband_edge_hz: stop_one,
                },
                stop_one.is_none_or(|s| s > p[0]),
                format!(
                    "expected a stopband edge above the passband edge {} Hz",
                    p[0]
                ),
            ),
            Kind::Highpass => (
                Band::Highpass {
                    passband_edge_hz: p[0],
                    stopband_edge_hz: stop_one,
                },
                stop_one.is_none_or(|s| s < p[0]),
                format!(
                    "expected a stopband edge below the passband edge {} Hz",
                    p[0]
                ),
            ),
            Kind::Bandpass => (
                Band::Bandpass {
                    passband_edge_hz: pair,
                    stopband_edge_hz: stop_pair,
                },
                stop_pair.is_none_or(|[a, b]| a < p[0] && b > p[1]),
                format!(
                    "expected [low, high] outside the passband [{}, {}] Hz",
                    p[0], p[1]
                ),
            ),
            Kind::Bandstop => (
                Band::Bandstop {
                    passband_edge_hz: pair,
                    stopband_edge_hz: stop_pair,
                },
                stop_pair.is_none_or(|[a, b]| a > p[0] && b < p[1]),
                format!(
                    "expected [low, high] inside the passband edges [{}, {}] Hz",
                    p[0], p[1]
                ),
            ),
        };
        if sides_ok {
            Ok(band)
        } else {
            Err(MaskProblem {
                field: MaskField::Stopband,
                got: show(stopband_hz.unwrap_or_default()),
                expected,
            })
        }
    }

    /// The kind.
    pub fn kind(&self) -> Kind {
        match self {
            Band::Lowpass { .. } => Kind::Lowpass,
            Band::Highpass { .. } => Kind::Highpass,
            Band::Bandpass { .. } => Kind::Bandpass,
            Band::Bandstop { .. } => Kind::Bandstop,
        }
    }

    /// The passband edges, Hz, ascending.
    pub fn passband_edges_hz(&self) -> Vec<f64> {
        match *self {
            Band::Lowpass {
                passband_edge_hz: f,
                ..
            }
            | Band::Highpass {
                passband_edge_hz: f,
                ..
            } => vec![f],
            Band::Bandpass {
                passband_edge_hz: p,
                ..
            }
            | Band::Bandstop {
                passband_edge_hz: p,
                ..
            } => p.to_vec(),
        }
    }

    /// The stopband edges, Hz, ascending (empty without a stopband).
    pub fn stopband_edges_hz(&self) -> Vec<f64> {
        match *self {
            Band::Lowpass {
                stopband_edge_hz: s,
                ..
            }
            | Band::Highpass {
                stopband_edge_hz: s,
                ..
            } => s.into_iter().collect(),
            Band::Bandpass {
                stopband_edge_hz: s,
                ..
            }
            | Band::Bandstop {
                stopband_edge_hz: s,
                ..
            } => s.map(|p| p.to_vec()).unwrap_or_default(),
        }
    }

    /// Where the converters are balanced, Hz: at the passband edge, or
    /// the geometric centre of the two edges of a band kind, where the
    /// response is most sensitive to their error (a lossless ladder's
    /// sensitivity to its elements is bounded by its group delay, which
    /// peaks near the passband edges: Orchard, Temes and Cataltepe 1985,
    /// IEEE Trans. Circuits and Systems 32, from memory).
    pub fn balance_hz(&self) -> f64 {
        let edges = self.passband_edges_hz();
        edges.iter().product::<f64>().powf(1.0 / edges.len() as f64)
    }

    /// The frequency range worth looking at: a decade below the lowest
    /// edge to a decade above the highest, Hz.
    pub fn view_hz(&self) -> (f64, f64) {
        let all = self
            .passband_edges_hz()
            .into_iter()
            .chain(self.stopband_edges_hz());
        let (lo, hi) = all.fold((f64::INFINITY, 0.0_f64), |(lo, hi), f| {
            (lo.min(f), hi.max(f))
        });
        (lo / VIEW_DECADES, hi * VIEW_DECADES)
    }

    /// The passbands within `view` = (lo, hi), Hz, as `[from, to]`.
    pub fn passbands_hz(&self, (lo, hi): (f64, f64)) -> Vec<[f64; 2]> {
        match *self {
            Band::Lowpass {
                passband_edge_hz: f,
                ..
            } => vec![[lo, f]],
            Band::Highpass {
                passband_edge_hz: f,
                ..
            } => vec![[f, hi]],
            Band::Bandpass {
                passband_edge_hz: p,
                ..
            } => vec![p],
            Band::Bandstop {
                passband_edge_hz: [a, b],
                ..
            } => vec![[lo, a], [b, hi]],
        }
    }

    /// The stopbands within `view` = (lo, hi), Hz, as `[from, to]` (empty
    /// without a stopband edge).
    pub fn stopbands_hz(&self, (lo, hi): (f64, f64)) -> Vec<[f64; 2]> {
        match *self {
            Band::Lowpass {
                stopband_edge_hz: Some(s),
                ..
            } => vec![[s, hi.max(s)]],
            Band::Highpass {
                stopband_edge_hz: Some(s),
                ..
            } => vec![[lo.min(s), s]],
            Band::Bandpass {
                stopband_edge_hz: Some([a, b]),
                ..
            } => vec![[lo.min(a), a], [b, hi.max(b)]],
            Band::Bandstop {
                stopband_edge_hz: Some(s),
                ..
            } => vec![s],
            _ => Vec::new(),
        }
    }

    /// The normalized lowpass frequency (rad/s) that a real frequency (Hz)
    /// maps to, as a magnitude: the inverse of the substitution for `s`
    /// on the jw axis. Used to carry a mask into the prototype.
    pub fn normalized(&self, f_hz: f64) -> f64 {
        match *self {
            Band::Lowpass {
                passband_edge_hz: fp,
                ..
            } => f_hz / fp,
            Band::Highpass {
                passband_edge_hz: fp,
                ..
            } => fp / f_hz,
            Band::Bandpass {
                passband_edge_hz: [f1, f2],
                ..
            } => (f_hz * f_hz - f1 * f2).abs() / ((f2 - f1) * f_hz),
            Band::Bandstop {
                passband_edge_hz: [f1, f2],
                ..
            } => (f2 - f1) * f_hz / (f_hz * f_hz - f1 * f2).abs(),
        }
    }

    /// |dW/dw| of the substitution that [`Band::normalized`] inverts,
    /// seconds (normalized rad/s per real rad/s): a prototype's group
    /// delay at `normalized(f)` times this is the real filter's at `f`
    /// (the chain rule; for highpass and bandstop the conjugation the
    /// substitution brings cancels the sign).
    pub fn delay_factor_s(&self, f_hz: f64) -> f64 {
        let per_hz = match *self {
            Band::Lowpass {
                passband_edge_hz: fp,
                ..
            } => 1.0 / fp,
            Band::Highpass {
                passband_edge_hz: fp,
                ..
            } => fp / (f_hz * f_hz),
            Band::Bandpass {
                passband_edge_hz: [f1, f2],
                ..
            } => (f_hz * f_hz + f1 * f2) / ((f2 - f1) * f_hz * f_hz),
            Band::Bandstop {
                passband_edge_hz: [f1, f2],
                ..
            } => (f2 - f1) * (f1 * f2 + f_hz * f_hz) / (f1 * f2 - f_hz * f_hz).powi(2),
        };
        per_hz / std::f64::consts::TAU
    }

    /// The normalized lowpass stopband edge the mask asks for (rad/s): the
    /// nearer of the two transformed edges for band kinds; `None` without
    /// a stopband.
    pub fn normalized_stopband(&self) -> Option<f64> {
        self.stopband_edges_hz()
            .into_iter()
            .map(|f| self.normalized(f))
            .reduce(f64::min)
    }

    /// The real frequencies (Hz, ascending) that map to the normalized
    /// frequency `w` > 0: one for lowpass and highpass, the pair around
    /// the geometric centre f0 for the band kinds (their product is f0^2).
    pub fn frequencies_hz(&self, w: f64) -> Vec<f64> {
        // Band kinds: f^2 - f0^2 = +-(B w) f (bandpass) or +-(B / w) f
        // (bandstop); the positive roots are f = (d + sqrt(d^2 + 4 f0^2)) / 2
        // and f0^2 divided by it.
        let pair = |[f1, f2]: [f64; 2], d: f64| {
            let f0sq = f1 * f2;
            let hi = (d + (d * d + 4.0 * f0sq).sqrt()) / 2.0;
            vec![f0sq / hi, hi]
        };
        match *self {
            Band::Lowpass {
                passband_edge_hz: fp,
                ..
            } => vec![w * fp],
            Band::Highpass {
                passband_edge_hz: fp,
                ..
            } => vec![fp / w],
            Band::Bandpass {
                passband_edge_hz: p,
                ..
            } => pair(p, (p[1] - p[0]) * w),
            Band::Bandstop {
                passband_edge_hz: p,
                ..
            } => pair(p, (p[1] - p[0]) / w),
        }
    }
}

/// How far beyond the outermost edges the view reaches, as a frequency
/// ratio: a decade shows the whole transition of any family this crate
/// builds and the stopband beyond it.
const VIEW_DECADES: f64 = 10.0;

/// Ripple and attenuation in dB: within what the approximation accepts
/// ([`MIN_RIPPLE_DB`] to [`MAX_LEVEL_DB`]), attenuation above ripple.
pub fn check_levels(ripple_db: f64, attenuation_db: Option<f64>) -> Result<(), MaskProblem> {
    if !(MIN_RIPPLE_DB..=MAX_LEVEL_DB).contains(&ripple_db) {
        return Err(MaskProblem {
            field: MaskField::Ripple,
            got: ripple_db.to_string(),
            expected: format!("expected a ripple in dB greater than 0 and at most {MAX_LEVEL_DB}"),
        });
    }
    match attenuation_db {
        Some(a) if !(a > ripple_db && a <= MAX_LEVEL_DB) => Err(MaskProblem {
            field: MaskField::Attenuation,
            got: a.to_string(),
            expected: format!(
                "expected an attenuation in dB greater than the passband ripple ({ripple_db} dB) and at most {MAX_LEVEL_DB}"
            ),
        }),
        _ => Ok(()),
    }
}
