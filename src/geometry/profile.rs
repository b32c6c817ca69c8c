//! A temperature profile along an edge: piecewise linear between given points.

use serde::{Deserialize, Serialize};

/// A temperature profile along an edge, piecewise linear through `(position, temperature)`
/// knots (metres, kelvin). A constant profile has a single knot.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EdgeProfile {
    positions: Vec<f64>,
    temperatures: Vec<f64>,
}

/// Positions closer than this fraction of the edge length to its ends count as the ends
/// when checking that a profile spans its edge (rounding in a CSV file, say).
const SPAN_TOLERANCE: f64 = 1e-9;

impl EdgeProfile {
    /// A constant temperature (kelvin).
    pub fn constant(temperature: f64) -> Self {
        EdgeProfile {
            positions: vec![0.0],
            temperatures: vec![temperature],
        }
    }

    /// A piecewise-linear profile through the knots. Positions must be finite and strictly
    /// increasing, temperatures finite; at least one knot.
    pub fn piecewise_linear(positions: Vec<f64>, temperatures: Vec<f64>) -> Result<Self, String> {
        if positions.is_empty() || positions.len() != temperatures.len() {
            return Err("a profile needs at least one (position, temperature) pair".into());
        }
        if positions
            .iter()
            .chain(&temperatures)
            .any(|v| !v.is_finite())
        {
            return Err("a profile's positions and temperatures must be finite numbers".into());
        }
        if positions.windows(2).any(|w| w[1] <= w[0]) {
            return Err("a profile's positions must be strictly increasing".into());
        }
        Ok(EdgeProfile {
            positions,
            temperatures,
        })
    }

    /// Whether the profile is a single constant.
    #[allow(clippy::float_cmp)] // a constant profile is one whose values are all the same number
    pub fn is_constant(&self) -> bool {
        self.temperatures.len() == 1 || self.temperatures.windows(2).all(|w| w[0] == w[1])
    }

    /// The knots' positions (metres).
    pub fn positions(&self) -> &[f64] {
        &self.positions
    }

    /// The knots' temperatures (kelvin).
    pub fn temperatures(&self) -> &[f64] {
        &self.temperatures
    }

    /// Check that a non-constant profile covers `[0, length]`.
    pub fn check_spans(&self, length: f64) -> Result<(), String> {
        if self.positions.len() == 1 {
            return Ok(());
        }
        let tol = SPAN_TOLERANCE * length;
        let first = self.positions[0];
        let last = *self.positions.last().expect("non-empty");
        if first > tol || last < length - tol {
            return Err(format!(
                "the profile covers positions {first} to {last} m but the edge runs from 0 to \
                 {length} m; give points at both ends of the edge"
            ));
        }
        if first < -tol || last > length + tol {
            return Err(format!(
                "the profile has positions outside the edge (0 to {length} m): {first} to {last}"
            ));
        }
        Ok(())
    }

    /// Temperature at `s` (kelvin), linear between knots, constant beyond the end knots.
    pub fn value(&self, s: f64) -> f64 {
        let p = &self.positions;
        let t = &self.temperatures;
        if p.len() == 1 || s <= p[0] {
            return t[0];
        }
        let n = p.len();
        if s >= p[n - 1] {
            return t[n - 1];
        }
        let j = p.partition_point(|&q| q <= s); // p[j-1] <= s < p[j]
        let (a, b) = (p[j - 1], p[j]);
        t[j - 1] + (t[j] - t[j - 1]) * (s - a) / (b - a)
    }

    /// The profile as linear segments `(s0, s1, t0, t1)` covering `[0, length]` (a constant
    /// profile, or one whose end knots sit inside the interval, is extended flat).
    pub fn segments(&self, length: f64) -> Vec<(f64, f64, f64, f64)> {
        let mut knots: Vec<(f64, f64)> = vec![(0.0, self.value(0.0))];
        for (&s, &t) in self.positions.iter().zip(&self.temperatures) {
            if s > 0.0 && s < length {
                knots.push((s, t));
            }
        }
        knots.push((length, self.value(length)));
        knots
            .windows(2)
            .filter(|w| w[1].0 > w[0].0)
            .map(|w| (w[0].0, w[1].0, w[0].1, w[1].1))
            .collect()
    }
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;

    #[test]
    fn interpolates_and_extends() {
        let p = EdgeProfile::piecewise_linear(vec![0.0, 1.0, 2.0], vec![10.0, 20.0, 0.0]).unwrap();
        assert_eq!(p.value(0.5), 15.0);
        assert_eq!(p.value(1.5), 10.0);
        assert_eq!(p.value(-1.0), 10.0);
        assert_eq!(p.value(3.0), 0.0);
        assert_eq!(p.segments(2.0).len(), 2);
        assert!(p.check_spans(2.0).is_ok());
        assert!(p.check_spans(3.0).is_err());
    }

    #[test]
    fn rejects_bad_knots() {
        assert!(EdgeProfile::piecewise_linear(vec![0.0, 0.0], vec![1.0, 2.0]).is_err());
        assert!(EdgeProfile::piecewise_linear(vec![0.0, f64::NAN], vec![1.0, 2.0]).is_err());
        assert!(EdgeProfile::piecewise_linear(vec![], vec![]).is_err());
    }
}
