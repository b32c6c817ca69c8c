//! Strict bounds on the hidden edges under a stated gradient limit.
//!
//! A smoothness prior cannot give honest intervals for a feature narrower than the sensors
//! resolve. A physical statement can: "no hidden edge changes by more than `G` kelvin per
//! metre along itself". The *admissible set* is every hidden-edge profile `f` with
//! `|f'| ≤ G` (and, when stated, `T_min ≤ f ≤ T_max`) whose predicted readings satisfy
//!
//! `‖W (R f − d)‖² ≤ q`,  `W = diag(1/σ)`,  `q = χ²_m(confidence)`,            (1)
//!
//! with `m` the number of readings. If the readings' errors are independent Gaussians with the
//! stated σ, the true profile lies in the set with probability at least `confidence`, and then
//! *every* quantity — each point of the edge, and the maximum along it — lies between its
//! smallest and largest value over the set: the bounds hold simultaneously (Rust & Burrus
//! 1972, *Mathematical Programming in Physical Sciences*; Stark 1992, "Inference in
//! infinite-dimensional inverse problems: discretization and duality", J. Geophys. Res.
//! 97(B10):14055–14082).
//!
//! The set is discretised in a way that keeps every admissible truth inside it (Stark 1992:
//! model error is part of the set); see [`set`] for the argument and the allowances it costs.
//! Each bound is then a second-order cone program ([`program`]). The peak's lower bound is one
//! program (`min t` subject to `v_j ≤ t`); its upper bound is the maximum over positions of the
//! pointwise upper bound `U(s)`, which is `G`-Lipschitz in `s`, so it is found by the
//! Piyavskii–Shubert method (Piyavskii 1972; Shubert 1972, SIAM J. Numer. Anal. 9:379–388):
//! `U` is evaluated at a few nodes and the tent `min_a (U_a + G |s − s_a|)` over them bounds
//! `U` everywhere; nodes are added where the tent is highest until it is within a tolerance of
//! the best evaluated value. The same Lipschitz tents give `bound_lower` and `bound_upper` at
//! every fine position from a coarse set of programs.
//!
//! Without a stated limit, [`gradient_study`] gives the smallest gradient the readings
//! require (one program with `G` as a variable: any truth steeper-limited than that would
//! contradict the readings at the stated confidence) and the peak's upper bound for a short
//! table of assumed limits.
//!
//! When σ was estimated from the residuals, the coverage statement is only approximate: the
//! result records it ([`BoundsResult::approximate`]).

pub mod dual;
pub mod program;
pub mod set;

pub use set::{AdmissibleSet, Discretisation, EdgeNodes};

use crate::error::{Error, Result};
use crate::geometry::{Edge, Plate, Point};
use program::{Limits, Objective, Outcome};
use rayon::prelude::*;
use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};
use std::collections::BTreeMap;

/// What the bounds are computed from: the fitted case's sensors in use and their readings.
#[derive(Debug, Clone, Copy)]
pub struct BoundsInput<'a> {
    /// The plate (its unknown edges are the hidden edges).
    pub plate: &'a Plate,
    /// Positions of the sensors in use, metres.
    pub sensors: &'a [Point],
    /// Their readings, kelvin.
    pub readings_k: &'a [f64],
    /// Their standard uncertainties, kelvin.
    pub sigmas_k: &'a [f64],
    /// Whether σ was stated (true) or estimated from the residuals (false: approximate).
    pub sigma_stated: bool,
    /// Confidence of the bounds, e.g. 0.95.
    pub confidence: f64,
    /// Lowest temperature a hidden edge can have, kelvin, if stated.
    pub min_temperature_k: Option<f64>,
    /// Highest temperature a hidden edge can have, kelvin, if stated.
    pub max_temperature_k: Option<f64>,
}

/// The statement a set of bounds rests on, and their confidence.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BoundSpec {
    /// Gradient limit along every hidden edge, K/m (positive).
    pub gradient_k_per_m: f64,
    /// Confidence, e.g. 0.95.
    pub confidence: f64,
    /// Lowest temperature a hidden edge can have, kelvin, if stated.
    pub min_temperature_k: Option<f64>,
    /// Highest temperature a hidden edge can have, kelvin, if stated.
    pub max_temperature_k: Option<f64>,
}

/// Numerical settings of the bounds.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BoundsOptions {
    /// How finely the set is discretised.
    pub discretisation: Discretisation,
    /// Programs per edge and per side for the envelopes (evenly spaced nodes, ends included).
    pub envelope_points: usize,
    /// Stop refining the peak's upper bound when the tent is within this of the best
    /// evaluated pointwise bound, kelvin.
    pub peak_tolerance_k: f64,
    /// Largest number of refinement rounds (four programs each).
    pub max_rounds: usize,
}

impl Default for BoundsOptions {
    fn default() -> Self {
        BoundsOptions {
            discretisation: Discretisation::default(),
            envelope_points: 49,
            peak_tolerance_k: 0.05,
            max_rounds: 16,
        }
    }
}

/// Bound envelopes along one hidden edge.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EdgeBounds {
    /// The edge.
    pub edge: Edge,
    /// Positions, metres from the edge's lower coordinate.
    pub positions_m: Vec<f64>,
    /// Lower bound of the temperature at each position, kelvin.
    pub lower_k: Vec<f64>,
    /// Upper bound of the temperature at each position, kelvin.
    pub upper_k: Vec<f64>,
}

/// The strict bounds under one gradient limit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum BoundsOutcome {
    /// The set is not empty: the bounds.
    Bounded {
        /// Lower and upper bound of the hottest temperature along the hidden edges, kelvin.
        hottest_k: [f64; 2],
        /// Envelopes along each hidden edge.
        edges: Vec<EdgeBounds>,
        /// Number of conic programs solved.
        programs: usize,
    },
    /// No profile obeying the limits reproduces the readings at the stated confidence: the
    /// readings rule the stated limit out (or a sensor is faulty).
    Empty,
    /// The solver did not reach a certified answer; no bounds are given.
    Failed {
        /// Why.
        reason: String,
    },
}

/// One row of the gradient study.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct GradientRow {
    /// The assumed gradient limit, K/m.
    pub gradient_k_per_m: f64,
    /// Upper bound of the hottest temperature under it, kelvin (`None`: not computed).
    pub hottest_upper_k: Option<f64>,
}

/// What the readings say about the gradient without a stated limit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GradientStudy {
    /// The smallest gradient limit compatible with the readings at the stated confidence, K/m
    /// (`None` when no gradient is: the readings contradict the model or the stated
    /// temperature limits).
    pub min_gradient_k_per_m: Option<f64>,
    /// Upper bound of the peak for a few assumed limits above the minimum.
    pub rows: Vec<GradientRow>,
}

/// Strict bounds and the gradient study of one estimate.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BoundsResult {
    /// Confidence of every bound.
    pub confidence: f64,
    /// `q = χ²_m(confidence)`, the misfit radius squared.
    pub chi_square_radius: f64,
    /// True when σ was estimated from the residuals: the coverage is then approximate.
    pub approximate: bool,
    /// Node spacing of the discretisation per hidden edge, metres.
    pub node_spacing_m: Vec<(Edge, f64)>,
    /// The stated gradient limit (K/m) and the bounds under it.
    pub stated: Option<(f64, BoundsOutcome)>,
    /// Stated lowest and highest hidden-edge temperatures, kelvin.
    pub temperature_limits_k: (Option<f64>, Option<f64>),
    /// The gradient study.
    pub study: GradientStudy,
    /// Why the bounds could not be computed at all (the rest is then empty).
    pub failure: Option<String>,
}

/// Rows of the gradient study.
pub const STUDY_ROWS: usize = 5;

/// The gradient study's node bounds are found to within this share of its peak search's
/// tolerance ([`gradient_study`]).
const STUDY_NODE_SHARE: f64 = 0.05;

/// `q = χ²_m(confidence)`.
fn chi_square_radius(m: usize, confidence: f64) -> Result<f64> {
    let dist = ChiSquared::new(m as f64)
        .map_err(|e| Error::Internal(format!("chi-square with {m} degrees: {e}")))?;
    let q = dist.inverse_cdf(confidence);
    if q.is_finite() && q > 0.0 {
        Ok(q)
    } else {
        Err(Error::Internal(format!(
            "chi-square quantile at {confidence} is not finite"
        )))
    }
}

/// Everything needed to run programs on one set.
struct Context<'a> {
    set: &'a AdmissibleSet,
    radius: f64,
    t_min: Option<f64>,
    t_max: Option<f64>,
    /// The dual of the node programs, when no temperature limit is stated ([`dual`]).
    dual: Option<dual::DualData>,
    /// How close to its optimum a node bound from the dual is taken, kelvin
    /// ([`dual::DualData::node_solution_within`]).
    node_tolerance_k: f64,
}

impl<'a> Context<'a> {
    fn limits(&self, gradient: f64) -> Limits {
        Limits {
            gradient,
            radius: self.radius,
            t_min: self.t_min,
            t_max: self.t_max,
        }
    }

    fn new(set: &'a AdmissibleSet, radius: f64, t_min: Option<f64>, t_max: Option<f64>) -> Self {
        let dual = (t_min.is_none() && t_max.is_none()).then(|| dual::DualData::new(set));
        Context {
            set,
            radius,
            t_min,
            t_max,
            dual,
            node_tolerance_k: dual::SMOOTHING_TOLERANCE_K,
        }
    }

    /// The same context with node bounds from the dual taken to within `tolerance_k`.
    fn with_node_tolerance(self, tolerance_k: f64) -> Self {
        Context {
            node_tolerance_k: tolerance_k,
            ..self
        }
    }

    /// One program: a node bound through its dual when that applies and settles, else the
    /// conic program.
    fn run(&self, gradient: f64, objective: Objective) -> Outcome {
        self.run_node(gradient, objective).0
    }

    /// One program, and for a node program solved through its dual, the bounds the same dual
    /// point gives every node of the edge (`(first node, values)`: upper bounds of each node
    /// for a maximum, lower bounds for a minimum, kelvin).
    fn run_node(&self, gradient: f64, objective: Objective) -> (Outcome, Option<NodeBounds>) {
        if let Some(dual) = &self.dual {
            let node = match objective {
                Objective::MaxNode(j) => Some((j, true)),
                Objective::MinNode(j) => Some((j, false)),
                Objective::MinPeak | Objective::MinGradient => None,
            };
            if let Some((j, maximise)) = node {
                if let Some(sol) = dual.node_solution_within(
                    j,
                    maximise,
                    gradient,
                    self.radius,
                    self.node_tolerance_k,
                ) {
                    let sign = if maximise { 1.0 } else { -1.0 };
                    let values = sol.edge_bounds.iter().map(|b| sign * b).collect();
                    return (Outcome::Value(sign * sol.bound), Some((sol.first, values)));
                }
            }
        }
        (
            program::solve(self.set, self.limits(gradient), objective),
            None,
        )
    }
}

/// Bounds on every node of one edge from one dual point: the edge's first node and one value
/// per node.
type NodeBounds = (usize, Vec<f64>);

/// Per edge, the tightest bound known at every node (upper bounds for `max`, lower for
/// `min`), from dual points and from the Lipschitz tents of evaluated nodes.
#[derive(Debug, Clone)]
struct Envelope {
    max: bool,
    nodes: Vec<Vec<f64>>,
}

impl Envelope {
    fn new(set: &AdmissibleSet, max: bool) -> Self {
        let start = if max {
            f64::INFINITY
        } else {
            f64::NEG_INFINITY
        };
        Envelope {
            max,
            nodes: set
                .edges
                .iter()
                .map(|e| vec![start; e.positions_m.len()])
                .collect(),
        }
    }

    fn tighten(&mut self, k: usize, e: usize, v: f64) {
        let slot = &mut self.nodes[e][k];
        *slot = if self.max { slot.min(v) } else { slot.max(v) };
    }

    /// Add the exact value `v` of node `j` of edge `e` (its tent, slope `g`) and, when given,
    /// the bounds its dual point gives the whole edge.
    fn add(
        &mut self,
        set: &AdmissibleSet,
        g: f64,
        e: usize,
        j: usize,
        v: f64,
        dual: Option<&NodeBounds>,
    ) {
        let edge = &set.edges[e];
        let sign = if self.max { 1.0 } else { -1.0 };
        for k in 0..edge.positions_m.len() {
            let tent = v + sign * g * (edge.positions_m[k] - edge.positions_m[j]).abs();
            self.tighten(k, e, tent);
        }
        if let Some((first, values)) = dual {
            if *first == edge.first && values.len() == edge.positions_m.len() {
                for (k, &b) in values.iter().enumerate() {
                    self.tighten(k, e, b);
                }
            }
        }
    }

    /// The bound at position `s` of edge `e`: the tightest node bound carried there along the
    /// slope `g`.
    fn at(&self, set: &AdmissibleSet, g: f64, e: usize, s: f64) -> f64 {
        let edge = &set.edges[e];
        let sign = if self.max { 1.0 } else { -1.0 };
        let carried = self.nodes[e]
            .iter()
            .zip(&edge.positions_m)
            .map(|(&b, &x)| b + sign * g * (s - x).abs());
        if self.max {
            carried.fold(f64::INFINITY, f64::min)
        } else {
            carried.fold(f64::NEG_INFINITY, f64::max)
        }
    }
}

/// The largest value of `min(a + G t, b + G (D − t))` over `t ∈ [0, D]`.
fn tent(a: f64, b: f64, g: f64, d: f64) -> f64 {
    if (a - b).abs() <= g * d {
        0.5 * (a + b + g * d)
    } else {
        a.max(b)
    }
}

/// Evenly spaced node indices `0..count`, ends included.
fn spread(count: usize, points: usize) -> Vec<usize> {
    let points = points.clamp(2, count);
    let mut v: Vec<usize> = (0..points)
        .map(|k| ((k as f64) * (count - 1) as f64 / (points - 1) as f64).round() as usize)
        .collect();
    v.dedup();
    v
}

/// Run `objective` for every `(edge, node)` in parallel; the order of the output follows the
/// input, so the result does not depend on the thread count.
#[allow(clippy::type_complexity)]
fn run_all(
    ctx: &Context,
    gradient: f64,
    jobs: &[(usize, usize)],
    max: bool,
) -> Vec<((usize, usize), Outcome, Option<NodeBounds>)> {
    jobs.par_iter()
        .map(|&(e, j)| {
            let var = ctx.set.edges[e].first + j;
            let obj = if max {
                Objective::MaxNode(var)
            } else {
                Objective::MinNode(var)
            };
            let (out, bounds) = ctx.run_node(gradient, obj);
            ((e, j), out, bounds)
        })
        .collect()
}

/// Piyavskii–Shubert search for the largest pointwise upper bound. Returns the upper
/// envelope at every node, the peak's upper bound (before the `G h / 3` allowance) and the
/// number of programs, or the first non-value outcome.
///
/// Each evaluated node bounds its neighbours by its Lipschitz tent; a node solved through
/// its dual also bounds every node of its edge through the same dual point
/// ([`dual::DualData::node_solution`]), which is never looser than the tent. The next nodes
/// evaluated are the four whose bound is highest, until no unevaluated node's bound exceeds
/// the best evaluated value by more than `tolerance`.
fn peak_upper(
    ctx: &Context,
    gradient: f64,
    start_points: usize,
    tolerance: f64,
    max_rounds: usize,
) -> std::result::Result<(Envelope, f64, usize), Outcome> {
    let set = ctx.set;
    let mut known: Vec<BTreeMap<usize, f64>> = vec![BTreeMap::new(); set.edges.len()];
    let mut envelope = Envelope::new(set, true);
    let mut jobs: Vec<(usize, usize)> = Vec::new();
    for (e, edge) in set.edges.iter().enumerate() {
        for j in spread(edge.positions_m.len(), start_points) {
            jobs.push((e, j));
        }
    }
    let mut programs = 0;
    for round in 0..=max_rounds {
        programs += jobs.len();
        for ((e, j), out, bounds) in run_all(ctx, gradient, &jobs, true) {
            match out {
                Outcome::Value(u) => {
                    known[e].insert(j, u);
                    envelope.add(set, gradient, e, j, u, bounds.as_ref());
                }
                other => return Err(other),
            }
        }
        let best = known
            .iter()
            .flat_map(|k| k.values().copied())
            .fold(f64::NEG_INFINITY, f64::max);
        // the highest point between any two neighbouring nodes, and the nodes worth a program
        let mut candidates: Vec<(f64, usize, usize)> = Vec::new();
        let mut top = best;
        for (e, nodes) in envelope.nodes.iter().enumerate() {
            let h = set.edges[e].spacing_m;
            for (k, w) in nodes.windows(2).enumerate() {
                top = top.max(tent(w[0], w[1], gradient, h));
                if k == 0 && w[0] > best + tolerance && !known[e].contains_key(&0) {
                    candidates.push((w[0], e, 0));
                }
                if w[1] > best + tolerance && !known[e].contains_key(&(k + 1)) {
                    candidates.push((w[1], e, k + 1));
                }
            }
        }
        if candidates.is_empty() || round == max_rounds {
            return Ok((envelope, top, programs));
        }
        // the four highest bounds, ties broken by edge and position (deterministic), a few
        // nodes apart: one dual point already bounds its close neighbours well
        candidates.sort_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)).then(a.2.cmp(&b.2)));
        jobs.clear();
        for &(_, e, j) in &candidates {
            let apart = (set.edges[e].positions_m.len() / 48).max(1);
            if jobs
                .iter()
                .all(|&(e2, j2)| e2 != e || j2.abs_diff(j) > apart)
            {
                jobs.push((e, j));
            }
            if jobs.len() == 4 {
                break;
            }
        }
    }
    Err(Outcome::Failed(
        "the peak search ended without a bound".into(),
    ))
}

/// Strict bounds under the gradient limit of `spec`, with envelopes at `positions_m`
/// (metres, per hidden edge; edges not listed get none, and without any position only the
/// hottest-temperature interval is computed).
///
/// # Errors
/// [`Error::Invalid`] for a non-positive or non-finite gradient.
pub fn bounds_under(
    set: &AdmissibleSet,
    spec: &BoundSpec,
    positions_m: &[(Edge, Vec<f64>)],
    options: &BoundsOptions,
) -> Result<BoundsOutcome> {
    let gradient_k_per_m = spec.gradient_k_per_m;
    let input = spec;
    if !(gradient_k_per_m.is_finite() && gradient_k_per_m > 0.0) {
        return Err(Error::invalid_field(
            "bounds.max_gradient",
            "the gradient limit must be a positive number",
        ));
    }
    let g = gradient_k_per_m;
    let ctx = Context::new(
        set,
        chi_square_radius(set.sensor_count(), input.confidence)?.sqrt(),
        input.min_temperature_k,
        input.max_temperature_k,
    );
    // the peak's lower bound first: it also tells whether the set is empty. When the conic
    // solver stalls on it (it has, rarely, on near-degenerate draws), the highest node lower
    // bound below stands in: max f ≥ f(s) ≥ lower(s) at every s, so it is still a strict
    // bound on the lowest possible peak, only a looser one.
    let peak_low = match ctx.run(g, Objective::MinPeak) {
        Outcome::Value(v) => Some(v),
        Outcome::Infeasible => return Ok(BoundsOutcome::Empty),
        Outcome::Failed(_) => None,
    };
    let (upper_nodes, top, mut programs) = match peak_upper(
        &ctx,
        g,
        options.envelope_points,
        options.peak_tolerance_k,
        options.max_rounds,
    ) {
        Ok(x) => x,
        Err(Outcome::Infeasible) => return Ok(BoundsOutcome::Empty),
        Err(Outcome::Failed(reason)) => return Ok(BoundsOutcome::Failed { reason }),
        Err(Outcome::Value(_)) => {
            return Ok(BoundsOutcome::Failed {
                reason: "the peak search stopped without a bound".into(),
            });
        }
    };
    programs += 1;
    let jobs: Vec<(usize, usize)> = set
        .edges
        .iter()
        .enumerate()
        .filter(|(_, edge)| peak_low.is_none() || positions_m.iter().any(|(x, _)| *x == edge.edge))
        .flat_map(|(e, edge)| {
            spread(edge.positions_m.len(), options.envelope_points)
                .into_iter()
                .map(move |j| (e, j))
        })
        .collect();
    programs += jobs.len();
    let mut lower_nodes = Envelope::new(set, false);
    for ((e, j), out, bounds) in run_all(&ctx, g, &jobs, false) {
        match out {
            Outcome::Value(v) => {
                lower_nodes.add(set, g, e, j, v, bounds.as_ref());
            }
            Outcome::Infeasible => return Ok(BoundsOutcome::Empty),
            Outcome::Failed(reason) => return Ok(BoundsOutcome::Failed { reason }),
        }
    }
    let h_max = set.edges.iter().map(|e| e.spacing_m).fold(0.0, f64::max);
    let clip_hi = |t: f64| input.max_temperature_k.map_or(t, |m| t.min(m));
    let clip_lo = |t: f64| input.min_temperature_k.map_or(t, |m| t.max(m));
    let mut edges = Vec::new();
    for (e, edge) in set.edges.iter().enumerate() {
        let Some((_, pos)) = positions_m.iter().find(|(x, _)| *x == edge.edge) else {
            continue;
        };
        let slack = g * edge.spacing_m / 3.0;
        let upper: Vec<f64> = pos
            .iter()
            .map(|&s| {
                let u = upper_nodes.at(set, g, e, s);
                clip_hi(u + slack)
            })
            .collect();
        let lower: Vec<f64> = pos
            .iter()
            .map(|&s| {
                let l = lower_nodes.at(set, g, e, s);
                clip_lo(l - slack)
            })
            .collect();
        edges.push(EdgeBounds {
            edge: edge.edge,
            positions_m: pos.clone(),
            lower_k: lower,
            upper_k: upper,
        });
    }
    // max f ≥ max_j f(s_j) ≥ max_j v_j − G h / 3; max f ≤ max_s U(s) + G h / 3
    let low = match peak_low {
        Some(v) => clip_lo(v - g * h_max / 3.0),
        None => set
            .edges
            .iter()
            .enumerate()
            .flat_map(|(e, edge)| {
                let slack = g * edge.spacing_m / 3.0;
                let lower = &lower_nodes;
                edge.positions_m
                    .iter()
                    .map(move |&s| clip_lo(lower.at(set, g, e, s) - slack))
            })
            .fold(f64::NEG_INFINITY, f64::max),
    };
    let hottest = [low, clip_hi(top + g * h_max / 3.0)];
    if hottest.iter().any(|v| !v.is_finite())
        || edges
            .iter()
            .any(|e| e.lower_k.iter().chain(&e.upper_k).any(|v| !v.is_finite()))
    {
        return Ok(BoundsOutcome::Failed {
            reason: "a bound came out non-finite".into(),
        });
    }
    Ok(BoundsOutcome::Bounded {
        hottest_k: hottest,
        edges,
        programs,
    })
}

/// The smallest gradient limit compatible with the readings, K/m (`None` when the set is
/// empty for every limit), or the solver's failure.
///
/// # Errors
/// Errors of the chi-square quantile.
pub fn min_required_gradient(
    set: &AdmissibleSet,
    input: &BoundsInput,
) -> Result<std::result::Result<Option<f64>, String>> {
    let ctx = Context::new(
        set,
        chi_square_radius(set.sensor_count(), input.confidence)?.sqrt(),
        input.min_temperature_k,
        input.max_temperature_k,
    );
    Ok(match ctx.run(0.0, Objective::MinGradient) {
        Outcome::Value(g) => Ok(Some(g)),
        Outcome::Infeasible => Ok(None),
        Outcome::Failed(r) => Err(r),
    })
}

/// Assumed limits for the study: values of the 1-2-5 series (K/m) above `1.1 × g_min`,
/// `count` of them; from `floor` when `g_min` is zero or tiny.
pub fn study_gradients(g_min: f64, floor: f64, count: usize) -> Vec<f64> {
    let start = (1.1 * g_min).max(floor).max(1e-12);
    let mut decade = 10f64.powf(start.log10().floor() - 1.0);
    let mut out = Vec::new();
    while out.len() < count && decade.is_finite() {
        for f in [1.0, 2.0, 5.0] {
            let v = f * decade;
            if v >= start && out.len() < count {
                out.push(v);
            }
        }
        decade *= 10.0;
    }
    out
}

/// The gradient study: the smallest required gradient and the peak's upper bound for
/// `count` assumed limits above it (cheaper settings than the stated bounds: fewer starting
/// nodes, a coarser tolerance).
///
/// # Errors
/// Errors of the chi-square quantile.
pub fn gradient_study(
    set: &AdmissibleSet,
    input: &BoundsInput,
    count: usize,
    options: &BoundsOptions,
) -> Result<GradientStudy> {
    let g_min = match min_required_gradient(set, input)? {
        Ok(Some(g)) => g,
        Ok(None) | Err(_) => {
            return Ok(GradientStudy {
                min_gradient_k_per_m: None,
                rows: Vec::new(),
            });
        }
    };
    // a floor for a readings pattern that needs no gradient at all: the spread of the
    // readings over the longest hidden edge, a hundredth of it
    let spread_k = input
        .readings_k
        .iter()
        .fold(f64::NEG_INFINITY, |a, &b| a.max(b))
        - input
            .readings_k
            .iter()
            .fold(f64::INFINITY, |a, &b| a.min(b));
    let l_max = set.edges.iter().map(|e| e.length_m).fold(0.0, f64::max);
    let floor = 0.01 * spread_k.max(1e-3) / l_max.max(1e-9);
    // each row's peak search stops within `tolerance` of the peak's bound: node bounds
    // within a twentieth of that add at most a twentieth to the row, and their dual
    // searches stop several smoothing stages sooner than at the envelope's
    // `SMOOTHING_TOLERANCE_K` (measured on the bench's 14-sensor case: 12 % less CPU)
    let tolerance = 4.0 * options.peak_tolerance_k;
    let ctx = Context::new(
        set,
        chi_square_radius(set.sensor_count(), input.confidence)?.sqrt(),
        input.min_temperature_k,
        input.max_temperature_k,
    )
    .with_node_tolerance(STUDY_NODE_SHARE * tolerance);
    let h_max = set.edges.iter().map(|e| e.spacing_m).fold(0.0, f64::max);
    // the series of assumed limits is round in K/m, or in K per degree on a round part
    let unit = degree_m(input.plate).unwrap_or(1.0);
    let limits: Vec<f64> = study_gradients(g_min * unit, floor * unit, count)
        .into_iter()
        .map(|g| g / unit)
        .collect();
    // the rows are independent: one Piyavskii–Shubert search each, in parallel
    let rows = limits
        .into_par_iter()
        .map(|g| {
            let upper = peak_upper(
                &ctx,
                g,
                (options.envelope_points / 4).max(5),
                tolerance,
                options.max_rounds / 2,
            )
            .ok()
            .map(|(_, top, _)| {
                let u = top + g * h_max / 3.0;
                input.max_temperature_k.map_or(u, |t| u.min(t))
            })
            .filter(|u| u.is_finite());
            GradientRow {
                gradient_k_per_m: g,
                hottest_upper_k: upper,
            }
        })
        .collect();
    Ok(GradientStudy {
        min_gradient_k_per_m: Some(g_min),
        rows,
    })
}

/// Build the admissible set and compute everything: the study always, the bounds under
/// `gradient_k_per_m` when one is stated.
///
/// # Errors
/// [`Error::Invalid`] for a sensor on a hidden edge or a bad gradient; forward-model errors.
pub fn strict_bounds(
    input: &BoundsInput,
    gradient_k_per_m: Option<f64>,
    positions_m: &[(Edge, Vec<f64>)],
    options: &BoundsOptions,
) -> Result<BoundsResult> {
    let set = AdmissibleSet::new(
        input.plate,
        input.sensors,
        input.readings_k,
        input.sigmas_k,
        options.discretisation,
    )?;
    let q = chi_square_radius(set.sensor_count(), input.confidence)?;
    let stated = match gradient_k_per_m {
        Some(g) => {
            let spec = BoundSpec {
                gradient_k_per_m: g,
                confidence: input.confidence,
                min_temperature_k: input.min_temperature_k,
                max_temperature_k: input.max_temperature_k,
            };
            Some((g, bounds_under(&set, &spec, positions_m, options)?))
        }
        None => None,
    };
    let study = gradient_study(&set, input, STUDY_ROWS, options)?;
    Ok(BoundsResult {
        confidence: input.confidence,
        chi_square_radius: q,
        approximate: !input.sigma_stated,
        node_spacing_m: set.edges.iter().map(|e| (e.edge, e.spacing_m)).collect(),
        stated,
        temperature_limits_k: (input.min_temperature_k, input.max_temperature_k),
        study,
        failure: None,
    })
}

/// The length, metres, of one unit of position in which a gradient limit is stated: the
/// case's length unit on a straight edge; on a round part one degree of arc of the smallest
/// hidden circle (a limit per degree is the same per metre on every circle only at one
/// radius: at the smallest it is the largest per metre, so the admissible set holds every
/// profile the per-degree limit allows on any hidden circle).
pub fn gradient_unit_m(plate: &Plate, units: &crate::units::Units) -> f64 {
    degree_m(plate).unwrap_or_else(|| units.length_to_m(1.0))
}

/// One degree of arc of the smallest hidden circle of a round part, metres (`None` for a
/// rectangle or strip): the unit of its gradient limits ([`gradient_unit_m`]).
pub fn degree_m(plate: &Plate) -> Option<f64> {
    let shape = plate.shape();
    if !shape.is_round() {
        return None;
    }
    let hidden = plate.unknown_edges();
    let radii = if hidden.is_empty() {
        shape.edges()
    } else {
        hidden
    };
    let r = radii
        .iter()
        .filter_map(|&e| shape.radius_of(e))
        .fold(f64::INFINITY, f64::min);
    Some(r * std::f64::consts::PI / 180.0)
}

/// The strict bounds of an estimate, never an error: a failure is recorded in
/// [`BoundsResult::failure`] so that the estimate itself still stands.
///
/// `used` indexes `case.sensors`, `points` and `readings_k` (every sensor of the case);
/// `sigmas_k` follows `used`. The gradient limit is `gradient_override_k_per_m` if given, else
/// the case's `[bounds] max_gradient`.
#[allow(clippy::too_many_arguments)]
pub fn estimate_bounds(
    case: &crate::case::Case,
    points: &[Point],
    readings_k: &[Option<f64>],
    used: &[usize],
    sigmas_k: &[f64],
    sigma_stated: bool,
    gradient_override_k_per_m: Option<f64>,
    positions_m: &[(Edge, Vec<f64>)],
) -> BoundsResult {
    let sensors: Vec<Point> = used.iter().map(|&i| points[i]).collect();
    let d: Vec<f64> = used
        .iter()
        .map(|&i| readings_k.get(i).copied().flatten().unwrap_or(f64::NAN))
        .collect();
    let input = BoundsInput {
        plate: &case.plate,
        sensors: &sensors,
        readings_k: &d,
        sigmas_k,
        sigma_stated,
        confidence: case.uncertainty.confidence,
        min_temperature_k: case.bounds.min_temperature_k,
        max_temperature_k: case.bounds.max_temperature_k,
    };
    let gradient = gradient_override_k_per_m.or(case.bounds.max_gradient_k_per_m);
    strict_bounds(&input, gradient, positions_m, &BoundsOptions::default()).unwrap_or_else(|e| {
        BoundsResult {
            confidence: input.confidence,
            chi_square_radius: 0.0,
            approximate: !sigma_stated,
            node_spacing_m: Vec::new(),
            stated: gradient.map(|g| {
                (
                    g,
                    BoundsOutcome::Failed {
                        reason: e.to_string(),
                    },
                )
            }),
            temperature_limits_k: (input.min_temperature_k, input.max_temperature_k),
            study: GradientStudy {
                min_gradient_k_per_m: None,
                rows: Vec::new(),
            },
            failure: Some(e.to_string()),
        }
    })
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;

    #[test]
    fn tent_is_the_highest_point_of_two_slopes() {
        // min(a + G t, b + G (D − t)) peaks where the two lines cross: at (a + b + G D)/2
        // (elementary geometry)
        assert_eq!(tent(0.0, 0.0, 1.0, 2.0), 1.0);
        assert_eq!(tent(1.0, 0.0, 1.0, 2.0), 1.5);
        // lines that do not cross inside: the higher end
        assert_eq!(tent(5.0, 0.0, 1.0, 2.0), 5.0);
    }

    #[test]
    fn study_gradients_follow_the_1_2_5_series_above_the_minimum() {
        assert_eq!(
            study_gradients(325.0, 1.0, 5),
            vec![500.0, 1000.0, 2000.0, 5000.0, 10000.0]
        );
        // 1.1 × 450 = 495 still below 500
        assert_eq!(study_gradients(450.0, 1.0, 2), vec![500.0, 1000.0]);
        // no required gradient: from the floor
        assert_eq!(study_gradients(0.0, 3.0, 2), vec![5.0, 10.0]);
    }

    #[test]
    fn spread_keeps_both_ends() {
        let v = spread(241, 49);
        assert_eq!(v.first(), Some(&0));
        assert_eq!(v.last(), Some(&240));
        assert_eq!(v.len(), 49);
        assert!(v.windows(2).all(|w| w[1] - w[0] == 5));
    }
}
