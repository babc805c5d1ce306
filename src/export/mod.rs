//! Rendering: every output a person or a program reads, driven by the
//! plain report data of [`crate::design`] ([`crate::design::Documents`]):
//! the printed summary, SPICE decks, the JSON report, CSV tables, charts
//! (SVG, PNG), the bill of materials and the HTML report, and the atomic
//! writing of an output set. Nothing here computes a filter; nothing but
//! the binary imports this module.
//!
//! - `prose`: the typed notes and reasons in words, once.
//! - `summary`: the text `nocoil design` prints.
//! - `tables`: sensitivity, level, envelope and order tables.
//! - `csv`: long numeric tables, fast and round-tripping; `sweep`: the
//!   sweep table, streamed block by block.
//! - `charts`: the charts of a design, as [`plot::Chart`] data.
//! - `search`: a design for yield's margins, outcome and candidates.
//! - `page`: the HTML report of a design, through [`html`].
//! - `files`: every file of an output set, in memory first.

pub mod bom;
pub mod charts;
pub mod csv;
pub mod eng;
pub mod files;
pub mod html;
pub mod page;
pub mod plot;
pub mod prose;
pub mod search;
pub mod spice;
pub mod summary;
pub mod sweep;
pub mod tables;
