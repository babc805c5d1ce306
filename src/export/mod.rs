//! Outputs: SPICE netlists, the JSON report, engineering notation, charts
//! (SVG, PNG), the bill of materials (CSV) and the HTML report.

pub mod bom;
pub mod eng;
pub mod html;
pub mod plot;
pub mod spice;
