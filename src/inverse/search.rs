//! The evidence rule's strength search for one data vector after another on the same
//! decomposition (the rows of a logger file): the same choice as
//! [`Decomposition::select_for`], found without evaluating the criterion on the whole grid.
//!
//! ## What is the same
//!
//! [`Decomposition::select_for`] evaluates the criterion on its grid of log λ
//! ([`Decomposition::lambda_grid`], 200 points), takes the best grid point `k*` and refines
//! it by Brent's minimiser between its neighbours. This search finds the same `k*` and the
//! same minimum between the neighbours:
//!
//! 1. **The best grid point, with most of the grid ruled out by a bound.** Write the
//!    evidence (module [`super::strength`]) with `w_i = λ/(g_i² + λ) = 1 − f_i` as a function
//!    of two sums, `ℓ(λ) = −Σ ln w_i` (the log-determinant) and `Q(λ) = δ₀ + Σ w_i β_i²` (the
//!    quadratic form): `E = m' ln 2π + ℓ + Q` (known σ) or `E = m' (ln(2π Q/m') + 1) + ℓ`
//!    (profiled scale). Each `w_i` rises with λ, so `ℓ` falls and `Q` rises, and `E` rises
//!    with `Q` and with `ℓ`. Every grid value strictly between two grid points `λ_i < λ_j` is
//!    therefore at least `E(ℓ(λ_{j−1}), Q(λ_i))` (`ℓ` is known at every grid point from the table,
//!    evaluated or not; `ℓ(λ_j)` in its place made a looser bound, which left 18 % more grid points
//!    to evaluate with the profiled scale). The search evaluates the grid points around the
//!    previous data vector's choice and the two ends, then bisects the runs of grid points between
//!    evaluated ones: a run whose bound exceeds the best value found so far (by more than a
//!    rounding margin) cannot hold the best grid point and is dropped; the rest are
//!    split at their middle point, which is evaluated. Every grid point not evaluated is thus
//!    provably worse than the best one, so `k*` does not depend on where the search
//!    started. Away from the optimum the evidence rises by many units, so a handful of
//!    bisections rule out most of the grid.
//!
//!    With the profiled scale the criterion holds a logarithm of `Q`, which is most of a
//!    grid point's cost. `E > X` is the same as `Q > S(X) e^{−ℓ/m'}` with
//!    `S(X) = (m'/2π) e^{X/m' − 1}` and `e^{−ℓ/m'}` in the grid's table, so a point shown
//!    above the best by more than a small window, and a run whose bound is above the best
//!    by the margin, are recognised by a product (`Screen`; one exponential per new best).
//!    A point so shown is left unformed: it can be neither the best nor tie with it, so the
//!    choice is the same to the last bit as with every point formed (a unit test holds the
//!    two to each other).
//! 2. **The minimum between the neighbours** of `k*`: the root of `dE/d ln λ`, which is a
//!    rational function of λ (`Σ f_i (β_i² w_i − 1)` with known σ; with the profiled scale
//!    `m' Σ β_i² f_i w_i / Q − Σ f_i`), by Newton's method safeguarded by bisection in the
//!    bracket. It converges to `|Δ ln λ| < 1e-12`, tighter than the Brent refinement of
//!    [`Decomposition::select_for`] (relative tolerance `√ε` on log₁₀ λ), so the two choices
//!    agree to that tolerance (about 1e-7 relative in λ).
//!
//! The grid values are computed from a product (`ℓ` as one logarithm of the product of the
//! `w_i`, instead of one logarithm per singular value), so they differ from
//! [`Decomposition::select_for`]'s by rounding only: the two searches could pick different
//! grid points only where two grid values tie to about 1e-13, which two points of the same
//! valley around the minimum resolve to the same refined λ. When the bracket does not hold a
//! sign change of the derivative (a grid minimum at a kink or a flat stretch), the search
//! falls back to [`Decomposition::select_for`] itself.
//!
//! ## A candidate that cannot win
//!
//! `auto` smoothing compares the evidence of two penalty orders and needs the λ of the winner
//! only. The search is therefore split in its two steps ([`Decomposition::evidence_grid`],
//! [`Decomposition::evidence_refine`]): with the winner's refined criterion as a cutoff, the
//! other's refinement is left out when a lower bound of its criterion over its bracket
//! (`Decomposition::bracket_floor`, with the derivation) exceeds the cutoff. Its refined
//! criterion, wherever the refinement or the reference search would put it in the bracket, is
//! then above the cutoff: it would not have been chosen.

use super::strength::{EvidenceKind, SelectOptions, Selection, Strength, StrengthMethod};
use super::tikhonov::{Decomposition, Projection};
use crate::error::{Error, Result};

/// Where the previous search on the same decomposition ended, and its scratch: reusable,
/// no allocation after the first call.
#[derive(Debug, Clone, Default)]
pub struct EvidenceSearch {
    /// Grid index of the previous choice (where the next grid search starts; the Newton
    /// step always starts from the bracket's middle, so the λ found does not depend on it to
    /// the last bit: rows can be fitted in any order, on any thread).
    last_k: Option<usize>,
    /// Per grid point: `ℓ`, `Q`, `E`, and whether evaluated.
    ell: Vec<f64>,
    quad: Vec<f64>,
    value: Vec<f64>,
    /// `done[k] == id`: grid point `k` was evaluated by the search under way (no clearing of
    /// the arrays between searches; the values of other points are never read).
    done: Vec<u32>,
    id: u32,
    /// Runs of grid points still to examine.
    stack: Vec<(usize, usize)>,
    /// The grid points evaluated by the search under way.
    visited: Vec<usize>,
    /// Grid points evaluated by the last search (for the benchmark's account).
    pub evaluated: usize,
    /// Of those, the ones whose criterion was formed (with the profiled scale, the others
    /// were shown to lose without it: module doc, step 1).
    pub formed: usize,
    /// Form every evaluated point's criterion (the check path of the tests): the same
    /// choice, to the last bit, as with the screen.
    pub without_screen: bool,
    /// The data-independent parts of the criterion on the grid, built on the first search
    /// (and again if the grid changes): per grid point the `w_i` and `ℓ`.
    table: Option<GridTable>,
}

/// Per grid point `k`, the weights `w_i = λ_k/(g_i² + λ_k)` (row `k` of `w`, r values),
/// `1/(g_i² + λ_k)` and `ℓ(λ_k)`, computed by the same expressions as [`Decomposition::sums`],
/// so that a grid value read from the table is the same number as one computed afresh: the
/// search then costs one multiply-add pass over r values per grid point instead of r divisions
/// and a logarithm. Valid for one decomposition and grid (`key`).
#[derive(Debug, Clone)]
struct GridTable {
    /// `(n, lo bits, hi bits)` of the grid, and the singular values it was made for.
    key: (usize, u64, u64),
    g: Vec<f64>,
    w: Vec<f64>,
    /// Row `k`: `1/(g_i² + λ_k)` (the Newton step's sums at the bracket's ends).
    inv: Vec<f64>,
    ell: Vec<f64>,
    /// `λ_k`.
    lambda: Vec<f64>,
    /// `e^{−ℓ_k/m'}` (the profiled-scale screen of [`Decomposition::best_grid_point`]).
    decay: Vec<f64>,
}

/// The best grid point of an evidence search ([`Decomposition::evidence_grid`]), to be
/// refined, or shown unable to win, by [`Decomposition::evidence_refine`].
#[derive(Debug, Clone, Copy)]
pub struct GridPick {
    /// The criterion at the best grid point: the refined choice's is not above it (NaN when
    /// the search is left to [`Decomposition::select_for`]).
    pub value: f64,
    k: usize,
    kind: EvidenceKind,
    /// The grid: `log₁₀ λ` from `lo` to `hi` in `n` points.
    grid: (f64, f64, usize),
    /// The choice is [`Decomposition::select_for`]'s (the curve is asked for, or no
    /// singular values).
    reference: bool,
}

/// How far above the best criterion a grid point's criterion must be shown to lie before
/// [`Decomposition::best_grid_point`] leaves it unformed: four times the [`MARGIN`] of its
/// run bounds, so that an unformed point is neither the best nor within the rounding tolerance
/// (1e-9 relative) at which [`Decomposition::bracket_floor`] asks whether another grid value
/// ties with the best.
const WINDOW: f64 = 4.0 * MARGIN;

/// The relative margin by which [`Decomposition::best_grid_point`] drops a run of grid
/// points only when its bound exceeds the best: far above the rounding of the bound.
const MARGIN: f64 = 1e-9;

/// The screen's scales ([`Screen::scales`]) at the best so far plus the window and plus the
/// margin (`None` before a best, or where the screen is off).
#[derive(Debug, Clone, Copy)]
struct Scales {
    window: Option<f64>,
    margin: Option<f64>,
}

/// The profiled scale's screen of [`Decomposition::best_grid_point`]: with
/// `E = m' (ln(2π Q/m') + 1) + ℓ`, `E > X` exactly when `Q > S(X) e^{−ℓ/m'}`,
/// `S(X) = (m'/2π) e^{X/m' − 1}`; `e^{−ℓ/m'}` is in the grid's table, so a point, or a run's
/// bound `E(ℓ_{j−1}, Q_i)`, is compared with `X` by a product instead of a logarithm (one
/// exponential per new best). The product and the exponentials are each within a few units
/// in the last place, a relative error of about 1e-15 in `Q`, i.e. `m'`·1e-15 in `E`; a
/// relative slack of 1e-12 on `Q` covers it, so "above" is certain, and where a factor is
/// not a normal number the criterion is formed instead. With the known σ, `E` has no
/// logarithm and the screen is off.
#[derive(Debug, Clone, Copy)]
struct Screen {
    /// `m'` when the screen is on.
    mp: Option<f64>,
}

impl Screen {
    fn new(kind: EvidenceKind, mp: f64, off: bool) -> Self {
        let on = kind == EvidenceKind::ProfiledScale && !off && mp.is_normal() && mp > 0.0;
        Screen {
            mp: on.then_some(mp),
        }
    }

    /// The scales at a new best criterion `v`: `S(v)(1 + δ/m')` for the window and the
    /// margin `δ` (each relative to `1 + |v|`), one exponential for both. `1 + δ/m'` is
    /// below `e^{δ/m'}`, so each stands for `v` plus at least half its `δ` (`δ/m'` is far
    /// below one): still twice, and half, the tolerances they must exceed.
    fn scales(&self, v: f64) -> Scales {
        let Some(mp) = self.mp else {
            return Scales {
                window: None,
                margin: None,
            };
        };
        let s = mp / (2.0 * std::f64::consts::PI) * (v / mp - 1.0).exp();
        let at = |rel: f64| {
            let x = s * (1.0 + rel * (1.0 + v.abs()) / mp);
            (x.is_normal() && x > 0.0).then_some(x)
        };
        Scales {
            window: at(WINDOW),
            margin: at(MARGIN),
        }
    }

    /// Whether the criterion at `Q = quad` with `e^{−ℓ/m'} = decay` is above the `X` whose
    /// scale `S(X)` is `scale`: `Some(true)` only when it certainly is, `Some(false)` when
    /// it is not by more than the slack, `None` when the screen cannot tell (off, or a
    /// factor not a normal number).
    fn above(quad: f64, decay: f64, scale: Option<f64>) -> Option<bool> {
        let threshold = scale? * decay;
        (decay.is_normal() && threshold.is_normal()).then_some(quad > threshold * (1.0 + 1e-12))
    }
}

impl Decomposition {
    /// Choose λ by the evidence rule for the projected data `proj`, the same choice as
    /// `select_for(proj, Strength::Rule(StrengthMethod::Evidence), opts)` (module doc) at a
    /// fraction of its cost. `state` carries the previous choice on this decomposition; it
    /// only decides where the search starts, never what it finds. The curve is not kept
    /// (`opts.keep_curve` set falls back to [`Self::select_for`]).
    ///
    /// # Errors
    /// As [`Self::select_for`].
    pub fn select_evidence(
        &self,
        proj: &Projection,
        opts: &SelectOptions,
        state: &mut EvidenceSearch,
    ) -> Result<Selection> {
        let pick = self.evidence_grid(proj, opts, state);
        self.evidence_refine(proj, opts, state, &pick, f64::INFINITY)?
            .ok_or_else(|| Error::Internal("no criterion value exceeds an infinite cutoff".into()))
    }

    /// The first step of [`Self::select_evidence`]: the best grid point (module doc, step
    /// 1). Its value is the criterion there, which the refined choice does not exceed;
    /// [`Self::evidence_refine`] with the same `proj`, `opts` and `state` finishes the
    /// search.
    pub fn evidence_grid(
        &self,
        proj: &Projection,
        opts: &SelectOptions,
        state: &mut EvidenceSearch,
    ) -> GridPick {
        let r = self.g.len();
        let kind = self.evidence_kind(opts);
        if opts.keep_curve || r == 0 {
            return GridPick {
                value: f64::NAN,
                k: 0,
                kind,
                grid: (0.0, 0.0, 0),
                reference: true,
            };
        }
        let n = opts.grid_points.max(3);
        let g_max = self.g[0];
        let g_min = self.g[r - 1].max(g_max * 1e-8);
        let lo = 2.0 * g_min.log10() - opts.margin_decades;
        let hi = 2.0 * g_max.log10() + opts.margin_decades;
        let st = state;
        let key = (n, lo.to_bits(), hi.to_bits());
        let table = match st.table.take() {
            Some(tb) if tb.key == key && tb.g == self.g.as_slice() => tb,
            _ => self.grid_table(key, |k| {
                (grid_log10((lo, hi, n), k) * std::f64::consts::LN_10).exp()
            }),
        };
        let (value, k) = self.best_grid_point(proj, st, &table, kind, n);
        st.table = Some(table);
        GridPick {
            value,
            k,
            kind,
            grid: (lo, hi, n),
            reference: false,
        }
    }

    /// The table of [`GridTable`] for grid points `λ(k)`, `k < key.0`.
    fn grid_table(&self, key: (usize, u64, u64), lambda: impl Fn(usize) -> f64) -> GridTable {
        let (n, r) = (key.0, self.g.len());
        let mut w = Vec::with_capacity(n * r);
        let mut inv = Vec::with_capacity(n * r);
        let mut ell = Vec::with_capacity(n);
        let mut lambdas = Vec::with_capacity(n);
        let zero = self.empty_projection();
        let mp = (self.m - self.q) as f64;
        for k in 0..n {
            let lam = lambda(k);
            // the same expressions as `sums` (w = λ/(g² + λ)) and `derivatives`
            // (1/(g² + λ)), and ℓ from `sums` itself
            w.extend(self.g.iter().map(|g| lam / (g * g + lam)));
            inv.extend(self.g.iter().map(|g| {
                let g2 = g * g;
                1.0 / (g2 + lam)
            }));
            ell.push(self.sums(&zero, lam).0);
            lambdas.push(lam);
        }
        let decay = ell.iter().map(|l| (-l / mp).exp()).collect();
        GridTable {
            key,
            g: self.g.as_slice().to_vec(),
            w,
            inv,
            ell,
            lambda: lambdas,
            decay,
        }
    }

    /// The best grid point, `(criterion, index)` (module doc, step 1).
    fn best_grid_point(
        &self,
        proj: &Projection,
        st: &mut EvidenceSearch,
        table: &GridTable,
        kind: EvidenceKind,
        n: usize,
    ) -> (f64, usize) {
        let r = self.g.len();
        let mp = (self.m - self.q) as f64;
        let screen = Screen::new(kind, mp, st.without_screen);
        st.id = st.id.wrapping_add(1);
        if st.done.len() != n || st.id == 0 {
            st.ell = vec![0.0; n];
            st.quad = vec![0.0; n];
            st.value = vec![f64::INFINITY; n];
            st.done = vec![0; n];
            st.id = 1;
        }
        let id = st.id;
        st.evaluated = 0;
        st.formed = 0;
        st.visited.clear();
        let mut best = (f64::INFINITY, usize::MAX);
        // the screen's scales for the window above the best and for the runs' margin
        // (recomputed as the best falls)
        let mut scales = Scales {
            window: None,
            margin: None,
        };
        // a grid point from the table (`Q` the same number as `sums` gives at its λ); its
        // criterion is formed unless the screen shows it above the best by more than the
        // window (it is then left at +∞: it cannot be the best, nor tie with it)
        let visit =
            |st: &mut EvidenceSearch, k: usize, best: &mut (f64, usize), scales: &mut Scales| {
                if st.done[k] == id {
                    return;
                }
                let quad = quad_sum(&table.w[k * r..(k + 1) * r], proj);
                st.ell[k] = table.ell[k];
                st.quad[k] = quad;
                st.done[k] = id;
                st.evaluated += 1;
                st.visited.push(k);
                if Screen::above(quad, table.decay[k], scales.window) == Some(true) {
                    st.value[k] = f64::INFINITY;
                    return;
                }
                st.formed += 1;
                let v = not_nan(criterion(kind, mp, table.ell[k], quad));
                st.value[k] = v;
                if v < best.0 || (v <= best.0 && k < best.1) {
                    if v < best.0 {
                        *scales = screen.scales(v);
                    }
                    *best = (v, k);
                }
            };
        // the previous choice's neighbourhood first (a good bound early), then the ends
        let start = st.last_k.filter(|&k| k < n).unwrap_or(n / 2);
        for k in [
            start.saturating_sub(1),
            start,
            (start + 1).min(n - 1),
            0,
            n - 1,
        ] {
            visit(st, k, &mut best, &mut scales);
        }
        // the runs between the points evaluated so far (the five above, both ends among
        // them), in the order of the grid
        st.stack.clear();
        st.visited.sort_unstable();
        for i in 1..st.visited.len() {
            let (a, b) = (st.visited[i - 1], st.visited[i]);
            if b > a + 1 {
                st.stack.push((a, b));
            }
        }
        while let Some((i, j)) = st.stack.pop() {
            // every grid point strictly between i and j is at least E(ℓ_{j−1}, Q_i) (ℓ falls
            // and Q rises with λ; ℓ is the table's at every grid point, evaluated or not)
            let ell_last = table.ell[j - 1];
            let margin = MARGIN * (1.0 + best.0.abs());
            // with the profiled scale, by the screen (a run it cannot show above, it is
            // split); else the bound itself: the criterion is ℓ plus a function of Q, so it
            // is E_i − ℓ_i + ℓ_{j−1} when E_i was formed (no logarithm of Q again; the same
            // number to rounding, far inside the margin)
            let above = Screen::above(st.quad[i], table.decay[j - 1], scales.margin)
                .unwrap_or_else(|| {
                    let bound = if st.value[i].is_finite() {
                        st.value[i] - st.ell[i] + ell_last
                    } else {
                        criterion(kind, mp, ell_last, st.quad[i])
                    };
                    bound > best.0 + margin
                });
            if above {
                continue;
            }
            let mid = (i + j) / 2;
            visit(st, mid, &mut best, &mut scales);
            if mid > i + 1 {
                st.stack.push((i, mid));
            }
            if j > mid + 1 {
                st.stack.push((mid, j));
            }
        }
        // ties go to the first grid point, as in `select_for`: the unevaluated points are
        // worse than `best` by more than the margin, and the evaluated ones whose criterion
        // was not formed by more than the window, so scanning the formed ones suffices
        let (fk, k) = best;
        let k = st
            .visited
            .iter()
            .copied()
            .filter(|&j| st.value[j].total_cmp(&fk).is_eq())
            .min()
            .unwrap_or(k);
        st.last_k = Some(k);
        (fk, k)
    }

    /// The second step of [`Self::select_evidence`]: the minimum between the neighbours of
    /// the best grid point `pick` (module doc, step 2), or `None` when it is shown to exceed
    /// `cutoff` without being found (module doc, "A candidate that cannot win"; never with
    /// an infinite `cutoff`). `proj`, `opts` and `state` as given to
    /// [`Self::evidence_grid`] for `pick`.
    ///
    /// # Errors
    /// As [`Self::select_for`].
    pub fn evidence_refine(
        &self,
        proj: &Projection,
        opts: &SelectOptions,
        state: &EvidenceSearch,
        pick: &GridPick,
        cutoff: f64,
    ) -> Result<Option<Selection>> {
        let strength = Strength::Rule(StrengthMethod::Evidence);
        let table = match (&state.table, pick.reference) {
            (Some(t), false) => t,
            _ => return self.select_for(proj, strength, opts).map(Some),
        };
        let (r, kind) = (self.g.len(), pick.kind);
        let (lo, hi, n) = pick.grid;
        let (fk, k) = (pick.value, pick.k);
        let x_at = |k: usize| grid_log10((lo, hi, n), k);
        let mp = (self.m - self.q) as f64;
        let effective = |lambda: f64| {
            self.q as f64 + self.g.iter().map(|g| g * g / (g * g + lambda)).sum::<f64>()
        };
        if k == 0 || k == n - 1 {
            let lambda = 10f64.powf(x_at(k));
            return Ok(Some(Selection {
                strength,
                lambda,
                criterion: fk,
                effective_parameters: effective(lambda),
                grid: Vec::new(),
                curve: Vec::new(),
                at_grid_end: true,
                target: None,
                evidence_kind: Some(kind),
            }));
        }
        let ln10 = std::f64::consts::LN_10;
        let (a, b) = (x_at(k - 1) * ln10, x_at(k + 1) * ln10);
        if cutoff < f64::INFINITY
            && self
                .bracket_floor(proj, table, state, kind, k, (a, b), fk)
                .is_some_and(|floor| floor > cutoff + 1e-9 * (1.0 + cutoff.abs()))
        {
            return Ok(None);
        }
        // dE/dt at the bracket's ends (grid points: from the table)
        let at_grid = |k: usize| {
            let inv = &table.inv[k * r..(k + 1) * r];
            self.derivatives_with(proj, kind, table.lambda[k], Some(inv))
                .0
        };
        let Some(t) = self.stationary(proj, kind, (a, at_grid(k - 1)), (b, at_grid(k + 1))) else {
            return self.select_for(proj, strength, opts).map(Some);
        };
        let lambda = t.exp();
        let (ell, quad) = self.sums(proj, lambda);
        let value = criterion(kind, mp, ell, quad);
        if value.is_nan() || value > fk {
            // the root found is not below the grid point (a maximum beside a minimum in
            // one grid step): leave it to the reference search
            return self.select_for(proj, strength, opts).map(Some);
        }
        Ok(Some(Selection {
            strength,
            lambda,
            criterion: value,
            effective_parameters: effective(lambda),
            grid: Vec::new(),
            curve: Vec::new(),
            at_grid_end: false,
            target: None,
            evidence_kind: Some(kind),
        }))
    }

    /// A lower bound of the criterion for every λ in the bracket `[e^a, e^b]` around grid
    /// point `k` (criterion `fk`), or `None` when another evaluated grid value is within
    /// rounding of `fk` (the reference search might then refine around that one).
    ///
    /// With `t = ln λ`, `f_i w_i` is the rate of `w_i = 1 − f_i`, which rises with `t`; on
    /// the bracket `f_i w_i ≤ φ_i` (`1/4` where `w_i` crosses `1/2`, else the larger end
    /// value). Known σ: `E'' = Σ f_i w_i (1 + β_i² (f_i − w_i))`, whose terms can be negative
    /// only through `β_i² (w_i − f_i) > 1`, so `E'' ≥ −M`, `M = Σ φ_i (β_i² (2 w_i(b) − 1) − 1)⁺`.
    /// Profiled scale: `E = m' ln Q + ℓ + const`, `E'' ≥ m' (Q''/Q − (Q'/Q)²)` (`ℓ'' ≥ 0`)
    /// with `Q' = Σ β_i² f_i w_i ≤ B = Σ β_i² φ_i`, `Q'' ≥ −A`,
    /// `A = Σ β_i² φ_i (2 w_i(b) − 1)⁺` and `Q ≥ Q(e^a)`, so `M = m' (A/Q(e^a) + (B/Q(e^a))²)`.
    /// Then `E(t_k + u) ≥ E(t_k) + E'(t_k) u − M u²/2 ≥ fk − |E'(t_k)| h − M h²/2` for
    /// `|u| ≤ h`, half the bracket. Relative margins of 1e-9 cover the rounding of these
    /// sums.
    #[allow(clippy::too_many_arguments)]
    fn bracket_floor(
        &self,
        proj: &Projection,
        table: &GridTable,
        st: &EvidenceSearch,
        kind: EvidenceKind,
        k: usize,
        (a, b): (f64, f64),
        fk: f64,
    ) -> Option<f64> {
        let r = self.g.len();
        let close = 1e-9 * (1.0 + fk.abs());
        if st
            .visited
            .iter()
            .any(|&j| j != k && (st.value[j] - fk).abs() <= close)
        {
            return None;
        }
        let inv = &table.inv[k * r..(k + 1) * r];
        let (d1, _) = self.derivatives_with(proj, kind, table.lambda[k], Some(inv));
        let (w_a, w_b) = (
            &table.w[(k - 1) * r..k * r],
            &table.w[(k + 1) * r..(k + 2) * r],
        );
        // Σ φ_i (β_i² (2 w_i(b) − 1) − 1)⁺, Σ β_i² φ_i (2 w_i(b) − 1)⁺, Σ β_i² φ_i
        let (mut known, mut fall, mut rise) = (0.0, 0.0, 0.0);
        for ((&wa, &wb), &beta) in w_a.iter().zip(w_b).zip(proj.beta.as_slice()) {
            let phi = if wa <= 0.5 && wb >= 0.5 {
                0.25
            } else {
                (wa * (1.0 - wa)).max(wb * (1.0 - wb))
            };
            let b2 = beta * beta;
            known += phi * (b2 * (2.0 * wb - 1.0) - 1.0).max(0.0);
            fall += b2 * phi * (2.0 * wb - 1.0).max(0.0);
            rise += b2 * phi;
        }
        let m = match kind {
            EvidenceKind::KnownSigma => known,
            EvidenceKind::ProfiledScale => {
                let q_a = quad_sum(w_a, proj) * (1.0 - 1e-9);
                if q_a.is_nan() || q_a <= 0.0 {
                    return None;
                }
                let mp = (self.m - self.q) as f64;
                mp * (fall / q_a + (rise / q_a).powi(2))
            }
        } * (1.0 + 1e-9);
        let h = 0.5 * (b - a) * (1.0 + 1e-9);
        let floor = fk - d1.abs() * h - 0.5 * m * h * h;
        floor
            .is_finite()
            .then(|| floor - 1e-9 * (1.0 + fk.abs() + d1.abs() * h + m * h * h))
    }

    /// `ℓ(λ) = −Σ ln w_i` and `Q(λ) = δ₀ + Σ w_i β_i²`, `w_i = λ/(g_i² + λ)` (`Q` summed as
    /// [`quad_sum`] sums it). `ℓ` is one
    /// logarithm of the product of the `w_i`, kept in range by moving its binary exponent
    /// aside (each `w_i ≥ 1e-20` on the grid's range, so eight factors between
    /// renormalisations cannot underflow); four lanes side by side so that the divisions
    /// overlap.
    fn sums(&self, proj: &Projection, lambda: f64) -> (f64, f64) {
        const LANES: usize = 4;
        let g = self.g.as_slice();
        let beta = proj.beta.as_slice();
        let mut prod = [1.0f64; LANES];
        let mut quad = [0.0f64; LANES];
        let mut exp2: i64 = 0;
        let gc = g.chunks_exact(LANES);
        let (g_rest, b_rest) = (gc.remainder(), &beta[g.len() - gc.remainder().len()..]);
        for (ci, (gl, bl)) in gc.zip(beta.chunks_exact(LANES)).enumerate() {
            for l in 0..LANES {
                let w = lambda / (gl[l] * gl[l] + lambda);
                prod[l] *= w;
                quad[l] += w * bl[l] * bl[l];
            }
            if ci % 8 == 7 {
                for p in &mut prod {
                    exp2 += renormalise(p);
                }
            }
        }
        for (gi, bi) in g_rest.iter().zip(b_rest) {
            let w = lambda / (gi * gi + lambda);
            prod[0] *= w;
            quad[0] += w * bi * bi;
        }
        let mut mant = 1.0;
        for p in &mut prod {
            exp2 += renormalise(p);
            mant *= *p;
        }
        let ell = -(mant.ln() + exp2 as f64 * std::f64::consts::LN_2);
        (
            ell,
            proj.delta0 + ((quad[0] + quad[1]) + (quad[2] + quad[3])),
        )
    }

    /// `(dE/dt, d²E/dt²)` at `t = ln λ`: with `f_i = 1 − w_i`, `S₁ = Σ β_i² f_i w_i`
    /// (`= dQ/dt`), `dS₁/dt = Σ β_i² f_i w_i (f_i − w_i)` and `d(Σ f_i)/dt = −Σ f_i w_i`:
    /// known σ `(S₁ − Σ f_i, dS₁/dt + Σ f_i w_i)`; profiled scale
    /// `(m' S₁/Q − Σ f_i, m' (dS₁/dt / Q − S₁²/Q²) + Σ f_i w_i)`.
    fn derivatives(&self, proj: &Projection, kind: EvidenceKind, t: f64) -> (f64, f64) {
        let lambda = t.exp();
        self.derivatives_with(proj, kind, lambda, None)
    }

    /// [`Self::derivatives`] at `λ = e^t`, with `1/(g_i² + λ)` computed (`inv` `None`) or
    /// read from the grid's table (the same numbers).
    #[inline]
    fn derivatives_with(
        &self,
        proj: &Projection,
        kind: EvidenceKind,
        lambda: f64,
        inv: Option<&[f64]>,
    ) -> (f64, f64) {
        let mp = (self.m - self.q) as f64;
        let [sf, sfw, s1, s1p, quad] = derivative_sums(
            self.g.as_slice(),
            proj.beta.as_slice(),
            lambda,
            inv,
            proj.delta0,
        );
        match kind {
            EvidenceKind::KnownSigma => (s1 - sf, s1p + sfw),
            EvidenceKind::ProfiledScale => (
                mp * s1 / quad - sf,
                mp * (s1p / quad - s1 * s1 / (quad * quad)) + sfw,
            ),
        }
    }

    /// The root of `dE/dt` (`t = ln λ`) in `[a, b]`, by Newton's method safeguarded by
    /// bisection; `None` when the derivative does not go from negative to positive there.
    fn stationary(
        &self,
        proj: &Projection,
        kind: EvidenceKind,
        (a, da): (f64, f64),
        (b, db): (f64, f64),
    ) -> Option<f64> {
        let deriv = |t: f64| self.derivatives(proj, kind, t);
        if !(da < 0.0 && db > 0.0) {
            return None;
        }
        let (mut lo, mut hi) = (a, b);
        let mut t = 0.5 * (a + b);
        for _ in 0..100 {
            let (d, dd) = deriv(t);
            if !d.is_finite() {
                return None;
            }
            if d < 0.0 {
                lo = t;
            } else if d > 0.0 {
                hi = t;
            } else {
                return Some(t);
            }
            let newton = t - d / dd;
            let next = if dd > 0.0 && newton > lo && newton < hi {
                newton
            } else {
                0.5 * (lo + hi)
            };
            let tol = 1e-12 * (1.0 + t.abs());
            if (next - t).abs() < tol || hi - lo < tol {
                return Some(next);
            }
            t = next;
        }
        Some(t)
    }
}

crate::simd::avx2_dispatch! {
    /// `[Σ f_i, Σ f_i w_i, Σ β_i² f_i w_i, Σ β_i² f_i w_i (f_i − w_i), δ₀ + Σ w_i β_i²]` with
    /// `f_i = g_i² v_i`, `w_i = λ v_i` and `v_i = 1/(g_i² + λ)` (computed, or `inv[i]`): the
    /// sums of [`Decomposition::derivatives`], each added in the order of `i`.
    fn derivative_sums(
        g: &[f64],
        beta: &[f64],
        lambda: f64,
        inv: Option<&[f64]>,
        delta0: f64,
    ) -> [f64; 5] = derivative_sums_body;
}

/// The body of [`derivative_sums`]: the terms of eight `i` at a time side by side (they do
/// not depend on one another, so they go in vector lanes), then added to the five sums one
/// `i` after another, in order.
#[inline(always)]
fn derivative_sums_body(
    g: &[f64],
    beta: &[f64],
    lambda: f64,
    inv: Option<&[f64]>,
    delta0: f64,
) -> [f64; 5] {
    const B: usize = 8;
    let r = g.len().min(beta.len());
    let mut sums = [0.0, 0.0, 0.0, 0.0, delta0];
    // the terms of one i, by the expressions of the plain loop
    let terms = |g: f64, b: f64, v: f64| -> [f64; 5] {
        let g2 = g * g;
        let (f, w) = (g2 * v, lambda * v);
        let b2 = b * b;
        let fw = f * w;
        [f, fw, b2 * fw, b2 * fw * (f - w), w * b2]
    };
    let inv_at = |i: usize| match inv {
        Some(v) => v[i],
        None => 1.0 / (g[i] * g[i] + lambda),
    };
    let whole = r - r % B;
    for i0 in (0..whole).step_by(B) {
        let mut t = [[0.0; B]; 5];
        for l in 0..B {
            let v = inv_at(i0 + l);
            let x = terms(g[i0 + l], beta[i0 + l], v);
            for (tk, xk) in t.iter_mut().zip(x) {
                tk[l] = xk;
            }
        }
        for l in 0..B {
            for (s, tk) in sums.iter_mut().zip(&t) {
                *s += tk[l];
            }
        }
    }
    for i in whole..r {
        let x = terms(g[i], beta[i], inv_at(i));
        for (s, xk) in sums.iter_mut().zip(x) {
            *s += xk;
        }
    }
    sums
}

/// `log₁₀ λ` of grid point `k` of the grid from `lo` to `hi` in `n` points: the expression of
/// [`Decomposition::lambda_grid`], so the same numbers.
fn grid_log10((lo, hi, n): (f64, f64, usize), k: usize) -> f64 {
    lo + (hi - lo) * k as f64 / (n - 1) as f64
}

/// `Q = δ₀ + Σ w_i β_i²` from given weights, in the order of [`Decomposition::sums`]: four
/// lanes (`i mod 4` within the whole chunks of four, the remainder on lane 0), each term
/// `(w_i β_i) β_i`, the lanes added pairwise. The same number as `sums` gives.
#[inline]
fn quad_sum(w: &[f64], proj: &Projection) -> f64 {
    const LANES: usize = 4;
    let beta = proj.beta.as_slice();
    let mut quad = [0.0f64; LANES];
    let wc = w.chunks_exact(LANES);
    let (w_rest, b_rest) = (wc.remainder(), &beta[w.len() - wc.remainder().len()..]);
    for (wl, bl) in wc.zip(beta.chunks_exact(LANES)) {
        for l in 0..LANES {
            quad[l] += wl[l] * bl[l] * bl[l];
        }
    }
    for (wi, bi) in w_rest.iter().zip(b_rest) {
        quad[0] += wi * bi * bi;
    }
    proj.delta0 + ((quad[0] + quad[1]) + (quad[2] + quad[3]))
}

fn criterion(kind: EvidenceKind, mp: f64, ell: f64, quad: f64) -> f64 {
    let two_pi = 2.0 * std::f64::consts::PI;
    match kind {
        EvidenceKind::KnownSigma => mp * two_pi.ln() + ell + quad,
        EvidenceKind::ProfiledScale => mp * ((two_pi * quad / mp).ln() + 1.0) + ell,
    }
}

/// Write a positive normal `x` as `m · 2^e` with `m` in [1, 2): sets `x = m`, returns `e`.
/// Anything else (zero, subnormal, not finite) is left as it is.
fn renormalise(x: &mut f64) -> i64 {
    if !x.is_normal() || *x < 0.0 {
        return 0;
    }
    let bits = x.to_bits();
    let e = ((bits >> 52) & 0x7ff) as i64 - 1023;
    *x = f64::from_bits((bits & !(0x7ff << 52)) | (1023 << 52));
    e
}

fn not_nan(v: f64) -> f64 {
    if v.is_nan() { f64::INFINITY } else { v }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::inverse::Problem;
    use nalgebra::DVector;

    /// The search's options: no curve kept (a curve asks for the full search).
    fn without_curve() -> SelectOptions {
        SelectOptions {
            keep_curve: false,
            ..SelectOptions::default()
        }
    }

    /// The strength module's invented ill-posed problem and `n` invented data vectors drifting from
    /// row to row, as a logger's rows do.
    fn problem_and_rows(
        m: usize,
        p: usize,
        sigma_stated: bool,
        n: usize,
    ) -> (Decomposition, Vec<DVector<f64>>) {
        let (a, sigma, penalty) = crate::inverse::strength::fixture::matrices(m, p, sigma_stated);
        let rows = (0..n)
            .map(|r| {
                let amp = 1.0 + 4.0 * (r as f64 * 0.05).sin().powi(2);
                let truth = DVector::from_fn(p, |j, _| amp * 5.0 / (1.0 + j as f64).powi(2));
                let mut d = &a * truth;
                for i in 0..m {
                    // a fixed pseudo-random sequence (fractional parts of a sine), scaled
                    // like the reading noise
                    d[i] += 0.1 * (((i + 31 * r) as f64 * 78.233).sin() * 43758.5453).fract();
                }
                d
            })
            .collect::<Vec<_>>();
        let problem = Problem::new(a, rows[0].clone(), sigma, penalty, sigma_stated).unwrap();
        (Decomposition::new(&problem).unwrap(), rows)
    }

    #[test]
    fn a_candidate_shown_unable_to_win_would_not_have_won() {
        // For cutoffs below and above each row's refined criterion: `evidence_refine` may
        // leave the refinement out only when the criterion is above the cutoff, and when it
        // refines, it gives `select_evidence`'s choice to the last bit.
        let opts = without_curve();
        for stated in [true, false] {
            let (dec, rows) = problem_and_rows(16, 12, stated, 60);
            let mut st = EvidenceSearch::default();
            let mut proj = dec.empty_projection();
            let (mut left_out, mut refined) = (0, 0);
            for d in &rows {
                dec.project_into(d, &mut proj).unwrap();
                let full = dec.select_evidence(&proj, &opts, &mut st).unwrap();
                for gap in [-3.0, -1.0, -0.3, -0.1, -0.03, -1e-6, 0.0, 1e-6, 0.1, 1.0] {
                    let cutoff = full.criterion + gap;
                    let pick = dec.evidence_grid(&proj, &opts, &mut st);
                    assert!(pick.value >= full.criterion);
                    match dec
                        .evidence_refine(&proj, &opts, &st, &pick, cutoff)
                        .unwrap()
                    {
                        None => {
                            assert!(full.criterion > cutoff, "σ stated {stated}, gap {gap}");
                            left_out += 1;
                        }
                        Some(sel) => {
                            assert_eq!(sel.lambda.to_bits(), full.lambda.to_bits());
                            assert_eq!(sel.criterion.to_bits(), full.criterion.to_bits());
                            refined += 1;
                        }
                    }
                }
            }
            // the bound does its work well below the criterion, and is never the only path
            assert!(
                left_out > 100 && refined > 300,
                "{left_out} left out, {refined} refined"
            );
        }
    }

    #[test]
    fn same_choice_as_the_full_search_warm_or_cold() {
        let opts = without_curve();
        for stated in [true, false] {
            let (dec, rows) = problem_and_rows(16, 12, stated, 60);
            let mut warm = EvidenceSearch::default();
            let mut proj = dec.empty_projection();
            let mut interior = 0;
            for (r, d) in rows.iter().enumerate() {
                dec.project_into(d, &mut proj).unwrap();
                let full = dec
                    .select_for(&proj, Strength::Rule(StrengthMethod::Evidence), &opts)
                    .unwrap();
                let fast = dec.select_evidence(&proj, &opts, &mut warm).unwrap();
                let cold = dec
                    .select_evidence(&proj, &opts, &mut EvidenceSearch::default())
                    .unwrap();
                // the full search's Brent step stops at √ε relative on log10 λ (≈ 1e-7
                // relative in λ here); the fast one at 1e-12 in ln λ
                let rel = (fast.lambda - full.lambda).abs() / full.lambda;
                assert!(
                    rel < 1e-6,
                    "σ stated {stated}, row {r}: {} vs {}",
                    fast.lambda,
                    full.lambda
                );
                assert_eq!(fast.at_grid_end, full.at_grid_end);
                assert_eq!(fast.evidence_kind, full.evidence_kind);
                // the criterion at the optimum: equal to rounding (flat there)
                assert!(
                    (fast.criterion - full.criterion).abs() < 1e-9 * (1.0 + full.criterion.abs())
                );
                assert!((fast.effective_parameters - full.effective_parameters).abs() < 1e-5);
                // where the search starts does not change what it finds, to the last bit
                assert_eq!(
                    cold.lambda.to_bits(),
                    fast.lambda.to_bits(),
                    "σ stated {stated}, row {r}: {} vs {}",
                    cold.lambda,
                    fast.lambda
                );
                // and it evaluates a small part of the grid
                assert!(warm.evaluated < 60, "{} grid points", warm.evaluated);
                interior += usize::from(!full.at_grid_end);
            }
            assert!(interior > 50, "{interior} interior choices");
        }
    }

    #[test]
    fn the_profiled_scale_screen_changes_no_choice_to_the_last_bit() {
        // the same rows searched with every evaluated point's criterion formed and with
        // the screen (which leaves out the logarithm of points shown to lose): the same
        // grid point, value, λ and criterion, bit for bit, warm and cold, with σ estimated
        // (the screen on) and stated (off: no logarithm to leave out)
        let opts = without_curve();
        for stated in [false, true] {
            let (dec, rows) = problem_and_rows(16, 12, stated, 60);
            let mut proj = dec.empty_projection();
            let mut screened = EvidenceSearch::default();
            let mut formed_all = EvidenceSearch {
                without_screen: true,
                ..EvidenceSearch::default()
            };
            let (mut evaluated, mut formed) = (0, 0);
            for (r, d) in rows.iter().enumerate() {
                dec.project_into(d, &mut proj).unwrap();
                for fresh in [false, true] {
                    if fresh {
                        screened = EvidenceSearch::default();
                    }
                    let a = dec.evidence_grid(&proj, &opts, &mut screened);
                    let b = dec.evidence_grid(&proj, &opts, &mut formed_all);
                    assert_eq!(
                        (a.value.to_bits(), a.k),
                        (b.value.to_bits(), b.k),
                        "σ stated {stated}, row {r}"
                    );
                    evaluated += screened.evaluated;
                    formed += screened.formed;
                    let sa = dec
                        .evidence_refine(&proj, &opts, &screened, &a, f64::INFINITY)
                        .unwrap()
                        .unwrap();
                    let sb = dec
                        .evidence_refine(&proj, &opts, &formed_all, &b, f64::INFINITY)
                        .unwrap()
                        .unwrap();
                    assert_eq!(sa.lambda.to_bits(), sb.lambda.to_bits(), "row {r}");
                    assert_eq!(sa.criterion.to_bits(), sb.criterion.to_bits(), "row {r}");
                }
            }
            if stated {
                assert_eq!(formed, evaluated, "no screen with σ stated");
            } else {
                // most evaluated points are shown to lose without their logarithm
                assert!(2 * formed < evaluated, "{formed} of {evaluated} formed");
            }
        }
    }

    #[test]
    fn derivative_sums_are_the_plain_loops_bit_for_bit() {
        // the plain loop the blocked sums replace: each sum added in the order of i
        let plain = |g: &[f64], b: &[f64], lambda: f64, inv: Option<&[f64]>, d0: f64| {
            let (mut sf, mut sfw, mut s1, mut s1p, mut quad) = (0.0, 0.0, 0.0, 0.0, d0);
            for i in 0..g.len() {
                let g2 = g[i] * g[i];
                let v = inv.map_or_else(|| 1.0 / (g2 + lambda), |v| v[i]);
                let (f, w) = (g2 * v, lambda * v);
                let b2 = b[i] * b[i];
                let fw = f * w;
                sf += f;
                sfw += fw;
                s1 += b2 * fw;
                s1p += b2 * fw * (f - w);
                quad += w * b2;
            }
            [sf, sfw, s1, s1p, quad]
        };
        let mut seed = 0.37_f64;
        let mut next = || {
            // a fixed pseudo-random sequence spread over many decades
            seed = (seed * 997.0 + 0.123).fract();
            10f64.powf(8.0 * seed - 4.0)
        };
        for r in [0usize, 1, 5, 8, 13, 16, 31, 64] {
            let g: Vec<f64> = (0..r).map(|_| next()).collect();
            let b: Vec<f64> = (0..r).map(|_| next() - next()).collect();
            let lambda = next();
            let inv: Vec<f64> = g.iter().map(|gi| 1.0 / (gi * gi + lambda)).collect();
            for table in [None, Some(inv.as_slice())] {
                let got = derivative_sums(&g, &b, lambda, table, 0.25);
                let want = plain(&g, &b, lambda, table, 0.25);
                assert_eq!(got.map(f64::to_bits), want.map(f64::to_bits), "r = {r}");
            }
        }
    }

    #[test]
    fn grid_table_gives_the_numbers_computed_afresh() {
        // the table's ℓ, Q and 1/(g² + λ) at every grid point, bit for bit against `sums`
        // and `derivatives` evaluated at that λ (so the tabled search finds what the
        // untabled one found)
        for stated in [true, false] {
            let (dec, rows) = problem_and_rows(16, 12, stated, 3);
            let opts = without_curve();
            let mut st = EvidenceSearch::default();
            let proj = dec.projection(&rows[1]).unwrap();
            dec.select_evidence(&proj, &opts, &mut st).unwrap();
            let table = st.table.as_ref().unwrap();
            let r = dec.g.len();
            let grid = dec.lambda_grid(&opts).unwrap();
            assert_eq!(table.lambda.len(), grid.len());
            let kind = dec.evidence_kind(&opts);
            for (k, &lam) in table.lambda.iter().enumerate() {
                // the grid is in log10 λ
                let x = lam.log10();
                assert!((x - grid[k]).abs() <= 1e-12 * (1.0 + grid[k].abs()), "{k}");
                let (ell, quad) = dec.sums(&proj, lam);
                assert_eq!(table.ell[k].to_bits(), ell.to_bits(), "{k}");
                let q2 = quad_sum(&table.w[k * r..(k + 1) * r], &proj);
                assert_eq!(q2.to_bits(), quad.to_bits(), "{k}");
                let inv = &table.inv[k * r..(k + 1) * r];
                let from_table = dec.derivatives_with(&proj, kind, lam, Some(inv));
                // what `derivatives` computes once it has λ
                let fresh = dec.derivatives_with(&proj, kind, lam, None);
                assert_eq!(from_table.0.to_bits(), fresh.0.to_bits(), "{k}");
                assert_eq!(from_table.1.to_bits(), fresh.1.to_bits(), "{k}");
            }
            // a different decomposition through the same state: the table is rebuilt (a
            // stale one would put the grid minimum elsewhere), and the choice is the fresh
            // search's to the last bit
            let (dec2, rows2) = problem_and_rows(14, 12, stated, 2);
            let proj2 = dec2.projection(&rows2[1]).unwrap();
            let a = dec2.select_evidence(&proj2, &opts, &mut st).unwrap();
            let b = dec2
                .select_evidence(&proj2, &opts, &mut EvidenceSearch::default())
                .unwrap();
            assert_eq!(a.lambda.to_bits(), b.lambda.to_bits());
            assert_eq!(st.table.as_ref().unwrap().g, dec2.g.as_slice());
        }
    }

    #[test]
    fn derivative_matches_finite_differences_of_the_criterion() {
        // the Newton step's dE/d ln λ and d²E/d ln λ² against central differences of the
        // criterion itself (evaluated as the strength module does)
        for stated in [true, false] {
            let (dec, rows) = problem_and_rows(16, 12, stated, 3);
            let proj = dec.projection(&rows[2]).unwrap();
            let kind = dec.evidence_kind(&SelectOptions::default());
            let e = |t: f64| {
                dec.criterion(
                    &proj,
                    StrengthMethod::Evidence,
                    t.exp(),
                    &SelectOptions::default(),
                )
            };
            for t in [-9.0f64, -5.0, -2.0, 1.0] {
                let h = 1e-4;
                let d_fd = (e(t + h) - e(t - h)) / (2.0 * h);
                let dd_fd = (e(t + h) - 2.0 * e(t) + e(t - h)) / (h * h);
                let (d, dd) = dec.derivatives(&proj, kind, t);
                assert!(
                    (d - d_fd).abs() < 1e-6 * (1.0 + d.abs()),
                    "t {t}: {d} vs {d_fd}"
                );
                assert!(
                    (dd - dd_fd).abs() < 1e-3 * (1.0 + dd.abs()),
                    "t {t}: {dd} vs {dd_fd}"
                );
                let (ell, quad) = dec.sums(&proj, t.exp());
                let mp = (dec.m - dec.q) as f64;
                assert!((criterion(kind, mp, ell, quad) - e(t)).abs() < 1e-10 * (1.0 + e(t).abs()));
            }
        }
    }
}
