//! Clipping polylines and polygons to the plot rectangle, in plot
//! coordinates, one half-plane at a time (Sutherland and Hodgman,
//! "Reentrant polygon clipping", Comm. ACM 17(1), 1974; the polyline
//! version is the same walk without closing the path).
//!
//! Plotters draws whatever coordinates it is given, even outside the
//! plotting area, so everything is clipped here. Invariant: every point
//! returned lies inside the rectangle (up to rounding of the crossing).

/// A point in plot coordinates.
pub(crate) type Point = (f64, f64);

/// The plot rectangle.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Rect {
    /// Left, right, bottom and top, in plot coordinates.
    pub x: (f64, f64),
    /// Bottom and top.
    pub y: (f64, f64),
}

/// One side of the rectangle: points with `sign * (coord - bound) >= 0`
/// are inside.
#[derive(Debug, Clone, Copy)]
struct Edge {
    /// Which coordinate: 0 for x, 1 for y.
    axis: usize,
    bound: f64,
    sign: f64,
}

impl Edge {
    fn coord(&self, p: Point) -> f64 {
        if self.axis == 0 {
            p.0
        } else {
            p.1
        }
    }

    fn inside(&self, p: Point) -> bool {
        self.sign * (self.coord(p) - self.bound) >= 0.0
    }

    /// Where segment `a`-`b` crosses the edge (one end inside, one out).
    fn cross(&self, a: Point, b: Point) -> Point {
        let t = (self.bound - self.coord(a)) / (self.coord(b) - self.coord(a));
        let along = (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1));
        // Put the crossing exactly on the edge, free of rounding in t.
        if self.axis == 0 {
            (self.bound, along.1)
        } else {
            (along.0, self.bound)
        }
    }
}

impl Rect {
    fn edges(&self) -> [Edge; 4] {
        let edge = |axis, bound, sign| Edge { axis, bound, sign };
        [
            edge(0, self.x.0, 1.0),
            edge(0, self.x.1, -1.0),
            edge(1, self.y.0, 1.0),
            edge(1, self.y.1, -1.0),
        ]
    }

    /// The y value a non-finite sample is drawn at: NaN and -inf at the
    /// bottom (a transmission zero evaluated as -inf dB, or a failed
    /// point), +inf at the top.
    pub fn settle(&self, y: f64) -> f64 {
        if y == f64::INFINITY {
            self.y.1
        } else if y.is_finite() {
            y
        } else {
            self.y.0
        }
    }

    /// The parts of a polyline inside the rectangle, each a polyline.
    pub fn polyline(&self, points: Vec<Point>) -> Vec<Vec<Point>> {
        self.edges().iter().fold(vec![points], |pieces, edge| {
            pieces
                .into_iter()
                .flat_map(|piece| polyline_half(&piece, edge))
                .collect()
        })
    }

    /// The part of a polygon inside the rectangle (empty if none).
    pub fn polygon(&self, points: Vec<Point>) -> Vec<Point> {
        self.edges()
            .iter()
            .fold(points, |poly, edge| polygon_half(&poly, edge))
    }
}

/// The parts of `piece` on the inside of `edge`.
fn polyline_half(piece: &[Point], edge: &Edge) -> Vec<Vec<Point>> {
    let mut pieces = Vec::new();
    let mut current = Vec::new();
    for (i, &p) in piece.iter().enumerate() {
        if i > 0 && edge.inside(piece[i - 1]) != edge.inside(p) {
            current.push(edge.cross(piece[i - 1], p));
        }
        if edge.inside(p) {
            current.push(p);
        } else if !current.is_empty() {
            pieces.push(std::mem::take(&mut current));
        }
    }
    if !current.is_empty() {
        pieces.push(current);
    }
    pieces
}

/// The part of the closed polygon `poly` on the inside of `edge`.
fn polygon_half(poly: &[Point], edge: &Edge) -> Vec<Point> {
    let mut out = Vec::with_capacity(poly.len() + 2);
    for (i, &p) in poly.iter().enumerate() {
        let prev = poly[(i + poly.len() - 1) % poly.len()];
        if edge.inside(p) != edge.inside(prev) {
            out.push(edge.cross(prev, p));
        }
        if edge.inside(p) {
            out.push(p);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    const UNIT: Rect = Rect {
        x: (0.0, 1.0),
        y: (0.0, 1.0),
    };

    #[test]
    fn polyline_dipping_below_splits_at_the_bottom() {
        let pieces = UNIT.polyline(vec![(0.0, 0.5), (0.5, -0.5), (1.0, 0.5)]);
        assert_eq!(
            pieces,
            vec![vec![(0.0, 0.5), (0.25, 0.0)], vec![(0.75, 0.0), (1.0, 0.5)]]
        );
    }

    #[test]
    fn polygon_is_cut_to_the_rectangle() {
        // A square twice the size, centred on the unit square's corner.
        let cut = UNIT.polygon(vec![(-1.0, -1.0), (1.0, -1.0), (1.0, 1.0), (-1.0, 1.0)]);
        let area: f64 = (0..cut.len())
            .map(|i| {
                let (a, b) = (cut[i], cut[(i + 1) % cut.len()]);
                a.0 * b.1 - b.0 * a.1
            })
            .sum::<f64>()
            / 2.0;
        assert!((area - 1.0).abs() < 1e-12, "area {area} of {cut:?}");
    }

    #[test]
    fn non_finite_values_settle_on_the_frame() {
        assert_eq!(UNIT.settle(f64::NEG_INFINITY), 0.0);
        assert_eq!(UNIT.settle(f64::NAN), 0.0);
        assert_eq!(UNIT.settle(f64::INFINITY), 1.0);
        assert_eq!(UNIT.settle(0.3), 0.3);
    }
}
