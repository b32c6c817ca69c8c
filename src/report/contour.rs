//! Isotherms: round-number levels and marching squares on the field grid.
//!
//! Marching squares (Lorensen & Cline's marching cubes, 1987, reduced to two dimensions):
//! each grid cell is classified by which of its four corners are at or above the level;
//! the level crosses a cell side where its two corners differ, at the linearly interpolated
//! point `t = (c - z0) / (z1 - z0)`. The two saddle classes (opposite corners above) are
//! resolved by the mean of the four corners, the bilinear interpolant's value at the cell
//! centre. Crossing points are keyed by the grid side they lie on, so the pieces of
//! neighbouring cells join exactly into polylines.

use std::collections::HashMap;

/// A polyline in data coordinates.
pub(crate) type Polyline = Vec<(f64, f64)>;

/// A "nice" step (1, 2, 2.5 or 5 times a power of ten) that cuts `range` into about
/// `target` pieces: the nice value nearest to `range / target` on a log scale.
pub(crate) fn nice_step(range: f64, target: usize) -> f64 {
    if !(range.is_finite() && range > 0.0) {
        return 1.0;
    }
    let raw = range / target.max(1) as f64;
    let magnitude = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|f| f * magnitude)
        .min_by(|a, b| (a / raw).ln().abs().total_cmp(&(b / raw).ln().abs()))
        .unwrap_or(magnitude)
}

/// Round-number levels strictly inside `(min, max)`, about `target` of them, with their
/// step.
pub(crate) fn levels(min: f64, max: f64, target: usize) -> (Vec<f64>, f64) {
    let step = nice_step(max - min, target);
    if !(min.is_finite() && max.is_finite() && max > min) {
        return (Vec::new(), step);
    }
    let first = (min / step).floor() as i64 + 1;
    let last = (max / step).ceil() as i64 - 1;
    let levels = (first..=last)
        .map(|k| k as f64 * step)
        .filter(|&v| v > min && v < max)
        .collect();
    (levels, step)
}

/// A crossing point, keyed by the grid side it lies on: `(horizontal, i, j)` is the side
/// from node `(i, j)` to `(i + 1, j)` when horizontal, to `(i, j + 1)` otherwise.
type SideKey = (bool, usize, usize);

/// The contour polylines of `z` at `level`. `z[j * xs.len() + i]` is the value at
/// `(xs[i], ys[j])`; cells with a non-finite corner are skipped.
#[allow(clippy::float_cmp)] // a flat cell edge has equal corner values, copied from the grid
pub(crate) fn contour(xs: &[f64], ys: &[f64], z: &[f64], level: f64) -> Vec<Polyline> {
    let (nx, ny) = (xs.len(), ys.len());
    if nx < 2 || ny < 2 || z.len() != nx * ny {
        return Vec::new();
    }
    let at = |i: usize, j: usize| z[j * nx + i];
    let mut segments: Vec<(SideKey, SideKey)> = Vec::new();
    for j in 0..ny - 1 {
        for i in 0..nx - 1 {
            let corners = [at(i, j), at(i + 1, j), at(i + 1, j + 1), at(i, j + 1)];
            if corners.iter().any(|v| !v.is_finite()) {
                continue;
            }
            // Sides of the cell: 0 bottom, 1 right, 2 top, 3 left.
            let side = |s: usize| -> SideKey {
                match s {
                    0 => (true, i, j),
                    1 => (false, i + 1, j),
                    2 => (true, i, j + 1),
                    _ => (false, i, j),
                }
            };
            let above: Vec<bool> = corners.iter().map(|&v| v >= level).collect();
            let class = above
                .iter()
                .enumerate()
                .fold(0usize, |acc, (k, &a)| acc | (usize::from(a) << k));
            let centre_above = corners.iter().sum::<f64>() / 4.0 >= level;
            // Pairs of sides joined inside the cell, by class (bit k: corner k above;
            // corners 0 bottom-left, 1 bottom-right, 2 top-right, 3 top-left).
            let pairs: &[(usize, usize)] = match class {
                0 | 15 => &[],
                1 | 14 => &[(3, 0)],
                2 | 13 => &[(0, 1)],
                3 | 12 => &[(3, 1)],
                4 | 11 => &[(1, 2)],
                6 | 9 => &[(0, 2)],
                7 | 8 => &[(3, 2)],
                5 => {
                    // corners 0 and 2 above
                    if centre_above {
                        &[(3, 2), (0, 1)]
                    } else {
                        &[(3, 0), (1, 2)]
                    }
                }
                10 => {
                    // corners 1 and 3 above
                    if centre_above {
                        &[(3, 0), (1, 2)]
                    } else {
                        &[(3, 2), (0, 1)]
                    }
                }
                _ => unreachable!("four corners give sixteen classes"),
            };
            for &(a, b) in pairs {
                segments.push((side(a), side(b)));
            }
        }
    }
    let point = |key: SideKey| -> (f64, f64) {
        let (horizontal, i, j) = key;
        let (i1, j1) = if horizontal { (i + 1, j) } else { (i, j + 1) };
        let (z0, z1) = (at(i, j), at(i1, j1));
        let t = if z1 == z0 {
            0.5
        } else {
            ((level - z0) / (z1 - z0)).clamp(0.0, 1.0)
        };
        (xs[i] + t * (xs[i1] - xs[i]), ys[j] + t * (ys[j1] - ys[j]))
    };
    join(&segments)
        .into_iter()
        .map(|keys| keys.into_iter().map(point).collect())
        .collect()
}

/// Join segments that share crossing points into chains of keys: open chains first (they
/// start where a contour leaves the grid), then closed loops.
fn join(segments: &[(SideKey, SideKey)]) -> Vec<Vec<SideKey>> {
    let mut by_key: HashMap<SideKey, Vec<usize>> = HashMap::new();
    for (s, &(a, b)) in segments.iter().enumerate() {
        by_key.entry(a).or_default().push(s);
        by_key.entry(b).or_default().push(s);
    }
    let mut used = vec![false; segments.len()];
    let mut chains = Vec::new();
    // Deterministic order: open ends in segment order, then the rest.
    let mut starts: Vec<(SideKey, usize)> = Vec::new();
    for (s, &(a, b)) in segments.iter().enumerate() {
        for key in [a, b] {
            if by_key[&key].len() == 1 {
                starts.push((key, s));
            }
        }
    }
    let all: Vec<(SideKey, usize)> = segments
        .iter()
        .enumerate()
        .map(|(s, &(a, _))| (a, s))
        .collect();
    for (start_key, first) in starts.into_iter().chain(all) {
        if used[first] {
            continue;
        }
        let mut chain = vec![start_key];
        let mut key = start_key;
        let mut seg = first;
        loop {
            used[seg] = true;
            let (a, b) = segments[seg];
            let next = if a == key { b } else { a };
            chain.push(next);
            key = next;
            match by_key[&key].iter().find(|&&s| !used[s]) {
                Some(&s) => seg = s,
                None => break,
            }
        }
        chains.push(chain);
    }
    chains
}

/// Length of a polyline in the units given by `scale` (pixels per data unit along x and y).
pub(crate) fn length(line: &Polyline, scale: (f64, f64)) -> f64 {
    line.windows(2)
        .map(|w| ((w[1].0 - w[0].0) * scale.0).hypot((w[1].1 - w[0].1) * scale.1))
        .sum()
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;

    #[test]
    fn nice_levels() {
        assert_eq!(nice_step(10.0, 5), 2.0);
        assert_eq!(nice_step(54.0, 8), 5.0);
        assert_eq!(nice_step(80.0, 8), 10.0);
        assert_eq!(nice_step(0.9, 8), 0.1);
        let (lv, step) = levels(24.0, 78.4, 8);
        assert_eq!(step, 5.0);
        assert_eq!(lv.first(), Some(&25.0));
        assert_eq!(lv.last(), Some(&75.0));
        // levels never sit on the ends
        let (lv, _) = levels(20.0, 30.0, 5);
        assert_eq!(lv, vec![22.0, 24.0, 26.0, 28.0]);
        assert!(levels(1.0, 1.0, 5).0.is_empty());
    }

    /// A linear field z = x: every contour is the vertical line x = level, exactly (linear
    /// interpolation is exact for a linear field), running the full height of the grid.
    #[test]
    fn linear_field_gives_straight_isotherms() {
        let xs: Vec<f64> = (0..11).map(|i| f64::from(i) / 10.0).collect();
        let ys: Vec<f64> = (0..6).map(|j| f64::from(j) / 5.0).collect();
        let z: Vec<f64> = ys.iter().flat_map(|_| xs.iter().copied()).collect();
        let lines = contour(&xs, &ys, &z, 0.43);
        assert_eq!(lines.len(), 1, "{lines:?}");
        let line = &lines[0];
        assert_eq!(line.len(), ys.len());
        for &(x, _) in line {
            assert!((x - 0.43).abs() < 1e-12);
        }
        let (y0, y1) = (line[0].1, line[line.len() - 1].1);
        assert!((y0 - y1).abs() == 1.0, "spans the grid: {y0} .. {y1}");
    }

    /// A radial bump: the contour at a level is a closed loop whose points all lie close to
    /// the circle r = sqrt(-ln(level)) of z = exp(-r^2) (error of order the grid spacing
    /// squared from linear interpolation).
    #[test]
    fn bump_gives_closed_loop_near_the_circle() {
        let n = 81;
        let g: Vec<f64> = (0..n)
            .map(|i| -2.0 + 4.0 * i as f64 / (n - 1) as f64)
            .collect();
        let mut z = Vec::new();
        for &y in &g {
            for &x in &g {
                z.push((-(x * x + y * y)).exp());
            }
        }
        let level = 0.5;
        let lines = contour(&g, &g, &z, level);
        assert_eq!(lines.len(), 1);
        let line = &lines[0];
        assert_eq!(line.first(), line.last(), "closed");
        let r_true = (-f64::ln(level)).sqrt();
        for &(x, y) in line {
            assert!((x.hypot(y) - r_true).abs() < 0.01, "{x},{y}");
        }
        let circumference = length(line, (1.0, 1.0));
        assert!((circumference - 2.0 * std::f64::consts::PI * r_true).abs() < 0.02);
    }

    #[test]
    fn skips_cells_with_missing_values() {
        let xs = [0.0, 1.0, 2.0];
        let ys = [0.0, 1.0];
        let z = [0.0, f64::NAN, 2.0, 0.0, 1.0, 2.0];
        assert!(contour(&xs, &ys, &z, 0.5).is_empty());
        assert!(contour(&xs, &ys, &z[..3], 0.5).is_empty());
    }
}
