//! Resolution length: the finest feature of an unknown edge the layout can see.
//!
//! The estimate's expectation is `E[ĉ] = R c` with `R` the model resolution matrix (Backus &
//! Gilbert 1968; Menke, *Geophysical Data Analysis: Discrete Inverse Theory*, §4.4). A point
//! perturbation of the true profile at `s₁` on edge `e` has mode coefficients
//! `c_k = φ_k(s₁)/‖φ_k‖²`, so the estimated profile at `s₀` responds through the averaging
//! kernel
//!
//! `K(s₀, s₁) = Σ_j P(s₀, j) Σ_{k ∈ e} R_{jk} φ_k(s₁) / ‖φ_k‖²`,
//!
//! where `P` is the linear map from coefficients to the profile. The resolution length is the
//! kernel's full width at half its maximum around `s₀`, taken at the hottest point of the
//! edge. With no smoothing and `N` terms the kernel is the Dirichlet kernel of width about
//! `1.2 L / N`; smoothing and depth widen it.

use crate::forward::{ForwardModel, LinearMap, Parameter};
use crate::geometry::Edge;
use nalgebra::DMatrix;

/// Resolution length (metres) of each unknown edge at its own hottest point.
pub fn resolution_lengths(
    model: &ForwardModel,
    resolution: &DMatrix<f64>,
    edge_positions: &[(Edge, Vec<f64>)],
    edge_maps: &[LinearMap],
    estimate: &[f64],
) -> Vec<f64> {
    let n = edge_positions.first().map_or(0, |e| e.1.len());
    edge_positions
        .iter()
        .enumerate()
        .map(|(k, (edge, pos))| {
            let est = &estimate[k * n..(k + 1) * n];
            let i0 = (0..n)
                .max_by(|&a, &b| est[a].total_cmp(&est[b]))
                .unwrap_or(0);
            resolution_length_at(model, resolution, *edge, pos, &edge_maps[k], i0)
        })
        .collect()
}

/// Resolution length (metres) of `edge` at `positions[i0]`: the full width at half maximum
/// of the averaging kernel `K(s₀, ·)` of the module doc, for the resolution matrix
/// `resolution` (any linear estimator `ĉ = R c + noise`: the regularised fit, or the
/// posterior mean of a sensor design). `map` is the profile map of `edge` at `positions`.
/// A kernel that never falls to half its peak gives the edge's length.
pub fn resolution_length_at(
    model: &ForwardModel,
    resolution: &DMatrix<f64>,
    edge: Edge,
    positions: &[f64],
    map: &LinearMap,
    i0: usize,
) -> f64 {
    let shape = model.plate().shape();
    let len = shape.edge_length(edge).unwrap_or(shape.width());
    let Some(series) = model.series_of(edge) else {
        return len;
    };
    let v = map.matrix.row(i0) * resolution; // 1 × p
    let modes: Vec<(usize, usize)> = model
        .parameters()
        .iter()
        .enumerate()
        .filter_map(|(j, p)| match p {
            Parameter::Mode { edge: e, n, .. } if *e == edge => Some((j, *n)),
            _ => None,
        })
        .collect();
    let basis = series.basis;
    let kernel: Vec<f64> = positions
        .iter()
        .map(|&s| {
            modes
                .iter()
                .map(|&(j, m)| v[j] * basis.value(m, s) / basis.norm_sq(m))
                .sum()
        })
        .collect();
    full_width_half_max(&kernel, positions, i0).unwrap_or(len)
}

/// Width at half maximum of the peak of `kernel` nearest `i0`, by linear interpolation of
/// the crossings; a side that never falls to half counts to the edge's end.
fn full_width_half_max(kernel: &[f64], pos: &[f64], i0: usize) -> Option<f64> {
    let n = kernel.len();
    if n < 3 {
        return None;
    }
    // climb to the local peak from i0
    let mut i = i0;
    loop {
        if i + 1 < n && kernel[i + 1] > kernel[i] {
            i += 1;
        } else if i > 0 && kernel[i - 1] > kernel[i] {
            i -= 1;
        } else {
            break;
        }
    }
    let peak = kernel[i];
    if peak.is_nan() || peak <= 0.0 {
        return None;
    }
    let half = 0.5 * peak;
    let mut left = pos[0];
    for j in (0..i).rev() {
        if kernel[j] < half {
            let t = (half - kernel[j]) / (kernel[j + 1] - kernel[j]);
            left = pos[j] + t * (pos[j + 1] - pos[j]);
            break;
        }
    }
    let mut right = pos[n - 1];
    for j in i + 1..n {
        if kernel[j] < half {
            let t = (kernel[j - 1] - half) / (kernel[j - 1] - kernel[j]);
            right = pos[j - 1] + t * (pos[j] - pos[j - 1]);
            break;
        }
    }
    Some(right - left)
}

#[cfg(test)]
mod tests {
    use super::full_width_half_max;

    #[test]
    fn width_of_a_gaussian() {
        // FWHM of a Gaussian is 2 sqrt(2 ln 2) s ≈ 2.3548 s (common practice).
        let s = 0.05;
        let pos: Vec<f64> = (0..2001).map(|i| i as f64 / 2000.0).collect();
        let k: Vec<f64> = pos
            .iter()
            .map(|x| (-0.5 * ((x - 0.4) / s).powi(2)).exp())
            .collect();
        let w = full_width_half_max(&k, &pos, 790).unwrap();
        assert!((w - 2.354_820 * s).abs() < 1e-4, "{w}");
    }
}
