//! Pointwise bounds from the dual problem: the same optimum as a node program of
//! [`super::program`], found in the sensors' dimension instead of the nodes'.
//!
//! For a node objective `c = ±e_j` and no temperature limits, every admissible `(v, u)`
//! satisfies, for every `y ∈ ℝ^m` (Cauchy–Schwarz on the misfit cone),
//!
//! `cᵀv ≤ r‖y‖ + yᵀW(d − o) − yᵀW u + (c − HᵀW y)ᵀ v`.
//!
//! The allowance `|u_i| ≤ G a_i + b_i` gives `−yᵀW u ≤ Σ_i β_i |y_i|`, `β_i = w_i (G a_i + b_i)`.
//! Along each hidden edge the node values are only tied by `|v_{k+1} − v_k| ≤ G h`, so
//! `gᵀv` (`g = c − HᵀW y`) is bounded over them exactly when the entries of `g` along the
//! edge sum to zero, and then its largest value is `G h Σ_l |P_l|` with `P_l` the partial sums
//! of `g` (summation by parts: `gᵀv = −Σ_l (v_{l+1} − v_l) P_l`). Hence, with those sums
//! fixed to zero,
//!
//! `cᵀv ≤ F(y) = r‖y‖ + yᵀW(d − o) + Σ_i β_i |y_i| + Σ_e G h_e Σ_l |P_{e,l}(y)|`
//!
//! for **every** such `y`: any `y` gives a strict bound, and the smallest is the program's
//! optimum (Lagrangian duality; the set has interior points, so there is no gap: Boyd &
//! Vandenberghe 2004, *Convex Optimization*, §5.2.3 and §5.9). The search for a good `y` is a
//! smooth problem in `m` unknowns: each `|x|` is replaced by `√(x² + μ²)`, which overestimates
//! it by at most `μ`, and Newton's method with the edge sums as equality constraints is run
//! for `μ` falling by a factor 0.4 per stage (a homotopy). The bound returned is the exact,
//! non-smooth `F` at the final `y`, so a search that stops early gives a wider bound, never a
//! false one. Rounding in the edge sums is covered by adding `|Σ g| T_span` per edge
//! ([`super::set::TEMPERATURE_SPAN_K`]).
//!
//! Each Newton step costs `O(n m²)` for `n` nodes and `m` sensors, against an interior-point
//! method on the `n`-dimensional primal that solves a sparse system with dense rows several
//! times per step; the optimum agrees with the conic solver's to about 1e-6 K
//! (`tests/integration/bounds_reference.rs`).

use super::set::{AdmissibleSet, TEMPERATURE_SPAN_K};
use nalgebra::{DMatrix, DVector};

/// The gradient-independent data of the dual for one set: the partial sums of `W H` along
/// each edge, and `W (d − o)`.
#[derive(Debug, Clone)]
pub struct DualData {
    m: usize,
    /// Per node `k` (all edges, in variable order): `Σ_{k' ≤ k, same edge} w_i H_{ik'}` for
    /// every sensor `i`, stored node after node (`cum[k m + i]`).
    cum: Vec<f64>,
    /// `cum` sensor after sensor (`cum_t[i n + k]`), for the products `cum · y` of every node
    /// at once ([`node_dots`]).
    cum_t: Vec<f64>,
    /// `cum` again with each node's row padded with zeros to [`DualData::stride`] entries,
    /// for the Hessian's blocked product.
    padded: Vec<f64>,
    /// Row length of `padded`: `m` rounded up to a multiple of [`GRAM_COLS`].
    stride: usize,
    /// Per hidden edge: first node, node count, spacing (metres).
    edges: Vec<(usize, usize, f64)>,
    /// `w_i (d_i − o_i)`.
    a0: Vec<f64>,
    /// `w_i = 1 / σ_i`.
    w: Vec<f64>,
    /// Allowance per unit gradient (metres) and fixed allowance (kelvin) per sensor.
    allowance: (Vec<f64>, Vec<f64>),
}

/// Columns (and rows) of one register block of the Hessian's Gram product
/// ([`Problem::derivatives`]).
const GRAM_COLS: usize = 8;
const GRAM_ROWS: usize = 4;

/// Largest number of Newton steps over all smoothing stages.
const MAX_STEPS: usize = 400;

/// Factor on `μ` from one smoothing stage to the next. Measured on the sample cases (the
/// gradient study and `--max-gradient 2`): 0.4 takes 12–26 % fewer Newton steps in all than
/// 0.1 (each stage then starts closer to its optimum), 0.2–0.5 are within a few per cent of
/// it, 0.01–0.05 take more; the bounds move by about 1e-4 K either way (each is `F` at the
/// final point, a strict bound whatever the path: module doc).
const MU_REDUCTION: f64 = 0.4;

/// Share of the predicted decrease a Newton step must achieve before the line search takes
/// it (Armijo's condition; Nocedal & Wright 2006, *Numerical Optimization*, §3.1). Measured on
/// the sample cases: 0.3 takes 12 % fewer Newton steps in all than the customary 1e-4, and
/// 3–11 % less time per estimate (an observation, not a derivation), 0.2–0.4 about the same;
/// the bounds move by at most 4e-4 K either way.
const ARMIJO: f64 = 0.3;

/// The smoothing stops when `μ` times the total weight of the smoothed terms is below this,
/// kelvin: the smooth optimum is then within it of the exact one. The default of
/// [`DualData::node_solution`]; [`DualData::node_solution_within`] takes another.
pub const SMOOTHING_TOLERANCE_K: f64 = 1e-5;

impl DualData {
    /// Precompute the dual's data for `set`.
    pub fn new(set: &AdmissibleSet) -> Self {
        let m = set.sensor_count();
        let n = set.node_count;
        let w: Vec<f64> = set.sigmas.iter().map(|s| 1.0 / s).collect();
        let mut cum = vec![0.0; n * m];
        let mut edges = Vec::with_capacity(set.edges.len());
        for e in &set.edges {
            let count = e.positions_m.len();
            edges.push((e.first, count, e.spacing_m));
            for i in 0..m {
                let row = &set.h[i * n..(i + 1) * n];
                let mut acc = 0.0;
                for k in e.first..e.first + count {
                    acc += w[i] * row[k];
                    cum[k * m + i] = acc;
                }
            }
        }
        let a0 = (0..m)
            .map(|i| w[i] * (set.readings[i] - set.offset[i]))
            .collect();
        let stride = m.next_multiple_of(GRAM_COLS).max(GRAM_COLS);
        let mut padded = vec![0.0; n * stride];
        for (row, full) in cum
            .chunks_exact(m.max(1))
            .zip(padded.chunks_exact_mut(stride))
        {
            full[..row.len()].copy_from_slice(row);
        }
        let mut cum_t = vec![0.0; n * m];
        for (k, row) in cum.chunks_exact(m.max(1)).enumerate() {
            for (i, &v) in row.iter().enumerate() {
                cum_t[i * n + k] = v;
            }
        }
        DualData {
            m,
            cum_t,
            cum,
            padded,
            stride,
            edges,
            a0,
            w,
            allowance: set.allowance(),
        }
    }

    /// The largest value of node `node` over the set (`maximise`), or minus the smallest
    /// (`!maximise`), under gradient limit `gradient` (K/m) and misfit radius `radius`, as a
    /// strict upper bound in kelvin. `None` when the search did not settle (the caller then
    /// uses the conic program).
    pub fn node_bound(
        &self,
        node: usize,
        maximise: bool,
        gradient: f64,
        radius: f64,
    ) -> Option<f64> {
        self.node_solution(node, maximise, gradient, radius)
            .map(|s| s.bound)
    }

    /// Like [`DualData::node_bound`], and with it the bounds the same dual point gives every
    /// other node of the edge.
    ///
    /// The edge sums of `±e_j − HᵀW y` do not depend on which node of the edge `j` is, so
    /// the `y` found for node `j` is a dual point for every node `j'` of the same edge: its
    /// `F` for `j'` differs only in the partial sums between `j` and `j'` (each moved by
    /// `±1`), and is a strict bound for `j'` too — never worse than the Lipschitz tent
    /// `U_j + G |s_j' − s_j|` and often much better. All of them cost `O(n)` together.
    pub fn node_solution(
        &self,
        node: usize,
        maximise: bool,
        gradient: f64,
        radius: f64,
    ) -> Option<NodeSolution> {
        self.node_solution_within(node, maximise, gradient, radius, SMOOTHING_TOLERANCE_K)
    }

    /// [`DualData::node_solution`] with the smoothing followed down to `tolerance_k` kelvin
    /// instead of [`SMOOTHING_TOLERANCE_K`]: the bound is within about that of the node's
    /// optimum, and strict whatever the tolerance (it is `F` at the final dual point). A
    /// search that stops at a coarser tolerance itself needs no finer node bounds.
    pub fn node_solution_within(
        &self,
        node: usize,
        maximise: bool,
        gradient: f64,
        radius: f64,
        tolerance_k: f64,
    ) -> Option<NodeSolution> {
        let sign = if maximise { 1.0 } else { -1.0 };
        let problem = Problem::new(self, node, sign, gradient, radius, tolerance_k)?;
        let (y, bound) = problem.solve()?;
        let (first, edge_bounds) = problem.whole_edge(&y);
        Some(NodeSolution {
            bound,
            first,
            edge_bounds,
        })
    }
}

/// A node bound and what its dual point says about the rest of the node's edge.
#[derive(Debug, Clone, PartialEq)]
pub struct NodeSolution {
    /// The bound for the node itself (as [`DualData::node_bound`]).
    pub bound: f64,
    /// Index of the edge's first node.
    pub first: usize,
    /// The bound the same dual point gives each node of the edge, in the same sense
    /// (an upper bound of `v`, or of `−v` for a minimum), kelvin.
    pub edge_bounds: Vec<f64>,
}

/// One node objective on one set.
struct Problem<'a> {
    data: &'a DualData,
    /// `C_k`: partial sums of the objective along each edge (`±1` from the node on).
    c_sum: Vec<f64>,
    /// `β_i`.
    beta: Vec<f64>,
    /// Weight `G h_e` of each partial sum (zero for each edge's last node, whose sum is fixed).
    omega: Vec<f64>,
    /// Indices of each edge's last node (the equality constraints).
    last: Vec<usize>,
    radius: f64,
    /// Where the smoothing stops, kelvin ([`SMOOTHING_TOLERANCE_K`]).
    tolerance_k: f64,
}

impl<'a> Problem<'a> {
    fn new(
        data: &'a DualData,
        node: usize,
        sign: f64,
        gradient: f64,
        radius: f64,
        tolerance_k: f64,
    ) -> Option<Self> {
        let n = data.cum.len() / data.m.max(1);
        if node >= n
            || !(gradient.is_finite() && gradient > 0.0)
            || radius.is_nan()
            || radius <= 0.0
            || !(tolerance_k.is_finite() && tolerance_k > 0.0)
        {
            return None;
        }
        let mut c_sum = vec![0.0; n];
        let mut omega = vec![0.0; n];
        let mut last = Vec::with_capacity(data.edges.len());
        for &(first, count, h) in &data.edges {
            for k in first..first + count {
                if (first..first + count).contains(&node) && k >= node {
                    c_sum[k] = sign;
                }
                omega[k] = if k + 1 < first + count {
                    gradient * h
                } else {
                    0.0
                };
            }
            last.push(first + count - 1);
        }
        let (per_gradient, fixed) = &data.allowance;
        let beta = (0..data.m)
            .map(|i| data.w[i] * (gradient * per_gradient[i] + fixed[i]))
            .collect();
        Some(Problem {
            data,
            c_sum,
            beta,
            omega,
            last,
            radius,
            tolerance_k,
        })
    }

    /// `P_k(y) = C_k − cum_k · y` for every node.
    fn partial_sums(&self, y: &[f64], out: &mut [f64]) {
        node_dots(&self.data.cum_t, self.data.m, y, out);
        for (p, c) in out.iter_mut().zip(&self.c_sum) {
            *p = c - *p;
        }
    }

    /// `F` (exact, `mu = None`) or its smoothing with parameters `(μ_P, μ_y)`; `terms` is
    /// scratch for the nodes' terms.
    fn value(&self, y: &[f64], p: &[f64], mu: Option<(f64, f64)>, terms: &mut Vec<f64>) -> f64 {
        let abs = |x: f64, s: f64| match mu {
            None => x.abs(),
            Some(_) => (x * x + s * s).sqrt(),
        };
        let (mu_p, mu_y) = mu.unwrap_or((0.0, 0.0));
        let norm = y.iter().map(|v| v * v).sum::<f64>().sqrt();
        let mut f = self.radius * norm;
        for ((a, b), &yi) in self.data.a0.iter().zip(&self.beta).zip(y) {
            f += a * yi + b * abs(yi, mu_y);
        }
        // each node's ω |P| (smoothed) over the whole slice, then added in node order
        terms.clear();
        terms.resize(p.len(), 0.0);
        node_magnitudes(p, &self.omega, mu.map(|_| mu_p), terms);
        for (&t, &om) in terms.iter().zip(&self.omega) {
            if om > 0.0 {
                f += t;
            }
        }
        f
    }

    /// The exact bound at `y`: `F(y)` plus the rounding of the edge sums.
    fn bound(&self, y: &[f64], p: &[f64]) -> f64 {
        let slack: f64 = self.last.iter().map(|&k| p[k].abs()).sum();
        self.value(y, p, None, &mut Vec::new()) + slack * TEMPERATURE_SPAN_K
    }

    fn solve(&self) -> Option<(Vec<f64>, f64)> {
        let m = self.data.m;
        let n = self.c_sum.len();
        let e = self.last.len();
        // the equality constraints S^T y = t: columns cum_{last_e}, right sides C_{last_e}
        let s = DMatrix::from_fn(m, e, |i, c| self.data.cum[self.last[c] * m + i]);
        let t = DVector::from_iterator(e, self.last.iter().map(|&k| self.c_sum[k]));
        // least-norm start
        let sts = s.transpose() * &s;
        let y0 = &s * sts.clone().lu().solve(&t)?;
        let mut y: Vec<f64> = y0.iter().copied().collect();
        let mut p = vec![0.0; n];
        self.partial_sums(&y, &mut p);
        let weight_p: f64 = self.omega.iter().sum();
        let weight_y: f64 = self.beta.iter().sum();
        let y_scale = y.iter().fold(0.0_f64, |a, v| a.max(v.abs())).max(1e-300);
        let mut mu = (1.0, y_scale);
        let target = (
            self.tolerance_k / weight_p.max(1e-300),
            self.tolerance_k / weight_y.max(1e-300),
        );
        let mut steps = 0;
        let mut grad = vec![0.0; m];
        let mut hess = DMatrix::<f64>::zeros(m + e, m + e);
        let mut trial = vec![0.0; m];
        let mut p_trial = vec![0.0; n];
        let mut dp = vec![0.0; n];
        let mut work = Work::default();
        let mut terms = Vec::with_capacity(n);
        loop {
            // Newton on the smoothed F at this μ
            loop {
                if steps >= MAX_STEPS {
                    return None;
                }
                steps += 1;
                self.derivatives(&y, &p, mu, &mut grad, &mut hess, &mut work);
                for r in 0..m {
                    for c in 0..e {
                        hess[(r, m + c)] = s[(r, c)];
                        hess[(m + c, r)] = s[(r, c)];
                    }
                }
                for r in m..m + e {
                    for c in m..m + e {
                        hess[(r, c)] = 0.0;
                    }
                }
                // right side: −∇F and the equality residual
                let mut rhs = DVector::<f64>::zeros(m + e);
                for i in 0..m {
                    rhs[i] = -grad[i];
                }
                for (c, &k) in self.last.iter().enumerate() {
                    // P_last = t − S^T y: drive it to zero
                    rhs[m + c] = p[k];
                }
                let step = hess.clone().lu().solve(&rhs)?;
                let dy: Vec<f64> = step.iter().take(m).copied().collect();
                let decrement: f64 = -dy.iter().zip(&grad).map(|(a, b)| a * b).sum::<f64>();
                let f0 = self.value(&y, &p, Some(mu), &mut terms);
                // backtracking line search (Armijo); along the line the partial sums move by
                // α dP with dP = −cum · dy, so each trial costs O(n), not O(n m)
                node_dots(&self.data.cum_t, self.data.m, &dy, &mut dp);
                for d in dp.iter_mut() {
                    *d = -*d;
                }
                let mut alpha = 1.0;
                let mut accepted = false;
                for _ in 0..60 {
                    for i in 0..m {
                        trial[i] = y[i] + alpha * dy[i];
                    }
                    for ((t, &p0), &d) in p_trial.iter_mut().zip(&p).zip(&dp) {
                        *t = p0 + alpha * d;
                    }
                    let f1 = self.value(&trial, &p_trial, Some(mu), &mut terms);
                    if f1.is_finite() && f1 <= f0 - ARMIJO * alpha * decrement.max(0.0) {
                        accepted = true;
                        break;
                    }
                    alpha *= 0.5;
                }
                if !accepted {
                    break;
                }
                y.copy_from_slice(&trial);
                // the exact partial sums at the new point (no drift from the updates)
                self.partial_sums(&y, &mut p);
                if !f0.is_finite() || f0 < -1e3 * TEMPERATURE_SPAN_K {
                    return None; // unbounded below: the set is empty
                }
                // settled at this μ when the predicted decrease is below the smoothing's own
                // error (the last stage: well below the tolerance)
                let stage_tolerance =
                    (0.1 * (mu.0 * weight_p + mu.1 * weight_y)).max(1e-3 * self.tolerance_k);
                if decrement.abs() <= stage_tolerance {
                    break;
                }
            }
            if mu.0 <= target.0 && mu.1 <= target.1 {
                break;
            }
            mu = (
                (mu.0 * MU_REDUCTION).max(target.0),
                (mu.1 * MU_REDUCTION).max(target.1),
            );
        }
        let b = self.bound(&y, &p);
        b.is_finite().then_some((y, b))
    }

    /// The exact bound at `y` for every node of the objective's edge: `(first node, bounds)`.
    /// With `A_l = −cum_l · y`, node `j'` has partial sums `A_l` before it and `±1 + A_l`
    /// from it on; the other edges' terms and the smooth part are shared.
    fn whole_edge(&self, y: &[f64]) -> (usize, Vec<f64>) {
        let m = self.data.m;
        let n = self.c_sum.len();
        let mut a = vec![0.0; n];
        node_dots(&self.data.cum_t, m, y, &mut a);
        for ak in a.iter_mut() {
            *ak = -*ak;
        }
        let norm = y.iter().map(|v| v * v).sum::<f64>().sqrt();
        let mut shared = self.radius * norm;
        for ((a0, b), &yi) in self.data.a0.iter().zip(&self.beta).zip(y) {
            shared += a0 * yi + b * yi.abs();
        }
        // the objective's edge: the one whose last partial sum carries the ±1
        let own = self
            .data
            .edges
            .iter()
            .position(|&(first, count, _)| self.c_sum[first + count - 1] != 0.0)
            .unwrap_or(0);
        let sign = self.c_sum[self.last[own]];
        for (e, &(first, count, _)) in self.data.edges.iter().enumerate() {
            if e == own {
                continue;
            }
            let last = first + count - 1;
            shared += (first..last)
                .map(|k| self.omega[k] * a[k].abs())
                .sum::<f64>();
            shared += a[last].abs() * TEMPERATURE_SPAN_K;
        }
        let (first, count, _) = self.data.edges[own];
        let last = first + count - 1;
        shared += (sign + a[last]).abs() * TEMPERATURE_SPAN_K;
        // before[j] = Σ_{l<j} ω|A_l|, after[j] = Σ_{j≤l<last} ω|±1 + A_l|
        let mut out = vec![shared; count];
        let mut acc = 0.0;
        for (j, o) in out.iter_mut().enumerate() {
            *o += acc;
            let k = first + j;
            if k < last {
                acc += self.omega[k] * a[k].abs();
            }
        }
        let mut acc = 0.0;
        for (j, o) in out.iter_mut().enumerate().rev() {
            let k = first + j;
            if k < last {
                acc += self.omega[k] * (sign + a[k]).abs();
            }
            *o += acc;
        }
        (first, out)
    }

    /// Gradient and Hessian (top-left `m × m` block of `hess`) of the smoothed `F`.
    ///
    /// Every entry is the same operations in the same order as the plain loops (the
    /// Hessian's `r ‖y‖` part, then the `β` terms, then the nodes' terms in node order), so
    /// the numbers do not depend on how the passes are laid out: the per-node square roots
    /// and divisions over whole slices (`sqrt` and `/` are correctly rounded however they
    /// are issued), the gradient's node sums over the zero-padded rows.
    fn derivatives(
        &self,
        y: &[f64],
        p: &[f64],
        (mu_p, mu_y): (f64, f64),
        grad: &mut [f64],
        hess: &mut DMatrix<f64>,
        work: &mut Work,
    ) {
        let m = self.data.m;
        let n = p.len();
        let norm = y.iter().map(|v| v * v).sum::<f64>().sqrt().max(1e-300);
        // r ‖y‖: each entry of the zeroed Hessian plus its term (0 + x, as `+=` on a zero)
        for j in 0..m {
            let column = &mut hess.column_mut(j);
            for i in 0..m {
                let delta = if i == j { 1.0 } else { 0.0 };
                column[i] = 0.0 + self.radius * (delta - y[i] * y[j] / (norm * norm)) / norm;
            }
        }
        for i in 0..m {
            grad[i] = self.radius * y[i] / norm + self.data.a0[i];
        }
        // β_i |y_i|
        for i in 0..m {
            let h = (y[i] * y[i] + mu_y * mu_y).sqrt();
            grad[i] += self.beta[i] * y[i] / h;
            hess[(i, i)] += self.beta[i] * mu_y * mu_y / (h * h * h);
        }
        // Σ ω_k |P_k|, P_k = C_k − cum_k · y ([`node_terms`])
        let stride = self.data.stride;
        work.slope.clear();
        work.slope.resize(n, 0.0);
        work.curvature.clear();
        work.curvature.resize(n, 0.0);
        work.grad.clear();
        work.grad.extend_from_slice(grad);
        work.grad.resize(stride, 0.0);
        let largest = node_terms(
            (p, &self.omega, mu_p),
            (&self.data.padded, stride),
            (&mut work.slope, &mut work.curvature),
            &mut work.grad,
        );
        grad.copy_from_slice(&work.grad[..m]);
        // The Hessian terms ω μ² / (P² + μ²)^{3/2} fall off as |P|^{-3}: those below 1e-14 of
        // the largest cannot change the Newton step and are left out.
        let threshold = 1e-14 * largest;
        // Σ_k c_k cum_k cum_kᵀ over the nodes whose term counts, its upper triangle in blocks
        // of GRAM_ROWS × GRAM_COLS entries held in registers across the nodes: every entry is
        // the same products added in the same node order as a plain triple loop would add them
        work.active.clear();
        work.active.extend(
            work.curvature
                .iter()
                .enumerate()
                .filter(|&(_, &c)| c > threshold || c.is_nan())
                .map(|(k, &c)| (k, c)),
        );
        let active = &work.active;
        for i0 in (0..m).step_by(GRAM_ROWS) {
            for j0 in ((i0 / GRAM_COLS) * GRAM_COLS..m).step_by(GRAM_COLS) {
                let acc = gram_block(active, &self.data.padded, stride, (i0, j0));
                for (i, acc_i) in (i0..m).zip(&acc) {
                    for (j, &v) in (j0..m).zip(acc_i) {
                        if j >= i {
                            hess[(i, j)] += v;
                            if j != i {
                                hess[(j, i)] += v;
                            }
                        }
                    }
                }
            }
        }
    }
}

/// Buffers of [`Problem::derivatives`], kept across the Newton steps of one solve.
#[derive(Debug, Default)]
struct Work {
    /// Per node: `ω P / h` and `ω μ² / h³`.
    slope: Vec<f64>,
    curvature: Vec<f64>,
    /// The gradient padded to the rows' stride.
    grad: Vec<f64>,
    /// The nodes whose curvature counts, with it.
    active: Vec<(usize, f64)>,
}

crate::simd::avx2_dispatch! {
    /// `out[k] = ω_k |P_k|`, or `ω_k (P_k² + μ²)^{1/2}` when `mu` is given ([`Problem::value`]).
    fn node_magnitudes(p: &[f64], omega: &[f64], mu: Option<f64>, out: &mut [f64]) =
        node_magnitudes_body;
}

/// The body of [`node_magnitudes`].
#[inline(always)]
fn node_magnitudes_body(p: &[f64], omega: &[f64], mu: Option<f64>, out: &mut [f64]) {
    match mu {
        Some(mu) => {
            for ((o, &pk), &om) in out.iter_mut().zip(p).zip(omega) {
                *o = om * (pk * pk + mu * mu).sqrt();
            }
        }
        None => {
            for ((o, &pk), &om) in out.iter_mut().zip(p).zip(omega) {
                *o = om * pk.abs();
            }
        }
    }
}

crate::simd::avx2_dispatch! {
    /// The nodes' terms of [`Problem::derivatives`]: per node `k` of nonzero weight `ω_k`,
    /// with `h = (P_k² + μ²)^{1/2}`, the slope `ω P_k / h` (subtracted times the node's row
    /// from `grad`, node after node) and the curvature `ω μ² / h³`; a node of zero weight
    /// (each edge's last) gets neither. Returns the largest curvature. The square roots and
    /// divisions run over whole slices, four to an instruction in the AVX2 build: the same
    /// correctly rounded results as one at a time.
    fn node_terms(
        nodes: (&[f64], &[f64], f64),
        rows: (&[f64], usize),
        out: (&mut [f64], &mut [f64]),
        grad: &mut [f64],
    ) -> f64 = node_terms_body;
}

/// The body of [`node_terms`]; `grad` and each row hold `stride` entries (a multiple of
/// [`GRAM_COLS`]).
#[inline(always)]
fn node_terms_body(
    (p, omega, mu): (&[f64], &[f64], f64),
    (padded, stride): (&[f64], usize),
    (slope, curvature): (&mut [f64], &mut [f64]),
    grad: &mut [f64],
) -> f64 {
    for (((sl, cv), &pk), &om) in slope.iter_mut().zip(curvature.iter_mut()).zip(p).zip(omega) {
        let h = (pk * pk + mu * mu).sqrt();
        *sl = om * pk / h;
        *cv = om * mu * mu / (h * h * h);
    }
    let mut largest = 0.0_f64;
    for (k, &om) in omega.iter().enumerate() {
        if om == 0.0 {
            curvature[k] = 0.0;
            continue;
        }
        let g1 = slope[k];
        let row = &padded[k * stride..(k + 1) * stride];
        for (gs, rs) in grad
            .chunks_exact_mut(GRAM_COLS)
            .zip(row.chunks_exact(GRAM_COLS))
        {
            for (g, r) in gs.iter_mut().zip(rs) {
                *g -= g1 * r;
            }
        }
        largest = largest.max(curvature[k]);
    }
    largest
}

crate::simd::avx2_dispatch! {
    /// One register block of the Hessian's Gram product: entries `(i0 + a, j0 + b)` of
    /// `Σ_k c_k x_k x_kᵀ` over `active` nodes `(k, c_k)`, `x_k` row `k` of `padded` (rows of
    /// `stride` entries). Each entry is the products `(c_k x_ki) x_kj` added in node order
    /// from zero, in either build ([`crate::simd`]).
    fn gram_block(
        active: &[(usize, f64)],
        padded: &[f64],
        stride: usize,
        at: (usize, usize),
    ) -> [[f64; GRAM_COLS]; GRAM_ROWS] = gram_block_body;
}

/// The sums of [`gram_block`].
#[inline(always)]
fn gram_block_body(
    active: &[(usize, f64)],
    padded: &[f64],
    stride: usize,
    (i0, j0): (usize, usize),
) -> [[f64; GRAM_COLS]; GRAM_ROWS] {
    let mut acc = [[0.0_f64; GRAM_COLS]; GRAM_ROWS];
    for &(k, c) in active {
        let row = &padded[k * stride..(k + 1) * stride];
        let (Some(block), Some(left)) = (
            row[j0..].first_chunk::<GRAM_COLS>(),
            row[i0..].first_chunk::<GRAM_ROWS>(),
        ) else {
            continue; // not reached: the padding covers both blocks
        };
        for (acc_i, &x_i) in acc.iter_mut().zip(left) {
            let a = c * x_i;
            for (u, &x_j) in acc_i.iter_mut().zip(block) {
                *u += a * x_j;
            }
        }
    }
    acc
}

crate::simd::avx2_dispatch! {
    /// `out[k] = cum_k · y` for every node `k` from `cum_t` (the `m` sensors' columns of
    /// `out.len()` nodes each, one after another): the same numbers as [`row_dots`] on the
    /// node-major rows (each the products added in sensor order from −0.0, as
    /// `Iterator::sum` adds them), formed column by column so that consecutive nodes go four
    /// to an instruction in the AVX2 build.
    fn node_dots(cum_t: &[f64], m: usize, y: &[f64], out: &mut [f64]) = node_dots_body;
}

/// The body of [`node_dots`].
#[inline(always)]
fn node_dots_body(cum_t: &[f64], m: usize, y: &[f64], out: &mut [f64]) {
    let n = out.len();
    out.fill(-0.0);
    for (column, &yi) in cum_t.chunks_exact(n.max(1)).take(m).zip(y) {
        for (o, &c) in out.iter_mut().zip(column) {
            *o += c * yi;
        }
    }
}

/// Rows of [`row_dots`] side by side.
const ROW_GROUP: usize = 8;

crate::simd::avx2_dispatch! {
    /// `out[k] = rows_k · y` for the rows of `rows` (`m` entries each), each the products
    /// added in order from −0.0 as `Iterator::sum` adds them; [`ROW_GROUP`] rows side by side,
    /// so that their sums overlap instead of waiting on one another (and go four to an
    /// instruction in the AVX2 build).
    pub(super) fn row_dots(rows: &[f64], m: usize, y: &[f64], out: &mut [f64]) = row_dots_body;
}

/// The body of [`row_dots`].
#[inline(always)]
fn row_dots_body(rows: &[f64], m: usize, y: &[f64], out: &mut [f64]) {
    if m == 0 {
        out.fill(-0.0); // an empty sum
        return;
    }
    let y = &y[..m];
    let whole = out.len() / ROW_GROUP * ROW_GROUP;
    for (g, o) in out[..whole].chunks_exact_mut(ROW_GROUP).enumerate() {
        let first = g * ROW_GROUP;
        let group: [&[f64]; ROW_GROUP] = std::array::from_fn(|r| &rows[(first + r) * m..][..m]);
        let mut acc = [-0.0_f64; ROW_GROUP];
        for (i, &yi) in y.iter().enumerate() {
            for (a, row) in acc.iter_mut().zip(&group) {
                *a += row[i] * yi;
            }
        }
        o.copy_from_slice(&acc);
    }
    for (k, o) in out.iter_mut().enumerate().skip(whole) {
        *o = rows[k * m..(k + 1) * m]
            .iter()
            .zip(y)
            .map(|(a, b)| a * b)
            .sum::<f64>();
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::geometry::Edge;

    #[test]
    fn row_and_node_dots_are_the_iterator_sums_bit_for_bit() {
        // eight rows at a time must give each row's `Iterator::sum` exactly: invented rows
        // with signed zeros, tiny and large entries, any count of rows (whole groups of eight
        // and a remainder)
        let mut x: u64 = 0x2545_f491_4f6c_dd1d;
        let mut next = || {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            match x % 7 {
                0 => 0.0,
                1 => -0.0,
                2 => (x % 1000) as f64 * 1e-9,
                _ => {
                    ((x >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 10f64.powi((x % 9) as i32 - 4)
                }
            }
        };
        for (n, m) in [(1, 1), (4, 3), (9, 14), (241, 10), (7, 1), (17, 5)] {
            let rows: Vec<f64> = (0..n * m).map(|_| next()).collect();
            let mut y: Vec<f64> = (0..m).map(|_| next()).collect();
            for pass in 0..2 {
                if pass == 1 {
                    y.iter_mut().for_each(|v| *v = -v.abs()); // all products ±0 on zero rows
                }
                let mut out = vec![f64::NAN; n];
                row_dots(&rows, m, &y, &mut out);
                // the same products from the sensor-major copy ([`node_dots`])
                let cum_t: Vec<f64> = (0..m * n).map(|at| rows[(at % n) * m + at / n]).collect();
                let mut by_column = vec![f64::NAN; n];
                node_dots(&cum_t, m, &y, &mut by_column);
                for k in 0..n {
                    let want: f64 = rows[k * m..(k + 1) * m]
                        .iter()
                        .zip(&y)
                        .map(|(a, b)| a * b)
                        .sum();
                    assert_eq!(out[k].to_bits(), want.to_bits(), "n {n} m {m} row {k}");
                    assert_eq!(
                        by_column[k].to_bits(),
                        want.to_bits(),
                        "n {n} m {m} node {k}"
                    );
                }
            }
        }
    }

    /// The plain loops `Problem::derivatives` and `Problem::value` replaced (one node at a
    /// time, the Hessian's Gram entries by a triple loop in node order): the reference their
    /// passes must equal bit for bit.
    fn plain_derivatives(
        pr: &Problem,
        y: &[f64],
        p: &[f64],
        (mu_p, mu_y): (f64, f64),
    ) -> (Vec<f64>, DMatrix<f64>) {
        let m = pr.data.m;
        let norm = y.iter().map(|v| v * v).sum::<f64>().sqrt().max(1e-300);
        let mut hess = DMatrix::<f64>::zeros(m, m);
        let mut grad = vec![0.0; m];
        for i in 0..m {
            grad[i] = pr.radius * y[i] / norm + pr.data.a0[i];
            for j in 0..m {
                let delta = if i == j { 1.0 } else { 0.0 };
                hess[(i, j)] += pr.radius * (delta - y[i] * y[j] / (norm * norm)) / norm;
            }
        }
        for i in 0..m {
            let h = (y[i] * y[i] + mu_y * mu_y).sqrt();
            grad[i] += pr.beta[i] * y[i] / h;
            hess[(i, i)] += pr.beta[i] * mu_y * mu_y / (h * h * h);
        }
        let mut curvature = vec![0.0; p.len()];
        let mut largest = 0.0_f64;
        for (k, &pk) in p.iter().enumerate() {
            let om = pr.omega[k];
            if om == 0.0 {
                continue;
            }
            let h = (pk * pk + mu_p * mu_p).sqrt();
            let g1 = om * pk / h;
            for (g, r) in grad.iter_mut().zip(&pr.data.cum[k * m..(k + 1) * m]) {
                *g -= g1 * r;
            }
            curvature[k] = om * mu_p * mu_p / (h * h * h);
            largest = largest.max(curvature[k]);
        }
        let threshold = 1e-14 * largest;
        for i in 0..m {
            for j in i..m {
                let mut acc = 0.0;
                for (k, &c) in curvature.iter().enumerate() {
                    if c > threshold || c.is_nan() {
                        acc += c * pr.data.cum[k * m + i] * pr.data.cum[k * m + j];
                    }
                }
                hess[(i, j)] += acc;
                if j != i {
                    hess[(j, i)] += acc;
                }
            }
        }
        (grad, hess)
    }

    fn plain_value(pr: &Problem, y: &[f64], p: &[f64], mu: Option<(f64, f64)>) -> f64 {
        let abs = |x: f64, s: f64| match mu {
            None => x.abs(),
            Some(_) => (x * x + s * s).sqrt(),
        };
        let (mu_p, mu_y) = mu.unwrap_or((0.0, 0.0));
        let norm = y.iter().map(|v| v * v).sum::<f64>().sqrt();
        let mut f = pr.radius * norm;
        for ((a, b), &yi) in pr.data.a0.iter().zip(&pr.beta).zip(y) {
            f += a * yi + b * abs(yi, mu_y);
        }
        for (k, &pk) in p.iter().enumerate() {
            if pr.omega[k] > 0.0 {
                f += pr.omega[k] * abs(pk, mu_p);
            }
        }
        f
    }

    #[test]
    fn derivatives_and_value_are_the_plain_loops_bit_for_bit() {
        // invented sets of one edge: sensor counts around the padding's multiples of eight,
        // node counts with and without a whole last group; partial sums that are exactly zero
        // (with μ = 0 in the exact value) and far apart in size
        let mut next = crate::testing::uniform(0x9e37_79b9_7f4a_7c15);
        for (m, nodes) in [(1, 3), (7, 10), (8, 33), (9, 41), (14, 241), (17, 20)] {
            let h: Vec<f64> = (0..m * nodes).map(|_| next()).collect();
            let set = AdmissibleSet::from_matrix(
                Edge::Top,
                0.2,
                nodes,
                h,
                (0..m).map(|_| next()).collect(),
                (0..m).map(|_| 50.0 + next()).collect(),
                (0..m).map(|_| 0.1 + next().abs()).collect(),
                (0..m).map(|_| next().abs() * 1e-3).collect(),
            )
            .expect("a consistent invented set");
            let data = DualData::new(&set);
            for node in [0, nodes / 2, nodes - 1] {
                let pr = Problem::new(&data, node, 1.0, 300.0, 4.0, SMOOTHING_TOLERANCE_K)
                    .expect("a valid problem");
                let y: Vec<f64> = (0..m).map(|_| next() * 3.0).collect();
                let mut p = vec![0.0; nodes];
                pr.partial_sums(&y, &mut p);
                p[nodes / 3] = 0.0;
                if nodes > 4 {
                    p[1] *= 1e-9;
                }
                for mu in [(1.0, 0.5), (1e-7, 1e-6), (3e-3, 0.0)] {
                    let (want_g, want_h) = plain_derivatives(&pr, &y, &p, mu);
                    let mut grad = vec![f64::NAN; m];
                    let mut hess = DMatrix::<f64>::from_element(m + 1, m + 1, f64::NAN);
                    pr.derivatives(&y, &p, mu, &mut grad, &mut hess, &mut Work::default());
                    for i in 0..m {
                        assert_eq!(grad[i].to_bits(), want_g[i].to_bits(), "m {m} grad {i}");
                        for j in 0..m {
                            assert_eq!(
                                hess[(i, j)].to_bits(),
                                want_h[(i, j)].to_bits(),
                                "m {m} nodes {nodes} hess ({i}, {j})"
                            );
                        }
                    }
                    let mut terms = Vec::new();
                    for smooth in [Some(mu), None] {
                        assert_eq!(
                            pr.value(&y, &p, smooth, &mut terms).to_bits(),
                            plain_value(&pr, &y, &p, smooth).to_bits(),
                            "m {m} value"
                        );
                    }
                }
            }
        }
    }
}
