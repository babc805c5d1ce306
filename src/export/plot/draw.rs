//! Drawing a checked chart on any plotters backend: grid, mask, band,
//! traces, frame, then the text (ticks, axis labels, title, legend) at
//! pixel positions computed here.
//!
//! Sizes are given for an 800 x 500 chart and scale with the image (never
//! below 1, so a small chart keeps readable text). The legend sits under
//! the plot in rows, where it can never hide a curve.

use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::clip::{Point, Rect};
use super::{Band, Chart, Frame, MaskBox, PlotError, FONT_FAMILY, MASK_COLOR, PALETTE};

/// Reference size the pixel constants below are tuned for.
const REFERENCE: (f64, f64) = (800.0, 500.0);

/// Font sizes in plotters' units (an SVG shows size / 1.24 px).
const TITLE_SIZE: f64 = 22.0;
const LABEL_SIZE: f64 = 18.0;
const TICK_SIZE: f64 = 16.0;

/// Average advance of a character, as a fraction of the font size: wide
/// enough for DejaVu Sans and the usual browser sans-serif fonts, so
/// legend entries and y tick labels never collide.
const CHAR_WIDTH: f64 = 0.5;

/// Gaps, px at the reference size.
const GAP: f64 = 6.0;
const SWATCH: f64 = 28.0;
const ENTRY_GAP: f64 = 22.0;
const RIGHT_MARGIN: f64 = 24.0;

const MINOR_GRID: RGBColor = RGBColor(236, 236, 236);
const MAJOR_GRID: RGBColor = RGBColor(200, 200, 200);
const MASK: RGBColor = RGBColor(MASK_COLOR.0, MASK_COLOR.1, MASK_COLOR.2);
/// Forbidden regions and the envelope are tints, so curves stay on top
/// and readable.
const MASK_ALPHA: f64 = 0.13;
/// The envelope's colour, apart from every trace colour (a nominal trace
/// may be drawn over it).
const BAND: RGBColor = RGBColor(40, 70, 120);
const BAND_ALPHA: f64 = 0.22;
const TRACE_WIDTH: f64 = 2.0;
const LIMIT_WIDTH: f64 = 1.5;
const DASH: (f64, f64) = (9.0, 5.0);

/// How a legend entry is drawn.
#[derive(Debug, Clone, Copy)]
enum Swatch {
    Line { color: RGBColor, dashed: bool },
    Fill { color: RGBColor, alpha: f64 },
}

/// One legend entry.
#[derive(Debug, Clone)]
struct Entry {
    label: String,
    swatch: Swatch,
}

/// Pixel sizes for this chart.
#[derive(Debug, Clone, Copy)]
struct Metrics {
    scale: f64,
}

impl Metrics {
    fn px(&self, reference_px: f64) -> i32 {
        (reference_px * self.scale).round() as i32
    }
    fn font(&self, size: f64) -> f64 {
        size * self.scale
    }
    /// Estimated width of `text` at font `size`, px.
    fn text_width(&self, text: &str, size: f64) -> i32 {
        (text.chars().count() as f64 * CHAR_WIDTH * self.font(size)).ceil() as i32
    }
    /// Height of a line of text at font `size`, px.
    fn line(&self, size: f64) -> i32 {
        (1.5 * self.font(size)).ceil() as i32
    }
}

/// Plotters' errors as text (they borrow the backend, so they cannot be
/// kept).
pub(super) fn backend_error<E: std::error::Error + Send + Sync>(
    e: DrawingAreaErrorKind<E>,
) -> PlotError {
    PlotError::Draw(e.to_string())
}

type Plot<'a, DB> = ChartContext<'a, DB, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// Draws `chart` on `root`.
pub(super) fn render<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &Chart,
    frame: &Frame,
) -> Result<(), PlotError>
where
    DB::ErrorType: 'static,
{
    let m = Metrics {
        scale: (frame.width as f64 / REFERENCE.0)
            .min(frame.height as f64 / REFERENCE.1)
            .max(1.0),
    };
    let left = left_margin(&m, frame);
    let plot_width = frame.width as i32 - left - m.px(RIGHT_MARGIN);
    let rows = legend_rows(&m, &legend_entries(chart), plot_width);
    let bottom =
        m.line(TICK_SIZE) + m.line(LABEL_SIZE) + rows.len() as i32 * m.line(TICK_SIZE) + m.px(GAP);
    root.fill(&WHITE).map_err(backend_error)?;
    let plot = ChartBuilder::on(root)
        .margin_top(m.line(TITLE_SIZE) + m.px(GAP))
        .margin_left(left)
        .margin_right(m.px(RIGHT_MARGIN))
        .margin_bottom(bottom)
        .build_cartesian_2d(frame.x.lo..frame.x.hi, frame.y.lo..frame.y.hi)
        .map_err(backend_error)?;
    let mut canvas = Canvas {
        root,
        plot,
        frame,
        rect: Rect {
            x: (frame.x.lo, frame.x.hi),
            y: (frame.y.lo, frame.y.hi),
        },
        m,
    };
    canvas.grid()?;
    canvas.mask(&chart.mask)?;
    if let Some(band) = &chart.band {
        canvas.band(band)?;
    }
    // Dashed traces first, solid ones over them: a solid reference (the
    // passive ideal) stays visible, and a dashed build shows wherever it
    // departs from it. Colours follow the traces' order either way.
    for dashed in [true, false] {
        for (i, trace) in chart.traces.iter().enumerate() {
            if trace.dashed == dashed {
                canvas.curve(&trace.x, &trace.values, color(i), trace.dashed)?;
            }
        }
    }
    canvas.outline()?;
    canvas.labels(chart)?;
    canvas.legend(&rows)
}

fn color(index: usize) -> RGBColor {
    let (r, g, b) = PALETTE[index % PALETTE.len()];
    RGBColor(r, g, b)
}

/// Room for the y tick labels and the rotated y label.
fn left_margin(m: &Metrics, frame: &Frame) -> i32 {
    let widest = frame
        .y
        .major
        .iter()
        .map(|t| m.text_width(&t.label, TICK_SIZE))
        .max()
        .unwrap_or(0);
    m.line(LABEL_SIZE) + widest + 2 * m.px(GAP)
}

fn text_style(size: f64, h: HPos, v: VPos, m: &Metrics) -> TextStyle<'static> {
    styled(size, FontStyle::Normal, h, v, m)
}

fn styled(size: f64, style: FontStyle, h: HPos, v: VPos, m: &Metrics) -> TextStyle<'static> {
    TextStyle::from((FONT_FAMILY, m.font(size)).into_font().style(style))
        .color(&BLACK)
        .pos(Pos::new(h, v))
}

/// What every drawing step needs: the whole image (for text), the plot
/// area in plot coordinates, the checked frame and the pixel sizes.
struct Canvas<'a, DB: DrawingBackend> {
    root: &'a DrawingArea<DB, Shift>,
    plot: Plot<'a, DB>,
    frame: &'a Frame,
    rect: Rect,
    m: Metrics,
}

impl<DB: DrawingBackend> Canvas<'_, DB>
where
    DB::ErrorType: 'static,
{
    /// Plot coordinates of a series, non-finite values settled on the
    /// frame.
    fn samples(&self, freq: &[f64], values: &[f64]) -> Vec<Point> {
        freq.iter()
            .zip(values)
            .map(|(&f, &v)| (self.frame.x.to_plot(f), self.rect.settle(v)))
            .collect()
    }

    fn grid(&mut self) -> Result<(), PlotError> {
        let (x, y) = (&self.frame.x, &self.frame.y);
        let vertical = |at: f64| vec![(at, y.lo), (at, y.hi)];
        let horizontal = |at: f64| vec![(x.lo, at), (x.hi, at)];
        let minor = x.minor.iter().map(|&at| vertical(at));
        let major = x
            .major
            .iter()
            .map(|t| vertical(t.at))
            .chain(y.major.iter().map(|t| horizontal(t.at)));
        self.plot
            .draw_series(minor.map(|p| PathElement::new(p, MINOR_GRID)))
            .map_err(backend_error)?;
        self.plot
            .draw_series(major.map(|p| PathElement::new(p, MAJOR_GRID)))
            .map_err(backend_error)?;
        Ok(())
    }

    /// Shaded forbidden regions, with a line along each limit.
    fn mask(&mut self, mask: &[MaskBox]) -> Result<(), PlotError> {
        let rect = self.rect;
        for b in mask {
            // Ends beyond the axis (0 Hz on a log axis is -inf, an open end
            // +inf) stop at the frame: clipping needs finite corners.
            let x0 = self.frame.x.to_plot(b.from_hz).max(rect.x.0);
            let x1 = self.frame.x.to_plot(b.to_hz).min(rect.x.1);
            if x0 >= x1 {
                continue;
            }
            let regions = [
                b.min_db.map(|limit| (rect.y.0, limit)),
                b.max_db.map(|limit| (limit, rect.y.1)),
            ];
            for (y0, y1) in regions.into_iter().flatten() {
                let area = vec![(x0, y0), (x1, y0), (x1, y1), (x0, y1)];
                self.fill(area, MASK.mix(MASK_ALPHA))?;
            }
            let edge = MASK.stroke_width(self.m.px(LIMIT_WIDTH) as u32);
            for limit in [b.min_db, b.max_db].into_iter().flatten() {
                self.line(vec![(x0, limit), (x1, limit)], edge, None)?;
            }
        }
        Ok(())
    }

    /// The shaded envelope and its median.
    fn band(&mut self, band: &Band) -> Result<(), PlotError> {
        let mut area = self.samples(&band.x, &band.min);
        area.extend(self.samples(&band.x, &band.max).into_iter().rev());
        self.fill(area, BAND.mix(BAND_ALPHA))?;
        self.curve(&band.x, &band.median, BAND, false)
    }

    fn fill(&mut self, area: Vec<Point>, color: RGBAColor) -> Result<(), PlotError> {
        let clipped = self.rect.polygon(area);
        if clipped.len() < 3 {
            return Ok(());
        }
        self.plot
            .draw_series(std::iter::once(Polygon::new(clipped, color.filled())))
            .map_err(backend_error)?;
        Ok(())
    }

    /// A clipped polyline, solid or with `dash` = (dash, gap) px.
    fn line(
        &mut self,
        points: Vec<Point>,
        style: ShapeStyle,
        dash: Option<(i32, i32)>,
    ) -> Result<(), PlotError> {
        for piece in self.rect.polyline(points) {
            let drawn = match dash {
                None => self.plot.draw_series(LineSeries::new(piece, style)),
                Some((on, off)) => self
                    .plot
                    .draw_series(DashedLineSeries::new(piece, on, off, style)),
            };
            drawn.map_err(backend_error)?;
        }
        Ok(())
    }

    /// A trace over frequency.
    fn curve(
        &mut self,
        freq: &[f64],
        values: &[f64],
        color: RGBColor,
        dashed: bool,
    ) -> Result<(), PlotError> {
        let style = color.stroke_width(self.m.px(TRACE_WIDTH) as u32);
        let dash = dashed.then(|| (self.m.px(DASH.0), self.m.px(DASH.1)));
        let points = self.samples(freq, values);
        self.line(points, style, dash)
    }

    fn outline(&mut self) -> Result<(), PlotError> {
        let (x, y) = (self.rect.x, self.rect.y);
        let outline = Rectangle::new([(x.0, y.0), (x.1, y.1)], BLACK.stroke_width(1));
        self.plot
            .plotting_area()
            .draw(&outline)
            .map_err(backend_error)
    }

    /// Tick labels, axis labels and the title.
    fn labels(&self, chart: &Chart) -> Result<(), PlotError> {
        let (x, y, m) = (&self.frame.x, &self.frame.y, &self.m);
        let (left, bottom) = self.plot.backend_coord(&(x.lo, y.lo));
        let (right, top) = self.plot.backend_coord(&(x.hi, y.hi));
        let mut texts = Vec::new();
        let below = text_style(TICK_SIZE, HPos::Center, VPos::Top, m);
        for tick in &x.major {
            let (px, _) = self.plot.backend_coord(&(tick.at, y.lo));
            texts.push((tick.label.clone(), (px, bottom + m.px(GAP)), below.clone()));
        }
        let beside = text_style(TICK_SIZE, HPos::Right, VPos::Center, m);
        for tick in &y.major {
            let (_, py) = self.plot.backend_coord(&(x.lo, tick.at));
            texts.push((tick.label.clone(), (left - m.px(GAP), py), beside.clone()));
        }
        let centre = (left + right) / 2;
        let x_label = text_style(LABEL_SIZE, HPos::Center, VPos::Top, m);
        let x_label_y = bottom + m.line(TICK_SIZE) + m.px(GAP) / 2;
        texts.push((chart.x_label.clone(), (centre, x_label_y), x_label.clone()));
        let y_label = x_label.transform(FontTransform::Rotate270);
        texts.push((
            chart.y_label.clone(),
            (m.px(GAP), (top + bottom) / 2),
            y_label,
        ));
        let title = styled(TITLE_SIZE, FontStyle::Bold, HPos::Center, VPos::Top, m);
        texts.push((chart.title.clone(), (centre, m.px(GAP)), title));
        for (text, at, style) in texts {
            self.root
                .draw(&Text::new(text, at, style))
                .map_err(backend_error)?;
        }
        Ok(())
    }

    /// The legend rows under the x label.
    fn legend(&self, rows: &[Vec<(i32, Entry)>]) -> Result<(), PlotError> {
        let m = &self.m;
        let (left, bottom) = self.plot.backend_coord(&(self.rect.x.0, self.rect.y.0));
        let first = bottom + m.line(TICK_SIZE) + m.line(LABEL_SIZE) + m.px(GAP);
        let style = text_style(TICK_SIZE, HPos::Left, VPos::Center, m);
        for (r, row) in rows.iter().enumerate() {
            let y = first + r as i32 * m.line(TICK_SIZE) + m.line(TICK_SIZE) / 2;
            for (dx, entry) in row {
                let x = left + dx;
                self.swatch(entry.swatch, (x, y))?;
                let at = (x + m.px(SWATCH) + m.px(GAP), y);
                self.root
                    .draw(&Text::new(entry.label.clone(), at, style.clone()))
                    .map_err(backend_error)?;
            }
        }
        Ok(())
    }

    fn swatch(&self, swatch: Swatch, (x, y): (i32, i32)) -> Result<(), PlotError> {
        let (m, end) = (&self.m, x + self.m.px(SWATCH));
        match swatch {
            Swatch::Line { color, dashed } => {
                let style = color.stroke_width(m.px(TRACE_WIDTH) as u32);
                // A solid line is one dash as long as the swatch.
                let (on, off) = if dashed {
                    (m.px(DASH.0), m.px(DASH.1))
                } else {
                    (end - x, 0)
                };
                let starts = (0..).map(|k| x + k * (on + off)).take_while(|&s| s < end);
                for s in starts {
                    let dash = PathElement::new(vec![(s, y), ((s + on).min(end), y)], style);
                    self.root.draw(&dash).map_err(backend_error)?;
                }
            }
            Swatch::Fill { color, alpha } => {
                let half = m.line(TICK_SIZE) / 3;
                let corners = [(x, y - half), (end, y + half)];
                let area = Rectangle::new(corners, color.mix(alpha).filled());
                self.root.draw(&area).map_err(backend_error)?;
            }
        }
        Ok(())
    }
}

fn legend_entries(chart: &Chart) -> Vec<Entry> {
    let mut entries: Vec<Entry> = chart
        .traces
        .iter()
        .enumerate()
        .map(|(i, t)| Entry {
            label: t.label.clone(),
            swatch: Swatch::Line {
                color: color(i),
                dashed: t.dashed,
            },
        })
        .collect();
    if let Some(b) = &chart.band {
        entries.push(Entry {
            label: format!("{} median", b.label),
            swatch: Swatch::Line {
                color: BAND,
                dashed: false,
            },
        });
        entries.push(Entry {
            label: format!("{} min to max", b.label),
            swatch: Swatch::Fill {
                color: BAND,
                alpha: BAND_ALPHA,
            },
        });
    }
    if !chart.mask.is_empty() {
        entries.push(Entry {
            label: "outside the specification".into(),
            swatch: Swatch::Fill {
                color: MASK,
                alpha: MASK_ALPHA,
            },
        });
    }
    entries
}

/// Entries flowed into rows no wider than `width` px, with each entry's
/// x offset from the row start.
fn legend_rows(m: &Metrics, entries: &[Entry], width: i32) -> Vec<Vec<(i32, Entry)>> {
    let mut rows: Vec<Vec<(i32, Entry)>> = Vec::new();
    let mut x = 0;
    for entry in entries {
        let w = m.px(SWATCH) + m.px(GAP) + m.text_width(&entry.label, TICK_SIZE);
        if x > 0 && x + w > width {
            x = 0;
        }
        if x == 0 {
            rows.push(Vec::new());
        }
        if let Some(row) = rows.last_mut() {
            row.push((x, entry.clone()));
        }
        x += w + m.px(ENTRY_GAP);
    }
    rows
}
