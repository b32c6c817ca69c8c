//! An unknown heat transfer coefficient: `h` profiled by the marginal likelihood
//! (`docs/method.md`, "Convective edges").
//!
//! With `h` fixed the model is linear in the edge coefficients and the inversion is the usual
//! one. The readings' marginal likelihood, maximised over the strength (and the smoothing
//! order under `auto`), is therefore a function of `h` alone:
//! `E(h) = min_λ −2 log p(d | h, λ)`, the same criterion that chooses the strength. It is
//! evaluated on a grid of [`GRID_POINTS`] values spaced evenly in `log h` over the search
//! range, and refined by Brent's minimiser (argmin) between the best grid point's neighbours.
//!
//! - Estimate: `ĥ = argmin E(h)`.
//! - Interval: the profile-likelihood interval `{h : E(h) ≤ E(ĥ) + χ²₁(γ)}` at the case's
//!   confidence `γ` (Wilks' theorem; e.g. Pawitan, *In All Likelihood*, §2.6 and §3.4). Each
//!   end is bracketed by walking out from `ĥ` over the grid to the first point above the
//!   level, and found by Brent's root finder (argmin) on `E − level` in `log h`, to a
//!   relative 1e-4 in `h`. A layout that pins `h` down gives an interval narrower than one
//!   grid step (a factor 1.33 in h with the default range 1–1e5), and `E` is sharply V-shaped
//!   there, so neither a parabola through grid points nor linear interpolation between them
//!   is enough (`docs/calibration.md`, "Convective edge and an unknown h"). An end that reaches the
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

/// Grid points over the search range of `h` (log-spaced).
pub const GRID_POINTS: usize = 41;

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

/// `E(h)` for one `h`: the case with `h` set, its problem, and the evidence fit.
fn criterion(
    case: &Case,
    edge: Edge,
    h: f64,
    readings: &[Option<f64>],
    options: &EstimateOptions,
) -> Result<f64> {
    let mut trial = case.clone();
    trial.plate = case.plate.with_heat_transfer(edge, h)?;
    let problem = super::problem::Problem::new(&trial, readings, options)?;
    let rows: Vec<usize> = problem
        .with_reading
        .iter()
        .copied()
        .filter(|i| !options.exclude.contains(i))
        .collect();
    let f = fit(
        &problem.input(&rows),
        Strength::Rule(StrengthMethod::Evidence),
    )?;
    Ok(f.selection.criterion)
}

/// Profile `E(h)` over the search range of the case's unknown `h`.
///
/// # Errors
/// Refuses more than one unknown `h`; errors of the problem (too few readings, ...).
pub fn profile_h(
    case: &Case,
    readings: &[Option<f64>],
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
    // refine: Brent's minimiser between the best grid point's neighbours, in log h. A
    // parabola through three grid points is not enough: E(h) is sharply V-shaped near its
    // minimum when the layout pins h down (the strength re-chosen at every h absorbs part of
    // the misfit away from ĥ), and a well-identified h has an interval narrower than one
    // grid step.
    let e_at =
        |x: f64| finite(criterion(case, edge, x.exp(), readings, options).unwrap_or(f64::NAN));
    let (mut log_h, mut e_min) = (hs[k].ln(), e_best);
    if k > 0 && k + 1 < GRID_POINTS {
        if let Some((x, e)) = brent_min(&e_at, hs[k - 1].ln(), hs[k + 1].ln()) {
            if e < e_min {
                (log_h, e_min) = (x, e);
            }
        }
    }
    let cut = ChiSquared::new(1.0)
        .map_err(|e| Error::Internal(format!("chi-square distribution: {e}")))?
        .inverse_cdf(case.uncertainty.confidence);
    let level = e_min + cut;
    // walk out from ĥ over the grid to the first point above the level, and find the
    // crossing between it and the last point known below the level (ĥ itself, or a grid
    // point) with Brent's root finder on E − level, in log h
    let crossing = |inside: f64, outside: f64| {
        brent_root(&|x: f64| e_at(x) - level, inside, outside).unwrap_or_else(|| {
            // fall back to linear interpolation of E between the two points
            let (ei, eo) = (e_at(inside), e_at(outside));
            let t = if eo.is_finite() && ei.is_finite() && (eo - ei).abs() > 0.0 {
                ((level - ei) / (eo - ei)).clamp(0.0, 1.0)
            } else {
                0.5
            };
            inside + t * (outside - inside)
        })
    };
    let mut lo = None;
    let mut inside = log_h;
    for i in (0..GRID_POINTS).rev().filter(|&i| hs[i].ln() < log_h) {
        if finite(values[i]) > level {
            lo = Some(crossing(inside, hs[i].ln()).exp());
            break;
        }
        inside = hs[i].ln();
    }
    let mut hi = None;
    let mut inside = log_h;
    for i in (0..GRID_POINTS).filter(|&i| hs[i].ln() > log_h) {
        if finite(values[i]) > level {
            hi = Some(crossing(inside, hs[i].ln()).exp());
            break;
        }
        inside = hs[i].ln();
    }
    let h = log_h.exp().clamp(low, high);
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

/// A 1-D function as an argmin cost.
struct Cost<F: Fn(f64) -> f64>(F);

impl<F: Fn(f64) -> f64> CostFunction for Cost<F> {
    type Param = f64;
    type Output = f64;
    fn cost(&self, x: &f64) -> std::result::Result<f64, argmin::core::Error> {
        Ok((self.0)(*x))
    }
}

/// Tolerance of the refinements in `log h` (a relative 1e-4 in h).
const LOG_H_TOL: f64 = 1e-4;

/// Brent's minimiser of `f` on `[a, b]`: `(x, f(x))`, or `None` when it fails.
fn brent_min(f: &dyn Fn(f64) -> f64, a: f64, b: f64) -> Option<(f64, f64)> {
    let solver = BrentOpt::new(a, b).set_tolerance(LOG_H_TOL, 1e-12);
    let res = Executor::new(Cost(f), solver)
        .configure(|s| s.max_iters(100))
        .ctrlc(false)
        .run()
        .ok()?;
    let st = res.state();
    st.best_param
        .filter(|_| st.best_cost.is_finite())
        .map(|x| (x, st.best_cost))
}

/// Brent's root finder for `f` between `a` and `b` (a sign change): the root, or `None`.
fn brent_root(f: &dyn Fn(f64) -> f64, a: f64, b: f64) -> Option<f64> {
    let (lo, hi) = if a < b { (a, b) } else { (b, a) };
    let res = Executor::new(Cost(f), BrentRoot::new(lo, hi, LOG_H_TOL))
        .configure(|s| s.max_iters(100))
        .ctrlc(false)
        .run()
        .ok()?;
    res.state().best_param.filter(|x| x.is_finite())
}

/// The estimate with the case's unknown `h` profiled: the estimate at `ĥ` with every band
/// widened to hold the estimates at both ends of the `h` interval (module notes).
pub(super) fn estimate_unknown_h(
    case: &Case,
    readings: &[Option<f64>],
    options: &EstimateOptions,
    progress: Option<&(dyn Fn(usize) + Sync)>,
) -> Result<EstimateResult> {
    let conv = profile_h(case, readings, options)?;
    let at = |h: f64, progress: Option<&(dyn Fn(usize) + Sync)>| -> Result<EstimateResult> {
        let mut trial = case.clone();
        trial.plate = case.plate.with_heat_transfer(conv.edge, h)?;
        estimate_known_h(&trial, readings, options, progress)
    };
    let mut result = at(conv.h, progress)?;
    // the ends: no strict bounds there (the gradient study at ĥ is reported as it is)
    let quiet = EstimateOptions {
        strict_bounds: false,
        ..options.clone()
    };
    for h_end in conv.h_interval {
        let mut trial = case.clone();
        trial.plate = case.plate.with_heat_transfer(conv.edge, h_end)?;
        let other = estimate_known_h(&trial, readings, &quiet, None)?;
        widen(&mut result, &other);
    }
    result.plate = case.plate.clone();
    let show = |v: f64| super::assemble::significant3(v);
    let mut caution = format!(
        "The heat transfer coefficient of the {} edge was estimated from the readings: h = {} \
         W/(m² K), {:.0} % interval [{}, {}] W/(m² K) (profile likelihood). Every band and \
         interval here holds the estimates at both ends of that interval.",
        conv.edge,
        show(conv.h),
        100.0 * case.uncertainty.confidence,
        show(conv.h_interval[0]),
        show(conv.h_interval[1]),
    );
    if !conv.identified() {
        caution.push_str(&format!(
            " The readings do not pin h down: the interval is the whole search range [{}, {}] \
             W/(m² K). Sensors nearer the {} edge, or a stated h, would.",
            show(conv.h_range[0]),
            show(conv.h_range[1]),
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
    union(&mut r.field.lower, &other.field.lower, f64::min);
    union(&mut r.field.upper, &other.field.upper, f64::max);
    let (h, o) = (&mut r.hottest, &other.hottest);
    h.temperature_interval[0] = h.temperature_interval[0].min(o.temperature_interval[0]);
    h.temperature_interval[1] = h.temperature_interval[1].max(o.temperature_interval[1]);
    if h.edge == o.edge {
        h.position_interval[0] = h.position_interval[0].min(o.position_interval[0]);
        h.position_interval[1] = h.position_interval[1].max(o.position_interval[1]);
    }
    if let (Some(x), Some(y)) = (r.exceedance.as_mut(), other.exceedance.as_ref()) {
        x.probability = x.probability.max(y.probability);
        x.alarm = x.probability > x.alarm_probability;
    }
}
