//! The field grid: where `field.csv` samples the plate (SPEC §3.3).

use crate::error::{Error, Result};
use crate::geometry::Shape;

/// Default grid size (SPEC §3.3).
pub const DEFAULT_GRID: (usize, usize) = (41, 41);

/// Largest grid accepted along one direction: beyond this a CSV of the field is no longer
/// something a person or a plotting script can use.
pub const MAX_GRID: usize = 2001;

/// Parse `--grid NX,NY` (each between 2 and [`MAX_GRID`]).
pub fn parse_grid(text: &str) -> Result<(usize, usize)> {
    let bad = || {
        Error::invalid_field(
            "--grid",
            format!("expected two whole numbers NX,NY between 2 and {MAX_GRID}, got `{text}`"),
        )
    };
    let (a, b) = text.split_once(',').ok_or_else(bad)?;
    let nx: usize = a.trim().parse().map_err(|_| bad())?;
    let ny: usize = b.trim().parse().map_err(|_| bad())?;
    if !(2..=MAX_GRID).contains(&nx) || !(2..=MAX_GRID).contains(&ny) {
        return Err(bad());
    }
    Ok((nx, ny))
}

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
    fn parses_and_rejects() {
        assert_eq!(parse_grid("41,21").unwrap(), (41, 21));
        assert_eq!(parse_grid(" 3 , 2 ").unwrap(), (3, 2));
        for bad in ["41", "1,5", "a,b", "5,99999", "-3,4", ""] {
            assert!(parse_grid(bad).is_err(), "{bad}");
        }
    }

    #[test]
    fn strip_grid_is_one_width_deep() {
        let (xs, ys) = grid_coordinates(&Shape::Strip { width_m: 0.04 }, 5, 3);
        assert_eq!(xs.len(), 5);
        assert_eq!(ys, vec![0.0, 0.02, 0.04]);
    }
}
