//! The bound programs as second-order cone programs, solved by Clarabel (Goulart & Chen
//! 2024, "Clarabel: an interior-point solver for conic programs with quadratic objectives",
//! arXiv 2405.12762).
//!
//! Variables `x = (v', u, z)`: node values relative to a reference temperature `T_ref`
//! (the mean reading, for conditioning), the per-sensor model-error allowance `u`, and one
//! extra scalar `z` (the peak level `t`, or the scaled gradient `γ = G L_ref`). Clarabel's
//! standard form is `min qᵀx` subject to `A x + s = b`, `s ∈ K`; here `K` is a non-negative
//! orthant for
//!
//! - `|v_{j+1} − v_j| ≤ G h_e` (every node cell of every hidden edge),
//! - `|u_i| ≤ G a_i + b_i` (the allowance of `AdmissibleSet::allowance`: quasi-interpolation
//!   and series tail),
//! - `T_min ≤ v_j ≤ T_max` when stated, and the objective's own rows,
//!
//! followed by one second-order cone `‖W (H v + o + u − d)‖ ≤ √q` with `W = diag(1/σ)`
//! (Rust & Burrus 1972; Stark 1992).
//!
//! A bound is read conservatively from the primal and dual objectives: for a minimisation the
//! smaller of the two (weak duality makes the dual objective a lower bound of the optimum up to
//! the solver's feasibility tolerance, 1e-8 relative).

use super::set::AdmissibleSet;
use clarabel::algebra::CscMatrix;
use clarabel::solver::{
    DefaultSettingsBuilder, DefaultSolver, IPSolver, SolverStatus, SupportedConeT,
};

/// What a program optimises.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Objective {
    /// The largest value of node `j` (kelvin).
    MaxNode(usize),
    /// The smallest value of node `j` (kelvin).
    MinNode(usize),
    /// The smallest possible maximum over all nodes (kelvin).
    MinPeak,
    /// The smallest gradient limit (K/m) for which the set is not empty.
    MinGradient,
}

/// The result of one program.
#[derive(Debug, Clone, PartialEq)]
pub enum Outcome {
    /// The optimal value (kelvin, or K/m for [`Objective::MinGradient`]).
    Value(f64),
    /// The admissible set is empty.
    Infeasible,
    /// The solver did not reach a certified answer.
    Failed(String),
}

/// The constraints shared by every program.
#[derive(Debug, Clone, Copy)]
pub struct Limits {
    /// Gradient limit, K/m (ignored by [`Objective::MinGradient`]).
    pub gradient: f64,
    /// `√q`: the misfit radius.
    pub radius: f64,
    /// Lowest admissible edge temperature, kelvin.
    pub t_min: Option<f64>,
    /// Highest admissible edge temperature, kelvin.
    pub t_max: Option<f64>,
}

/// Triplet assembly of `A` and `b`, row by row.
struct Rows {
    i: Vec<usize>,
    j: Vec<usize>,
    v: Vec<f64>,
    b: Vec<f64>,
}

impl Rows {
    fn push(&mut self, entries: &[(usize, f64)], rhs: f64) {
        let r = self.b.len();
        for &(j, v) in entries {
            if v != 0.0 {
                self.i.push(r);
                self.j.push(j);
                self.v.push(v);
            }
        }
        self.b.push(rhs);
    }
}

/// Where each variable of a bound program sits: node values `v'` (temperatures above
/// `t_ref`) at `0..n`, model-error terms `u_i` at `iu + i`, and the extra scalar (peak or
/// gradient) at `iz`.
struct Layout {
    n: usize,
    m: usize,
    iu: usize,
    iz: usize,
    nvar: usize,
    /// The reference temperature the node values are taken from (the mean reading), kelvin.
    t_ref: f64,
    /// The length that scales the gradient variable, metres.
    l_ref: f64,
}

impl Layout {
    fn new(set: &AdmissibleSet) -> Self {
        let n = set.node_count;
        let m = set.sensor_count();
        let t_ref = set.readings.iter().sum::<f64>() / m as f64;
        let l_ref = set
            .edges
            .iter()
            .map(|e| e.length_m)
            .fold(0.0_f64, f64::max)
            .max(1e-9);
        Layout {
            n,
            m,
            iu: n,
            iz: n + m,
            nvar: n + m + 1,
            t_ref,
            l_ref,
        }
    }
}

/// Solve one bound program over `set`: the optimum of `objective` over the admissible set
/// under `limits`, read conservatively from the primal and dual objectives.
pub fn solve(set: &AdmissibleSet, limits: Limits, objective: Objective) -> Outcome {
    let lay = Layout::new(set);
    let (rows, n_orthant) = constraints(set, limits, objective, &lay);
    let (m, nvar, iz, t_ref, l_ref) = (lay.m, lay.nvar, lay.iz, lay.t_ref, lay.l_ref);
    let nrows = rows.b.len();
    let a = CscMatrix::new_from_triplets(nrows, nvar, rows.i, rows.j, rows.v);
    let p = CscMatrix::zeros((nvar, nvar));
    let mut q = vec![0.0; nvar];
    match objective {
        Objective::MaxNode(j) => q[j] = -1.0,
        Objective::MinNode(j) => q[j] = 1.0,
        Objective::MinPeak | Objective::MinGradient => q[iz] = 1.0,
    }
    let cones = [
        SupportedConeT::NonnegativeConeT(n_orthant),
        SupportedConeT::SecondOrderConeT(m + 1),
    ];
    let Ok(settings) = DefaultSettingsBuilder::default()
        .verbose(false)
        .max_iter(200)
        .build()
    else {
        return Outcome::Failed("solver settings rejected".into());
    };
    let mut solver = match DefaultSolver::new(&p, &q, &a, &rows.b, &cones, settings) {
        Ok(s) => s,
        Err(e) => return Outcome::Failed(format!("solver setup failed: {e}")),
    };
    solver.solve();
    let sol = &solver.solution;
    match sol.status {
        SolverStatus::Solved | SolverStatus::AlmostSolved => {
            let low = sol.obj_val.min(sol.obj_val_dual);
            let value = match objective {
                // max v = −min(−v) ≤ −(dual objective)
                Objective::MaxNode(_) => t_ref - low,
                Objective::MinNode(_) | Objective::MinPeak => t_ref + low,
                Objective::MinGradient => (low / l_ref).max(0.0),
            };
            if value.is_finite() {
                Outcome::Value(value)
            } else {
                Outcome::Failed("the solver returned a non-finite value".into())
            }
        }
        SolverStatus::PrimalInfeasible | SolverStatus::AlmostPrimalInfeasible => {
            Outcome::Infeasible
        }
        other => Outcome::Failed(format!("the conic solver stopped: {other:?}")),
    }
}

/// The constraint rows `A x + s = b` of a bound program: first the non-negative orthant
/// (slopes or the gradient variable, the model-error allowance,
/// temperature limits, the peak variable), then the second-order cone of the misfit.
/// Returns the rows and the size of the orthant.
fn constraints(
    set: &AdmissibleSet,
    limits: Limits,
    objective: Objective,
    lay: &Layout,
) -> (Rows, usize) {
    let (n, m, iu, iz) = (lay.n, lay.m, lay.iu, lay.iz);
    let (t_ref, l_ref) = (lay.t_ref, lay.l_ref);
    let free_gradient = objective == Objective::MinGradient;
    let g = limits.gradient;
    let mut rows = Rows {
        i: Vec::new(),
        j: Vec::new(),
        v: Vec::new(),
        b: Vec::new(),
    };
    // slopes
    for e in &set.edges {
        let h = e.spacing_m;
        for j in e.first..e.first + e.positions_m.len() - 1 {
            for sign in [1.0, -1.0] {
                if free_gradient {
                    rows.push(&[(j + 1, sign), (j, -sign), (iz, -h / l_ref)], 0.0);
                } else {
                    rows.push(&[(j + 1, sign), (j, -sign)], g * h);
                }
            }
        }
    }
    // model-error allowance
    let (per_gradient, fixed) = set.allowance();
    for i in 0..m {
        for sign in [1.0, -1.0] {
            if free_gradient {
                rows.push(&[(iu + i, sign), (iz, -per_gradient[i] / l_ref)], fixed[i]);
            } else {
                rows.push(&[(iu + i, sign)], g * per_gradient[i] + fixed[i]);
            }
        }
    }
    // temperature limits
    for j in 0..n {
        if let Some(t) = limits.t_max {
            rows.push(&[(j, 1.0)], t - t_ref);
        }
        if let Some(t) = limits.t_min {
            rows.push(&[(j, -1.0)], t_ref - t);
        }
    }
    match objective {
        Objective::MinPeak => {
            for j in 0..n {
                rows.push(&[(j, 1.0), (iz, -1.0)], 0.0);
            }
        }
        Objective::MinGradient => rows.push(&[(iz, -1.0)], 0.0),
        Objective::MaxNode(_) | Objective::MinNode(_) => {}
    }
    let n_orthant = rows.b.len();
    // the cone: (√q, W (H v' + o' + u − d))
    rows.push(&[], limits.radius);
    for i in 0..m {
        let w = 1.0 / set.sigmas[i];
        let hrow = &set.h[i * n..(i + 1) * n];
        let o = set.offset[i] + t_ref * hrow.iter().sum::<f64>();
        let mut entries: Vec<(usize, f64)> =
            hrow.iter().enumerate().map(|(j, &a)| (j, w * a)).collect();
        entries.push((iu + i, w));
        rows.push(&entries, w * (set.readings[i] - o));
    }
    (rows, n_orthant)
}
