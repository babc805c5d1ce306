//! The scipy.signal end-to-end cases shared by the pipeline and active
//! tests (tests/fixtures/scipy_responses.json and the responses of
//! tests/fixtures/scipy_families.json).

use nocoil::design::{design, Design};
use nocoil::spec::Spec;
use serde::Deserialize;
use std::path::Path;

/// tests/fixtures/scipy_responses.json, written by gen_scipy_responses.py.
#[derive(Deserialize)]
pub struct Fixture {
    /// The scipy version that made it.
    pub scipy: String,
    /// The cases.
    pub cases: Vec<Case>,
}

/// One end-to-end case: scipy.signal prototype, transform and freqs_zpk,
/// plus the flat loss of the terminations.
#[derive(Deserialize)]
pub struct Case {
    pub kind: String,
    pub family: String,
    pub order: usize,
    pub ripple_db: f64,
    pub attenuation_db: Option<f64>,
    pub edges_hz: Vec<f64>,
    pub source_ohm: f64,
    pub load_ohm: f64,
    pub variant: String,
    pub flat_db: f64,
    pub freq_hz: Vec<f64>,
    pub ref_db: Vec<f64>,
}

impl Case {
    pub fn name(&self) -> String {
        format!(
            "{} {} n={} Ap={} As={:?} r={}",
            self.kind,
            self.family,
            self.order,
            self.ripple_db,
            self.attenuation_db,
            self.load_ohm / self.source_ohm
        )
    }

    /// The design file a user would write for this case.
    pub fn toml(&self) -> String {
        let edges = match self.edges_hz.as_slice() {
            [f] => format!("{f:?}"),
            [a, b] => format!("[{a:?}, {b:?}]"),
            other => panic!("fixture edges {other:?}"),
        };
        let attenuation = self
            .attenuation_db
            .map(|a| format!("stopband_attenuation_db = {a:?}\n"))
            .unwrap_or_default();
        format!(
            "[filter]\nkind = \"{}\"\nfamily = \"{}\"\norder = {}\npassband_edge_hz = {edges}\n\
             passband_ripple_db = {:?}\n{attenuation}[terminations]\nsource_ohm = {:?}\nload_ohm = {:?}\n",
            self.kind, self.family, self.order, self.ripple_db, self.source_ohm, self.load_ohm
        )
    }

    pub fn design(&self) -> Design {
        let spec = Spec::from_toml(Path::new("fixture.toml"), &self.toml())
            .unwrap_or_else(|e| panic!("{}: {e}", self.name()));
        design(&spec).unwrap_or_else(|e| panic!("{}: {e}", self.name()))
    }
}

/// Below this the reference (and any physical measurement) is noise.
pub const REFERENCE_FLOOR_DB: f64 = -80.0;

impl Case {
    /// Asserts that `got_db` (at the case's frequencies) matches the scipy
    /// reference plus the terminations' flat loss within `tol_db` wherever
    /// the reference is above [`REFERENCE_FLOOR_DB`]; returns the worst
    /// difference. `context` names the build in a failure.
    pub fn worst_against_scipy(&self, got_db: &[f64], tol_db: f64, context: &str) -> f64 {
        assert_eq!(
            got_db.len(),
            self.freq_hz.len(),
            "{context}: one value per fixture frequency"
        );
        let mut worst: f64 = 0.0;
        for ((f, r), g) in self.freq_hz.iter().zip(&self.ref_db).zip(got_db) {
            if *r > REFERENCE_FLOOR_DB {
                let expected = r + self.flat_db;
                let err = (g - expected).abs();
                assert!(
                    err <= tol_db,
                    "{context} at {f} Hz: scipy gives {expected:.6} dB, got {g:.6} dB"
                );
                worst = worst.max(err);
            }
        }
        worst
    }
}

/// Reads the fixtures: tests/fixtures/scipy_responses.json (Butterworth,
/// Chebyshev, elliptic) and the responses of
/// tests/fixtures/scipy_families.json (Bessel, inverse Chebyshev), made by
/// the same scipy, as one set of cases.
pub fn fixture() -> Fixture {
    let read = |name: &str| {
        let path = Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("tests/fixtures")
            .join(name);
        std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
    };
    let mut fx: Fixture =
        serde_json::from_str(&read("scipy_responses.json")).expect("fixture parses");
    let families: Families =
        serde_json::from_str(&read("scipy_families.json")).expect("fixture parses");
    assert_eq!(
        families.scipy, fx.scipy,
        "both fixtures come from one scipy"
    );
    fx.cases.extend(families.responses);
    fx
}

/// The end-to-end part of tests/fixtures/scipy_families.json.
#[derive(Deserialize)]
struct Families {
    scipy: String,
    responses: Vec<Case>,
}
