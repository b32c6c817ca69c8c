//! Where sensors may go: the constraints of `[design]` and the candidate positions that
//! satisfy them.
//!
//! A position is feasible when it lies in one of the allowed rectangles (the whole plate when
//! none is given; for a long strip, the plate up to one width from the bottom, where the
//! field has relaxed to within `e^{−π}` of its far value), outside every keep-out rectangle
//! (closed: a hole on the boundary of a keep-out would break into it), and at least the
//! minimum distance from every edge of the plate (and strictly inside it). The spacing
//! between sensors is a constraint on pairs, enforced by the search.
//!
//! Candidates are either a regular grid anchored at the origin (`x = i h`, `y = j h`, so a
//! round spacing gives round coordinates) or the positions of a candidate file; either way,
//! only feasible positions are kept. Without a stated spacing the grid has about
//! [`DEFAULT_CANDIDATES`] points over the allowed area, its spacing rounded down to 1, 2 or
//! 5 times a power of ten.

use crate::case::{DesignSettings, Region};
use crate::geometry::{Point, Shape};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// About how many grid candidates a design gets when no spacing is stated.
pub const DEFAULT_CANDIDATES: f64 = 4000.0;

/// Lengths closer than this fraction of the plate width count as equal (a candidate exactly
/// on the boundary of an allowed region is inside it).
const SLACK: f64 = 1e-9;

/// The constraints on one sensor position, in metres.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Constraints {
    /// The plate outline.
    pub shape: Shape,
    /// Allowed rectangles (never empty: the whole plate when none was stated).
    pub allowed: Vec<Region>,
    /// Keep-out rectangles.
    pub keep_out: Vec<Region>,
    /// Minimum distance from every edge, metres.
    pub edge_distance_m: f64,
    /// Minimum distance between two sensors, metres.
    pub sensor_spacing_m: f64,
}

impl Constraints {
    /// The constraints of a case's `[design]` section.
    pub fn new(shape: Shape, settings: &DesignSettings) -> Constraints {
        let allowed = if settings.allowed.is_empty() {
            vec![Region::whole(&shape)]
        } else {
            settings.allowed.clone()
        };
        Constraints {
            shape,
            allowed,
            keep_out: settings.keep_out.clone(),
            edge_distance_m: settings.edge_distance_m,
            sensor_spacing_m: settings.sensor_spacing_m,
        }
    }

    /// Whether one sensor may sit at `p` (every constraint but the spacing).
    pub fn feasible(&self, p: Point) -> bool {
        let eps = SLACK * self.shape.width();
        if !self.shape.contains_strictly(p) {
            return false;
        }
        let d = self.edge_distance_m - eps;
        let far_from_edges = if self.shape.is_round() {
            self.shape
                .edges()
                .iter()
                .all(|&e| self.shape.depth_from(e, p) >= d)
        } else {
            p.x >= d
                && self.shape.width() - p.x >= d
                && p.y >= d
                && self.shape.height().is_none_or(|h| h - p.y >= d)
        };
        far_from_edges
            && self.allowed.iter().any(|r| r.contains_within(p, eps))
            && !self.keep_out.iter().any(|r| r.contains_within(p, eps))
    }

    /// Whether two sensors at `a` and `b` are far enough apart.
    pub fn spaced(&self, a: Point, b: Point) -> bool {
        let eps = SLACK * self.shape.width();
        let need = self.sensor_spacing_m - eps;
        let (dx, dy) = ((a.x - b.x).abs(), (a.y - b.y).abs());
        // hypot ≥ max(|dx|, |dy|): a gap that clears the spacing along one axis by more than
        // the rounding of a hypot (under an ulp) decides without the square root — most
        // pairs do, and the design search asks after every pair at each step
        if dx.max(dy) > need * (1.0 + 1e-12) {
            return true;
        }
        dx.hypot(dy) >= need
    }

    /// The allowed area (the union of the allowed rectangles clipped to the plate; overlaps
    /// counted once, by inclusion–exclusion on a fine grid of the bounding box), m².
    fn allowed_area(&self) -> f64 {
        let x0 = self
            .allowed
            .iter()
            .map(|r| r.x_min)
            .fold(f64::INFINITY, f64::min);
        let x1 = self
            .allowed
            .iter()
            .map(|r| r.x_max)
            .fold(f64::NEG_INFINITY, f64::max);
        let y0 = self
            .allowed
            .iter()
            .map(|r| r.y_min)
            .fold(f64::INFINITY, f64::min);
        let y1 = self
            .allowed
            .iter()
            .map(|r| r.y_max)
            .fold(f64::NEG_INFINITY, f64::max);
        let n = 200;
        let (dx, dy) = ((x1 - x0) / n as f64, (y1 - y0) / n as f64);
        let mut inside = 0usize;
        for i in 0..n {
            for j in 0..n {
                let p = Point::new(x0 + (i as f64 + 0.5) * dx, y0 + (j as f64 + 0.5) * dy);
                inside += usize::from(
                    self.shape.contains(p) && self.allowed.iter().any(|r| r.contains(p)),
                );
            }
        }
        inside as f64 * dx * dy
    }

    /// The grid spacing used when none is stated: about [`DEFAULT_CANDIDATES`] points over
    /// the allowed area, rounded down to 1, 2 or 5 times a power of ten.
    pub fn default_spacing(&self) -> f64 {
        let h = (self.allowed_area() / DEFAULT_CANDIDATES).sqrt();
        let p = 10f64.powf(h.log10().floor());
        let m = h / p;
        let nice = if m >= 5.0 {
            5.0
        } else if m >= 2.0 {
            2.0
        } else {
            1.0
        };
        nice * p
    }

    /// The feasible points of the grid `x = i h`, `y = j h`, ordered by y then x.
    pub fn grid(&self, h: f64) -> Vec<Point> {
        let y_top = self.allowed.iter().map(|r| r.y_max).fold(0.0, f64::max);
        // a round part is centred on the origin: its grid runs over negative coordinates too
        let (i0, j0, nx, ny) = if self.shape.is_round() {
            let r = 0.5 * self.shape.width();
            let n = (r / h).floor() as i64;
            (-n, -n, n, n)
        } else {
            (
                1,
                1,
                (self.shape.width() / h).floor() as i64,
                (y_top / h).floor() as i64,
            )
        };
        let mut out = Vec::new();
        for j in j0..=ny {
            for i in i0..=nx {
                let p = Point::new(i as f64 * h, j as f64 * h);
                if self.feasible(p) {
                    out.push(p);
                }
            }
        }
        out
    }
}

/// A layout of `count` sensors on a regular grid over the allowed region's bounding box:
/// `nx × ny = count` cells (the factorisation whose aspect is closest to the region's),
/// one sensor at the centre of each, each moved to the nearest candidate that is still free
/// (spacing to the ones already placed). Returns candidate indices; `None` when the
/// candidates run out. The "uniform grid" a design is compared against.
pub fn uniform_layout(
    constraints: &Constraints,
    candidates: &[Point],
    count: usize,
) -> Option<Vec<usize>> {
    let eps = SLACK * constraints.shape.width();
    let d = constraints.edge_distance_m;
    let b = &constraints.allowed;
    let x0 = b
        .iter()
        .map(|r| r.x_min)
        .fold(f64::INFINITY, f64::min)
        .max(d)
        - eps;
    let x1 = b.iter().map(|r| r.x_max).fold(0.0, f64::max);
    let x1 = x1.min(constraints.shape.width() - d) + eps;
    let y0 = b
        .iter()
        .map(|r| r.y_min)
        .fold(f64::INFINITY, f64::min)
        .max(d)
        - eps;
    let y1 = b.iter().map(|r| r.y_max).fold(0.0, f64::max);
    let y1 = constraints.shape.height().map_or(y1, |h| y1.min(h - d)) + eps;
    let aspect = (x1 - x0) / (y1 - y0).max(f64::MIN_POSITIVE);
    let targets: Vec<Point> = if constraints.shape.is_round() {
        // a round part: one ring, evenly round the circle, midway across the wall (two
        // thirds of the way out on a disk)
        let shape = &constraints.shape;
        let outer = 0.5 * shape.width();
        let radius = match shape.radius_of(crate::geometry::Edge::Inner) {
            Some(inner) => 0.5 * (inner + outer),
            None => 2.0 * outer / 3.0,
        };
        (0..count)
            .map(|k| {
                let a = std::f64::consts::TAU * (k as f64 + 0.5) / count as f64;
                Point::new(radius * a.cos(), radius * a.sin())
            })
            .collect()
    } else {
        let (nx, ny) = (1..=count)
            .filter(|ny| count % ny == 0)
            .map(|ny| (count / ny, ny))
            .min_by(|a, b| {
                let da = ((a.0 as f64 / a.1 as f64) / aspect).ln().abs();
                let db = ((b.0 as f64 / b.1 as f64) / aspect).ln().abs();
                da.total_cmp(&db)
            })?;
        (0..ny)
            .flat_map(|j| {
                (0..nx).map(move |i| {
                    Point::new(
                        x0 + (i as f64 + 0.5) * (x1 - x0) / nx as f64,
                        y0 + (j as f64 + 0.5) * (y1 - y0) / ny as f64,
                    )
                })
            })
            .collect()
    };
    let mut chosen: Vec<usize> = Vec::with_capacity(count);
    {
        for target in targets {
            let best = candidates
                .iter()
                .enumerate()
                .filter(|(k, p)| {
                    !chosen.contains(k)
                        && chosen
                            .iter()
                            .all(|&c| constraints.spaced(candidates[c], **p))
                })
                .min_by(|a, b| {
                    let da = (a.1.x - target.x).hypot(a.1.y - target.y);
                    let db = (b.1.x - target.x).hypot(b.1.y - target.y);
                    da.total_cmp(&db)
                })?;
            chosen.push(best.0);
        }
    }
    Some(chosen)
}

/// A random feasible layout: candidates drawn uniformly one after another among those still
/// free (spacing to the ones drawn), from a ChaCha8 stream seeded with `seed`. `None` when
/// the candidates run out first.
pub fn random_layout(
    constraints: &Constraints,
    candidates: &[Point],
    count: usize,
    seed: u64,
) -> Option<Vec<usize>> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut free: Vec<usize> = (0..candidates.len()).collect();
    let mut chosen = Vec::with_capacity(count);
    for _ in 0..count {
        if free.is_empty() {
            return None;
        }
        let k = free[rng.random_range(0..free.len())];
        chosen.push(k);
        free.retain(|&i| i != k && constraints.spaced(candidates[i], candidates[k]));
    }
    Some(chosen)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn constraints() -> Constraints {
        Constraints {
            shape: Shape::Rectangle {
                width_m: 0.18,
                height_m: 0.028,
            },
            allowed: vec![Region {
                x_min: 0.0,
                x_max: 0.18,
                y_min: 0.0,
                y_max: 0.014,
                sector: None,
            }],
            keep_out: vec![Region {
                x_min: 0.055,
                x_max: 0.065,
                y_min: 0.0,
                y_max: 0.028,
                sector: None,
            }],
            edge_distance_m: 0.004,
            sensor_spacing_m: 0.01,
        }
    }

    #[test]
    fn grid_honours_every_constraint() {
        let c = constraints();
        let g = c.grid(0.001);
        assert!(!g.is_empty());
        for p in &g {
            assert!(p.y >= 0.004 - 1e-12 && p.y <= 0.014 + 1e-12, "{p:?}");
            assert!(p.x >= 0.004 - 1e-12 && p.x <= 0.176 + 1e-12, "{p:?}");
            assert!(!(p.x >= 0.055 - 1e-12 && p.x <= 0.065 + 1e-12), "{p:?}");
        }
        // x from 4 to 176 mm without 55..65 (11 values): 173 - 11 = 162 columns; y 4..14: 11
        assert_eq!(g.len(), 162 * 11);
        // 1, 2 or 5 times a power of ten
        let h = c.default_spacing();
        let m = h / 10f64.powf(h.log10().floor());
        assert!([1.0, 2.0, 5.0].iter().any(|v| (m - v).abs() < 1e-9), "{h}");
    }

    #[test]
    fn uniform_and_random_layouts_are_feasible() {
        let c = constraints();
        let g = c.grid(0.001);
        for layout in [
            uniform_layout(&c, &g, 8).unwrap(),
            random_layout(&c, &g, 8, 3).unwrap(),
        ] {
            assert_eq!(layout.len(), 8);
            for (a, &i) in layout.iter().enumerate() {
                assert!(c.feasible(g[i]));
                for &j in &layout[a + 1..] {
                    assert!(c.spaced(g[i], g[j]));
                }
            }
        }
        assert_eq!(
            random_layout(&c, &g, 8, 3),
            random_layout(&c, &g, 8, 3),
            "deterministic"
        );
        // 172 mm of usable length, 10 mm apart: at most 18 sensors in one row of the grid,
        // and no room for 500
        assert!(random_layout(&c, &g, 500, 1).is_none());
    }
}
