//! The main job: reconstruct the hidden edges and the field from one set of readings, with
//! uncertainty (README).
//!
//! [`estimate`] runs five named steps, one module each:
//! 1. `problem`: the forward model's sensor map for the sensors that have a reading, the
//!    reading uncertainties ([`crate::noise::reading_sigmas`]), the strength rule and the
//!    smoothing order;
//! 2. `faults`: the regularised fit with the case's strength rule ([`fit`]), the search for
//!    suspect sensors by leave-one-out prediction weighed against a hot feature
//!    ([`explain`]), and the refit without the sensors left out;
//! 3. `outputs`: the linear maps of the edge profiles, the field grid and the heat flows,
//!    then the bootstrap of their estimation error ([`crate::uncertainty`]) with the strength
//!    re-chosen in every replicate (strict bounds, [`crate::bounds`], run between the two
//!    when asked for);
//! 4. `assemble`: the bands, the hottest point and its intervals, the exceedance
//!    probability, the resolution length ([`resolution`]), the sensor table and the cautions.
//!
//! Everything is SI inside; [`EstimateResult`] carries the case's units for the report.

mod assemble;
pub mod calibration;
pub mod convection;
pub mod explain;
mod faults;
pub mod fit;
mod outputs;
pub mod penalty;
mod problem;
pub mod resolution;
pub mod result;

pub use result::{
    DoubtfulSensor, EdgeResult, EstimateResult, Exceedance, FieldResult, FitSummary, Hottest,
    Interval, SensorResult, StrengthSummary,
};

use crate::case::{Case, StrengthRule};
use crate::error::{Error, Result};
use crate::forward::{ForwardModel, SeriesOptions};
use crate::geometry::Edge;
use crate::inverse::{Strength, StrengthMethod};
use crate::noise::{SigmaSource, reading_sigmas};
use crate::uncertainty::BootstrapMode;
use fit::FitInput;
use nalgebra::DMatrix;
use outputs::OutputMaps;
use problem::Problem;

/// The strength rule used when the case does not name one. Chosen by the calibration study
/// in `docs/calibration.md` (plain GCV fails with few, deep sensors).
pub const DEFAULT_STRENGTH: StrengthMethod = StrengthMethod::Evidence;

/// A sensor can be flagged after the first round only if its fault probability exceeded this
/// before any sensor was left out (see [`estimate`]).
pub const FIRST_ROUND_DOUBT: f64 = 0.5;

/// The caution every output carries (the project rules in DEVELOPERS.md).
pub const SAFETY_CAUTION: &str = "These are estimates, not measurements: the hidden edge was \
     inferred from interior sensors through a model. Decisions about live, hot or pressurised \
     equipment follow local codes and licensed practice.";

/// Options of an estimate beyond the case file.
#[derive(Debug, Clone)]
pub struct EstimateOptions {
    /// Bootstrap noise mode; `None` picks `parametric` when σ is stated, else `residual`.
    pub mode: Option<BootstrapMode>,
    /// Alarm limit on the hidden edges' temperature, kelvin.
    pub limit: Option<f64>,
    /// Probability of exceeding the limit above which the alarm is raised.
    pub alarm_probability: f64,
    /// Keep every sensor (no search for suspect sensors).
    pub keep_all: bool,
    /// Field grid size.
    pub grid: (usize, usize),
    /// Override the case's replicate count.
    pub replicates: Option<usize>,
    /// Override the case's seed.
    pub seed: Option<u64>,
    /// Override the case's strength rule.
    pub strength: Option<StrengthRule>,
    /// Sensors the user knows to be faulty (indices into `case.sensors`): left out before
    /// the fit, whatever their readings.
    pub exclude: Vec<usize>,
    /// Compute strict bounds and the gradient study ([`crate::bounds`]); off by default
    /// because they cost conic programs (the command line turns them on).
    pub strict_bounds: bool,
    /// Override the case's `[bounds] max_gradient`, K/m.
    pub max_gradient_k_per_m: Option<f64>,
}

impl Default for EstimateOptions {
    fn default() -> Self {
        EstimateOptions {
            mode: None,
            limit: None,
            alarm_probability: 0.05,
            keep_all: false,
            grid: crate::case::DEFAULT_GRID,
            replicates: None,
            seed: None,
            strength: None,
            exclude: Vec::new(),
            strict_bounds: false,
            max_gradient_k_per_m: None,
        }
    }
}

/// The strength setting for a rule as written in a case.
pub fn strength_of(rule: StrengthRule) -> Strength {
    match rule {
        StrengthRule::Default => Strength::Rule(DEFAULT_STRENGTH),
        StrengthRule::Gcv => Strength::Rule(StrengthMethod::Gcv),
        StrengthRule::Discrepancy => Strength::Rule(StrengthMethod::Discrepancy),
        StrengthRule::Evidence => Strength::Rule(StrengthMethod::Evidence),
        StrengthRule::LCurve => Strength::Rule(StrengthMethod::LCurve),
        StrengthRule::Fixed(v) => Strength::Fixed(v),
    }
}

/// Points per unknown edge in `profile.csv` and in the hottest-point scan.
pub fn profile_points(terms: usize) -> usize {
    (8 * terms + 1).max(401)
}

/// Run the estimate. `readings` are kelvin, aligned with `case.sensors` (`None`: no reading).
/// `progress` is called with the number of bootstrap replicates done.
///
/// A convective edge with `h = "unknown"` has its `h` profiled first ([`convection`]).
pub fn estimate(
    case: &Case,
    readings: &[Option<f64>],
    options: &EstimateOptions,
    progress: Option<&(dyn Fn(usize) + Sync)>,
) -> Result<EstimateResult> {
    if case.plate.unknown_heat_transfer().is_empty() {
        estimate_known_h(case, readings, options, progress)
    } else {
        convection::estimate_unknown_h(case, readings, options, progress)
    }
}

/// [`estimate`] on a case whose every `h` is known.
fn estimate_known_h(
    case: &Case,
    readings: &[Option<f64>],
    options: &EstimateOptions,
    progress: Option<&(dyn Fn(usize) + Sync)>,
) -> Result<EstimateResult> {
    let problem = Problem::new(case, readings, options)?;
    // the output maps depend on the model alone: made while the fit runs
    let (fitted, maps) = rayon::join(
        || faults::fit_leaving_out_faults(&problem, options),
        || OutputMaps::new(&problem, options.grid),
    );
    let (fitted, maps) = (fitted?, maps?);
    // the strict bounds are independent of the bootstrap and of everything assembled from
    // it (neither draws from the other's random numbers, and the result only carries the
    // bounds): run them side by side, the whole rest of the estimate on the other thread
    let used = fitted.used.clone();
    let sigma = fitted.fit.sigma.clone();
    let (bounds, result) = rayon::join(
        || {
            options.strict_bounds.then(|| {
                crate::bounds::estimate_bounds(
                    case,
                    &problem.points,
                    readings,
                    &used,
                    sigma.as_slice(),
                    problem.stated,
                    options.max_gradient_k_per_m,
                    &problem.edge_positions,
                )
            })
        },
        || -> Result<_> {
            let resampled = outputs::resample(&problem, &fitted, options, progress)?;
            assemble::assemble(&problem, fitted, maps, resampled, options)
        },
    );
    let mut result = result?;
    result.bounds = bounds;
    result.check_finite()?;
    Ok(result)
}

/// The forward model an estimate fits: the case's plate with `case.fit.terms` series terms per
/// unknown edge. Shared by [`estimate`] and [`crate::track`].
///
/// # Errors
/// [`Error::Invalid`] when no edge is unknown, or the model cannot be built.
pub fn case_model(case: &Case) -> Result<ForwardModel> {
    if case.plate.unknown_edges().is_empty() {
        return Err(Error::invalid_at(
            &case.files.plate,
            None,
            Some("edges"),
            "no edge is unknown, so there is nothing to estimate; mark the hidden edge \
             condition = \"unknown\"",
        ));
    }
    ForwardModel::new(
        &case.plate,
        SeriesOptions {
            unknown_terms: case.fit.terms,
            ..SeriesOptions::default()
        },
    )
}

/// The number of coefficients no smoothing order penalises (levels and corners): every order
/// leaves the same ones free, so this is read off the curvature penalty.
pub fn unpenalised_count(model: &ForwardModel) -> usize {
    penalty::penalty_weights(model, 2)
        .iter()
        .filter(|&&v| v == 0.0)
        .count()
}

/// The smallest number of readings a fit of this model accepts: more than its `q_null`
/// unpenalised coefficients, plus one.
pub fn min_readings(q_null: usize) -> usize {
    q_null + 2
}

/// The error for a set of `n` readings too small for a model with `q_null` unpenalised
/// coefficients.
pub fn too_few_readings(case: &Case, n: usize, q_null: usize) -> Error {
    Error::invalid_at(
        &case.files.readings,
        None,
        Some("temperature"),
        format!(
            "{n} readings cannot determine this model: it needs at least {} (more than its \
             {q_null} unsmoothed coefficients, plus one)",
            min_readings(q_null),
        ),
    )
}

/// The reading uncertainty of every sensor in `used` (kelvin, indexed like `case.sensors`,
/// NaN for the others) and where it came from ([`reading_sigmas`]: a sensor's own sigma, the
/// case's `[noise]`, a tolerance class at the reading, or unit weights to be scaled by the
/// residual estimate).
///
/// # Errors
/// [`Error::Invalid`] naming the sensor's line when its sigma cannot be resolved.
pub fn resolve_sigmas(
    case: &Case,
    used: &[usize],
    readings: &[Option<f64>],
) -> Result<(Vec<f64>, SigmaSource)> {
    let own: Vec<Option<f64>> = used.iter().map(|&i| case.sensors[i].sigma_k).collect();
    let temps: Vec<f64> = used.iter().map(|&i| readings[i].unwrap_or(0.0)).collect();
    let (sig, source) = reading_sigmas(&case.noise, &own, &temps).map_err(|(k, msg)| {
        let s = &case.sensors[used[k]];
        if s.sigma_k.is_none() && matches!(case.noise, crate::noise::NoiseSpec::Tolerance { .. }) {
            // the reading lies outside the range of the tolerance class
            Error::invalid_at(
                &case.files.readings,
                None,
                Some("temperature"),
                format!("{}: {msg}", s.id),
            )
        } else {
            Error::invalid_at(
                &case.files.sensors,
                Some(s.line),
                Some("sigma"),
                format!("{}: {msg}", s.id),
            )
        }
    })?;
    let mut sigma_of = vec![f64::NAN; case.sensors.len()];
    for (k, &i) in used.iter().enumerate() {
        sigma_of[i] = sig[k];
    }
    Ok((sigma_of, source))
}

/// The positions along every unknown edge at which profiles are reported and the hottest
/// point is searched: [`profile_points`] evenly spaced points, ends included, metres.
pub fn profile_positions(case: &Case) -> Vec<(Edge, Vec<f64>)> {
    let shape = *case.plate.shape();
    let n_prof = profile_points(case.fit.terms);
    case.plate
        .unknown_edges()
        .iter()
        .map(|&e| {
            let len = shape.edge_length(e).unwrap_or(shape.width());
            (
                e,
                (0..n_prof)
                    .map(|i| len * i as f64 / (n_prof - 1) as f64)
                    .collect(),
            )
        })
        .collect()
}

/// The smoothing orders `auto` chooses between, in order of preference on a tie.
pub const AUTO_ORDERS: [usize; 2] = [2, 1];

/// Choose the penalty order for `auto` smoothing: the one whose prior gives the readings the
/// highest marginal likelihood at its best strength (model selection by evidence; MacKay
/// 1992, Neural Comput. 4:415–447). The evidences of different orders are comparable because
/// they share the data, the weights and the unpenalised coefficients. Size (order 0) is left
/// out: its white-noise prior gave bands several times wider than the others without better
/// coverage in the calibration study.
pub fn choose_order(input: &FitInput, model: &ForwardModel) -> Result<usize> {
    use rayon::prelude::*;
    // each order's fit on a thread of its own, compared in the order of AUTO_ORDERS
    let criteria: Vec<Option<f64>> = AUTO_ORDERS
        .par_iter()
        .map(|&order| {
            let trial = FitInput {
                penalty: penalty::penalty_weights(model, order),
                ..input.clone()
            };
            fit::fit(&trial, Strength::Rule(StrengthMethod::Evidence))
                .ok()
                .map(|f| f.selection.criterion)
        })
        .collect();
    let mut best: Option<(f64, usize)> = None;
    for (&order, e) in AUTO_ORDERS.iter().zip(criteria) {
        if let Some(e) = e {
            if e.is_finite() && best.is_none_or(|(b, _)| e < b) {
                best = Some((e, order));
            }
        }
    }
    Ok(best.map_or(2, |(_, o)| o))
}

/// Stack matrices with the same number of columns.
pub(crate) fn stack<'a>(parts: impl Iterator<Item = &'a DMatrix<f64>> + Clone) -> DMatrix<f64> {
    let rows: usize = parts.clone().map(|m| m.nrows()).sum();
    let cols = parts.clone().next().map_or(0, |m| m.ncols());
    let mut out = DMatrix::zeros(rows, cols);
    let mut r = 0;
    for m in parts {
        out.view_mut((r, 0), (m.nrows(), cols)).copy_from(m);
        r += m.nrows();
    }
    out
}

/// Standard deviations of `Q c` under the covariance `C`: `sqrt(diag(Q C Qᵀ))`.
pub(crate) fn linear_sd(q: &DMatrix<f64>, c: &DMatrix<f64>) -> Vec<f64> {
    let qc = q * c;
    (0..q.nrows())
        .map(|i| qc.row(i).dot(&q.row(i)).max(0.0).sqrt())
        .collect()
}

/// The maximum of sampled values with a parabolic refinement through its neighbours:
/// returns (index as a fraction, value).
pub(crate) fn refined_max(values: impl Fn(usize) -> f64, lo: usize, hi: usize) -> (f64, f64) {
    let mut k = lo;
    for j in lo..hi {
        if values(j) > values(k) {
            k = j;
        }
    }
    if k > lo && k + 1 < hi {
        if let Some(vertex) = parabola_vertex(k, (values(k - 1), values(k), values(k + 1))) {
            return vertex;
        }
    }
    (k as f64, values(k))
}

/// The vertex `(index as a fraction, value)` of the parabola through sampled values `y0`,
/// `y1`, `y2` at `k − 1`, `k`, `k + 1`, kept within half a step of `k`; `None` when the
/// parabola does not open downward ([`refined_max`]'s refinement).
pub(crate) fn parabola_vertex(k: usize, (y0, y1, y2): (f64, f64, f64)) -> Option<(f64, f64)> {
    let den = y0 - 2.0 * y1 + y2;
    (den < 0.0).then(|| {
        let off = (0.5 * (y0 - y2) / den).clamp(-0.5, 0.5);
        (k as f64 + off, y1 - 0.25 * (y0 - y2) * off)
    })
}
