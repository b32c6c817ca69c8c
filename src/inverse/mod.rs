//! The inversion: weighted Tikhonov regularisation with a diagonal penalty, and the rules that
//! choose its strength.
//!
//! This module knows nothing of plates or heat: it works on a linear model
//!
//! ```text
//! d = A c + e,      e_i ~ N(0, σ_i²)          (d: readings minus the model's known offset)
//! ```
//!
//! with `A` (m × p), and estimates the coefficients `c` by minimising
//!
//! ```text
//! ‖W (A c − d)‖² + λ ‖L c‖²,      W = diag(1/σ_i),  L = diag(l_j), l_j ≥ 0      (1)
//! ```
//!
//! (`docs/method.md`; Tikhonov regularisation in the weighted form, e.g. Hansen, *Rank-Deficient and
//! Discrete Ill-Posed Problems*, SIAM 1998, ch. 5).
//!
//! ## Conventions
//!
//! * **λ is the λ of `docs/method.md`**: it multiplies ‖L c‖² directly. Hansen's texts write `lam` for its square
//!   root (`λ = lam²`); every formula quoted from the literature is rewritten here with `λ`, and the
//!   filter factors are `f_i = g_i² / (g_i² + λ)`.
//! * Coefficients with `l_j = 0` form the unpenalised **null space** (a constant mode, corner
//!   parameters): their number is `q`, and `m' = m − q` is the number of data degrees of
//!   freedom left for the penalised part. They are eliminated exactly (see [`tikhonov`]).
//! * Weighted quantities (`W A`, `W d`, chi-square) carry σ, so the posterior covariance is in
//!   the units of `c²` already when σ is stated. When σ is not stated, the caller passes unit
//!   σ and scales covariances by the noise estimate [`Solution::sigma2_estimate`].
//!
//! ## Use
//!
//! ```
//! use edgetherm::inverse::{Decomposition, Problem, SelectOptions, Strength, StrengthMethod};
//! use nalgebra::{DMatrix, DVector};
//!
//! // Four readings of a constant plus a slowly decaying mode.
//! let a = DMatrix::from_row_slice(4, 2, &[1.0, 0.9, 1.0, 0.5, 1.0, -0.5, 1.0, -0.9]);
//! let d = DVector::from_vec(vec![21.9, 21.5, 20.5, 20.1]);
//! let sigma = DVector::from_element(4, 0.1);
//! let penalty = DVector::from_vec(vec![0.0, 1.0]); // the constant is not penalised
//! let problem = Problem::new(a, d, sigma, penalty, true).unwrap();
//! let dec = Decomposition::new(&problem).unwrap();
//! let chosen = dec
//!     .select(Strength::Rule(StrengthMethod::Gcv), &SelectOptions::default())
//!     .unwrap();
//! let sol = dec.solve(chosen.lambda).unwrap();
//! assert!((sol.coefficients[0] - 21.0).abs() < 0.1);
//! ```
//!
//! ## Files
//!
//! | file | role |
//! |---|---|
//! | [`tikhonov`] | the decomposition (null-space elimination + one SVD), solutions, the fast path for new data |
//! | [`strength`] | GCV, discrepancy, evidence (marginal likelihood), L-curve, fixed; grid + Brent |
//! | [`search`] | the evidence rule's choice for one data vector after another, without the whole grid |

pub mod fit;
pub mod search;
pub mod strength;
pub mod tikhonov;

pub use search::{EvidenceSearch, GridPick};
pub use strength::{
    EvidenceKind, SelectOptions, Selection, Strength, StrengthGrid, StrengthMethod,
};
pub use tikhonov::{Decomposition, Projection, Solution};

use crate::error::{Error, Result};
use nalgebra::{DMatrix, DVector};

/// A weighted, regularised linear least-squares problem (equation (1) of the module doc),
/// validated on construction.
#[derive(Debug, Clone)]
pub struct Problem {
    a: DMatrix<f64>,
    d: DVector<f64>,
    sigma: DVector<f64>,
    penalty: DVector<f64>,
    sigma_stated: bool,
}

impl Problem {
    /// Build a problem.
    ///
    /// * `a` — the forward matrix, m × p (sensor temperature per unit coefficient).
    /// * `d` — the data minus the model's known offset, length m.
    /// * `sigma` — the standard uncertainty of each datum, length m, all > 0 (pass ones when
    ///   no uncertainty is stated).
    /// * `penalty` — the diagonal `l_j ≥ 0` of L, length p; zeros mark unpenalised
    ///   coefficients.
    /// * `sigma_stated` — whether `sigma` was stated by the user (it decides whether the
    ///   discrepancy principle can be used and which evidence is maximised, see
    ///   [`EvidenceKind`]).
    ///
    /// # Errors
    /// [`Error::Invalid`] when the sizes disagree, a value is not finite, a σ is not positive,
    /// a penalty is negative, or there are not more data than unpenalised coefficients
    /// (`m ≤ q`). Rank deficiency of the unpenalised columns is found by
    /// [`Decomposition::new`].
    pub fn new(
        a: DMatrix<f64>,
        d: DVector<f64>,
        sigma: DVector<f64>,
        penalty: DVector<f64>,
        sigma_stated: bool,
    ) -> Result<Self> {
        let (m, p) = a.shape();
        if m == 0 || p == 0 {
            return Err(Error::invalid_field(
                "inverse.a",
                format!(
                    "the forward matrix is {m} × {p}: the problem needs at least one datum and one coefficient"
                ),
            ));
        }
        if d.len() != m {
            return Err(Error::invalid_field(
                "inverse.d",
                format!("{} data for a forward matrix with {m} rows", d.len()),
            ));
        }
        if sigma.len() != m {
            return Err(Error::invalid_field(
                "inverse.sigma",
                format!("{} uncertainties for {m} data", sigma.len()),
            ));
        }
        if penalty.len() != p {
            return Err(Error::invalid_field(
                "inverse.penalty",
                format!("{} penalty weights for {p} coefficients", penalty.len()),
            ));
        }
        if let Some((k, _)) = a.iter().enumerate().find(|(_, v)| !v.is_finite()) {
            return Err(Error::invalid_field(
                "inverse.a",
                format!(
                    "forward matrix entry (row {}, column {}) is not finite",
                    k % m + 1,
                    k / m + 1
                ),
            ));
        }
        if let Some(i) = d.iter().position(|v| !v.is_finite()) {
            return Err(Error::invalid_field(
                "inverse.d",
                format!("datum {} is not finite ({})", i + 1, d[i]),
            ));
        }
        if let Some(i) = sigma.iter().position(|s| !(s.is_finite() && *s > 0.0)) {
            return Err(Error::invalid_field(
                "inverse.sigma",
                format!(
                    "uncertainty {} is {}: every sigma must be a positive finite number",
                    i + 1,
                    sigma[i]
                ),
            ));
        }
        if let Some(j) = penalty.iter().position(|l| !(l.is_finite() && *l >= 0.0)) {
            return Err(Error::invalid_field(
                "inverse.penalty",
                format!(
                    "penalty weight {} is {}: weights must be finite and ≥ 0",
                    j + 1,
                    penalty[j]
                ),
            ));
        }
        let q = penalty.iter().filter(|l| **l == 0.0).count();
        if m <= q {
            return Err(Error::invalid_field(
                "inverse.d",
                format!(
                    "{m} data cannot determine {q} unpenalised coefficients and leave any \
                     degree of freedom for the rest: add sensors (need more than {q})"
                ),
            ));
        }
        Ok(Problem {
            a,
            d,
            sigma,
            penalty,
            sigma_stated,
        })
    }

    /// The forward matrix A (m × p).
    pub fn a(&self) -> &DMatrix<f64> {
        &self.a
    }
    /// The data d (minus the known offset), length m.
    pub fn d(&self) -> &DVector<f64> {
        &self.d
    }
    /// The standard uncertainties σ, length m.
    pub fn sigma(&self) -> &DVector<f64> {
        &self.sigma
    }
    /// The penalty diagonal l, length p.
    pub fn penalty(&self) -> &DVector<f64> {
        &self.penalty
    }
    /// Whether σ was stated by the user (rather than unit weights standing in).
    pub fn sigma_stated(&self) -> bool {
        self.sigma_stated
    }
    /// The number of data, m.
    pub fn data_count(&self) -> usize {
        self.a.nrows()
    }
    /// The number of coefficients, p.
    pub fn coefficient_count(&self) -> usize {
        self.a.ncols()
    }
    /// The number of unpenalised coefficients, q (the null space of L).
    pub fn null_dimension(&self) -> usize {
        self.penalty.iter().filter(|l| **l == 0.0).count()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ok_parts() -> (DMatrix<f64>, DVector<f64>, DVector<f64>, DVector<f64>) {
        (
            DMatrix::from_row_slice(3, 2, &[1.0, 0.5, 1.0, 0.2, 1.0, -0.3]),
            DVector::from_vec(vec![1.0, 2.0, 3.0]),
            DVector::from_element(3, 0.1),
            DVector::from_vec(vec![0.0, 1.0]),
        )
    }

    fn message(e: Error) -> String {
        e.to_string()
    }

    #[test]
    fn valid_problem_is_accepted() {
        let (a, d, s, l) = ok_parts();
        let p = Problem::new(a, d, s, l, true).unwrap();
        assert_eq!(p.data_count(), 3);
        assert_eq!(p.coefficient_count(), 2);
        assert_eq!(p.null_dimension(), 1);
    }

    #[test]
    fn bad_inputs_are_named() {
        let (a, d, s, l) = ok_parts();
        let mut a2 = a.clone();
        a2[(1, 1)] = f64::NAN;
        let e = message(Problem::new(a2, d.clone(), s.clone(), l.clone(), true).unwrap_err());
        assert!(e.contains("row 2, column 2"), "{e}");
        let mut d2 = d.clone();
        d2[2] = f64::INFINITY;
        let e = message(Problem::new(a.clone(), d2, s.clone(), l.clone(), true).unwrap_err());
        assert!(e.contains("datum 3"), "{e}");
        let mut s2 = s.clone();
        s2[0] = 0.0;
        let e = message(Problem::new(a.clone(), d.clone(), s2, l.clone(), true).unwrap_err());
        assert!(e.contains("uncertainty 1"), "{e}");
        let l2 = DVector::from_vec(vec![0.0, -1.0]);
        let e = message(Problem::new(a.clone(), d.clone(), s.clone(), l2, true).unwrap_err());
        assert!(e.contains("penalty weight 2"), "{e}");
        let e = message(
            Problem::new(a.clone(), DVector::zeros(2), s.clone(), l.clone(), true).unwrap_err(),
        );
        assert!(e.contains("2 data"), "{e}");
    }

    #[test]
    fn too_few_data_for_the_null_space() {
        let a = DMatrix::from_row_slice(2, 3, &[1.0, 0.0, 0.5, 1.0, 1.0, 0.2]);
        let e = Problem::new(
            a,
            DVector::from_vec(vec![1.0, 2.0]),
            DVector::from_element(2, 1.0),
            DVector::from_vec(vec![0.0, 0.0, 1.0]),
            false,
        )
        .unwrap_err();
        assert!(matches!(e, Error::Invalid { .. }));
        assert!(message(e).contains("need more than 2"));
    }
}
