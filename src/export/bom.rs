//! The bill of materials as CSV: one row per orderable part (same kind,
//! value, series, tolerance and stage), for the passive ideal and the
//! active on parts build, so the two can be compared side by side.
//!
//! [`bom_csv`], [`group_rows`] and [`tally`] are generic: a row is plain
//! data. [`design_rows`] makes the rows of a design's documents. Invariants of what [`bom_csv`] writes: the header is
//! [`HEADER`]; each row's quantity equals its number of designators; the
//! `value` column is engineering notation for people ("10.2 kohm") and
//! `value_si` the same number in the base unit for programs, written so
//! that it parses back to the identical f64.

/// Column names, in order. The first nine are the trade's; `value_si` is
/// the value as a plain number in the base unit (ohm, F), for
/// spreadsheets that sort or sum.
pub const HEADER: [&str; 10] = [
    "build",
    "designator",
    "kind",
    "value",
    "unit",
    "series",
    "tolerance",
    "count",
    "stage",
    "value_si",
];

use crate::active::Stage;
use crate::circuit::{Element, ElementKind, Netlist};
use crate::design::{Build, Report};
use crate::realize::{trimmer_designator, TRIMMER_SERIES};

/// One line of the bill of materials.
#[derive(Debug, Clone, PartialEq)]
pub struct BomRow {
    /// Reference designators ("R1", "C3"), written space-separated.
    pub designators: Vec<String>,
    /// What the part is ("resistor", "capacitor", "op-amp", ...).
    pub kind: String,
    /// Value in `unit`, finite and > 0 (an op-amp's can be its
    /// gain-bandwidth product in Hz).
    pub value: f64,
    /// Base unit of `value` ("ohm", "F", "Hz").
    pub unit: String,
    /// Preferred-number series the value was taken from ("E96"), if any.
    pub series: Option<String>,
    /// Tolerance as a fraction (0.01 for 1 %), if stated.
    pub tolerance: Option<f64>,
    /// How many are needed: the number of designators.
    pub quantity: usize,
    /// The stage (section, converter) the parts belong to.
    pub stage: String,
    /// Which build: "passive_ideal" or "active_on_parts".
    pub build: String,
}

/// Why no bill of materials was written.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum BomError {
    /// A row's quantity differs from its number of designators.
    #[error("BOM row {designators:?} ({kind}): quantity {quantity} but {} designators; the quantity must equal the number of designators", designators.len())]
    Quantity {
        /// The row's designators.
        designators: Vec<String>,
        /// The row's kind.
        kind: String,
        /// The quantity given.
        quantity: usize,
    },
    /// A value is not finite and positive.
    #[error("BOM row {designators:?} ({kind}): value {value} {unit}; need a finite value > 0")]
    Value {
        /// The row's designators.
        designators: Vec<String>,
        /// The row's kind.
        kind: String,
        /// The value given.
        value: f64,
        /// Its unit.
        unit: String,
    },
    /// A tolerance is not a finite fraction in [0, 1).
    #[error("BOM row {designators:?} ({kind}): tolerance {tolerance}; need a fraction from 0 to below 1 (0.01 for 1 %)")]
    Tolerance {
        /// The row's designators.
        designators: Vec<String>,
        /// The row's kind.
        kind: String,
        /// The tolerance given.
        tolerance: f64,
    },
    /// The CSV writer failed.
    #[error("writing the BOM as CSV: {0}")]
    Csv(#[from] csv::Error),
}

/// The rows as CSV text with the [`HEADER`] line, in the order given.
pub fn bom_csv(rows: &[BomRow]) -> Result<String, BomError> {
    let mut writer = csv::Writer::from_writer(Vec::new());
    writer.write_record(HEADER)?;
    for row in rows {
        check(row)?;
        writer.write_record(record(row))?;
    }
    let bytes = writer
        .into_inner()
        .map_err(|e| BomError::Csv(e.into_error().into()))?;
    // Every field was built from Rust strings, so the bytes are UTF-8.
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}

fn check(row: &BomRow) -> Result<(), BomError> {
    if row.quantity != row.designators.len() {
        return Err(BomError::Quantity {
            designators: row.designators.clone(),
            kind: row.kind.clone(),
            quantity: row.quantity,
        });
    }
    if !(row.value.is_finite() && row.value > 0.0) {
        return Err(BomError::Value {
            designators: row.designators.clone(),
            kind: row.kind.clone(),
            value: row.value,
            unit: row.unit.clone(),
        });
    }
    match row.tolerance {
        Some(tolerance) if !(0.0..1.0).contains(&tolerance) => Err(BomError::Tolerance {
            designators: row.designators.clone(),
            kind: row.kind.clone(),
            tolerance,
        }),
        _ => Ok(()),
    }
}

/// The fields of one row, in [`HEADER`] order.
fn record(row: &BomRow) -> [String; 10] {
    [
        row.build.clone(),
        row.designators.join(" "),
        row.kind.clone(),
        super::eng::format_trimmed(row.value, &row.unit),
        row.unit.clone(),
        row.series.clone().unwrap_or_default(),
        row.tolerance.map(percent).unwrap_or_default(),
        row.quantity.to_string(),
        row.stage.clone(),
        // Rust's shortest round-trip form: parses back to the same f64.
        format!("{:e}", row.value),
    ]
}

/// A tolerance fraction as a percentage with at most 3 decimals and no
/// trailing zeros: 0.01 -> "1%", 0.005 -> "0.5%".
fn percent(fraction: f64) -> String {
    let text = format!("{:.3}", fraction * 100.0);
    format!("{}%", text.trim_end_matches('0').trim_end_matches('.'))
}

/// What makes two parts the same order line: the build, kind, printed
/// value with unit, series, printed tolerance and stage. Values compare as
/// printed (5 significant digits) because that is what is bought: two
/// computed values equal to 5 digits are one part.
fn identity(row: &BomRow) -> [String; 5] {
    [
        row.build.clone(),
        row.kind.clone(),
        super::eng::format_trimmed(row.value, &row.unit),
        format!(
            "{}|{}",
            row.series.clone().unwrap_or_default(),
            row.tolerance.map(percent).unwrap_or_default()
        ),
        row.stage.clone(),
    ]
}

/// Merges rows of identical parts (same build, kind, printed value and
/// unit, series, printed tolerance and stage) into one row each, in the
/// order each part first appears. Designators are concatenated and sorted
/// the way people number them (R2 before R10); quantities add up; the value
/// kept is the first row's.
pub fn group_rows(rows: &[BomRow]) -> Vec<BomRow> {
    let mut grouped: Vec<([String; 5], BomRow)> = Vec::new();
    for row in rows {
        let key = identity(row);
        match grouped.iter_mut().find(|(k, _)| *k == key) {
            Some((_, merged)) => {
                merged.designators.extend(row.designators.iter().cloned());
                merged.quantity += row.quantity;
            }
            None => grouped.push((key, row.clone())),
        }
    }
    grouped
        .into_iter()
        .map(|(_, mut row)| {
            row.designators.sort_by_key(|d| designator_key(d));
            row
        })
        .collect()
}

/// Sort key of a designator: its letters, then its number as a number,
/// then the rest ("R10" -> ("R", 10, "")).
fn designator_key(designator: &str) -> (String, u64, String) {
    let letters: String = designator
        .chars()
        .take_while(|c| !c.is_ascii_digit())
        .collect();
    let rest = &designator[letters.len()..];
    let digits: String = rest.chars().take_while(char::is_ascii_digit).collect();
    let number = digits.parse().unwrap_or(0);
    (letters, number, rest[digits.len()..].to_string())
}

/// Count and value spread of one kind of part in one build.
#[derive(Debug, Clone, PartialEq)]
pub struct KindTally {
    /// The build.
    pub build: String,
    /// The kind of part.
    pub kind: String,
    /// Total quantity.
    pub quantity: usize,
    /// Smallest value, in the kind's unit.
    pub min_value: f64,
    /// Largest value.
    pub max_value: f64,
}

impl KindTally {
    /// Largest over smallest value: the capacitor spread a designer
    /// compares between builds.
    pub fn spread(&self) -> f64 {
        self.max_value / self.min_value
    }
}

/// Quantity and value range of every (build, kind), in order of first
/// appearance: the side-by-side comparison of builds (op-amp count,
/// capacitor count and spread).
pub fn tally(rows: &[BomRow]) -> Vec<KindTally> {
    let mut tallies: Vec<KindTally> = Vec::new();
    for row in rows {
        let found = tallies
            .iter_mut()
            .find(|t| t.build == row.build && t.kind == row.kind);
        match found {
            Some(t) => {
                t.quantity += row.quantity;
                t.min_value = t.min_value.min(row.value);
                t.max_value = t.max_value.max(row.value);
            }
            None => tallies.push(KindTally {
                build: row.build.clone(),
                kind: row.kind.clone(),
                quantity: row.quantity,
                min_value: row.value,
                max_value: row.value,
            }),
        }
    }
    tallies
}

/// The bill of materials of a design, identical parts grouped: the
/// passive ideal's parts (ideal values, no series), then the active on
/// parts build's, each trim as two rows (its fixed resistor from the
/// resistor series, and the trimmer with its nominal value), each op-amp
/// with its gain-bandwidth.
pub fn design_rows(
    report: &Report,
    passive_ideal: &Netlist,
    on_parts: &Netlist,
    stages: &[Stage],
) -> Vec<BomRow> {
    let mut rows = Vec::new();
    let stage_of = |name: &str| {
        stages
            .iter()
            .find(|s| s.elements.iter().chain(&s.opamps).any(|e| e == name))
            .map(|s| match &s.replaces {
                Some(r) => format!("{} {r}", s.kind),
                None => s.kind.to_string(),
            })
            .unwrap_or_else(|| "ladder".to_string())
    };
    let row = |build: Build, designator: &str, kind: &str, value: f64, unit: &str| BomRow {
        designators: vec![designator.to_string()],
        kind: kind.to_string(),
        value,
        unit: unit.to_string(),
        series: None,
        tolerance: None,
        quantity: 1,
        stage: "ladder".to_string(),
        build: crate::spec::as_written(&build),
    };
    for e in &passive_ideal.elements {
        let (kind, unit) = match e.kind() {
            ElementKind::Resistor => ("resistor", "ohm"),
            ElementKind::Capacitor => ("capacitor", "F"),
            ElementKind::Inductor => ("inductor", "H"),
            _ => continue,
        };
        if let Some(v) = e.value() {
            rows.push(row(Build::PassiveIdeal, e.name(), kind, v, unit));
        }
    }
    let Some(active) = &report.active else {
        return group_rows(&rows);
    };
    let p = &active.parts;
    let built = Build::ActiveOnParts;
    for e in &on_parts.elements {
        let stage = stage_of(e.name());
        let trim = active.trims.iter().find(|t| t.element == e.name());
        let mut part = match (e, trim) {
            (_, Some(t)) => {
                rows.push(BomRow {
                    series: Some(TRIMMER_SERIES.to_string()),
                    stage: stage.clone(),
                    ..row(
                        built,
                        &trimmer_designator(&t.element),
                        "trimmer",
                        t.pot_ohm,
                        "ohm",
                    )
                });
                BomRow {
                    series: Some(p.resistor_series.to_string()),
                    tolerance: Some(p.resistor_tolerance),
                    ..row(built, e.name(), "resistor", t.fixed_ohm, "ohm")
                }
            }
            (Element::Resistor { ohm, .. }, None) => BomRow {
                series: Some(p.resistor_series.to_string()),
                tolerance: Some(p.resistor_tolerance),
                ..row(built, e.name(), "resistor", *ohm, "ohm")
            },
            (Element::Capacitor { farad, .. }, None) => BomRow {
                series: Some(p.capacitor_series.to_string()),
                tolerance: Some(p.capacitor_tolerance),
                ..row(built, e.name(), "capacitor", *farad, "F")
            },
            // An op-amp of a finite-bandwidth model is bought by its GBW
            // (the report states the rest of the model); the nullor names
            // no part.
            (Element::OpAmp { model, .. }, None) => match model.gbw_hz() {
                Some(gbw_hz) => row(built, e.name(), "op-amp", gbw_hz, "Hz GBW"),
                None => continue,
            },
            _ => continue,
        };
        part.stage = stage;
        rows.push(part);
    }
    group_rows(&rows)
}
