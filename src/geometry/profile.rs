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

    /// A periodic piecewise-linear profile along a closed edge of length `period` (a circle):
    /// knots at positions in `[0, period)`, strictly increasing; between the last knot and
    /// the first one (through `period ≡ 0`) the profile runs linearly, wrapping round. The
    /// result spans `[0, period]` with equal values at both ends (a knot is added at 0 and at
    /// `period` when the data lack them).
    pub fn periodic(
        positions: Vec<f64>,
        temperatures: Vec<f64>,
        period: f64,
    ) -> Result<Self, String> {
        let open = Self::piecewise_linear(positions, temperatures)?;
        let (p, t) = (&open.positions, &open.temperatures);
        let n = p.len();
        if n == 1 {
            return Ok(open);
        }
        if p[0] < 0.0 || p[n - 1] >= period {
            return Err(format!(
                "a profile round a circle takes angles from 0 up to (not including) 360 degrees; \
                 this one runs from {:.6} to {:.6} of {:.6} (in arc length)",
                p[0],
                p[n - 1],
                period
            ));
        }
        // the value at 0 ≡ period, on the wrapping segment from the last knot to the first
        let gap = p[0] + period - p[n - 1];
        let at_zero = t[n - 1] + (t[0] - t[n - 1]) * (period - p[n - 1]) / gap;
        let mut positions = Vec::with_capacity(n + 2);
        let mut temps = Vec::with_capacity(n + 2);
        if p[0] > 0.0 {
            positions.push(0.0);
            temps.push(at_zero);
        }
        positions.extend_from_slice(p);
        temps.extend_from_slice(t);
        positions.push(period);
        temps.push(if p[0] > 0.0 { at_zero } else { t[0] });
        Self::piecewise_linear(positions, temps)
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
    fn periodic_profile_wraps_through_zero() {
        // knots at 90 and 270 (of a 360 period): the value at 0 is halfway along the wrapping
        // segment from 270 to 450
        let p = EdgeProfile::periodic(vec![90.0, 270.0], vec![10.0, 30.0], 360.0).unwrap();
        assert_eq!(p.value(0.0), 20.0);
        assert_eq!(p.value(360.0), 20.0);
        assert_eq!(p.value(315.0), 25.0);
        assert_eq!(p.value(45.0), 15.0);
        assert!(p.check_spans(360.0).is_ok());
        assert!(EdgeProfile::periodic(vec![0.0, 360.0], vec![1.0, 1.0], 360.0).is_err());
        let q = EdgeProfile::periodic(vec![0.0, 180.0], vec![1.0, 3.0], 360.0).unwrap();
        assert_eq!(q.value(360.0), 1.0);
        assert_eq!(q.value(270.0), 2.0);
    }

    #[test]
    fn rejects_bad_knots() {
        assert!(EdgeProfile::piecewise_linear(vec![0.0, 0.0], vec![1.0, 2.0]).is_err());
        assert!(EdgeProfile::piecewise_linear(vec![0.0, f64::NAN], vec![1.0, 2.0]).is_err());
        assert!(EdgeProfile::piecewise_linear(vec![], vec![]).is_err());
    }
}
