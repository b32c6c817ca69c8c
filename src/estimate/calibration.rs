//! Calibration studies: how often the bands and intervals contain a known truth.
//!
//! A study simulates readings from known edge profiles with many seeded noise draws, runs the
//! estimate on each, and counts how often the truth lies inside what the estimate reports.
//! The tests use it to hold the bands to their stated confidence, and `docs/calibration.md`
//! records the figures that chose the defaults (`docs/calibration.md`).

use crate::case::Case;
use crate::error::Result;
use crate::estimate::{EstimateOptions, estimate};
use crate::geometry::{Edge, EdgeProfile};
use crate::simulate::{add_noise, exact_readings, truth_model};
use serde::Serialize;

/// Coverage figures of one study (fractions in 0..1; temperatures in kelvin).
#[derive(Debug, Clone, Default, Serialize)]
pub struct Coverage {
    /// Noise draws.
    pub draws: usize,
    /// Share of profile points inside the pointwise band, averaged over draws.
    pub pointwise: f64,
    /// Same for the linear (Gaussian) band.
    pub linear: f64,
    /// Share of draws whose whole truth lies inside the simultaneous band.
    pub simultaneous: f64,
    /// Share of draws whose true hottest temperature lies inside its interval.
    pub hottest_temperature: f64,
    /// Share of draws whose true hottest position lies inside its interval.
    pub hottest_position: f64,
    /// Root-mean-square profile error, averaged over draws, kelvin.
    pub rmse: f64,
    /// Mean error of the hottest temperature (estimate − truth), kelvin.
    pub peak_bias: f64,
    /// Mean width of the pointwise band, kelvin.
    pub band_width: f64,
    /// Share of draws in which a sensor was flagged.
    pub flagged: f64,
}

/// Run `draws` noise draws of standard deviation `sigma_k` on the truth `truths` for the
/// plate and sensors of `case`, and count coverage. Draw `k` uses noise seed
/// `seed + k` and bootstrap seed `seed + k` as well.
pub fn coverage_study(
    case: &Case,
    truths: &[(Edge, EdgeProfile)],
    sigma_k: f64,
    draws: usize,
    seed: u64,
    options: &EstimateOptions,
) -> Result<Coverage> {
    let model = truth_model(&case.plate, truths)?;
    let points: Vec<_> = case.sensors.iter().map(|s| s.position).collect();
    let exact = exact_readings(&model, &points)?;
    let mut cov = Coverage {
        draws,
        ..Coverage::default()
    };
    for k in 0..draws {
        let noisy = add_noise(&exact, sigma_k, seed.wrapping_add(k as u64))?;
        let readings: Vec<Option<f64>> = noisy.into_iter().map(Some).collect();
        let opts = EstimateOptions {
            seed: Some(seed.wrapping_add(k as u64)),
            ..options.clone()
        };
        let r = estimate(case, &readings, &opts, None)?;
        let (mut inside, mut inside_lin, mut n, mut sq, mut width) = (0, 0, 0, 0.0, 0.0);
        let mut all_inside = true;
        let (mut t_max, mut s_max) = (f64::NEG_INFINITY, (Edge::Bottom, 0.0));
        for e in &r.edges {
            let truth = &truths
                .iter()
                .find(|(te, _)| *te == e.edge)
                .expect("truth per edge")
                .1;
            for (j, &s) in e.positions.iter().enumerate() {
                let t = truth.value(s);
                if t > t_max {
                    t_max = t;
                    s_max = (e.edge, s);
                }
                inside += usize::from(t >= e.lower[j] && t <= e.upper[j]);
                inside_lin += usize::from(t >= e.linear_lower[j] && t <= e.linear_upper[j]);
                all_inside &= t >= e.simultaneous_lower[j] && t <= e.simultaneous_upper[j];
                sq += (e.estimate[j] - t).powi(2);
                width += e.upper[j] - e.lower[j];
                n += 1;
            }
        }
        let h = &r.hottest;
        cov.pointwise += inside as f64 / n as f64;
        cov.linear += inside_lin as f64 / n as f64;
        cov.simultaneous += f64::from(u8::from(all_inside));
        cov.hottest_temperature += f64::from(u8::from(
            t_max >= h.temperature_interval[0] && t_max <= h.temperature_interval[1],
        ));
        cov.hottest_position += f64::from(u8::from(
            s_max.0 == h.edge
                && s_max.1 >= h.position_interval[0]
                && s_max.1 <= h.position_interval[1],
        ));
        cov.rmse += (sq / n as f64).sqrt();
        cov.peak_bias += h.temperature - t_max;
        cov.band_width += width / n as f64;
        cov.flagged += f64::from(u8::from(r.sensors.iter().any(|s| s.flag.is_some())));
    }
    let d = draws.max(1) as f64;
    for v in [
        &mut cov.pointwise,
        &mut cov.linear,
        &mut cov.simultaneous,
        &mut cov.hottest_temperature,
        &mut cov.hottest_position,
        &mut cov.rmse,
        &mut cov.peak_bias,
        &mut cov.band_width,
        &mut cov.flagged,
    ] {
        *v /= d;
    }
    Ok(cov)
}
