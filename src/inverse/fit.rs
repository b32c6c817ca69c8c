//! One regularised fit of a weighted problem with a strength rule: the step every estimate,
//! bootstrap replicate and logger row shares.
//!
//! A fit builds the weighted [`Problem`] from the sensor map, chooses the strength by the
//! case's rule, and solves. When no reading uncertainty was stated, a first fit with unit
//! weights gives the noise estimate `σ̂² = χ²/(m − tr H)` and the fit is redone with
//! `σ = σ̂` (the solution is unchanged, but covariances and bootstrap noise then carry the
//! right scale).

use super::{Decomposition, Problem, SelectOptions, Selection, Solution, Strength};
use crate::error::{Error, Result};
use nalgebra::{DMatrix, DVector};

/// The inputs of a fit, all for the readings in use.
#[derive(Debug, Clone)]
pub struct FitInput {
    /// Sensor map rows (m × p).
    pub a: DMatrix<f64>,
    /// Readings minus the known offset, kelvin.
    pub d: DVector<f64>,
    /// Standard uncertainties, kelvin (relative weights when not stated).
    pub sigma: DVector<f64>,
    /// Whether `sigma` was stated (else it is estimated from the residuals).
    pub sigma_stated: bool,
    /// The penalty diagonal.
    pub penalty: DVector<f64>,
}

/// A finished fit.
#[derive(Debug, Clone)]
pub struct Fit {
    /// The readings' standard uncertainties used, kelvin (scaled by σ̂ when estimated).
    pub sigma: DVector<f64>,
    /// The decomposition of the weighted problem.
    pub decomposition: Decomposition,
    /// How the strength was chosen.
    pub selection: Selection,
    /// The solution at the chosen strength.
    pub solution: Solution,
    /// The noise scale σ̂ when estimated (None when stated).
    pub sigma_scale: Option<f64>,
}

/// Options passed to the strength search in every fit of a case.
pub fn select_options(keep_curve: bool) -> SelectOptions {
    SelectOptions {
        keep_curve,
        ..SelectOptions::default()
    }
}

/// Fit `input` with the strength rule `strength`.
pub fn fit(input: &FitInput, strength: Strength) -> Result<Fit> {
    let problem = Problem::new(
        input.a.clone(),
        input.d.clone(),
        input.sigma.clone(),
        input.penalty.clone(),
        input.sigma_stated,
    )?;
    let decomposition = Decomposition::new(&problem)?;
    let selection = decomposition.select(strength, &select_options(true))?;
    let solution = decomposition.solve(selection.lambda)?;
    if input.sigma_stated {
        return Ok(Fit {
            sigma: input.sigma.clone(),
            decomposition,
            selection,
            solution,
            sigma_scale: None,
        });
    }
    let scale2 = solution.sigma2_estimate().ok_or_else(|| {
        Error::invalid_field(
            "noise",
            "no reading uncertainty is stated and the fit leaves no residual degrees of \
             freedom to estimate it from: state [noise] sigma, or add sensors",
        )
    })?;
    let scale = scale2.sqrt().max(1e-9);
    let sigma = &input.sigma * scale;
    let problem = Problem::new(
        input.a.clone(),
        input.d.clone(),
        sigma.clone(),
        input.penalty.clone(),
        false,
    )?;
    let decomposition = Decomposition::new(&problem)?;
    let selection = match strength {
        // a fixed strength is stated against unit weights: rescale it with the weights
        Strength::Fixed(l) => {
            decomposition.select(Strength::Fixed(l / scale2), &select_options(true))?
        }
        rule => decomposition.select(rule, &select_options(true))?,
    };
    let solution = decomposition.solve(selection.lambda)?;
    Ok(Fit {
        sigma,
        decomposition,
        selection,
        solution,
        sigma_scale: Some(scale),
    })
}
