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
//! for `μ` falling tenfold per stage (a homotopy). The bound returned is the exact,
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
    /// Per hidden edge: first node, node count, spacing (metres).
    edges: Vec<(usize, usize, f64)>,
    /// `w_i (d_i − o_i)`.
    a0: Vec<f64>,
    /// `w_i = 1 / σ_i`.
    w: Vec<f64>,
    /// Allowance per unit gradient (metres) and fixed allowance (kelvin) per sensor.
    allowance: (Vec<f64>, Vec<f64>),
}

/// Largest number of Newton steps over all smoothing stages.
const MAX_STEPS: usize = 400;

/// The smoothing stops when `μ` times the total weight of the smoothed terms is below this,
/// kelvin: the smooth optimum is then within it of the exact one.
const SMOOTHING_TOLERANCE_K: f64 = 1e-5;

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
        DualData {
            m,
            cum,
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
        let problem = Problem::new(
            self,
            node,
            if maximise { 1.0 } else { -1.0 },
            gradient,
            radius,
        )?;
        problem.solve()
    }
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
}

impl<'a> Problem<'a> {
    fn new(data: &'a DualData, node: usize, sign: f64, gradient: f64, radius: f64) -> Option<Self> {
        let n = data.cum.len() / data.m.max(1);
        if node >= n
            || !(gradient.is_finite() && gradient > 0.0)
            || radius.is_nan()
            || radius <= 0.0
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
        })
    }

    /// `P_k(y) = C_k − cum_k · y` for every node.
    fn partial_sums(&self, y: &[f64], out: &mut [f64]) {
        let m = self.data.m;
        for (k, p) in out.iter_mut().enumerate() {
            let row = &self.data.cum[k * m..(k + 1) * m];
            *p = self.c_sum[k] - row.iter().zip(y).map(|(a, b)| a * b).sum::<f64>();
        }
    }

    /// `F` (exact, `mu = None`) or its smoothing with parameters `(μ_P, μ_y)`.
    fn value(&self, y: &[f64], p: &[f64], mu: Option<(f64, f64)>) -> f64 {
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
        for (k, &pk) in p.iter().enumerate() {
            if self.omega[k] > 0.0 {
                f += self.omega[k] * abs(pk, mu_p);
            }
        }
        f
    }

    /// The exact bound at `y`: `F(y)` plus the rounding of the edge sums.
    fn bound(&self, y: &[f64], p: &[f64]) -> f64 {
        let slack: f64 = self.last.iter().map(|&k| p[k].abs()).sum();
        self.value(y, p, None) + slack * TEMPERATURE_SPAN_K
    }

    fn solve(&self) -> Option<f64> {
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
            SMOOTHING_TOLERANCE_K / weight_p.max(1e-300),
            SMOOTHING_TOLERANCE_K / weight_y.max(1e-300),
        );
        let mut steps = 0;
        let mut grad = vec![0.0; m];
        let mut hess = DMatrix::<f64>::zeros(m + e, m + e);
        let mut trial = vec![0.0; m];
        let mut p_trial = vec![0.0; n];
        loop {
            // Newton on the smoothed F at this μ
            loop {
                if steps >= MAX_STEPS {
                    return None;
                }
                steps += 1;
                self.derivatives(&y, &p, mu, &mut grad, &mut hess);
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
                let f0 = self.value(&y, &p, Some(mu));
                // backtracking line search (Armijo)
                let mut alpha = 1.0;
                let mut accepted = false;
                for _ in 0..60 {
                    for i in 0..m {
                        trial[i] = y[i] + alpha * dy[i];
                    }
                    self.partial_sums(&trial, &mut p_trial);
                    let f1 = self.value(&trial, &p_trial, Some(mu));
                    if f1.is_finite() && f1 <= f0 - 1e-4 * alpha * decrement.max(0.0) {
                        accepted = true;
                        break;
                    }
                    alpha *= 0.5;
                }
                if !accepted {
                    break;
                }
                y.copy_from_slice(&trial);
                p.copy_from_slice(&p_trial);
                if !f0.is_finite() || f0 < -1e3 * TEMPERATURE_SPAN_K {
                    return None; // unbounded below: the set is empty
                }
                // settled at this μ when the predicted decrease is below the smoothing's own
                // error (the last stage: well below the tolerance)
                let stage_tolerance =
                    (0.1 * (mu.0 * weight_p + mu.1 * weight_y)).max(1e-3 * SMOOTHING_TOLERANCE_K);
                if decrement.abs() <= stage_tolerance {
                    break;
                }
            }
            if mu.0 <= target.0 && mu.1 <= target.1 {
                break;
            }
            mu = ((mu.0 * 0.1).max(target.0), (mu.1 * 0.1).max(target.1));
        }
        let b = self.bound(&y, &p);
        b.is_finite().then_some(b)
    }

    /// Gradient and Hessian (top-left `m × m` block of `hess`) of the smoothed `F`.
    fn derivatives(
        &self,
        y: &[f64],
        p: &[f64],
        (mu_p, mu_y): (f64, f64),
        grad: &mut [f64],
        hess: &mut DMatrix<f64>,
    ) {
        let m = self.data.m;
        let norm = y.iter().map(|v| v * v).sum::<f64>().sqrt().max(1e-300);
        for i in 0..m {
            for j in 0..m {
                hess[(i, j)] = 0.0;
            }
        }
        // r ‖y‖
        for i in 0..m {
            grad[i] = self.radius * y[i] / norm + self.data.a0[i];
            for j in 0..m {
                let delta = if i == j { 1.0 } else { 0.0 };
                hess[(i, j)] += self.radius * (delta - y[i] * y[j] / (norm * norm)) / norm;
            }
        }
        // β_i |y_i|
        for i in 0..m {
            let h = (y[i] * y[i] + mu_y * mu_y).sqrt();
            grad[i] += self.beta[i] * y[i] / h;
            hess[(i, i)] += self.beta[i] * mu_y * mu_y / (h * h * h);
        }
        // Σ ω_k |P_k|, P_k = C_k − cum_k · y
        let mut upper = vec![0.0; m * m];
        for (k, &pk) in p.iter().enumerate() {
            let om = self.omega[k];
            if om == 0.0 {
                continue;
            }
            let h = (pk * pk + mu_p * mu_p).sqrt();
            let row = &self.data.cum[k * m..(k + 1) * m];
            let g1 = om * pk / h;
            let g2 = om * mu_p * mu_p / (h * h * h);
            for i in 0..m {
                grad[i] -= g1 * row[i];
            }
            if g2 > 0.0 {
                for i in 0..m {
                    let a = g2 * row[i];
                    for j in i..m {
                        upper[i * m + j] += a * row[j];
                    }
                }
            }
        }
        for i in 0..m {
            for j in i..m {
                hess[(i, j)] += upper[i * m + j];
                if j != i {
                    hess[(j, i)] += upper[i * m + j];
                }
            }
        }
    }
}
