//! An unknown heat transfer coefficient: `h` profiled by the marginal likelihood
//! (`docs/method.md`, "Convective edges").
//!
//! With `h` fixed the model is linear in the edge coefficients and the inversion is the usual
//! one. The readings' marginal likelihood, maximised over the strength (and the smoothing
//! order under `auto`), is therefore a function of `h` alone:
//! `E(h) = min_λ −2 log p(d | h, λ)`, the same criterion that chooses the strength (plus the
//! term that makes it comparable across `h`: see `null_space_log_det`). It is
//! evaluated on a grid of [`GRID_POINTS`] values spaced evenly in `log h` over the search
//! range; the minimum is refined by Brent's method between the best grid point's neighbours
//! and each end of the interval by Brent's root finder (argmin), all in `log h`.
//!
//! - Estimate: `ĥ = argmin E(h)`.
//! - Interval: the profile-likelihood interval `{h : E(h) ≤ E(ĥ) + χ²₁(γ)}` at the case's
//!   confidence `γ` (Wilks' theorem; e.g. Pawitan, *In All Likelihood*, §2.6 and §3.4;
//!   section numbers recalled from memory), taken as the hull of that set so that a second
//!   dip of `E` is kept rather than cut off. An end that reaches the
//!   search range means the readings do not bound `h` on that side: the interval is then the
//!   range's end and the result says so.
//! - Bands: the estimate is run at `ĥ` and at both ends of the interval, and every band and
//!   interval is the union of the three (the hotter end of each kept), the exceedance
//!   probability the largest of the three. The bands therefore include the uncertainty in
//!   `h`, conservatively.
//!
//! Only one convective edge per case may have an unknown `h` in this version.

use super::{EstimateOptions, EstimateResult, Interval, estimate_known_h};
use crate::case::Case;
use crate::error::{Error, Result};
use crate::estimate::fit::fit;
use crate::geometry::Edge;
use crate::inverse::{Strength, StrengthMethod};
use argmin::core::{CostFunction, Executor};
use argmin::solver::brent::{BrentOpt, BrentRoot};
use rayon::prelude::*;
use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// Grid points over the search range of `h` (log-spaced); the optimum and the interval's
/// ends are then refined with exact evaluations.
pub const GRID_POINTS: usize = 25;

/// A function of `log h` as an argmin cost.
struct Curve<'a>(&'a dyn Fn(f64) -> f64);

impl CostFunction for Curve<'_> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, x: &f64) -> std::result::Result<f64, argmin::core::Error> {
        Ok((self.0)(*x))
    }
}

/// The estimated heat transfer coefficient of one convective edge.
#[derive(Debug, Clone, Serialize)]
pub struct ConvectionEstimate {
    /// The convective edge.
    pub edge: Edge,
    /// The estimate `ĥ`, W/(m² K).
    pub h: f64,
    /// The profile-likelihood interval at the case's confidence, W/(m² K).
    pub h_interval: [f64; 2],
    /// The search range, W/(m² K).
    pub h_range: [f64; 2],
    /// Whether the interval's lower end is the range's (the readings do not bound `h` from
    /// below inside it).
    pub open_below: bool,
    /// Whether the interval's upper end is the range's.
    pub open_above: bool,
    /// `E(h) − E(ĥ)` on the grid: `(h, ΔE)` pairs, for the reader who wants the curve.
    #[serde(skip)]
    pub curve: Vec<(f64, f64)>,
}

impl ConvectionEstimate {
    /// Whether the readings pin `h` down at all: the interval is not the whole range.
    pub fn identified(&self) -> bool {
        !(self.open_below && self.open_above)
    }
}

/// `case` with the coefficient of its convective `edge` set to `h`.
fn with_h(case: &Case, edge: Edge, h: f64) -> Result<Case> {
    let mut trial = case.clone();
    trial.plate = case.plate.with_heat_transfer(edge, h)?;
    Ok(trial)
}

/// `E(h)` for one `h`, summed over sets of readings taken under the same `h` (one set for
/// an estimate; several logger rows for `track`): the case with `h` set, its model built
/// once, and the evidence fit of each set.
fn criterion(
    case: &Case,
    edge: Edge,
    h: f64,
    readings: &[Vec<Option<f64>>],
    options: &EstimateOptions,
) -> Result<f64> {
    let trial = with_h(case, edge, h)?;
    let model = super::case_model(&trial)?;
    let mut total = 0.0;
    for set in readings {
        let problem =
            super::problem::Problem::without_edge_maps(&trial, set, options, model.clone())?;
        if !problem.stated {
            return Err(Error::invalid_at(
                &case.files.plate,
                None,
                Some(&format!("edges.{edge}.h")),
                "h = \"unknown\" needs the reading uncertainty stated ([noise] sigma, a \
                 tolerance class, or a sigma column in sensors.csv): with the noise estimated \
                 from the same readings, a lower h and a larger noise explain them equally well, \
                 and the estimate can then miss a hot edge (docs/calibration.md); state the \
                 uncertainty, or state h",
            ));
        }
        let rows: Vec<usize> = problem
            .with_reading
            .iter()
            .copied()
            .filter(|i| !options.exclude.contains(i))
            .collect();
        let input = problem.input(&rows);
        let f = fit(&input, Strength::Rule(StrengthMethod::Evidence))?;
        total += f.selection.criterion + null_space_log_det(&input, &f.sigma);
    }
    Ok(total)
}

/// `log det(XᵀX)` of the weighted unpenalised columns `X = W^{1/2} A_null` (edge levels and
/// corner temperatures, in kelvin whatever `h` is). The evidence of the strength search is
/// the restricted likelihood, taken on the complement of `X`; that complement moves with `h`
/// (the columns' decay across the plate depends on it), so restricted likelihoods at two `h`
/// are not comparable as they are. Adding this term gives the likelihood integrated over a
/// flat prior on those coefficients, `−2 log L = −2 log L_R + log det(XᵀX)` (from
/// `det(Q₂ᵀVQ₂) = det V · det(XᵀV⁻¹X) / det(XᵀX)`; Harville 1974, recalled from memory):
/// the coefficients mean the same kelvins at every `h`.
fn null_space_log_det(input: &super::fit::FitInput, sigma: &nalgebra::DVector<f64>) -> f64 {
    let null: Vec<usize> = (0..input.penalty.len())
        .filter(|&j| input.penalty[j] == 0.0)
        .collect();
    if null.is_empty() {
        return 0.0;
    }
    let x = nalgebra::DMatrix::from_fn(input.a.nrows(), null.len(), |i, k| {
        input.a[(i, null[k])] / sigma[i]
    });
    match (x.transpose() * &x).cholesky() {
        Some(c) => 2.0 * c.l().diagonal().iter().map(|v| v.ln()).sum::<f64>(),
        None => f64::INFINITY,
    }
}

/// Profile `E(h)` over the search range of the case's unknown `h`, from one set of readings
/// (kelvin, aligned with `case.sensors`) or several taken under the same `h` (their
/// criteria add: independent readings, one edge profile each).
///
/// # Errors
/// Refuses more than one unknown `h`; errors of the problem (too few readings, ...).
pub fn profile_h(
    case: &Case,
    readings: &[Vec<Option<f64>>],
    options: &EstimateOptions,
) -> Result<ConvectionEstimate> {
    let unknown = case.plate.unknown_heat_transfer();
    let (edge, low, high) = match unknown.as_slice() {
        [one] => *one,
        [] => {
            return Err(Error::Internal(
                "no unknown heat transfer coefficient".into(),
            ));
        }
        [_, second, ..] => {
            return Err(Error::invalid_at(
                &case.files.plate,
                None,
                Some(&format!("edges.{}.h", second.0)),
                "only one convective edge may have h = \"unknown\" in this version; state the \
                 others' h",
            ));
        }
    };
    let (l0, l1) = (low.ln(), high.ln());
    let hs: Vec<f64> = (0..GRID_POINTS)
        .map(|i| (l0 + (l1 - l0) * i as f64 / (GRID_POINTS - 1) as f64).exp())
        .collect();
    let values: Vec<f64> = hs
        .par_iter()
        .map(|&h| criterion(case, edge, h, readings, options))
        .collect::<Result<Vec<f64>>>()?;
    let finite = |v: f64| if v.is_finite() { v } else { f64::INFINITY };
    let (k, e_best) = values
        .iter()
        .copied()
        .map(finite)
        .enumerate()
        .min_by(|a, b| a.1.total_cmp(&b.1))
        .ok_or_else(|| Error::Internal("empty h grid".into()))?;
    if !e_best.is_finite() {
        return Err(Error::Internal(
            "the marginal likelihood is not finite for any h in the search range".into(),
        ));
    }
    // refine in log h with exact evaluations: the minimum by Brent's method between the
    // best grid point's neighbours, each end of the interval by Brent's root finder between
    // the optimum and the nearest grid point above the level
    let xs: Vec<f64> = hs.iter().map(|h| h.ln()).collect();
    let e_at =
        |x: f64| finite(criterion(case, edge, x.exp(), readings, options).unwrap_or(f64::NAN));
    let (mut x_hat, mut e_min) = (xs[k], e_best);
    if k > 0 && k + 1 < GRID_POINTS {
        let solver = BrentOpt::new(xs[k - 1], xs[k + 1]).set_tolerance(1e-5, 1e-6);
        if let Ok(res) = Executor::new(Curve(&e_at), solver)
            .configure(|st| st.param(xs[k]).max_iters(40))
            .ctrlc(false)
            .run()
        {
            let st = res.state();
            if let Some(x) = st.best_param {
                if st.best_cost < e_min {
                    (x_hat, e_min) = (x, st.best_cost);
                }
            }
        }
    }
    let cut = ChiSquared::new(1.0)
        .map_err(|e| Error::Internal(format!("chi-square distribution: {e}")))?
        .inverse_cdf(case.uncertainty.confidence);
    let level = e_min + cut;
    // E − level changes sign on [a, b]: where it crosses, by Brent's root finder (the end
    // outside the set if the finder fails: wider, never narrower)
    let crossing = |a: f64, b: f64, outside: f64| -> f64 {
        let above = |x: f64| e_at(x) - level;
        let solver = BrentRoot::new(a, b, 1e-5);
        Executor::new(Curve(&above), solver)
            .configure(|st| st.param(0.5 * (a + b)).max_iters(40))
            .ctrlc(false)
            .run()
            .ok()
            .and_then(|r| r.state().best_param)
            .unwrap_or(outside)
    };
    // The interval is the hull of the set {E ≤ level}: from the outermost grid points below
    // the level (a second dip of E is kept, never cut off), or from the optimum when no grid
    // point on that side is below it. An end at the range's is open.
    // The two ends are found side by side (each search is the same alone).
    let below = |i: usize| values[i].is_finite() && values[i] <= level;
    let (lo, hi) = rayon::join(
        || match (0..GRID_POINTS).find(|&i| below(i) && xs[i] <= x_hat) {
            Some(0) => None,
            Some(i) => Some(crossing(xs[i - 1], xs[i], xs[i - 1]).exp()),
            None => (0..GRID_POINTS)
                .rev()
                .find(|&i| xs[i] < x_hat)
                .map(|i| crossing(xs[i], x_hat, xs[i]).exp()),
        },
        || match (0..GRID_POINTS).rev().find(|&i| below(i) && xs[i] >= x_hat) {
            Some(i) if i == GRID_POINTS - 1 => None,
            Some(i) => Some(crossing(xs[i], xs[i + 1], xs[i + 1]).exp()),
            None => (0..GRID_POINTS)
                .find(|&i| xs[i] > x_hat)
                .map(|i| crossing(x_hat, xs[i], xs[i]).exp()),
        },
    );
    let h = x_hat.exp().clamp(low, high);
    Ok(ConvectionEstimate {
        edge,
        h,
        h_interval: [lo.unwrap_or(low).min(h), hi.unwrap_or(high).max(h)],
        h_range: [low, high],
        open_below: lo.is_none(),
        open_above: hi.is_none(),
        curve: hs
            .iter()
            .zip(&values)
            .map(|(&h, &e)| (h, finite(e) - e_min))
            .collect(),
    })
}

/// The estimate with the case's unknown `h` profiled: the estimate at `ĥ` with every band
/// widened to hold the estimates at both ends of the `h` interval (module notes).
pub(super) fn estimate_unknown_h(
    case: &Case,
    readings: &[Option<f64>],
    options: &EstimateOptions,
    progress: Option<&(dyn Fn(usize) + Sync)>,
) -> Result<EstimateResult> {
    let conv = profile_h(case, &[readings.to_vec()], options)?;
    // the ends: no strict bounds there (the gradient study at ĥ is reported as it is); the
    // three estimates side by side, each the same as alone
    let quiet = EstimateOptions {
        strict_bounds: false,
        ..options.clone()
    };
    let (result, ends) = rayon::join(
        || {
            estimate_known_h(
                &with_h(case, conv.edge, conv.h)?,
                readings,
                options,
                progress,
            )
        },
        || {
            conv.h_interval
                .par_iter()
                .map(|&h_end| {
                    estimate_known_h(&with_h(case, conv.edge, h_end)?, readings, &quiet, None)
                })
                .collect::<Result<Vec<_>>>()
        },
    );
    let mut result = result?;
    for other in ends? {
        widen(&mut result, &other);
    }
    result.plate = case.plate.clone();
    let mut caution = format!(
        "The heat transfer coefficient of the {} edge was estimated from the readings: h = {} \
         W/(m² K), {:.0} % interval [{}, {}] W/(m² K) (profile likelihood). Every band and \
         interval here holds the estimates at both ends of that interval.",
        conv.edge,
        three_digits(conv.h),
        100.0 * case.uncertainty.confidence,
        three_digits(conv.h_interval[0]),
        three_digits(conv.h_interval[1]),
    );
    if !conv.identified() {
        caution.push_str(&format!(
            " The readings do not pin h down: the interval is the whole search range [{}, {}] \
             W/(m² K). Sensors nearer the {} edge, or a stated h, would.",
            three_digits(conv.h_range[0]),
            three_digits(conv.h_range[1]),
            conv.edge
        ));
    } else if conv.open_below || conv.open_above {
        caution.push_str(&format!(
            " The readings bound h only from {}; the interval stops at the search range \
             (h_range).",
            if conv.open_below { "above" } else { "below" }
        ));
    }
    result.cautions.insert(0, caution);
    result.convection = vec![conv];
    result.check_finite()?;
    Ok(result)
}

fn union(a: &mut [f64], b: &[f64], hotter: fn(f64, f64) -> f64) {
    for (x, y) in a.iter_mut().zip(b) {
        *x = hotter(*x, *y);
    }
}

fn widen_interval(a: &mut Interval, b: &Interval) {
    a.lower = a.lower.min(b.lower);
    a.upper = a.upper.max(b.upper);
}

/// Widen `r`'s bands and intervals to hold `other`'s (same case, another `h`).
fn widen(r: &mut EstimateResult, other: &EstimateResult) {
    for (e, o) in r.edges.iter_mut().zip(&other.edges) {
        union(&mut e.lower, &o.lower, f64::min);
        union(&mut e.upper, &o.upper, f64::max);
        union(&mut e.simultaneous_lower, &o.simultaneous_lower, f64::min);
        union(&mut e.simultaneous_upper, &o.simultaneous_upper, f64::max);
        union(&mut e.linear_lower, &o.linear_lower, f64::min);
        union(&mut e.linear_upper, &o.linear_upper, f64::max);
        if let (Some(q), Some(p)) = (e.heat_flow.as_mut(), o.heat_flow.as_ref()) {
            widen_interval(q, p);
        }
    }
    for ((_, q), (_, p)) in r
        .convective_heat_flows
        .iter_mut()
        .zip(&other.convective_heat_flows)
    {
        widen_interval(q, p);
    }
    union(&mut r.field.lower, &other.field.lower, f64::min);
    union(&mut r.field.upper, &other.field.upper, f64::max);
    let (h, o) = (&mut r.hottest, &other.hottest);
    h.temperature_interval[0] = h.temperature_interval[0].min(o.temperature_interval[0]);
    h.temperature_interval[1] = h.temperature_interval[1].max(o.temperature_interval[1]);
    if h.edge == o.edge {
        // the smallest interval holding both (on a circle: ends and middles of both arcs)
        let shape = *r.plate.shape();
        let arc_points = |iv: [f64; 2]| {
            let span = match shape.period(h.edge) {
                Some(p) if iv[0] > iv[1] => iv[1] + p - iv[0],
                _ => iv[1] - iv[0],
            };
            [iv[0], iv[0] + 0.5 * span, iv[0] + span]
        };
        let mut points = arc_points(h.position_interval).to_vec();
        points.extend(arc_points(o.position_interval));
        if let Some(hull) = shape.position_hull(h.edge, &points) {
            h.position_interval = hull;
        }
    }
    if let (Some(x), Some(y)) = (r.exceedance.as_mut(), other.exceedance.as_ref()) {
        x.probability = x.probability.max(y.probability);
        x.alarm = x.probability > x.alarm_probability;
    }
}

/// `v` with three significant digits (`2930`, `31.6`, `1.00e5`), for messages.
pub fn three_digits(v: f64) -> String {
    if v != 0.0 && v.is_finite() && !(1e-3..1e5).contains(&v.abs()) {
        return format!("{v:.2e}");
    }
    super::assemble::significant3(v)
}
