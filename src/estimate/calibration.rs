//! Calibration studies: how often the bands and intervals contain a known truth.
//!
//! A study simulates readings from known edge profiles with many seeded noise draws, runs the
//! estimate on each, and counts how often the truth lies inside what the estimate reports.
//! The tests use it to hold the bands to their stated confidence, and `docs/calibration.md`
//! records the figures that chose the defaults (`docs/calibration.md`).

use crate::case::Case;
use crate::error::{Error, Result};
use crate::estimate::convection::ConvectionEstimate;
use crate::estimate::{EstimateOptions, estimate};
use crate::forward::ForwardModel;
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
    /// Share of profile points inside the pointwise band in each draw (the single cases
    /// behind [`Coverage::pointwise`]), in draw order.
    pub pointwise_draws: Vec<f64>,
}

impl Coverage {
    /// The lowest pointwise coverage of any single draw.
    pub fn pointwise_worst(&self) -> f64 {
        self.pointwise_draws
            .iter()
            .copied()
            .fold(f64::INFINITY, f64::min)
    }

    /// Share of draws whose pointwise coverage is at least `at_least`.
    pub fn pointwise_share_at_least(&self, at_least: f64) -> f64 {
        self.pointwise_draws
            .iter()
            .filter(|&&c| c >= at_least)
            .count() as f64
            / self.pointwise_draws.len().max(1) as f64
    }
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
    Ok(study(case, &model, truths, sigma_k, draws, seed, options)?.0)
}

/// Coverage figures of a study on a case whose convective edge has `h = "unknown"`, with
/// every draw's estimate of `h`.
#[derive(Debug, Clone, Serialize)]
pub struct HCoverage {
    /// The true heat transfer coefficient the readings were simulated with, W/(m² K).
    pub true_h: f64,
    /// Coverage of the bands and intervals, as [`coverage_study`] counts it.
    pub coverage: Coverage,
    /// The estimate of `h` in every draw, in draw order.
    pub estimates: Vec<ConvectionEstimate>,
}

impl HCoverage {
    /// Share of draws whose `h` interval holds the true `h`.
    pub fn interval_coverage(&self) -> f64 {
        share(&self.estimates, |c| {
            c.h_interval[0] <= self.true_h && self.true_h <= c.h_interval[1]
        })
    }

    /// Share of draws whose `h` interval reaches the search range on at least one side.
    pub fn open(&self) -> f64 {
        share(&self.estimates, |c| c.open_below || c.open_above)
    }

    /// Share of draws whose `h` interval is the whole search range (`h` not identified).
    pub fn not_identified(&self) -> f64 {
        share(&self.estimates, |c| !c.identified())
    }

    /// Median of `ĥ / h_true` over the draws.
    pub fn median_ratio(&self) -> f64 {
        median(self.estimates.iter().map(|c| c.h / self.true_h).collect())
    }

    /// Median of the interval's width ratio `hi / lo` over the draws (1 is a point).
    pub fn median_width_ratio(&self) -> f64 {
        median(
            self.estimates
                .iter()
                .map(|c| c.h_interval[1] / c.h_interval[0])
                .collect(),
        )
    }
}

fn share(v: &[ConvectionEstimate], f: impl Fn(&ConvectionEstimate) -> bool) -> f64 {
    v.iter().filter(|c| f(c)).count() as f64 / v.len().max(1) as f64
}

fn median(mut v: Vec<f64>) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

/// [`coverage_study`] for a case whose convective edge has `h = "unknown"`: the readings are
/// simulated with that edge's `h` set to `true_h` (W/(m² K)), and estimated with `h` unknown,
/// so every draw profiles `h` and widens its bands ([`crate::estimate::convection`]).
///
/// # Errors
/// [`Error::Invalid`] when the case has no unknown `h`; errors of the estimate.
pub fn coverage_study_unknown_h(
    case: &Case,
    true_h: f64,
    truths: &[(Edge, EdgeProfile)],
    sigma_k: f64,
    draws: usize,
    seed: u64,
    options: &EstimateOptions,
) -> Result<HCoverage> {
    let Some(&(edge, ..)) = case.plate.unknown_heat_transfer().first() else {
        return Err(Error::invalid_field(
            "edges",
            "the study needs a convective edge with h = \"unknown\"",
        ));
    };
    let model = truth_model(&case.plate.with_heat_transfer(edge, true_h)?, truths)?;
    let (coverage, estimates) = study(case, &model, truths, sigma_k, draws, seed, options)?;
    Ok(HCoverage {
        true_h,
        coverage,
        estimates,
    })
}

/// The draws of a study with readings from the truth `model`: the coverage and every draw's
/// estimates of an unknown `h` (empty when every `h` is known).
fn study(
    case: &Case,
    model: &ForwardModel,
    truths: &[(Edge, EdgeProfile)],
    sigma_k: f64,
    draws: usize,
    seed: u64,
    options: &EstimateOptions,
) -> Result<(Coverage, Vec<ConvectionEstimate>)> {
    let mut estimates = Vec::new();
    let points: Vec<_> = case.sensors.iter().map(|s| s.position).collect();
    let exact = exact_readings(model, &points)?;
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
        estimates.extend(r.convection.iter().cloned());
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
        cov.pointwise_draws.push(inside as f64 / n as f64);
        cov.linear += inside_lin as f64 / n as f64;
        cov.simultaneous += f64::from(u8::from(all_inside));
        cov.hottest_temperature += f64::from(u8::from(
            t_max >= h.temperature_interval[0] && t_max <= h.temperature_interval[1],
        ));
        cov.hottest_position += f64::from(u8::from(
            s_max.0 == h.edge
                && r.plate
                    .shape()
                    .interval_contains(h.edge, h.position_interval, s_max.1),
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
    Ok((cov, estimates))
}
