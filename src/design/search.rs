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
//! The search keeps, for every candidate `i`, `u_i = C h_i`, `d_i` and `t_i = u_iᵀ Q u_i`, and the
//! posterior variances `v_k = p_kᵀ C p_k` at the edge points. Adding candidate `k` is the update
//! `C ← C − w wᵀ` with `w = u_k/√(1 + d_k)`; removing a chosen sensor `c` is `C ← C + w wᵀ` with
//! `w = u_c/√(1 − d_c)` (the same identity read backwards; `d_c < 1` for a sensor in the
//! posterior). Either way, with `a_i = w · h_i` and sign `s`,
//!
//! `u_i ← u_i + s a_i w`,  `d_i ← d_i + s a_i²`,  `t_i ← t_i + 2 s a_i (Qw · u_i) + a_i² wᵀQw`,
//! `v_k ← v_k + s (p_k · w)²`,
//!
//! which costs O(N·p) per step for N candidates and p coefficients, instead of O(N·p²) for
//! recomputing `C h_i`.
//!
//! `worst` needs neither `u_i` nor `t_i` kept: it keeps `r_k = C p_k` at the edge points
//! instead (`r_k ← r_k + s (p_k · w) w`, O(n·p)), forms `e_ik = p_k · u_i = r_k · h_i` only
//! when it weighs a candidate, from the highest `v_k` down, and drops the candidate as soon
//! as one term shows it cannot beat the best so far; `t_i = Σ_k e_ik² / n` comes from the
//! same terms for a candidate weighed in full, and `u_k = C h_k` is formed for the one
//! candidate added or removed. Its `d_i` updates wait for the next weighing, which applies
//! them on its way through the rows (`State::best_worst`, which also runs in parallel and
//! still makes exactly the choice of the scan in candidate order). On 10,000 candidates and
//! 257 edge points most candidates are dropped on one of the two highest-variance points,
//! which are screened for 32 candidates at once.
//!
//! **Greedy**: add, K times, the feasible candidate that improves the criterion most (ties:
//! the lower candidate index; for `worst`, ties on the maximum are broken by the mean
//! variance). A candidate is feasible when it is not chosen and is at least the minimum
//! spacing from every chosen and every fixed sensor.
//! **Exchange** (Fedorov 1972, *Theory of Optimal Experiments*): for each chosen sensor in
//! turn, remove it, find the best feasible candidate for its place, and swap when that
//! improves the criterion by more than a relative 1e-9; repeat passes until a pass makes no
//! swap (at most [`MAX_PASSES`]). Every pass starts from a posterior recomputed from
//! scratch, so rounding cannot accumulate. The work behind a choice may run in parallel, the
//! choice itself is made in the fixed order of the candidates: the same inputs give the same
//! layout with any thread count.
//!
//! For `information` the greedy value is within `(1 − 1/e)` of the optimum, because
//! `log det` of the information is monotone and submodular in the set of sensors (Nemhauser, Wolsey
//! & Fisher 1978, Math. Program. 14:265–294; Krause, Singh & Guestrin 2008, JMLR 9:235–284).
//! `tests/integration/design_search.rs` checks the bound and the distance to the optimum by
//! exhaustive search on small cases.

use crate::error::{Error, Result};
use crate::geometry::Point;
use crate::simd;
use nalgebra::{DMatrix, DMatrixView, DVector};
use rayon::prelude::*;
use std::sync::OnceLock;

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
    /// The candidate and edge-point rows, and the candidates' neighbours.
    rows: &'a Rows,
    c: DMatrix<f64>,
    /// `u_i = C h_i`, row-major N × p (empty for `worst`, which keeps `r` instead).
    u: Vec<f64>,
    d: Vec<f64>,
    /// `t_i = u_iᵀ Q u_i` (empty for `worst`).
    t: Vec<f64>,
    /// `worst` only: `r_k = C p_k` at the edge points, row-major n_pts × p, from which it
    /// forms `e_ik = r_k · h_i` when it weighs a candidate.
    r: Vec<f64>,
    /// `worst` only: the rank-one updates `(w, s)` made since `d` was last brought up to date
    /// (the next weighing of the candidates applies them on its way, [`State::best_worst`]).
    pending: Vec<(Vec<f64>, f64)>,
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

/// `worst`: a candidate weighed against a cut.
#[derive(Clone, Copy)]
enum Weighed {
    /// Its exact loss.
    Loss(Loss),
    /// Skipped: one of its terms, which exceeded the cut (its loss is at least this).
    Beyond(f64),
}

fn better(a: Loss, b: Loss) -> bool {
    let tol = SWAP_TOLERANCE * a.0.abs().max(b.0.abs()).max(f64::MIN_POSITIVE);
    if (a.0 - b.0).abs() > tol {
        a.0 < b.0
    } else {
        a.1 < b.1 - SWAP_TOLERANCE * a.1.abs().max(b.1.abs())
    }
}

/// The candidate rows and the edge points' rows, row-major, made once per search.
struct Rows {
    /// The candidate rows `h_i`, row-major N × p.
    h: Vec<f64>,
    /// The edge points' rows `p_k`, row-major n_pts × p.
    pts: Vec<f64>,
    /// `worst` only: the candidate rows again in panels of [`LANES`] candidates, each panel
    /// p columns of [`LANES`] (zeros past the last candidate), for [`simd::dots32`].
    panels: Vec<f64>,
    /// For each candidate, once asked: the candidates closer to it than the spacing (itself
    /// included), which its choice blocks.
    near: Vec<OnceLock<Vec<u32>>>,
}

impl Rows {
    fn new(inp: &SearchInput<'_>) -> Self {
        let h = row_major(inp.candidates);
        let p = inp.candidates.ncols();
        let panels = if inp.goal == Goal::Worst {
            let mut panels = vec![0.0; h.len().div_ceil((p * LANES).max(1)).max(1) * p * LANES];
            for (i, hi) in h.chunks(p.max(1)).enumerate() {
                let panel = &mut panels[(i / LANES) * p * LANES..];
                for (j, &x) in hi.iter().enumerate() {
                    panel[j * LANES + i % LANES] = x;
                }
            }
            panels
        } else {
            Vec::new()
        };
        Rows {
            h,
            pts: row_major(inp.edge_points),
            panels,
            near: (0..inp.positions.len()).map(|_| OnceLock::new()).collect(),
        }
    }
}

/// The entries of `m` row by row.
fn row_major(m: &DMatrix<f64>) -> Vec<f64> {
    m.transpose().as_slice().to_vec()
}

/// Candidates weighed together by `worst`'s search: the unit of its parallel work, fixed so
/// that the choice does not depend on the thread count (a multiple of [`LANES`]).
const WORST_CHUNK: usize = 512;

/// Rows [`simd::dots32`] forms at once.
const LANES: usize = 32;

/// `worst`: the edge points in the order they are weighed (highest variance first), as the
/// column-major matrix of the `r_k` (padded to a multiple of [`LANES`] with zero rows whose
/// variance is −∞, which change no maximum and no sum), for one weighing of the candidates.
struct Ordered {
    /// Rows, a multiple of [`LANES`].
    rows: usize,
    /// `r_k` of the k-th point in the order, column-major: `r[j · rows + k]`.
    r: Vec<f64>,
    /// Its variance `v_k`.
    v: Vec<f64>,
    /// The highest variance.
    v_max: f64,
    /// The first [`SCREEN`] points of the order: `(k, v_k)`.
    first: Vec<(usize, f64)>,
}

impl Ordered {
    /// The cut against the best so far `(i, loss)`: a term above it makes [`better`] refuse
    /// the candidate (the swap tolerance taken at the highest variance, which bounds every
    /// loss).
    fn cut(&self, best: Option<(usize, Loss)>) -> Option<f64> {
        best.map(|(_, b)| {
            b.0 + SWAP_TOLERANCE * self.v_max.abs().max(b.0.abs()).max(f64::MIN_POSITIVE)
        })
    }
}

/// `d_i ← d_i + s (w · h_i)²` for the pending rank-one updates `(w, s)` in their order, on
/// the [`LANES`] candidates of a panel (`d_i` in `db`).
fn apply_pending(pending: &[(Vec<f64>, f64)], panel: &[f64], db: &mut [f64]) {
    for (w, s) in pending {
        let a = simd::dots32(panel, LANES, 0, w);
        for (di, a) in db.iter_mut().zip(a) {
            *di += s * a * a;
        }
    }
}

/// How many of the highest-variance points screen a panel of candidates at once (most
/// candidates are refused on one of them) before the rest are weighed one by one.
const SCREEN: usize = 2;

impl<'a> State<'a> {
    /// The posterior after the fixed sensors and `chosen`, from scratch.
    fn new(inp: &'a SearchInput<'a>, rows: &'a Rows, chosen: &[usize]) -> Result<Self> {
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
        let pts = inp.edge_points;
        let n_pts = pts.nrows();
        let q = pts.transpose() * pts / n_pts.max(1) as f64;
        let worst = inp.goal == Goal::Worst;
        let h = rows.h.as_slice();
        let mut d = vec![0.0; n];
        let (u, t) = if worst {
            // only d_i = h_iᵀ C h_i: C times blocks of the row-major rows, read as the
            // columns of Hᵀ
            for (block, db) in h
                .chunks(WORST_CHUNK * p.max(1))
                .zip(d.chunks_mut(WORST_CHUNK))
            {
                let cu = &c * DMatrixView::from_slice(block, p, db.len());
                for ((di, hi), ui) in db.iter_mut().zip(block.chunks(p)).zip(cu.column_iter()) {
                    *di = simd::dot4(hi, ui.as_slice());
                }
            }
            (Vec::new(), Vec::new())
        } else {
            let uc = inp.candidates * &c; // N × p, row i = (C h_i)ᵀ
            let uq = &uc * &q;
            let u = row_major(&uc);
            let mut t = vec![0.0; n];
            for i in 0..n {
                d[i] = (0..p).map(|j| h[i * p + j] * u[i * p + j]).sum();
                t[i] = (0..p).map(|j| uq[(i, j)] * u[i * p + j]).sum();
            }
            (u, t)
        };
        let pc = pts * &c; // row k = (C p_k)ᵀ
        let v: Vec<f64> = (0..n_pts).map(|k| pc.row(k).dot(&pts.row(k))).collect();
        let r = if worst { row_major(&pc) } else { Vec::new() };
        let mean_var = (&q * &c).trace();
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
            rows,
            c,
            u,
            d,
            t,
            r,
            pending: Vec::new(),
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
        let near = self.rows.near[k].get_or_init(|| {
            let positions = self.inp.positions.iter().enumerate();
            let near = positions.filter(|&(_, &cp)| !(self.inp.spaced)(pk, cp));
            near.map(|(i, _)| i as u32).collect()
        });
        for &i in near {
            let b = &mut self.blocked[i as usize];
            *b = (*b as i32 + delta) as u32;
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

    /// `information` and `edge`: the loss if candidate `i` were added (`worst` weighs its
    /// candidates with [`State::weigh`]).
    fn loss_with(&self, i: usize) -> Loss {
        let d = self.d[i];
        let info = -(self.info + d.ln_1p());
        let mean_var = self.mean_var - self.t[i] / (1.0 + d);
        if self.inp.goal == Goal::Information {
            (info, mean_var)
        } else {
            (mean_var, info)
        }
    }

    /// `worst`: the loss if a candidate of row `hi` and `d_i` = `di` were added, its terms
    /// `v_k − e_ik²/(1 + d_i)`, `e_ik = p_k · C h_i = r_k · h_i`, formed [`LANES`] points at
    /// a time in `ord`'s order; `Beyond(term)` with a term that exceeds `cut` as soon as one
    /// does (the loss, their maximum, is at least that term: the candidate is refused exactly
    /// when its loss exceeds `cut`). The mean variance's change is `t_i = u_iᵀ Q u_i =
    /// Σ_k e_ik² / n`, from the same terms. The loss does not depend on `cut`.
    fn weigh(&self, ord: &Ordered, hi: &[f64], di: f64, cut: Option<f64>) -> Weighed {
        let scale = 1.0 / (1.0 + di);
        let mut worst = f64::NEG_INFINITY;
        let mut t = 0.0;
        for k0 in (0..ord.rows).step_by(LANES) {
            let e = simd::dots32(&ord.r, ord.rows, k0, hi);
            for (e, &v) in e.iter().zip(&ord.v[k0..k0 + LANES]) {
                let term = v - e * e * scale;
                if cut.is_some_and(|c| term > c) {
                    return Weighed::Beyond(term);
                }
                worst = worst.max(term);
                t += e * e;
            }
        }
        let t = t / self.n_pts.max(1) as f64;
        Weighed::Loss((worst, self.mean_var - t * scale))
    }

    /// `worst`: the edge points in the order they are weighed, for [`State::weigh`].
    fn ordered(&self) -> Ordered {
        let p = self.p;
        let mut order: Vec<usize> = (0..self.n_pts).collect();
        order.sort_by(|&a, &b| self.v[b].total_cmp(&self.v[a]).then(a.cmp(&b)));
        let rows = self.n_pts.div_ceil(LANES).max(1) * LANES;
        let mut r = vec![0.0; rows * p];
        let mut v = vec![f64::NEG_INFINITY; rows];
        for (kk, &k) in order.iter().enumerate() {
            for (j, &x) in self.r[k * p..(k + 1) * p].iter().enumerate() {
                r[j * rows + kk] = x;
            }
            v[kk] = self.v[k];
        }
        Ordered {
            rows,
            r,
            v,
            v_max: order.first().map_or(0.0, |&k| self.v[k]),
            first: order.iter().take(SCREEN).map(|&k| (k, self.v[k])).collect(),
        }
    }

    /// `d_k` with the pending updates applied (in the order [`State::best_worst`] applies
    /// them, so the same number).
    fn d_now(&self, k: usize) -> f64 {
        let hk = self.h_row(k);
        let mut d = self.d[k];
        for (w, s) in &self.pending {
            let a = simd::dot(w, hk);
            d += s * a * a;
        }
        d
    }

    /// `u_k = C h_k` (stored for `information` and `edge`, formed for `worst`).
    fn u_of(&self, k: usize) -> Vec<f64> {
        let p = self.p;
        if self.inp.goal == Goal::Worst {
            let hk = DVector::from_column_slice(self.h_row(k));
            (&self.c * hk).iter().copied().collect()
        } else {
            self.u[k * p..(k + 1) * p].to_vec()
        }
    }

    /// Candidate `i`'s row `h_i`.
    fn h_row(&self, i: usize) -> &[f64] {
        &self.rows.h[i * self.p..(i + 1) * self.p]
    }

    /// `worst`: the best feasible candidate, in candidate order, skipping every candidate
    /// whose loss provably cannot beat the best so far. Its loss is the maximum over the edge
    /// points of `v_k − e_ik²/(1 + d_i)`, at most `max v`; the terms are formed from the
    /// highest `v_k` down, and as soon as one exceeds the best loss by more than the swap
    /// tolerance at `max v` ([`Ordered::cut`]), [`better`] would refuse the candidate, so it
    /// is skipped. A candidate that is not skipped gets its exact loss (the maximum does not
    /// depend on the order of its terms).
    ///
    /// The work is split in two so that it runs in parallel and still makes exactly the
    /// choice of the scan in candidate order above. The first phase weighs fixed blocks of
    /// [`WORST_CHUNK`] candidates in parallel ([`State::weigh_block`]), each block skipping
    /// against the lower of its own best so far and the `probe`'s loss: a candidate gets its
    /// exact loss (which does not depend on the cut), or is skipped with the term that
    /// exceeded the cut — a lower bound of its loss. Any cut would do for the result; a good
    /// one (the probe's) only saves work. The second phase is the scan itself, in candidate
    /// order: a skipped candidate whose bound exceeds the scan's cut is refused as the scan
    /// would refuse it (the scan refuses a candidate exactly when its loss exceeds the cut);
    /// any other is weighed again, against the scan's cut (few: those the scan meets before
    /// its best so far is as good as the probe). On its way through a candidate's row the
    /// first phase brings `d_i` up to date with the pending rank-one updates (one pass over
    /// the rows per step instead of one per update).
    fn best_worst(&mut self, probe: Option<usize>) -> Option<(usize, Loss)> {
        let ord = self.ordered();
        let p = self.p;
        let probe_cut = probe.filter(|&i| self.feasible(i)).and_then(|i| {
            match self.weigh(&ord, self.h_row(i), self.d_now(i), None) {
                Weighed::Loss(l) => ord.cut(Some((i, l))),
                Weighed::Beyond(_) => None,
            }
        });
        let pending = std::mem::take(&mut self.pending);
        let mut d = std::mem::take(&mut self.d);
        let this = &*self;
        let blocks: Vec<Vec<(usize, Weighed)>> = d
            .par_chunks_mut(WORST_CHUNK)
            .zip(this.rows.panels.par_chunks(WORST_CHUNK * p.max(1)))
            .enumerate()
            .map(|(c, (dc, panels))| {
                this.weigh_block(&ord, &pending, probe_cut, c * WORST_CHUNK, dc, panels)
            })
            .collect();
        self.d = d;
        let mut best: Option<(usize, Loss)> = None;
        for (i, w) in blocks.into_iter().flatten() {
            let cut = ord.cut(best);
            let l = match w {
                Weighed::Loss(l) => l,
                Weighed::Beyond(e) if cut.is_some_and(|c| e > c) => continue,
                Weighed::Beyond(_) => match self.weigh(&ord, self.h_row(i), self.d[i], cut) {
                    Weighed::Loss(l) => l,
                    Weighed::Beyond(_) => continue,
                },
            };
            if best.is_none_or(|(_, b)| better(l, b)) {
                best = Some((i, l));
            }
        }
        best
    }

    /// [`State::best_worst`]'s first phase on one block: the feasible candidates from
    /// `first` on, their `d_i` (`dc`, brought up to date with `pending` on the way) and rows
    /// in panels, each with its exact loss or the term that refused it, against the lower
    /// of the block's best so far and `probe_cut` (the cut of the probe's loss).
    fn weigh_block(
        &self,
        ord: &Ordered,
        pending: &[(Vec<f64>, f64)],
        probe_cut: Option<f64>,
        first: usize,
        dc: &mut [f64],
        panels: &[f64],
    ) -> Vec<(usize, Weighed)> {
        let p = self.p;
        let cut_now = |best: Option<(usize, Loss)>| match (ord.cut(best), probe_cut) {
            (Some(a), Some(b)) => Some(a.min(b)),
            (a, b) => a.or(b),
        };
        let mut best: Option<(usize, Loss)> = None;
        let mut weighed = Vec::new();
        let panels = dc.chunks_mut(LANES).zip(panels.chunks((p * LANES).max(1)));
        for (b, (db, panel)) in panels.enumerate() {
            apply_pending(pending, panel, db);
            let refused = match cut_now(best) {
                Some(cut) => self.screen(ord, panel, db, cut),
                None => [None; LANES],
            };
            for (l, &di) in db.iter().enumerate() {
                let i = first + b * LANES + l;
                if !self.feasible(i) {
                    continue;
                }
                let w = match refused[l] {
                    Some(term) => Weighed::Beyond(term),
                    None => self.weigh(ord, self.h_row(i), di, cut_now(best)),
                };
                if let Weighed::Loss(l) = w {
                    if best.is_none_or(|(_, b)| better(l, b)) {
                        best = Some((i, l));
                    }
                }
                weighed.push((i, w));
            }
        }
        weighed
    }

    /// The first term of each candidate of a panel (`d_i` in `db`) on [`Ordered::first`]'s
    /// points that exceeds `cut`, if one does: the [`LANES`] candidates at once.
    fn screen(&self, ord: &Ordered, panel: &[f64], db: &[f64], cut: f64) -> [Option<f64>; LANES] {
        let p = self.p;
        let mut refused = [None; LANES];
        for &(k, vk) in &ord.first {
            let e = simd::dots32(panel, LANES, 0, &self.r[k * p..(k + 1) * p]);
            for ((r, e), di) in refused.iter_mut().zip(e).zip(db) {
                let term = vk - e * e * (1.0 / (1.0 + di));
                if r.is_none() && term > cut {
                    *r = Some(term);
                }
            }
        }
        refused
    }

    /// The best feasible candidate to add, with its loss. The losses are computed in
    /// parallel, the choice is made in candidate order: the same winner with any thread count.
    ///
    /// `probe`, a candidate likely to be nearly the best (the sensor just removed from the
    /// slot being exchanged), only makes `worst`'s weighing faster.
    fn best(&mut self, probe: Option<usize>) -> Option<(usize, Loss)> {
        if self.inp.goal == Goal::Worst {
            return self.best_worst(probe);
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
        let pw: Vec<f64> = self
            .rows
            .pts
            .chunks(p)
            .map(|pk| pk.iter().zip(w).map(|(a, b)| a * b).sum())
            .collect();
        if self.inp.goal == Goal::Worst {
            // `worst`: d_i ← d_i + s (w · h_i)² left to the next weighing, and
            // r_k ← r_k + s (p_k · w) w
            self.pending.push((w.to_vec(), s));
            for (rk, pwk) in self.r.chunks_mut(p).zip(&pw) {
                for (x, wj) in rk.iter_mut().zip(w) {
                    *x += s * pwk * wj;
                }
            }
        } else {
            self.rank_one_rows(w, s, &qw, wqw);
        }
        for (v, pwk) in self.v.iter_mut().zip(&pw) {
            *v += s * pwk * pwk;
        }
        self.c.ger(s, &wv, &wv, 1.0);
        self.mean_var += s * wqw;
    }

    /// `information` and `edge`: every candidate's `u_i`, `t_i`, `d_i` after `C ← C + s w wᵀ`.
    fn rank_one_rows(&mut self, w: &[f64], s: f64, qw: &DVector<f64>, wqw: f64) {
        let p = self.p;
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
            .rows
            .h
            .par_chunks(p)
            .zip(self.u.par_chunks_mut(p))
            .zip(self.t.par_iter_mut())
            .zip(self.d.par_iter_mut())
            .with_min_len(64);
        rows.for_each(|(((hi, ui), ti), di)| update(hi, ui, ti, di));
    }

    fn add(&mut self, k: usize) {
        let d = self.d_now(k);
        let scale = 1.0 / (1.0 + d).sqrt();
        let w: Vec<f64> = self.u_of(k).iter().map(|x| x * scale).collect();
        self.info += d.ln_1p();
        self.rank_one(&w, -1.0);
        self.block(k, 1);
    }

    fn remove(&mut self, k: usize) {
        let d = self.d_now(k).min(1.0 - 1e-15);
        let scale = 1.0 / (1.0 - d).sqrt();
        let w: Vec<f64> = self.u_of(k).iter().map(|x| x * scale).collect();
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
    let rows = Rows::new(inp);
    let mut state = State::new(inp, &rows, &[])?;
    let mut chosen = Vec::with_capacity(k);
    let mut total = k + k;
    for step in 0..k {
        let Some((i, _)) = state.best(None) else {
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
            state = State::new(inp, &rows, &chosen)?;
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
        let mut state = State::new(inp, &rows, &chosen)?;
        let mut improved = false;
        for slot in chosen.iter_mut() {
            let current = state.loss();
            let c = *slot;
            state.remove(c);
            match state.best(Some(c)) {
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
    let state = State::new(inp, &rows, &chosen)?;
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
    let rows = Rows::new(inp);
    Ok(value_of(inp.goal, State::new(inp, &rows, chosen)?.loss()))
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{RngExt, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// An invented `worst` problem: `n` random candidate rows (the last 40 copies of the
    /// first 40 at other positions, for exact ties), `p` coefficients, `n_pts` edge points.
    fn problem(
        seed: u64,
        n: usize,
        p: usize,
        n_pts: usize,
    ) -> (DMatrix<f64>, Vec<Point>, DVector<f64>, DMatrix<f64>) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let mut h = DMatrix::from_fn(n, p, |_, _| rng.random_range(-1.0..1.0));
        for i in 0..40 {
            let row = h.row(i).clone_owned();
            h.set_row(n - 40 + i, &row);
        }
        let positions = (0..n)
            .map(|_| Point::new(rng.random_range(0.0..1.0), rng.random_range(0.0..1.0)))
            .collect();
        let prior = DVector::from_fn(p, |_, _| rng.random_range(0.5..2.0));
        let pts = DMatrix::from_fn(n_pts, p, |_, _| rng.random_range(-1.0..1.0));
        (h, positions, prior, pts)
    }

    /// A `worst` search for 4 sensors among the candidates `h` at `positions`, no fixed sensor.
    fn worst_input<'a>(
        (h, positions): (&'a DMatrix<f64>, &'a [Point]),
        fixed: &'a DMatrix<f64>,
        prior: &'a DVector<f64>,
        pts: &'a DMatrix<f64>,
        spaced: &'a (dyn Fn(Point, Point) -> bool + Sync),
    ) -> SearchInput<'a> {
        SearchInput {
            candidates: h,
            positions,
            fixed,
            fixed_positions: &[],
            prior_variances: prior,
            edge_points: pts,
            goal: Goal::Worst,
            count: 4,
            spaced,
        }
    }

    /// `worst`'s parallel weighing (blocks, screening, probe, second phase) makes the choice
    /// of the plain scan in candidate order over the exact losses, whatever the probe, and
    /// leaves every `d_i` as the pending updates make it one candidate at a time.
    #[test]
    fn worst_weighing_is_the_plain_scan() {
        for seed in 0..4_u64 {
            let (mut h, positions, mut prior, mut pts) = problem(seed, 1300, 12, 45);
            // near-ties on the primary: edge point 0 reads coefficient 0 alone, whose prior
            // variance (100) makes it the worst point, and the candidates barely see that
            // coefficient — their losses differ by a few swap tolerances (1e-9 relative) or
            // not at all, and the secondary decides, as on a fine grid of candidates
            prior[0] = 100.0;
            pts.row_mut(0).fill(0.0);
            pts[(0, 0)] = 1.0;
            let mut rng = ChaCha8Rng::seed_from_u64(100 + seed);
            for i in 0..h.nrows() {
                h[(i, 0)] = if i % 3 == 0 {
                    0.0
                } else {
                    rng.random_range(0.0..[5e-6, 1e-5, 1e-5, 2e-5][seed as usize])
                };
            }
            let fixed = DMatrix::zeros(0, 12);
            let spaced = |a: Point, b: Point| (a.x - b.x).hypot(a.y - b.y) >= 0.03;
            let inp = worst_input((&h, &positions), &fixed, &prior, &pts, &spaced);
            let rows = Rows::new(&inp);
            // three rank-one updates pending: a removal, an addition, a removal
            let updated = || {
                let mut state = State::new(&inp, &rows, &[3, 700]).expect("state");
                state.remove(700);
                state.add(11);
                state.remove(3);
                state
            };
            let state = updated();
            assert_eq!(state.pending.len(), 3);
            let ord = state.ordered();
            let d_now: Vec<f64> = (0..h.nrows()).map(|i| state.d_now(i)).collect();
            let mut expected: Option<(usize, Loss)> = None;
            for (i, &di) in d_now.iter().enumerate() {
                if !state.feasible(i) {
                    continue;
                }
                let Weighed::Loss(l) = state.weigh(&ord, state.h_row(i), di, None) else {
                    panic!("no cut, no refusal");
                };
                if expected.is_none_or(|(_, b)| better(l, b)) {
                    expected = Some((i, l));
                }
            }
            let infeasible = (0..h.nrows()).find(|&i| !state.feasible(i));
            for probe in [None, Some(3), expected.map(|e| e.0), Some(5), infeasible] {
                let mut s = updated();
                let got = s.best_worst(probe);
                assert_eq!(
                    got.map(|g| g.0),
                    expected.map(|e| e.0),
                    "seed {seed}, {probe:?}"
                );
                let (g, e) = (got.expect("a best").1, expected.expect("a best").1);
                assert_eq!(
                    (g.0.to_bits(), g.1.to_bits()),
                    (e.0.to_bits(), e.1.to_bits())
                );
                assert!(s.pending.is_empty());
                for (i, (a, b)) in s.d.iter().zip(&d_now).enumerate() {
                    assert_eq!(a.to_bits(), b.to_bits(), "d_{i}");
                }
            }
        }
    }

    /// `worst`'s loss for a candidate is the largest posterior variance along the edge points
    /// with it, computed from scratch: `max_k p_kᵀ (Σ₀⁻¹ + Σ h hᵀ)⁻¹ p_k`, and its tie-breaker
    /// the mean of the same variances.
    #[test]
    fn worst_loss_is_the_largest_posterior_variance() {
        let (h, positions, prior, pts) = problem(9, 300, 10, 33);
        let fixed = DMatrix::zeros(0, 10);
        let spaced = |_: Point, _: Point| true;
        let inp = worst_input((&h, &positions), &fixed, &prior, &pts, &spaced);
        let rows = Rows::new(&inp);
        let mut state = State::new(&inp, &rows, &[4]).expect("state");
        state.add(17);
        let ord = state.ordered();
        for i in [0, 5, 99, 299] {
            let Weighed::Loss((worst, mean)) =
                state.weigh(&ord, state.h_row(i), state.d_now(i), None)
            else {
                panic!("no cut, no refusal");
            };
            let mut precision = DMatrix::from_diagonal(&prior.map(|v| 1.0 / v));
            for k in [4, 17, i] {
                let r = h.row(k);
                precision += r.transpose() * r;
            }
            let c = precision.try_inverse().expect("invertible");
            let variances: Vec<f64> = (0..pts.nrows())
                .map(|k| (pts.row(k) * &c * pts.row(k).transpose())[(0, 0)])
                .collect();
            let truth = variances.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            assert!((worst - truth).abs() <= 1e-12 * truth, "{worst} vs {truth}");
            // the secondary, the mean variance along the edge points (ties on the maximum)
            let mean_truth = variances.iter().sum::<f64>() / variances.len() as f64;
            assert!(
                (mean - mean_truth).abs() <= 1e-12 * mean_truth,
                "{mean} vs {mean_truth}"
            );
        }
    }
}
