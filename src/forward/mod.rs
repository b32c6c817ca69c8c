//! The forward model: steady conduction in the plate by separation of variables.
//!
//! Laplace's equation `∇²T = 0` with constant conductivity is solved by superposition
//! (`docs/method.md` §1): `T = B + Σ_e S_e`, where `B` is the corner base ([`base`]) and `S_e` is one series per
//! edge that holds a temperature (fixed or unknown),
//!
//! `S_e(p) = Σ_n a_{e,n} φ_{e,n}(s) ψ_{e,n}(d)`,
//!
//! with the eigenfunctions `φ` and decays `ψ` of [`basis`]. Every other edge is homogeneous of
//! its own kind in `S_e`: zero temperature where a temperature is held, zero flux where
//! insulated. For a fixed edge the coefficients are the exact Fourier coefficients of its data
//! minus `B`; for an unknown edge they are the unknowns `c` of the model, so the unknown
//! profile is `B` along the edge (the lift, through the corner values) plus `Σ c_n φ_n`. Where
//! two unknown edges meet, the corner temperature is one more unknown.
//!
//! Everything the inversion needs is linear in the unknowns: [`ForwardModel::sensor_map`]
//! returns `A` and the known offset `o` with `T(sensors) = A c + o`.
//!
//! ## Truncation
//! A mode of wavenumber `k_n` is damped by about `exp(−k_n d)` at depth `d` from its edge. For
//! smooth edge data the coefficients fall like `1/n²` once `B` is removed, so the truncation
//! error at depth `d` after `N` terms is of order `exp(−k_N d)/N²`; where two fixed edges
//! disagree at a corner the coefficients fall only like `1/n` and, at the edge itself, the
//! truncated series overshoots (Gibbs). Inside the plate the error still decays
//! exponentially with depth: about `(L/(π d)) ln(1/tol)` terms suffice at depth `d` (Gibbs and
//! the depth decay: `docs/method.md` §1). Known edges use [`SeriesOptions::known_terms`] terms (default 512, trailing negligible
//! coefficients dropped), enough for 1e-6 of the temperature range at 2 % of the edge length
//! from a jump on plates up to an aspect ratio of about 2; unknown edges use
//! [`SeriesOptions::unknown_terms`] (default 64), which sets the finest feature the
//! reconstruction can represent: half a wavelength of mode N, `L/N`.

pub mod base;
pub mod basis;
pub mod polar;

pub use base::{Base, Corner, CornerValue};
pub use basis::{BasisKind, Decay, EdgeBasis, End, Series};

use crate::error::{Error, Result};
use crate::geometry::{Edge, EdgeCondition, Plate, Point};
use crate::simd::dot;
use nalgebra::{DMatrix, DVector};
use serde::Serialize;
use std::borrow::Cow;
use std::f64::consts::{PI, TAU};

/// Series lengths.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SeriesOptions {
    /// Terms per unknown edge: the number of unknown coefficients each contributes.
    pub unknown_terms: usize,
    /// Terms per fixed edge (upper bound; negligible trailing coefficients are dropped).
    pub known_terms: usize,
}

impl Default for SeriesOptions {
    fn default() -> Self {
        SeriesOptions {
            unknown_terms: 64,
            known_terms: 512,
        }
    }
}

/// One unknown of the model.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Parameter {
    /// Coefficient of mode `n` of an unknown edge's series.
    Mode {
        /// The edge.
        edge: Edge,
        /// Mode index (0-based).
        n: usize,
        /// Its wavenumber `k_n`, 1/m.
        wavenumber: f64,
    },
    /// The temperature of a corner where two unknown edges meet, kelvin.
    Corner {
        /// Which corner.
        corner: Corner,
    },
}

/// The affine map from unknowns to temperatures at a set of points: `T = matrix · c + offset`.
#[derive(Debug, Clone, PartialEq)]
pub struct LinearMap {
    /// `m × p`: one row per point, one column per [`Parameter`], kelvin per unit parameter.
    pub matrix: DMatrix<f64>,
    /// Temperatures at the points when every unknown is zero, kelvin.
    pub offset: DVector<f64>,
}

/// One edge's series within the model.
#[derive(Debug, Clone)]
struct EdgeSeries {
    edge: Edge,
    series: Series,
    /// Known edges: the Fourier coefficients of (data − B); for a convective edge, of its
    /// Robin data `T∞ − (B − B_d/β)` (the known corners' share). Unknown edges: empty.
    known: Vec<f64>,
    /// Convective edges: per corner parameter `i` of the base, the coefficients its unit value
    /// adds (through `−(B − B_d/β)`); the series' coefficients are `known + Σ c_i · these`.
    corner_terms: Vec<(usize, Vec<f64>)>,
    /// Unknown edges: the index of the first mode's parameter.
    first_parameter: Option<usize>,
}

/// The forward model of a plate.
#[derive(Debug, Clone)]
pub struct ForwardModel {
    plate: Plate,
    base: Base,
    series: Vec<EdgeSeries>,
    parameters: Vec<Parameter>,
    /// Round plates: the polar model (the rectangle's base and series are then empty).
    polar: Option<polar::PolarModel>,
}

/// A point closer than this fraction of the width to an edge lies on it.
const ON_EDGE: f64 = 1e-12;

/// Relative size below which trailing coefficients of a known edge are dropped.
const NEGLIGIBLE_COEFFICIENT: f64 = 1e-15;

/// How many leading coefficients matter: trailing ones below [`NEGLIGIBLE_COEFFICIENT`] of
/// the largest (over all the given vectors) are dropped.
fn significant_terms(vectors: &[&[f64]]) -> usize {
    let scale = vectors
        .iter()
        .flat_map(|v| v.iter())
        .fold(0.0_f64, |m, a| m.max(a.abs()));
    vectors
        .iter()
        .map(|v| {
            v.iter()
                .rposition(|a| a.abs() > NEGLIGIBLE_COEFFICIENT * scale.max(1e-300))
                .map_or(0, |i| i + 1)
        })
        .max()
        .unwrap_or(0)
}

/// The condition `neighbour` imposes on the eigenfunctions of an edge it ends.
fn end_of(plate: &Plate, neighbour: Edge) -> End {
    match plate.condition(neighbour) {
        Some(EdgeCondition::Insulated) => End::Insulated,
        Some(EdgeCondition::Convective(_)) => match plate.convective_beta(neighbour) {
            Some(beta) => End::Convective { beta },
            // refused by `convective_beta` when the series is built; held is a placeholder
            None => End::Held,
        },
        // the missing top of a strip: no series runs along a strip's side
        None => End::Insulated,
        Some(_) => End::Held,
    }
}

/// `β = h/κ` of a convective edge, or an error when `h` is still unknown.
fn convective_beta(plate: &Plate, edge: Edge) -> Result<f64> {
    plate.convective_beta(edge).ok_or_else(|| unknown_h(edge))
}

/// A model was asked for with `h` still unknown (the estimate fixes it first).
fn unknown_h(edge: Edge) -> Error {
    Error::Internal(format!(
        "the heat transfer coefficient of the {edge} edge must be fixed before a model is built"
    ))
}

/// The inward unit normal of `edge`, `(x, y)`.
fn inward_normal(edge: Edge) -> (f64, f64) {
    match edge {
        Edge::Bottom => (0.0, 1.0),
        Edge::Top => (0.0, -1.0),
        Edge::Left => (1.0, 0.0),
        Edge::Right => (-1.0, 0.0),
        // circles have no fixed normal; the polar model never asks (it has no corner base)
        Edge::Inner | Edge::Outer | Edge::Rim => (0.0, 0.0),
    }
}

impl ForwardModel {
    /// Build the model of `plate` with the given series lengths.
    pub fn new(plate: &Plate, options: SeriesOptions) -> Result<Self> {
        if options.unknown_terms == 0 && !plate.unknown_edges().is_empty() {
            return Err(Error::invalid_field(
                "fit.terms",
                "the number of series terms must be at least 1",
            ));
        }
        let shape = *plate.shape();
        if shape.is_round() {
            return Self::new_round(plate, options);
        }
        let mut parameters = Vec::new();
        for edge in plate.unknown_edges() {
            for n in 0..options.unknown_terms {
                parameters.push(Parameter::Mode {
                    edge,
                    n,
                    wavenumber: 0.0, // filled in below, once the basis is known
                });
            }
        }
        let (base, corners) = Base::new(plate, parameters.len());
        parameters.extend(
            corners
                .into_iter()
                .map(|corner| Parameter::Corner { corner }),
        );

        let mut series = Vec::new();
        let mut next_mode = 0;
        for edge in Edge::ALL {
            let Some(condition) = plate.condition(edge) else {
                continue;
            };
            if matches!(condition, EdgeCondition::Insulated) {
                continue;
            }
            let Some(length) = shape.edge_length(edge) else {
                // the infinite side of a strip: constant, carried by the base
                continue;
            };
            let (start, end) = edge.neighbours();
            let basis = EdgeBasis::new(end_of(plate, start), end_of(plate, end), length);
            let opposite = edge.opposite();
            let depth = shape.across(edge);
            let decay = match (depth, plate.condition(opposite)) {
                (None, _) | (_, None) => Decay::Unbounded,
                (Some(depth), Some(c)) if c.is_dirichlet() => Decay::Dirichlet { depth },
                (Some(depth), Some(EdgeCondition::Convective(_))) => Decay::Convective {
                    depth,
                    beta: convective_beta(plate, opposite)?,
                },
                (Some(depth), Some(_)) => Decay::Insulated { depth },
            };
            match condition {
                EdgeCondition::Unknown => {
                    let s = Series::new(basis, decay, options.unknown_terms);
                    for n in 0..options.unknown_terms {
                        if let Parameter::Mode { wavenumber, .. } = &mut parameters[next_mode + n] {
                            *wavenumber = s.wavenumber(n);
                        }
                    }
                    series.push(EdgeSeries {
                        edge,
                        series: s,
                        known: Vec::new(),
                        corner_terms: Vec::new(),
                        first_parameter: Some(next_mode),
                    });
                    next_mode += options.unknown_terms;
                }
                EdgeCondition::Fixed(profile) => {
                    // data minus the base along the edge, still piecewise linear
                    let segments: Vec<_> = profile
                        .segments(length)
                        .into_iter()
                        .map(|(s0, s1, g0, g1)| {
                            let b0 = base.evaluate(shape.point_on(edge, s0), |_, _| {});
                            let b1 = base.evaluate(shape.point_on(edge, s1), |_, _| {});
                            (s0, s1, g0 - b0, g1 - b1)
                        })
                        .collect();
                    let full = Series::new(basis, decay, options.known_terms);
                    let mut known = full.project(&segments);
                    let keep = significant_terms(&[&known]);
                    known.truncate(keep);
                    series.push(EdgeSeries {
                        edge,
                        series: full.truncated(keep),
                        known,
                        corner_terms: Vec::new(),
                        first_parameter: None,
                    });
                }
                EdgeCondition::Convective(conv) => {
                    let beta = convective_beta(plate, edge)?;
                    let full =
                        Series::with_own_condition(basis, decay, options.known_terms, Some(beta));
                    // Robin data g = T∞ − (B − B_d/β): linear along the edge, since B and its
                    // normal derivative are (the base is at most bilinear).
                    let robin_weights = |s: f64| {
                        let p = shape.point_on(edge, s);
                        let w = base.weights(p);
                        let gw = base.gradient_weights(p);
                        let n = inward_normal(edge);
                        let mut r = [0.0; 4];
                        for c in 0..4 {
                            r[c] = w[c] - (gw[c].0 * n.0 + gw[c].1 * n.1) / beta;
                        }
                        r
                    };
                    let (r0, r1) = (robin_weights(0.0), robin_weights(length));
                    let mut known_ends = (conv.ambient_k, conv.ambient_k);
                    let mut corner_ends = Vec::new();
                    for (c, v) in base.values().iter().enumerate() {
                        match *v {
                            CornerValue::Unused => {}
                            CornerValue::Known(t) => {
                                known_ends.0 -= r0[c] * t;
                                known_ends.1 -= r1[c] * t;
                            }
                            CornerValue::Parameter(i) => {
                                if r0[c] != 0.0 || r1[c] != 0.0 {
                                    corner_ends.push((i, -r0[c], -r1[c]));
                                }
                            }
                        }
                    }
                    let mut known = full.project(&[(0.0, length, known_ends.0, known_ends.1)]);
                    let mut corner_terms: Vec<(usize, Vec<f64>)> = corner_ends
                        .into_iter()
                        .map(|(i, g0, g1)| (i, full.project(&[(0.0, length, g0, g1)])))
                        .collect();
                    let mut all: Vec<&[f64]> = vec![&known];
                    all.extend(corner_terms.iter().map(|(_, a)| a.as_slice()));
                    let keep = significant_terms(&all);
                    known.truncate(keep);
                    for (_, a) in &mut corner_terms {
                        a.truncate(keep);
                    }
                    series.push(EdgeSeries {
                        edge,
                        series: full.truncated(keep),
                        known,
                        corner_terms,
                        first_parameter: None,
                    });
                }
                EdgeCondition::Insulated => unreachable!("filtered above"),
            }
        }
        Ok(ForwardModel {
            plate: plate.clone(),
            base,
            series,
            parameters,
            polar: None,
        })
    }

    /// The model of a disk or an annulus ([`polar`]).
    fn new_round(plate: &Plate, options: SeriesOptions) -> Result<Self> {
        let shape = *plate.shape();
        for edge in shape.edges() {
            if plate.convection(edge).is_some() {
                convective_beta(plate, edge)?;
            }
        }
        let mut parameters = Vec::new();
        for edge in plate.unknown_edges() {
            let r = shape.radius_of(edge).unwrap_or(1.0);
            for n in 0..options.unknown_terms {
                parameters.push(Parameter::Mode {
                    edge,
                    n,
                    wavenumber: polar::order_of(n) as f64 / r,
                });
            }
        }
        let (base, corners) = Base::new(plate, parameters.len());
        if !corners.is_empty() {
            return Err(Error::Internal(
                "a round plate has no corners, yet the base found some".into(),
            ));
        }
        let model = polar::PolarModel::new(
            plate,
            options.unknown_terms,
            options.known_terms,
            NEGLIGIBLE_COEFFICIENT,
        );
        Ok(ForwardModel {
            plate: plate.clone(),
            base,
            series: Vec::new(),
            parameters,
            polar: Some(model),
        })
    }

    /// Whether this is the polar model of a round plate.
    pub fn is_round(&self) -> bool {
        self.polar.is_some()
    }

    /// The value at position `s` along `edge` of the `n`-th function of the edge's own
    /// expansion (the eigenfunction `φ_n` of a straight edge, the Fourier function
    /// `1, cos θ, sin θ, …` of a circle), when the edge has an expansion.
    pub fn mode_value(&self, edge: Edge, n: usize, s: f64) -> Option<f64> {
        if self.polar.is_some() {
            let r = self.plate.shape().radius_of(edge)?;
            let mut t = vec![0.0; n + 1];
            polar::trig_into(s / r, &mut t);
            return Some(t[n]);
        }
        self.series_of(edge).map(|series| series.phi(n, s))
    }

    /// `‖φ_n‖² = ∫ φ_n² ds` of the `n`-th function of `edge`'s expansion ([`Self::mode_value`]),
    /// metres: `2πr` for a circle's constant, `πr` for its cosines and sines.
    pub fn mode_norm_sq(&self, edge: Edge, n: usize) -> Option<f64> {
        if self.polar.is_some() {
            let r = self.plate.shape().radius_of(edge)?;
            return Some(if n == 0 { TAU * r } else { PI * r });
        }
        self.series_of(edge).map(|series| series.norm_sq(n))
    }

    /// The plate this model describes.
    pub fn plate(&self) -> &Plate {
        &self.plate
    }

    /// The unknowns, in the order of the columns of [`LinearMap::matrix`].
    pub fn parameters(&self) -> &[Parameter] {
        &self.parameters
    }

    /// Number of unknowns.
    pub fn parameter_count(&self) -> usize {
        self.parameters.len()
    }

    /// The corner base.
    pub fn base(&self) -> &Base {
        &self.base
    }

    /// The series of `edge`, if it has one (edges that hold a temperature and are finite).
    pub fn series_of(&self, edge: Edge) -> Option<&Series> {
        self.series
            .iter()
            .find(|s| s.edge == edge)
            .map(|s| &s.series)
    }

    fn check_parameters(&self, c: &[f64]) -> Result<()> {
        if c.len() != self.parameters.len() {
            return Err(Error::Internal(format!(
                "{} coefficients given for a model with {} unknowns",
                c.len(),
                self.parameters.len()
            )));
        }
        Ok(())
    }

    /// The local coordinates `(s, d)` of `p` for `edge`'s series.
    fn local(&self, edge: Edge, p: Point) -> (f64, f64) {
        let shape = self.plate.shape();
        (shape.position_along(edge, p), shape.depth_from(edge, p))
    }

    /// Fill `row` (length [`Self::parameter_count`]) with the sensitivities of `T(p)` to each
    /// unknown, and return the known offset at `p`. `scratch` is reused between calls.
    fn row_into(&self, p: Point, row: &mut [f64], scratch: &mut Vec<f64>) -> f64 {
        if let Some(polar) = &self.polar {
            return polar.row_into(p, false, row);
        }
        row.fill(0.0);
        let mut offset = self.base.evaluate(p, |i, w| row[i] += w);
        for es in &self.series {
            let (s, d) = self.local(es.edge, p);
            let n = es.series.terms();
            scratch.resize(n, 0.0);
            let used = es.series.modes_into(s, d, &mut scratch[..n]);
            match es.first_parameter {
                Some(first) => row[first..first + n].copy_from_slice(&scratch[..n]),
                None => {
                    offset += dot(&scratch[..used], &es.known);
                    for (i, a) in &es.corner_terms {
                        row[*i] += dot(&scratch[..used], a);
                    }
                }
            }
        }
        offset
    }

    /// The linear map from the unknowns to the temperatures at `points` (`docs/method.md`): `A` is
    /// `points.len() × parameter_count()`.
    pub fn sensor_map(&self, points: &[Point]) -> LinearMap {
        let p = self.parameter_count();
        let mut matrix = DMatrix::zeros(points.len(), p);
        let mut offset = DVector::zeros(points.len());
        let mut row = vec![0.0; p];
        let mut scratch = Vec::new();
        for (i, &pt) in points.iter().enumerate() {
            offset[i] = self.row_into(pt, &mut row, &mut scratch);
            for (j, &v) in row.iter().enumerate() {
                matrix[(i, j)] = v;
            }
        }
        LinearMap { matrix, offset }
    }

    /// The temperature at `p` (kelvin) for unknowns `c`.
    pub fn temperature(&self, c: &[f64], p: Point) -> Result<f64> {
        self.check_parameters(c)?;
        let mut scratch = Vec::new();
        Ok(self.temperature_unchecked(c, p, &mut scratch))
    }

    fn temperature_unchecked(&self, c: &[f64], p: Point, scratch: &mut Vec<f64>) -> f64 {
        // On a fixed edge the temperature is the data itself; the truncated Fourier series
        // would only approximate it there (Gibbs at jumps), while inside it converges fast.
        let shape = self.plate.shape();
        for edge in Edge::ALL {
            if let Some(EdgeCondition::Fixed(profile)) = self.plate.condition(edge) {
                if shape.depth_from(edge, p).abs() <= ON_EDGE * shape.width() {
                    return profile.value(shape.position_along(edge, p));
                }
            }
        }
        if let Some(polar) = &self.polar {
            return polar.evaluate(c, p, false);
        }
        let mut corners = 0.0;
        let mut t = self.base.evaluate(p, |i, w| corners += w * c[i]);
        t += corners;
        for es in &self.series {
            let (s, d) = self.local(es.edge, p);
            let n = es.series.terms();
            scratch.resize(n, 0.0);
            let used = es.series.modes_into(s, d, &mut scratch[..n]);
            t += dot(&scratch[..used], &self.coefficients(es, c));
        }
        t
    }

    /// Temperatures on a grid of [`crate::case::grid_coordinates`]: `result[(j, i)]` is `T`
    /// at grid coordinates `(xs[i], ys[j])` (angle and radius on a round part), kelvin.
    pub fn field_grid(&self, c: &[f64], xs: &[f64], ys: &[f64]) -> Result<DMatrix<f64>> {
        self.check_parameters(c)?;
        let shape = *self.plate.shape();
        let mut out = DMatrix::zeros(ys.len(), xs.len());
        let mut scratch = Vec::new();
        for (j, &y) in ys.iter().enumerate() {
            for (i, &x) in xs.iter().enumerate() {
                let p = crate::case::grid_point(&shape, x, y);
                out[(j, i)] = self.temperature_unchecked(c, p, &mut scratch);
            }
        }
        Ok(out)
    }

    /// The temperature along `edge` at `positions` (metres from the edge's lower coordinate).
    ///
    /// Fixed edges return their data; unknown edges the lift plus the series, exactly;
    /// insulated edges the model's field on the edge.
    pub fn edge_profile(&self, edge: Edge, c: &[f64], positions: &[f64]) -> Result<Vec<f64>> {
        self.check_parameters(c)?;
        let shape = self.plate.shape();
        let Some(condition) = self.plate.condition(edge) else {
            return Err(Error::invalid_field(
                "edge",
                format!("the plate has no {edge} edge"),
            ));
        };
        let mut scratch = Vec::new();
        Ok(positions
            .iter()
            .map(|&s| match condition {
                EdgeCondition::Fixed(profile) => profile.value(s),
                _ => self.temperature_unchecked(c, shape.point_on(edge, s), &mut scratch),
            })
            .collect())
    }

    /// The linear map from the unknowns to `edge`'s profile at `positions`.
    pub fn edge_profile_map(&self, edge: Edge, positions: &[f64]) -> LinearMap {
        let shape = self.plate.shape();
        let points: Vec<Point> = positions.iter().map(|&s| shape.point_on(edge, s)).collect();
        self.sensor_map(&points)
    }

    /// `∇B · n_in` at `p` on `edge`, K/m: the corner base's share of the inward gradient.
    fn base_inward_gradient(&self, edge: Edge, c: &[f64], p: Point) -> f64 {
        let gw = self.base.gradient_weights(p);
        let normal = inward_normal(edge);
        let mut g = 0.0;
        for (ci, v) in self.base.values().iter().enumerate() {
            let val = match v {
                CornerValue::Unused => continue,
                CornerValue::Known(t) => *t,
                CornerValue::Parameter(i) => c[*i],
            };
            g += (gw[ci].0 * normal.0 + gw[ci].1 * normal.1) * val;
        }
        g
    }

    /// The coefficients of a series: the unknowns' slice of `c`, a fixed edge's own, or a
    /// convective edge's known part plus its corner parameters' shares.
    fn coefficients<'a>(&'a self, es: &'a EdgeSeries, c: &'a [f64]) -> Cow<'a, [f64]> {
        match es.first_parameter {
            Some(first) => Cow::Borrowed(&c[first..first + es.series.terms()]),
            None if es.corner_terms.is_empty() => Cow::Borrowed(&es.known),
            None => {
                let mut a = es.known.clone();
                for (i, t) in &es.corner_terms {
                    for (x, y) in a.iter_mut().zip(t) {
                        *x += c[*i] * y;
                    }
                }
                Cow::Owned(a)
            }
        }
    }

    /// Derivative of the temperature along the inward normal of `edge` at position `s`,
    /// K/m, for unknowns `c`.
    fn inward_gradient(&self, edge: Edge, c: &[f64], s: f64) -> f64 {
        let shape = self.plate.shape();
        let p = shape.point_on(edge, s);
        if let Some(polar) = &self.polar {
            // the inward normal is −(outward sign) · r̂
            return -polar::PolarModel::sign(edge) * polar.evaluate(c, p, true);
        }
        let mut g = self.base_inward_gradient(edge, c, p);
        for es in &self.series {
            let coeffs = self.coefficients(es, c);
            let series = &es.series;
            if es.edge == edge {
                // own series: Σ a_n φ_n(s) ψ_n'(0)
                for (n, a) in coeffs.iter().enumerate() {
                    g += a * series.phi(n, s) * series.psi_slope(n, 0.0);
                }
            } else if es.edge == edge.opposite() {
                // opposite series at its far side: the inward normal of `edge` points back
                // toward `es.edge`, i.e. along −d.
                let Some(depth) = series.decay.depth() else {
                    continue;
                };
                for (n, a) in coeffs.iter().enumerate() {
                    g -= a * series.phi(n, s) * series.psi_slope(n, depth);
                }
            } else {
                // adjacent series: the inward normal of `edge` runs along that series' s.
                let (sn, d) = self.local(es.edge, p);
                let sign = if sn > 0.0 { -1.0 } else { 1.0 };
                for (n, a) in coeffs.iter().enumerate() {
                    let psi = series.psi(n, d);
                    if psi.abs() < basis::NEGLIGIBLE_DECAY {
                        break;
                    }
                    g += sign * a * series.phi_slope(n, sn) * psi;
                }
            }
        }
        g
    }

    /// Heat-flux density into the plate through `edge` at `positions`, W/m², for unknowns
    /// `c`: by Fourier's law `q = −k ∇T`, the flux into the plate is `−k ∂T/∂n_in` with `n_in`
    /// the inward normal (positive where heat enters). `None` when the plate has no conductivity.
    ///
    /// The own-edge series is differentiated term by term; for a fixed edge with a jump at a
    /// corner this converges slowly near that corner, where the true flux is singular.
    pub fn edge_flux(&self, edge: Edge, c: &[f64], positions: &[f64]) -> Result<Option<Vec<f64>>> {
        self.check_parameters(c)?;
        let Some(k) = self.plate.conductivity() else {
            return Ok(None);
        };
        if self.plate.condition(edge).is_none() {
            return Err(Error::invalid_field(
                "edge",
                format!("the plate has no {edge} edge"),
            ));
        }
        if self.plate.is_insulated(edge) {
            return Ok(Some(vec![0.0; positions.len()]));
        }
        if let Some(conv) = self.plate.convection(edge) {
            // the Robin condition itself: −κ ∂T/∂n_out = h (T − T∞) leaves the plate
            let h = conv.known_h().ok_or_else(|| unknown_h(edge))?;
            let t = self.edge_profile(edge, c, positions)?;
            return Ok(Some(t.iter().map(|t| -h * (t - conv.ambient_k)).collect()));
        }
        Ok(Some(
            positions
                .iter()
                .map(|&s| -k * self.inward_gradient(edge, c, s))
                .collect(),
        ))
    }

    /// `∫ T ds` along `edge` (finite), kelvin metres, from the term-by-term integrals of every
    /// series (exact per term; they converge faster than the series of the flux).
    fn edge_integral(&self, edge: Edge, c: &[f64], length: f64) -> f64 {
        let shape = *self.plate.shape();
        let mid = 0.5 * length;
        // base: linear along the edge, so the midpoint rule is exact
        let mut corners = 0.0;
        let known = self
            .base
            .evaluate(shape.point_on(edge, mid), |i, w| corners += w * c[i]);
        let mut total = (known + corners) * length;
        for es in &self.series {
            let coeffs = self.coefficients(es, c);
            let series = &es.series;
            if es.edge == edge {
                for (n, a) in coeffs.iter().enumerate() {
                    total += a * series.psi(n, 0.0) * series.phi_integral(n);
                }
            } else if es.edge == edge.opposite() {
                let Some(depth) = series.decay.depth() else {
                    continue;
                };
                for (n, a) in coeffs.iter().enumerate() {
                    total += a * series.psi(n, depth) * series.phi_integral(n);
                }
            } else {
                let (sn, _) = self.local(es.edge, shape.point_on(edge, mid));
                for (n, a) in coeffs.iter().enumerate() {
                    total += a * series.phi(n, sn) * series.psi_integral(n);
                }
            }
        }
        total
    }

    /// Heat flow into the plate through `edge` per unit depth, W/m, for unknowns `c`, from
    /// the term-by-term integrals of the flux (exact per term). Through a convective edge it
    /// is `−h ∫ (T − T∞) ds`, from the term-by-term integrals of the temperature: that form
    /// converges much faster than the flux series next to the edge's held ends. `None`
    /// without conductivity, or for the infinite sides of a strip.
    pub fn heat_flow(&self, edge: Edge, c: &[f64]) -> Result<Option<f64>> {
        self.check_parameters(c)?;
        let Some(kc) = self.plate.conductivity() else {
            return Ok(None);
        };
        let shape = *self.plate.shape();
        let Some(length) = shape.edge_length(edge) else {
            return Ok(None);
        };
        if self.plate.is_insulated(edge) {
            return Ok(Some(0.0));
        }
        if let Some(polar) = &self.polar {
            // only the circle's mean (m = 0) survives the integral round it
            let r = shape.radius_of(edge).unwrap_or(0.0);
            let (mean, mean_slope) = polar.circle_mean(c, r);
            if let Some(conv) = self.plate.convection(edge) {
                let h = conv.known_h().ok_or_else(|| unknown_h(edge))?;
                return Ok(Some(-h * (mean - conv.ambient_k) * length));
            }
            let inward = -polar::PolarModel::sign(edge) * mean_slope;
            return Ok(Some(-kc * inward * length));
        }
        if let Some(conv) = self.plate.convection(edge) {
            let h = conv.known_h().ok_or_else(|| unknown_h(edge))?;
            let integral = self.edge_integral(edge, c, length);
            return Ok(Some(-h * (integral - conv.ambient_k * length)));
        }
        // base: its normal gradient is linear along the edge, so the midpoint rule is exact
        let mid = 0.5 * length;
        let mut total = self.base_inward_gradient(edge, c, shape.point_on(edge, mid)) * length;
        for es in &self.series {
            let coeffs = self.coefficients(es, c);
            let series = &es.series;
            if es.edge == edge {
                for (n, a) in coeffs.iter().enumerate() {
                    total += a * series.psi_slope(n, 0.0) * series.phi_integral(n);
                }
            } else if es.edge == edge.opposite() {
                let Some(depth) = series.decay.depth() else {
                    continue;
                };
                for (n, a) in coeffs.iter().enumerate() {
                    total -= a * series.psi_slope(n, depth) * series.phi_integral(n);
                }
            } else {
                let p = shape.point_on(edge, mid);
                let (sn, _) = self.local(es.edge, p);
                let sign = if sn > 0.0 { -1.0 } else { 1.0 };
                for (n, a) in coeffs.iter().enumerate() {
                    total += sign * a * series.phi_slope(n, sn) * series.psi_integral(n);
                }
            }
        }
        Ok(Some(-kc * total))
    }

    /// A description of the model for people (`edgetherm check`).
    pub fn describe(&self) -> ModelDescription {
        let edges = Edge::ALL
            .into_iter()
            .filter_map(|edge| {
                let condition = self.plate.condition(edge)?;
                if let Some(polar) = &self.polar {
                    let terms = polar.terms_of(edge);
                    return Some(EdgeDescription {
                        edge,
                        condition: condition.name(),
                        basis: terms.map(
                            |_| "Fourier modes round the circle: 1, cos nθ, sin nθ (periodic)",
                        ),
                        decay: terms.map(|_| {
                            if edge == Edge::Rim {
                                "(r/R)^n toward the centre (the Poisson series of the disk)"
                            } else {
                                "a r^n + b r^-n per mode (a + b ln r for the mean) across the wall"
                            }
                        }),
                        terms: terms.map_or(0, |t| t.0),
                        unknowns: terms.filter(|t| t.1).map_or(0, |t| t.0),
                    });
                }
                let series = self.series.iter().find(|s| s.edge == edge);
                Some(EdgeDescription {
                    edge,
                    condition: condition.name(),
                    basis: series.map(|s| s.series.basis.kind().describe()),
                    decay: series.map(|s| s.series.decay.describe()),
                    terms: series.map_or(0, |s| s.series.terms()),
                    unknowns: series
                        .and_then(|s| s.first_parameter.map(|_| s.series.terms()))
                        .unwrap_or(0),
                })
            })
            .collect();
        let corner_parameters = self
            .parameters
            .iter()
            .filter_map(|p| match p {
                Parameter::Corner { corner } => Some(corner.name()),
                _ => None,
            })
            .collect();
        ModelDescription {
            edges,
            corner_parameters,
            unknowns: self.parameter_count(),
        }
    }
}

/// What `check` prints about the model.
#[derive(Debug, Clone, Serialize)]
pub struct ModelDescription {
    /// One entry per edge of the outline.
    pub edges: Vec<EdgeDescription>,
    /// Corners whose temperature is an unknown (two unknown edges meet there).
    pub corner_parameters: Vec<&'static str>,
    /// Total number of unknowns.
    pub unknowns: usize,
}

/// One edge of [`ModelDescription`].
#[derive(Debug, Clone, Serialize)]
pub struct EdgeDescription {
    /// The edge.
    pub edge: Edge,
    /// Its condition (`fixed`, `insulated`, `unknown`).
    pub condition: &'static str,
    /// Its eigenfunctions, if it has a series.
    pub basis: Option<&'static str>,
    /// The decay of its modes across the plate.
    pub decay: Option<&'static str>,
    /// Terms in its series (after dropping negligible ones, for a fixed edge).
    pub terms: usize,
    /// Unknown coefficients it contributes.
    pub unknowns: usize,
}
