//! Round parts: steady conduction in a disk or an annulus by separation of variables in polar
//! coordinates (`docs/method.md` §1, round parts).
//!
//! In polar coordinates Laplace's equation separates into `T = Σ_m R_m(r) Θ_m(θ)` with
//! `Θ_m ∈ {cos mθ, sin mθ}` and `R_m ∈ {r^m, r^−m}` (`m ≥ 1`), `R_0 ∈ {1, ln r}` (Carslaw &
//! Jaeger, *Conduction of Heat in Solids*, 2nd ed., §7.2, steady temperature in the hollow and
//! solid circular cylinder; the disk's series is the Poisson integral expanded in Fourier
//! modes). A disk keeps only the terms regular at the centre, `r^m` and `1`.
//!
//! Each circular edge imposes one linear condition per mode: a held temperature (`R_m(r_e)`
//! equals the edge's Fourier coefficient), insulation (`R_m'(r_e) = 0`), or convection
//! (`R_m + ∂_n R_m / β = T∞` for `m = 0` and `0` otherwise, with `β = h/κ` and `∂_n` along the
//! outward normal). So per mode the solution is the sum of two responses, one per edge: the
//! radial function that meets "1" in the condition of that edge and the homogeneous condition
//! of the other. The temperature is linear in the edges' data, and the data of an unknown edge
//! (its temperature's Fourier coefficients) are the model's unknowns.
//!
//! ## Overflow-safe radial functions
//! `r^m` overflows and `r^−m` underflows for large `m`; the model works with the scaled pair
//! `u₁ = (r/b)^m` and `u₂ = (a/r)^m` (`b` the outer and `a` the inner radius), both in `[0, 1]`
//! inside the part, and `u₁ = 1`, `u₂ = ln(r/a)/ln(b/a)` for `m = 0`. The 2 × 2 system per mode
//! has O(1) entries (`(a/b)^m` off the diagonal), so thin walls and high modes stay exact.
//!
//! ## Positions
//! Along a circle of radius `r_e` the position is the arc length `s = r_e θ`, so the Fourier
//! function of index `j` (`1, cos θ, sin θ, cos 2θ, …`) has the arc wavenumber `m/r_e`, and the
//! smoothing penalty, the resolution length and the gradient limit keep their meaning per metre
//! of edge.

use crate::geometry::{Edge, EdgeCondition, EdgeProfile, Plate, Point, Shape, angle_of};
use std::f64::consts::{PI, TAU};

/// The angular order `m` of Fourier function `j` (`1, cos θ, sin θ, cos 2θ, sin 2θ, …`).
pub fn order_of(j: usize) -> usize {
    j.div_ceil(2)
}

/// Fill `out[j]` with Fourier function `j` at angle `theta`.
pub fn trig_into(theta: f64, out: &mut [f64]) {
    if out.is_empty() {
        return;
    }
    out[0] = 1.0;
    let (s1, c1) = theta.sin_cos();
    let (mut c, mut s) = (1.0_f64, 0.0_f64);
    let mut j = 1;
    let mut m = 0usize;
    while j < out.len() {
        m += 1;
        // every 32 steps restart from the library's sin/cos to keep the recurrence exact
        if m % 32 == 0 {
            let (sm, cm) = (m as f64 * theta).sin_cos();
            (c, s) = (cm, sm);
        } else {
            (c, s) = (c * c1 - s * s1, s * c1 + c * s1);
        }
        out[j] = c;
        if j + 1 < out.len() {
            out[j + 1] = s;
        }
        j += 2;
    }
}

/// What a circular edge imposes on each mode.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Condition {
    /// A temperature is held (fixed or unknown).
    Held,
    /// No flux.
    Insulated,
    /// `T + ∂_n T / β = T∞`, `β = h/κ` in 1/m.
    Robin { beta: f64 },
}

/// The outward-normal sign of an edge: `−1` for the inner circle (the outward normal of the
/// part points to the centre), `+1` for the outer circle and the rim.
fn outward_sign(edge: Edge) -> f64 {
    if edge == Edge::Inner { -1.0 } else { 1.0 }
}

/// One circular edge of the model.
#[derive(Debug, Clone)]
struct Side {
    edge: Edge,
    radius: f64,
    condition: Condition,
    /// Fourier coefficients of the edge's data in the order of [`trig_into`]: a fixed edge's
    /// temperature; a convective edge's `T∞` (only `j = 0`); empty for insulated and unknown
    /// edges.
    known: Vec<f64>,
    /// Unknown edges: the index of the first Fourier coefficient among the parameters, and how
    /// many there are.
    unknown: Option<(usize, usize)>,
}

/// Per mode `m`, the responses `G(r) = α u₁(r) + γ u₂(r)` to unit data on each side.
#[derive(Debug, Clone, Copy, Default)]
struct Response {
    /// Index 0: the inner side of an annulus (unused on a disk); index 1: the outer side or
    /// the rim. Each `(α, γ)`.
    coeff: [(f64, f64); 2],
}

/// The polar forward model of a disk or an annulus.
#[derive(Debug, Clone)]
pub struct PolarModel {
    /// Inner radius (0 for a disk), metres.
    a: f64,
    /// Outer radius (the rim of a disk), metres.
    b: f64,
    disk: bool,
    sides: Vec<Side>,
    /// Responses per angular order `m`, up to the largest order any side needs.
    responses: Vec<Response>,
}

/// Fourier coefficients (functions of [`trig_into`], `terms` of them) of a periodic
/// piecewise-linear profile along a circle of radius `radius` (knot positions are arc
/// lengths spanning `[0, 2π r]`), exactly, segment by segment:
/// `∫₀^h (t₀ + q u) e^{−im(θ₀+u)} du = e^{−imθ₀}[t₀ (1 − e^{−imh})/(im) + q (e^{−imh}(1 + imh) − 1)/m²]`.
pub fn fourier_coefficients(profile: &EdgeProfile, radius: f64, terms: usize) -> Vec<f64> {
    let mut out = vec![0.0; terms];
    if terms == 0 {
        return out;
    }
    let segments = profile.segments(TAU * radius);
    let max_order = order_of(terms - 1);
    for (s0, s1, t0, t1) in segments {
        let (th0, th1) = (s0 / radius, s1 / radius);
        let h = th1 - th0;
        // a segment at zero adds only zeros (finite integrals times zero) to sums that start
        // at +0.0, which leaves every sum as it is, to the bit (a node's hat function is zero
        // on most of the circle)
        if h <= 0.0 || (t0 == 0.0 && t1 == 0.0) {
            continue;
        }
        let q = (t1 - t0) / h;
        out[0] += (t0 + 0.5 * q * h) * h / TAU;
        for m in 1..=max_order {
            let mf = m as f64;
            let (sh, ch) = (mf * h).sin_cos();
            // e^{−imh} = ch − i sh
            // (1 − e^{−imh})/(im) = (1 − ch + i sh)/(im) = (sh − i(1 − ch))/m
            let (i1_re, i1_im) = (sh / mf, -(1.0 - ch) / mf);
            // (e^{−imh}(1 + imh) − 1)/m²: e^{−imh}(1 + imh) = (ch + mh sh) + i(mh ch − sh)
            let (i2_re, i2_im) = (
                (ch + mf * h * sh - 1.0) / (mf * mf),
                (mf * h * ch - sh) / (mf * mf),
            );
            let (re, im) = (t0 * i1_re + q * i2_re, t0 * i1_im + q * i2_im);
            // times e^{−imθ₀} = c0 − i s0
            let (s0m, c0m) = (mf * th0).sin_cos();
            let (tr, ti) = (re * c0m + im * s0m, im * c0m - re * s0m);
            // ∫ f cos = Re, ∫ f sin = −Im; divided by π
            let j = 2 * m - 1;
            if j < terms {
                out[j] += tr / PI;
            }
            if j + 1 < terms {
                out[j + 1] += -ti / PI;
            }
        }
    }
    out
}

impl PolarModel {
    /// Build the model of a round `plate`. `unknown_terms` Fourier functions per unknown edge
    /// (parameters numbered from 0 in the plate's edge order), `known_terms` at most per fixed
    /// edge (negligible trailing coefficients dropped). Convective edges must have a known
    /// `h` (checked by the caller).
    pub(super) fn new(
        plate: &Plate,
        unknown_terms: usize,
        known_terms: usize,
        negligible: f64,
    ) -> PolarModel {
        let shape = *plate.shape();
        let (a, b, disk) = match shape {
            Shape::Disk { radius_m } => (0.0, radius_m, true),
            Shape::Annulus { inner_m, outer_m } => (inner_m, outer_m, false),
            _ => unreachable!("PolarModel is built for round plates only"),
        };
        let mut sides = Vec::new();
        let mut next = 0;
        for edge in shape.edges() {
            let radius = shape
                .radius_of(edge)
                .expect("a round plate's edges are circles");
            let condition = plate.condition(edge).expect("validated plate");
            let (cond, known, unknown) = match condition {
                EdgeCondition::Unknown => {
                    let u = (next, unknown_terms);
                    next += unknown_terms;
                    (Condition::Held, Vec::new(), Some(u))
                }
                EdgeCondition::Fixed(profile) => {
                    let mut c = fourier_coefficients(profile, radius, known_terms.max(1));
                    let scale = c.iter().fold(0.0_f64, |m, v| m.max(v.abs())).max(1e-300);
                    let keep = c
                        .iter()
                        .rposition(|v| v.abs() > negligible * scale)
                        .map_or(1, |i| i + 1);
                    c.truncate(keep);
                    (Condition::Held, c, None)
                }
                EdgeCondition::Insulated => (Condition::Insulated, Vec::new(), None),
                EdgeCondition::Convective(conv) => {
                    let beta = plate.convective_beta(edge).unwrap_or(f64::NAN);
                    (Condition::Robin { beta }, vec![conv.ambient_k], None)
                }
            };
            sides.push(Side {
                edge,
                radius,
                condition: cond,
                known,
                unknown,
            });
        }
        let max_terms = sides
            .iter()
            .map(|s| s.known.len().max(s.unknown.map_or(0, |u| u.1)))
            .max()
            .unwrap_or(1)
            .max(1);
        let mut model = PolarModel {
            a,
            b,
            disk,
            sides,
            responses: Vec::new(),
        };
        model.responses = (0..=order_of(max_terms - 1))
            .map(|m| model.response(m))
            .collect();
        model
    }

    /// `u₁, u₂` and their radial derivatives at `r` for order `m`.
    fn radial(&self, m: usize, r: f64) -> [(f64, f64); 2] {
        let (a, b) = (self.a, self.b);
        if m == 0 {
            if self.disk {
                return [(1.0, 0.0), (0.0, 0.0)];
            }
            let l = (b / a).ln();
            return [(1.0, 0.0), ((r / a).ln() / l, 1.0 / (r * l))];
        }
        let mf = m as f64;
        let u1 = (r / b).powi(m as i32);
        let d1 = if r > 0.0 {
            mf * u1 / r
        } else if m == 1 {
            1.0 / b
        } else {
            0.0
        };
        if self.disk {
            return [(u1, d1), (0.0, 0.0)];
        }
        let u2 = (a / r).powi(m as i32);
        [(u1, d1), (u2, -mf * u2 / r)]
    }

    /// The row of the condition of `side` for order `m`: its value on `u₁` and `u₂`, scaled to
    /// O(1) (the data are scaled alike, see [`Self::data_scale`]).
    fn condition_row(&self, side: &Side, m: usize) -> [f64; 2] {
        let u = self.radial(m, side.radius);
        let sigma = outward_sign(side.edge);
        let r = side.radius;
        match side.condition {
            Condition::Held => [u[0].0, u[1].0],
            Condition::Insulated => {
                let s = r / (m.max(1) as f64);
                [sigma * u[0].1 * s, sigma * u[1].1 * s]
            }
            Condition::Robin { beta } => {
                let s = 1.0 / self.data_scale(side, m);
                [
                    (u[0].0 + sigma * u[0].1 / beta) * s,
                    (u[1].0 + sigma * u[1].1 / beta) * s,
                ]
            }
        }
    }

    /// What a unit of the side's data becomes in its scaled condition row.
    fn data_scale(&self, side: &Side, m: usize) -> f64 {
        match side.condition {
            Condition::Robin { beta } => 1.0 + m as f64 / (side.radius * beta),
            _ => 1.0,
        }
    }

    /// Solve the per-mode system for unit data on each side.
    fn response(&self, m: usize) -> Response {
        let mut out = Response::default();
        if self.disk {
            let side = &self.sides[0];
            let row = self.condition_row(side, m);
            out.coeff[1] = (1.0 / (row[0] * self.data_scale(side, m)), 0.0);
            return out;
        }
        let rows: Vec<[f64; 2]> = self
            .sides
            .iter()
            .map(|s| self.condition_row(s, m))
            .collect();
        let det = rows[0][0] * rows[1][1] - rows[0][1] * rows[1][0];
        for (k, side) in self.sides.iter().enumerate() {
            // data 1 on side k (scaled by its row scale), 0 on the other
            let rhs = if k == 0 { [1.0, 0.0] } else { [0.0, 1.0] };
            let d = 1.0 / self.data_scale(side, m);
            let alpha = d * (rhs[0] * rows[1][1] - rhs[1] * rows[0][1]) / det;
            let gamma = d * (rows[0][0] * rhs[1] - rows[1][0] * rhs[0]) / det;
            out.coeff[k] = (alpha, gamma);
        }
        out
    }

    /// Index of `side` in the response tables.
    fn slot(&self, k: usize) -> usize {
        if self.disk { 1 } else { k }
    }

    /// `G_m(r)` and `G_m'(r)` of side `k`.
    fn g(&self, k: usize, m: usize, r: f64) -> (f64, f64) {
        let (alpha, gamma) = self.responses[m].coeff[self.slot(k)];
        let u = self.radial(m, r);
        (
            alpha * u[0].0 + gamma * u[1].0,
            alpha * u[0].1 + gamma * u[1].1,
        )
    }

    /// Visit every data term at `p`: `f(side, j, value)` with `value = G_{m(j)}(r) Θ_j(θ)`,
    /// or its radial derivative when `derivative`.
    fn visit(&self, p: Point, derivative: bool, mut f: impl FnMut(usize, usize, f64)) {
        let r = p.x.hypot(p.y);
        let theta = angle_of(p);
        let mut trig = Vec::new();
        for (k, side) in self.sides.iter().enumerate() {
            let n = side.unknown.map_or(side.known.len(), |u| u.1);
            if n == 0 {
                continue;
            }
            trig.resize(n, 0.0);
            trig_into(theta, &mut trig);
            let mut cached = (usize::MAX, 0.0);
            for (j, t) in trig.iter().enumerate() {
                let m = order_of(j);
                if cached.0 != m {
                    let (g, dg) = self.g(k, m, r);
                    cached = (m, if derivative { dg } else { g });
                }
                f(k, j, cached.1 * t);
            }
        }
    }

    /// Fill `row` with the sensitivities of `T(p)` (or of `∂T/∂r` when `derivative`) to the
    /// unknowns and return the known part.
    pub(super) fn row_into(&self, p: Point, derivative: bool, row: &mut [f64]) -> f64 {
        row.fill(0.0);
        let mut offset = 0.0;
        self.visit(p, derivative, |k, j, v| {
            let side = &self.sides[k];
            match side.unknown {
                Some((first, _)) => row[first + j] += v,
                None => offset += side.known[j] * v,
            }
        });
        offset
    }

    /// `T(p)` (or `∂T/∂r`) for unknowns `c`.
    pub(super) fn evaluate(&self, c: &[f64], p: Point, derivative: bool) -> f64 {
        let mut t = 0.0;
        self.visit(p, derivative, |k, j, v| {
            let side = &self.sides[k];
            t += v * match side.unknown {
                Some((first, _)) => c[first + j],
                None => side.known[j],
            };
        });
        t
    }

    /// The mean over the circle `r = radius` of `T` and of `∂T/∂r`: only the `m = 0` terms.
    pub(super) fn circle_mean(&self, c: &[f64], radius: f64) -> (f64, f64) {
        let (mut t, mut dt) = (0.0, 0.0);
        for (k, side) in self.sides.iter().enumerate() {
            let level = match side.unknown {
                Some((first, n)) if n > 0 => c[first],
                Some(_) => continue,
                None => match side.known.first() {
                    Some(&v) => v,
                    None => continue,
                },
            };
            let (g, dg) = self.g(k, 0, radius);
            t += level * g;
            dt += level * dg;
        }
        (t, dt)
    }

    /// Number of terms of `edge`'s data (Fourier functions), and whether they are unknowns.
    pub(super) fn terms_of(&self, edge: Edge) -> Option<(usize, bool)> {
        let side = self.sides.iter().find(|s| s.edge == edge)?;
        Some(match side.unknown {
            Some((_, n)) => (n, true),
            None => (side.known.len(), false),
        })
    }

    /// The outward-normal sign of `edge` (`−1` inner, `+1` outer and rim).
    pub(super) fn sign(edge: Edge) -> f64 {
        outward_sign(edge)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fourier_coefficients_of_a_sampled_cosine() {
        // A finely tabulated cos 3θ: its coefficient is 1 to the interpolation error of the
        // piecewise-linear table (about (mh)²/12 with h = 0.5°), the others vanish.
        let r = 0.05;
        let n = 720;
        let pos: Vec<f64> = (0..n).map(|i| r * TAU * i as f64 / n as f64).collect();
        let t: Vec<f64> = pos.iter().map(|s| (3.0 * s / r).cos()).collect();
        let p = EdgeProfile::periodic(pos, t, TAU * r).unwrap();
        let c = fourier_coefficients(&p, r, 9);
        let h = TAU / n as f64;
        // sinc² attenuation of the linear interpolant: (sin(3h/2)/(3h/2))²
        let x = 1.5 * h;
        let expected = (x.sin() / x).powi(2);
        assert!((c[5] - expected).abs() < 1e-12, "{} vs {expected}", c[5]);
        for (j, v) in c.iter().enumerate() {
            if j != 5 {
                assert!(v.abs() < 1e-12, "coefficient {j} = {v}");
            }
        }
    }

    #[test]
    fn trig_recurrence_matches_library() {
        let mut out = vec![0.0; 301];
        let theta = 2.345;
        trig_into(theta, &mut out);
        for (j, v) in out.iter().enumerate() {
            let m = order_of(j) as f64;
            let want = if j == 0 {
                1.0
            } else if j % 2 == 1 {
                (m * theta).cos()
            } else {
                (m * theta).sin()
            };
            assert!((v - want).abs() < 1e-13, "j = {j}");
        }
    }
}
