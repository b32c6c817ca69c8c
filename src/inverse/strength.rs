//! Choosing the regularisation strength λ: GCV, the discrepancy principle, the evidence
//! (marginal likelihood), the L-curve corner, or a fixed number.
//!
//! Every rule is a function of the standard-form spectrum only — the kept singular values
//! `g_i`, the data components `β_i = u_iᵀ W d`, the unfittable part `δ₀`, m and the null-space
//! dimension q (see [`super::tikhonov`]) — so one decomposition serves every λ and every data
//! vector. λ is the λ of `docs/method.md` (the literature's `lam²`); `f_i = g_i²/(g_i² + λ)`, and `1 − f_i` is computed
//! as `λ/(g_i² + λ)` to keep its precision when λ is small. `m' = m − q`.
//!
//! ## The rules
//!
//! * **GCV** (Golub, Heath & Wahba 1979, Technometrics 21:215–223):
//!   `V(λ) = m ‖(I − H) W d‖² / [tr(I − H)]²` with `‖(I − H) W d‖² = Σ (1−f_i)² β_i² + δ₀` and
//!   `tr(I − H) = m − q − Σ f_i` (the null space is fitted exactly, so its q degrees of freedom
//!   are subtracted: Golub, Heath & Wahba 1979; Wahba 1985). Minimised.
//! * **Discrepancy principle** (Morozov 1984, *Methods for Solving Incorrectly Posed
//!   Problems*): choose λ with `χ²(λ) = ‖W (A c − d)‖² = τ² m'`. We use `m' = m − q` rather
//!   than m: the q unpenalised directions are always fitted exactly and absorb q of the
//!   noise's m degrees of freedom, so even λ → ∞ leaves an expected χ² of only m − q for
//!   noise alone; with m the equation could have no solution for pure noise around a constant.
//!   χ² rises monotonically with λ, so the root is found by bracketing on the grid and
//!   refining with Brent's root finder. Needs a stated σ (W carries it); τ = 1 by default.
//! * **Evidence** (marginal likelihood; GML/REML of Wahba 1985, Ann. Statist. 13:1378–1402).
//!   Derivation: the Bayesian reading of (1) is `W d = W A c + e`, `e ~ N(0, s² I)`,
//!   prior `y = L_P c_P ~ N(0, (s²/λ) I)` and a flat prior on `c_N`. Integrating out `c_N`
//!   amounts to keeping the m' components of `W d` orthogonal to the null columns,
//!   `z = Q₂ᵀ W d` (Q₂ completes Q₁); then `z ~ N(0, s² (I + Ã₂Ã₂ᵀ/λ))` with `Ã₂ = Q₂ᵀ A_w,P L_P⁻¹`,
//!   whose non-zero singular values are the same `g_i`. In the rotated basis the r components
//!   `β_i` have variance `s² (1 + g_i²/λ) = s² / (1 − f_i)`, and the other m' − r components
//!   (squared norm δ₀) variance s². Hence
//!
//!   ```text
//!   −2 log p(z | λ, s) = m' log(2π s²) − Σ log(1 − f_i) + [Σ (1 − f_i) β_i² + δ₀] / s²
//!   ```
//!
//!   - **Known σ** ([`EvidenceKind::KnownSigma`], s = 1 because W carries σ): minimise
//!     `m' log 2π − Σ log(1 − f_i) + Σ (1 − f_i) β_i² + δ₀`. Used when σ is stated.
//!   - **Profiled scale** ([`EvidenceKind::ProfiledScale`], s unknown): the maximising
//!     `ŝ² = [Σ (1 − f_i) β_i² + δ₀] / m'` gives
//!     `m' [log(2π ŝ²) + 1] − Σ log(1 − f_i)`, i.e. the familiar `m' log(Σ β_i²(1 − f_i) + δ₀)
//!     − Σ log(1 − f_i)` plus a constant — Wahba's GML. Used when σ is not stated (unit
//!     weights), since the scale then has to come from the data.
//!
//!   The curve reports the full `−2 log p` (constants included), so both variants can be
//!   compared with an independent dense Gaussian density (the reference fixture does).
//! * **L-curve corner** (Hansen & O'Leary 1993, SIAM J. Sci. Comput. 14:1487–1503): maximum
//!   curvature of the curve (log ‖W(Ac − d)‖, log ‖L c‖). With `ρ = χ²`, `η = ‖L c‖² =
//!   Σ (g_i β_i/(g_i² + λ))²`, and Hansen & O'Leary's formula rewritten for `lam = √λ`:
//!
//!   ```text
//!   η' = dη/dlam = −(4/lam) Σ (1 − f_i) f_i² β_i² / g_i²
//!   κ  = −2 (η ρ / η') (lam² η' ρ + 2 lam η ρ + lam⁴ η η') / (lam⁴ η² + ρ²)^{3/2}
//!   ```
//!
//!   (lam⁴ in the denominator; derived from `ρ' = −lam² η'`, and checked in the reference
//!   fixture against finite-difference curvature). The factor 2 is from plotting the norms,
//!   not their squares. Maximised.
//!
//! ## The search
//!
//! A grid of [`SelectOptions::grid_points`] (200) values, uniform in log λ, from
//! `g_min² · 10^{−margin}` to `g_max² · 10^{margin}` (margin 4 decades in λ, i.e. 2 decades of
//! lam beyond the singular values; `g_min` is floored at `10⁻⁸ g_max` so that rounding-level
//! singular values do not stretch the grid). The best grid point is refined by argmin's
//! Brent minimiser (Brent 1973) between its neighbours, or by argmin's Brent root finder for
//! the discrepancy principle. A best point at either end of the grid sets
//! [`Selection::at_grid_end`]: the rule found no interior optimum and the summary should warn.

use super::tikhonov::{Decomposition, Projection};
use crate::error::{Error, Result};
use argmin::core::{CostFunction, Executor};
use argmin::solver::brent::{BrentOpt, BrentRoot};
use serde::{Deserialize, Serialize};

/// A rule that chooses λ from the data.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum StrengthMethod {
    /// Generalised cross-validation (`gcv`).
    #[serde(rename = "gcv")]
    Gcv,
    /// The discrepancy principle (`discrepancy`); needs a stated σ.
    #[serde(rename = "discrepancy")]
    Discrepancy,
    /// The marginal likelihood, "evidence" (`evidence`).
    #[serde(rename = "evidence")]
    Evidence,
    /// The L-curve corner (`lcurve`).
    #[serde(rename = "lcurve")]
    LCurve,
}

impl StrengthMethod {
    /// The name used in plate files and summaries.
    pub fn name(self) -> &'static str {
        match self {
            StrengthMethod::Gcv => "gcv",
            StrengthMethod::Discrepancy => "discrepancy",
            StrengthMethod::Evidence => "evidence",
            StrengthMethod::LCurve => "lcurve",
        }
    }

    /// Parse the name used in plate files.
    pub fn parse(s: &str) -> Option<Self> {
        [
            StrengthMethod::Gcv,
            StrengthMethod::Discrepancy,
            StrengthMethod::Evidence,
            StrengthMethod::LCurve,
        ]
        .into_iter()
        .find(|m| m.name() == s.trim())
    }
}

/// How λ is set: by a rule, or fixed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Strength {
    /// A fixed λ (> 0).
    Fixed(f64),
    /// Chosen by a rule.
    Rule(StrengthMethod),
}

impl Strength {
    /// The rule's name (`gcv`, `discrepancy`, `evidence`, `lcurve`), or `fixed`.
    pub fn name(self) -> &'static str {
        match self {
            Strength::Fixed(_) => "fixed",
            Strength::Rule(m) => m.name(),
        }
    }
}

impl std::fmt::Display for Strength {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// Serialised as its name (a fixed value is reported beside it).
impl Serialize for Strength {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        s.serialize_str(self.name())
    }
}

/// Which marginal likelihood the evidence rule maximises (see the module doc).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum EvidenceKind {
    /// σ known (stated): the noise scale is fixed by W.
    #[serde(rename = "known-sigma")]
    KnownSigma,
    /// σ unknown: the noise scale is profiled out (Wahba's GML).
    #[serde(rename = "profiled-scale")]
    ProfiledScale,
}

/// Options of the strength search.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SelectOptions {
    /// The discrepancy principle's safety factor τ ≥ 1 (target χ² = τ² (m − q)).
    pub tau: f64,
    /// Grid points on log λ (at least 3).
    pub grid_points: usize,
    /// Decades of λ beyond `[g_min², g_max²]` on each side.
    pub margin_decades: f64,
    /// Override the evidence variant (default: known σ when stated, else profiled).
    pub evidence: Option<EvidenceKind>,
    /// Keep the criterion curve in the [`Selection`] (turn off inside a bootstrap).
    pub keep_curve: bool,
}

impl Default for SelectOptions {
    fn default() -> Self {
        SelectOptions {
            tau: 1.0,
            grid_points: 200,
            margin_decades: 4.0,
            evidence: None,
            keep_curve: true,
        }
    }
}

/// The outcome of a strength search.
#[derive(Debug, Clone, PartialEq)]
pub struct Selection {
    /// How λ was set.
    pub strength: Strength,
    /// The chosen λ.
    pub lambda: f64,
    /// The criterion at λ: GCV V(λ), the evidence's −2 log p, the L-curve curvature κ, or
    /// (discrepancy) χ²; NaN for a fixed λ.
    pub criterion: f64,
    /// The effective number of parameters q + Σ f_i at λ.
    pub effective_parameters: f64,
    /// The λ grid (empty for a fixed λ or when the curve is not kept).
    pub grid: Vec<f64>,
    /// The criterion on the grid (same quantity as [`Self::criterion`]).
    pub curve: Vec<f64>,
    /// The optimum lies at an end of the grid: no interior optimum was found (for the
    /// discrepancy principle: the target χ² is not reached inside the grid).
    pub at_grid_end: bool,
    /// The discrepancy principle's target χ² = τ² (m − q).
    pub target: Option<f64>,
    /// The evidence variant used.
    pub evidence_kind: Option<EvidenceKind>,
}

/// The standard-form spectrum of one data vector: all that the rules need.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Spectrum<'a> {
    g: &'a [f64],
    beta: &'a [f64],
    delta0: f64,
    m: usize,
    q: usize,
}

impl Spectrum<'_> {
    fn m_prime(&self) -> f64 {
        (self.m - self.q) as f64
    }

    /// Σ f_i.
    pub(crate) fn sum_f(&self, lambda: f64) -> f64 {
        self.g.iter().map(|g| g * g / (g * g + lambda)).sum()
    }

    /// χ²(λ) = Σ (1 − f_i)² β_i² + δ₀.
    pub(crate) fn chi2(&self, lambda: f64) -> f64 {
        self.g
            .iter()
            .zip(self.beta)
            .map(|(g, b)| (lambda / (g * g + lambda) * b).powi(2))
            .sum::<f64>()
            + self.delta0
    }

    /// tr(I − H) = m − q − Σ f_i, computed as (m' − r) + Σ (1 − f_i).
    fn trace_residual(&self, lambda: f64) -> f64 {
        (self.m_prime() - self.g.len() as f64)
            + self
                .g
                .iter()
                .map(|g| lambda / (g * g + lambda))
                .sum::<f64>()
    }

    /// GCV: V(λ) = m χ²(λ) / tr(I − H)².
    pub(crate) fn gcv(&self, lambda: f64) -> f64 {
        let t = self.trace_residual(lambda);
        self.m as f64 * self.chi2(lambda) / (t * t)
    }

    /// −2 log of the restricted marginal likelihood (module doc), constants included.
    pub(crate) fn evidence(&self, lambda: f64, kind: EvidenceKind) -> f64 {
        let mut quad = self.delta0;
        let mut logdet = 0.0;
        for (g, b) in self.g.iter().zip(self.beta) {
            let h = lambda / (g * g + lambda);
            quad += h * b * b;
            logdet -= lambda.ln() - (g * g + lambda).ln();
        }
        let mp = self.m_prime();
        let two_pi = 2.0 * std::f64::consts::PI;
        match kind {
            EvidenceKind::KnownSigma => mp * two_pi.ln() + logdet + quad,
            EvidenceKind::ProfiledScale => mp * ((two_pi * quad / mp).ln() + 1.0) + logdet,
        }
    }

    /// L-curve curvature κ(λ) (module doc; Hansen & O'Leary 1993 with lam = √λ).
    pub(crate) fn curvature(&self, lambda: f64) -> f64 {
        let lam = lambda.sqrt();
        let rho = self.chi2(lambda);
        let mut eta = 0.0;
        let mut sum = 0.0;
        for (g, b) in self.g.iter().zip(self.beta) {
            let e = g * b / (g * g + lambda);
            eta += e * e;
            sum += lambda / (g * g + lambda) * e * e;
        }
        let deta = -4.0 / lam * sum;
        if deta == 0.0 || eta == 0.0 || rho == 0.0 {
            return 0.0;
        }
        let num = lambda * deta * rho + 2.0 * lam * eta * rho + lambda * lambda * eta * deta;
        let den = (lambda * lambda * eta * eta + rho * rho).powf(1.5);
        -2.0 * (eta * rho / deta) * num / den
    }
}

/// The data-independent parts of the strength criteria on the λ grid of one decomposition:
/// for every grid point `λ_k` the factors `h_ki = λ_k/(g_i² + λ_k)`, the evidence's
/// log-determinant and `tr(I − H)`. The criteria then cost `O(r)` multiply-adds per grid
/// point and no logarithm (the profiled evidence keeps one), so a search repeated for many
/// data vectors on the same decomposition (the bootstrap's replicates, a logger pattern's
/// rows) builds this once. Every value is computed with the same operations, in the same
/// order, as the direct evaluation of the criteria, so the criterion is the same number.
#[derive(Debug, Clone)]
pub struct StrengthGrid {
    /// log10 λ of the grid points.
    xs: Vec<f64>,
    /// λ of the grid points.
    lambdas: Vec<f64>,
    /// Number of singular values.
    r: usize,
    /// `h_ki`, row k for grid point k.
    h: Vec<f64>,
    /// Σ_i (ln(g_i² + λ_k) − ln λ_k), accumulated as [`Spectrum::evidence`] does.
    logdet: Vec<f64>,
    /// tr(I − H) at λ_k.
    trace_residual: Vec<f64>,
}

impl StrengthGrid {
    fn new(dec: &Decomposition, opts: &SelectOptions) -> Option<Self> {
        let xs = dec.lambda_grid(opts)?;
        let lambdas: Vec<f64> = xs.iter().map(|x| 10f64.powf(*x)).collect();
        let g = dec.g.as_slice();
        let r = g.len();
        let spec = Spectrum {
            g,
            beta: &[],
            delta0: 0.0,
            m: dec.m,
            q: dec.q,
        };
        let mut h = Vec::with_capacity(lambdas.len() * r);
        let mut logdet = Vec::with_capacity(lambdas.len());
        for &lambda in &lambdas {
            let mut ld = 0.0;
            for g in g {
                h.push(lambda / (g * g + lambda));
                ld -= lambda.ln() - (g * g + lambda).ln();
            }
            logdet.push(ld);
        }
        let trace_residual = lambdas.iter().map(|&l| spec.trace_residual(l)).collect();
        Some(StrengthGrid {
            xs,
            lambdas,
            r,
            h,
            logdet,
            trace_residual,
        })
    }

    /// The criterion of `method` at grid point `k` for the data of `spec` (not the L-curve,
    /// which is evaluated directly).
    fn value(
        &self,
        spec: &Spectrum<'_>,
        k: usize,
        method: StrengthMethod,
        kind: EvidenceKind,
    ) -> f64 {
        let h = &self.h[k * self.r..(k + 1) * self.r];
        match method {
            StrengthMethod::Evidence => {
                let mut quad = spec.delta0;
                for (h, b) in h.iter().zip(spec.beta) {
                    quad += h * b * b;
                }
                let mp = spec.m_prime();
                let two_pi = 2.0 * std::f64::consts::PI;
                match kind {
                    EvidenceKind::KnownSigma => mp * two_pi.ln() + self.logdet[k] + quad,
                    EvidenceKind::ProfiledScale => {
                        mp * ((two_pi * quad / mp).ln() + 1.0) + self.logdet[k]
                    }
                }
            }
            StrengthMethod::Gcv => {
                let t = self.trace_residual[k];
                spec.m as f64 * chi2_of(h, spec) / (t * t)
            }
            StrengthMethod::Discrepancy => chi2_of(h, spec),
            StrengthMethod::LCurve => spec.curvature(self.lambdas[k]),
        }
    }
}

/// χ² from the factors `h_i` of one λ: [`Spectrum::chi2`] with `h` given.
fn chi2_of(h: &[f64], spec: &Spectrum<'_>) -> f64 {
    h.iter()
        .zip(spec.beta)
        .map(|(h, b)| (h * b).powi(2))
        .sum::<f64>()
        + spec.delta0
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

fn not_nan(v: f64) -> f64 {
    if v.is_nan() { f64::INFINITY } else { v }
}

/// Minimise `f(x)` (x = log10 λ) over the grid, then refine with Brent between the best grid
/// point's neighbours. Returns (x, f(x), at_end).
fn grid_then_brent(f: &dyn Fn(f64) -> f64, xs: &[f64], values: &[f64]) -> (f64, f64, bool) {
    let (k, &fk) = values
        .iter()
        .enumerate()
        .min_by(|a, b| not_nan(*a.1).total_cmp(&not_nan(*b.1)))
        .expect("grid has at least 3 points");
    let n = xs.len();
    if k == 0 || k == n - 1 {
        return (xs[k], fk, true);
    }
    let solver = BrentOpt::new(xs[k - 1], xs[k + 1]).set_tolerance(f64::EPSILON.sqrt(), 1e-12);
    let run = Executor::new(Cost(|x: f64| not_nan(f(x))), solver)
        .configure(|s| s.max_iters(200))
        .ctrlc(false)
        .run();
    match run {
        Ok(res) => {
            let st = res.state();
            match st.best_param {
                Some(x) if st.best_cost <= fk => (x, st.best_cost, false),
                _ => (xs[k], fk, false),
            }
        }
        Err(_) => (xs[k], fk, false),
    }
}

impl Decomposition {
    pub(crate) fn spectrum<'a>(&'a self, proj: &'a Projection) -> Spectrum<'a> {
        Spectrum {
            g: self.g.as_slice(),
            beta: proj.beta.as_slice(),
            delta0: proj.delta0,
            m: self.m,
            q: self.q,
        }
    }

    /// The log10-λ grid of the strength search (module doc), or `None` when no penalised
    /// direction is seen by the data.
    pub fn lambda_grid(&self, opts: &SelectOptions) -> Option<Vec<f64>> {
        let r = self.g.len();
        if r == 0 {
            return None;
        }
        let g_max = self.g[0];
        let g_min = self.g[r - 1].max(g_max * 1e-8);
        let lo = 2.0 * g_min.log10() - opts.margin_decades;
        let hi = 2.0 * g_max.log10() + opts.margin_decades;
        let n = opts.grid_points.max(3);
        Some(
            (0..n)
                .map(|i| lo + (hi - lo) * i as f64 / (n - 1) as f64)
                .collect(),
        )
    }

    /// The evidence variant a rule would use for this decomposition.
    pub fn evidence_kind(&self, opts: &SelectOptions) -> EvidenceKind {
        opts.evidence.unwrap_or(if self.sigma_stated {
            EvidenceKind::KnownSigma
        } else {
            EvidenceKind::ProfiledScale
        })
    }

    /// Evaluate a rule's criterion at λ for a projected data vector: GCV V(λ), the evidence's
    /// −2 log p, the L-curve curvature κ, or (discrepancy) χ².
    pub fn criterion(
        &self,
        proj: &Projection,
        method: StrengthMethod,
        lambda: f64,
        opts: &SelectOptions,
    ) -> f64 {
        let s = self.spectrum(proj);
        match method {
            StrengthMethod::Gcv => s.gcv(lambda),
            StrengthMethod::Discrepancy => s.chi2(lambda),
            StrengthMethod::Evidence => s.evidence(lambda, self.evidence_kind(opts)),
            StrengthMethod::LCurve => s.curvature(lambda),
        }
    }

    /// Choose λ for the problem's own data.
    ///
    /// # Errors
    /// As [`Self::select_for`].
    pub fn select(&self, strength: Strength, opts: &SelectOptions) -> Result<Selection> {
        self.select_for(self.data_projection(), strength, opts)
    }

    /// Choose λ for a projected data vector (a bootstrap replicate, say) on this
    /// decomposition: grid on log λ, then Brent (module doc). Cost O(grid · r) plus a few
    /// dozen evaluations; allocates only the curve when `opts.keep_curve`. A search for many
    /// data vectors on one decomposition builds the [`StrengthGrid`] once and calls
    /// [`Self::select_on`] instead.
    ///
    /// # Errors
    /// [`Error::Invalid`] for a non-positive fixed λ, the discrepancy principle without a
    /// stated σ or with τ < 1, or a rule asked to choose when no penalised direction is seen
    /// by the data (every λ gives the same fit).
    pub fn select_for(
        &self,
        proj: &Projection,
        strength: Strength,
        opts: &SelectOptions,
    ) -> Result<Selection> {
        let grid = match strength {
            Strength::Fixed(_) => None,
            Strength::Rule(_) => self.strength_grid(opts),
        };
        self.select_on(proj, strength, opts, grid.as_ref())
    }

    /// The data-independent tables of the strength search on this decomposition's λ grid
    /// ([`StrengthGrid`]); `None` when no penalised direction is seen by the data.
    pub fn strength_grid(&self, opts: &SelectOptions) -> Option<StrengthGrid> {
        StrengthGrid::new(self, opts)
    }

    /// [`Self::select_for`] with the grid's tables built beforehand (`grid` must come from
    /// [`Self::strength_grid`] with the same `opts`; `None` when it returned none). The
    /// criterion on the grid is the same number, bit for bit, as the direct evaluation.
    ///
    /// # Errors
    /// As [`Self::select_for`].
    pub fn select_on(
        &self,
        proj: &Projection,
        strength: Strength,
        opts: &SelectOptions,
        grid: Option<&StrengthGrid>,
    ) -> Result<Selection> {
        let spec = self.spectrum(proj);
        let method = match strength {
            Strength::Fixed(lambda) => {
                if !(lambda.is_finite() && lambda > 0.0) {
                    return Err(Error::invalid_field(
                        "fit.strength",
                        format!("a fixed strength must be a positive number, not {lambda}"),
                    ));
                }
                return Ok(Selection {
                    strength,
                    lambda,
                    criterion: f64::NAN,
                    effective_parameters: self.q as f64 + spec.sum_f(lambda),
                    grid: Vec::new(),
                    curve: Vec::new(),
                    at_grid_end: false,
                    target: None,
                    evidence_kind: None,
                });
            }
            Strength::Rule(method) => method,
        };
        if method == StrengthMethod::Discrepancy {
            if !self.sigma_stated {
                return Err(Error::invalid_field(
                    "fit.strength",
                    "the discrepancy principle needs the reading uncertainty: state \
                     [noise] sigma or a tolerance class, or choose another strength rule",
                ));
            }
            if !(opts.tau.is_finite() && opts.tau >= 1.0) {
                return Err(Error::invalid_field(
                    "fit.strength",
                    format!(
                        "the discrepancy factor tau must be at least 1, not {}",
                        opts.tau
                    ),
                ));
            }
        }
        let Some(grid) = grid else {
            return Err(Error::invalid_field(
                "fit.strength",
                format!(
                    "the data see none of the penalised coefficients, so the {} rule has \
                     nothing to choose: give a fixed strength or move sensors",
                    method.name()
                ),
            ));
        };
        let kind = self.evidence_kind(opts);
        let value = |x: f64| {
            let lambda = 10f64.powf(x);
            match method {
                StrengthMethod::Gcv => spec.gcv(lambda),
                StrengthMethod::Discrepancy => spec.chi2(lambda),
                StrengthMethod::Evidence => spec.evidence(lambda, kind),
                StrengthMethod::LCurve => spec.curvature(lambda),
            }
        };
        let xs = &grid.xs;
        let curve: Vec<f64> = match method {
            StrengthMethod::LCurve => xs.iter().map(|&x| value(x)).collect(),
            _ => (0..xs.len())
                .map(|k| grid.value(&spec, k, method, kind))
                .collect(),
        };

        let (x, crit, at_end, target) = match method {
            StrengthMethod::Gcv | StrengthMethod::Evidence => {
                let (x, c, e) = grid_then_brent(&value, xs, &curve);
                (x, c, e, None)
            }
            StrengthMethod::LCurve => {
                let neg: Vec<f64> = curve.iter().map(|k| -k).collect();
                let (x, c, e) = grid_then_brent(&|x| -value(x), xs, &neg);
                (x, -c, e, None)
            }
            StrengthMethod::Discrepancy => {
                let target = opts.tau * opts.tau * spec.m_prime();
                let (x, c, e) = discrepancy_root(&value, xs, &curve, target);
                (x, c, e, Some(target))
            }
        };
        let lambda = 10f64.powf(x);
        if !(lambda.is_finite() && lambda > 0.0) || crit.is_nan() {
            return Err(Error::Internal(format!(
                "the {} rule found no finite strength (criterion {crit} at strength {lambda}): \
                 the weighted readings overflow or underflow; check the reading uncertainties \
                 (sigma) and the readings",
                method.name()
            )));
        }
        let (grid, curve) = if opts.keep_curve {
            (grid.lambdas.clone(), curve)
        } else {
            (Vec::new(), Vec::new())
        };
        Ok(Selection {
            strength,
            lambda,
            criterion: crit,
            effective_parameters: self.q as f64 + spec.sum_f(lambda),
            grid,
            curve,
            at_grid_end: at_end,
            target,
            evidence_kind: (method == StrengthMethod::Evidence).then_some(kind),
        })
    }
}

/// Solve χ²(10^x) = target on the grid's bracket with Brent's root finder on
/// `ln χ² − ln target` (monotone increasing in x). Returns (x, χ², at_end).
fn discrepancy_root(
    chi2: &dyn Fn(f64) -> f64,
    xs: &[f64],
    values: &[f64],
    target: f64,
) -> (f64, f64, bool) {
    let n = xs.len();
    if values[0] >= target {
        return (xs[0], values[0], true);
    }
    if values[n - 1] <= target {
        return (xs[n - 1], values[n - 1], true);
    }
    // χ² is monotone in λ, so the first grid value at or above the target brackets the root;
    // a curve that overflowed (NaN) has none, and the caller sees a non-finite χ².
    let Some(k) = values.iter().position(|v| *v >= target).filter(|&k| k > 0) else {
        return (xs[n - 1], f64::NAN, true);
    };
    let phi = |x: f64| chi2(x).ln() - target.ln();
    let solver = BrentRoot::new(xs[k - 1], xs[k], 1e-13);
    let run = Executor::new(Cost(phi), solver)
        .configure(|s| s.max_iters(200))
        .ctrlc(false)
        .run();
    let x = match run {
        Ok(res) => res.state().best_param.unwrap_or(xs[k]),
        Err(_) => xs[k],
    };
    (x, chi2(x), false)
}

/// The test problem shared by the strength and search tests.
#[cfg(test)]
pub(crate) mod fixture {
    use nalgebra::{DMatrix, DVector};

    /// An invented ill-posed problem's matrix, σ and penalty: a constant column and decaying
    /// cosine columns, σ unequal when stated (all 1 otherwise).
    pub(crate) fn matrices(
        m: usize,
        p: usize,
        sigma_stated: bool,
    ) -> (DMatrix<f64>, DVector<f64>, DVector<f64>) {
        let mut a = DMatrix::zeros(m, p);
        let mut sigma = DVector::zeros(m);
        let mut penalty = DVector::zeros(p);
        for i in 0..m {
            let x = (i as f64 + 0.5) / m as f64;
            let y = 0.15 + 0.04 * ((i * 3) % 5) as f64;
            a[(i, 0)] = 1.0;
            for j in 1..p {
                let k = j as f64 * std::f64::consts::PI;
                a[(i, j)] = (k * x).cos() * (-k * y).exp();
            }
            sigma[i] = if sigma_stated {
                0.1 * (1.0 + 0.3 * (i as f64 * 1.7).cos())
            } else {
                1.0
            };
        }
        for j in 1..p {
            penalty[j] = (j as f64 * std::f64::consts::PI).powi(2);
        }
        (a, sigma, penalty)
    }
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;
    use crate::inverse::Problem;
    use nalgebra::{DMatrix, DVector};

    /// An invented ill-posed problem: constant column + decaying cosine columns, σ unequal.
    fn problem(m: usize, p: usize, sigma_stated: bool) -> Problem {
        let (a, sigma, penalty) = fixture::matrices(m, p, sigma_stated);
        let truth = DVector::from_iterator(p, (0..p).map(|j| 5.0 / (1.0 + j as f64).powi(2)));
        let mut d = &a * truth;
        for i in 0..m {
            d[i] += 0.1 * ((i as f64 * 78.233).sin() * 43758.5453).fract();
        }
        Problem::new(a, d, sigma, penalty, sigma_stated).unwrap()
    }

    #[test]
    fn discrepancy_hits_its_target() {
        let dec = Decomposition::new(&problem(14, 10, true)).unwrap();
        for tau in [1.0, 1.2] {
            let opts = SelectOptions {
                tau,
                ..SelectOptions::default()
            };
            let sel = dec
                .select(Strength::Rule(StrengthMethod::Discrepancy), &opts)
                .unwrap();
            let target = tau * tau * 13.0;
            assert_eq!(sel.target, Some(target));
            assert!(
                !sel.at_grid_end,
                "τ = {tau}: the target must be reachable here"
            );
            let chi2 = dec.solve(sel.lambda).unwrap().chi_square;
            assert!(
                (chi2 - target).abs() < 1e-9 * target,
                "χ² {chi2} vs target {target}"
            );
        }
    }

    #[test]
    fn discrepancy_needs_stated_sigma() {
        let dec = Decomposition::new(&problem(14, 10, false)).unwrap();
        let e = dec
            .select(
                Strength::Rule(StrengthMethod::Discrepancy),
                &SelectOptions::default(),
            )
            .unwrap_err();
        assert!(
            e.to_string().contains("needs the reading uncertainty"),
            "{e}"
        );
    }

    /// The SVD criterion values equal dense formulas built from the influence matrix
    /// (GCV: Golub, Heath & Wahba 1979 eq. for V(λ)).
    #[test]
    fn gcv_matches_hat_matrix_formula() {
        let pr = problem(12, 16, true);
        let dec = Decomposition::new(&pr).unwrap();
        let opts = SelectOptions::default();
        for lambda in [1e-6, 1e-3, 1.0] {
            let h = dec.influence_matrix(lambda).unwrap();
            let w = pr.sigma().map(|s| 1.0 / s);
            let res = (DMatrix::identity(12, 12) - &h) * pr.d();
            let rss: f64 = res.component_mul(&w).norm_squared();
            let tr = 12.0 - h.trace();
            let v = 12.0 * rss / (tr * tr);
            let got = dec.criterion(dec.data_projection(), StrengthMethod::Gcv, lambda, &opts);
            assert!((got - v).abs() < 1e-8 * v, "λ={lambda}: {got} vs {v}");
        }
    }

    /// The closed-form L-curve curvature agrees with a finite-difference curvature of
    /// (log ‖r‖, log ‖Lc‖) computed from full solutions.
    #[test]
    fn curvature_matches_finite_differences() {
        let dec = Decomposition::new(&problem(12, 9, true)).unwrap();
        let point = |t: f64| {
            let s = dec.solve(t.exp()).unwrap();
            (0.5 * s.chi_square.ln(), 0.5 * s.penalty_norm2.ln())
        };
        for lambda in [1e-5f64, 1e-3, 1e-1] {
            let t = lambda.ln();
            let h = 1e-3;
            let (x0, y0) = point(t);
            let (xp, yp) = point(t + h);
            let (xm, ym) = point(t - h);
            let (dx, dy) = ((xp - xm) / (2.0 * h), (yp - ym) / (2.0 * h));
            let (ddx, ddy) = (
                (xp - 2.0 * x0 + xm) / (h * h),
                (yp - 2.0 * y0 + ym) / (h * h),
            );
            let k_fd = (dx * ddy - ddx * dy) / (dx * dx + dy * dy).powf(1.5);
            let k = dec.criterion(
                dec.data_projection(),
                StrengthMethod::LCurve,
                lambda,
                &SelectOptions::default(),
            );
            assert!(
                (k - k_fd).abs() < 1e-4 * (1.0 + k.abs()),
                "λ={lambda}: κ {k} vs finite differences {k_fd}"
            );
        }
    }

    #[test]
    fn every_rule_returns_a_refined_interior_choice_and_curve() {
        let dec = Decomposition::new(&problem(14, 10, true)).unwrap();
        let opts = SelectOptions::default();
        for method in [
            StrengthMethod::Gcv,
            StrengthMethod::Evidence,
            StrengthMethod::LCurve,
            StrengthMethod::Discrepancy,
        ] {
            let sel = dec.select(Strength::Rule(method), &opts).unwrap();
            assert_eq!(sel.grid.len(), 200);
            assert_eq!(sel.curve.len(), 200);
            assert!(sel.lambda > sel.grid[0] && sel.lambda < sel.grid[199]);
            assert!(!sel.at_grid_end, "{method:?}");
            assert!(sel.effective_parameters > 1.0 && sel.effective_parameters < 14.0);
            // The refined optimum is no worse than every grid value.
            match method {
                StrengthMethod::Gcv | StrengthMethod::Evidence => {
                    assert!(sel.curve.iter().all(|v| sel.criterion <= *v + 1e-12));
                }
                StrengthMethod::LCurve => {
                    assert!(sel.curve.iter().all(|v| sel.criterion >= *v - 1e-12));
                }
                StrengthMethod::Discrepancy => {}
            }
        }
        let sel = dec
            .select(
                Strength::Rule(StrengthMethod::Evidence),
                &SelectOptions::default(),
            )
            .unwrap();
        assert_eq!(sel.evidence_kind, Some(EvidenceKind::KnownSigma));
        let dec = Decomposition::new(&problem(14, 10, false)).unwrap();
        let sel = dec
            .select(
                Strength::Rule(StrengthMethod::Evidence),
                &SelectOptions::default(),
            )
            .unwrap();
        assert_eq!(sel.evidence_kind, Some(EvidenceKind::ProfiledScale));
    }

    /// Pure noise around a constant: the best smoothing is "infinitely" strong, which the
    /// rules should report as a grid-end choice.
    #[test]
    fn grid_end_is_flagged() {
        let pr = problem(14, 10, true);
        let d = DVector::from_iterator(
            14,
            (0..14).map(|i| 20.0 + 1e-3 * ((i as f64 * 3.1).sin() * 1e4).fract()),
        );
        let pr = Problem::new(
            pr.a().clone(),
            d,
            pr.sigma().clone(),
            pr.penalty().clone(),
            true,
        )
        .unwrap();
        let dec = Decomposition::new(&pr).unwrap();
        let sel = dec
            .select(
                Strength::Rule(StrengthMethod::Discrepancy),
                &SelectOptions::default(),
            )
            .unwrap();
        assert!(sel.at_grid_end);
        assert_eq!(sel.lambda, *sel.grid.last().unwrap());
        let sel = dec
            .select(
                Strength::Rule(StrengthMethod::Evidence),
                &SelectOptions::default(),
            )
            .unwrap();
        assert!(sel.at_grid_end);
    }

    #[test]
    fn fixed_strength_and_names() {
        let dec = Decomposition::new(&problem(10, 6, true)).unwrap();
        let sel = dec
            .select(Strength::Fixed(0.3), &SelectOptions::default())
            .unwrap();
        assert_eq!(sel.lambda, 0.3);
        assert!(sel.grid.is_empty());
        assert!(
            dec.select(Strength::Fixed(-1.0), &SelectOptions::default())
                .is_err()
        );
        for m in ["gcv", "discrepancy", "evidence", "lcurve"] {
            assert_eq!(StrengthMethod::parse(m).unwrap().name(), m);
        }
        assert!(StrengthMethod::parse("aic").is_none());
    }

    /// A chi-square curve that overflowed (NaN everywhere, as with a reading sigma of 1e-200)
    /// brackets no root: a non-finite result the caller reports, never a panic.
    #[test]
    fn discrepancy_root_on_an_overflowed_curve() {
        let xs = [-2.0, -1.0, 0.0, 1.0];
        let nan = [f64::NAN; 4];
        let (_, c, at_end) = discrepancy_root(&|_| f64::NAN, &xs, &nan, 4.0);
        assert!(c.is_nan() && at_end);
        // a finite monotone curve still finds its root: chi2 = 10^x, target 3 -> x = log10 3
        let vals: Vec<f64> = xs.iter().map(|x| 10f64.powf(*x)).collect();
        let (x, c, at_end) = discrepancy_root(&|x| 10f64.powf(x), &xs, &vals, 3.0);
        assert!(!at_end && (x - 3f64.log10()).abs() < 1e-9 && (c - 3.0).abs() < 1e-8);
    }

    /// Re-selecting for new data on the same decomposition equals a fresh decomposition.
    #[test]
    fn select_for_new_data_matches_fresh_decomposition() {
        let pr = problem(12, 9, true);
        let dec = Decomposition::new(&pr).unwrap();
        let d2 = pr.d().map(|v| 1.1 * v - 0.4);
        let pr2 = Problem::new(
            pr.a().clone(),
            d2.clone(),
            pr.sigma().clone(),
            pr.penalty().clone(),
            true,
        )
        .unwrap();
        let dec2 = Decomposition::new(&pr2).unwrap();
        let proj = dec.projection(&d2).unwrap();
        let opts = SelectOptions {
            keep_curve: false,
            ..SelectOptions::default()
        };
        for method in [StrengthMethod::Gcv, StrengthMethod::Evidence] {
            let a = dec
                .select_for(&proj, Strength::Rule(method), &opts)
                .unwrap();
            let b = dec2.select(Strength::Rule(method), &opts).unwrap();
            assert!((a.lambda.ln() - b.lambda.ln()).abs() < 1e-8);
            assert!(a.curve.is_empty());
        }
    }
}
