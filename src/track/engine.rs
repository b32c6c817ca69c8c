//! The per-row estimate: the same model, noise, smoothing and strength rule as
//! [`crate::estimate::estimate`], with everything that depends only on which sensors have a
//! reading computed once per pattern and cached.
//!
//! ## What is cached
//!
//! A *pattern* is the set of sensors used in a row (a bitmask) together with their reading
//! uncertainties (which change from row to row only under a tolerance class). For each
//! pattern and smoothing order the cache holds the [`Decomposition`] of the weighted problem
//! (one SVD, every λ), and, when the strength is fixed (a number, or `--calibrate`), the
//! linear maps at that λ: the coefficients `c = G d`, the profile `P G d` on the scan grid,
//! the pointwise posterior standard deviation of the profile, the leverages, and a fixed set
//! of posterior draws for the exceedance probability. A row then costs O(m²) for the fitted
//! values plus O(n_scan · m) for the profile scan (the projection onto the basis is formed
//! only when the coefficients are needed). When λ is chosen by the rule on every row, the
//! pattern instead keeps the λ-independent parts of the posterior variance of every fine
//! profile point ([`Decomposition::predictive_variance_parts`]), so the band costs O(r) per
//! point instead of O(p·r), and the sensors', scan grid's and fine grid's maps in the singular
//! basis ([`Decomposition::basis_map`]): the row's fitted values and profile are those maps
//! times the weights `x(λ)` (r + q numbers, [`Decomposition::basis_weights_into`]) instead of
//! the coefficients through the p-column maps; the coefficients themselves are formed only
//! for a row with a sensor left out. The evidence search keeps its grid's data-independent
//! parts in a table (`EvidenceSearch`), and the order choice's projection of the row is
//! reused for the row. The cache is bounded
//! ([`PATTERN_CACHE`] entries, least recently used evicted), so memory does not grow with the
//! log.
//!
//! ## The row's numbers, and how they match `estimate`
//!
//! * Point estimate: `c(λ)` from the pattern's decomposition, with λ chosen by the case's rule
//!   on this row's data (or fixed), and for `smoothing = "auto"` the order whose evidence is
//!   highest for this row ([`crate::estimate::choose_order`]'s rule). With no stated σ the
//!   fit uses unit weights and the row's own noise estimate `σ̂² = χ²/(m − tr H)` scales the
//!   covariance, which is what `estimate` does by refitting with `σ = σ̂` (same coefficients,
//!   covariance times σ̂²).
//! * Hottest point: the maximum of the profile on the fine grid of `estimate`
//!   ([`crate::estimate::profile_points`]) refined by a parabola through its neighbours. The
//!   profile is first scanned on every `stride`-th point, then evaluated on the fine grid
//!   within `stride + 1` points of the scan's maximum: for a profile smoother than the scan
//!   spacing (the resolution length is many fine steps) this finds the same point.
//! * Linear band: `û(s) ± z sd(s)`, `sd² = p(s) C pᵀ(s)`, the posterior (Gaussian) band that
//!   `estimate` reports as `linear_lower/linear_upper`. The hottest-temperature interval is
//!   `[max_s L(s), max_s U(s)]` over the scan grid (the same construction as `estimate`'s,
//!   from the linear band instead of the bootstrap band).
//! * Exceedance probability: `P(max_s u(s) > T)` under the Gaussian posterior. Pointwise tail
//!   probabilities understate it (the maximum of a random curve is larger than the curve at
//!   any one point), so it is estimated from [`DEFAULT_DRAWS`] posterior draws of the whole
//!   profile error `e_k = P C^{1/2} ξ_k`, drawn once per pattern from a seeded generator and
//!   reused for every row shifted by that row's estimate: the probability is the share of `k`
//!   with `max_s (û(s) + e_k(s)) > T`. Each scan point keeps its draws sorted, so a row costs
//!   one comparison per point plus the draws that actually pass (see `exceed`). When λ
//!   changes from row to row the draws of the pattern's first λ are rescaled pointwise to the
//!   row's standard deviation (the correlation along the edge changes little with λ;
//!   documented in `docs/track.md`). With λ chosen per row, "first" is in row order and
//!   remembered beyond the cache ([`DRAW_BASES`] patterns), so the draws of a row do not
//!   depend on what the estimator fitted before it.
//! * Calibrated strength: with `--calibrate` (and a stated σ) a row whose weighted
//!   chi-square at the calibrated setting exceeds its [`MISFIT_QUANTILE`] quantile is
//!   refitted with the case's rule. A strength learnt on a quiet stretch is far too smooth
//!   for a hot spot that grows later: its linear band then sits tightly around a peak that is
//!   many kelvin too low. The misfit shows in the chi-square long before the alarm matters.
//! * Sensor diagnostics: for each used sensor the standardised leave-one-out residual at the
//!   row's λ, `z_i = r_i / (σ_i √(1 − H_ii))` (exact for a linear smoother at fixed λ), and the
//!   fault probability of `estimate`'s fault model ([`crate::estimate::fit`]) with this plug-in
//!   predictive distribution, at the fixed λ, or in per-row mode at a reference λ that follows the
//!   rows' choices slowly ([`REFERENCE_ROWS`]): a λ chosen with a faulty reading included bends
//!   toward it and hides it; for a sensor left out, the same from the prediction of the fit without
//!   it, `σ_i² + a_i C a_iᵀ`.

use crate::case::{Case, Smoothing};
use crate::error::{Error, Result};
use crate::estimate::fit::{fault_posterior, select_options};
use crate::estimate::{AUTO_ORDERS, penalty, profile_positions, refined_max, stack};
use crate::forward::LinearMap;
use crate::geometry::{Edge, Point};
use crate::inverse::{
    Decomposition, EvidenceSearch, GridPick, Problem, Projection, Selection, Strength,
    StrengthMethod,
};
use crate::noise::{NoiseSpec, SigmaSource};
use crate::simd::{gemv, lane_sums4};
use nalgebra::{DMatrix, DVector};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use rustc_hash::FxHashMap;

/// Draw bases kept ([`RowEstimator`] `draw_bases`): the patterns' strengths and sds, a
/// kilobyte or so each.
pub const DRAW_BASES: usize = 4096;

/// Patterns kept in the cache (least recently used evicted).
pub const PATTERN_CACHE: usize = 64;

/// Posterior draws per pattern for the exceedance probability.
pub const DEFAULT_DRAWS: usize = 2000;

/// Every `SCAN_STRIDE`-th fine profile point is scanned for the maximum.
pub const SCAN_STRIDE: usize = 8;

/// How the strength and order are set for a row.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum RowStrength {
    /// The case's rule on each row (and, for `auto` smoothing, the order by evidence).
    PerRow(Strength),
    /// A fixed order and λ (in unit-weight terms when σ is not stated).
    Fixed {
        /// Penalty order.
        order: usize,
        /// λ.
        lambda: f64,
        /// With a stated σ: the rule to re-choose order and strength on a row that the fixed
        /// setting does not fit (chi-square above its [`MISFIT_QUANTILE`] quantile), as
        /// `--calibrate` does; `None` keeps λ fixed on every row.
        refit: Option<Strength>,
    },
}

/// Rows over which the reference strength of the sensor diagnostics moves (per-row mode):
/// each row moves log λ_ref by 1/REFERENCE_ROWS of its distance to the row's log λ.
pub const REFERENCE_ROWS: f64 = 500.0;

/// A row whose weighted chi-square at the calibrated strength exceeds this quantile of the
/// chi-square distribution with `m − tr H` degrees of freedom is refitted with the rule.
pub const MISFIT_QUANTILE: f64 = 0.999;

/// The per-row numbers.
#[derive(Debug, Clone, Default)]
pub struct RowFit {
    /// Sensors used (indices into `case.sensors`).
    pub used: Vec<usize>,
    /// Penalty order used.
    pub order: usize,
    /// λ used (unit-weight terms when σ is not stated).
    pub lambda: f64,
    /// σ̂ when σ is estimated from the row.
    pub sigma_scale: Option<f64>,
    /// The hottest point's edge.
    pub edge: Option<Edge>,
    /// Its position along the edge, metres.
    pub position: f64,
    /// Position interval (hull of the scan points where `U(s) ≥ max L`), metres.
    pub position_interval: [f64; 2],
    /// Its temperature, kelvin.
    pub temperature: f64,
    /// Interval for the hottest temperature from the linear band, kelvin.
    pub temperature_interval: [f64; 2],
    /// Probability that the hidden edge exceeds the limit anywhere.
    pub exceedance: Option<f64>,
    /// The row was refitted with the rule because the calibrated setting did not fit it.
    pub refitted: bool,
    /// Per sensor (indexed like `case.sensors`): standardised residual against the
    /// prediction from the other sensors, and the fault probability; `None` without a
    /// reading.
    pub diagnostics: Vec<Option<(f64, f64)>>,
}

/// No hottest point and no alarm from a non-finite number: such a row is skipped with this
/// message.
fn finite_row(out: &RowFit) -> Result<()> {
    let finite = out.temperature.is_finite()
        && out.temperature_interval.iter().all(|v| v.is_finite())
        && out.position.is_finite()
        && out.exceedance.is_none_or(f64::is_finite);
    if finite {
        Ok(())
    } else {
        Err(Error::Internal(
            "the row's estimate is not a finite number (the readings or their uncertainties \
             are beyond what the method computes in double precision); no hottest point or \
             alarm from this row"
                .into(),
        ))
    }
}

/// A row fitted ahead ([`RowEstimator::fit_row_ahead`]): its numbers without the exceedance
/// and the sensor diagnostics, and what [`RowEstimator::finish_row`] needs to form them.
#[derive(Debug, Clone, Default)]
pub struct AheadFit {
    /// The row's numbers (diagnostics and exceedance empty).
    pub fit: RowFit,
    proj: Option<Projection>,
    /// The profile and its sd on the scan grid, and the alarm limit, for the exceedance.
    scan_est: DVector<f64>,
    scan_sd: Vec<f64>,
    limit: Option<f64>,
}

/// Linear pieces at a fixed λ.
struct FixedParts {
    lambda: f64,
    /// Scan-grid profile per unit data: n_scan × m.
    scan_pg: DMatrix<f64>,
    /// Fine profile per unit data (window evaluation): n_fine_total × m.
    fine_pg: DMatrix<f64>,
    /// Posterior sd of the profile on the scan grid (unit σ scale).
    scan_sd: Vec<f64>,
    /// Posterior sd of the profile on the fine grid (unit σ scale).
    fine_sd: Vec<f64>,
    /// Leverages.
    leverage: Vec<f64>,
    /// The smoother S (m × m): fitted values S d.
    smoother: DMatrix<f64>,
    /// Chi-square above which the row is refitted.
    chi2_limit: f64,
}

/// Posterior draws of the profile error on the scan grid at a reference λ.
struct Draws {
    /// Per scan point, the draws' values there sorted descending: `values[j * n + r]`.
    values: Vec<f64>,
    /// The draw each of `values` belongs to.
    index: Vec<u32>,
    /// Number of draws.
    n: usize,
    /// Per scan point, its largest and smallest draw (`values[j * n]` and
    /// `values[j * n + n - 1]` kept side by side, so the points that no draw can pass cost no
    /// cache misses).
    top: Vec<f64>,
    bottom: Vec<f64>,
    /// The posterior sd on the scan grid the draws were made with (unit σ scale).
    sd: Vec<f64>,
    /// At the pattern's fixed λ (the draws are made again when it changes), the ratios of
    /// the rows' scan sds to `sd` for the σ scale (its bits) they were last formed for: the
    /// same for every row with that scale.
    fixed_ratios: Option<(u64, Vec<f64>)>,
}

/// The λ-independent parts of the posterior variance of every fine profile point
/// ([`Decomposition::predictive_variance_parts`]), so that a row whose λ is chosen by the
/// rule gets its band in O(r) per point instead of O(p·r).
struct VarianceParts {
    /// Column `j`: `Vᵀ w_j` of fine point `j`, squared entry by entry (r × n_fine_total).
    proj_sq: DMatrix<f64>,
    /// `‖V⊥ᵀ w_j‖²` per fine point.
    perp: Vec<f64>,
    /// `‖a_N R₁⁻¹‖²` per fine point.
    null: Vec<f64>,
}

impl VarianceParts {
    fn new(dec: &Decomposition, prof: &DMatrix<f64>) -> Result<Self> {
        let n = prof.nrows();
        let r = dec.singular_values().len();
        let mut proj_sq = DMatrix::zeros(r, n);
        let (mut perp, mut null) = (Vec::with_capacity(n), Vec::with_capacity(n));
        for j in 0..n {
            let (pv, pe, nu) = dec.predictive_variance_parts(&prof.row(j).transpose())?;
            proj_sq.set_column(j, &pv.map(|v| v * v));
            perp.push(pe);
            null.push(nu);
        }
        Ok(VarianceParts {
            proj_sq,
            perp,
            null,
        })
    }

    /// The reciprocals `1/(g_k² + λ)` and `1/λ` that [`Self::sd_with`] needs at λ (one
    /// division per singular value per row, instead of one per singular value per point).
    fn reciprocals(dec: &Decomposition, lambda: f64, inv: &mut Vec<f64>) -> f64 {
        inv.clear();
        inv.extend(dec.singular_values().iter().map(|g| 1.0 / (g * g + lambda)));
        1.0 / lambda
    }

    /// The posterior standard deviation of fine point `j` at λ (unit σ scale), from the
    /// reciprocals of [`Self::reciprocals`]:
    /// `Σ_k (Vᵀw_j)_k² · 1/(g_k² + λ) + ‖V⊥ᵀ w_j‖² · 1/λ + ‖a_N R₁⁻¹‖²`, a multiplication where
    /// [`Decomposition::predictive_variance_at`] divides (the two differ by rounding only,
    /// a few units in the last place; the unit test checks 1e-14 relative).
    fn sd_with(&self, j: usize, inv: &[f64], inv_lambda: f64) -> f64 {
        let r = self.proj_sq.nrows();
        let sq = &self.proj_sq.as_slice()[j * r..(j + 1) * r];
        // four sums side by side (so that the additions overlap), then added pairwise
        let mut acc = [0.0f64; 4];
        let (sq4, inv4) = (sq.chunks_exact(4), inv.chunks_exact(4));
        let (sq_rest, inv_rest) = (sq4.remainder(), inv4.remainder());
        for (a, b) in sq4.zip(inv4) {
            for l in 0..4 {
                acc[l] += a[l] * b[l];
            }
        }
        for (a, b) in sq_rest.iter().zip(inv_rest) {
            acc[0] += a * b;
        }
        let seen = (acc[0] + acc[1]) + (acc[2] + acc[3]);
        (seen + self.perp[j] * inv_lambda + self.null[j])
            .max(0.0)
            .sqrt()
    }

    /// [`Self::sd_with`] of the fine points `points`, times `scale`, into `out`: the same
    /// numbers, four points at a time so that their sums overlap ([`lane_sums4`], four-lane
    /// arithmetic when the processor has AVX2).
    fn sds_into(
        &self,
        points: &[usize],
        inv: &[f64],
        inv_lambda: f64,
        scale: f64,
        out: &mut [f64],
    ) {
        let r = self.proj_sq.nrows();
        let all = self.proj_sq.as_slice();
        let groups = points.chunks_exact(4);
        let rest = groups.remainder();
        let (out4, out_rest) = out.split_at_mut(points.len() - rest.len());
        for (group, o) in groups.zip(out4.chunks_exact_mut(4)) {
            let sq: [&[f64]; 4] = std::array::from_fn(|g| &all[group[g] * r..(group[g] + 1) * r]);
            let acc = lane_sums4(sq, inv);
            for g in 0..4 {
                let a = &acc[g];
                let seen = (a[0] + a[1]) + (a[2] + a[3]);
                let j = group[g];
                o[g] = (seen + self.perp[j] * inv_lambda + self.null[j])
                    .max(0.0)
                    .sqrt()
                    * scale;
            }
        }
        for (&j, o) in rest.iter().zip(out_rest) {
            *o = self.sd_with(j, inv, inv_lambda) * scale;
        }
    }
}

struct Pattern {
    rows: Vec<usize>,
    sigma: DVector<f64>,
    dec: Decomposition,
    proj: Projection,
    fixed: Option<FixedParts>,
    draws: Option<Draws>,
    /// Built the first time a row of this pattern has its λ chosen by the rule.
    variance: Option<VarianceParts>,
    /// The fitted values', scan grid's and fine grid's maps in the singular basis, built
    /// with `variance` (not on the check path).
    basis: Option<BasisMaps>,
    /// Where the evidence rule's search ended on the pattern's previous row.
    search: EvidenceSearch,
    last_use: u64,
    /// The row (`RowEstimator::row_serial`) whose data `proj` holds, if `auto` smoothing's
    /// order choice projected them.
    projected_row: u64,
}

impl Pattern {
    /// The rule's choice for the data projected into `self.proj`: the evidence rule by the
    /// search that does not evaluate the whole grid ([`Decomposition::select_evidence`],
    /// the same choice), any other rule by [`Decomposition::select_for`].
    /// With `reference`, every rule by [`Decomposition::select_for`] (the check path, see
    /// [`RowEstimator::use_reference_path`]).
    fn select(&mut self, strength: Strength, reference: bool) -> Result<Selection> {
        let opts = select_options(false);
        match strength {
            Strength::Rule(StrengthMethod::Evidence) if !reference => {
                self.dec
                    .select_evidence(&self.proj, &opts, &mut self.search)
            }
            _ => self.dec.select_for(&self.proj, strength, &opts),
        }
    }
}

/// The maps of a pattern in the singular basis ([`Decomposition::basis_map`]): each times
/// the row's weights `x(λ)` ([`Decomposition::basis_weights_into`]) gives the same numbers
/// as the map times the coefficients `c(λ)` (to rounding), with r + q columns instead of p.
struct BasisMaps {
    /// The sensors' map (m × (r + q)): the fitted values.
    fitted: DMatrix<f64>,
    /// The scan grid's profile map (n_scan × (r + q)).
    scan: DMatrix<f64>,
    /// The fine grid's profile map (n_fine_total × (r + q)): the window around the maximum.
    fine: DMatrix<f64>,
}

/// How a row's profile is formed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum RowMode {
    /// At a fixed λ: the pattern's cached linear maps ([`FixedParts`]) act on the data.
    Cached,
    /// At the λ the rule chose for this row: through the coefficients and the profile maps.
    Chosen,
}

/// Whether a row is fitted in row order ([`RowEstimator::fit_row`]) or ahead of it
/// ([`RowEstimator::fit_row_ahead`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Pass {
    InOrder,
    Ahead,
}

/// One row on its way through [`RowEstimator::fit_row`]'s steps.
struct RowStep<'r> {
    readings: &'r [Option<f64>],
    used: &'r [usize],
    strength: RowStrength,
    order: usize,
    mode: RowMode,
    /// λ of the row (set by the first step).
    lambda: f64,
    /// Whether the pattern's projection holds this row's data.
    projected: bool,
    /// Whether the estimator's coefficients are this row's at `lambda`.
    coefficients: bool,
    /// Whether the estimator's basis weights `x` are this row's at `lambda` (the profile is
    /// then formed through the pattern's [`BasisMaps`]).
    basis: bool,
    /// σ̂ of the row, 1 when σ is stated.
    s: f64,
}

impl RowStep<'_> {
    /// Project the row's data `d` onto the pattern's basis, once.
    fn project(&mut self, pat: &mut Pattern, d: &DVector<f64>) -> Result<()> {
        if !self.projected {
            pat.dec.project_into(d, &mut pat.proj)?;
            self.projected = true;
        }
        Ok(())
    }
}

/// The cached maps of a row in [`RowMode::Cached`].
fn cached(pat: &Pattern, mode: RowMode) -> Option<&FixedParts> {
    pat.fixed.as_ref().filter(|_| mode == RowMode::Cached)
}

/// The hottest point of a row (kelvin, metres; `edge` indexes the unknown edges).
struct RowHottest {
    edge: usize,
    position: f64,
    position_interval: [f64; 2],
    temperature: f64,
    /// `max L` and `max U` of the linear band.
    max_lower: f64,
    max_upper: f64,
}

/// The per-row estimator with its pattern cache.
pub struct RowEstimator {
    points: Vec<Point>,
    sensor_map: LinearMap,
    edge_positions: Vec<(Edge, Vec<f64>)>,
    /// Profile maps of the unknown edges, and the bank of hot features built on them (the
    /// physics check before a sensor is left out, [`crate::estimate::explain`]).
    edge_maps: Vec<LinearMap>,
    bank: crate::estimate::explain::FeatureBank,
    n_fine: usize,
    prof_matrix: DMatrix<f64>,
    prof_offset: Vec<f64>,
    /// Fine index of each scan point.
    scan_index: Vec<usize>,
    /// The edge of each scan point (`scan_index[j] / n_fine`).
    scan_edge: Vec<usize>,
    scan_matrix: DMatrix<f64>,
    scan_offset: DVector<f64>,
    penalties: [DVector<f64>; 3],
    q_null: usize,
    stated: bool,
    tolerance: bool,
    base_sigma: Vec<f64>,
    case: Case,
    z: f64,
    draws: usize,
    seed: u64,
    stride: usize,
    /// Boxed: a pattern is taken out and put back on every row, and moving the box moves
    /// a pointer, not the pattern's kilobytes.
    cache: FxHashMap<Vec<u64>, Box<Pattern>>,
    clock: u64,
    /// Per order, the running average of log λ (per-row mode) at which residuals are judged.
    ref_log_lambda: [Option<f64>; 3],
    /// Per order, the evidence rule's λ for the current row, when `auto` smoothing chose the
    /// order by it (so that the row's strength is not searched for twice).
    row_evidence: [Option<f64>; 3],
    /// Counts the rows through [`Self::order_for`] (from 1), so that a pattern knows whether
    /// its projection holds the current row's data (`Pattern::projected_row`).
    row_serial: u64,
    /// `1/(g_k² + λ)` of the row's λ and `1/λ` ([`VarianceParts::reciprocals`]).
    inv_den: Vec<f64>,
    inv_lambda: f64,
    /// Scratch of [`Decomposition::coefficients_fast_into`].
    coef_work: Vec<f64>,
    /// The check path of [`Self::use_reference_path`].
    reference: bool,
    // scratch
    /// The row's basis weights at its λ and at the diagnostics' reference λ.
    x: DVector<f64>,
    x_ref: DVector<f64>,
    c_ref: DVector<f64>,
    fitted_ref: DVector<f64>,
    lev: Vec<f64>,
    bits: Vec<u64>,
    d: DVector<f64>,
    c: DVector<f64>,
    fitted: DVector<f64>,
    scan_est: DVector<f64>,
    scan_sd: Vec<f64>,
    /// Per pattern (key), the strength and unit-σ scan sd its exceedance draws are made at
    /// on rows with a chosen strength: those of the first such row, in row order, that needed
    /// them ([`DRAW_BASES`] kept, the oldest dropped first). A pattern that leaves the cache
    /// and comes back gets the same draws, so the exceedance of a row does not depend on what
    /// else the estimator fitted in between (rows fitted ahead on other threads).
    draw_bases: FxHashMap<Vec<u64>, (f64, Vec<f64>)>,
    draw_base_order: std::collections::VecDeque<Vec<u64>>,
    key: Vec<u64>,
    /// `auto` smoothing: each order's pattern key for the row in hand ([`Self::order_for`]).
    order_keys: [Vec<u64>; 3],
    ratio: Vec<f64>,
    /// Per sensor: used in this row (the diagnostics of the sensors left out).
    in_use: Vec<bool>,
    /// Fine profile values around the scan's maximum, and around the band's maxima.
    window: Vec<f64>,
    band_window: Vec<f64>,
    /// The band's window: its fine points and their posterior sds.
    band_points: Vec<usize>,
    band_sds: Vec<f64>,
    /// Per used sensor: standardised leave-one-out residual, its sd, and the Gaussian factor.
    loo_x: Vec<f64>,
    loo_sd: Vec<f64>,
    loo_good: Vec<f64>,
}

impl std::fmt::Debug for RowEstimator {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("RowEstimator")
            .field("patterns", &self.cache.len())
            .finish()
    }
}

impl RowEstimator {
    /// Build the estimator for a case. `confidence` sets the band's z; `draws` and `seed` the
    /// exceedance draws; `stride` the scan (1 scans every fine point).
    ///
    /// # Errors
    /// As [`crate::estimate::case_model`], and an invalid sigma setting
    /// ([`crate::estimate::resolve_sigmas`]).
    pub fn new(case: &Case, draws: usize, seed: u64, stride: usize) -> Result<Self> {
        let model = crate::estimate::case_model(case)?;
        let points: Vec<Point> = case.sensors.iter().map(|s| s.position).collect();
        let sensor_map = model.sensor_map(&points);
        let edge_positions = profile_positions(case);
        let n_fine = edge_positions.first().map_or(0, |e| e.1.len());
        let maps: Vec<LinearMap> = edge_positions
            .iter()
            .map(|(e, pos)| model.edge_profile_map(*e, pos))
            .collect();
        let prof_matrix = stack(maps.iter().map(|m| &m.matrix));
        let prof_offset: Vec<f64> = maps.iter().flat_map(|m| m.offset.iter().copied()).collect();
        let bank =
            crate::estimate::explain::FeatureBank::new(&edge_positions, &maps, case.fit.terms)?;
        let stride = stride.max(1);
        let mut scan_index = Vec::new();
        for k in 0..edge_positions.len() {
            let mut j = 0;
            while j < n_fine {
                scan_index.push(k * n_fine + j);
                j += stride;
            }
            if (n_fine - 1) % stride != 0 {
                scan_index.push(k * n_fine + n_fine - 1);
            }
        }
        let scan_matrix = prof_matrix.select_rows(&scan_index);
        let scan_offset =
            DVector::from_iterator(scan_index.len(), scan_index.iter().map(|&j| prof_offset[j]));
        let penalties = [
            penalty::penalty_weights(&model, 0),
            penalty::penalty_weights(&model, 1),
            penalty::penalty_weights(&model, 2),
        ];
        let q_null = crate::estimate::unpenalised_count(&model);
        let all: Vec<usize> = (0..case.sensors.len()).collect();
        let dummy: Vec<Option<f64>> = vec![Some(293.15); case.sensors.len()];
        let (base_sigma, source) = crate::estimate::resolve_sigmas(case, &all, &dummy)?;
        let tolerance = matches!(case.noise, NoiseSpec::Tolerance { .. })
            && case.sensors.iter().any(|s| s.sigma_k.is_none());
        let z = statrs::distribution::ContinuousCDF::inverse_cdf(
            &statrs::distribution::Normal::standard(),
            0.5 + case.uncertainty.confidence / 2.0,
        );
        let n_scan = scan_index.len();
        Ok(RowEstimator {
            points,
            sensor_map,
            edge_positions,
            edge_maps: maps,
            bank,
            n_fine,
            prof_matrix,
            prof_offset,
            scan_edge: scan_index.iter().map(|&f| f / n_fine.max(1)).collect(),
            scan_index,
            scan_matrix,
            scan_offset,
            penalties,
            q_null,
            stated: source != SigmaSource::Estimated,
            tolerance,
            base_sigma,
            case: case.clone(),
            z,
            draws: draws.max(1),
            seed,
            stride,
            cache: FxHashMap::default(),
            clock: 0,
            ref_log_lambda: [None; 3],
            row_evidence: [None; 3],
            row_serial: 0,
            inv_den: Vec::new(),
            inv_lambda: 0.0,
            coef_work: Vec::new(),
            reference: false,
            x: DVector::zeros(0),
            x_ref: DVector::zeros(0),
            c_ref: DVector::zeros(0),
            lev: Vec::new(),
            bits: Vec::new(),
            fitted_ref: DVector::zeros(0),
            d: DVector::zeros(0),
            c: DVector::zeros(model.parameter_count()),
            fitted: DVector::zeros(0),
            scan_est: DVector::zeros(n_scan),
            scan_sd: vec![0.0; n_scan],
            draw_bases: FxHashMap::default(),
            draw_base_order: std::collections::VecDeque::new(),
            key: Vec::new(),
            order_keys: [Vec::new(), Vec::new(), Vec::new()],
            ratio: vec![0.0; n_scan],
            in_use: Vec::new(),
            window: Vec::new(),
            band_window: Vec::new(),
            band_points: Vec::new(),
            band_sds: Vec::new(),
            loo_x: Vec::new(),
            loo_sd: Vec::new(),
            loo_good: Vec::new(),
        })
    }

    /// Switch to the check path (or back): in per-row mode every strength is chosen by
    /// [`Decomposition::select_for`]'s search over the whole grid (once per order for `auto`
    /// smoothing and once more for the row, nothing reused), the coefficients by
    /// [`Decomposition::coefficients_into`] and the leverages from the explicit influence
    /// matrix ([`Decomposition::influence_matrix`], O(m²r)): the per-row path as it was before
    /// it was made fast, so that tests can compare the two on the same rows
    /// (`tests/integration/track_per_row_speed.rs`). About thirty times slower.
    pub fn use_reference_path(&mut self, on: bool) {
        self.reference = on;
    }

    /// The fewest readings a row needs.
    pub fn min_readings(&self) -> usize {
        crate::estimate::min_readings(self.q_null)
    }

    /// Whether σ is stated (else estimated per row).
    pub fn sigma_stated(&self) -> bool {
        self.stated
    }

    /// The positions of the fine profile grid on each unknown edge.
    pub fn edge_positions(&self) -> &[(Edge, Vec<f64>)] {
        &self.edge_positions
    }

    /// Patterns currently cached.
    pub fn cached_patterns(&self) -> usize {
        self.cache.len()
    }

    /// The smoothing order and λ the case's rule chooses for one row (no band, no draws):
    /// what `--calibrate` collects.
    ///
    /// # Errors
    /// As [`Self::fit_row`].
    pub fn choose(
        &mut self,
        readings: &[Option<f64>],
        used: &[usize],
        strength: Strength,
    ) -> Result<(usize, f64)> {
        let order = self.order_for(readings, used)?;
        self.pattern_key(readings, used, order)?;
        let pat = self
            .cache
            .get_mut(self.key.as_slice())
            .ok_or_else(internal)?;
        if let (Strength::Rule(StrengthMethod::Evidence), Some(lambda), false) =
            (strength, self.row_evidence[order], self.reference)
        {
            return Ok((order, lambda));
        }
        fill_d(&mut self.d, used, readings, &self.sensor_map.offset);
        pat.dec.project_into(&self.d, &mut pat.proj)?;
        Ok((order, pat.select(strength, self.reference)?.lambda))
    }

    fn order_for(&mut self, readings: &[Option<f64>], used: &[usize]) -> Result<usize> {
        self.row_evidence = [None; 3];
        self.row_serial += 1;
        if let Some(o) = self.case.fit.smoothing.order() {
            return Ok(o);
        }
        // The order with the lower evidence criterion, ties to the first of AUTO_ORDERS.
        // Both orders' best grid points first; the order whose grid value is lower is
        // refined first, and the other's refinement is left out when its bracket is shown to
        // stay above that criterion ([`Decomposition::evidence_refine`]): it cannot win, and
        // its λ is not needed. The order of the work does not change the choice.
        let rule = Strength::Rule(StrengthMethod::Evidence);
        let opts = select_options(false);
        let mut picks: [Option<GridPick>; 3] = [None; 3];
        for order in AUTO_ORDERS {
            self.pattern_key(readings, used, order)?;
            self.order_keys[order].clone_from(&self.key);
            let pat = self
                .cache
                .get_mut(self.key.as_slice())
                .ok_or_else(internal)?;
            fill_d(&mut self.d, used, readings, &self.sensor_map.offset);
            pat.dec.project_into(&self.d, &mut pat.proj)?;
            pat.projected_row = self.row_serial;
            if !self.reference {
                picks[order] = Some(pat.dec.evidence_grid(&pat.proj, &opts, &mut pat.search));
            }
        }
        let grid_value = |o: usize| picks[o].map_or(f64::INFINITY, |p| p.value);
        let mut orders = AUTO_ORDERS;
        if grid_value(orders[1]) < grid_value(orders[0]) {
            orders.swap(0, 1);
        }
        let rank = |o: usize| AUTO_ORDERS.iter().position(|&x| x == o);
        let mut best: Option<(f64, usize)> = None;
        for order in orders {
            // the pattern of this row and order (cached by the loop above: two patterns
            // touched since cannot have evicted it), still holding the row's projection
            let pat = self
                .cache
                .get_mut(self.order_keys[order].as_slice())
                .ok_or_else(internal)?;
            let cutoff = best.map_or(f64::INFINITY, |(b, _)| b);
            let sel = match &picks[order] {
                Some(pick) => pat
                    .dec
                    .evidence_refine(&pat.proj, &opts, &pat.search, pick, cutoff),
                None => pat.dec.select_for(&pat.proj, rule, &opts).map(Some),
            };
            if let Ok(Some(sel)) = sel {
                self.row_evidence[order] = Some(sel.lambda);
                let e = sel.criterion;
                let better = best.is_none_or(|(b, o)| e < b || (e <= b && rank(order) < rank(o)));
                if e.is_finite() && better {
                    best = Some((e, order));
                }
            }
        }
        Ok(best.map_or(AUTO_ORDERS[0], |(_, o)| o))
    }

    /// Make sure the pattern (used sensors, their sigmas, order) is cached; returns its key.
    fn pattern_key(
        &mut self,
        readings: &[Option<f64>],
        used: &[usize],
        order: usize,
    ) -> Result<()> {
        // key: the order, the bitmask of used sensors, and (tolerance classes only) the sigmas
        self.key.clear();
        self.key.push(order as u64);
        self.key.resize(1 + self.points.len().div_ceil(64), 0);
        // the bits of one word gathered in a register, stored when the word changes (an OR
        // into memory per sensor waited on the store before it)
        let mut word: Option<(usize, u64)> = None;
        for &i in used {
            let w = 1 + i / 64;
            match &mut word {
                Some((at, bits)) if *at == w => *bits |= 1 << (i % 64),
                _ => {
                    if let Some((at, bits)) = word {
                        self.key[at] |= bits;
                    }
                    word = Some((w, 1 << (i % 64)));
                }
            }
        }
        if let Some((at, bits)) = word {
            self.key[at] |= bits;
        }
        let tol_sigma: Option<Vec<f64>> = if self.tolerance {
            let (s, _) = crate::estimate::resolve_sigmas(&self.case, used, readings)?;
            let v: Vec<f64> = used.iter().map(|&i| s[i]).collect();
            self.key.extend(v.iter().map(|x| x.to_bits()));
            Some(v)
        } else {
            None
        };
        self.clock += 1;
        if let Some(p) = self.cache.get_mut(self.key.as_slice()) {
            p.last_use = self.clock;
            return Ok(());
        }
        let sigma = tol_sigma.unwrap_or_else(|| used.iter().map(|&i| self.base_sigma[i]).collect());
        if self.cache.len() >= PATTERN_CACHE {
            if let Some(old) = self
                .cache
                .iter()
                .min_by_key(|(_, p)| p.last_use)
                .map(|(k, _)| k.clone())
            {
                self.cache.remove(&old);
            }
        }
        let a = self.sensor_map.matrix.select_rows(used);
        let sigma = DVector::from_vec(sigma);
        let problem = Problem::new(
            a,
            DVector::zeros(used.len()),
            sigma.clone(),
            self.penalties[order].clone(),
            self.stated,
        )?;
        let dec = Decomposition::new(&problem)?;
        let proj = dec.empty_projection();
        self.cache.insert(
            self.key.clone(),
            Box::new(Pattern {
                rows: used.to_vec(),
                sigma,
                dec,
                proj,
                fixed: None,
                draws: None,
                variance: None,
                basis: None,
                search: EvidenceSearch::default(),
                last_use: self.clock,
                projected_row: 0,
            }),
        );
        Ok(())
    }

    /// Estimate one row. `readings` in kelvin indexed like `case.sensors`; `used` the sensors
    /// to fit (each must have a reading; at least [`Self::min_readings`]).
    ///
    /// The row runs through named steps on its pattern (`RowStep`): the strength, the
    /// fitted values and σ̂, the misfit check of a calibrated strength, the profile on the scan
    /// grid, the hottest point and its intervals, the exceedance probability and the sensor
    /// diagnostics. A calibrated row that misfits is then estimated again with the rule.
    ///
    /// # Errors
    /// [`Error::Invalid`] when the readings cannot determine the model or the strength rule
    /// cannot be applied; [`Error::Internal`] on a numerical breakdown.
    pub fn fit_row(
        &mut self,
        readings: &[Option<f64>],
        used: &[usize],
        strength: RowStrength,
        limit: Option<f64>,
        out: &mut RowFit,
    ) -> Result<()> {
        self.fit_row_steps(readings, used, strength, limit, out, Pass::InOrder)
    }

    /// [`Self::fit_row`] without the steps that depend on the rows before it: the exceedance
    /// probability (its draws are made at the pattern's first strength in row order, and
    /// without a stated σ at that row's scale) and, with the strength chosen on the row, the
    /// sensor diagnostics (judged at a running reference strength). Every other number of
    /// `out.fit` is the one [`Self::fit_row`] gives, whatever rows this estimator saw before;
    /// the rest is left empty for [`Self::finish_row`], which must then be called on the rows
    /// in their order (on one estimator of the same case, any). This lets rows be fitted
    /// ahead, on other threads (`Tracker::push_batch`). `out` may be reused from an earlier
    /// row.
    ///
    /// # Errors
    /// As [`Self::fit_row`]; and at a fixed strength with a rule to re-choose it, an error
    /// for a row the fixed strength misfits: its refit depends on the rows before it, so it
    /// must be fitted in order ([`Self::fit_row`]).
    pub fn fit_row_ahead(
        &mut self,
        readings: &[Option<f64>],
        used: &[usize],
        strength: RowStrength,
        limit: Option<f64>,
        out: &mut AheadFit,
    ) -> Result<()> {
        out.fit.diagnostics.clear();
        // no limit: the exceedance is left to `finish_row`
        self.fit_row_steps(readings, used, strength, None, &mut out.fit, Pass::Ahead)?;
        out.limit = limit;
        // the profile and its sd move out by an exchange of buffers: every row writes the
        // estimator's own afresh before it reads them
        if out.scan_est.len() != self.scan_est.len() {
            out.scan_est = DVector::zeros(self.scan_est.len());
        }
        std::mem::swap(&mut out.scan_est, &mut self.scan_est);
        if out.scan_sd.len() != self.scan_sd.len() {
            out.scan_sd = vec![0.0; self.scan_sd.len()];
        }
        std::mem::swap(&mut out.scan_sd, &mut self.scan_sd);
        if !matches!(strength, RowStrength::PerRow(_)) {
            // at a fixed λ the cached maps act on the data: no projection was formed
            return Ok(());
        }
        // the row's projection, formed by the strength search and the fitted values
        let pat = self.cache.get(self.key.as_slice()).ok_or_else(internal)?;
        match &mut out.proj {
            Some(p) => p.copy_from(&pat.proj),
            None => out.proj = Some(pat.proj.clone()),
        }
        Ok(())
    }

    /// The rest of a row fitted by [`Self::fit_row_ahead`] (with the same `readings`, `used`
    /// and strength; `out` holds `ahead.fit`'s numbers): its exceedance probability for the
    /// limit given there and, with the strength chosen on the row, the sensor diagnostics at
    /// the reference strength, which moves with every row, both exactly as [`Self::fit_row`]
    /// forms them. The projection and the profile made ahead move in by an exchange of
    /// buffers: `ahead` is left with spare buffers for [`Self::fit_row_ahead`] to fill again.
    ///
    /// # Errors
    /// As [`Self::fit_row`].
    pub fn finish_row(
        &mut self,
        readings: &[Option<f64>],
        used: &[usize],
        strength: RowStrength,
        ahead: &mut AheadFit,
        out: &mut RowFit,
    ) -> Result<()> {
        let (key, mut pat) = self.take_pattern(readings, used, out.order)?;
        let mut step = RowStep {
            readings,
            used,
            strength,
            order: out.order,
            mode: match strength {
                RowStrength::Fixed { .. } => RowMode::Cached,
                RowStrength::PerRow(_) => RowMode::Chosen,
            },
            lambda: out.lambda,
            projected: false,
            coefficients: false,
            basis: false,
            s: out.sigma_scale.unwrap_or(1.0),
        };
        fill_d(&mut self.d, used, readings, &self.sensor_map.offset);
        let result = match strength {
            RowStrength::PerRow(_) => {
                // the projection made ahead (the same decomposition: the same numbers and
                // sizes)
                if let Some(p) = ahead.proj.as_mut() {
                    std::mem::swap(&mut pat.proj, p);
                    step.projected = true;
                }
                self.finish_steps(&mut pat, &mut step, ahead, out)
            }
            // the pattern's maps at the fixed λ as the first step makes them (so that its
            // draws are made, and dropped, where the rows in order would make them), then
            // the exceedance
            RowStrength::Fixed { .. } => self
                .choose_lambda(&mut pat, &mut step)
                .and_then(|()| self.finish_exceedance(&mut pat, &mut step, ahead, out)),
        };
        self.cache.insert(key, pat);
        result.and_then(|()| finite_row(out))
    }

    /// The steps of [`Self::finish_row`] on the row's pattern: the exceedance (step 7) from
    /// the profile made ahead, then the diagnostics (step 8) with what the steps before them
    /// would have left.
    fn finish_steps(
        &mut self,
        pat: &mut Pattern,
        step: &mut RowStep<'_>,
        ahead: &mut AheadFit,
        out: &mut RowFit,
    ) -> Result<()> {
        self.finish_exceedance(pat, step, ahead, out)?;
        // The fitted values at the row's λ (the second step) when the diagnostics judge at
        // that λ (the first row of an order, or a reference strength equal to it), else only
        // the projection and the pattern's maps, which they use at the reference strength.
        #[allow(clippy::float_cmp)] // the same test as the diagnostics make
        let at_row_lambda = self.ref_log_lambda[out.order].is_none_or(|v| v.exp() == out.lambda);
        if at_row_lambda {
            self.fitted_values(pat, step)?;
        } else {
            step.project(pat, &self.d)?;
            self.pattern_maps(pat)?;
            step.basis = true;
        }
        let mut leverage = std::mem::take(&mut self.lev);
        let result = self.diagnostics(pat, step, &mut leverage, out);
        self.lev = leverage;
        result
    }

    /// Step 7 of a row fitted ahead: the exceedance probability for the limit given there,
    /// from the profile made ahead (moved in by an exchange of buffers).
    fn finish_exceedance(
        &mut self,
        pat: &mut Pattern,
        step: &mut RowStep<'_>,
        ahead: &mut AheadFit,
        out: &mut RowFit,
    ) -> Result<()> {
        out.exceedance = match ahead.limit {
            Some(t)
                if ahead.scan_est.len() == self.scan_est.len()
                    && ahead.scan_sd.len() == self.scan_sd.len() =>
            {
                std::mem::swap(&mut self.scan_est, &mut ahead.scan_est);
                std::mem::swap(&mut self.scan_sd, &mut ahead.scan_sd);
                Some(self.exceedance(pat, step, t)?)
            }
            Some(_) => return Err(internal()),
            None => None,
        };
        Ok(())
    }

    /// The row's pattern (made if new), out of the cache: so that the steps can borrow it
    /// beside the estimator's buffers. The caller puts it back whatever the row's outcome.
    fn take_pattern(
        &mut self,
        readings: &[Option<f64>],
        used: &[usize],
        order: usize,
    ) -> Result<(Vec<u64>, Box<Pattern>)> {
        self.pattern_key(readings, used, order)?;
        self.cache
            .remove_entry(self.key.as_slice())
            .ok_or_else(internal)
    }

    /// Whether the check path is on ([`Self::use_reference_path`]).
    pub fn reference_path(&self) -> bool {
        self.reference
    }

    /// [`Self::fit_row`] (`Pass::InOrder`), or [`Self::fit_row_ahead`]'s part of it.
    fn fit_row_steps(
        &mut self,
        readings: &[Option<f64>],
        used: &[usize],
        strength: RowStrength,
        limit: Option<f64>,
        out: &mut RowFit,
        pass: Pass,
    ) -> Result<()> {
        // the diagnostics at a chosen strength are judged at the running reference strength
        let diagnose = pass == Pass::InOrder || matches!(strength, RowStrength::Fixed { .. });
        let (order, serial) = match strength {
            RowStrength::Fixed { order, .. } => (order, None),
            RowStrength::PerRow(_) => (self.order_for(readings, used)?, Some(self.row_serial)),
        };
        let (key, mut pat) = self.take_pattern(readings, used, order)?;
        let mut step = RowStep {
            readings,
            used,
            strength,
            order,
            mode: match strength {
                RowStrength::Fixed { .. } => RowMode::Cached,
                RowStrength::PerRow(_) => RowMode::Chosen,
            },
            lambda: 0.0,
            // the order choice projected this very row onto the pattern's basis already
            projected: serial.is_some_and(|s| pat.projected_row == s),
            coefficients: false,
            basis: false,
            s: 1.0,
        };
        let refit = self.fit_pattern_row(&mut pat, &mut step, limit, out, diagnose);
        self.cache.insert(key, pat);
        if let Some(rule) = refit? {
            if pass == Pass::Ahead {
                return Err(Error::Internal(
                    "a row the calibrated strength misfits is fitted again in order".into(),
                ));
            }
            // the sensor diagnostics stay those of the calibrated fit: a strength re-chosen
            // with a faulty reading included bends toward it and hides it
            let diagnostics = std::mem::take(&mut out.diagnostics);
            self.fit_row(readings, used, RowStrength::PerRow(rule), limit, out)?;
            out.diagnostics = diagnostics;
            out.refitted = true;
        }
        finite_row(out)
    }

    /// The steps of [`Self::fit_row`] on the row's pattern. Returns the rule to estimate the
    /// row again with when a calibrated strength misfits it (`out` then holds only the
    /// calibrated fit's diagnostics).
    fn fit_pattern_row(
        &mut self,
        pat: &mut Pattern,
        step: &mut RowStep<'_>,
        limit: Option<f64>,
        out: &mut RowFit,
        diagnose: bool,
    ) -> Result<Option<Strength>> {
        fill_d(
            &mut self.d,
            step.used,
            step.readings,
            &self.sensor_map.offset,
        );
        self.choose_lambda(pat, step)?;
        self.fitted_values(pat, step)?;
        let sigma_scale = self.sigma_scale(pat, step)?;
        step.s = sigma_scale.unwrap_or(1.0);
        out.refitted = false;
        let refit_rule = self.misfit_rule(pat, step);
        let mut leverage = std::mem::take(&mut self.lev);
        self.scan_profile(pat, step, &mut leverage)?;
        let hot = self.hottest(pat, step)?;
        let exceedance = match limit {
            None => None,
            Some(t) => Some(self.exceedance(pat, step, t)?),
        };
        if diagnose {
            self.diagnostics(pat, step, &mut leverage, out)?;
        }
        self.lev = leverage;
        if refit_rule.is_some() {
            return Ok(refit_rule);
        }
        out.used.clear();
        out.used.extend_from_slice(&pat.rows);
        out.order = step.order;
        out.lambda = step.lambda;
        out.sigma_scale = sigma_scale;
        out.edge = Some(self.edge_positions[hot.edge].0);
        out.position = hot.position;
        out.position_interval = hot.position_interval;
        out.temperature = hot.temperature;
        out.temperature_interval = [
            hot.max_lower.min(hot.temperature),
            hot.max_upper.max(hot.temperature),
        ];
        out.exceedance = exceedance;
        Ok(None)
    }

    /// Step 1: λ, fixed or chosen by the rule on this row's data. At a fixed λ the cached
    /// linear maps act on the data directly, so the projection of the data onto the
    /// pattern's basis is formed only when the coefficients or the draws need it.
    #[allow(clippy::float_cmp)] // the cached maps are reused only for the very same strength
    fn choose_lambda(&mut self, pat: &mut Pattern, step: &mut RowStep<'_>) -> Result<()> {
        step.lambda = match step.strength {
            RowStrength::Fixed { lambda, .. } => lambda,
            RowStrength::PerRow(s) => match (s, self.row_evidence[step.order], self.reference) {
                // `auto` smoothing chose the order by this very search on this row
                (Strength::Rule(StrengthMethod::Evidence), Some(lambda), false) => lambda,
                _ => {
                    step.project(pat, &self.d)?;
                    pat.select(s, self.reference)?.lambda
                }
            },
        };
        if step.mode == RowMode::Cached
            && pat.fixed.as_ref().is_none_or(|f| f.lambda != step.lambda)
        {
            pat.fixed = Some(fixed_parts(
                &pat.dec,
                step.lambda,
                &self.prof_matrix,
                &self.scan_index,
                step.used.len(),
            )?);
            pat.draws = None;
        }
        Ok(())
    }

    /// Step 2: the fitted values at the sensors: `S d` with the cached smoother at a fixed
    /// λ, else through the coefficients (which are then ready for the later steps).
    fn fitted_values(&mut self, pat: &mut Pattern, step: &mut RowStep<'_>) -> Result<()> {
        let m = step.used.len();
        if self.fitted.len() != m {
            self.fitted = DVector::zeros(m);
        }
        match cached(pat, step.mode) {
            Some(fx) => gemv(&mut self.fitted, &fx.smoother, &self.d, false),
            None if !self.reference => {
                // through the singular basis: the weights x(λ), then the maps
                step.project(pat, &self.d)?;
                self.pattern_maps(pat)?;
                let basis = pat.basis.as_ref().ok_or_else(internal)?;
                pat.dec
                    .basis_weights_into(&pat.proj, step.lambda, &mut self.x)?;
                gemv(&mut self.fitted, &basis.fitted, &self.x, false);
                step.basis = true;
            }
            None => {
                step.project(pat, &self.d)?;
                if self.reference {
                    pat.dec
                        .coefficients_into(&pat.proj, step.lambda, &mut self.c)?;
                } else {
                    pat.dec.coefficients_fast_into(
                        &pat.proj,
                        step.lambda,
                        &mut self.coef_work,
                        &mut self.c,
                    )?;
                }
                pat.dec.predict_into(&self.c, &mut self.fitted)?;
                step.coefficients = true;
            }
        }
        Ok(())
    }

    /// Step 3: σ̂ when σ is not stated, `χ²/(m − tr H)` at this λ (unit weights).
    fn sigma_scale(&self, pat: &Pattern, step: &RowStep<'_>) -> Result<Option<f64>> {
        if self.stated {
            return Ok(None);
        }
        let m = step.used.len();
        let lambda = step.lambda;
        let f_sum: f64 = pat
            .dec
            .singular_values()
            .iter()
            .map(|g| g * g / (g * g + lambda))
            .sum();
        let chi2 = self.weighted_chi2(pat, m);
        let dof = m as f64 - (pat.dec.null_dimension() as f64 + f_sum);
        if dof <= 0.0 {
            return Err(Error::invalid_field(
                "noise",
                "no reading uncertainty is stated and this row's fit leaves no residual \
                 degrees of freedom to estimate it from: state [noise] sigma",
            ));
        }
        Ok(Some((chi2 / dof).sqrt().max(1e-9)))
    }

    /// `Σ ((d_k − fitted_k) / σ_k)²` of the row's fit.
    fn weighted_chi2(&self, pat: &Pattern, m: usize) -> f64 {
        (0..m)
            .map(|k| ((self.d[k] - self.fitted[k]) / pat.sigma[k]).powi(2))
            .sum()
    }

    /// Step 4: with a calibrated strength and a stated σ, the rule to estimate the row again
    /// with when its chi-square exceeds the [`MISFIT_QUANTILE`] limit.
    fn misfit_rule(&self, pat: &Pattern, step: &RowStep<'_>) -> Option<Strength> {
        match (step.strength, pat.fixed.as_ref(), self.stated) {
            (
                RowStrength::Fixed {
                    refit: Some(rule), ..
                },
                Some(fx),
                true,
            ) if self.weighted_chi2(pat, step.used.len()) > fx.chi2_limit => Some(rule),
            _ => None,
        }
    }

    /// Step 5: the profile and its posterior sd on the scan grid, and at a fixed λ the
    /// leverages (at a chosen λ the diagnostics form them at the λ they judge at).
    fn scan_profile(
        &mut self,
        pat: &mut Pattern,
        step: &RowStep<'_>,
        leverage: &mut Vec<f64>,
    ) -> Result<()> {
        let s = step.s;
        leverage.clear();
        if let Some(fx) = cached(pat, step.mode) {
            gemv(&mut self.scan_est, &fx.scan_pg, &self.d, false);
            for (j, v) in self.scan_est.iter_mut().enumerate() {
                *v += self.scan_offset[j];
            }
            for (o, v) in self.scan_sd.iter_mut().zip(&fx.scan_sd) {
                *o = v * s;
            }
            leverage.extend_from_slice(&fx.leverage);
        } else {
            match pat.basis.as_ref().filter(|_| step.basis) {
                Some(b) => gemv(&mut self.scan_est, &b.scan, &self.x, false),
                None => gemv(&mut self.scan_est, &self.scan_matrix, &self.c, false),
            }
            self.scan_est += &self.scan_offset;
            self.pattern_maps(pat)?;
            let vp = pat.variance.as_ref().ok_or_else(internal)?;
            self.inv_lambda = VarianceParts::reciprocals(&pat.dec, step.lambda, &mut self.inv_den);
            vp.sds_into(
                &self.scan_index,
                &self.inv_den,
                self.inv_lambda,
                s,
                &mut self.scan_sd,
            );
            // the leverages are formed by the diagnostics, at the λ they are judged at
        }
        Ok(())
    }

    /// Build the pattern's λ-independent parts for rows whose λ is chosen: the variance parts
    /// and (off the check path) the maps in the singular basis.
    fn pattern_maps(&self, pat: &mut Pattern) -> Result<()> {
        if pat.variance.is_none() {
            pat.variance = Some(VarianceParts::new(&pat.dec, &self.prof_matrix)?);
        }
        if pat.basis.is_none() && !self.reference {
            let fine = pat.dec.basis_map(&self.prof_matrix)?;
            pat.basis = Some(BasisMaps {
                fitted: pat
                    .dec
                    .basis_map(&self.sensor_map.matrix.select_rows(&pat.rows))?,
                scan: fine.select_rows(&self.scan_index),
                fine,
            });
        }
        Ok(())
    }

    /// Step 6: the hottest point (the scan's maximum refined on the fine grid around it),
    /// the interval `[max L, max U]` of its temperature from the linear band, and the hull
    /// of the scan points that can hold the maximum.
    fn hottest(&mut self, pat: &Pattern, step: &RowStep<'_>) -> Result<RowHottest> {
        let (z, s) = (self.z, step.s);
        let (inv_den, inv_lambda) = (&self.inv_den, self.inv_lambda);
        let n_scan = self.scan_index.len();
        let n = self.n_fine;
        let (mut best_j, mut best_v) = (0, f64::NEG_INFINITY);
        for j in 0..n_scan {
            if self.scan_est[j] > best_v {
                best_v = self.scan_est[j];
                best_j = j;
            }
        }
        let fi = self.scan_index[best_j];
        let edge_k = fi / n;
        let lo = (edge_k * n).max(fi.saturating_sub(self.stride + 1));
        let hi = ((edge_k + 1) * n).min(fi + self.stride + 2);
        // the fine profile is the data through the cached map at a fixed λ, else the
        // coefficients through the profile map
        let fixed = cached(pat, step.mode);
        let (fine_map, fine_x) = match (fixed, &pat.basis) {
            (Some(fx), _) => (&fx.fine_pg, &self.d),
            (None, Some(b)) if step.basis => (&b.fine, &self.x),
            (None, _) => (&self.prof_matrix, &self.c),
        };
        let mut vals = std::mem::take(&mut self.window);
        let win = lo..hi;
        profile_rows(fine_map, fine_x, &self.prof_offset, win.clone(), &mut vals);
        let fine_val = |j: usize| -> f64 {
            let mut one = Vec::with_capacity(1);
            profile_rows(fine_map, fine_x, &self.prof_offset, j..j + 1, &mut one);
            one[0]
        };
        // refined_max over the window, but a parabola only away from the edge's ends
        let mut k = 0;
        for j in 0..vals.len() {
            if vals[j] > vals[k] {
                k = j;
            }
        }
        let global = lo + k;
        let (idx, t0) = if global > edge_k * n && global + 1 < (edge_k + 1) * n {
            let (y0, y1, y2) = (
                if k > 0 {
                    vals[k - 1]
                } else {
                    fine_val(global - 1)
                },
                vals[k],
                if k + 1 < vals.len() {
                    vals[k + 1]
                } else {
                    fine_val(global + 1)
                },
            );
            let (off, v) = refined_max(|j| [y0, y1, y2][j], 0, 3);
            (global as f64 + off - 1.0, v)
        } else {
            (global as f64, vals[k])
        };
        let pos = &self.edge_positions[edge_k].1;
        let step_m = pos[1] - pos[0];
        let position = pos[0] + (idx - (edge_k * n) as f64) * step_m;
        // [max L, max U]: the scan's maxima, refined on the fine grid around them.
        let (mut jl, mut ju) = (0, 0);
        let (mut best_l, mut best_u) = (
            self.scan_est[0] - z * self.scan_sd[0],
            self.scan_est[0] + z * self.scan_sd[0],
        );
        for j in 0..n_scan {
            let (l, u) = (
                self.scan_est[j] - z * self.scan_sd[j],
                self.scan_est[j] + z * self.scan_sd[j],
            );
            if l > best_l {
                (jl, best_l) = (j, l);
            }
            if u > best_u {
                (ju, best_u) = (j, u);
            }
        }
        let mut band = std::mem::take(&mut self.band_window);
        let (mut points, mut sds) = (
            std::mem::take(&mut self.band_points),
            std::mem::take(&mut self.band_sds),
        );
        let mut band_max = |js: usize, sign: f64| -> Result<f64> {
            let f = self.scan_index[js];
            let k = f / n;
            let lo = (k * n).max(f.saturating_sub(self.stride - 1));
            let hi = ((k + 1) * n).min(f + self.stride);
            // usually within the window around the hottest point, already evaluated
            let values: &[f64] = if lo >= win.start && hi <= win.end {
                &vals[lo - win.start..hi - win.start]
            } else {
                profile_rows(fine_map, fine_x, &self.prof_offset, lo..hi, &mut band);
                &band
            };
            // the window's sds: the cached ones at a fixed λ, else four points at a time
            // (`sds_into`: each the number `sd_with` gives for its point)
            sds.clear();
            match fixed {
                Some(fx) => sds.extend(fx.fine_sd[lo..hi].iter().map(|v| v * s)),
                None => {
                    let vp = pat.variance.as_ref().ok_or_else(internal)?;
                    points.clear();
                    points.extend(lo..hi);
                    sds.resize(hi - lo, 0.0);
                    vp.sds_into(&points, inv_den, inv_lambda, s, &mut sds);
                }
            }
            let mut best = f64::NEG_INFINITY;
            for (v, sd) in values.iter().zip(&sds) {
                best = best.max(v + sign * z * sd);
            }
            Ok(best)
        };
        let max_l = band_max(jl, -1.0)?;
        let max_u = band_max(ju, 1.0)?;
        (self.band_points, self.band_sds) = (points, sds);
        self.band_window = band;
        self.window = vals;
        let mut p_lo = position;
        let mut p_hi = position;
        let hot_edge = self.edge_positions[edge_k].0;
        let shape = *self.case.plate.shape();
        let circular = shape.period(hot_edge).is_some();
        let mut on_circle = Vec::new();
        for j in 0..n_scan {
            let f = self.scan_index[j];
            if self.scan_edge[j] == edge_k && self.scan_est[j] + z * self.scan_sd[j] >= max_l {
                let p = pos[f - edge_k * n];
                p_lo = p_lo.min(p);
                p_hi = p_hi.max(p);
                if circular {
                    on_circle.push(p);
                }
            }
        }
        if circular {
            // the shortest arc holding them, which may wrap through 0
            on_circle.push(position);
            if let Some([a, b]) = shape.position_hull(hot_edge, &on_circle) {
                (p_lo, p_hi) = (a, b);
            }
        }
        Ok(RowHottest {
            edge: edge_k,
            position,
            position_interval: [p_lo, p_hi],
            temperature: t0,
            max_lower: max_l,
            max_upper: max_u,
        })
    }

    /// Step 7: the probability that the hidden edge exceeds `t` anywhere, from the pattern's
    /// posterior draws (made at the first λ the pattern meets, rescaled to this row's sd; with
    /// λ chosen per row, the first in row order, `draw_bases`).
    fn exceedance(&mut self, pat: &mut Pattern, step: &mut RowStep<'_>, t: f64) -> Result<f64> {
        let n_scan = self.scan_index.len();
        let s = step.s;
        if pat.draws.is_none() {
            let mut sd0 = vec![0.0; n_scan];
            for (o, v) in sd0.iter_mut().zip(&self.scan_sd) {
                *o = v / s;
            }
            let mut lambda = step.lambda;
            if step.mode == RowMode::Chosen {
                // the pattern's first chosen strength and its sd, in row order
                match self.draw_bases.get(self.key.as_slice()) {
                    Some((l, sd)) => {
                        lambda = *l;
                        sd0.clone_from(sd);
                    }
                    None => {
                        if self.draw_base_order.len() >= DRAW_BASES {
                            if let Some(old) = self.draw_base_order.pop_front() {
                                self.draw_bases.remove(&old);
                            }
                        }
                        self.draw_base_order.push_back(self.key.clone());
                        self.draw_bases
                            .insert(self.key.clone(), (lambda, sd0.clone()));
                    }
                }
            }
            let seed = self.seed ^ hash_key(&self.key);
            step.project(pat, &self.d)?;
            pat.draws = Some(make_draws(
                &pat.dec,
                &pat.proj,
                lambda,
                &self.scan_matrix,
                sd0,
                self.draws,
                seed,
            )?);
        }
        // at the fixed λ a row's scan sds are the pattern's times s: the ratios are formed once
        // per pattern and scale, the same numbers as every row forming them (the check path
        // forms them on every row)
        let fixed = cached(pat, step.mode).is_some() && !self.reference;
        let dr = pat.draws.as_mut().ok_or_else(internal)?;
        let ratio: &[f64] = if fixed {
            let key = s.to_bits();
            if dr.fixed_ratios.as_ref().is_none_or(|(k, _)| *k != key) {
                let mut r = dr.fixed_ratios.take().map(|(_, r)| r).unwrap_or_default();
                r.resize(n_scan, 0.0);
                ratios(&self.scan_sd[..n_scan], &dr.sd[..n_scan], s, &mut r);
                dr.fixed_ratios = Some((key, r));
            }
            dr.fixed_ratios.as_ref().map_or(&[], |(_, r)| r.as_slice())
        } else {
            ratios(
                &self.scan_sd[..n_scan],
                &dr.sd[..n_scan],
                s,
                &mut self.ratio[..n_scan],
            );
            &self.ratio
        };
        Ok(exceed(&self.scan_est, ratio, dr, t, &mut self.bits))
    }

    /// Step 8: every sensor's standardised residual and fault probability: a used sensor's
    /// against the leave-one-out prediction, a left-out sensor's against the prediction of
    /// the fit without it. In per-row mode they are taken at a reference strength: the
    /// strength chosen on a row that includes a faulty reading bends toward it and hides
    /// it, so the residuals are judged at a slowly moving average of log λ over the rows.
    #[allow(clippy::float_cmp)] // the reference fit is needed only where λ differs from it
    fn diagnostics(
        &mut self,
        pat: &mut Pattern,
        step: &mut RowStep<'_>,
        leverage: &mut Vec<f64>,
        out: &mut RowFit,
    ) -> Result<()> {
        let (readings, used) = (step.readings, step.used);
        let (m, s, lambda) = (used.len(), step.s, step.lambda);
        let mut lambda_d = lambda;
        let mut use_ref = false;
        if step.mode == RowMode::Chosen {
            let slot = &mut self.ref_log_lambda[step.order];
            let lref = slot.map_or(lambda, f64::exp);
            *slot = Some(match *slot {
                None => lambda.ln(),
                Some(v) => v + (lambda.ln() - v) / REFERENCE_ROWS,
            });
            if lref != lambda {
                lambda_d = lref;
                use_ref = true;
                if self.c_ref.len() != self.c.len() {
                    self.c_ref = DVector::zeros(self.c.len());
                }
                step.project(pat, &self.d)?;
                if self.fitted_ref.len() != m {
                    self.fitted_ref = DVector::zeros(m);
                }
                if let Some(b) = pat.basis.as_ref().filter(|_| step.basis) {
                    // the coefficients at lref only if a sensor left out needs them (below)
                    pat.dec
                        .basis_weights_into(&pat.proj, lref, &mut self.x_ref)?;
                    gemv(&mut self.fitted_ref, &b.fitted, &self.x_ref, false);
                } else {
                    if self.reference {
                        pat.dec
                            .coefficients_into(&pat.proj, lref, &mut self.c_ref)?;
                    } else {
                        pat.dec.coefficients_fast_into(
                            &pat.proj,
                            lref,
                            &mut self.coef_work,
                            &mut self.c_ref,
                        )?;
                    }
                    pat.dec.predict_into(&self.c_ref, &mut self.fitted_ref)?;
                }
                leverages(&pat.dec, lref, self.reference, leverage)?;
            } else {
                leverages(&pat.dec, lambda, self.reference, leverage)?;
            }
        }
        let fitted_d = if use_ref {
            &self.fitted_ref
        } else {
            &self.fitted
        };
        out.diagnostics.clear();
        out.diagnostics.resize(self.points.len(), None);
        // The leave-one-out verdict of each used sensor, in three passes (the divisions,
        // then the exponentials, then the probabilities) so that the sensors' chains overlap
        // instead of waiting on one `exp` call at a time; the same operations on each value.
        let (xs, sds) = (&mut self.loo_x, &mut self.loo_sd);
        xs.resize(m, 0.0);
        sds.resize(m, 0.0);
        loo_terms(
            &leverage[..m],
            &pat.sigma.as_slice()[..m],
            s,
            &self.d.as_slice()[..m],
            &fitted_d.as_slice()[..m],
            &mut xs[..m],
            &mut sds[..m],
        );
        let gauss = &mut self.loo_good;
        gauss.clear();
        gauss.extend(xs.iter().map(|&x| (-0.5 * x * x).exp()));
        for (k, &i) in used.iter().enumerate() {
            let good = gauss[k] / (sds[k] * (2.0 * std::f64::consts::PI).sqrt());
            out.diagnostics[i] = Some((xs[k], fault_posterior(good)));
        }
        // The sensors left out: the coefficients are needed now if no step formed them
        // (by the same computation as the step that would have: `coefficients_fast_into` at a
        // chosen λ, `coefficients_into` at a fixed one).
        if readings.iter().flatten().count() > m {
            if use_ref && step.basis {
                pat.dec.coefficients_fast_into(
                    &pat.proj,
                    lambda_d,
                    &mut self.coef_work,
                    &mut self.c_ref,
                )?;
            } else if !step.coefficients && !use_ref {
                step.project(pat, &self.d)?;
                if step.basis {
                    pat.dec.coefficients_fast_into(
                        &pat.proj,
                        lambda,
                        &mut self.coef_work,
                        &mut self.c,
                    )?;
                } else {
                    pat.dec.coefficients_into(&pat.proj, lambda, &mut self.c)?;
                }
            }
        }
        let c_d = if use_ref { &self.c_ref } else { &self.c };
        self.in_use.clear();
        self.in_use.resize(readings.len(), false);
        for &i in used {
            self.in_use[i] = true;
        }
        let verdict = |resid: f64, sd: f64| -> (f64, f64) {
            let x = resid / sd;
            let good = (-0.5 * x * x).exp() / (sd * (2.0 * std::f64::consts::PI).sqrt());
            (x, fault_posterior(good))
        };
        for (i, r) in readings.iter().enumerate() {
            let Some(r) = r else { continue };
            if self.in_use[i] {
                continue;
            }
            let a = self.sensor_map.matrix.row(i).transpose();
            let pred = a.dot(c_d) + self.sensor_map.offset[i];
            let var = pat.dec.predictive_variances(&a, &[lambda_d])?[0] * s * s;
            let sig = if self.tolerance {
                crate::estimate::resolve_sigmas(&self.case, &[i], readings)?.0[i]
            } else {
                self.base_sigma[i]
            } * s;
            out.diagnostics[i] = Some(verdict(r - pred, (sig * sig + var.max(0.0)).sqrt()));
        }
        Ok(())
    }

    /// The full fine profile of a row and its linear band (estimate, lower, upper, per unknown
    /// edge in order), for checks against `estimate`. Slow: O(n_fine · p · r).
    ///
    /// # Errors
    /// As [`Self::fit_row`].
    pub fn profile_band(
        &mut self,
        readings: &[Option<f64>],
        used: &[usize],
        strength: RowStrength,
    ) -> Result<Vec<(f64, f64, f64)>> {
        let mut row = RowFit::default();
        self.fit_row(readings, used, strength, None, &mut row)?;
        self.pattern_key(readings, used, row.order)?;
        let pat = self
            .cache
            .get_mut(self.key.as_slice())
            .ok_or_else(internal)?;
        fill_d(&mut self.d, used, readings, &self.sensor_map.offset);
        pat.dec.project_into(&self.d, &mut pat.proj)?;
        pat.dec
            .coefficients_into(&pat.proj, row.lambda, &mut self.c)?;
        let s = row.sigma_scale.unwrap_or(1.0);
        (0..self.prof_matrix.nrows())
            .map(|j| {
                let a = self.prof_matrix.row(j).transpose();
                let est = a.dot(&self.c) + self.prof_offset[j];
                let sd = pat.dec.predictive_variances(&a, &[row.lambda])?[0]
                    .max(0.0)
                    .sqrt()
                    * s;
                Ok((est, est - self.z * sd, est + self.z * sd))
            })
            .collect()
    }

    /// The verdict of `estimate`'s own leave-one-out fault model
    /// ([`crate::estimate::fit::loo_residuals`]: the prediction averaged over the strength by
    /// the evidence of the other readings) on sensor `i` of this row, fitted with the sensors
    /// `used` plus `i`, at smoothing `order`. Slow (a decomposition and a sweep of the strength
    /// grid): the health checks call it only to confirm a sensor before leaving it out.
    pub fn loo_verdict(
        &self,
        readings: &[Option<f64>],
        used: &[usize],
        i: usize,
        order: usize,
        strength: Strength,
    ) -> Option<crate::estimate::fit::LooVerdict> {
        let (input, k) = self.row_input(readings, used, i, order)?;
        crate::estimate::fit::loo_one(&input, strength, k)
    }

    /// Whether a hot feature of a hidden edge (obeying a stated gradient limit, K/m) explains
    /// sensor `i`'s reading on this row together with the others
    /// ([`crate::estimate::explain::hot_explanation`]), with the same inputs as
    /// [`Self::loo_verdict`]. `None` when the reading is not above what the
    /// others predict, or the test cannot be made.
    pub fn hot_verdict(
        &self,
        readings: &[Option<f64>],
        used: &[usize],
        i: usize,
        order: usize,
        strength: Strength,
        max_gradient_k_per_m: Option<f64>,
    ) -> Option<crate::estimate::explain::HotVerdict> {
        let (input, k) = self.row_input(readings, used, i, order)?;
        crate::estimate::explain::hot_explanation(
            &self.bank,
            &self.edge_maps,
            &input,
            k,
            strength,
            max_gradient_k_per_m,
        )
        .ok()
        .flatten()
    }

    /// The fit input of the sensors `used` plus `i` on this row, and `i`'s row in it.
    fn row_input(
        &self,
        readings: &[Option<f64>],
        used: &[usize],
        i: usize,
        order: usize,
    ) -> Option<(crate::estimate::fit::FitInput, usize)> {
        let mut rows: Vec<usize> = used.to_vec();
        if !rows.contains(&i) {
            rows.push(i);
            rows.sort_unstable();
        }
        let k = rows.iter().position(|&r| r == i)?;
        let (sig, _) = crate::estimate::resolve_sigmas(&self.case, &rows, readings).ok()?;
        let input = crate::estimate::fit::FitInput {
            a: self.sensor_map.matrix.select_rows(&rows),
            d: DVector::from_iterator(
                rows.len(),
                rows.iter()
                    .map(|&r| readings[r].unwrap_or(f64::NAN) - self.sensor_map.offset[r]),
            ),
            sigma: DVector::from_iterator(rows.len(), rows.iter().map(|&r| sig[r])),
            sigma_stated: self.stated,
            penalty: self.penalties[order].clone(),
        };
        Some((input, k))
    }

    /// The smoothing the case asks for (`None`: auto).
    pub fn smoothing(&self) -> Smoothing {
        self.case.fit.smoothing
    }
}

/// The leverages at λ: diag H in O(m·(q + r)), or (the check path) from the explicit
/// influence matrix.
fn leverages(dec: &Decomposition, lambda: f64, reference: bool, out: &mut Vec<f64>) -> Result<()> {
    if reference {
        let h = dec.influence_matrix(lambda)?;
        out.clear();
        out.extend((0..h.nrows()).map(|k| h[(k, k)]));
        Ok(())
    } else {
        dec.leverages_into(lambda, out)
    }
}

fn internal() -> Error {
    Error::Internal("a cached pattern vanished".into())
}

fn fill_d(d: &mut DVector<f64>, used: &[usize], readings: &[Option<f64>], offset: &DVector<f64>) {
    if d.len() != used.len() {
        *d = DVector::zeros(used.len());
    }
    for (k, &i) in used.iter().enumerate() {
        d[k] = readings[i].unwrap_or(f64::NAN) - offset[i];
    }
}

/// The fine profile at the points `rows`: `out[i] = Σ_k map[(j, k)] x[k] + offset[j]` for
/// `j = rows.start + i`, each sum taken in the order of `k` (so every value is the same
/// number as the row's dot product). The sums of the window's points run side by side, a
/// column of `map` at a time, instead of one long chain of additions per point (four points
/// to an instruction when the processor has AVX2: [`crate::simd`]).
fn profile_rows(
    map: &DMatrix<f64>,
    x: &DVector<f64>,
    offset: &[f64],
    rows: std::ops::Range<usize>,
    out: &mut Vec<f64>,
) {
    out.clear();
    out.resize(rows.len(), -0.0);
    profile_window(
        (map.as_slice(), map.nrows()),
        x.as_slice(),
        offset,
        rows,
        out,
    );
}

crate::simd::avx2_dispatch! {
    /// The values of [`profile_rows`] into `out` (one per row of `rows`, holding −0.0 on
    /// entry, where `Iterator::sum` starts), from the column-major `map` of `nr` rows.
    fn profile_window(
        map: (&[f64], usize),
        x: &[f64],
        offset: &[f64],
        rows: std::ops::Range<usize>,
        out: &mut [f64],
    ) = profile_window_body;
}

/// The body of [`profile_window`].
#[inline(always)]
fn profile_window_body(
    (data, nr): (&[f64], usize),
    x: &[f64],
    offset: &[f64],
    rows: std::ops::Range<usize>,
    out: &mut [f64],
) {
    for (k, &xk) in x.iter().enumerate() {
        let col = &data[k * nr + rows.start..k * nr + rows.end];
        for (o, &w) in out.iter_mut().zip(col) {
            *o += w * xk;
        }
    }
    for (o, off) in out.iter_mut().zip(&offset[rows]) {
        *o += off;
    }
}

fn hash_key(words: &[u64]) -> u64 {
    // FNV-1a over the words: a fixed, platform-independent seed per pattern.
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &w in words {
        for b in w.to_le_bytes() {
            h ^= u64::from(b);
            h = h.wrapping_mul(0x0100_0000_01b3);
        }
    }
    h
}

fn fixed_parts(
    dec: &Decomposition,
    lambda: f64,
    prof: &DMatrix<f64>,
    scan_index: &[usize],
    m: usize,
) -> Result<FixedParts> {
    let p = dec.coefficient_count();
    let mut g = DMatrix::zeros(p, m);
    let mut e = DVector::zeros(m);
    let mut proj = dec.empty_projection();
    let mut c = DVector::zeros(p);
    for j in 0..m {
        e.fill(0.0);
        e[j] = 1.0;
        dec.project_into(&e, &mut proj)?;
        dec.coefficients_into(&proj, lambda, &mut c)?;
        g.set_column(j, &c);
    }
    let fine_pg = prof * &g;
    let scan_pg = fine_pg.select_rows(scan_index);
    let fine_sd = (0..prof.nrows())
        .map(|j| {
            let a = prof.row(j).transpose();
            Ok(dec.predictive_variances(&a, &[lambda])?[0].max(0.0).sqrt())
        })
        .collect::<Result<Vec<f64>>>()?;
    let scan_sd = scan_index.iter().map(|&j| fine_sd[j]).collect();
    let h = dec.influence_matrix(lambda)?;
    let f_sum: f64 = dec
        .singular_values()
        .iter()
        .map(|g| g * g / (g * g + lambda))
        .sum();
    let dof = (m as f64 - dec.null_dimension() as f64 - f_sum).max(0.5);
    let chi2_limit = statrs::distribution::ChiSquared::new(dof)
        .map(|d| statrs::distribution::ContinuousCDF::inverse_cdf(&d, MISFIT_QUANTILE))
        .unwrap_or(f64::INFINITY);
    let smoother = dec.influence_matrix(lambda)?;
    Ok(FixedParts {
        chi2_limit,
        smoother,
        lambda,
        scan_pg,
        fine_pg,
        scan_sd,
        fine_sd,
        leverage: (0..m).map(|k| h[(k, k)]).collect(),
    })
}

/// `n` posterior draws of the scan-grid profile error at λ: `e = P L ξ`, `C = L Lᵀ`.
fn make_draws(
    dec: &Decomposition,
    proj: &Projection,
    lambda: f64,
    scan: &DMatrix<f64>,
    sd: Vec<f64>,
    n: usize,
    seed: u64,
) -> Result<Draws> {
    let sol = dec.solve_for(proj, lambda)?;
    let cov = sol.covariance;
    let root = match nalgebra::Cholesky::new(cov.clone()) {
        Some(ch) => ch.l(),
        None => {
            let eig = nalgebra::SymmetricEigen::new(cov);
            let mut v = eig.eigenvectors.clone();
            for (j, mut col) in v.column_iter_mut().enumerate() {
                col *= eig.eigenvalues[j].max(0.0).sqrt();
            }
            v
        }
    };
    let pl = scan * root;
    let p = pl.ncols();
    let n_scan = scan.nrows();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let xi = DMatrix::from_fn(p, n, |_, _| StandardNormal.sample(&mut rng));
    let e = pl * xi; // n_scan × n
    let mut cols = Vec::with_capacity(n * n_scan);
    for j in 0..n_scan {
        let start = cols.len();
        cols.extend(e.row(j).iter().enumerate().map(|(k, &v)| (v, k as u32)));
        cols[start..].sort_by(|a, b| b.0.total_cmp(&a.0));
    }
    Ok(Draws::new(cols, n, sd))
}

impl Draws {
    /// From `cols`: per scan point, its `n` (value, draw) pairs sorted by value, descending.
    fn new(cols: Vec<(f64, u32)>, n: usize, sd: Vec<f64>) -> Self {
        let top = cols.chunks(n).map(|c| c[0].0).collect();
        let bottom = cols.chunks(n).map(|c| c[n - 1].0).collect();
        Draws {
            values: cols.iter().map(|c| c.0).collect(),
            index: cols.iter().map(|c| c.1).collect(),
            n,
            top,
            bottom,
            sd,
            fixed_ratios: None,
        }
    }
}

crate::simd::avx2_dispatch! {
    /// Each used sensor's leave-one-out standardised residual and its sd
    /// ([`RowEstimator::diagnostics`]): with `h` the leverage (below 1), `sd = σ s / √(1 − h)`
    /// and `x = (d − fitted) / (1 − h) / sd`; four sensors to an instruction in the AVX2 build.
    fn loo_terms(
        leverage: &[f64],
        sigma: &[f64],
        s: f64,
        d: &[f64],
        fitted: &[f64],
        xs: &mut [f64],
        sds: &mut [f64],
    ) = loo_terms_body;
}

/// The body of [`loo_terms`].
#[inline(always)]
fn loo_terms_body(
    leverage: &[f64],
    sigma: &[f64],
    s: f64,
    d: &[f64],
    fitted: &[f64],
    xs: &mut [f64],
    sds: &mut [f64],
) {
    let terms = leverage.iter().zip(sigma).zip(d.iter().zip(fitted));
    for (((&h, &sigma), (&d, &f)), (x, sd)) in terms.zip(xs.iter_mut().zip(sds.iter_mut())) {
        let h = h.min(1.0 - 1e-12);
        let r = d - f;
        let sd_loo = sigma * s / (1.0 - h).sqrt();
        *x = r / (1.0 - h) / sd_loo;
        *sd = sd_loo;
    }
}

crate::simd::avx2_dispatch! {
    /// The ratios of a row's scan sds `v` to its draws' `v0` ([`RowEstimator::exceedance`]):
    /// `v / v0`, or `s` where `v0` is not positive. Over slices without a branch, so that the
    /// divisions go four to an instruction in the AVX2 build (two in the baseline one).
    fn ratios(v: &[f64], v0: &[f64], s: f64, out: &mut [f64]) = ratios_body;
}

/// The body of [`ratios`].
#[inline(always)]
fn ratios_body(v: &[f64], v0: &[f64], s: f64, out: &mut [f64]) {
    for ((o, &v), &v0) in out.iter_mut().zip(v).zip(v0) {
        let q = v / v0;
        *o = if v0 > 0.0 { q } else { s };
    }
}

crate::simd::avx2_dispatch! {
    /// How many scan points some draw may pass the limit `t` at: those where
    /// [`surely_within`]`(top, ratio, t − est)` cannot say no draw does ([`exceed`]'s screen),
    /// four points to an instruction in the AVX2 build.
    fn screened_points(est: &[f64], ratio: &[f64], top: &[f64], t: f64) -> u32 =
        screened_points_body;
}

/// The body of [`screened_points`].
#[inline(always)]
fn screened_points_body(est: &[f64], ratio: &[f64], top: &[f64], t: f64) -> u32 {
    est.iter()
        .zip(ratio)
        .zip(top)
        .map(|((&e, &r), &top)| u32::from(!surely_within(top, r, t - e)))
        .sum()
}

/// `top · r ≤ d` for certain, whatever the rounding of the product (at most 2⁻⁵² of it) and
/// of the test itself: then `top ≤ fl(d / r)` for `r > 0` (`top` is a float and rounding is
/// monotone), the test [`exceed`] makes, found without a division.
#[inline(always)]
fn surely_within(top: f64, r: f64, d: f64) -> bool {
    let p = top * r;
    p + (p.abs() + d.abs()) * 1e-15 + f64::MIN_POSITIVE <= d
}

/// Share of draws `k` with `max_j (est_j + ratio_j e_kj) > t`: the union over scan points of
/// the draws that pass the limit there. Each point's draws are sorted, so a point contributes
/// only the draws that pass (a prefix of its list) to a bitset, and a point none of whose
/// draws can pass costs one comparison: O(n_scan + passing draws + n/64) per row.
fn exceed(est: &DVector<f64>, ratio: &[f64], dr: &Draws, t: f64, bits: &mut Vec<u64>) -> f64 {
    let n = dr.n;
    // The points where some draw may pass the limit, by the screen of the loop below
    // (`top ≤ c` for certain): with none, no draw passes anywhere (most rows, far below
    // the limit). The answer does not depend on the order of the points (the loop returns
    // early only with 1, which any order finds), so one pass over all of them, in vector
    // lanes, can decide first.
    let m = est.len();
    let candidates = screened_points(est.as_slice(), &ratio[..m], &dr.top[..m], t);
    if candidates == 0 {
        return 0.0;
    }
    bits.clear();
    bits.resize(n.div_ceil(64), 0);
    // the first largest (the best value kept in hand: comparing with `est[arg]` would wait
    // on a load at every point)
    let (mut arg, mut best) = (0, est.as_slice().first().copied().unwrap_or(f64::NAN));
    for (j, &v) in est.iter().enumerate() {
        if v > best {
            (arg, best) = (j, v);
        }
    }
    // the hottest point first: far above the limit it decides every draw at once
    for j in std::iter::once(arg).chain((0..est.len()).filter(|&j| j != arg)) {
        let r = ratio[j];
        if r <= 0.0 {
            if est[j] > t {
                return 1.0;
            }
            continue;
        }
        let d = t - est[j];
        if surely_within(dr.top[j], r, d) {
            continue;
        }
        let c = d / r;
        if dr.top[j] <= c {
            continue;
        }
        if dr.bottom[j] > c {
            return 1.0;
        }
        // the draws that pass here: the prefix of values above c
        let passing = dr.values[j * n..(j + 1) * n].partition_point(|&v| v > c);
        for &k in &dr.index[j * n..j * n + passing] {
            bits[k as usize / 64] |= 1 << (k % 64);
        }
    }
    let over: u32 = bits.iter().map(|b| b.count_ones()).sum();
    f64::from(over) / n as f64
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;
    use rand::RngExt;

    #[test]
    fn cached_variance_parts_give_the_same_numbers_as_predictive_variances() {
        // An invented 8 × 5 problem (two unpenalised columns, so V⊥ and the null part are
        // both exercised) and invented profile rows: the per-λ sd from the cached parts must
        // be the direct computation's number to rounding. It multiplies by reciprocals
        // formed once per row where the direct computation divides, so the two may differ
        // in the last few units of the last place; 1e-14 relative (about 50 ulp) is far
        // below the band's printed 1e-4 K on temperatures of order 1e2 K (1e-6 relative).
        let (m, p) = (8, 5);
        let a = DMatrix::from_fn(m, p, |i, j| ((i * 7 + j * 3) as f64 * 0.37).sin() + 0.1);
        let penalty = DVector::from_vec(vec![0.0, 0.0, 1.0, 4.0, 9.0]);
        let sigma = DVector::from_fn(m, |i, _| 0.1 + 0.01 * i as f64);
        let problem = Problem::new(a, DVector::zeros(m), sigma, penalty, true).unwrap();
        let dec = Decomposition::new(&problem).unwrap();
        let prof = DMatrix::from_fn(6, p, |i, j| ((i + 2 * j) as f64 * 0.23).cos());
        let parts = VarianceParts::new(&dec, &prof).unwrap();
        for lambda in [1e-6, 3e-3, 0.5, 40.0] {
            for j in 0..prof.nrows() {
                let direct = dec
                    .predictive_variances(&prof.row(j).transpose(), &[lambda])
                    .unwrap()[0]
                    .max(0.0)
                    .sqrt();
                assert!(direct > 0.0);
                let mut inv = Vec::new();
                let inv_lambda = VarianceParts::reciprocals(&dec, lambda, &mut inv);
                let cached = parts.sd_with(j, &inv, inv_lambda);
                assert!(
                    (cached - direct).abs() <= 1e-14 * direct,
                    "λ {lambda}, row {j}: {cached} vs {direct}"
                );
            }
        }
    }

    #[test]
    fn sds_of_many_points_are_those_of_one_point_at_a_time() {
        // sds_into runs four points' sums side by side: each number must be sd_with's, bit
        // for bit (an invented 14 × 11 problem whose count of singular values is above four
        // and not a multiple of it, asserted: whole chunks of four and a remainder; seven
        // points, some repeated, in no particular order)
        let (m, p) = (14, 11);
        let a = DMatrix::from_fn(m, p, |i, j| (((i + 1) * (j + 3)) as f64 * 0.71).sin() + 0.2);
        let penalty = DVector::from_fn(p, |j, _| if j < 2 { 0.0 } else { (j * j) as f64 });
        let sigma = DVector::from_fn(m, |i, _| 0.2 + 0.01 * i as f64);
        let problem = Problem::new(a, DVector::zeros(m), sigma, penalty, true).unwrap();
        let dec = Decomposition::new(&problem).unwrap();
        let r = dec.singular_values().len();
        assert!(r % 4 != 0 && r > 4, "{r} singular values");
        let prof = DMatrix::from_fn(9, p, |i, j| ((2 * i + j) as f64 * 0.31).cos());
        let parts = VarianceParts::new(&dec, &prof).unwrap();
        let points = [3usize, 0, 8, 8, 5, 1, 7];
        for lambda in [1e-4, 0.7, 25.0] {
            let mut inv = Vec::new();
            let inv_lambda = VarianceParts::reciprocals(&dec, lambda, &mut inv);
            let mut many = vec![0.0; points.len()];
            parts.sds_into(&points, &inv, inv_lambda, 1.7, &mut many);
            for (&j, got) in points.iter().zip(&many) {
                let one = parts.sd_with(j, &inv, inv_lambda) * 1.7;
                assert_eq!(got.to_bits(), one.to_bits(), "λ {lambda}, point {j}");
            }
        }
    }

    #[test]
    fn profile_rows_match_the_dot_products() {
        // the window evaluation runs the sums side by side; each value must be the same
        // number as the plain dot product in the order of k (invented numbers)
        let map = DMatrix::from_fn(12, 7, |i, j| ((i * 5 + j) as f64 * 0.71).sin() * 1e3);
        let x = DVector::from_fn(7, |k, _| ((k as f64) * 1.3).cos() / 7.0);
        let offset: Vec<f64> = (0..12).map(|j| 300.0 + j as f64 * 0.1).collect();
        let mut out = Vec::new();
        profile_rows(&map, &x, &offset, 3..10, &mut out);
        assert_eq!(out.len(), 7);
        for (i, j) in (3..10).enumerate() {
            let plain = (0..7).map(|k| map[(j, k)] * x[k]).sum::<f64>() + offset[j];
            assert_eq!(out[i].to_bits(), plain.to_bits(), "row {j}");
        }
    }

    #[test]
    fn the_division_free_screen_never_contradicts_the_division() {
        // `surely_within(top, r, d)` must imply `top <= d / r` as the loop computes it, on
        // invented values of every size and sign, ties (d = top·r exactly, and one ulp
        // either side) included.
        let mut rng = ChaCha8Rng::seed_from_u64(7);
        let mut next = || rng.random::<f64>();
        let mut said = 0;
        for k in 0..200_000 {
            let top = (next() - 0.3) * 10f64.powi(k % 7 - 3);
            let r = next() * 4.0 + 1e-3;
            let d = match k % 4 {
                0 => top * r,
                1 => f64::from_bits((top * r).to_bits() + 1),
                2 => f64::from_bits((top * r).to_bits().saturating_sub(1)),
                _ => (next() - 0.5) * 20.0,
            };
            if surely_within(top, r, d) {
                said += 1;
                assert!(top <= d / r, "top {top}, r {r}, d {d}");
            }
        }
        assert!(said > 20_000, "{said}");
    }

    #[test]
    fn exceedance_from_sorted_draws_matches_a_plain_count() {
        // Three invented draws on two points; estimate [1, 2], ratios [1, 0.5].
        let raw = [[0.5, -0.2], [3.0, 0.0], [-1.0, 0.4]];
        let mut cols = Vec::new();
        for j in 0..2 {
            let mut c: Vec<(f64, u32)> = raw
                .iter()
                .enumerate()
                .map(|(k, d)| (d[j], k as u32))
                .collect();
            c.sort_by(|a, b| b.0.total_cmp(&a.0));
            cols.extend(c);
        }
        let dr = Draws::new(cols, 3, vec![1.0, 1.0]);
        let est = DVector::from_vec(vec![1.0, 2.0]);
        let ratio = [1.0, 0.5];
        let mut bits = Vec::new();
        // thresholds off the exact ties (est + r e == t), where the two forms may round apart
        for t in [0.0, 1.45, 1.85, 2.15, 2.35, 3.55, 4.15, 10.0] {
            let plain = raw
                .iter()
                .filter(|d| (1.0 + d[0]).max(2.0 + 0.5 * d[1]) > t)
                .count() as f64
                / 3.0;
            assert_eq!(exceed(&est, &ratio, &dr, t, &mut bits), plain, "t = {t}");
        }
    }
}
