//! Label placement: among candidate spots, pick the one that covers the fewest markers, lines and
//! labels already placed, so annotations never hide data.

use super::frame::Plot;

/// What crossing one line segment costs, in square pixels of covered marker.
const LINE_CROSSING_COST: f64 = 30.0;

/// A line segment in pixels, tagged with the line it belongs to.
type Segment = (usize, (f64, f64), (f64, f64));

/// What labels should keep clear of, in pixels.
#[derive(Clone, Debug, Default)]
pub struct Obstacles {
    boxes: Vec<Plot>,
    segments: Vec<Segment>,
}

impl Obstacles {
    /// Keeps clear of a rectangle (a marker or a label already placed).
    pub fn add_box(&mut self, area: Plot) {
        self.boxes.push(area);
    }

    /// Keeps clear of a marker of size `r` at `p`.
    pub fn add_point(&mut self, (x, y): (f64, f64), r: f64) {
        self.add_box(Plot {
            left: x - r,
            top: y - r,
            right: x + r,
            bottom: y + r,
        });
    }

    /// Keeps clear of a polyline; `id` lets a label ignore the line it belongs to.
    pub fn add_line(&mut self, id: usize, pts: &[(f64, f64)]) {
        self.segments
            .extend(pts.windows(2).map(|p| (id, p[0], p[1])));
    }

    /// A cost for covering `area`: the square pixels of boxes covered, plus a fixed price per line
    /// segment crossed, so a label that grazes a marker beats one that sits on it.
    pub fn cost(&self, area: &Plot, own_line: Option<usize>) -> f64 {
        let boxes: f64 = self.boxes.iter().map(|b| overlap_area(b, area)).sum();
        let lines = self
            .segments
            .iter()
            .filter(|(id, a, b)| Some(*id) != own_line && clip_segment(*a, *b, area).is_some())
            .count();
        boxes + LINE_CROSSING_COST * lines as f64
    }
}

/// Where and how one label is written.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Spot {
    /// Anchor x.
    pub x: f64,
    /// Baseline y (before any `dy`).
    pub y: f64,
    /// "start", "middle" or "end".
    pub anchor: &'static str,
    /// Rotation about (x, y) in degrees.
    pub angle: f64,
    /// Baseline shift applied after rotation.
    pub dy: f64,
    /// Area covered, axis-aligned.
    pub area: Plot,
}

/// A horizontal label's spot for text of `width` and font `size`.
pub fn horizontal(x: f64, baseline: f64, width: f64, size: f64, anchor: &'static str) -> Spot {
    let left = match anchor {
        "end" => x - width,
        "middle" => x - width / 2.0,
        _ => x,
    };
    Spot {
        x,
        y: baseline,
        anchor,
        angle: 0.0,
        dy: 0.0,
        area: Plot {
            left: left - 1.5,
            top: baseline - size * 0.8,
            right: left + width + 1.5,
            bottom: baseline + size * 0.25,
        },
    }
}

/// A label that ends at `(x, y)` and runs along a line of slope `angle` (degrees), just above it.
pub fn along(x: f64, y: f64, angle: f64, width: f64, size: f64) -> Spot {
    let dy = -3.5;
    let (sin, cos) = angle.to_radians().sin_cos();
    let corners = [
        (-width, dy - size * 0.8),
        (0.0, dy - size * 0.8),
        (-width, dy + size * 0.25),
        (0.0, dy + size * 0.25),
    ]
    .map(|(u, v)| (x + u * cos - v * sin, y + u * sin + v * cos));
    let area = corners.iter().fold(
        Plot {
            left: f64::INFINITY,
            top: f64::INFINITY,
            right: f64::NEG_INFINITY,
            bottom: f64::NEG_INFINITY,
        },
        |a, (cx, cy)| Plot {
            left: a.left.min(*cx),
            top: a.top.min(*cy),
            right: a.right.max(*cx),
            bottom: a.bottom.max(*cy),
        },
    );
    Spot {
        x,
        y,
        anchor: "end",
        angle,
        dy,
        area,
    }
}

/// The cheapest candidate that lies inside `bounds`; earlier candidates win ties.
pub fn best(
    candidates: &[(Spot, Option<usize>)],
    obstacles: &Obstacles,
    bounds: &Plot,
) -> Option<Spot> {
    let mut chosen: Option<(f64, Spot)> = None;
    for (spot, own_line) in candidates {
        let a = &spot.area;
        if a.left < bounds.left
            || a.right > bounds.right
            || a.top < bounds.top
            || a.bottom > bounds.bottom
        {
            continue;
        }
        let cost = obstacles.cost(a, *own_line);
        if chosen.is_none_or(|(c, _)| cost < c) {
            chosen = Some((cost, *spot));
        }
        if cost <= 0.0 {
            break;
        }
    }
    chosen.map(|(_, s)| s)
}

/// Points (and the line's angle there, degrees) at the given distances back from the visible end of
/// a polyline, walking only its part inside `plot`.
pub fn back_from_end(pts: &[(f64, f64)], plot: &Plot, distances: &[f64]) -> Vec<((f64, f64), f64)> {
    let mut out = Vec::new();
    let mut walked = 0.0;
    let mut wanted = distances.iter().copied().peekable();
    for pair in pts.windows(2).rev() {
        let Some((a, b)) = clip_segment(pair[0], pair[1], plot) else {
            continue;
        };
        let length = (b.0 - a.0).hypot(b.1 - a.1);
        if length <= 1e-9 {
            continue;
        }
        let angle = (b.1 - a.1).atan2(b.0 - a.0).to_degrees();
        while let Some(d) = wanted.peek().copied() {
            if d > walked + length {
                break;
            }
            let t = (d - walked) / length;
            out.push(((b.0 - t * (b.0 - a.0), b.1 - t * (b.1 - a.1)), angle));
            wanted.next();
        }
        walked += length;
        if wanted.peek().is_none() {
            break;
        }
    }
    out
}

/// Liang–Barsky clipping of the segment a→b to a rectangle; `None` when it misses.
pub fn clip_segment(a: (f64, f64), b: (f64, f64), area: &Plot) -> Option<((f64, f64), (f64, f64))> {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    for (p, q) in [
        (-dx, a.0 - area.left),
        (dx, area.right - a.0),
        (-dy, a.1 - area.top),
        (dy, area.bottom - a.1),
    ] {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let r = q / p;
            if p < 0.0 {
                t0 = t0.max(r);
            } else {
                t1 = t1.min(r);
            }
        }
    }
    if t0 > t1 {
        return None;
    }
    Some((
        (a.0 + t0 * dx, a.1 + t0 * dy),
        (a.0 + t1 * dx, a.1 + t1 * dy),
    ))
}

fn overlap_area(a: &Plot, b: &Plot) -> f64 {
    let w = a.right.min(b.right) - a.left.max(b.left);
    let h = a.bottom.min(b.bottom) - a.top.max(b.top);
    if w > 0.0 && h > 0.0 { w * h } else { 0.0 }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn square() -> Plot {
        Plot {
            left: 0.0,
            top: 0.0,
            right: 100.0,
            bottom: 100.0,
        }
    }

    #[test]
    fn clipping_keeps_the_inside_part() {
        let (a, b) = clip_segment((-50.0, 50.0), (50.0, 50.0), &square()).expect("crosses");
        assert_eq!(a, (0.0, 50.0));
        assert_eq!(b, (50.0, 50.0));
        assert!(clip_segment((-50.0, -10.0), (150.0, -10.0), &square()).is_none());
    }

    #[test]
    fn walking_back_starts_at_the_visible_end() {
        // A line leaving the square through the right edge at y = 60, vertex exactly on the edge too.
        let pts = [(10.0, -20.0), (60.0, 40.0), (100.0, 60.0), (140.0, 80.0)];
        let spots = back_from_end(&pts, &square(), &[0.0, 10.0]);
        assert_eq!(spots.len(), 2);
        assert!((spots[0].0.0 - 100.0).abs() < 1e-9 && (spots[0].0.1 - 60.0).abs() < 1e-9);
        assert!(spots[1].0.0 < 100.0);
        assert!((spots[0].1 - 26.565).abs() < 0.01, "angle {}", spots[0].1);
    }

    #[test]
    fn best_spot_avoids_markers() {
        let mut obstacles = Obstacles::default();
        obstacles.add_point((50.0, 45.0), 5.0);
        let blocked = horizontal(50.0, 50.0, 30.0, 12.0, "middle");
        let free = horizontal(50.0, 80.0, 30.0, 12.0, "middle");
        let spot = best(&[(blocked, None), (free, None)], &obstacles, &square()).expect("one fits");
        assert_eq!(spot, free);
    }

    #[test]
    fn rotated_area_contains_the_anchor_side() {
        let spot = along(50.0, 50.0, 45.0, 40.0, 12.0);
        assert!(spot.area.right <= 50.0 + 12.0 && spot.area.left < 30.0);
    }
}
