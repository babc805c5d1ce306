//! Frequency-response charts as SVG (always) and PNG (where a TrueType
//! font can be loaded at run time): traces over frequency, the forbidden
//! regions of a specification mask, and an envelope band around a median.
//!
//! The writer is generic: it takes plain data ([`Chart`]) and knows
//! nothing of filters. Invariants:
//! - Plotters lays out nothing here. Every text is placed by this module
//!   at computed pixel positions, because plotters' own layout (captions,
//!   mesh labels, legends) measures text with a loaded font, and an SVG
//!   must not need one: its text stays `<text>` for the viewer to render.
//! - Every line and area is clipped to the plot rectangle
//!   (module `clip`); non-finite samples are drawn at the frame (NaN and -inf
//!   at the bottom, +inf at the top), so a transmission zero evaluated as
//!   -inf or -300 dB reaches the bottom of the chart.
//! - Frequencies of a trace or band are finite and strictly increasing
//!   (and > 0 on a log axis); anything else is a [`PlotError`], never a
//!   panic.

mod axis;
mod clip;
mod draw;

use std::path::PathBuf;
use std::sync::OnceLock;

use plotters::prelude::*;

use axis::Axis;

/// Smallest chart accepted: below this the labels overlap the plot.
pub const MIN_SIZE: (u32, u32) = (320, 200);

/// Largest side accepted: a 4096 x 4096 RGB buffer is 48 MiB, and no
/// report needs more.
pub const MAX_SIDE: u32 = 4096;

/// Font family name used for all text. In an SVG it is the CSS generic
/// family, which every viewer maps to a font it has; for PNG the font
/// file found at run time is registered under this name.
pub const FONT_FAMILY: &str = "sans-serif";

/// Where a TrueType font is looked for, in order, for PNG output: the
/// standard locations of Debian's `fonts-dejavu-core`,
/// `fonts-liberation`, `fonts-freefont-ttf` and `fonts-noto-core`.
pub const FONT_CANDIDATES: [&str; 4] = [
    "/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf",
    "/usr/share/fonts/truetype/liberation/LiberationSans-Regular.ttf",
    "/usr/share/fonts/truetype/freefont/FreeSans.ttf",
    "/usr/share/fonts/truetype/noto/NotoSans-Regular.ttf",
];

/// Trace colours (RGB), in order; trace `i` takes entry `i % 8`. Chosen
/// to stay apart in print and for the common colour-vision deficiencies
/// (blue and orange first, for the two builds overlaid).
pub const PALETTE: [(u8, u8, u8); 8] = [
    (0, 90, 181),
    (220, 110, 0),
    (0, 140, 70),
    (180, 30, 60),
    (110, 60, 170),
    (120, 85, 40),
    (0, 150, 170),
    (90, 90, 90),
];

/// Colour (RGB) of the specification limits: drawn opaque along each
/// limit, and as a light tint over the forbidden region.
pub const MASK_COLOR: (u8, u8, u8) = (200, 40, 40);

/// One curve over the chart's x axis (frequency, or time on a step
/// chart).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Trace {
    /// Legend text.
    pub label: String,
    /// The x values in the axis's unit (Hz on a frequency chart): finite,
    /// strictly increasing (> 0 on a log axis).
    pub x: Vec<f64>,
    /// One value per x, in the chart's y unit. NaN and -inf are
    /// drawn at the bottom of the chart, +inf at the top.
    pub values: Vec<f64>,
    /// Dashed instead of solid, so two nearly equal curves overlaid (a
    /// passive and an active build) both stay visible.
    pub dashed: bool,
}

/// A forbidden region of the specification mask over a frequency span:
/// the response must stay at or above `min_db` and at or below `max_db`
/// there; the chart shades what lies outside.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MaskBox {
    /// Start, Hz (0 and values below the axis reach the left edge).
    pub from_hz: f64,
    /// End, Hz, > start (`f64::INFINITY` reaches the right edge).
    pub to_hz: f64,
    /// Lowest allowed value (shaded below), in the chart's y unit.
    pub min_db: Option<f64>,
    /// Highest allowed value (shaded above), in the chart's y unit.
    pub max_db: Option<f64>,
}

/// An envelope (a Monte Carlo spread): the area between `min` and `max`
/// is shaded and `median` drawn as a line.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Band {
    /// Legend text; the legend shows "`label` median" and
    /// "`label` min to max".
    pub label: String,
    /// The x values, as for [`Trace::x`].
    pub x: Vec<f64>,
    /// Lower envelope, one value per frequency.
    pub min: Vec<f64>,
    /// Median, one value per frequency.
    pub median: Vec<f64>,
    /// Upper envelope, one value per frequency.
    pub max: Vec<f64>,
}

/// Everything one chart shows.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Chart {
    /// Title above the plot.
    pub title: String,
    /// X axis label, with its unit: "frequency (Hz)". Tick labels are
    /// engineering notation without unit ("1k", "10k").
    pub x_label: String,
    /// Y axis label, with its unit: "magnitude (dB)".
    pub y_label: String,
    /// Logarithmic frequency axis (labelled at decades when the range
    /// spans two or more).
    pub log_x: bool,
    /// Curves, colours from a fixed palette in this order; dashed curves
    /// are drawn first, solid ones over them.
    pub traces: Vec<Trace>,
    /// Forbidden regions of the specification mask.
    pub mask: Vec<MaskBox>,
    /// Envelope drawn under the traces.
    pub band: Option<Band>,
    /// Frequency range, Hz; `None` spans the data.
    pub x_range: Option<(f64, f64)>,
    /// Y range; `None` spans the finite data and the mask limits. Give it
    /// for a magnitude with transmission zeros, whose -300 dB or -inf
    /// samples would otherwise squash the interesting part.
    pub y_range: Option<(f64, f64)>,
}

/// Why a chart was not drawn.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum PlotError {
    /// The image size is outside [`MIN_SIZE`] to [`MAX_SIDE`].
    #[error("chart size {width} x {height} px: need at least {} x {} px and at most {MAX_SIDE} px a side", MIN_SIZE.0, MIN_SIZE.1)]
    Size {
        /// Width asked for.
        width: u32,
        /// Height asked for.
        height: u32,
    },
    /// A trace or band has a different number of values and frequencies.
    #[error(
        "{series:?}: {freq_len} frequencies but {values_len} values; need one value per frequency"
    )]
    Length {
        /// Label of the trace or band.
        series: String,
        /// Number of frequencies.
        freq_len: usize,
        /// Number of values (of the first mismatching column of a band).
        values_len: usize,
    },
    /// An x value is not finite, not increasing, or not positive on a
    /// log axis.
    #[error("{series:?}: x value {x} at index {index}: need finite, strictly increasing x values, > 0 on a log axis")]
    Frequency {
        /// Label of the trace or band.
        series: String,
        /// Index of the offending value.
        index: usize,
        /// The offending value.
        x: f64,
    },
    /// No trace or band has a point.
    #[error("chart {title:?} has nothing to draw: need a trace or band with at least one point")]
    Empty {
        /// Title of the chart.
        title: String,
    },
    /// An axis range is not usable.
    #[error(
        "{axis} range {from} to {to}: need finite ends with from < to, from > 0 on a log axis"
    )]
    Range {
        /// "x" or "y".
        axis: &'static str,
        /// Low end given.
        from: f64,
        /// High end given.
        to: f64,
    },
    /// A mask box has a NaN end, an empty span or a non-finite limit.
    #[error("mask box {index} from {from_hz} Hz to {to_hz} Hz (limits {min_db:?}, {max_db:?}): need from < to and finite limits")]
    Mask {
        /// Index in [`Chart::mask`].
        index: usize,
        /// Start given.
        from_hz: f64,
        /// End given.
        to_hz: f64,
        /// Lower limit given.
        min_db: Option<f64>,
        /// Upper limit given.
        max_db: Option<f64>,
    },
    /// The plotting backend failed.
    #[error("drawing the chart: {0}")]
    Draw(String),
    /// The PNG encoder failed.
    #[error("encoding the PNG: {0}")]
    Encode(String),
}

/// What [`png()`] produced.
#[derive(Debug, Clone, PartialEq)]
pub enum PngOutput {
    /// The encoded image, drawn with the font at `font`.
    Image {
        /// PNG file contents.
        bytes: Vec<u8>,
        /// The TrueType font used for the text.
        font: PathBuf,
    },
    /// No usable font was found: no PNG, and not an error (the SVG has
    /// the same content).
    NoFont {
        /// The paths tried, in order.
        searched: Vec<PathBuf>,
    },
}

/// The chart as a standalone SVG document (with a `viewBox`, so it scales
/// when inlined in HTML).
pub fn svg(chart: &Chart, width: u32, height: u32) -> Result<String, PlotError> {
    let frame = Frame::new(chart, width, height)?;
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, (width, height)).into_drawing_area();
        draw::render(&root, chart, &frame)?;
        root.present().map_err(draw::backend_error)?;
    }
    Ok(out)
}

/// The chart as a PNG image, or [`PngOutput::NoFont`] when none of
/// [`FONT_CANDIDATES`] can be loaded. The chart is checked first, so bad
/// data is an error with or without a font.
pub fn png(chart: &Chart, width: u32, height: u32) -> Result<PngOutput, PlotError> {
    let frame = Frame::new(chart, width, height)?;
    let Some(font) = font() else {
        return Ok(PngOutput::NoFont {
            searched: FONT_CANDIDATES.iter().map(PathBuf::from).collect(),
        });
    };
    let mut rgb = vec![0u8; width as usize * height as usize * 3];
    {
        let root = BitMapBackend::with_buffer(&mut rgb, (width, height)).into_drawing_area();
        draw::render(&root, chart, &frame)?;
        root.present().map_err(draw::backend_error)?;
    }
    Ok(PngOutput::Image {
        bytes: encode_rgb(&rgb, width, height)?,
        font: font.clone(),
    })
}

/// RGB8 pixels as PNG.
fn encode_rgb(rgb: &[u8], width: u32, height: u32) -> Result<Vec<u8>, PlotError> {
    let encode_error = |e: ::png::EncodingError| PlotError::Encode(e.to_string());
    let mut bytes = Vec::new();
    let mut encoder = ::png::Encoder::new(&mut bytes, width, height);
    encoder.set_color(::png::ColorType::Rgb);
    encoder.set_depth(::png::BitDepth::Eight);
    let mut writer = encoder.write_header().map_err(encode_error)?;
    writer.write_image_data(rgb).map_err(encode_error)?;
    writer.finish().map_err(encode_error)?;
    Ok(bytes)
}

/// The font registered for PNG text, searched once per process.
fn font() -> Option<&'static PathBuf> {
    static FONT: OnceLock<Option<PathBuf>> = OnceLock::new();
    FONT.get_or_init(|| register_first(&FONT_CANDIDATES))
        .as_ref()
}

/// Registers the first candidate that reads and parses as a font under
/// [`FONT_FAMILY`], and returns its path.
fn register_first(candidates: &[&str]) -> Option<PathBuf> {
    candidates.iter().find_map(|path| {
        let bytes = std::fs::read(path).ok()?;
        // Plotters keeps registered fonts for the life of the process and
        // wants them 'static: the file is leaked once (it is registered
        // once per process through `font`).
        let bytes: &'static [u8] = Box::leak(bytes.into_boxed_slice());
        plotters::style::register_font(FONT_FAMILY, FontStyle::Normal, bytes).ok()?;
        Some(PathBuf::from(path))
    })
}

/// A checked chart with its axes.
#[derive(Debug, Clone, PartialEq)]
struct Frame {
    width: u32,
    height: u32,
    x: Axis,
    y: Axis,
}

impl Frame {
    fn new(chart: &Chart, width: u32, height: u32) -> Result<Frame, PlotError> {
        let fits = |v: u32, min: u32| (min..=MAX_SIDE).contains(&v);
        if !fits(width, MIN_SIZE.0) || !fits(height, MIN_SIZE.1) {
            return Err(PlotError::Size { width, height });
        }
        let series = series(chart)?;
        check_mask(&chart.mask)?;
        let x = x_axis(chart, &series)?;
        let y = y_axis(chart, &series)?;
        Ok(Frame {
            width,
            height,
            x,
            y,
        })
    }
}

/// A trace or band column: (label, frequencies, values).
type Series<'a> = (&'a str, &'a [f64], &'a [f64]);

/// Every trace and band column, checked.
fn series(chart: &Chart) -> Result<Vec<Series<'_>>, PlotError> {
    let mut all: Vec<Series<'_>> = chart
        .traces
        .iter()
        .map(|t| (t.label.as_str(), &t.x[..], &t.values[..]))
        .collect();
    if let Some(b) = &chart.band {
        for column in [&b.min, &b.median, &b.max] {
            all.push((b.label.as_str(), &b.x[..], &column[..]));
        }
    }
    for &(label, freq, values) in &all {
        check_series(label, freq, values, chart.log_x)?;
    }
    if all.iter().all(|(_, f, _)| f.is_empty()) {
        return Err(PlotError::Empty {
            title: chart.title.clone(),
        });
    }
    Ok(all)
}

fn check_series(label: &str, freq: &[f64], values: &[f64], log_x: bool) -> Result<(), PlotError> {
    if freq.len() != values.len() {
        return Err(PlotError::Length {
            series: label.to_string(),
            freq_len: freq.len(),
            values_len: values.len(),
        });
    }
    let bad = freq
        .iter()
        .enumerate()
        .find(|&(i, &f)| !f.is_finite() || (log_x && f <= 0.0) || (i > 0 && f <= freq[i - 1]));
    match bad {
        Some((index, &x)) => Err(PlotError::Frequency {
            series: label.to_string(),
            index,
            x,
        }),
        None => Ok(()),
    }
}

fn check_mask(mask: &[MaskBox]) -> Result<(), PlotError> {
    let finite = |limit: Option<f64>| limit.is_none_or(f64::is_finite);
    match mask.iter().enumerate().find(|(_, m)| {
        m.from_hz.partial_cmp(&m.to_hz) != Some(std::cmp::Ordering::Less)
            || !finite(m.min_db)
            || !finite(m.max_db)
    }) {
        Some((index, m)) => Err(PlotError::Mask {
            index,
            from_hz: m.from_hz,
            to_hz: m.to_hz,
            min_db: m.min_db,
            max_db: m.max_db,
        }),
        None => Ok(()),
    }
}

/// The frequency axis over the given range or the data's.
fn x_axis(chart: &Chart, series: &[Series<'_>]) -> Result<Axis, PlotError> {
    let (lo, hi) = match chart.x_range {
        Some(range) => range,
        None => series
            .iter()
            .flat_map(|(_, f, _)| f.iter().copied())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), f| {
                (lo.min(f), hi.max(f))
            }),
    };
    // One frequency only: a decade (log) or +-1 Hz (linear) around it.
    let (lo, hi) = match (lo == hi, chart.log_x) {
        (true, true) => (lo / 10f64.sqrt(), hi * 10f64.sqrt()),
        (true, false) => (lo - 1.0, hi + 1.0),
        (false, _) => (lo, hi),
    };
    let usable = lo.is_finite() && hi.is_finite() && lo < hi && (!chart.log_x || lo > 0.0);
    if !usable || chart.x_range.is_some_and(|(a, b)| a >= b) {
        return Err(PlotError::Range {
            axis: "x",
            from: lo,
            to: hi,
        });
    }
    Ok(if chart.log_x {
        Axis::logarithmic(lo, hi)
    } else {
        Axis::linear(lo, hi, |v, _| axis::compact(v))
    })
}

/// The value axis over the given range or one that spans the finite data
/// and the mask limits.
fn y_axis(chart: &Chart, series: &[Series<'_>]) -> Result<Axis, PlotError> {
    let (lo, hi) = chart.y_range.unwrap_or_else(|| {
        let data = series.iter().flat_map(|(_, _, v)| v.iter().copied());
        let limits = chart
            .mask
            .iter()
            .flat_map(|m| m.min_db.into_iter().chain(m.max_db));
        axis::auto_range(data.chain(limits))
    });
    if !(lo.is_finite() && hi.is_finite() && lo < hi) {
        return Err(PlotError::Range {
            axis: "y",
            from: lo,
            to: hi,
        });
    }
    Ok(Axis::linear(lo, hi, axis::decimal))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn unreadable_fonts_are_skipped() {
        let dir = tempfile::tempdir().unwrap();
        let garbage = dir.path().join("not-a-font.ttf");
        std::fs::write(&garbage, b"this is no TrueType file").unwrap();
        let missing = dir.path().join("missing.ttf");
        let candidates = [missing.to_str().unwrap(), garbage.to_str().unwrap()];
        assert_eq!(register_first(&candidates), None);
    }
}
