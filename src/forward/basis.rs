//! Eigenfunctions along an edge and decay across the plate.
//!
//! Separating variables in Laplace's equation on a rectangle gives, for data on one edge and
//! homogeneous conditions on the others, `T(s, d) = Σ a_n φ_n(s) ψ_n(d)`, where `s` runs along
//! the edge and `d` is the distance into the plate. The functions `φ_n` come from the two
//! adjacent edges (zero value at a Dirichlet end, zero slope at an insulated end), and `ψ_n`
//! from the opposite edge (e.g. Carslaw & Jaeger, *Conduction of Heat in Solids*, 2nd ed.,
//! §5.2; Incropera et al., *Fundamentals of Heat and Mass Transfer*, §4.2):
//!
//! | adjacent ends | `φ_n(s)` | wavenumber `k_n` |
//! |---|---|---|
//! | Dirichlet, Dirichlet | `sin(k_n s)` | `(n+1) π / L` |
//! | insulated, insulated | `cos(k_n s)` (n = 0 is the constant mode) | `n π / L` |
//! | Dirichlet, insulated | `sin(k_n s)` | `(n+½) π / L` |
//! | insulated, Dirichlet | `cos(k_n s)` | `(n+½) π / L` |
//!
//! | opposite edge | `ψ_n(d)` |
//! |---|---|
//! | Dirichlet, at distance `D` | `sinh(k(D−d)) / sinh(kD)` (`(D−d)/D` when k = 0) |
//! | insulated, at distance `D` | `cosh(k(D−d)) / cosh(kD)` (1 when k = 0) |
//! | none (long strip) | `exp(−k d)` |
//!
//! The ratios are evaluated in the overflow-safe form
//! `e^{−kd} (1 ∓ e^{−2k(D−d)}) / (1 ∓ e^{−2kD})`, never as ratios of large hyperbolic
//! functions. Both families are evaluated for all `n` at once with recurrences: the
//! trigonometric ones by `f_{n+1} = 2 cos θ f_n − f_{n−1}` (valid for any arithmetic sequence
//! of angles), the exponentials by repeated multiplication.

use serde::Serialize;

/// Which eigenfunctions an edge's series uses (from its two adjacent edges).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum BasisKind {
    /// Both ends Dirichlet: `sin((n+1)πs/L)`.
    Sine,
    /// Both ends insulated: `cos(nπs/L)`, with the constant mode.
    Cosine,
    /// Dirichlet at `s = 0`, insulated at `s = L`: `sin((n+½)πs/L)`.
    QuarterSine,
    /// Insulated at `s = 0`, Dirichlet at `s = L`: `cos((n+½)πs/L)`.
    QuarterCosine,
}

impl BasisKind {
    /// The basis for an edge whose start and end neighbours are (not) Dirichlet.
    pub fn from_ends(start_dirichlet: bool, end_dirichlet: bool) -> Self {
        match (start_dirichlet, end_dirichlet) {
            (true, true) => BasisKind::Sine,
            (false, false) => BasisKind::Cosine,
            (true, false) => BasisKind::QuarterSine,
            (false, true) => BasisKind::QuarterCosine,
        }
    }

    /// Offset `n0` in `k_n = (n + n0) π / L`.
    fn index_offset(self) -> f64 {
        match self {
            BasisKind::Sine => 1.0,
            BasisKind::Cosine => 0.0,
            BasisKind::QuarterSine | BasisKind::QuarterCosine => 0.5,
        }
    }

    fn is_sine(self) -> bool {
        matches!(self, BasisKind::Sine | BasisKind::QuarterSine)
    }

    /// A short description for people.
    pub fn describe(self) -> &'static str {
        match self {
            BasisKind::Sine => "sines (both neighbours hold a temperature)",
            BasisKind::Cosine => "cosines with the constant mode (both neighbours insulated)",
            BasisKind::QuarterSine => {
                "quarter-wave sines (held at the start, insulated at the end)"
            }
            BasisKind::QuarterCosine => {
                "quarter-wave cosines (insulated at the start, held at the end)"
            }
        }
    }
}

/// The eigenfunctions along one edge of length `length` (metres).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EdgeBasis {
    /// Which family.
    pub kind: BasisKind,
    /// Edge length, metres.
    pub length: f64,
}

impl EdgeBasis {
    /// Wavenumber `k_n`, 1/m.
    pub fn wavenumber(&self, n: usize) -> f64 {
        (n as f64 + self.kind.index_offset()) * std::f64::consts::PI / self.length
    }

    /// `φ_n(s)`.
    pub fn value(&self, n: usize, s: f64) -> f64 {
        let a = self.wavenumber(n) * s;
        if self.kind.is_sine() {
            a.sin()
        } else {
            a.cos()
        }
    }

    /// `φ_n'(s)`.
    pub fn slope(&self, n: usize, s: f64) -> f64 {
        let k = self.wavenumber(n);
        if self.kind.is_sine() {
            k * (k * s).cos()
        } else {
            -k * (k * s).sin()
        }
    }

    /// `∫_0^L φ_n² ds`.
    pub fn norm_sq(&self, n: usize) -> f64 {
        if self.kind == BasisKind::Cosine && n == 0 {
            self.length
        } else {
            0.5 * self.length
        }
    }

    /// `∫_0^L φ_n ds`.
    pub fn integral(&self, n: usize) -> f64 {
        let k = self.wavenumber(n);
        if k == 0.0 {
            return self.length;
        }
        let kl = k * self.length;
        if self.kind.is_sine() {
            (1.0 - kl.cos()) / k
        } else {
            kl.sin() / k
        }
    }

    /// Write `φ_n(s)` for `n = 0..out.len()` into `out`, by recurrence.
    pub fn values_into(&self, s: f64, out: &mut [f64]) {
        let theta = std::f64::consts::PI * s / self.length;
        let n0 = self.kind.index_offset();
        let trig = |a: f64| {
            if self.kind.is_sine() {
                a.sin()
            } else {
                a.cos()
            }
        };
        let two_cos = 2.0 * theta.cos();
        let mut prev = trig((n0 - 1.0) * theta);
        let mut cur = trig(n0 * theta);
        for o in out.iter_mut() {
            *o = cur;
            let next = two_cos * cur - prev;
            prev = cur;
            cur = next;
        }
    }

    /// Fourier coefficients of piecewise-linear data on this basis:
    /// `a_n = ∫ g φ_n ds / ∫ φ_n² ds` for `n = 0..terms`, integrated exactly segment by
    /// segment. `segments` are `(s0, s1, g0, g1)` covering `[0, L]`.
    ///
    /// With `g = p + q s` on a segment:
    /// `∫ g sin(ks) = [−g cos(ks)/k + q sin(ks)/k²]`, `∫ g cos(ks) = [g sin(ks)/k + q cos(ks)/k²]`.
    pub fn project(&self, segments: &[(f64, f64, f64, f64)], terms: usize) -> Vec<f64> {
        (0..terms)
            .map(|n| {
                let k = self.wavenumber(n);
                let mut acc = 0.0;
                for &(s0, s1, g0, g1) in segments {
                    let q = (g1 - g0) / (s1 - s0);
                    if k == 0.0 {
                        acc += 0.5 * (g0 + g1) * (s1 - s0);
                        continue;
                    }
                    let anti = |s: f64, g: f64| {
                        let (sn, cs) = (k * s).sin_cos();
                        if self.kind.is_sine() {
                            -g * cs / k + q * sn / (k * k)
                        } else {
                            g * sn / k + q * cs / (k * k)
                        }
                    };
                    acc += anti(s1, g1) - anti(s0, g0);
                }
                acc / self.norm_sq(n)
            })
            .collect()
    }
}

/// How a mode decays away from its edge (from the opposite edge's condition).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum Decay {
    /// Opposite edge holds a temperature, `depth` metres away: sinh ratio.
    Dirichlet {
        /// Distance to the opposite edge, metres.
        depth: f64,
    },
    /// Opposite edge insulated, `depth` metres away: cosh ratio.
    Insulated {
        /// Distance to the opposite edge, metres.
        depth: f64,
    },
    /// No opposite edge (long strip): exponential.
    Unbounded,
}

/// Modes whose decay factor has fallen below this are dropped from a sum: they cannot change
/// a double-precision result.
pub const NEGLIGIBLE_DECAY: f64 = 1e-18;

impl Decay {
    /// A short description for people.
    pub fn describe(&self) -> &'static str {
        match self {
            Decay::Dirichlet { .. } => "sinh ratio (opposite edge holds a temperature)",
            Decay::Insulated { .. } => "cosh ratio (opposite edge insulated)",
            Decay::Unbounded => "exponential (no opposite edge)",
        }
    }

    /// `ψ(d)` for wavenumber `k`.
    pub fn value(&self, k: f64, d: f64) -> f64 {
        match *self {
            Decay::Unbounded => (-k * d).exp(),
            Decay::Dirichlet { depth } => {
                if k == 0.0 {
                    (depth - d) / depth
                } else {
                    // e^{-kd} (1 - e^{-2k(D-d)}) / (1 - e^{-2kD}), with expm1 for small k.
                    (-k * d).exp() * (-(-2.0 * k * (depth - d)).exp_m1())
                        / (-(-2.0 * k * depth).exp_m1())
                }
            }
            Decay::Insulated { depth } => {
                (-k * d).exp() * (1.0 + (-2.0 * k * (depth - d)).exp())
                    / (1.0 + (-2.0 * k * depth).exp())
            }
        }
    }

    /// `ψ'(d)`, derivative with respect to the distance into the plate.
    pub fn slope(&self, k: f64, d: f64) -> f64 {
        match *self {
            Decay::Unbounded => -k * (-k * d).exp(),
            Decay::Dirichlet { depth } => {
                if k == 0.0 {
                    -1.0 / depth
                } else {
                    // -k cosh(k(D-d)) / sinh(kD)
                    -k * (-k * d).exp() * (1.0 + (-2.0 * k * (depth - d)).exp())
                        / (-(-2.0 * k * depth).exp_m1())
                }
            }
            Decay::Insulated { depth } => {
                // -k sinh(k(D-d)) / cosh(kD)
                -k * (-k * d).exp() * (-(-2.0 * k * (depth - d)).exp_m1())
                    / (1.0 + (-2.0 * k * depth).exp())
            }
        }
    }

    /// `∫_0^D ψ(d) dd` over the whole depth (`∞` for a strip: `1/k`).
    pub fn integral(&self, k: f64) -> f64 {
        match *self {
            Decay::Unbounded => {
                if k == 0.0 {
                    f64::INFINITY
                } else {
                    1.0 / k
                }
            }
            Decay::Dirichlet { depth } => {
                if k == 0.0 {
                    0.5 * depth
                } else {
                    (0.5 * k * depth).tanh() / k
                }
            }
            Decay::Insulated { depth } => {
                if k == 0.0 {
                    depth
                } else {
                    (k * depth).tanh() / k
                }
            }
        }
    }
}

/// One edge's series: its basis, its decay, and how many terms it uses.
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    /// The eigenfunctions along the edge.
    pub basis: EdgeBasis,
    /// The decay into the plate.
    pub decay: Decay,
    /// Wavenumbers `k_n`, precomputed.
    wavenumbers: Vec<f64>,
    /// `1 / (1 ∓ e^{-2 k_n D})`, precomputed (1 for a strip).
    inv_denominator: Vec<f64>,
}

impl Series {
    /// A series of `terms` modes.
    pub fn new(basis: EdgeBasis, decay: Decay, terms: usize) -> Self {
        let wavenumbers: Vec<f64> = (0..terms).map(|n| basis.wavenumber(n)).collect();
        let inv_denominator = wavenumbers
            .iter()
            .map(|&k| match decay {
                Decay::Unbounded => 1.0,
                Decay::Dirichlet { depth } => {
                    if k == 0.0 {
                        f64::NAN // the k = 0 mode is handled apart (linear decay)
                    } else {
                        1.0 / (-(-2.0 * k * depth).exp_m1())
                    }
                }
                Decay::Insulated { depth } => 1.0 / (1.0 + (-2.0 * k * depth).exp()),
            })
            .collect();
        Series {
            basis,
            decay,
            wavenumbers,
            inv_denominator,
        }
    }

    /// Number of terms.
    pub fn terms(&self) -> usize {
        self.wavenumbers.len()
    }

    /// Wavenumber of mode `n`, 1/m.
    pub fn wavenumber(&self, n: usize) -> f64 {
        self.wavenumbers[n]
    }

    /// Write `φ_n(s) ψ_n(d)` for every mode into `out` (length [`Series::terms`]), and return
    /// how many leading entries are non-negligible (the rest are set to zero).
    pub fn modes_into(&self, s: f64, d: f64, out: &mut [f64]) -> usize {
        let n = self.terms();
        debug_assert_eq!(out.len(), n);
        if n == 0 {
            return 0;
        }
        self.basis.values_into(s, out);
        let dk = std::f64::consts::PI / self.basis.length; // k_{n+1} - k_n
        let k0 = self.wavenumbers[0];
        // e^{-k_n d} and, for bounded plates, e^{-k_n (2D - d)}, by recurrence.
        let step_near = (-dk * d).exp();
        let mut near = (-k0 * d).exp();
        let (mut far, step_far, sign) = match self.decay {
            Decay::Unbounded => (0.0, 0.0, 0.0),
            Decay::Dirichlet { depth } => {
                let e = 2.0 * depth - d;
                ((-k0 * e).exp(), (-dk * e).exp(), -1.0)
            }
            Decay::Insulated { depth } => {
                let e = 2.0 * depth - d;
                ((-k0 * e).exp(), (-dk * e).exp(), 1.0)
            }
        };
        let mut used = n;
        for (j, o) in out.iter_mut().enumerate() {
            if near < NEGLIGIBLE_DECAY {
                used = j;
                break;
            }
            let psi = if self.wavenumbers[j] == 0.0 {
                self.decay.value(0.0, d)
            } else {
                match self.decay {
                    Decay::Unbounded => near,
                    _ => (near + sign * far) * self.inv_denominator[j],
                }
            };
            *o *= psi;
            near *= step_near;
            far *= step_far;
        }
        for o in &mut out[used..] {
            *o = 0.0;
        }
        used
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    // Fourier sine coefficients of a constant T0 on (0, W): 4 T0/(nπ) for odd n, 0 for even n
    // (standard Fourier series result; e.g. Boas, Mathematical Methods in the Physical
    // Sciences, ch. 7).
    #[test]
    fn sine_coefficients_of_a_constant() {
        let w = 0.37;
        let t0 = 12.5;
        let basis = EdgeBasis {
            kind: BasisKind::Sine,
            length: w,
        };
        let a = basis.project(&[(0.0, w, t0, t0)], 40);
        for (i, &an) in a.iter().enumerate() {
            let n = (i + 1) as f64;
            let expected = if (i + 1) % 2 == 1 {
                4.0 * t0 / (n * PI)
            } else {
                0.0
            };
            assert!((an - expected).abs() < 1e-12, "n={n}: {an} vs {expected}");
        }
    }

    #[test]
    fn recurrence_matches_direct_evaluation() {
        for kind in [
            BasisKind::Sine,
            BasisKind::Cosine,
            BasisKind::QuarterSine,
            BasisKind::QuarterCosine,
        ] {
            let b = EdgeBasis { kind, length: 0.8 };
            let mut out = vec![0.0; 300];
            for &s in &[0.0, 0.013, 0.4, 0.79, 0.8] {
                b.values_into(s, &mut out);
                for (n, &v) in out.iter().enumerate() {
                    assert!((v - b.value(n, s)).abs() < 1e-11, "{kind:?} n={n} s={s}");
                }
            }
        }
    }

    #[test]
    fn decay_recurrence_matches_closed_form() {
        for decay in [
            Decay::Dirichlet { depth: 0.3 },
            Decay::Insulated { depth: 0.3 },
            Decay::Unbounded,
        ] {
            for kind in [BasisKind::Sine, BasisKind::Cosine, BasisKind::QuarterSine] {
                let b = EdgeBasis { kind, length: 0.5 };
                let series = Series::new(b, decay, 120);
                let mut out = vec![0.0; 120];
                for &(s, d) in &[(0.1, 0.0), (0.25, 0.01), (0.33, 0.15), (0.49, 0.29)] {
                    series.modes_into(s, d, &mut out);
                    for (n, &v) in out.iter().enumerate() {
                        let k = b.wavenumber(n);
                        let expected = b.value(n, s) * decay.value(k, d);
                        assert!(
                            (v - expected).abs() < 1e-12 + 1e-10 * expected.abs(),
                            "{decay:?} {kind:?} n={n}: {v} vs {expected}"
                        );
                    }
                }
            }
        }
    }

    // The decay functions against their textbook hyperbolic forms where those do not overflow.
    #[test]
    fn overflow_safe_forms_equal_hyperbolic_ratios() {
        let (k, depth, d): (f64, f64, f64) = (7.0, 0.4, 0.13);
        let sinh_ratio = (k * (depth - d)).sinh() / (k * depth).sinh();
        let cosh_ratio = (k * (depth - d)).cosh() / (k * depth).cosh();
        assert!((Decay::Dirichlet { depth }.value(k, d) - sinh_ratio).abs() < 1e-14);
        assert!((Decay::Insulated { depth }.value(k, d) - cosh_ratio).abs() < 1e-14);
        let dsinh = -k * (k * (depth - d)).cosh() / (k * depth).sinh();
        assert!((Decay::Dirichlet { depth }.slope(k, d) - dsinh).abs() < 1e-12);
        // Far beyond f64's sinh range the ratio is still finite and tends to e^{-kd}.
        let big = Decay::Dirichlet { depth: 1.0 }.value(2000.0, 0.001);
        assert!((big - (-2.0_f64).exp()).abs() < 1e-14);
    }

    #[test]
    fn integrals_match_quadrature() {
        let b = EdgeBasis {
            kind: BasisKind::QuarterCosine,
            length: 0.9,
        };
        for n in 0..5 {
            let m = 20000;
            let h = 0.9 / m as f64;
            let q: f64 = (0..m).map(|i| b.value(n, (i as f64 + 0.5) * h) * h).sum();
            assert!((q - b.integral(n)).abs() < 1e-8);
        }
        let dec = Decay::Dirichlet { depth: 0.6 };
        let m = 20000;
        let h = 0.6 / m as f64;
        let q: f64 = (0..m)
            .map(|i| dec.value(3.0, (i as f64 + 0.5) * h) * h)
            .sum();
        assert!((q - dec.integral(3.0)).abs() < 1e-8);
    }
}
