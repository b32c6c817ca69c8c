//! Weighted Tikhonov regularisation with a diagonal penalty, brought to standard form once so
//! that every strength λ — and every new data vector — is cheap.
//!
//! ## The decomposition
//!
//! Write `A_w = W A`, `d_w = W d`, and split the coefficients into the unpenalised set N
//! (`l_j = 0`, q of them) and the penalised set P (n = p − q of them), `L_P = diag(l_j, j ∈ P)`.
//! Following the standard-form transformation for a penalty with a null space (Eldén 1982,
//! BIT 22:487–502; Hansen, *Rank-Deficient and Discrete Ill-Posed Problems*, SIAM 1998,
//! §2.3.1):
//!
//! 1. Thin QR of the unpenalised columns: `A_w,N = Q₁ R₁` (m × q, q × q). With the projector
//!    `P⊥ = I − Q₁Q₁ᵀ`, minimising (1) of the module doc over `c_N` for fixed `c_P` gives
//!
//!    ```text
//!    c_N = R₁⁻¹ Q₁ᵀ (d_w − A_w,P c_P) = R₁⁻¹ Q₁ᵀ d_w − B c_P,   B = R₁⁻¹ Q₁ᵀ A_w,P      (2)
//!    ```
//!
//!    and leaves, with `y = L_P c_P`, the standard-form problem
//!
//!    ```text
//!    min ‖Ã y − P⊥ d_w‖² + λ ‖y‖²,     Ã = P⊥ A_w,P L_P⁻¹                            (3)
//!    ```
//!
//! 2. One thin SVD `Ã = U diag(g) Vᵀ`, kept to the r singular values above
//!    `g_max · max(m, n) · ε` (at most `m − q` are non-zero, since `P⊥` has rank `m − q`).
//!    With `β = Uᵀ d_w` (= `Uᵀ P⊥ d_w`) and filter factors `f_i = g_i² / (g_i² + λ)`:
//!
//!    ```text
//!    y = Σ_i f_i β_i / g_i v_i,        c_P = L_P⁻¹ y                                  (4)
//!    ```
//!
//! 3. The part of the data no coefficient can fit is `δ₀ = ‖P⊥ d_w − U β‖²`, so that the
//!    weighted chi-square is `χ²(λ) = Σ_i (1 − f_i)² β_i² + δ₀`.
//!
//! The influence ("hat") matrix in weighted space is `H = Q₁Q₁ᵀ + U diag(f) Uᵀ`, so
//! `trace H = q + Σ f_i` (the effective number of parameters) and the leverages are
//! `H_ii = Σ_k Q₁,ik² + Σ_j U_ij² f_j`. In data units the smoother is `W⁻¹ H W`, which has the
//! same diagonal.
//!
//! ## Posterior covariance and resolution
//!
//! With `M = A_wᵀA_w + λ LᵀL`, the posterior covariance (Gaussian noise, prior `y ~ N(0, I/λ)`,
//! flat prior on `c_N`; Wahba 1983, J. R. Statist. Soc. B 45:133–150) is `C = M⁻¹`. By block
//! elimination of the N block (`M_NN = R₁ᵀR₁`) the Schur complement is
//! `S = L_P (ÃᵀÃ + λ I) L_P`, hence
//!
//! ```text
//! C_PP = L_P⁻¹ [ V diag(1/(g_i² + λ)) Vᵀ + V⊥V⊥ᵀ / λ ] L_P⁻¹
//! C_NP = −B C_PP,      C_NN = R₁⁻¹R₁⁻ᵀ + B C_PP Bᵀ                                 (5)
//! ```
//!
//! where `V⊥` completes V to an orthonormal basis of ℝⁿ (the directions the data do not see,
//! whose spread is the prior's, 1/λ). Both terms are positive semi-definite: no cancellation.
//!
//! The model resolution matrix `R = M⁻¹ A_wᵀA_w` (noise-free estimate = R · truth; Backus &
//! Gilbert 1968; Menke, *Geophysical Data Analysis*, ch. 4) follows from (2)–(4):
//!
//! ```text
//! R_PP = L_P⁻¹ V diag(f) Vᵀ L_P,   R_PN = 0,   R_NN = I,   R_NP = B (I − R_PP)        (6)
//! ```
//!
//! (equal to `I − λ C LᵀL`; a unit test checks the identity).
//!
//! ## The fast path
//!
//! For a new data vector (a bootstrap replicate) [`Decomposition::project_into`] fills a
//! reusable [`Projection`] (β, δ₀, `R₁⁻¹Q₁ᵀd_w`) in O(m·(q + r)) without allocating;
//! [`Decomposition::coefficients_into`] then gives `c` in O(n·r + q·n), and
//! [`Decomposition::select_for`](crate::inverse::Decomposition::select_for) chooses λ for it
//! on the same decomposition.

use super::Problem;
use crate::error::{Error, Result};
use crate::simd::{gemv, gemv_tr};
use nalgebra::{DMatrix, DVector};

/// Singular values of `Ã` below `g_max · max(m, n) · ε` are treated as zero (the usual
/// numerical-rank threshold, Golub & Van Loan, *Matrix Computations*, 4th ed., §5.4.1).
fn rank_tolerance(g_max: f64, m: usize, n: usize) -> f64 {
    g_max * (m.max(n) as f64) * f64::EPSILON
}

/// The unpenalised columns must be independent at the sensors: their condition number in
/// weighted space must stay below this (common practice: 1/√ε-level conditioning leaves no
/// significant digit in `c_N`).
const NULL_SPACE_MAX_CONDITION: f64 = 1e10;

/// The data-dependent part of the decomposition: everything the strength rules and the
/// coefficients need from one data vector. Reusable: [`Decomposition::project_into`] refills
/// it without allocating.
#[derive(Debug, Clone)]
pub struct Projection {
    /// The data d (unweighted, minus the known offset).
    pub(crate) d: DVector<f64>,
    /// β = Uᵀ W d, length r.
    pub(crate) beta: DVector<f64>,
    /// δ₀ = ‖P⊥ W d − U β‖², the part of the data no coefficient can fit.
    pub(crate) delta0: f64,
    /// R₁⁻¹ Q₁ᵀ W d, length q (the null-space coefficients before the correction −B c_P).
    pub(crate) null_coef: DVector<f64>,
    /// Q₁ᵀ W d, length q (scratch).
    z: DVector<f64>,
    /// Length-m scratch.
    work: DVector<f64>,
}

impl Projection {
    /// β = Uᵀ W d: the data's components along the left singular vectors of the standard form.
    pub fn beta(&self) -> &DVector<f64> {
        &self.beta
    }
    /// δ₀: the weighted squared norm of the part of the data no coefficient can fit.
    pub fn delta0(&self) -> f64 {
        self.delta0
    }
    /// The data vector this projection was made from.
    pub fn data(&self) -> &DVector<f64> {
        &self.d
    }

    /// Make `self` a copy of `other`, in place when the sizes agree (`clone_from` of the
    /// derived `Clone` would allocate every vector again). The scratch vectors are only
    /// resized: [`Decomposition::project_into`] writes them before it reads them.
    pub fn copy_from(&mut self, other: &Projection) {
        fn copy(to: &mut DVector<f64>, from: &DVector<f64>) {
            if to.len() == from.len() {
                to.as_mut_slice().copy_from_slice(from.as_slice());
            } else {
                *to = from.clone();
            }
        }
        copy(&mut self.d, &other.d);
        copy(&mut self.beta, &other.beta);
        self.delta0 = other.delta0;
        copy(&mut self.null_coef, &other.null_coef);
        for (to, from) in [(&mut self.z, &other.z), (&mut self.work, &other.work)] {
            if to.len() != from.len() {
                *to = from.clone();
            }
        }
    }
}

/// The decomposition of a [`Problem`]: null-space elimination plus one SVD, built once and
/// shared by every λ and every data vector.
#[derive(Debug, Clone)]
pub struct Decomposition {
    pub(crate) m: usize,
    pub(crate) p: usize,
    pub(crate) q: usize,
    null_idx: Vec<usize>,
    pen_idx: Vec<usize>,
    a: DMatrix<f64>,
    sigma: DVector<f64>,
    inv_sigma: DVector<f64>,
    l_pen: DVector<f64>,
    q1: DMatrix<f64>,
    r1_inv: DMatrix<f64>,
    b: DMatrix<f64>,
    u: DMatrix<f64>,
    pub(crate) g: DVector<f64>,
    v: DMatrix<f64>,
    v_perp: DMatrix<f64>,
    pub(crate) sigma_stated: bool,
    data: Projection,
    /// `Σ_k Q₁,ik²` per datum: the λ-independent part of the leverages.
    lev_null: Vec<f64>,
}

/// The regularised solution at one λ, with its diagnostics. Quantities named "weighted" use
/// `W = diag(1/σ)`.
#[derive(Debug, Clone)]
pub struct Solution {
    /// The strength λ (the convention of `docs/method.md`: it multiplies ‖L c‖²).
    pub lambda: f64,
    /// The coefficients c, length p.
    pub coefficients: DVector<f64>,
    /// The fitted data A c (without the known offset), length m.
    pub fitted: DVector<f64>,
    /// The residuals d − A c, length m.
    pub residuals: DVector<f64>,
    /// The filter factors f_i = g_i² / (g_i² + λ), one per kept singular value, in [0, 1].
    pub filter_factors: DVector<f64>,
    /// trace H = q + Σ f_i: the effective number of parameters, between q and m.
    pub effective_parameters: f64,
    /// The leverages diag(H), length m, each in [0, 1].
    pub leverages: DVector<f64>,
    /// The weighted chi-square ‖W (A c − d)‖².
    pub chi_square: f64,
    /// The penalty ‖L c‖².
    pub penalty_norm2: f64,
    /// The posterior covariance (AᵀW²A + λ LᵀL)⁻¹, p × p, equation (5) of the module doc.
    /// Scaled by σ² already when σ is stated; multiply by [`Self::sigma2_estimate`] otherwise.
    pub covariance: DMatrix<f64>,
    /// The model resolution matrix (AᵀW²A + λ LᵀL)⁻¹ AᵀW²A, p × p, equation (6).
    pub resolution: DMatrix<f64>,
    /// The number of data, m.
    pub data_count: usize,
    /// The number of unpenalised coefficients, q.
    pub null_dimension: usize,
}

impl Solution {
    /// The residual degrees of freedom m − trace H.
    pub fn residual_dof(&self) -> f64 {
        self.data_count as f64 - self.effective_parameters
    }

    /// The noise-variance estimate σ̂² = ‖W (A c − d)‖² / (m − trace H).
    ///
    /// With unit weights (σ not stated) this is the usual residual-variance estimate of a
    /// linear smoother, σ̂² = ‖A c − d‖² / tr(I − H) (Wahba, *Spline Models for Observational
    /// Data*, SIAM 1990, §4.7; Hastie & Tibshirani, *Generalized Additive Models*, 1990, §3.4);
    /// with stated σ it is the variance factor (reduced chi-square), ≈ 1 when σ is right.
    /// `None` when m − trace H is not positive (an interpolating fit leaves nothing to
    /// estimate from).
    pub fn sigma2_estimate(&self) -> Option<f64> {
        let dof = self.residual_dof();
        (dof > 1e-9).then(|| self.chi_square / dof)
    }
}

fn check_lambda(lambda: f64) -> Result<()> {
    if lambda.is_finite() && lambda > 0.0 {
        Ok(())
    } else {
        Err(Error::invalid_field(
            "fit.strength",
            format!("regularisation strength {lambda} must be a positive finite number"),
        ))
    }
}

/// Penalised coefficients per pass of [`filtered_sums`].
const FILTER_ROWS: usize = 8;

crate::simd::avx2_dispatch! {
    /// `out[l] = Σ_i V[first + l, i] g_i β_i / (g_i² + λ)` for the `out.len()` (at most
    /// [`FILTER_ROWS`]) rows of `V` from `first` (`v` column-major with `rows` rows, `g` and
    /// `β` one value per column): each sum the terms `((V g) β) / (g² + λ)` added in the order of
    /// `i` from zero, as a loop over `i` for one row adds them; the rows side by side, so that
    /// their divisions go four to an instruction in the AVX2 build.
    fn filtered_sums(
        v: &[f64],
        at: (usize, usize),
        filter: (&[f64], &[f64], f64),
        out: &mut [f64],
    ) = filtered_sums_body;
}

/// The body of [`filtered_sums`].
#[inline(always)]
fn filtered_sums_body(
    v: &[f64],
    (rows, first): (usize, usize),
    (g, beta, lambda): (&[f64], &[f64], f64),
    out: &mut [f64],
) {
    let len = out.len().min(FILTER_ROWS);
    let mut acc = [0.0_f64; FILTER_ROWS];
    for (i, (&gi, &bi)) in g.iter().zip(beta).enumerate() {
        let den = gi * gi + lambda;
        let column = &v[i * rows + first..];
        if len == FILTER_ROWS {
            if let Some(col) = column.first_chunk::<FILTER_ROWS>() {
                for (a, &x) in acc.iter_mut().zip(col) {
                    *a += x * gi * bi / den;
                }
                continue;
            }
        }
        for (a, &x) in acc.iter_mut().zip(&column[..len]) {
            *a += x * gi * bi / den;
        }
    }
    out[..len].copy_from_slice(&acc[..len]);
}

impl Decomposition {
    /// Decompose a problem: scale by W, eliminate the unpenalised columns, and take one SVD of
    /// the standard form `Ã = P⊥ W A_P L_P⁻¹` (module doc, (2)–(3)).
    ///
    /// # Errors
    /// [`Error::Invalid`] when the unpenalised columns are (numerically) dependent at the
    /// sensors, so that their coefficients are not determined; [`Error::Internal`] if the SVD
    /// fails to converge.
    pub fn new(problem: &Problem) -> Result<Self> {
        let a = problem.a().clone();
        let (m, p) = a.shape();
        let sigma = problem.sigma().clone();
        let inv_sigma = sigma.map(|s| 1.0 / s);
        let penalty = problem.penalty();
        let null_idx: Vec<usize> = (0..p).filter(|&j| penalty[j] == 0.0).collect();
        let pen_idx: Vec<usize> = (0..p).filter(|&j| penalty[j] != 0.0).collect();
        let (q, n) = (null_idx.len(), pen_idx.len());

        let mut aw = a.clone();
        for (i, mut row) in aw.row_iter_mut().enumerate() {
            row *= inv_sigma[i];
        }
        let aw_n = aw.select_columns(&null_idx);
        let aw_p = aw.select_columns(&pen_idx);

        // Null space: check independence, then thin QR.
        let (q1, r1_inv) = if q > 0 {
            let s = aw_n.clone().singular_values();
            let (smax, smin) = (s.max(), s.min());
            if !(smax > 0.0 && smin * NULL_SPACE_MAX_CONDITION > smax) {
                return Err(Error::invalid_field(
                    "inverse.a",
                    format!(
                        "the {q} unpenalised coefficient(s) (columns {}) are not independent at \
                         these sensor positions (condition number {:.3e}): move or add sensors, \
                         or penalise one of them",
                        null_idx
                            .iter()
                            .map(|j| (j + 1).to_string())
                            .collect::<Vec<_>>()
                            .join(", "),
                        if smin > 0.0 {
                            smax / smin
                        } else {
                            f64::INFINITY
                        }
                    ),
                ));
            }
            let qr = aw_n.qr();
            let q1 = qr.q();
            let r1 = qr.r();
            let r1_inv = r1
                .solve_upper_triangular(&DMatrix::identity(q, q))
                .ok_or_else(|| Error::Internal("singular R factor of the null space".into()))?;
            (q1, r1_inv)
        } else {
            (DMatrix::zeros(m, 0), DMatrix::zeros(0, 0))
        };

        // B = R₁⁻¹ Q₁ᵀ A_w,P and Ã = P⊥ A_w,P L_P⁻¹.
        let qt_ap = q1.transpose() * &aw_p;
        let b = &r1_inv * &qt_ap;
        let mut a_tilde = aw_p - &q1 * &qt_ap;
        let l_pen = DVector::from_iterator(n, pen_idx.iter().map(|&j| penalty[j]));
        for (jj, mut col) in a_tilde.column_iter_mut().enumerate() {
            col /= l_pen[jj];
        }

        let (u, g, v) = if n > 0 {
            let svd = a_tilde
                .try_svd(true, true, f64::EPSILON, 1_000_000)
                .ok_or_else(|| {
                    Error::Internal("the SVD of the standard form did not converge".into())
                })?;
            let (Some(u_full), Some(vt_full)) = (svd.u, svd.v_t) else {
                return Err(Error::Internal(
                    "the SVD returned no singular vectors".into(),
                ));
            };
            let s = svd.singular_values;
            let g_max = s.max();
            let tol = rank_tolerance(g_max, m, n);
            let r = s
                .iter()
                .take_while(|&&x| g_max > 0.0 && x > tol)
                .count()
                .min(m - q);
            (
                u_full.columns(0, r).into_owned(),
                s.rows(0, r).into_owned(),
                vt_full.rows(0, r).transpose(),
            )
        } else {
            (
                DMatrix::zeros(m, 0),
                DVector::zeros(0),
                DMatrix::zeros(0, 0),
            )
        };
        let r = g.len();

        // V⊥: Householder QR of [V | I] gives an orthogonal n × n factor whose first r columns
        // span V; the rest complete the basis.
        let v_perp = if r < n {
            let mut stacked = DMatrix::zeros(n, r + n);
            stacked.columns_mut(0, r).copy_from(&v);
            stacked
                .columns_mut(r, n)
                .copy_from(&DMatrix::<f64>::identity(n, n));
            let qfull = stacked.qr().q();
            qfull.columns(r, n - r).into_owned()
        } else {
            DMatrix::zeros(n, 0)
        };

        let data = Projection {
            d: DVector::zeros(m),
            beta: DVector::zeros(r),
            delta0: 0.0,
            null_coef: DVector::zeros(q),
            z: DVector::zeros(q),
            work: DVector::zeros(m),
        };
        let mut dec = Decomposition {
            m,
            p,
            q,
            null_idx,
            pen_idx,
            a,
            sigma,
            inv_sigma,
            l_pen,
            q1,
            r1_inv,
            b,
            u,
            g,
            v,
            v_perp,
            sigma_stated: problem.sigma_stated(),
            data,
            lev_null: Vec::new(),
        };
        let mut lev_null = vec![0.0; m];
        for col in dec.q1.as_slice().chunks_exact(m.max(1)).take(dec.q) {
            for (o, &v) in lev_null.iter_mut().zip(col) {
                *o += v * v;
            }
        }
        dec.lev_null = lev_null;
        let mut proj = dec.empty_projection();
        dec.project_into(problem.d(), &mut proj)?;
        dec.data = proj;
        Ok(dec)
    }

    /// The number of data, m.
    pub fn data_count(&self) -> usize {
        self.m
    }
    /// The number of coefficients, p.
    pub fn coefficient_count(&self) -> usize {
        self.p
    }
    /// The number of unpenalised coefficients, q.
    pub fn null_dimension(&self) -> usize {
        self.q
    }
    /// The kept singular values g of the standard form, descending (their number is the
    /// numerical rank r ≤ min(m − q, p − q)).
    pub fn singular_values(&self) -> &DVector<f64> {
        &self.g
    }
    /// Whether σ was stated (see [`Problem::new`]).
    pub fn sigma_stated(&self) -> bool {
        self.sigma_stated
    }
    /// The projection of the problem's own data.
    pub fn data_projection(&self) -> &Projection {
        &self.data
    }

    /// A projection with buffers of the right sizes, to be filled by
    /// [`Self::project_into`].
    pub fn empty_projection(&self) -> Projection {
        Projection {
            d: DVector::zeros(self.m),
            beta: DVector::zeros(self.g.len()),
            delta0: 0.0,
            null_coef: DVector::zeros(self.q),
            z: DVector::zeros(self.q),
            work: DVector::zeros(self.m),
        }
    }

    /// Project a new data vector (same sensors, same σ): allocates a [`Projection`].
    ///
    /// # Errors
    /// As [`Self::project_into`].
    pub fn projection(&self, d: &DVector<f64>) -> Result<Projection> {
        let mut proj = self.empty_projection();
        self.project_into(d, &mut proj)?;
        Ok(proj)
    }

    /// Refill `proj` for the data vector `d` without allocating: `z = Q₁ᵀ W d`,
    /// `R₁⁻¹ z`, `β = Uᵀ P⊥ W d`, `δ₀ = ‖P⊥ W d − U β‖²`. O(m·(q + r)).
    ///
    /// # Errors
    /// [`Error::Invalid`] when `d` has the wrong length or a non-finite value.
    pub fn project_into(&self, d: &DVector<f64>, proj: &mut Projection) -> Result<()> {
        if d.len() != self.m {
            return Err(Error::invalid_field(
                "inverse.d",
                format!("{} data for a decomposition of {} data", d.len(), self.m),
            ));
        }
        if let Some(i) = d.iter().position(|v| !v.is_finite()) {
            return Err(Error::invalid_field(
                "inverse.d",
                format!("datum {} is not finite ({})", i + 1, d[i]),
            ));
        }
        if proj.d.len() != self.m
            || proj.beta.len() != self.g.len()
            || proj.null_coef.len() != self.q
        {
            *proj = self.empty_projection();
        }
        proj.d.copy_from(d);
        proj.work.copy_from(d);
        proj.work.component_mul_assign(&self.inv_sigma);
        gemv_tr(&mut proj.z, &self.q1, &proj.work);
        gemv(&mut proj.null_coef, &self.r1_inv, &proj.z, false);
        gemv(&mut proj.work, &self.q1, &proj.z, true);
        gemv_tr(&mut proj.beta, &self.u, &proj.work);
        proj.delta0 = if self.g.len() + self.q == self.m {
            // U's r = m − q orthonormal columns span the complement of Q₁'s: the residual
            // P⊥ W d − U β is zero but for rounding, and δ₀ = 0 exactly
            0.0
        } else {
            gemv(&mut proj.work, &self.u, &proj.beta, true);
            proj.work.norm_squared()
        };
        Ok(())
    }

    /// A coefficient vector must have length p.
    fn check_coefficient_len(&self, c: &DVector<f64>) -> Result<()> {
        if c.len() != self.p {
            return Err(Error::invalid_field(
                "inverse.coefficients",
                format!("{} coefficients, expected {}", c.len(), self.p),
            ));
        }
        Ok(())
    }

    /// The coefficients for a projected data vector at strength λ, written into `c`
    /// (length p) without allocating: equations (4) then (2). O(n·r + q·n).
    ///
    /// # Errors
    /// [`Error::Invalid`] when λ is not positive and finite or `c` has the wrong length.
    pub fn coefficients_into(
        &self,
        proj: &Projection,
        lambda: f64,
        c: &mut DVector<f64>,
    ) -> Result<()> {
        check_lambda(lambda)?;
        self.check_coefficient_len(c)?;
        // Σ_i V_{jj,i} g_i β_i / (g_i² + λ) for every penalised coefficient jj, then over its
        // penalty weight
        let mut block = [0.0; FILTER_ROWS];
        for (at, idx) in self.pen_idx.chunks(FILTER_ROWS).enumerate() {
            let sums = &mut block[..idx.len()];
            filtered_sums(
                self.v.as_slice(),
                (self.v.nrows(), at * FILTER_ROWS),
                (self.g.as_slice(), proj.beta.as_slice(), lambda),
                sums,
            );
            for (l, (&j, &s)) in idx.iter().zip(sums.iter()).enumerate() {
                c[j] = s / self.l_pen[at * FILTER_ROWS + l];
            }
        }
        for (k, &j) in self.null_idx.iter().enumerate() {
            let mut s = proj.null_coef[k];
            for (jj, &jp) in self.pen_idx.iter().enumerate() {
                s -= self.b[(k, jj)] * c[jp];
            }
            c[j] = s;
        }
        Ok(())
    }

    /// [`Self::coefficients_into`] with the filter applied once per singular value
    /// (`φ_i = g_i β_i / (g_i² + λ)`, r divisions) instead of once per coefficient and
    /// singular value (n·r divisions), and `V φ` summed a column of V at a time. The numbers
    /// differ from [`Self::coefficients_into`]'s by rounding only. `work` is scratch (no
    /// allocation once it has grown).
    ///
    /// # Errors
    /// As [`Self::coefficients_into`].
    pub fn coefficients_fast_into(
        &self,
        proj: &Projection,
        lambda: f64,
        work: &mut Vec<f64>,
        c: &mut DVector<f64>,
    ) -> Result<()> {
        check_lambda(lambda)?;
        self.check_coefficient_len(c)?;
        let n = self.pen_idx.len();
        work.clear();
        work.resize(n, 0.0);
        if n > 0 {
            for ((col, &g), &b) in self
                .v
                .as_slice()
                .chunks_exact(n)
                .zip(self.g.iter())
                .zip(proj.beta.iter())
            {
                let phi = g * b / (g * g + lambda);
                for (w, &v) in work.iter_mut().zip(col) {
                    *w += v * phi;
                }
            }
        }
        for (jj, &j) in self.pen_idx.iter().enumerate() {
            work[jj] /= self.l_pen[jj];
            c[j] = work[jj];
        }
        for (k, &j) in self.null_idx.iter().enumerate() {
            let mut s = proj.null_coef[k];
            for (jj, &cp) in work.iter().enumerate() {
                s -= self.b[(k, jj)] * cp;
            }
            c[j] = s;
        }
        Ok(())
    }

    /// A linear map `M` of the coefficients (rows × p) in the singular basis: the rows ×
    /// (r + q) matrix `[M K | M_N]` with `K = [L_P⁻¹ V ; −B L_P⁻¹ V]` (equations (2) and (4) of
    /// the module doc) and `M_N` the unpenalised columns of `M`, so that
    /// `M c(λ) = [M K | M_N] x(λ)` with `x(λ)` from [`Self::basis_weights_into`]. For maps
    /// applied to one data vector after another at changing λ (the rows of a logger file):
    /// O(rows · (r + q)) per vector instead of O(n·r) for `c` plus O(rows · p) for `M c`.
    /// The numbers differ from `M` times [`Self::coefficients_into`] by rounding only.
    ///
    /// # Errors
    /// [`Error::Invalid`] when `M` does not have p columns.
    pub fn basis_map(&self, map: &DMatrix<f64>) -> Result<DMatrix<f64>> {
        if map.ncols() != self.p {
            return Err(Error::invalid_field(
                "inverse.a",
                format!(
                    "a map of {} columns for {} coefficients",
                    map.ncols(),
                    self.p
                ),
            ));
        }
        let (r, q) = (self.g.len(), self.q);
        let mut k_p = self.v.clone(); // n × r
        for (jj, mut row) in k_p.row_iter_mut().enumerate() {
            row /= self.l_pen[jj];
        }
        let m_p = map.select_columns(&self.pen_idx);
        let m_n = map.select_columns(&self.null_idx);
        let mut out = DMatrix::zeros(map.nrows(), r + q);
        if r > 0 {
            let mut mk = &m_p * &k_p;
            if q > 0 {
                mk -= &m_n * (&self.b * &k_p);
            }
            out.columns_mut(0, r).copy_from(&mk);
        }
        if q > 0 {
            out.columns_mut(r, q).copy_from(&m_n);
        }
        Ok(out)
    }

    /// The weights `x(λ)` of [`Self::basis_map`] for a projected data vector: `φ_i = g_i β_i /
    /// (g_i² + λ)` (r values, the filtered data of equation (4)) then `R₁⁻¹ Q₁ᵀ W d` (q
    /// values), written into `x` (resized to r + q).
    ///
    /// # Errors
    /// [`Error::Invalid`] when λ is not positive and finite.
    pub fn basis_weights_into(
        &self,
        proj: &Projection,
        lambda: f64,
        x: &mut DVector<f64>,
    ) -> Result<()> {
        check_lambda(lambda)?;
        let r = self.g.len();
        if x.len() != r + self.q {
            *x = DVector::zeros(r + self.q);
        }
        for ((o, &g), &b) in x.iter_mut().zip(self.g.iter()).zip(proj.beta.iter()) {
            *o = g * b / (g * g + lambda);
        }
        for (o, &v) in x.iter_mut().skip(r).zip(proj.null_coef.iter()) {
            *o = v;
        }
        Ok(())
    }

    /// The fitted data A c (without the known offset), written into `out` (length m).
    ///
    /// # Errors
    /// [`Error::Invalid`] on a length mismatch.
    pub fn predict_into(&self, c: &DVector<f64>, out: &mut DVector<f64>) -> Result<()> {
        if c.len() != self.p || out.len() != self.m {
            return Err(Error::invalid_field(
                "inverse.coefficients",
                format!(
                    "lengths {} and {} do not match a {} × {} model",
                    c.len(),
                    out.len(),
                    self.m,
                    self.p
                ),
            ));
        }
        gemv(out, &self.a, c, false);
        Ok(())
    }

    /// Posterior variances `a C(λ) aᵀ` of the linear functional `a · c` (for a new sensor-map
    /// row `a`, length p) at every λ in `lambdas`, without forming `C(λ)`.
    ///
    /// With `w = L_P⁻¹ (a_P − a_N B)` (constant in λ):
    /// `a C aᵀ = Σ_k (w·v_k)² / (g_k² + λ) + ‖V⊥ᵀ w‖² / λ + ‖a_N R₁⁻¹‖²`,
    /// which follows from the block form of the covariance (5) of the module doc. Cost
    /// O(p·r) once, then O(r) per λ.
    ///
    /// # Errors
    /// [`Error::Invalid`] when `a` has the wrong length.
    pub fn predictive_variances(&self, a: &DVector<f64>, lambdas: &[f64]) -> Result<Vec<f64>> {
        let (proj_v, perp, null) = self.predictive_variance_parts(a)?;
        Ok(lambdas
            .iter()
            .map(|&lam| self.predictive_variance_at(proj_v.as_slice(), perp, null, lam))
            .collect())
    }

    /// The parts of [`Self::predictive_variances`] that do not depend on λ, for the
    /// functional `a · c`: `(Vᵀ w, ‖V⊥ᵀ w‖², ‖a_N R₁⁻¹‖²)` with `w = L_P⁻¹ (a_P − a_N B)`.
    /// For a caller that needs the variance of the same functionals at many λ (one per row
    /// of a log): O(p·r) once here, then O(r) per λ in [`Self::predictive_variance_at`].
    ///
    /// # Errors
    /// [`Error::Invalid`] when `a` has the wrong length.
    pub fn predictive_variance_parts(&self, a: &DVector<f64>) -> Result<(DVector<f64>, f64, f64)> {
        if a.len() != self.p {
            return Err(Error::invalid_field(
                "inverse.a",
                format!("a row of length {} for {} coefficients", a.len(), self.p),
            ));
        }
        let a_n = DVector::from_iterator(self.q, self.null_idx.iter().map(|&j| a[j]));
        let a_p = DVector::from_iterator(self.pen_idx.len(), self.pen_idx.iter().map(|&j| a[j]));
        let mut w = a_p - self.b.tr_mul(&a_n);
        w.component_div_assign(&self.l_pen);
        let proj_v = self.v.tr_mul(&w);
        let perp = if self.v_perp.ncols() > 0 {
            self.v_perp.tr_mul(&w).norm_squared()
        } else {
            0.0
        };
        let null = self.r1_inv.tr_mul(&a_n).norm_squared();
        Ok((proj_v, perp, null))
    }

    /// `a C(λ) aᵀ` from [`Self::predictive_variance_parts`]:
    /// `Σ_k (w·v_k)² / (g_k² + λ) + ‖V⊥ᵀ w‖² / λ + ‖a_N R₁⁻¹‖²` (what
    /// [`Self::predictive_variances`] evaluates at each of its λ).
    pub fn predictive_variance_at(&self, proj_v: &[f64], perp: f64, null: f64, lambda: f64) -> f64 {
        let seen: f64 = proj_v
            .iter()
            .zip(self.g.iter())
            .map(|(pv, g)| pv * pv / (g * g + lambda))
            .sum();
        seen + perp / lambda + null
    }

    /// The filter factors f_i = g_i² / (g_i² + λ).
    pub fn filter_factors(&self, lambda: f64) -> DVector<f64> {
        self.g.map(|g| g * g / (g * g + lambda))
    }

    /// The leverages diag(H) at λ (the diagonal of [`Self::influence_matrix`]) written into
    /// `out` without forming H: `H_ii = Σ_k Q₁,ik² + Σ_j U_ij² f_j` (module doc), O(m·(q + r))
    /// instead of O(m²·r).
    ///
    /// # Errors
    /// [`Error::Invalid`] when λ is not positive and finite.
    pub fn leverages_into(&self, lambda: f64, out: &mut Vec<f64>) -> Result<()> {
        check_lambda(lambda)?;
        out.clear();
        // the null-space part, summed once at construction in this same order
        out.extend_from_slice(&self.lev_null);
        add_leverages(self.u.as_slice(), self.m, self.g.as_slice(), lambda, out);
        Ok(())
    }

    /// The influence matrix in data units, S = W⁻¹ H W with H = Q₁Q₁ᵀ + U diag(f) Uᵀ, so that
    /// the fitted data are A c = S d. Its diagonal is the leverages. m × m.
    ///
    /// # Errors
    /// [`Error::Invalid`] when λ is not positive and finite.
    pub fn influence_matrix(&self, lambda: f64) -> Result<DMatrix<f64>> {
        check_lambda(lambda)?;
        let f = self.filter_factors(lambda);
        let mut uf = self.u.clone();
        for (i, mut col) in uf.column_iter_mut().enumerate() {
            col *= f[i];
        }
        let mut h = &self.q1 * self.q1.transpose() + uf * self.u.transpose();
        for i in 0..self.m {
            for j in 0..self.m {
                h[(i, j)] *= self.sigma[i] / self.sigma[j];
            }
        }
        Ok(h)
    }

    /// The full solution for the problem's own data at strength λ.
    ///
    /// # Errors
    /// [`Error::Invalid`] when λ is not positive and finite.
    pub fn solve(&self, lambda: f64) -> Result<Solution> {
        self.solve_for(&self.data, lambda)
    }

    /// The full solution for a projected data vector at strength λ: coefficients, fit,
    /// diagnostics, covariance (5) and resolution (6). O(p²·r + p³) for the matrices; use
    /// [`Self::coefficients_into`] when only the coefficients are needed.
    ///
    /// # Errors
    /// [`Error::Invalid`] when λ is not positive and finite.
    pub fn solve_for(&self, proj: &Projection, lambda: f64) -> Result<Solution> {
        check_lambda(lambda)?;
        let (m, p, q) = (self.m, self.p, self.q);
        let n = self.pen_idx.len();
        let r = self.g.len();

        let mut c = DVector::zeros(p);
        self.coefficients_into(proj, lambda, &mut c)?;
        let mut fitted = DVector::zeros(m);
        self.predict_into(&c, &mut fitted)?;
        let residuals = &proj.d - &fitted;
        let chi_square = residuals
            .iter()
            .zip(self.inv_sigma.iter())
            .map(|(e, w)| (e * w).powi(2))
            .sum::<f64>();
        let penalty_norm2 = self
            .pen_idx
            .iter()
            .enumerate()
            .map(|(jj, &j)| (self.l_pen[jj] * c[j]).powi(2))
            .sum::<f64>();

        let f = self.filter_factors(lambda);
        let effective_parameters = q as f64 + f.sum();
        let leverages = DVector::from_iterator(
            m,
            (0..m).map(|i| {
                let null: f64 = (0..q).map(|k| self.q1[(i, k)].powi(2)).sum();
                let pen: f64 = (0..r).map(|j| self.u[(i, j)].powi(2) * f[j]).sum();
                null + pen
            }),
        );

        // C̃ = V diag(1/(g²+λ)) Vᵀ + V⊥V⊥ᵀ/λ  (n × n), then C_PP = L_P⁻¹ C̃ L_P⁻¹.
        let mut vs = self.v.clone();
        for (i, mut col) in vs.column_iter_mut().enumerate() {
            col /= self.g[i] * self.g[i] + lambda;
        }
        let mut c_tilde = &vs * self.v.transpose();
        if self.v_perp.ncols() > 0 {
            c_tilde += (&self.v_perp * self.v_perp.transpose()) / lambda;
        }
        let mut c_pp = c_tilde;
        for jj in 0..n {
            for kk in 0..n {
                c_pp[(jj, kk)] /= self.l_pen[jj] * self.l_pen[kk];
            }
        }
        let c_np = -(&self.b * &c_pp);
        let c_nn = &self.r1_inv * self.r1_inv.transpose() - &c_np * self.b.transpose();

        // R_PP = L_P⁻¹ V diag(f) Vᵀ L_P;  R_NP = B (I − R_PP);  R_NN = I;  R_PN = 0.
        let mut vf = self.v.clone();
        for (i, mut col) in vf.column_iter_mut().enumerate() {
            col *= f[i];
        }
        let mut r_pp = &vf * self.v.transpose();
        for jj in 0..n {
            for kk in 0..n {
                r_pp[(jj, kk)] *= self.l_pen[kk] / self.l_pen[jj];
            }
        }
        let r_np = &self.b * (DMatrix::identity(n, n) - &r_pp);

        let mut covariance = DMatrix::zeros(p, p);
        let mut resolution = DMatrix::zeros(p, p);
        for (jj, &j) in self.pen_idx.iter().enumerate() {
            for (kk, &k) in self.pen_idx.iter().enumerate() {
                covariance[(j, k)] = c_pp[(jj, kk)];
                resolution[(j, k)] = r_pp[(jj, kk)];
            }
            for (a, &i) in self.null_idx.iter().enumerate() {
                covariance[(i, j)] = c_np[(a, jj)];
                covariance[(j, i)] = c_np[(a, jj)];
                resolution[(i, j)] = r_np[(a, jj)];
            }
        }
        for (a, &i) in self.null_idx.iter().enumerate() {
            for (b, &k) in self.null_idx.iter().enumerate() {
                covariance[(i, k)] = c_nn[(a, b)];
            }
            resolution[(i, i)] = 1.0;
        }

        Ok(Solution {
            lambda,
            coefficients: c,
            fitted,
            residuals,
            filter_factors: f,
            effective_parameters,
            leverages,
            chi_square,
            penalty_norm2,
            covariance,
            resolution,
            data_count: m,
            null_dimension: q,
        })
    }
}

crate::simd::avx2_dispatch! {
    /// Add `Σ_i U_ki² g_i²/(g_i² + λ)` to each `out[k]` (`U` column-major, `m` rows, one
    /// column per singular value `g_i`), column after column as
    /// [`Decomposition::leverages_into`] adds them, in either build ([`crate::simd`]).
    fn add_leverages(u: &[f64], m: usize, g: &[f64], lambda: f64, out: &mut [f64]) = add_leverages_body;
}

/// The sums of [`add_leverages`].
#[inline(always)]
fn add_leverages_body(u: &[f64], m: usize, g: &[f64], lambda: f64, out: &mut [f64]) {
    for (col, &g) in u.chunks_exact(m.max(1)).zip(g) {
        let f = g * g / (g * g + lambda);
        for (o, &v) in out.iter_mut().zip(col) {
            *o += v * v * f;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn filtered_sums_are_the_plain_loop_bit_for_bit() {
        // invented V (rows 1..=19, so whole blocks of eight and remainders), singular values
        // over many decades, λ from tiny to large: every row's sum must be the one-row loop's
        let mut next = crate::testing::uniform(0x1234_5678_9abc_def1);
        for rows in 1..20 {
            let r = 1 + rows % 7;
            let v: Vec<f64> = (0..rows * r).map(|_| next()).collect();
            let g: Vec<f64> = (0..r)
                .map(|i| 10f64.powi(2 - 2 * i as i32) * (1.0 + next()))
                .collect();
            let beta: Vec<f64> = (0..r).map(|_| 5.0 * next()).collect();
            for lambda in [1e-12, 3e-3, 0.7, 40.0] {
                for first in (0..rows).step_by(FILTER_ROWS) {
                    let len = FILTER_ROWS.min(rows - first);
                    let mut out = vec![f64::NAN; len];
                    filtered_sums(&v, (rows, first), (&g, &beta, lambda), &mut out);
                    for (l, &got) in out.iter().enumerate() {
                        let mut want = 0.0;
                        for i in 0..r {
                            want +=
                                v[i * rows + first + l] * g[i] * beta[i] / (g[i] * g[i] + lambda);
                        }
                        assert_eq!(
                            got.to_bits(),
                            want.to_bits(),
                            "rows {rows} row {} λ {lambda}",
                            first + l
                        );
                    }
                }
            }
        }
    }

    /// A small ill-posed problem with a constant (unpenalised) column: columns
    /// cos(jπx) e^{−jπy}, a curvature-like penalty (jπ)², and unequal σ. Invented numbers.
    fn problem(m: usize, p: usize, q: usize, noise: f64) -> Problem {
        let mut a = DMatrix::zeros(m, p);
        let mut d = DVector::zeros(m);
        let mut sigma = DVector::zeros(m);
        let mut penalty = DVector::zeros(p);
        for i in 0..m {
            let x = (i as f64 + 0.5) / m as f64;
            let y = 0.1 + 0.05 * ((i * 7) % 5) as f64;
            for j in 0..p {
                a[(i, j)] = if j < q {
                    x.powi(j as i32)
                } else {
                    let k = (j - q + 1) as f64 * std::f64::consts::PI;
                    (k * x).cos() * (-k * y).exp()
                };
            }
            sigma[i] = 0.05 * (1.0 + 0.5 * (i as f64).sin());
        }
        for j in q..p {
            penalty[j] = ((j - q + 1) as f64 * std::f64::consts::PI).powi(2);
        }
        let truth = DVector::from_iterator(p, (0..p).map(|j| 3.0 / (1.0 + j as f64).powi(2)));
        let clean = &a * &truth;
        for i in 0..m {
            // deterministic pseudo-noise, reproducible without a generator
            d[i] = clean[i] + noise * sigma[i] * ((i as f64 * 12.9898).sin() * 43758.5453).fract();
        }
        Problem::new(a, d, sigma, penalty, true).unwrap()
    }

    /// Dense reference: c = (AᵀW²A + λ LᵀL)⁻¹ AᵀW² d by Cholesky of the normal equations.
    fn normal_equations(pr: &Problem, lambda: f64) -> (DVector<f64>, DMatrix<f64>) {
        let w2 = pr.sigma().map(|s| 1.0 / (s * s));
        let aw2 = DMatrix::from_fn(pr.data_count(), pr.coefficient_count(), |i, j| {
            pr.a()[(i, j)] * w2[i]
        });
        let mut mm = pr.a().transpose() * &aw2;
        for j in 0..pr.coefficient_count() {
            mm[(j, j)] += lambda * pr.penalty()[j].powi(2);
        }
        let rhs = aw2.transpose() * pr.d();
        let ch = mm.clone().cholesky().unwrap();
        (ch.solve(&rhs), ch.inverse())
    }

    fn rel(a: &DMatrix<f64>, b: &DMatrix<f64>) -> f64 {
        (a - b).norm() / b.norm()
    }

    #[test]
    fn predictive_variances_match_the_full_covariance() {
        for (m, p, q) in [(12, 8, 1), (8, 14, 2), (10, 10, 0), (6, 20, 1)] {
            let pr = problem(m, p, q, 1.0);
            let dec = Decomposition::new(&pr).unwrap();
            let a = DVector::from_iterator(p, (0..p).map(|j| ((j * 3 + 1) as f64).sin()));
            let lambdas = [1e-5, 1e-2, 3.0];
            let fast = dec.predictive_variances(&a, &lambdas).unwrap();
            for (k, &lambda) in lambdas.iter().enumerate() {
                let cov = dec.solve(lambda).unwrap().covariance;
                let full = (&cov * &a).dot(&a);
                assert!(
                    (fast[k] - full).abs() < 1e-8 * full.abs().max(1e-12),
                    "m={m} p={p} q={q} λ={lambda}: {} vs {full}",
                    fast[k]
                );
            }
        }
    }

    #[test]
    fn matches_normal_equations_overdetermined_and_underdetermined() {
        for (m, p, q) in [(12, 8, 1), (8, 14, 2), (10, 10, 0)] {
            let pr = problem(m, p, q, 1.0);
            let dec = Decomposition::new(&pr).unwrap();
            for lambda in [1e-4, 1e-2, 1.0] {
                let sol = dec.solve(lambda).unwrap();
                let (c, cov) = normal_equations(&pr, lambda);
                let e = (&sol.coefficients - &c).norm() / c.norm();
                assert!(e < 1e-8, "m={m} p={p} λ={lambda}: coefficient error {e}");
                let e = rel(&sol.covariance, &cov);
                assert!(e < 1e-7, "m={m} p={p} λ={lambda}: covariance error {e}");
                // Resolution identity R = I − λ C LᵀL.
                let mut r2 = DMatrix::identity(p, p);
                for i in 0..p {
                    for j in 0..p {
                        r2[(i, j)] -= lambda * cov[(i, j)] * pr.penalty()[j].powi(2);
                    }
                }
                let e = (&sol.resolution - &r2).norm() / (p as f64).sqrt();
                assert!(e < 1e-7, "m={m} p={p} λ={lambda}: resolution error {e}");
            }
        }
    }

    #[test]
    fn filter_factors_and_effective_parameters_are_bounded() {
        let pr = problem(8, 14, 2, 1.0);
        let dec = Decomposition::new(&pr).unwrap();
        assert!(dec.singular_values().len() <= 8 - 2);
        let mut last = f64::INFINITY;
        for k in -12..=8 {
            let lambda = 10f64.powi(k);
            let sol = dec.solve(lambda).unwrap();
            assert!(sol.filter_factors.iter().all(|f| (0.0..=1.0).contains(f)));
            let t = sol.effective_parameters;
            assert!((2.0 - 1e-12..=8.0 + 1e-12).contains(&t), "trace H = {t}");
            assert!(t <= last + 1e-12, "trace H must fall as λ grows");
            last = t;
            assert!(
                sol.leverages
                    .iter()
                    .all(|h| *h >= -1e-12 && *h <= 1.0 + 1e-12)
            );
            assert!((sol.leverages.sum() - t).abs() < 1e-9);
            // χ² from the SVD identity equals the direct one.
            let f = &sol.filter_factors;
            let proj = dec.data_projection();
            let chi2: f64 = (0..f.len())
                .map(|i| ((1.0 - f[i]) * proj.beta[i]).powi(2))
                .sum::<f64>()
                + proj.delta0;
            assert!((chi2 - sol.chi_square).abs() <= 1e-9 * (1.0 + chi2));
        }
    }

    #[test]
    fn small_lambda_recovers_weighted_least_squares() {
        // Overdetermined and well conditioned enough for an independent QR least squares.
        let pr = problem(12, 5, 1, 1.0);
        let dec = Decomposition::new(&pr).unwrap();
        let sol = dec.solve(1e-12).unwrap();
        let w = pr.sigma().map(|s| 1.0 / s);
        let aw = DMatrix::from_fn(12, 5, |i, j| pr.a()[(i, j)] * w[i]);
        let dw = pr.d().component_mul(&w);
        let qr = aw.clone().qr();
        let c_ls = qr
            .r()
            .solve_upper_triangular(&(qr.q().transpose() * &dw))
            .unwrap();
        let e = (&sol.coefficients - &c_ls).norm() / c_ls.norm();
        assert!(e < 1e-6, "least-squares limit error {e}");
        assert!((sol.effective_parameters - 5.0).abs() < 1e-6);
    }

    #[test]
    fn large_lambda_leaves_only_the_null_space() {
        let pr = problem(10, 12, 2, 1.0);
        let dec = Decomposition::new(&pr).unwrap();
        let sol = dec.solve(1e14).unwrap();
        // Penalised coefficients vanish; the null part is the weighted LS fit on the two
        // unpenalised columns alone.
        for j in 2..12 {
            assert!(
                sol.coefficients[j].abs() < 1e-9,
                "c[{j}] = {}",
                sol.coefficients[j]
            );
        }
        let w = pr.sigma().map(|s| 1.0 / s);
        let an = DMatrix::from_fn(10, 2, |i, j| pr.a()[(i, j)] * w[i]);
        let dw = pr.d().component_mul(&w);
        let qr = an.clone().qr();
        let c_ls = qr
            .r()
            .solve_upper_triangular(&(qr.q().transpose() * &dw))
            .unwrap();
        for k in 0..2 {
            assert!((sol.coefficients[k] - c_ls[k]).abs() < 1e-8 * (1.0 + c_ls[k].abs()));
        }
        assert!((sol.effective_parameters - 2.0).abs() < 1e-8);
    }

    #[test]
    fn maps_in_the_singular_basis_match_the_map_times_the_coefficients() {
        // [M K | M_N] x(λ) against M c(λ), c from `coefficients_into`, for an arbitrary map
        // M (a profile grid of a different size than the data), over- and under-determined,
        // with and without an unpenalised block, at strengths across the spectrum
        for (m, p, q) in [(8, 14, 2), (20, 12, 1), (10, 10, 0)] {
            let pr = problem(m, p, q, 1.0);
            let dec = Decomposition::new(&pr).unwrap();
            let map = DMatrix::from_fn(37, p, |i, j| ((i * 3 + j * 7) as f64 * 0.37).sin());
            let basis = dec.basis_map(&map).unwrap();
            assert_eq!(basis.shape(), (37, dec.singular_values().len() + q));
            let sensors = dec.basis_map(pr.a()).unwrap();
            let proj = dec.projection(pr.d()).unwrap();
            let (mut c, mut x) = (DVector::zeros(p), DVector::zeros(0));
            for lambda in [1e-8, 1e-4, 1e-1, 10.0, 1e4] {
                dec.coefficients_into(&proj, lambda, &mut c).unwrap();
                dec.basis_weights_into(&proj, lambda, &mut x).unwrap();
                let (want, got) = (&map * &c, &basis * &x);
                let scale = want.amax().max(c.amax());
                assert!(
                    (&want - &got).amax() < 1e-11 * scale,
                    "{m} {p} {q} λ {lambda}"
                );
                let mut fit = DVector::zeros(m);
                dec.predict_into(&c, &mut fit).unwrap();
                let fit2 = &sensors * &x;
                assert!((&fit - &fit2).amax() < 1e-11 * fit.amax().max(scale));
            }
        }
        let dec = Decomposition::new(&problem(8, 14, 2, 1.0)).unwrap();
        assert!(dec.basis_map(&DMatrix::zeros(3, 13)).is_err());
        let mut x = DVector::zeros(0);
        assert!(
            dec.basis_weights_into(&dec.empty_projection(), 0.0, &mut x)
                .is_err()
        );
    }

    #[test]
    fn fast_path_matches_full_solution_for_new_data() {
        let pr = problem(8, 14, 2, 1.0);
        let dec = Decomposition::new(&pr).unwrap();
        let d2 = pr.d().map(|v| 0.7 * v + 0.3);
        let pr2 = Problem::new(
            pr.a().clone(),
            d2.clone(),
            pr.sigma().clone(),
            pr.penalty().clone(),
            true,
        )
        .unwrap();
        let dec2 = Decomposition::new(&pr2).unwrap();
        let mut proj = dec.empty_projection();
        dec.project_into(&d2, &mut proj).unwrap();
        let mut c = DVector::zeros(14);
        dec.coefficients_into(&proj, 3e-3, &mut c).unwrap();
        let full = dec2.solve(3e-3).unwrap();
        assert!((&c - &full.coefficients).norm() < 1e-10 * full.coefficients.norm());
        let mut fit = DVector::zeros(8);
        dec.predict_into(&c, &mut fit).unwrap();
        assert!((&fit - &full.fitted).norm() < 1e-10 * full.fitted.norm());
    }

    #[test]
    fn influence_matrix_reproduces_the_fit() {
        let pr = problem(9, 12, 1, 1.0);
        let dec = Decomposition::new(&pr).unwrap();
        let sol = dec.solve(0.05).unwrap();
        let s = dec.influence_matrix(0.05).unwrap();
        assert!((&s * pr.d() - &sol.fitted).norm() < 1e-10 * sol.fitted.norm());
        for i in 0..9 {
            assert!((s[(i, i)] - sol.leverages[i]).abs() < 1e-12);
        }
    }

    #[test]
    fn dependent_null_columns_are_rejected() {
        let mut a = DMatrix::from_fn(6, 4, |i, j| ((i + 1) * (j + 2)) as f64 / 7.0);
        for i in 0..6 {
            a[(i, 0)] = 1.0;
            a[(i, 1)] = 2.0; // twice column 0
        }
        let pr = Problem::new(
            a,
            DVector::from_element(6, 1.0),
            DVector::from_element(6, 1.0),
            DVector::from_vec(vec![0.0, 0.0, 1.0, 4.0]),
            false,
        )
        .unwrap();
        let e = Decomposition::new(&pr).unwrap_err();
        assert!(matches!(e, Error::Invalid { .. }));
        assert!(e.to_string().contains("columns 1, 2"), "{e}");
    }

    #[test]
    fn bad_lambda_and_data_are_errors_not_panics() {
        let pr = problem(8, 6, 1, 1.0);
        let dec = Decomposition::new(&pr).unwrap();
        assert!(dec.solve(0.0).is_err());
        assert!(dec.solve(f64::NAN).is_err());
        assert!(dec.solve(-1.0).is_err());
        let mut bad = pr.d().clone();
        bad[3] = f64::NAN;
        assert!(dec.projection(&bad).is_err());
        assert!(dec.projection(&DVector::zeros(7)).is_err());
    }

    /// Degenerate inputs on purpose: nothing penalised (plain weighted least squares), and a
    /// single sensor.
    #[test]
    fn degenerate_inputs() {
        use crate::inverse::{SelectOptions, Strength, StrengthMethod};
        let a = DMatrix::from_row_slice(4, 2, &[1.0, 0.0, 1.0, 1.0, 1.0, 2.0, 1.0, 3.0]);
        let d = DVector::from_vec(vec![1.0, 3.1, 4.9, 7.0]);
        let pr = Problem::new(
            a,
            d,
            DVector::from_element(4, 1.0),
            DVector::zeros(2),
            false,
        )
        .unwrap();
        let dec = Decomposition::new(&pr).unwrap();
        let sol = dec.solve(1.0).unwrap();
        // Ordinary least-squares line through (0,1), (1,3.1), (2,4.9), (3,7): slope 1.98,
        // intercept 1.03 (normal equations by hand).
        assert!((sol.coefficients[1] - 1.98).abs() < 1e-12);
        assert!((sol.coefficients[0] - 1.03).abs() < 1e-12);
        assert!((sol.effective_parameters - 2.0).abs() < 1e-12);
        let e = dec
            .select(
                Strength::Rule(StrengthMethod::Gcv),
                &SelectOptions::default(),
            )
            .unwrap_err();
        assert!(e.to_string().contains("nothing to choose"), "{e}");

        let one = Problem::new(
            DMatrix::from_row_slice(1, 3, &[0.5, 0.2, 0.1]),
            DVector::from_vec(vec![2.0]),
            DVector::from_element(1, 0.1),
            DVector::from_vec(vec![1.0, 2.0, 3.0]),
            true,
        )
        .unwrap();
        let dec = Decomposition::new(&one).unwrap();
        assert_eq!(dec.singular_values().len(), 1);
        let sol = dec.solve(1e-3).unwrap();
        assert!(sol.effective_parameters > 0.0 && sol.effective_parameters < 1.0);
        let (c, cov) = normal_equations(&one, 1e-3);
        assert!((&sol.coefficients - &c).norm() < 1e-10 * c.norm());
        assert!(rel(&sol.covariance, &cov) < 1e-10);
    }

    #[test]
    fn sigma2_estimate_is_chi2_over_residual_dof() {
        let pr = problem(12, 8, 1, 1.0);
        let dec = Decomposition::new(&pr).unwrap();
        let sol = dec.solve(1e-2).unwrap();
        let s2 = sol.sigma2_estimate().unwrap();
        assert!((s2 * (12.0 - sol.effective_parameters) - sol.chi_square).abs() < 1e-12);
    }
}
