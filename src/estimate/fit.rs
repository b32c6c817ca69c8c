//! The fault model: the search for suspect sensors by leave-one-out prediction. The fit
//! itself ([`fit`], [`FitInput`], [`Fit`]) lives in [`crate::inverse::fit`], below the
//! uncertainty that reuses it, and is re-exported here.
//!
//! ## Suspect sensors
//! Each reading is predicted from a fit to all the others and compared with two explanations:
//! a working sensor, whose reading follows the predictive distribution of the other readings'
//! fit, and a faulty one (open or shorted junction, a lead on the wrong channel, a sensor
//! fallen out of its hole), whose reading may be off by anything up to
//! [`FAULT_RANGE_K`] either way, uniformly. The predictive distribution of a working sensor is
//! averaged over the smoothing strength, weighting each strength by the marginal likelihood
//! of the other readings (module [`crate::inverse`], flat prior on `log λ`):
//!
//! `p(d_i | d₋ᵢ) = Σ_λ w(λ) N(d_i; a_i ĉ₋ᵢ(λ), σ_i² + a_i C₋ᵢ(λ) a_iᵀ)`.
//!
//! Averaging over the strength is what keeps a real but narrow feature, seen by only one or
//! two sensors, from looking like a fault: a single strength chosen without that sensor is
//! too smooth to predict it, while rougher strengths that the other readings still allow give
//! it room (integrating over hyperparameters: MacKay 1992, Neural Comput. 4:415–447). With a
//! prior fault probability of [`FAULT_PRIOR`] per sensor, the posterior probability of a
//! fault is `π p_f / (π p_f + (1 − π) p(d_i | d₋ᵢ))` with `p_f = 1/(2 R)`. The sensor with the
//! highest probability is flagged when it exceeds [`FAULT_POSTERIOR`], left out, the case
//! refitted and the search repeated, at most until a quarter of the sensors are out. The
//! numbers are design choices of this project, not from a standard: a fault is rare, and a
//! flag must be near-certain, because dropping the one sensor that sees a hot spot hides the
//! hot spot.
//!
//! `sensors.csv` reports the standardised leave-one-out residual: the normal score with the
//! same two-sided tail probability under `p(d_i | d₋ᵢ)`, signed like the residual.

pub use crate::inverse::fit::{Fit, FitInput, fit, select_options};

use crate::inverse::{
    Decomposition, EvidenceKind, Problem, SelectOptions, Strength, StrengthMethod,
};
use nalgebra::DVector;
use rayon::prelude::*;
use statrs::distribution::{ContinuousCDF, Normal};
use statrs::function::erf::erfc;

/// Half-width of the uniform distribution of a faulty reading's error, kelvin.
pub const FAULT_RANGE_K: f64 = 50.0;

/// Prior probability that any one sensor is faulty.
pub const FAULT_PRIOR: f64 = 0.01;

/// Posterior fault probability above which a sensor is flagged and left out.
pub const FAULT_POSTERIOR: f64 = 0.99;

/// Posterior probability that a sensor is faulty (module doc), given the density `good`
/// (per kelvin) of its reading under the working-sensor model: `π p_f / (π p_f + (1 − π)
/// good)` with the prior `π` = [`FAULT_PRIOR`] and the faulty density `p_f = 1/(2R)`,
/// `R` = [`FAULT_RANGE_K`]. The one place the fault model's posterior is written.
#[inline]
pub fn fault_posterior(good: f64) -> f64 {
    let fault = FAULT_PRIOR / (2.0 * FAULT_RANGE_K);
    fault / (fault + (1.0 - FAULT_PRIOR) * good)
}

/// Leave-one-out verdict on one reading.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LooVerdict {
    /// Standardised leave-one-out residual (normal score of the two-sided tail probability).
    pub z: f64,
    /// Posterior probability that the sensor is faulty.
    pub fault_probability: f64,
}

/// The input without row `i`.
pub(crate) fn without_row(input: &FitInput, i: usize) -> FitInput {
    let keep: Vec<usize> = (0..input.d.len()).filter(|&k| k != i).collect();
    FitInput {
        a: input.a.select_rows(&keep),
        d: input.d.select_rows(&keep),
        sigma: input.sigma.select_rows(&keep),
        sigma_stated: input.sigma_stated,
        penalty: input.penalty.clone(),
    }
}

/// Standardised leave-one-out residuals (module doc), one per reading; `None` for a reading
/// whose leave-one-out fit is not possible (too few readings left).
///
/// The prediction of reading `i` from the others is averaged over the strength: with the
/// known-σ marginal likelihood `p(d₋ᵢ | λ)` of the other readings as the weight of each `λ` on
/// the log grid (a flat prior on `log λ`), the two-sided tail probability of the reading is
/// `P_i = Σ_λ w(λ) · 2 Φ(−|d_i − â_i ĉ₋ᵢ(λ)| / s_i(λ))`, `s_i² = σ_i² + a_i C₋ᵢ(λ) a_iᵀ`, and the
/// returned value is the normal score with the same tail probability, signed like the
/// residual. Averaging matters: with a single plug-in strength, a real but narrow feature
/// seen by only one or two sensors looks like an outlier, because the strength chosen without
/// that sensor is too smooth; the marginal likelihood still gives rougher strengths weight
/// when the remaining readings allow them (MacKay 1992, Neural Comput. 4:415–447, on
/// integrating over hyperparameters). A fixed strength is used as it is.
///
/// The readings' leave-one-out fits are independent of one another: they run in parallel
/// (rayon), each the same computation as [`loo_one`], collected in the readings' order.
pub fn loo_residuals(input: &FitInput, strength: Strength) -> Vec<Option<LooVerdict>> {
    (0..input.d.len())
        .into_par_iter()
        .map(|i| loo_one(input, strength, i))
        .collect()
}

/// Entry `i` of [`loo_residuals`] alone (one decomposition instead of one per reading).
pub fn loo_one(input: &FitInput, strength: Strength, i: usize) -> Option<LooVerdict> {
    let rest = without_row(input, i);
    let problem = Problem::new(
        rest.a.clone(),
        rest.d.clone(),
        rest.sigma.clone(),
        rest.penalty.clone(),
        true,
    )
    .ok()?;
    let dec = Decomposition::new(&problem).ok()?;
    let proj = dec.data_projection();
    let opts = SelectOptions {
        evidence: Some(EvidenceKind::KnownSigma),
        keep_curve: false,
        ..SelectOptions::default()
    };
    let (lambdas, weights): (Vec<f64>, Vec<f64>) = match strength {
        Strength::Fixed(l) => (vec![l], vec![1.0]),
        Strength::Rule(_) => {
            let grid = dec.lambda_grid(&opts)?;
            let lams: Vec<f64> = grid.iter().map(|l| 10f64.powf(*l)).collect();
            let crit: Vec<f64> = lams
                .iter()
                .map(|&l| dec.criterion(proj, StrengthMethod::Evidence, l, &opts))
                .collect();
            let best = crit
                .iter()
                .copied()
                .filter(|c| c.is_finite())
                .fold(f64::INFINITY, f64::min);
            if !best.is_finite() {
                return None;
            }
            lams.into_iter()
                .zip(crit)
                .map(|(l, c)| (l, (-0.5 * (c - best)).exp()))
                .filter(|&(_, w)| w > 1e-10)
                .unzip()
        }
    };
    let a_i = input.a.row(i).transpose();
    let vars = dec.predictive_variances(&a_i, &lambdas).ok()?;
    let mut c = DVector::zeros(input.a.ncols());
    let (mut tail, mut wsum, mut zsum, mut resid_sum, mut dens) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for ((&lam, &w), var) in lambdas.iter().zip(&weights).zip(vars) {
        dec.coefficients_into(proj, lam, &mut c).ok()?;
        let resid = input.d[i] - a_i.dot(&c);
        let sd = (input.sigma[i].powi(2) + var.max(0.0)).sqrt();
        let x = resid.abs() / sd;
        tail += w * erfc(x / std::f64::consts::SQRT_2);
        dens += w * (-0.5 * x * x).exp() / (sd * (2.0 * std::f64::consts::PI).sqrt());
        zsum += w * x;
        resid_sum += w * resid;
        wsum += w;
    }
    let p = tail / wsum;
    let z = if p > 1e-300 {
        -Normal::standard().inverse_cdf(0.5 * p)
    } else {
        zsum / wsum
    };
    Some(LooVerdict {
        z: z.copysign(resid_sum),
        fault_probability: fault_posterior(dens / wsum),
    })
}
