//! Synthetic readings from a known edge profile: the forward model run as a simulator.
//!
//! The unknown edges are fixed at the given truth profiles and the resulting plate is solved
//! with the known-edge series (many terms, exact Fourier coefficients of the piecewise-linear
//! truth), so a simulation is as accurate as the forward model itself and independent of the
//! number of terms the inversion will use. Noise is Gaussian with the stated standard
//! deviation, drawn in sensor order from a ChaCha8 generator seeded with the given seed: the
//! same seed gives the same readings on every machine.

use crate::error::Result;
use crate::forward::{ForwardModel, SeriesOptions};
use crate::geometry::{Edge, EdgeProfile, Plate, Point};
use nalgebra::DMatrix;
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::Normal;

/// The true plate behind a simulation: `plate` with each unknown edge fixed at its truth.
///
/// # Errors
/// [`crate::Error::Invalid`] when a convective edge's `h` is unknown: a simulation needs the
/// true `h` behind the readings.
pub fn truth_model(plate: &Plate, truths: &[(Edge, EdgeProfile)]) -> Result<ForwardModel> {
    if let Some((edge, ..)) = plate.unknown_heat_transfer().first() {
        return Err(crate::Error::invalid_field(
            format!("edges.{edge}.h"),
            format!(
                "a simulation needs the true heat transfer coefficient of the convective \
                 {edge} edge: state h = <W/(m^2 K)> (h = \"unknown\" is for estimate, design \
                 and track)"
            ),
        ));
    }
    let truth_plate = plate.with_unknowns_fixed(truths)?;
    ForwardModel::new(&truth_plate, SeriesOptions::default())
}

/// Exact (noise-free) temperatures at `points`, kelvin.
pub fn exact_readings(model: &ForwardModel, points: &[Point]) -> Result<Vec<f64>> {
    debug_assert_eq!(model.parameter_count(), 0, "a truth model has no unknowns");
    points.iter().map(|&p| model.temperature(&[], p)).collect()
}

/// Add independent Gaussian noise of standard deviation `sigma_k` (kelvin) to `values`,
/// reproducibly from `seed`. `sigma_k = 0` returns the values unchanged.
pub fn add_noise(values: &[f64], sigma_k: f64, seed: u64) -> Result<Vec<f64>> {
    if !(sigma_k.is_finite() && sigma_k >= 0.0) {
        return Err(crate::Error::invalid_field(
            "noise",
            format!("the noise level must be a finite number >= 0, not {sigma_k}"),
        ));
    }
    if sigma_k == 0.0 {
        return Ok(values.to_vec());
    }
    let normal = Normal::new(0.0, sigma_k).map_err(|e| {
        crate::Error::invalid_field("noise", format!("invalid noise level {sigma_k}: {e}"))
    })?;
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    Ok(values.iter().map(|v| v + rng.sample(normal)).collect())
}

/// The true field on a grid, `result[(j, i)] = T(xs[i], ys[j])`, kelvin.
pub fn true_field(model: &ForwardModel, xs: &[f64], ys: &[f64]) -> Result<DMatrix<f64>> {
    model.field_grid(&[], xs, ys)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn noise_is_reproducible_and_zero_noise_is_exact() {
        let v = vec![300.0, 310.0, 320.0];
        assert_eq!(add_noise(&v, 0.0, 3).unwrap(), v);
        let a = add_noise(&v, 0.5, 11).unwrap();
        let b = add_noise(&v, 0.5, 11).unwrap();
        let c = add_noise(&v, 0.5, 12).unwrap();
        assert_eq!(a, b);
        assert_ne!(a, c);
        assert!(add_noise(&v, -1.0, 1).is_err());
    }
}
