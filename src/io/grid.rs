//! The field grid: where `field.csv` samples the plate (`docs/case-files.md`, outputs).

use crate::geometry::Shape;

/// Default grid size (`docs/case-files.md`, outputs).
pub const DEFAULT_GRID: (usize, usize) = (41, 41);

/// Largest grid accepted along one direction: beyond this a CSV of the field is no longer
/// something a person or a plotting script can use.
pub const MAX_GRID: usize = 2001;

/// Grid coordinates in metres: `nx` points across the width and `ny` up the height, edges
/// included. A long strip has no height: its grid runs from the bottom to one width up,
/// where the field has relaxed to within `e^{-π}` (4 %) of its far value.
pub fn grid_coordinates(shape: &Shape, nx: usize, ny: usize) -> (Vec<f64>, Vec<f64>) {
    let w = shape.width();
    let h = shape.height().unwrap_or(w);
    let lin = |len: f64, n: usize| (0..n).map(|i| len * i as f64 / (n - 1) as f64).collect();
    (lin(w, nx), lin(h, ny))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn strip_grid_is_one_width_deep() {
        let (xs, ys) = grid_coordinates(&Shape::Strip { width_m: 0.04 }, 5, 3);
        assert_eq!(xs.len(), 5);
        assert_eq!(ys, vec![0.0, 0.02, 0.04]);
    }
}
