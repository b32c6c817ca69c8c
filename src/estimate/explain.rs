//! Two explanations of a reading that stands out: a faulty sensor, or a feature of a hidden
//! edge that only this sensor is close enough to see.
//!
//! The leave-one-out fault model of [`super::fit`] asks only how far a reading lies from what
//! the other sensors predict. A sensor right above a narrow hot spot is exactly such a reading,
//! and leaving it out hides the hot spot behind a confident interval. So before a sensor whose
//! reading is *higher* than predicted is left out, this module asks the physics whether a hot
//! feature of a hidden edge could produce that reading together with all the others
//! (`docs/method.md`, "Sensor decisions").
//!
//! ## The test
//! Both explanations add one unknown to the smooth fit the other sensors support (the
//! leave-one-out fit's strength λ₋ᵢ and, when the noise is estimated, its noise scale):
//!
//! - **fault**: reading `i` carries an arbitrary offset (the column `e_i`);
//! - **hot feature**: the hidden edge carries, on top of the smooth profile, a non-negative
//!   bump `a·g(s)` with `a ≥ 0` and `g` a Gaussian of width `w` centred at `s₀`, for every
//!   `(s₀, w)` in a bank that spans the edge from the narrowest width the series can carry to a
//!   sixth of the edge. By the maximum principle a non-negative edge feature raises every
//!   reading, most at the sensors nearest to it; its response at the sensors is `k = A c_g`
//!   with `c_g` the series coefficients of `g` (least-squares projection onto the model's
//!   profile map).
//!
//! For a penalised least-squares fit with a fixed λ, the minimum of
//! `‖W(d − A c)‖² + λ‖Lc‖²` over `c` is `ỹᵀ(I − H)ỹ` with `ỹ = W d` and `H` the weighted
//! influence matrix (e.g. Hastie, Tibshirani & Friedman, *The Elements of Statistical
//! Learning*, 2nd ed., §5.4.1, for the smoother-matrix form). One extra column `k̃ = W k` with
//! its own coefficient then lowers it by `(k̃ᵀQỹ)² / (k̃ᵀQk̃)` with `Q = I − H` (the unconstrained
//! optimum `a = k̃ᵀQỹ / k̃ᵀQk̃`, clamped to `a ≥ 0`, and to the gradient limit when one is
//! stated). The statistic is
//!
//! `Δ = [min over the bank of J_hot − J_fault] / s²`,  `s² = max(1, J_fault / ν)`,
//!
//! where `ν` is the fault fit's residual degrees of freedom: `s²` absorbs a misfit the stated
//! noise does not explain, so a poorly fitting model makes the test keep more sensors, never
//! fewer. The hot explanation is **refuted** only when `Δ > `[`HOT_REFUTE_CHI2`], the 0.999
//! quantile of chi-square with one degree of freedom: both explanations spend one parameter,
//! and a reading is called faulty only when the physics says no plausible edge feature could
//! produce it without the neighbours seeing it too. A reading lower than predicted is not
//! tested here: leaving it out is the hotter of the two explanations.

use super::fit::{Fit, FitInput, fit};
use crate::error::Result;
use crate::forward::LinearMap;
use crate::geometry::Edge;
use crate::inverse::{Decomposition, Problem, Strength};
use nalgebra::{DMatrix, DVector};

/// The 0.999 quantile of chi-square with one degree of freedom (10.828; the statrs inverse
/// CDF is checked against it in this module's tests; tables: Abramowitz & Stegun, table
/// 26.8). A hot explanation whose misfit exceeds the fault explanation's by more than this is
/// refuted.
pub const HOT_REFUTE_CHI2: f64 = 10.828;

/// The 0.90 quantile of chi-square with one degree of freedom (2.706; Abramowitz & Stegun,
/// table 26.8). A sensor already left out comes back on the hot explanation only when its
/// statistic is below this, i.e. when the hot feature explains the readings about as well as
/// the fault does or better (a real hot spot's witness typically gives a negative statistic):
/// the gap to [`HOT_REFUTE_CHI2`] is a hysteresis, so that a borderline sensor is not left
/// out and taken back row after row in `track`.
pub const HOT_READMIT_CHI2: f64 = 2.706;

/// The narrowest bump in the bank, as a multiple of `edge length / terms` (the half
/// wavelength of the last series term): a Gaussian of this standard deviation keeps its
/// spectrum above `e^{-4.4}` of its peak up to the last term, so the truncated series carries
/// its shape.
const NARROWEST_PER_TERM: f64 = 1.5;

/// Bank widths stop at this fraction of the edge length: a wider feature is seen by several
/// sensors and is the smooth fit's business.
const WIDEST_FRACTION: f64 = 1.0 / 6.0;

/// One bump of the bank: a Gaussian `exp(−(s − s₀)²/(2w²))` on one hidden edge.
#[derive(Debug, Clone)]
struct Bump {
    /// Index of the edge in the estimate's list of unknown edges.
    edge: usize,
    /// Index of the profile position nearest the centre.
    centre_index: usize,
    /// Centre, metres along the edge.
    centre_m: f64,
    /// Standard deviation of the Gaussian, metres.
    width_m: f64,
    /// Its series coefficients (least-squares projection on the profile map).
    coefficients: DVector<f64>,
}

/// The bank of candidate hot features along every hidden edge (module doc).
#[derive(Debug, Clone)]
pub struct FeatureBank {
    bumps: Vec<Bump>,
    edges: Vec<Edge>,
}

impl FeatureBank {
    /// Build the bank for the edges and profile maps of an estimate: `edge_positions[k]` are
    /// the profile positions of unknown edge `k` (metres) and `edge_maps[k]` its profile map;
    /// `terms` the series terms per edge.
    ///
    /// # Errors
    /// None in practice; the signature leaves room for a failing decomposition.
    pub fn new(
        edge_positions: &[(Edge, Vec<f64>)],
        edge_maps: &[LinearMap],
        terms: usize,
    ) -> Result<Self> {
        let mut bumps = Vec::new();
        for (k, ((_, pos), map)) in edge_positions.iter().zip(edge_maps).enumerate() {
            let (Some(&first), Some(&last)) = (pos.first(), pos.last()) else {
                continue;
            };
            let len = last - first;
            if len <= 0.0 || pos.len() < 3 {
                continue;
            }
            let pinv = map
                .matrix
                .clone()
                .pseudo_inverse(1e-10 * map.matrix.norm())
                .map_err(|_| crate::error::Error::Internal("profile map pseudo-inverse".into()))?;
            let step_grid = pos[1] - pos[0];
            let mut w = NARROWEST_PER_TERM * len / terms.max(1) as f64;
            while w <= WIDEST_FRACTION * len {
                let step = 0.5 * w;
                let count = (len / step).floor() as usize;
                for j in 0..=count {
                    let s0 = first + j as f64 * step;
                    let g = DVector::from_iterator(
                        pos.len(),
                        pos.iter().map(|&s| (-0.5 * ((s - s0) / w).powi(2)).exp()),
                    );
                    let centre_index =
                        (((s0 - first) / step_grid).round() as usize).min(pos.len() - 1);
                    bumps.push(Bump {
                        edge: k,
                        centre_index,
                        centre_m: s0,
                        width_m: w,
                        coefficients: &pinv * g,
                    });
                }
                w *= 2.0;
            }
        }
        Ok(FeatureBank {
            bumps,
            edges: edge_positions.iter().map(|(e, _)| *e).collect(),
        })
    }

    /// Number of candidate features.
    pub fn len(&self) -> usize {
        self.bumps.len()
    }

    /// Whether the bank is empty (no hidden edge long enough to carry a feature).
    pub fn is_empty(&self) -> bool {
        self.bumps.is_empty()
    }
}

/// The outcome of weighing the two explanations of one high reading.
#[derive(Debug, Clone, PartialEq)]
pub struct HotVerdict {
    /// Whether some non-negative feature of the bank raises this reading more than its
    /// neighbours' at all; without one the hot explanation is refuted whatever the
    /// statistic, and the feature fields below are placeholders.
    pub feature_found: bool,
    /// The statistic `Δ` of the module doc (chi-square units); `None` when the readings leave
    /// no degrees of freedom to tell the explanations apart (the sensor is then kept).
    pub statistic: Option<f64>,
    /// The best-fitting feature: its edge.
    pub edge: Edge,
    /// Its centre, metres along the edge.
    pub position_m: f64,
    /// Its full width at half maximum, metres.
    pub fwhm_m: f64,
    /// The hidden edge's temperature at the feature's centre under the hot explanation
    /// (smooth profile plus the feature), kelvin.
    pub peak_k: f64,
    /// The smallest steepest slope along the edge among the features that explain the
    /// reading, K/m: if the edge cannot change faster than this, the hot explanation is ruled
    /// out. `None` when no feature explains it.
    pub min_slope_k_per_m: Option<f64>,
}

impl HotVerdict {
    /// The statistic the sensor decisions compare with [`HOT_REFUTE_CHI2`] (to keep a sensor)
    /// and [`HOT_READMIT_CHI2`] (to take one back): `Δ`; `−∞` when the readings cannot tell
    /// the explanations apart (the hot one then stands); `+∞` when no feature raises the
    /// reading (it is refuted).
    pub fn score(&self) -> f64 {
        if !self.feature_found {
            f64::INFINITY
        } else {
            self.statistic.unwrap_or(f64::NEG_INFINITY)
        }
    }

    /// Whether a hot feature of a hidden edge explains the reading together with the others
    /// (the sensor is then kept).
    pub fn plausible(&self) -> bool {
        self.score() <= HOT_REFUTE_CHI2
    }
}

/// Full width at half maximum of a Gaussian of standard deviation `w`: `2 √(2 ln 2) w`.
fn fwhm(w: f64) -> f64 {
    2.0 * (2.0 * std::f64::consts::LN_2).sqrt() * w
}

/// The steepest slope of `a · exp(−s²/(2w²))`: `a / (w √e)`.
fn steepest_slope(a: f64, w: f64) -> f64 {
    a / (w * std::f64::consts::E.sqrt())
}

/// Weigh the two explanations of reading `i` of `input` (module doc). `edge_maps` are the
/// profile maps the bank was built from; `max_gradient_k_per_m` limits the feature's slope
/// when the case states one. Returns `None` when the reading is not higher than the other
/// sensors predict, or the leave-one-out fit is not possible.
///
/// # Errors
/// Only for a decomposition that fails on valid inputs.
pub fn hot_explanation(
    bank: &FeatureBank,
    edge_maps: &[LinearMap],
    input: &FitInput,
    i: usize,
    strength: Strength,
    max_gradient_k_per_m: Option<f64>,
) -> Result<Option<HotVerdict>> {
    let m = input.d.len();
    if i >= m || bank.is_empty() {
        return Ok(None);
    }
    let rest = super::fit::without_row(input, i);
    let Ok(loo): std::result::Result<Fit, _> = fit(&rest, strength) else {
        return Ok(None);
    };
    let lambda = loo.selection.lambda;
    let scale = loo.sigma_scale.unwrap_or(1.0);
    // the other sensors' smooth fit predicts reading i below its value?
    let a_i = input.a.row(i).transpose();
    let predicted = a_i.dot(&loo.solution.coefficients);
    if input.d[i] <= predicted {
        return Ok(None);
    }
    let mut sigma = input.sigma.clone();
    for (k, s) in sigma.iter_mut().enumerate() {
        *s = if k < i {
            loo.sigma[k]
        } else if k > i {
            loo.sigma[k - 1]
        } else {
            *s * scale
        };
    }
    let problem = Problem::new(
        input.a.clone(),
        input.d.clone(),
        sigma.clone(),
        input.penalty.clone(),
        true,
    )?;
    let dec = Decomposition::new(&problem)?;
    let s_data = dec.influence_matrix(lambda)?;
    // weighted influence H = W S W⁻¹, and Q = I − H
    let mut q = DMatrix::zeros(m, m);
    for r in 0..m {
        for c in 0..m {
            let h = s_data[(r, c)] * sigma[c] / sigma[r];
            q[(r, c)] = f64::from(u8::from(r == c)) - h;
        }
    }
    // symmetrise against round-off
    let q = (&q + q.transpose()) * 0.5;
    let y = input.d.component_div(&sigma);
    let qy = &q * &y;
    let j0 = y.dot(&qy);
    let j_fault = if q[(i, i)] > 1e-12 {
        j0 - qy[i] * qy[i] / q[(i, i)]
    } else {
        j0
    };
    // Under the smoothness prior the penalised minimum is chi-square with m − 1 − q degrees
    // of freedom for the fault fit (q unpenalised coefficients; the marginal-likelihood view
    // of the penalised fit, Wahba 1985, Ann. Statist. 13:1378–1402).
    let nu = m as f64 - 1.0 - dec.null_dimension() as f64;
    let s2 = if nu >= 0.5 {
        Some((j_fault / nu).max(1.0))
    } else {
        None
    };

    // the bank
    let mut best: Option<(f64, usize, f64)> = None; // (J_hot, bump, amplitude)
    let mut min_slope: Option<f64> = None;
    let threshold = s2.map(|s| j_fault + HOT_REFUTE_CHI2 * s);
    for (b, bump) in bank.bumps.iter().enumerate() {
        let k = &input.a * &bump.coefficients;
        let kt = k.component_div(&sigma);
        let qk = &q * &kt;
        let den = kt.dot(&qk);
        let num = kt.dot(&qy);
        if den.is_nan() || den <= 1e-12 * kt.norm_squared().max(1e-300) || num <= 0.0 {
            continue;
        }
        let mut amp = num / den;
        if let Some(g) = max_gradient_k_per_m {
            amp = amp.min(g * bump.width_m * std::f64::consts::E.sqrt());
        }
        let j = j0 - 2.0 * amp * num + amp * amp * den;
        if best.is_none_or(|(jb, _, _)| j < jb) {
            best = Some((j, b, amp));
        }
        if threshold.is_none_or(|t| j <= t) {
            let slope = steepest_slope(amp, bump.width_m);
            if min_slope.is_none_or(|s| slope < s) {
                min_slope = Some(slope);
            }
        }
    }
    let Some((j_hot, b, amp)) = best else {
        // no non-negative feature raises this reading more than its neighbours
        return Ok(Some(HotVerdict {
            feature_found: false,
            statistic: s2.map(|s| (j0 - j_fault) / s),
            edge: bank.edges.first().copied().unwrap_or(Edge::Bottom),
            position_m: 0.0,
            fwhm_m: 0.0,
            peak_k: predicted,
            min_slope_k_per_m: None,
        }));
    };
    let bump = &bank.bumps[b];
    // the edge temperature at the feature's centre under the hot explanation
    let k = &input.a * &bump.coefficients;
    let proj = dec.projection(&(&input.d - &k * amp))?;
    let mut c = DVector::zeros(input.a.ncols());
    dec.coefficients_into(&proj, lambda, &mut c)?;
    c += &bump.coefficients * amp;
    let map = &edge_maps[bump.edge];
    let peak_k =
        map.matrix.row(bump.centre_index).dot(&c.transpose()) + map.offset[bump.centre_index];
    let statistic = s2.map(|s| (j_hot - j_fault) / s);
    Ok(Some(HotVerdict {
        feature_found: true,
        statistic,
        edge: bank.edges[bump.edge],
        position_m: bump.centre_m,
        fwhm_m: fwhm(bump.width_m),
        peak_k,
        min_slope_k_per_m: min_slope,
    }))
}

#[cfg(test)]
mod tests {
    use super::*;
    use statrs::distribution::{ChiSquared, ContinuousCDF};

    #[test]
    fn refute_threshold_is_the_chi_square_quantile() {
        // Abramowitz & Stegun table 26.8: chi-square(1) upper 0.001 point 10.828, 0.10 point
        // 2.706
        let q = ChiSquared::new(1.0).unwrap().inverse_cdf(0.999);
        assert!((q - HOT_REFUTE_CHI2).abs() < 1e-3, "{q}");
        let q = ChiSquared::new(1.0).unwrap().inverse_cdf(0.90);
        assert!((q - HOT_READMIT_CHI2).abs() < 1e-3, "{q}");
    }

    #[test]
    fn gaussian_width_and_slope() {
        // FWHM of a Gaussian 2√(2 ln 2) σ ≈ 2.3548 σ (common practice)
        assert!((fwhm(1.0) - 2.354_82).abs() < 1e-5);
        // the steepest slope of exp(−s²/2) is at s = 1: e^{−1/2}
        let w = 0.7;
        let numeric = (0..20_000)
            .map(|j| {
                let s = j as f64 * 1e-4;
                s / (w * w) * (-0.5 * (s / w).powi(2)).exp()
            })
            .fold(0.0, f64::max);
        assert!((numeric - steepest_slope(1.0, w)).abs() < 1e-6);
    }
}
