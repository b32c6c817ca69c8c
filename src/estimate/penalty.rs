//! The smoothing penalty in the eigenbasis.
//!
//! An unknown edge's profile is `u(s) = lift(s) + Σ c_n φ_n(s)`. Its squared derivative of
//! order `p` integrates mode by mode, `∫ (u^{(p)})² ds = Σ c_n² k_n^{2p} ‖φ_n‖²` (the lift is
//! linear, so for `p = 2` this is exact; for `p ≤ 1` the lift's share is left unpenalised),
//! because the eigenfunctions are orthogonal and differentiation maps each to its partner
//! times `k_n`. The penalty is therefore diagonal (`docs/method.md`):
//!
//! `l_j² = (k_j L_ref / π)^{2p} ‖φ_j‖² / L_ref`,
//!
//! with `L_ref` the plate width, which makes `λ Σ l_j² c_j²` proportional to the physical
//! derivative norm on every edge and keeps `λ` dimensionless in the mode number. Modes with
//! `k = 0` (the constant mode of an edge between two insulated edges) carry the edge's level
//! and corner temperatures enter only through the linear lift: both are unpenalised (the null
//! space of the penalty), for every order. For `p = 0` this makes the penalty shrink the
//! profile toward its level rather than toward zero kelvin.
//!
//! Next to a convective edge the eigenfunctions meet a Robin condition, and the derivatives
//! of different modes are then not exactly orthogonal (boundary terms `β φ_m φ_n` at the
//! convective end). The diagonal weights `k_n^{2p} ‖φ_n‖²` are kept there as the smoothness
//! prior: they are what the penalty means mode by mode, and the estimate does not need the
//! penalty to be the exact derivative norm.

use crate::forward::{ForwardModel, Parameter};
use nalgebra::DVector;

/// The diagonal of `L`, one entry per model parameter.
pub fn penalty_weights(model: &ForwardModel, order: usize) -> DVector<f64> {
    let shape = model.plate().shape();
    let l_ref = shape.width();
    DVector::from_iterator(
        model.parameter_count(),
        model.parameters().iter().map(|p| match *p {
            Parameter::Mode {
                edge,
                n,
                wavenumber,
            } => {
                let len = shape.edge_length(edge).unwrap_or(l_ref);
                let norm_sq = model.mode_norm_sq(edge, n).unwrap_or(0.5 * len);
                let mode = wavenumber * l_ref / std::f64::consts::PI;
                if wavenumber == 0.0 {
                    // the level of the edge: never shrunk (toward 0 K it would be nonsense)
                    0.0
                } else {
                    mode.powi(order as i32) * (norm_sq / l_ref).sqrt()
                }
            }
            Parameter::Corner { .. } => 0.0,
        }),
    )
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;
    use crate::forward::SeriesOptions;
    use crate::geometry::{EdgeCondition, EdgeProfile, Plate, Shape};

    #[test]
    fn constant_mode_is_free_for_derivative_penalties() {
        let plate = Plate::new(
            Shape::Rectangle {
                width_m: 0.2,
                height_m: 0.05,
            },
            [
                Some(EdgeCondition::Unknown),
                Some(EdgeCondition::Insulated),
                Some(EdgeCondition::Fixed(EdgeProfile::constant(300.0))),
                Some(EdgeCondition::Insulated),
            ],
            None,
        )
        .unwrap();
        let model = ForwardModel::new(
            &plate,
            SeriesOptions {
                unknown_terms: 8,
                ..Default::default()
            },
        )
        .unwrap();
        let l2 = penalty_weights(&model, 2);
        assert_eq!(l2[0], 0.0);
        // mode n = 3 of a cosine basis on the full width: (3)^2 · sqrt(1/2)
        assert!((l2[3] - 9.0 * 0.5f64.sqrt()).abs() < 1e-12);
        let l0 = penalty_weights(&model, 0);
        assert_eq!(l0[0], 0.0);
        assert!((l0[1] - 0.5f64.sqrt()).abs() < 1e-12);
        assert!(l0.iter().skip(1).all(|&v| v > 0.0));
    }
}
