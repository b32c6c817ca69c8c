//! Step 1 of an estimate: the problem to fit.
//!
//! The forward model of the case, the sensors that have a reading, their uncertainties, the
//! strength rule and the smoothing order (chosen by evidence when the case says `auto`), and
//! the linear maps of the edge profiles, which the fault search needs before the fit.

use super::{
    EstimateOptions, case_model, choose_order, penalty, profile_positions, resolve_sigmas,
    strength_of, too_few_readings, unpenalised_count,
};
use crate::case::{Case, Smoothing};
use crate::error::{Error, Result};
use crate::forward::{ForwardModel, LinearMap};
use crate::geometry::{Edge, Point};
use crate::inverse::fit::FitInput;
use crate::inverse::{Strength, StrengthMethod};
use crate::noise::SigmaSource;
use nalgebra::DVector;

/// What an estimate fits, before any sensor is left out.
pub(super) struct Problem<'a> {
    pub case: &'a Case,
    /// Readings, kelvin, aligned with `case.sensors`.
    pub readings: &'a [Option<f64>],
    pub model: ForwardModel,
    /// Every sensor's position (indexed like `case.sensors`).
    pub points: Vec<Point>,
    /// The sensor map of every sensor.
    pub full_map: LinearMap,
    /// The sensors that have a reading (indices into `case.sensors`).
    pub with_reading: Vec<usize>,
    /// Number of coefficients no penalty touches.
    pub q_null: usize,
    /// Reading uncertainty of every sensor with a reading, kelvin (NaN for the others).
    pub sigma_of: Vec<f64>,
    pub sigma_source: SigmaSource,
    /// Whether the uncertainty was stated (else estimated from the residuals).
    pub stated: bool,
    pub strength: Strength,
    /// The smoothing order used (chosen when the case says `auto`).
    pub order: usize,
    pub penalty: DVector<f64>,
    /// Profile positions along every unknown edge ([`profile_positions`]) and their maps
    /// (both empty in a problem built by [`Problem::without_edge_maps`]).
    pub edge_positions: Vec<(Edge, Vec<f64>)>,
    pub edge_maps: Vec<LinearMap>,
}

impl<'a> Problem<'a> {
    /// Build the problem; refuses too few readings and the discrepancy rule without a
    /// stated uncertainty.
    pub fn new(
        case: &'a Case,
        readings: &'a [Option<f64>],
        options: &EstimateOptions,
    ) -> Result<Self> {
        Problem::with_model(case, readings, options, case_model(case)?)
    }

    /// [`Problem::new`] with the case's forward model already built (it must be
    /// [`case_model`] of `case`), for callers that fit many readings on one model.
    pub fn with_model(
        case: &'a Case,
        readings: &'a [Option<f64>],
        options: &EstimateOptions,
        model: ForwardModel,
    ) -> Result<Self> {
        let edge_positions = profile_positions(case);
        // the profile maps depend on the model alone: made while the order is chosen
        let (problem, edge_maps) = rayon::join(
            || Problem::without_edge_maps(case, readings, options, model.clone()),
            || {
                edge_positions
                    .iter()
                    .map(|(e, pos)| model.edge_profile_map(*e, pos))
                    .collect()
            },
        );
        let mut problem = problem?;
        problem.edge_positions = edge_positions;
        problem.edge_maps = edge_maps;
        Ok(problem)
    }

    /// [`Problem::with_model`] without the edge profiles' maps (`edge_positions` and
    /// `edge_maps` left empty), for callers that only fit the readings ([`Problem::input`]):
    /// the profile over an unknown `h` builds a problem for every `h` it tries, and the maps
    /// (hundreds of points per edge) were a fifth of its time.
    pub fn without_edge_maps(
        case: &'a Case,
        readings: &'a [Option<f64>],
        options: &EstimateOptions,
        model: ForwardModel,
    ) -> Result<Self> {
        let with_reading: Vec<usize> = (0..case.sensors.len())
            .filter(|&i| readings.get(i).copied().flatten().is_some())
            .collect();
        let q_null = unpenalised_count(&model);
        if with_reading.len() <= q_null + 1 {
            return Err(too_few_readings(case, with_reading.len(), q_null));
        }
        let points: Vec<Point> = case.sensors.iter().map(|s| s.position).collect();
        let full_map = model.sensor_map(&points);
        let order = case.fit.smoothing.order().unwrap_or(2);
        let penalty = penalty::penalty_weights(&model, order);
        let strength = strength_of(options.strength.unwrap_or(case.fit.strength));

        let (sigma_of, sigma_source) = resolve_sigmas(case, &with_reading, readings)?;
        let stated = sigma_source != SigmaSource::Estimated;
        if strength == Strength::Rule(StrengthMethod::Discrepancy) && !stated {
            return Err(Error::invalid_at(
                &case.files.plate,
                None,
                Some(if options.strength.is_some() {
                    "option.strength"
                } else {
                    "fit.strength"
                }),
                "the discrepancy principle needs the reading uncertainty: add [noise] sigma, a \
                 tolerance class or a sigma column in sensors.csv, or choose another rule",
            ));
        }
        let mut problem = Problem {
            case,
            readings,
            model,
            points,
            full_map,
            with_reading,
            q_null,
            sigma_of,
            sigma_source,
            stated,
            strength,
            order,
            penalty,
            edge_positions: Vec::new(),
            edge_maps: Vec::new(),
        };
        if case.fit.smoothing == Smoothing::Auto {
            problem.order = choose_order(&problem.input(&problem.with_reading), &problem.model)?;
            problem.penalty = penalty::penalty_weights(&problem.model, problem.order);
        }
        Ok(problem)
    }

    /// The fit input for the sensors `rows` (indices into `case.sensors`).
    pub fn input(&self, rows: &[usize]) -> FitInput {
        FitInput {
            a: self.full_map.matrix.select_rows(rows),
            d: DVector::from_iterator(
                rows.len(),
                rows.iter()
                    .map(|&i| self.readings[i].unwrap_or(0.0) - self.full_map.offset[i]),
            ),
            sigma: DVector::from_iterator(rows.len(), rows.iter().map(|&i| self.sigma_of[i])),
            sigma_stated: self.stated,
            penalty: self.penalty.clone(),
        }
    }
}
