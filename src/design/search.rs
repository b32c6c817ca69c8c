//! The layout search: greedy selection with rank-one updates, then exchange passes.
//!
//! Linear-Gaussian design (`docs/design.md`). With prior covariance `Σ₀`, readings of noise `σ_i`
//! and whitened sensor-map rows `h_i = g_i/σ_i`, the posterior covariance of the coefficients
//! after a set of sensors is `C = (Σ₀⁻¹ + Σ h_i h_iᵀ)⁻¹`. Adding a candidate `h` changes it by
//! a rank-one term (Sherman–Morrison):
//!
//! `C' = C − C h hᵀ C / (1 + hᵀ C h)`,
//!
//! so with `u = C h` and `d = hᵀ C h` the criteria change by (recomputed from the formula):
//!
//! | criterion | value | change when `h` is added |
//! |---|---|---|
//! | `information` (D) | `log det(C⁻¹) − log det(Σ₀⁻¹)` | `+ log(1 + d)` |
//! | `edge` (A on the edge profile `P c`) | `tr(Q C)`, `Q = PᵀP / n` (mean variance over the edge points) | `− uᵀ Q u / (1 + d)` |
//! | `worst` | `max_k p_kᵀ C p_k` over the edge points | `p_kᵀ C p_k − (p_k·u)² / (1 + d)` at each point |
//!
//! The search keeps, for every candidate `i`, `u_i = C h_i`, `d_i` and `t_i = u_iᵀ Q u_i`,
//! and the posterior variances `v_k = p_kᵀ C p_k` at the edge points. Adding candidate `k` is the update `C ← C − w wᵀ` with
//! `w = u_k/√(1 + d_k)`; removing a chosen sensor `c` is `C ← C + w wᵀ` with
//! `w = u_c/√(1 − d_c)` (the same identity read backwards; `d_c < 1` for a sensor in the
//! posterior). Either way, with `a_i = w · h_i` and sign `s`,
//!
//! `u_i ← u_i + s a_i w`,  `d_i ← d_i + s a_i²`,  `t_i ← t_i + 2 s a_i (Qw · u_i) + a_i² wᵀQw`,
//! `v_k ← v_k + s (p_k · w)²`,
//!
//! which costs O(N·p) per step for N candidates and p coefficients, instead of O(N·p²) for
//! recomputing `C h_i`. For `worst` the products `e_ik = p_k · u_i` are formed only when a
//! candidate is weighed, from the highest `v_k` down, and the candidate is dropped as soon as
//! one term shows it cannot beat the best so far (`State::best_worst`): on 10,000
//! candidates and 257 edge points most are dropped after a few terms.
//!
//! **Greedy**: add, K times, the feasible candidate that improves the criterion most (ties:
//! the lower candidate index; for `worst`, ties on the maximum are broken by the mean
//! variance). A candidate is feasible when it is not chosen and is at least the minimum
//! spacing from every chosen and every fixed sensor.
//! **Exchange** (Fedorov 1972, *Theory of Optimal Experiments*): for each chosen sensor in
//! turn, remove it, find the best feasible candidate for its place, and swap when that
//! improves the criterion by more than a relative 1e-9; repeat passes until a pass makes no
//! swap (at most [`MAX_PASSES`]). Every pass starts from a posterior recomputed from
//! scratch, so rounding cannot accumulate. Everything is sequential and the order of
//! candidates fixed: the same inputs give the same layout.
//!
//! For `information` the greedy value is within `(1 − 1/e)` of the optimum, because
//! `log det` of the information is monotone and submodular in the set of sensors
//! (Nemhauser, Wolsey & Fisher 1978, Math. Program. 14:265–294; Krause, Singh & Guestrin
//! 2008, JMLR 9:235–284). `tests/integration/design_search.rs` checks the bound and the distance to the
//! optimum by exhaustive search on small cases.

use crate::error::{Error, Result};
use crate::geometry::Point;
use nalgebra::{DMatrix, DVector};
use rayon::prelude::*;

/// The most exchange passes a search makes.
pub const MAX_PASSES: usize = 25;

/// Relative improvement below which a swap is not made.
const SWAP_TOLERANCE: f64 = 1e-9;

/// What the search optimises.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Goal {
    /// D-optimal: maximise `log det` of the posterior precision.
    Information,
    /// A-optimal on the edges: minimise the mean posterior variance along them.
    Edge,
    /// Minimise the largest posterior variance along the edges.
    Worst,
}

/// Everything the search works on, in whitened form.
pub struct SearchInput<'a> {
    /// Candidate rows `h_i = g_i/σ`, N × p.
    pub candidates: &'a DMatrix<f64>,
    /// Candidate positions (for the spacing), N.
    pub positions: &'a [Point],
    /// Whitened rows of the sensors that stay, f × p.
    pub fixed: &'a DMatrix<f64>,
    /// Their positions.
    pub fixed_positions: &'a [Point],
    /// Prior variances, p.
    pub prior_variances: &'a DVector<f64>,
    /// Profile map rows at the edge points, n × p (mean over rows = the `edge` criterion,
    /// max over rows = `worst`).
    pub edge_points: &'a DMatrix<f64>,
    /// The criterion.
    pub goal: Goal,
    /// How many sensors to add.
    pub count: usize,
    /// Whether two positions are far enough apart.
    pub spaced: &'a (dyn Fn(Point, Point) -> bool + Sync),
}

/// What the search found.
#[derive(Debug, Clone, PartialEq)]
pub struct SearchOutcome {
    /// Indices of the chosen candidates, in the order of their slots.
    pub chosen: Vec<usize>,
    /// The criterion after the greedy stage (information: log det gain; edge: mean variance,
    /// K²; worst: largest variance, K²).
    pub greedy_value: f64,
    /// The criterion after the exchange passes.
    pub value: f64,
    /// Exchange passes made (including the last, which made no swap).
    pub passes: usize,
    /// Swaps made.
    pub swaps: usize,
}

/// The state of a search: the posterior and the per-candidate quantities of the module doc.
struct State<'a> {
    inp: &'a SearchInput<'a>,
    p: usize,
    n_pts: usize,
    /// Row-major copy of the candidate rows.
    h: Vec<f64>,
    c: DMatrix<f64>,
    u: Vec<f64>,
    d: Vec<f64>,
    t: Vec<f64>,
    /// The edge points' rows `p_k`, row-major n_pts × p (`worst` forms `e_ik = p_k · u_i`
    /// from them when it needs them).
    pts: Vec<f64>,
    /// Posterior variances at the edge points.
    v: Vec<f64>,
    q: DMatrix<f64>,
    /// tr(Q C).
    mean_var: f64,
    /// log det gain.
    info: f64,
    /// Chosen or fixed sensors within the spacing of each candidate.
    blocked: Vec<u32>,
    chosen_flag: Vec<bool>,
}

/// Loss to minimise: (primary, secondary).
type Loss = (f64, f64);

fn better(a: Loss, b: Loss) -> bool {
    let tol = SWAP_TOLERANCE * a.0.abs().max(b.0.abs()).max(f64::MIN_POSITIVE);
    if (a.0 - b.0).abs() > tol {
        a.0 < b.0
    } else {
        a.1 < b.1 - SWAP_TOLERANCE * a.1.abs().max(b.1.abs())
    }
}

impl<'a> State<'a> {
    /// The posterior after the fixed sensors and `chosen`, from scratch.
    fn new(inp: &'a SearchInput<'a>, chosen: &[usize]) -> Result<Self> {
        let p = inp.prior_variances.len();
        let n = inp.candidates.nrows();
        let mut precision = DMatrix::from_diagonal(&inp.prior_variances.map(|v| 1.0 / v));
        precision += inp.fixed.transpose() * inp.fixed;
        for &k in chosen {
            let r = inp.candidates.row(k);
            precision += r.transpose() * r;
        }
        let chol = precision.clone().cholesky().ok_or_else(|| {
            Error::Internal("the posterior precision of the design is not positive definite".into())
        })?;
        let logdet_post: f64 = chol.l().diagonal().iter().map(|x| 2.0 * x.ln()).sum();
        let logdet_prior: f64 = inp.prior_variances.iter().map(|v| -v.ln()).sum();
        let c = chol.inverse();
        let uc = inp.candidates * &c; // N × p, row i = (C h_i)ᵀ
        let pts = inp.edge_points;
        let n_pts = pts.nrows();
        let q = pts.transpose() * pts / n_pts.max(1) as f64;
        let uq = &uc * &q;
        let mut h = vec![0.0; n * p];
        let mut u = vec![0.0; n * p];
        let mut d = vec![0.0; n];
        let mut t = vec![0.0; n];
        for i in 0..n {
            for j in 0..p {
                h[i * p + j] = inp.candidates[(i, j)];
                u[i * p + j] = uc[(i, j)];
            }
            d[i] = (0..p).map(|j| h[i * p + j] * u[i * p + j]).sum();
            t[i] = (0..p).map(|j| uq[(i, j)] * u[i * p + j]).sum();
        }
        let pc = pts * &c;
        let v: Vec<f64> = (0..n_pts).map(|k| pc.row(k).dot(&pts.row(k))).collect();
        let mean_var = (&q * &c).trace();
        let pts_rows: Vec<f64> = (0..n_pts)
            .flat_map(|k| (0..p).map(move |j| pts[(k, j)]))
            .collect();
        let mut blocked = vec![0u32; n];
        for &fp in inp.fixed_positions {
            for (i, &cp) in inp.positions.iter().enumerate() {
                if !(inp.spaced)(fp, cp) {
                    blocked[i] += 1;
                }
            }
        }
        let mut s = State {
            inp,
            p,
            n_pts,
            h,
            c,
            u,
            d,
            t,
            pts: pts_rows,
            v,
            q,
            mean_var,
            info: logdet_post - logdet_prior,
            blocked,
            chosen_flag: vec![false; n],
        };
        for &k in chosen {
            s.block(k, 1);
        }
        Ok(s)
    }

    fn block(&mut self, k: usize, delta: i32) {
        let pk = self.inp.positions[k];
        self.chosen_flag[k] = delta > 0;
        for (i, &cp) in self.inp.positions.iter().enumerate() {
            if !(self.inp.spaced)(pk, cp) {
                self.blocked[i] = (self.blocked[i] as i32 + delta) as u32;
            }
        }
    }

    fn feasible(&self, i: usize) -> bool {
        self.blocked[i] == 0 && !self.chosen_flag[i]
    }

    /// The loss now.
    fn loss(&self) -> Loss {
        match self.inp.goal {
            Goal::Information => (-self.info, self.mean_var),
            Goal::Edge => (self.mean_var, -self.info),
            Goal::Worst => (
                self.v.iter().copied().fold(f64::NEG_INFINITY, f64::max),
                self.mean_var,
            ),
        }
    }

    /// The loss if candidate `i` were added.
    fn loss_with(&self, i: usize) -> Loss {
        let d = self.d[i];
        match self.inp.goal {
            Goal::Information => (
                -(self.info + d.ln_1p()),
                self.mean_var - self.t[i] / (1.0 + d),
            ),
            Goal::Edge => (
                self.mean_var - self.t[i] / (1.0 + d),
                -(self.info + d.ln_1p()),
            ),
            Goal::Worst => self
                .worst_loss_with(i, 0..self.n_pts, None)
                .unwrap_or((f64::INFINITY, f64::INFINITY)),
        }
    }

    /// `worst`: the loss if candidate `i` were added, its terms `v_k − e_ik²/(1 + d_i)`
    /// formed over the edge points in `order`; `None` as soon as one exceeds `cut` (the
    /// candidate then cannot have a loss below it).
    fn worst_loss_with(
        &self,
        i: usize,
        order: impl IntoIterator<Item = usize>,
        cut: Option<f64>,
    ) -> Option<Loss> {
        let ui = &self.u[i * self.p..(i + 1) * self.p];
        let scale = 1.0 / (1.0 + self.d[i]);
        let mut worst = f64::NEG_INFINITY;
        for k in order {
            let e = self.e_at(k, ui);
            let term = self.v[k] - e * e * scale;
            if cut.is_some_and(|c| term > c) {
                return None;
            }
            worst = worst.max(term);
        }
        Some((worst, self.mean_var - self.t[i] * scale))
    }

    /// `e_ik = p_k · u_i`: how much candidate `i` would tell about edge point `k`.
    fn e_at(&self, k: usize, ui: &[f64]) -> f64 {
        self.pts[k * self.p..(k + 1) * self.p]
            .iter()
            .zip(ui)
            .map(|(a, b)| a * b)
            .sum()
    }

    /// `worst`: the best feasible candidate, in candidate order, skipping every candidate
    /// whose loss provably cannot beat the best so far. Its loss is the maximum over the edge
    /// points of `v_k − e_ik²/(1 + d_i)`, at most `max v`; the terms are formed from the
    /// highest `v_k` down, and as soon as one exceeds the best loss by more than the swap
    /// tolerance at `max v`, [`better`] would refuse the candidate, so it is skipped. A
    /// candidate that is not skipped gets its exact loss (the maximum does not depend on the
    /// order of its terms).
    fn best_worst(&self) -> Option<(usize, Loss)> {
        let mut order: Vec<usize> = (0..self.n_pts).collect();
        order.sort_by(|&a, &b| self.v[b].total_cmp(&self.v[a]).then(a.cmp(&b)));
        let v_max = order.first().map_or(0.0, |&k| self.v[k]);
        let mut best: Option<(usize, Loss)> = None;
        for i in 0..self.d.len() {
            if !self.feasible(i) {
                continue;
            }
            let cut = best.map(|(_, b)| {
                b.0 + SWAP_TOLERANCE * v_max.abs().max(b.0.abs()).max(f64::MIN_POSITIVE)
            });
            let Some(l) = self.worst_loss_with(i, order.iter().copied(), cut) else {
                continue;
            };
            if best.is_none_or(|(_, b)| better(l, b)) {
                best = Some((i, l));
            }
        }
        best
    }

    /// The best feasible candidate to add, with its loss. The losses are computed in
    /// parallel, the choice is made in candidate order: the same winner with any thread count.
    fn best(&self) -> Option<(usize, Loss)> {
        if self.inp.goal == Goal::Worst {
            return self.best_worst();
        }
        let losses: Vec<Option<Loss>> = (0..self.d.len())
            .into_par_iter()
            .with_min_len(256)
            .map(|i| self.feasible(i).then(|| self.loss_with(i)))
            .collect();
        let mut best: Option<(usize, Loss)> = None;
        for (i, l) in losses.into_iter().enumerate() {
            let Some(l) = l else { continue };
            if best.is_none_or(|(_, b)| better(l, b)) {
                best = Some((i, l));
            }
        }
        best
    }

    /// `C ← C + s w wᵀ` and every per-candidate quantity with it.
    fn rank_one(&mut self, w: &[f64], s: f64) {
        let p = self.p;
        let wv = DVector::from_column_slice(w);
        let qw = &self.q * &wv;
        let wqw = wv.dot(&qw);
        let pw: Vec<f64> = (0..self.n_pts)
            .map(|k| self.inp.edge_points.row(k).transpose().dot(&wv))
            .collect();
        // every candidate's update is independent of the others': in parallel, with the same
        // operations in the same order as one thread would make them
        let update = |hi: &[f64], ui: &mut [f64], ti: &mut f64, di: &mut f64| {
            let mut a = 0.0;
            let mut b = 0.0;
            for j in 0..p {
                a += w[j] * hi[j];
                b += qw[j] * ui[j];
            }
            *ti += 2.0 * s * a * b + a * a * wqw;
            *di += s * a * a;
            let sa = s * a;
            for j in 0..p {
                ui[j] += sa * w[j];
            }
        };
        let rows = self
            .h
            .par_chunks(p)
            .zip(self.u.par_chunks_mut(p))
            .zip(self.t.par_iter_mut())
            .zip(self.d.par_iter_mut())
            .with_min_len(64);
        rows.for_each(|(((hi, ui), ti), di)| update(hi, ui, ti, di));
        for (v, pwk) in self.v.iter_mut().zip(&pw) {
            *v += s * pwk * pwk;
        }
        self.c.ger(s, &wv, &wv, 1.0);
        self.mean_var += s * wqw;
    }

    fn add(&mut self, k: usize) {
        let p = self.p;
        let d = self.d[k];
        let scale = 1.0 / (1.0 + d).sqrt();
        let w: Vec<f64> = self.u[k * p..(k + 1) * p]
            .iter()
            .map(|x| x * scale)
            .collect();
        self.info += d.ln_1p();
        self.rank_one(&w, -1.0);
        self.block(k, 1);
    }

    fn remove(&mut self, k: usize) {
        let p = self.p;
        let d = self.d[k].min(1.0 - 1e-15);
        let scale = 1.0 / (1.0 - d).sqrt();
        let w: Vec<f64> = self.u[k * p..(k + 1) * p]
            .iter()
            .map(|x| x * scale)
            .collect();
        self.info += (1.0 - d).ln();
        self.rank_one(&w, 1.0);
        self.block(k, -1);
    }
}

/// The criterion value reported for a loss.
fn value_of(goal: Goal, loss: Loss) -> f64 {
    match goal {
        Goal::Information => -loss.0,
        Goal::Edge | Goal::Worst => loss.0,
    }
}

/// Run the search. `progress(done, total)` is called after every greedy step and every
/// exchange attempt; `total` grows as exchange passes are added.
///
/// # Errors
/// [`Error::Invalid`] (field `count`) when fewer than `count` candidates can be placed with
/// the spacing; [`Error::Internal`] on a numerical breakdown.
pub fn search(inp: &SearchInput<'_>, progress: &dyn Fn(usize, usize)) -> Result<SearchOutcome> {
    let k = inp.count;
    let mut state = State::new(inp, &[])?;
    let mut chosen = Vec::with_capacity(k);
    let mut total = k + k;
    for step in 0..k {
        let Some((i, _)) = state.best() else {
            // Greedy placed sensors where they block the rest; a sweep packs more.
            let packed = sweep_packing(inp, k);
            if packed.len() < k {
                return Err(Error::invalid_field(
                    "count",
                    format!(
                        "the search could place only {} new sensors at the minimum spacing \
                         from each other and from the sensors already there; ask for fewer, \
                         or relax [design] sensor_spacing, allowed or keep_out",
                        step.max(packed.len())
                    ),
                ));
            }
            chosen = packed;
            state = State::new(inp, &chosen)?;
            break;
        };
        state.add(i);
        chosen.push(i);
        progress(step + 1, total);
    }
    let greedy_value = value_of(inp.goal, state.loss());
    let mut passes = 0;
    let mut swaps = 0;
    let mut done = k;
    while passes < MAX_PASSES && k > 0 {
        passes += 1;
        let mut state = State::new(inp, &chosen)?;
        let mut improved = false;
        for slot in chosen.iter_mut() {
            let current = state.loss();
            let c = *slot;
            state.remove(c);
            match state.best() {
                Some((j, l)) if j != c && better(l, current) => {
                    state.add(j);
                    *slot = j;
                    swaps += 1;
                    improved = true;
                }
                _ => state.add(c),
            }
            done += 1;
            progress(done, total);
        }
        if !improved {
            break;
        }
        total += k;
    }
    let state = State::new(inp, &chosen)?;
    Ok(SearchOutcome {
        chosen,
        greedy_value,
        value: value_of(inp.goal, state.loss()),
        passes,
        swaps,
    })
}

/// A feasible start when greedy gets stuck: candidates swept in order of x, then y, each
/// taken when it keeps the spacing to the fixed sensors and to those already taken (on a
/// line this packs the most sensors). At most `k`.
fn sweep_packing(inp: &SearchInput<'_>, k: usize) -> Vec<usize> {
    let mut order: Vec<usize> = (0..inp.positions.len()).collect();
    order.sort_by(|&a, &b| {
        let (pa, pb) = (inp.positions[a], inp.positions[b]);
        pa.x.total_cmp(&pb.x).then(pa.y.total_cmp(&pb.y))
    });
    let mut taken: Vec<usize> = Vec::new();
    for i in order {
        if taken.len() == k {
            break;
        }
        let p = inp.positions[i];
        if inp.fixed_positions.iter().all(|&f| (inp.spaced)(f, p))
            && taken.iter().all(|&t| (inp.spaced)(inp.positions[t], p))
        {
            taken.push(i);
        }
    }
    taken
}

/// The criterion value of a given set of candidates (fixed sensors included), from scratch:
/// for tests and exhaustive search.
pub fn criterion_value(inp: &SearchInput<'_>, chosen: &[usize]) -> Result<f64> {
    Ok(value_of(inp.goal, State::new(inp, chosen)?.loss()))
}
