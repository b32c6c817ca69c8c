//! The prior of a design: the same Gaussian smoothness prior the inversion uses, scaled so
//! that its pointwise spread along the hidden edge matches what the experimenter expects.
//!
//! The inversion minimises `‖W(Ac − d)‖² + λ Σ l_j² c_j²` with `W = diag(1/σ)` (`docs/method.md`,
//! [`crate::inverse`]). Read as a posterior mode (Wahba 1983, J. R. Statist. Soc. B
//! 45:133–150), the penalty is the Gaussian prior `c_j ~ N(0, τ²/l_j²)` with `λ = 1/τ²`
//! (kelvin⁻²: the data term is already divided by σ², so σ does not appear in `λ`; in an
//! unweighted convention the same prior reads `λ = σ²/τ²`). The penalty weights `l_j` are
//! those of [`crate::estimate::penalty::penalty_weights`] for the chosen smoothing order.
//!
//! ## The scale τ
//! The profile of an unknown edge `e` is `u(s) = lift(s) + Σ_j c_j φ_j(s)`. Under the prior
//! the penalised modes give `Var u(s) = Σ_j (τ²/l_j²) φ_j(s)²`, whose mean along the edge is
//! `τ² Σ_j ‖φ_j‖² / (L_e l_j²)` (orthogonality, `(1/L_e)∫φ_j² = ‖φ_j‖²/L_e`). Asking that
//! this mean, averaged over the unknown edges, equal the stated variation `v²` gives
//!
//! `τ² = v² · E / Σ_e Σ_{j∈e} ‖φ_j‖² / (L_e l_j²)`,   `E` = number of unknown edges,
//!
//! so the prior's root-mean-square pointwise standard deviation along the edges is `v`
//! (a unit test checks it by quadrature).
//!
//! ## The unpenalised coefficients
//! Edge levels (constant modes) and the temperatures of corners between two unknown edges
//! have `l_j = 0`: the inversion puts a flat prior on them. A flat prior makes the
//! information of a layout infinite, so the design gives them a broad proper prior,
//! `N(·, (10 v)²)`: ten times the expected variation, wide enough that any layout that
//! determines the level does so from its readings (the posterior variance of a level seen
//! by `m` readings of noise σ is then within `(σ²/m)/(100 v²)` of the flat-prior value),
//! narrow enough that log-determinants stay finite. The prior's mean does not enter a
//! linear-Gaussian design, so it is not needed.

use crate::estimate::penalty::penalty_weights;
use crate::forward::{ForwardModel, Parameter};
use nalgebra::DVector;
use serde::Serialize;

/// The prior standard deviation of the unpenalised coefficients, in units of the stated
/// variation (see the module doc).
pub const UNPENALISED_SD_FACTOR: f64 = 10.0;

/// The prior of a design, in SI units.
#[derive(Debug, Clone, Serialize)]
pub struct Prior {
    /// The smoothing order (0 size, 1 slope, 2 curvature).
    pub order: usize,
    /// The stated variation `v`: RMS prior standard deviation of the profile along the
    /// unknown edges, kelvin.
    pub variation_k: f64,
    /// The scale `τ`, kelvin.
    pub tau_k: f64,
    /// The prior standard deviation of levels and corner temperatures, kelvin.
    pub unpenalised_sd_k: f64,
    /// The strength of the inversion equivalent to this prior, `λ = 1/τ²` (K⁻², the
    /// convention of [`crate::inverse`]).
    pub equivalent_strength: f64,
    /// The prior variance of every coefficient, in the order of the model's parameters.
    #[serde(skip)]
    pub variances: DVector<f64>,
}

impl Prior {
    /// The prior of `model` for smoothing `order` and stated variation `variation_k`
    /// (kelvin, > 0).
    pub fn new(model: &ForwardModel, order: usize, variation_k: f64) -> Prior {
        let l = penalty_weights(model, order);
        let shape = model.plate().shape();
        let mut sum = 0.0;
        let mut edges = Vec::new();
        for (j, p) in model.parameters().iter().enumerate() {
            if let Parameter::Mode { edge, n, .. } = *p {
                if l[j] > 0.0 {
                    if let (Some(norm_sq), Some(len)) =
                        (model.mode_norm_sq(edge, n), shape.edge_length(edge))
                    {
                        sum += norm_sq / (len * l[j] * l[j]);
                    }
                }
                if !edges.contains(&edge) {
                    edges.push(edge);
                }
            }
        }
        let tau2 = if sum > 0.0 {
            variation_k * variation_k * edges.len().max(1) as f64 / sum
        } else {
            variation_k * variation_k
        };
        let unpenalised_sd_k = UNPENALISED_SD_FACTOR * variation_k;
        let variances = DVector::from_iterator(
            l.len(),
            l.iter().map(|&lj| {
                if lj > 0.0 {
                    tau2 / (lj * lj)
                } else {
                    unpenalised_sd_k * unpenalised_sd_k
                }
            }),
        );
        Prior {
            order,
            variation_k,
            tau_k: tau2.sqrt(),
            unpenalised_sd_k,
            equivalent_strength: 1.0 / tau2,
            variances,
        }
    }

    /// Whether coefficient `j` is penalised (has a smoothness prior rather than the broad one).
    pub fn is_penalised(&self, model: &ForwardModel, j: usize) -> bool {
        penalty_weights(model, self.order)[j] > 0.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::forward::SeriesOptions;
    use crate::geometry::{Edge, EdgeCondition, EdgeProfile, Plate, Shape};

    fn model(left: EdgeCondition) -> ForwardModel {
        let plate = Plate::new(
            Shape::Rectangle {
                width_m: 0.18,
                height_m: 0.028,
            },
            [
                Some(EdgeCondition::Unknown),
                Some(EdgeCondition::Insulated),
                Some(EdgeCondition::Fixed(EdgeProfile::constant(297.15))),
                Some(left),
            ],
            None,
        )
        .unwrap();
        ForwardModel::new(
            &plate,
            SeriesOptions {
                unknown_terms: 32,
                ..SeriesOptions::default()
            },
        )
        .unwrap()
    }

    /// The prior's RMS pointwise standard deviation along the edge, from the penalised modes
    /// only, by the midpoint rule on 4000 points: it must equal the stated variation
    /// (derivation in the module doc).
    #[test]
    fn rms_prior_sd_along_the_edge_is_the_stated_variation() {
        for left in [
            EdgeCondition::Insulated,
            EdgeCondition::Fixed(EdgeProfile::constant(300.0)),
        ] {
            let m = model(left);
            for order in [0, 1, 2] {
                let prior = Prior::new(&m, order, 3.0);
                let n = 4000;
                let len = 0.18;
                let positions: Vec<f64> =
                    (0..n).map(|i| (i as f64 + 0.5) * len / n as f64).collect();
                let map = m.edge_profile_map(Edge::Bottom, &positions);
                let mut mean_var = 0.0;
                for i in 0..n {
                    for j in 0..m.parameter_count() {
                        if prior.is_penalised(&m, j) {
                            mean_var += map.matrix[(i, j)].powi(2) * prior.variances[j];
                        }
                    }
                }
                mean_var /= n as f64;
                assert!(
                    (mean_var.sqrt() - 3.0).abs() < 1e-3,
                    "order {order}: {}",
                    mean_var.sqrt()
                );
                assert!((prior.equivalent_strength * prior.tau_k.powi(2) - 1.0).abs() < 1e-12);
            }
        }
    }
}
