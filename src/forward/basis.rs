//! Eigenfunctions along an edge and decay across the plate.
//!
//! Separating variables in Laplace's equation on a rectangle gives, for data on one edge and
//! homogeneous conditions on the others, `T(s, d) = Σ a_n φ_n(s) ψ_n(d)`, where `s` runs along
//! the edge and `d` is the distance into the plate. The functions `φ_n` come from the two
//! adjacent edges (zero value at a Dirichlet end, zero slope at an insulated end, a Robin
//! condition at a convective end), and `ψ_n` from the opposite edge (e.g. Carslaw & Jaeger,
//! *Conduction of Heat in Solids*, 2nd ed., §3.9 and §5.2; Incropera et al., *Fundamentals of
//! Heat and Mass Transfer*, §4.2):
//!
//! | adjacent ends | `φ_n(s)` | wavenumber `k_n` |
//! |---|---|---|
//! | Dirichlet, Dirichlet | `sin(k_n s)` | `(n+1) π / L` |
//! | insulated, insulated | `cos(k_n s)` (n = 0 is the constant mode) | `n π / L` |
//! | Dirichlet, insulated | `sin(k_n s)` | `(n+½) π / L` |
//! | insulated, Dirichlet | `cos(k_n s)` | `(n+½) π / L` |
//! | any, with a convective end | `sin(k_n s + θ₀(k_n))` | root of `k L + θ₀(k) + θ_L(k) = (n+1) π` |
//!
//! Every family is `φ_n(s) = sin(k_n s + θ₀)`, with the end phase `θ(k) = 0` at a Dirichlet
//! end, `π/2` at an insulated end and `atan(k/β)` at a convective end, `β = h/κ` (1/m; `κ` the
//! conductivity). A convective neighbour at `s = 0` imposes `φ'(0) = β φ(0)` (heat leaves
//! through it: `κ ∂T/∂n_in = h (T − T∞)`, homogeneous here), one at `s = L` imposes
//! `−φ'(L) = β φ(L)`; `sin(ks + θ₀)` meets the first for `tan θ₀ = k/β`, and the second
//! holds when `kL + θ₀ + θ_L = mπ`. The left side grows strictly with `k` (each phase
//! grows from its value at 0 to at most `π/2`), so branch `n` has exactly one root in
//! `[nπ/L, (n+1)π/L]`: it is bracketed exactly and refined by Brent's method (argmin's
//! `BrentRoot`). These are the roots tabulated by Carslaw & Jaeger (Appendix IV, `ξ tan ξ = Bi`
//! for one convective and one insulated end). Robin eigenfunctions are orthogonal (a
//! self-adjoint Sturm–Liouville problem), with `‖φ_n‖² = L/2 − (sin 2(kL+θ₀) − sin 2θ₀)/(4k)`.
//!
//! | opposite edge | `ψ_n(d)` |
//! |---|---|
//! | Dirichlet, at distance `D` | `sinh(k(D−d)) / sinh(kD)` (`(D−d)/D` when k = 0) |
//! | insulated, at distance `D` | `cosh(k(D−d)) / cosh(kD)` (1 when k = 0) |
//! | convective (`β`), at distance `D` | `u(d)/u(0)`, `u = k cosh(k(D−d)) + β sinh(k(D−d))` (`(1+β(D−d))/(1+βD)` when k = 0) |
//! | none (long strip) | `exp(−k d)` |
//!
//! The ratios are evaluated in the overflow-safe form
//! `e^{−kd} (1 ∓ e^{−2k(D−d)}) / (1 ∓ e^{−2kD})`, never as ratios of large hyperbolic
//! functions; the convective one as `e^{−kd} N(2k(D−d)) / N(2kD)` with
//! `N(x) = k (1 + e^{−x}) − β expm1(−x)`, a sum of two non-negative terms. The families of
//! uniformly spaced wavenumbers (no convective end) are evaluated for all `n` at once with
//! recurrences: the trigonometric ones by `f_{n+1} = 2 cos θ f_n − f_{n−1}` (valid for any
//! arithmetic sequence of angles), the exponentials by repeated multiplication; the others
//! mode by mode.
//!
//! A convective edge's own series is normalised on its Robin data rather than its
//! temperature: mode `n` carries the gain `g_n = 1 / (ψ_n(0) − ψ_n'(0)/β)`, so that
//! `T − T_d/β` on the edge is `Σ a_n φ_n(s)` (`docs/method.md` §1, convective edges).

use argmin::core::{CostFunction, Executor};
use argmin::solver::brent::BrentRoot;
use serde::Serialize;
use std::f64::consts::{FRAC_PI_2, PI};

/// What the neighbouring edge at one end imposes on an edge's eigenfunctions.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum End {
    /// The neighbour holds a temperature (fixed or unknown): `φ = 0`.
    Held,
    /// The neighbour is insulated: `φ' = 0`.
    Insulated,
    /// The neighbour is convective: a Robin condition with `beta = h/κ`, 1/m.
    Convective {
        /// `h / κ`, 1/m (finite, positive).
        beta: f64,
    },
}

impl End {
    /// The phase `θ(k)` of `sin(ks + θ)` that meets this end's condition.
    pub fn phase(self, k: f64) -> f64 {
        match self {
            End::Held => 0.0,
            End::Insulated => FRAC_PI_2,
            End::Convective { beta } => k.atan2(beta),
        }
    }
}

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
    /// At least one convective end: `sin(k_n s + θ₀(k_n))` with transcendental `k_n`.
    Robin,
}

impl BasisKind {
    /// `n₀` in the closed form `k_n = (n + n₀) π / L` of the families without a convective
    /// end; `None` for [`BasisKind::Robin`], whose wavenumbers are roots.
    fn index_offset(self) -> Option<f64> {
        match self {
            BasisKind::Sine => Some(1.0),
            BasisKind::Cosine => Some(0.0),
            BasisKind::QuarterSine | BasisKind::QuarterCosine => Some(0.5),
            BasisKind::Robin => None,
        }
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
            BasisKind::Robin => "Robin eigenfunctions sin(k s + θ) (a convective neighbour)",
        }
    }
}

/// The eigenfunctions along one edge of length `length` (metres).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EdgeBasis {
    /// The condition at `s = 0` (the edge's start neighbour).
    pub start: End,
    /// The condition at `s = L`.
    pub end: End,
    /// Edge length, metres.
    pub length: f64,
}

/// `k L + θ₀(k) + θ_L(k) − (n+1)π` as a function of `x = k L`, for argmin.
struct Branch {
    start: End,
    end: End,
    length: f64,
    target: f64,
}

impl Branch {
    fn value(&self, x: f64) -> f64 {
        let k = x / self.length;
        x + self.start.phase(k) + self.end.phase(k) - self.target
    }
}

impl CostFunction for Branch {
    type Param = f64;
    type Output = f64;
    fn cost(&self, x: &f64) -> Result<f64, argmin::core::Error> {
        Ok(self.value(*x))
    }
}

impl EdgeBasis {
    /// A basis with the given end conditions.
    pub fn new(start: End, end: End, length: f64) -> Self {
        EdgeBasis { start, end, length }
    }

    /// The family, for descriptions.
    pub fn kind(&self) -> BasisKind {
        match (self.start, self.end) {
            (End::Convective { .. }, _) | (_, End::Convective { .. }) => BasisKind::Robin,
            (End::Held, End::Held) => BasisKind::Sine,
            (End::Insulated, End::Insulated) => BasisKind::Cosine,
            (End::Held, End::Insulated) => BasisKind::QuarterSine,
            (End::Insulated, End::Held) => BasisKind::QuarterCosine,
        }
    }

    /// Whether the wavenumbers are `(n + n₀) π / L` with a constant phase (no convective end),
    /// so that the recurrences apply.
    pub fn is_uniform(&self) -> bool {
        self.kind() != BasisKind::Robin
    }

    /// Wavenumber `k_n`, 1/m: the closed form without a convective end, else the root of
    /// branch `n` (see the module notes).
    pub fn wavenumber(&self, n: usize) -> f64 {
        if let Some(n0) = self.kind().index_offset() {
            return (n as f64 + n0) * PI / self.length;
        }
        let target = (n as f64 + 1.0) * PI;
        let problem = Branch {
            start: self.start,
            end: self.end,
            length: self.length,
            target,
        };
        let (lo, hi) = (n as f64 * PI, target);
        // a root at a bracket's end (a phase that does not grow near it)
        if problem.value(lo) >= 0.0 {
            return lo / self.length;
        }
        if problem.value(hi) <= 0.0 {
            return hi / self.length;
        }
        let solver = BrentRoot::new(lo, hi, 1e-15 * hi.max(1.0));
        let x = Executor::new(problem, solver)
            .configure(|s| s.param(0.5 * (lo + hi)).max_iters(200))
            .ctrlc(false)
            .run()
            .ok()
            .and_then(|r| r.state().best_param)
            .unwrap_or(0.5 * (lo + hi));
        x.clamp(lo, hi) / self.length
    }

    /// The first `terms` wavenumbers.
    pub fn wavenumbers(&self, terms: usize) -> Vec<f64> {
        (0..terms).map(|n| self.wavenumber(n)).collect()
    }

    /// `φ(s) = sin(k s + θ₀(k))` for wavenumber `k`.
    pub fn value(&self, k: f64, s: f64) -> f64 {
        (k * s + self.start.phase(k)).sin()
    }

    /// `φ'(s)` for wavenumber `k`.
    pub fn slope(&self, k: f64, s: f64) -> f64 {
        k * (k * s + self.start.phase(k)).cos()
    }

    /// `∫_0^L φ² ds` for wavenumber `k`.
    pub fn norm_sq(&self, k: f64) -> f64 {
        let theta = self.start.phase(k);
        if k == 0.0 {
            return self.length * theta.sin().powi(2);
        }
        let kl = k * self.length;
        0.5 * self.length - ((2.0 * (kl + theta)).sin() - (2.0 * theta).sin()) / (4.0 * k)
    }

    /// `∫_0^L φ ds` for wavenumber `k`.
    pub fn integral(&self, k: f64) -> f64 {
        let theta = self.start.phase(k);
        if k == 0.0 {
            return self.length * theta.sin();
        }
        (theta.cos() - (k * self.length + theta).cos()) / k
    }

    /// Write `φ_n(s)` for the uniform families (`n = 0..out.len()`) into `out`, by
    /// recurrence; `None` (and `out` untouched) for a basis with a convective end.
    fn uniform_values_into(&self, s: f64, out: &mut [f64]) -> Option<()> {
        let n0 = self.kind().index_offset()?;
        let theta = PI * s / self.length;
        let phase = self.start.phase(1.0);
        let two_cos = 2.0 * theta.cos();
        let mut prev = ((n0 - 1.0) * theta + phase).sin();
        let mut cur = (n0 * theta + phase).sin();
        for o in out.iter_mut() {
            *o = cur;
            let next = two_cos * cur - prev;
            prev = cur;
            cur = next;
        }
        Some(())
    }

    /// Coefficients of piecewise-linear data on this basis:
    /// `a_n = ∫ g φ_n ds / ∫ φ_n² ds` for each wavenumber, integrated exactly segment by
    /// segment. `segments` are `(s0, s1, g0, g1)` covering `[0, L]`.
    ///
    /// With `g = p + q s` on a segment and `u = ks + θ`:
    /// `∫ g sin u ds = [−g cos(u)/k + q sin(u)/k²]`.
    pub fn project(&self, segments: &[(f64, f64, f64, f64)], wavenumbers: &[f64]) -> Vec<f64> {
        wavenumbers
            .iter()
            .map(|&k| {
                let theta = self.start.phase(k);
                let mut acc = 0.0;
                for &(s0, s1, g0, g1) in segments {
                    if k == 0.0 {
                        acc += 0.5 * (g0 + g1) * (s1 - s0) * theta.sin();
                        continue;
                    }
                    let q = (g1 - g0) / (s1 - s0);
                    let anti = |s: f64, g: f64| {
                        let (sn, cs) = (k * s + theta).sin_cos();
                        -g * cs / k + q * sn / (k * k)
                    };
                    acc += anti(s1, g1) - anti(s0, g0);
                }
                acc / self.norm_sq(k)
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
    /// Opposite edge convective, `depth` metres away, with `beta = h/κ` (1/m).
    Convective {
        /// Distance to the opposite edge, metres.
        depth: f64,
        /// `h / κ`, 1/m.
        beta: f64,
    },
    /// No opposite edge (long strip): exponential.
    Unbounded,
}

/// Modes whose decay factor has fallen below this are dropped from a sum: they cannot change
/// a double-precision result.
pub const NEGLIGIBLE_DECAY: f64 = 1e-18;

/// `N(x) = k (1 + e^{−x}) − β expm1(−x)` and `M(x) = −k expm1(−x) + β (1 + e^{−x})`: twice
/// `e^{−x/2}` times `k cosh(x/2) + β sinh(x/2)` and `k sinh(x/2) + β cosh(x/2)`.
fn robin_nm(k: f64, beta: f64, x: f64) -> (f64, f64) {
    let e = (-x).exp();
    let em1 = (-x).exp_m1();
    (k * (1.0 + e) - beta * em1, -k * em1 + beta * (1.0 + e))
}

impl Decay {
    /// A short description for people.
    pub fn describe(&self) -> &'static str {
        match self {
            Decay::Dirichlet { .. } => "sinh ratio (opposite edge holds a temperature)",
            Decay::Insulated { .. } => "cosh ratio (opposite edge insulated)",
            Decay::Convective { .. } => "Robin ratio k cosh + β sinh (opposite edge convective)",
            Decay::Unbounded => "exponential (no opposite edge)",
        }
    }

    /// The distance to the opposite edge, metres; `None` for a strip.
    pub fn depth(&self) -> Option<f64> {
        match *self {
            Decay::Dirichlet { depth }
            | Decay::Insulated { depth }
            | Decay::Convective { depth, .. } => Some(depth),
            Decay::Unbounded => None,
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
            Decay::Convective { depth, beta } => {
                if k == 0.0 {
                    (1.0 + beta * (depth - d)) / (1.0 + beta * depth)
                } else {
                    let (num, _) = robin_nm(k, beta, 2.0 * k * (depth - d));
                    let (den, _) = robin_nm(k, beta, 2.0 * k * depth);
                    (-k * d).exp() * num / den
                }
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
            Decay::Convective { depth, beta } => {
                if k == 0.0 {
                    -beta / (1.0 + beta * depth)
                } else {
                    // -k (k sinh(k(D-d)) + β cosh(k(D-d))) / (k cosh(kD) + β sinh(kD))
                    let (_, m) = robin_nm(k, beta, 2.0 * k * (depth - d));
                    let (den, _) = robin_nm(k, beta, 2.0 * k * depth);
                    -k * (-k * d).exp() * m / den
                }
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
            Decay::Convective { depth, beta } => {
                if k == 0.0 {
                    (depth + 0.5 * beta * depth * depth) / (1.0 + beta * depth)
                } else {
                    // (sinh kD + β (cosh kD − 1)/k) / (k cosh kD + β sinh kD), times 2e^{−kD}
                    let num =
                        -(-2.0 * k * depth).exp_m1() + beta / k * (-k * depth).exp_m1().powi(2);
                    let (den, _) = robin_nm(k, beta, 2.0 * k * depth);
                    num / den
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
    /// Start phases `θ₀(k_n)`, precomputed.
    phases: Vec<f64>,
    /// `‖φ_n‖²`, precomputed.
    norms: Vec<f64>,
    /// Per-mode factor on `ψ_n`: `1 / (1 ∓ e^{-2 k_n D})` for the uniform fast path (1 for
    /// a strip), times the convective gain where the edge itself is convective.
    inv_denominator: Vec<f64>,
    /// The own-edge gain `g_n` of a convective edge (module notes); 1 otherwise.
    gains: Vec<f64>,
    /// Whether [`Series::modes_into`] may use the recurrences.
    uniform: bool,
}

impl Series {
    /// A series of `terms` modes for an edge that holds a temperature.
    pub fn new(basis: EdgeBasis, decay: Decay, terms: usize) -> Self {
        Series::with_own_condition(basis, decay, terms, None)
    }

    /// A series of `terms` modes; `own_beta` is `Some(h/κ)` for a convective edge, whose
    /// modes are normalised on the Robin data `T − T_d/β` (module notes).
    pub fn with_own_condition(
        basis: EdgeBasis,
        decay: Decay,
        terms: usize,
        own_beta: Option<f64>,
    ) -> Self {
        let wavenumbers = basis.wavenumbers(terms);
        let phases = wavenumbers.iter().map(|&k| basis.start.phase(k)).collect();
        let norms = wavenumbers.iter().map(|&k| basis.norm_sq(k)).collect();
        let gains: Vec<f64> = wavenumbers
            .iter()
            .map(|&k| match own_beta {
                Some(beta) => beta / (beta - decay.slope(k, 0.0)),
                None => 1.0,
            })
            .collect();
        let inv_denominator = wavenumbers
            .iter()
            .zip(&gains)
            .map(|(&k, g)| {
                g * match decay {
                    Decay::Unbounded | Decay::Convective { .. } => 1.0,
                    Decay::Dirichlet { depth } => {
                        if k == 0.0 {
                            f64::NAN // the k = 0 mode is handled apart (linear decay)
                        } else {
                            1.0 / (-(-2.0 * k * depth).exp_m1())
                        }
                    }
                    Decay::Insulated { depth } => 1.0 / (1.0 + (-2.0 * k * depth).exp()),
                }
            })
            .collect();
        let uniform = basis.is_uniform() && !matches!(decay, Decay::Convective { .. });
        Series {
            basis,
            decay,
            wavenumbers,
            phases,
            norms,
            inv_denominator,
            gains,
            uniform,
        }
    }

    /// The first `terms` modes of this series: its tables cut, no root found again.
    pub fn truncated(mut self, terms: usize) -> Self {
        self.wavenumbers.truncate(terms);
        self.phases.truncate(terms);
        self.norms.truncate(terms);
        self.inv_denominator.truncate(terms);
        self.gains.truncate(terms);
        self
    }

    /// Number of terms.
    pub fn terms(&self) -> usize {
        self.wavenumbers.len()
    }

    /// Wavenumber of mode `n`, 1/m.
    pub fn wavenumber(&self, n: usize) -> f64 {
        self.wavenumbers[n]
    }

    /// `φ_n(s)`.
    pub fn phi(&self, n: usize, s: f64) -> f64 {
        (self.wavenumbers[n] * s + self.phases[n]).sin()
    }

    /// `φ_n'(s)`.
    pub fn phi_slope(&self, n: usize, s: f64) -> f64 {
        let k = self.wavenumbers[n];
        k * (k * s + self.phases[n]).cos()
    }

    /// `∫_0^L φ_n ds`.
    pub fn phi_integral(&self, n: usize) -> f64 {
        self.basis.integral(self.wavenumbers[n])
    }

    /// `‖φ_n‖² = ∫_0^L φ_n² ds`.
    pub fn norm_sq(&self, n: usize) -> f64 {
        self.norms[n]
    }

    /// `g_n ψ_n(d)`: the decay of mode `n` with its gain.
    pub fn psi(&self, n: usize, d: f64) -> f64 {
        self.gains[n] * self.decay.value(self.wavenumbers[n], d)
    }

    /// `g_n ψ_n'(d)`.
    pub fn psi_slope(&self, n: usize, d: f64) -> f64 {
        self.gains[n] * self.decay.slope(self.wavenumbers[n], d)
    }

    /// `g_n ∫_0^D ψ_n`.
    pub fn psi_integral(&self, n: usize) -> f64 {
        self.gains[n] * self.decay.integral(self.wavenumbers[n])
    }

    /// Coefficients of piecewise-linear data on this series' eigenfunctions
    /// ([`EdgeBasis::project`]).
    pub fn project(&self, segments: &[(f64, f64, f64, f64)]) -> Vec<f64> {
        self.basis.project(segments, &self.wavenumbers)
    }

    /// `φ_n(s_k) / ‖φ_n‖²` for `n < width` at every point `s_k` of `points` into `out`
    /// (`width × points.len()`, mode after mode: `out[n b + k]`), each value the same number
    /// as [`Series::phi_into`] at `s_k` divided by [`Series::norm_sq`]`(n)`. The uniform
    /// families run their recurrence for all the points in step (the same operations on each
    /// point, side by side instead of one chain after another); `row` is scratch. Inlined so
    /// that a caller built for AVX2 (`crate::simd`) runs it four points to an instruction.
    #[inline(always)]
    pub fn scaled_phi_table(
        &self,
        points: &[f64],
        width: usize,
        out: &mut [f64],
        row: &mut Vec<f64>,
    ) {
        let b = points.len();
        let out = &mut out[..width * b];
        match self.basis.kind().index_offset() {
            Some(n0) if b > 0 => {
                // per point: the recurrence's two_cos, previous and current values
                // (`EdgeBasis::uniform_values_into`)
                row.clear();
                row.resize(3 * b, 0.0);
                let (two_cos, state) = row.split_at_mut(b);
                let (prev, cur) = state.split_at_mut(b);
                let phase = self.basis.start.phase(1.0);
                for (k, &s) in points.iter().enumerate() {
                    let theta = PI * s / self.basis.length;
                    two_cos[k] = 2.0 * theta.cos();
                    prev[k] = ((n0 - 1.0) * theta + phase).sin();
                    cur[k] = (n0 * theta + phase).sin();
                }
                for (n, o) in out.chunks_exact_mut(b).enumerate() {
                    let norm = self.norm_sq(n);
                    for (((o, tc), p), c) in o
                        .iter_mut()
                        .zip(two_cos.iter())
                        .zip(prev.iter_mut())
                        .zip(cur.iter_mut())
                    {
                        *o = *c / norm;
                        let next = tc * *c - *p;
                        *p = *c;
                        *c = next;
                    }
                }
            }
            _ => {
                row.clear();
                row.resize(width, 0.0);
                for (k, &s) in points.iter().enumerate() {
                    self.phi_into(s, row);
                    for (n, v) in row.iter().enumerate() {
                        out[n * b + k] = v / self.norm_sq(n);
                    }
                }
            }
        }
    }

    /// Write `φ_n(s)` for `n = 0..out.len()` (at most [`Series::terms`]) into `out`.
    pub fn phi_into(&self, s: f64, out: &mut [f64]) {
        if self.basis.uniform_values_into(s, out).is_none() {
            for (n, o) in out.iter_mut().enumerate() {
                *o = self.phi(n, s);
            }
        }
    }

    /// Write `φ_n(s) g_n ψ_n(d)` for every mode into `out` (length [`Series::terms`]), and
    /// return how many leading entries are non-negligible (the rest are set to zero).
    pub fn modes_into(&self, s: f64, d: f64, out: &mut [f64]) -> usize {
        let n = self.terms();
        debug_assert_eq!(out.len(), n);
        if n == 0 {
            return 0;
        }
        if !self.uniform {
            let mut used = n;
            for (j, o) in out.iter_mut().enumerate() {
                let k = self.wavenumbers[j];
                if (-k * d).exp() < NEGLIGIBLE_DECAY {
                    used = j;
                    break;
                }
                *o = self.phi(j, s) * self.psi(j, d);
            }
            for o in &mut out[used..] {
                *o = 0.0;
            }
            return used;
        }
        self.phi_into(s, out);
        let dk = PI / self.basis.length; // k_{n+1} - k_n
        let k0 = self.wavenumbers[0];
        // e^{-k_n d} and, for bounded plates, e^{-k_n (2D - d)}, by recurrence.
        let step_near = (-dk * d).exp();
        let mut near = (-k0 * d).exp();
        let (mut far, step_far, sign) = match self.decay {
            Decay::Unbounded | Decay::Convective { .. } => (0.0, 0.0, 0.0),
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
                self.gains[j] * self.decay.value(0.0, d)
            } else {
                match self.decay {
                    Decay::Unbounded => near * self.inv_denominator[j],
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

    fn basis(start: End, end: End, length: f64) -> EdgeBasis {
        EdgeBasis::new(start, end, length)
    }

    const UNIFORM: [(End, End); 4] = [
        (End::Held, End::Held),
        (End::Insulated, End::Insulated),
        (End::Held, End::Insulated),
        (End::Insulated, End::Held),
    ];

    // Fourier sine coefficients of a constant T0 on (0, W): 4 T0/(nπ) for odd n, 0 for even n
    // (standard Fourier series result; e.g. Boas, Mathematical Methods in the Physical
    // Sciences, ch. 7).
    #[test]
    fn sine_coefficients_of_a_constant() {
        let w = 0.37;
        let t0 = 12.5;
        let b = basis(End::Held, End::Held, w);
        let a = b.project(&[(0.0, w, t0, t0)], &b.wavenumbers(40));
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
    fn uniform_wavenumbers_are_the_closed_forms() {
        let l = 0.8;
        for ((start, end), n0) in UNIFORM.into_iter().zip([1.0, 0.0, 0.5, 0.5]) {
            let b = basis(start, end, l);
            for n in 0..50 {
                let expected = (n as f64 + n0) * PI / l;
                assert!((b.wavenumber(n) - expected).abs() < 1e-12 * expected.max(1.0));
            }
        }
    }

    #[test]
    fn recurrence_matches_direct_evaluation() {
        for (start, end) in UNIFORM {
            let b = basis(start, end, 0.8);
            let series = Series::new(b, Decay::Unbounded, 300);
            let mut out = vec![0.0; 300];
            for &s in &[0.0, 0.013, 0.4, 0.79, 0.8] {
                series.phi_into(s, &mut out);
                for (n, &v) in out.iter().enumerate() {
                    let direct = b.value(b.wavenumber(n), s);
                    assert!((v - direct).abs() < 1e-11, "{start:?} {end:?} n={n} s={s}");
                }
            }
        }
    }

    #[test]
    fn scaled_phi_table_is_phi_into_over_the_norm_bit_for_bit() {
        // every family (the uniform ones by the points-in-step recurrence, a convective end
        // one point at a time), block sizes with and without a whole vector of points
        for (start, end) in UNIFORM
            .into_iter()
            .chain([(End::Convective { beta: 3.0 }, End::Held)])
        {
            let series = Series::new(basis(start, end, 0.6), Decay::Unbounded, 90);
            for b in [1, 3, 8, 13] {
                let points: Vec<f64> = (0..b).map(|k| 0.6 * k as f64 / 12.0 + 1e-3).collect();
                let mut table = vec![f64::NAN; 90 * b];
                series.scaled_phi_table(&points, 90, &mut table, &mut Vec::new());
                let mut row = vec![0.0; 90];
                for (k, &s) in points.iter().enumerate() {
                    series.phi_into(s, &mut row);
                    for (n, &v) in row.iter().enumerate() {
                        let want = v / series.norm_sq(n);
                        assert_eq!(
                            table[n * b + k].to_bits(),
                            want.to_bits(),
                            "{start:?} {end:?} b={b} n={n} s={s}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn decay_recurrence_matches_closed_form() {
        for decay in [
            Decay::Dirichlet { depth: 0.3 },
            Decay::Insulated { depth: 0.3 },
            Decay::Convective {
                depth: 0.3,
                beta: 7.0,
            },
            Decay::Unbounded,
        ] {
            for (start, end) in [
                (End::Held, End::Held),
                (End::Insulated, End::Insulated),
                (End::Held, End::Insulated),
                (End::Convective { beta: 3.0 }, End::Held),
            ] {
                let b = basis(start, end, 0.5);
                let series = Series::new(b, decay, 120);
                let mut out = vec![0.0; 120];
                for &(s, d) in &[(0.1, 0.0), (0.25, 0.01), (0.33, 0.15), (0.49, 0.29)] {
                    series.modes_into(s, d, &mut out);
                    for (n, &v) in out.iter().enumerate() {
                        let k = b.wavenumber(n);
                        let expected = b.value(k, s) * decay.value(k, d);
                        assert!(
                            (v - expected).abs() < 1e-12 + 1e-10 * expected.abs(),
                            "{decay:?} {start:?} n={n}: {v} vs {expected}"
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
        // Robin: u(d) = k cosh(k(D−d)) + β sinh(k(D−d)), ψ = u(d)/u(0)
        let beta = 4.5;
        let u = |x: f64| k * (k * (depth - x)).cosh() + beta * (k * (depth - x)).sinh();
        let du = |x: f64| -k * (k * (k * (depth - x)).sinh() + beta * (k * (depth - x)).cosh());
        let robin = Decay::Convective { depth, beta };
        assert!((robin.value(k, d) - u(d) / u(0.0)).abs() < 1e-14);
        assert!((robin.slope(k, d) - du(d) / u(0.0)).abs() < 1e-12);
        // the Robin condition at the far edge: −ψ'(D) = β ψ(D)
        assert!((-robin.slope(k, depth) - beta * robin.value(k, depth)).abs() < 1e-12);
        // Far beyond f64's sinh range the ratio is still finite and tends to e^{-kd}.
        let big = Decay::Dirichlet { depth: 1.0 }.value(2000.0, 0.001);
        assert!((big - (-2.0_f64).exp()).abs() < 1e-14);
        let big = Decay::Convective {
            depth: 1.0,
            beta: 50.0,
        }
        .value(2000.0, 0.001);
        assert!((big - (-2.0_f64).exp()).abs() < 1e-14);
    }

    // A convective edge tends to an insulated one as h → 0 and to a held one as h → ∞.
    #[test]
    fn convective_limits() {
        let depth = 0.25;
        for &(k, d) in &[(0.0, 0.1), (3.0, 0.1), (40.0, 0.2)] {
            let small = Decay::Convective { depth, beta: 1e-12 };
            let large = Decay::Convective { depth, beta: 1e12 };
            assert!((small.value(k, d) - Decay::Insulated { depth }.value(k, d)).abs() < 1e-9);
            assert!((large.value(k, d) - Decay::Dirichlet { depth }.value(k, d)).abs() < 1e-9);
            assert!((large.integral(k) - Decay::Dirichlet { depth }.integral(k)).abs() < 1e-9);
        }
        let l = 0.6;
        for n in 0..20 {
            let soft = basis(End::Held, End::Convective { beta: 1e-12 }, l).wavenumber(n);
            let hard = basis(End::Held, End::Convective { beta: 1e14 }, l).wavenumber(n);
            assert!((soft - basis(End::Held, End::Insulated, l).wavenumber(n)).abs() < 1e-9);
            assert!((hard - basis(End::Held, End::Held, l).wavenumber(n)).abs() < 1e-9);
        }
    }

    // Each Robin eigenfunction meets its end conditions, and the family is orthogonal with the
    // stated norms (midpoint quadrature, an independent check of the closed forms).
    #[test]
    fn robin_eigenfunctions_meet_their_ends_and_are_orthogonal() {
        let (b0, bl, l) = (2.5, 11.0, 0.4);
        let b = basis(
            End::Convective { beta: b0 },
            End::Convective { beta: bl },
            l,
        );
        let series = Series::new(b, Decay::Unbounded, 12);
        for n in 0..12 {
            let k = series.wavenumber(n);
            assert!(k > n as f64 * PI / l && k < (n as f64 + 1.0) * PI / l);
            assert!((series.phi_slope(n, 0.0) - b0 * series.phi(n, 0.0)).abs() < 1e-9 * k);
            assert!((-series.phi_slope(n, l) - bl * series.phi(n, l)).abs() < 1e-9 * k);
        }
        let m = 40000;
        let h = l / m as f64;
        for i in 0..6 {
            for j in 0..6 {
                let q: f64 = (0..m)
                    .map(|t| {
                        let s = (t as f64 + 0.5) * h;
                        series.phi(i, s) * series.phi(j, s) * h
                    })
                    .sum();
                let expected = if i == j { series.norm_sq(i) } else { 0.0 };
                assert!((q - expected).abs() < 1e-8, "({i},{j}): {q} vs {expected}");
            }
        }
    }

    #[test]
    fn integrals_match_quadrature() {
        for b in [
            basis(End::Insulated, End::Held, 0.9),
            basis(End::Convective { beta: 3.0 }, End::Insulated, 0.9),
        ] {
            for n in 0..5 {
                let k = b.wavenumber(n);
                let m = 20000;
                let h = 0.9 / m as f64;
                let q: f64 = (0..m).map(|i| b.value(k, (i as f64 + 0.5) * h) * h).sum();
                assert!((q - b.integral(k)).abs() < 1e-8);
            }
        }
        for dec in [
            Decay::Dirichlet { depth: 0.6 },
            Decay::Convective {
                depth: 0.6,
                beta: 2.0,
            },
        ] {
            let m = 20000;
            let h = 0.6 / m as f64;
            for k in [0.0, 3.0] {
                let q: f64 = (0..m).map(|i| dec.value(k, (i as f64 + 0.5) * h) * h).sum();
                assert!((q - dec.integral(k)).abs() < 1e-8, "{dec:?} k={k}");
            }
        }
    }

    // The own-edge gain makes T − T_d/β equal φ_n on a convective edge.
    #[test]
    fn convective_own_series_carries_robin_data() {
        let beta = 6.0;
        let b = basis(End::Held, End::Insulated, 0.3);
        let series = Series::with_own_condition(b, Decay::Dirichlet { depth: 0.2 }, 10, Some(beta));
        for n in 0..10 {
            let robin = series.psi(n, 0.0) - series.psi_slope(n, 0.0) / beta;
            assert!((robin - 1.0).abs() < 1e-13, "n={n}: {robin}");
        }
    }
}
