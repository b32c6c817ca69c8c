//! The admissible set, discretised without losing any admissible truth.
//!
//! Each hidden edge `e` of length `L_e` carries `K_e` equally spaced nodes `s_j = j h_e`; the
//! unknowns of every bound program are the node values `v_j`, read as the piecewise-linear
//! profile `g = Σ_j v_j θ_j` with the hat functions `θ_j` (half hats at the two ends, so that
//! `Σ_j θ_j = 1`). A true profile `f` obeying `|f'| ≤ G` is represented by its *quasi-
//! interpolant* `v_j = ⟨f, θ_j⟩ / ⟨1, θ_j⟩` (hat-weighted local means), which keeps three
//! facts that make every bound strict (docs/method.md, "Strict bounds"):
//!
//! 1. node slopes `|v_{j+1} − v_j| ≤ G h_e` (a difference of two means of `f` whose weights
//!    are at most `h_e` apart in the Wasserstein sense);
//! 2. `|v_j − f(s_j)| ≤ G h_e / 3` (the mean distance from `s_j` under `θ_j`);
//! 3. the readings of `f` and of `g` differ by at most `G ρ_i` at sensor `i`, with
//!    `ρ_i = Σ_e ∫ |R_{ie}|`, `R_{ie}(s) = ∫_0^s (K_{ie} − Q K_{ie})`, where `K_{ie}` is the
//!    sensor's kernel along edge `e` (the Poisson kernel as a series) and `Q` the same
//!    quasi-interpolation: `⟨f, K − QK⟩ = −⟨f', R⟩` because `⟨1, K − QK⟩ = 0`. This is second
//!    order in `h_e / depth`, far smaller than the first-order `G h_e / 2` a plain
//!    interpolant would cost through the maximum principle.
//!
//! The readings of `g` are computed by superposition through the forward model with every
//! hidden edge fixed at a hat (exact Fourier coefficients of piecewise-linear data,
//! [`crate::forward::EdgeBasis::project`]); the series beyond `N` terms is bounded per sensor
//! by `ε_{ie} S_e` with
//! `ε_{ie} = 4 e^{−k_c d_{ie}} / (k_c L_e (1 − e^{−π d_{ie} / L_e}))`, `k_c` the smaller of
//! `N π / L_e` and the wavenumber where the series stops because `e^{−k d}` fell below
//! [`NEGLIGIBLE_DECAY`], and
//! `S_e = |u(0)| + |u(L_e)| + TV(u) ≤ G L_e + 3 T_span`, `u = g − B` the profile less the corner
//! base (integration by parts of the Fourier coefficient, `|a_n| ≤ 2 S_e / (k_n L_e)`, and
//! `ψ_n(d) ≤ 2 e^{−k_n d}`; Carslaw & Jaeger §5.2 for the series). The bound on `S_e` uses
//! only that no two temperatures of the plate differ by more than [`TEMPERATURE_SPAN_K`]:
//! `|u(0)|`, `|u(L_e)|` and `TV(B) = |B(L_e) − B(0)|` are each such a difference. It is a
//! constant, so the allowance it adds to each reading is fixed: a convex program cannot use a
//! sharper, profile-dependent `S_e` without letting the allowance grow without limit. On the
//! sample layouts `ε` is about 1e-20 and the term is below 1e-15 K; a sensor very close to a
//! hidden edge gets a wider allowance, and the bounds widen instead of failing.

use crate::error::{Error, Result};
use crate::forward::basis::NEGLIGIBLE_DECAY;
use crate::forward::basis::Series;
use crate::forward::{ForwardModel, SeriesOptions};
use crate::geometry::{Edge, EdgeCondition, EdgeProfile, Plate, Point, Shape};
use rayon::prelude::*;

/// How finely the admissible set is discretised.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Discretisation {
    /// Nodes per hidden edge (at least 3). The pointwise bounds pay `G h / 3` for the node
    /// spacing `h = L / (nodes − 1)`.
    pub nodes_per_edge: usize,
    /// Series terms used to map the node profile to the sensors (the tail beyond them is
    /// bounded and added to the misfit allowance).
    pub terms: usize,
}

impl Default for Discretisation {
    fn default() -> Self {
        Discretisation {
            nodes_per_edge: 241,
            terms: 1024,
        }
    }
}

/// The largest difference between two temperatures anywhere on a plate, kelvin: twice the
/// highest temperature any command accepts (5000 K). It bounds the series-tail term `S_e`.
pub const TEMPERATURE_SPAN_K: f64 = 1.0e4;

/// One hidden edge's nodes within the variable vector.
#[derive(Debug, Clone)]
pub struct EdgeNodes {
    /// The edge.
    pub edge: Edge,
    /// Edge length, metres.
    pub length_m: f64,
    /// Node positions, metres from the edge's lower coordinate.
    pub positions_m: Vec<f64>,
    /// Index of the first node in the variable vector.
    pub first: usize,
    /// Node spacing, metres.
    pub spacing_m: f64,
}

/// The discretised admissible set, independent of the gradient limit.
#[derive(Debug, Clone)]
pub struct AdmissibleSet {
    /// The hidden edges' nodes.
    pub edges: Vec<EdgeNodes>,
    /// Number of node variables.
    pub node_count: usize,
    /// `m × node_count`, row-major: model readings `H v + offset`, kelvin per kelvin.
    pub(crate) h: Vec<f64>,
    /// Model readings with every hidden edge at 0 K, kelvin.
    pub(crate) offset: Vec<f64>,
    /// Readings, kelvin.
    pub(crate) readings: Vec<f64>,
    /// Reading standard uncertainties, kelvin.
    pub(crate) sigmas: Vec<f64>,
    /// `ρ_i`, metres: the quasi-interpolation allowance per unit gradient.
    pub(crate) rho_m: Vec<f64>,
    /// `ε_{ie}` per sensor and edge (dimensionless).
    pub(crate) tail: Vec<Vec<f64>>,
    /// Largest `ε_{ie}` (reported).
    pub max_tail_factor: f64,
}

/// Quadrature points per node cell for the kernels (at least this many, and enough for a
/// tenth of the shallowest depth).
const SUBPOINTS: usize = 8;

/// Margin on the quadrature of `ρ_i`: trapezoid sums of a kernel that is smooth on the scale
/// of the sensor depth, sampled at a tenth of it or finer, are accurate to well under 1 %
/// (the trapezoid error is `(Δs)² / 12` times the second derivative); 10 % covers that.
const QUADRATURE_MARGIN: f64 = 1.1;

impl AdmissibleSet {
    /// Build the set for `plate`'s hidden edges and the sensors in use.
    ///
    /// # Errors
    /// [`Error::Invalid`] when a sensor lies on a hidden edge or the sizes disagree;
    /// errors of the forward model.
    pub fn new(
        plate: &Plate,
        sensors: &[Point],
        readings_k: &[f64],
        sigmas_k: &[f64],
        disc: Discretisation,
    ) -> Result<Self> {
        let m = sensors.len();
        if readings_k.len() != m || sigmas_k.len() != m || m == 0 {
            return Err(Error::Internal(
                "strict bounds: sensors, readings and sigmas differ in number".into(),
            ));
        }
        if sigmas_k.iter().any(|s| !(s.is_finite() && *s > 0.0))
            || readings_k.iter().any(|r| !r.is_finite())
        {
            return Err(Error::Internal(
                "strict bounds: readings and sigmas must be finite, sigmas positive".into(),
            ));
        }
        let shape = *plate.shape();
        let hidden = plate.unknown_edges();
        let k_nodes = disc.nodes_per_edge.max(3);
        let edges = edge_nodes(&shape, &hidden, k_nodes);
        let node_count = edges.len() * k_nodes;
        sensors_off_hidden_edges(&shape, sensors, &edges)?;
        let options = SeriesOptions {
            unknown_terms: 1,
            known_terms: disc.terms.max(16),
        };
        // Readings with every hidden edge at 0 K, and the base at each hidden edge's ends.
        let zero: Vec<(Edge, EdgeProfile)> = hidden
            .iter()
            .map(|&e| (e, EdgeProfile::constant(0.0)))
            .collect();
        let offset = hat_response(plate, &zero, sensors, options)?;
        // One column per node: the hat's readings minus the zero readings. An interior hat
        // leaves the corner values alone, so its readings follow from the hidden edge's series
        // alone (superposition); only the two end nodes of each edge move a corner.
        let mut columns: Vec<Vec<f64>> = vec![Vec::new(); node_count];
        let ((tail, max_tail_factor), rho_m) = if shape.is_round() {
            // a circle: every node's hat (the two half hats at 0 and at the full turn too)
            // through the Fourier synthesis of the unknown circle ([`polar_hat_columns`])
            let map = PolarMap::new(plate, sensors, disc.terms.max(16))?;
            for e in &edges {
                for (j, col) in polar_hat_columns(&map, e)?.into_iter().enumerate() {
                    columns[e.first + j] = col;
                }
            }
            (
                polar_tail_factors(&shape, sensors, &edges, &map),
                polar_quasi_interpolation_allowance(&shape, sensors, &edges, &map),
            )
        } else {
            straight_hat_columns(
                plate,
                &shape,
                sensors,
                &edges,
                &zero,
                &offset,
                (options, k_nodes),
                &mut columns,
            )?;
            (
                tail_factors(&shape, sensors, &edges, options.known_terms),
                quasi_interpolation_allowance(plate, sensors, &edges)?,
            )
        };
        Ok(Self::assemble(
            edges,
            &columns,
            offset,
            readings_k,
            sigmas_k,
            rho_m,
            tail,
            max_tail_factor,
        ))
    }
}

/// The node columns of straight hidden edges: the interior hats through the hidden edge's
/// series alone (superposition), the two end hats of each edge (which move a corner) through
/// a whole forward model each (`k_nodes` nodes per edge).
#[allow(clippy::too_many_arguments)]
fn straight_hat_columns(
    plate: &Plate,
    shape: &Shape,
    sensors: &[Point],
    edges: &[EdgeNodes],
    zero: &[(Edge, EdgeProfile)],
    offset: &[f64],
    (options, k_nodes): (SeriesOptions, usize),
    columns: &mut [Vec<f64>],
) -> Result<()> {
    let zero_model = ForwardModel::new(&plate.with_unknowns_fixed(zero)?, options)?;
    for e in edges {
        let interior = interior_hat_columns(&zero_model, shape, e, sensors, options)?;
        for (j, col) in interior.into_iter().enumerate() {
            columns[e.first + 1 + j] = col;
        }
    }
    let ends: Vec<usize> = edges
        .iter()
        .flat_map(|e| [e.first, e.first + k_nodes - 1])
        .collect();
    let end_columns = ends
        .par_iter()
        .map(|&var| {
            let mut profiles = zero.to_vec();
            let e = &edges[var / k_nodes];
            let j = var - e.first;
            let hat = hat_profile(&e.positions_m, j)?;
            if let Some(slot) = profiles.iter_mut().find(|(x, _)| *x == e.edge) {
                slot.1 = hat;
            }
            let r = hat_response(plate, &profiles, sensors, options)?;
            Ok(r.iter().zip(offset).map(|(a, o)| a - o).collect())
        })
        .collect::<Result<Vec<Vec<f64>>>>()?;
    for (&var, col) in ends.iter().zip(end_columns) {
        columns[var] = col;
    }
    Ok(())
}

impl AdmissibleSet {
    /// The set from its node columns (one reading per sensor each) and allowances.
    #[allow(clippy::too_many_arguments)]
    fn assemble(
        edges: Vec<EdgeNodes>,
        columns: &[Vec<f64>],
        offset: Vec<f64>,
        readings_k: &[f64],
        sigmas_k: &[f64],
        rho_m: Vec<f64>,
        tail: Vec<Vec<f64>>,
        max_tail_factor: f64,
    ) -> Self {
        let (m, node_count) = (readings_k.len(), columns.len());
        let mut h = vec![0.0; m * node_count];
        for (var, col) in columns.iter().enumerate() {
            for i in 0..m {
                h[i * node_count + var] = col[i];
            }
        }
        AdmissibleSet {
            edges,
            node_count,
            h,
            offset,
            readings: readings_k.to_vec(),
            sigmas: sigmas_k.to_vec(),
            rho_m,
            tail,
            max_tail_factor,
        }
    }

    /// The same set for other readings of the same sensors (kelvin): everything but the
    /// readings depends on the layout only, so a simulation study builds the set once.
    ///
    /// # Errors
    /// [`Error::Internal`] when the number of readings differs or one is not finite.
    pub fn with_readings(&self, readings_k: &[f64]) -> Result<Self> {
        if readings_k.len() != self.readings.len() || readings_k.iter().any(|r| !r.is_finite()) {
            return Err(Error::Internal(
                "strict bounds: new readings must be finite, one per sensor".into(),
            ));
        }
        let mut out = self.clone();
        out.readings = readings_k.to_vec();
        Ok(out)
    }

    /// A set given directly by its matrices, for checks against an independent solver: one
    /// hidden edge (named `edge`) of `length_m` with `nodes` nodes, model readings
    /// `h · v + offset` (`h` row-major, `m × nodes`), readings and sigmas (kelvin), and the
    /// per-sensor model-error allowance per unit gradient `rho_m` (metres). No series tail.
    ///
    /// # Errors
    /// [`Error::Internal`] when the sizes disagree or a value is not finite.
    #[allow(clippy::too_many_arguments)]
    pub fn from_matrix(
        edge: Edge,
        length_m: f64,
        nodes: usize,
        h: Vec<f64>,
        offset: Vec<f64>,
        readings_k: Vec<f64>,
        sigmas_k: Vec<f64>,
        rho_m: Vec<f64>,
    ) -> Result<Self> {
        let m = readings_k.len();
        let ok = nodes >= 2
            && length_m.is_finite()
            && length_m > 0.0
            && h.len() == m * nodes
            && offset.len() == m
            && sigmas_k.len() == m
            && rho_m.len() == m
            && h.iter()
                .chain(&offset)
                .chain(&readings_k)
                .chain(&rho_m)
                .all(|v| v.is_finite())
            && sigmas_k.iter().all(|s| s.is_finite() && *s > 0.0);
        if !ok || m == 0 {
            return Err(Error::Internal(
                "strict bounds: inconsistent matrices for a set".into(),
            ));
        }
        let spacing = length_m / (nodes - 1) as f64;
        Ok(AdmissibleSet {
            edges: vec![EdgeNodes {
                edge,
                length_m,
                positions_m: (0..nodes).map(|j| j as f64 * spacing).collect(),
                first: 0,
                spacing_m: spacing,
            }],
            node_count: nodes,
            h,
            offset,
            readings: readings_k,
            sigmas: sigmas_k,
            rho_m,
            tail: vec![vec![0.0]; m],
            max_tail_factor: 0.0,
        })
    }

    /// Number of sensors.
    pub fn sensor_count(&self) -> usize {
        self.readings.len()
    }

    /// The readings the model predicts for node values `v`, kelvin.
    pub fn predict(&self, v: &[f64]) -> Vec<f64> {
        let n = self.node_count;
        (0..self.sensor_count())
            .map(|i| {
                self.offset[i]
                    + self.h[i * n..(i + 1) * n]
                        .iter()
                        .zip(v)
                        .map(|(a, b)| a * b)
                        .sum::<f64>()
            })
            .collect()
    }

    /// The quasi-interpolation allowance `ρ_i` per sensor, metres (reading error per unit
    /// gradient).
    pub fn rho_m(&self) -> &[f64] {
        &self.rho_m
    }

    /// The model-error allowance of each reading, `|u_i| ≤ G a_i + b_i`: returns `(a, b)`
    /// with `a_i = ρ_i + Σ_e ε_{ie} L_e` (metres: the quasi-interpolation and the tail's
    /// `TV(g) ≤ G L_e`) and `b_i = 3 T_span Σ_e ε_{ie}` (kelvin: the rest of the tail bound).
    pub(crate) fn allowance(&self) -> (Vec<f64>, Vec<f64>) {
        (0..self.sensor_count())
            .map(|i| {
                let per_gradient = self.rho_m[i]
                    + self
                        .edges
                        .iter()
                        .zip(&self.tail[i])
                        .map(|(e, eps)| eps * e.length_m)
                        .sum::<f64>();
                let fixed = 3.0 * TEMPERATURE_SPAN_K * self.tail[i].iter().sum::<f64>();
                (per_gradient, fixed)
            })
            .unzip()
    }
}

/// The hat function of node `j` as a piecewise-linear profile.
fn hat_profile(nodes: &[f64], j: usize) -> Result<EdgeProfile> {
    let last = nodes.len() - 1;
    let mut pos = Vec::new();
    let mut val = Vec::new();
    if j > 1 {
        pos.push(0.0);
        val.push(0.0);
    }
    if j > 0 {
        pos.push(nodes[j - 1]);
        val.push(0.0);
    }
    pos.push(nodes[j]);
    val.push(1.0);
    if j < last {
        pos.push(nodes[j + 1]);
        val.push(0.0);
    }
    if j + 1 < last {
        pos.push(nodes[last]);
        val.push(0.0);
    }
    EdgeProfile::piecewise_linear(pos, val).map_err(Error::Internal)
}

/// The readings of each interior hat of edge `e` (nodes `1..K−1`), one column per node: the
/// hat's Fourier coefficients on the edge's basis times the modes at each sensor. A symmetric
/// hat of half-width `h` at `s_j` has `∫ θ_j φ_n = φ_n(s_j) h sinc²(k_n h / 2)` (its odd part
/// integrates to zero), which is what [`crate::forward::EdgeBasis::project`] gives for the
/// two segments, at a fraction of the cost.
fn interior_hat_columns(
    zero_model: &ForwardModel,
    shape: &Shape,
    e: &EdgeNodes,
    sensors: &[Point],
    options: SeriesOptions,
) -> Result<Vec<Vec<f64>>> {
    let Some(series) = zero_model.series_of(e.edge) else {
        return Err(Error::Internal(format!(
            "strict bounds: the {} edge has no series",
            e.edge
        )));
    };
    let series = Series::new(series.basis, series.decay, options.known_terms);
    let terms = series.terms();
    let h = e.spacing_m;
    // per sensor: modes φ_n(s_i) ψ_n(d_i), and how many matter
    let mut modes = vec![0.0; sensors.len() * terms];
    let mut used = 0;
    for (i, &p) in sensors.iter().enumerate() {
        let (s, d) = (shape.position_along(e.edge, p), shape.depth_from(e.edge, p));
        used = used.max(series.modes_into(s, d, &mut modes[i * terms..(i + 1) * terms]));
    }
    // the hat's coefficient factor h sinc²(k h / 2) / ‖φ_n‖²
    let factor: Vec<f64> = (0..used)
        .map(|n| {
            let half = 0.5 * series.wavenumber(n) * h;
            let sinc = if half == 0.0 { 1.0 } else { half.sin() / half };
            h * sinc * sinc / series.norm_sq(n)
        })
        .collect();
    let weighted: Vec<f64> = (0..sensors.len())
        .flat_map(|i| {
            modes[i * terms..i * terms + used]
                .iter()
                .zip(&factor)
                .map(|(m, f)| m * f)
                .collect::<Vec<f64>>()
        })
        .collect();
    let last = e.positions_m.len() - 1;
    Ok(e.positions_m[1..last]
        .par_iter()
        .map(|&s_j| {
            let mut phi = vec![0.0; used];
            series.phi_into(s_j, &mut phi);
            (0..sensors.len())
                .map(|i| {
                    weighted[i * used..(i + 1) * used]
                        .iter()
                        .zip(&phi)
                        .map(|(a, b)| a * b)
                        .sum()
                })
                .collect()
        })
        .collect())
}

/// Readings at `sensors` with the hidden edges fixed at `profiles`.
fn hat_response(
    plate: &Plate,
    profiles: &[(Edge, EdgeProfile)],
    sensors: &[Point],
    options: SeriesOptions,
) -> Result<Vec<f64>> {
    let fixed = plate.with_unknowns_fixed(profiles)?;
    let model = ForwardModel::new(&fixed, options)?;
    sensors.iter().map(|&p| model.temperature(&[], p)).collect()
}

/// `ρ_i = Σ_e ∫_0^{L_e} |R_{ie}(s)| ds` with `R_{ie}(s) = ∫_0^s (K_{ie} − Q K_{ie})`, metres,
/// by the trapezoid rule on a sub-grid of each node cell, times [`QUADRATURE_MARGIN`].
///
/// The kernel of sensor `i` along edge `e` is the series
/// `K(s) = Σ_n φ_n(s_i) ψ_n(d_i) φ_n(s) / ‖φ_n‖²` (Carslaw & Jaeger §5.2); an edge's corner
/// base depends only on its end values, so interior changes of the profile act through `K`
/// alone.
fn quasi_interpolation_allowance(
    plate: &Plate,
    sensors: &[Point],
    edges: &[EdgeNodes],
) -> Result<Vec<f64>> {
    let model = ForwardModel::new(
        plate,
        SeriesOptions {
            unknown_terms: 1024,
            known_terms: 16,
        },
    )?;
    let shape = plate.shape();
    let mut rho = vec![0.0; sensors.len()];
    for e in edges {
        let Some(series) = model.series_of(e.edge) else {
            continue;
        };
        if !matches!(plate.condition(e.edge), Some(EdgeCondition::Unknown)) {
            continue;
        }
        let n = series.terms();
        let FineGrid {
            per_cell,
            cells,
            fine,
            ds,
        } = FineGrid::new(shape, sensors, e);
        // each sensor's modes, and how many of them are not negligible at its depth
        let modes: Vec<(Vec<f64>, usize)> = sensors
            .iter()
            .map(|&p| {
                let (s_i, d_i) = (shape.position_along(e.edge, p), shape.depth_from(e.edge, p));
                let mut w = vec![0.0; n];
                let used = series.modes_into(s_i, d_i, &mut w);
                (w, used)
            })
            .collect();
        // every sensor's kernel at the fine points, block by block
        let kernels = fine_kernels(series, &fine, &modes);
        let per_sensor: Vec<f64> = sensors
            .iter()
            .zip(&modes)
            .zip(kernels.chunks_exact(fine.len().max(1)))
            .map(|((&p, (_, used)), kernel)| {
                let (used, d_i) = (*used, shape.depth_from(e.edge, p));
                // The kernel's omitted modes (n ≥ used): |K_tail| ≤ Σ ψ_n (2/L) ≤ τ with
                // ψ_n ≤ 2 e^{−k_n d} and k_n ≥ nπ/L, so |K_tail − Q K_tail| ≤ 2τ and their
                // share of ∫|R| is at most 2 τ L².
                let len = e.length_m;
                let k_omit = used as f64 * std::f64::consts::PI / len;
                let tau = 4.0 / len * (-k_omit * d_i).exp()
                    / -(-std::f64::consts::PI * d_i / len).exp_m1();
                integral_of_r(kernel, per_cell, cells, ds) + 2.0 * tau * len * len
            })
            .collect();
        for (acc, v) in rho.iter_mut().zip(per_sensor) {
            *acc += QUADRATURE_MARGIN * v;
        }
    }
    Ok(rho)
}

/// Fine points per block of [`fine_kernels`]: the block's `φ` table (points × modes) and
/// every sensor's sums stay in the core's caches while the modes are swept.
const KERNEL_BLOCK: usize = 64;

/// Each sensor's kernel `K_i(s_k) = Σ_{t < used_i} φ_t(s_k) w_{it} / ‖φ_t‖²` at every fine
/// point, sensor after sensor (`fine.len()` values each); `modes` holds each sensor's `w_i`
/// and its `used_i`. Every value is the products added in the order of `t` from −0.0, as
/// `Iterator::sum` adds them; blocks of [`KERNEL_BLOCK`] points run in parallel and each
/// sweeps the modes once for all sensors (a blocked product in place of a pass over the whole
/// `φ` table per sensor).
fn fine_kernels(series: &Series, fine: &[f64], modes: &[(Vec<f64>, usize)]) -> Vec<f64> {
    let width = modes.iter().map(|m| m.1).max().unwrap_or(0);
    let count = modes.len();
    let n_fine = fine.len();
    let blocks: Vec<Vec<f64>> = fine
        .par_chunks(KERNEL_BLOCK)
        .map(|points| kernel_block(series, points, modes, width))
        .collect();
    sensor_major(&blocks, count, n_fine)
}

/// Blocks of [`KERNEL_BLOCK`] points (each every sensor's sums at its points, sensor after
/// sensor) laid out sensor after sensor over all `n_fine` points, for `count` sensors.
fn sensor_major(blocks: &[Vec<f64>], count: usize, n_fine: usize) -> Vec<f64> {
    let mut kernels = vec![0.0; count * n_fine];
    for (block, sums) in blocks.iter().enumerate() {
        let b = sums.len() / count.max(1);
        for (i, acc) in sums.chunks_exact(b.max(1)).enumerate() {
            let at = i * n_fine + block * KERNEL_BLOCK;
            kernels[at..at + b].copy_from_slice(acc);
        }
    }
    kernels
}
crate::simd::avx2_dispatch! {
    /// One block of [`fine_kernels`]: every sensor's sums at the block's points (`points.len()`
    /// values per sensor, sensor after sensor), built for AVX2 when the processor has it (the
    /// same operations on each value either way).
    fn kernel_block(
        series: &Series,
        points: &[f64],
        modes: &[(Vec<f64>, usize)],
        width: usize,
    ) -> Vec<f64> = kernel_block_body;
}

/// The body of [`kernel_block`].
#[inline(always)]
fn kernel_block_body(
    series: &Series,
    points: &[f64],
    modes: &[(Vec<f64>, usize)],
    width: usize,
) -> Vec<f64> {
    let b = points.len();
    // φ_t(s_k) / ‖φ_t‖², mode after mode (b values each)
    let mut phi = vec![0.0; width * b];
    series.scaled_phi_table(points, width, &mut phi, &mut Vec::new());
    let mut sums = vec![-0.0; modes.len() * b];
    for (t, phi_t) in phi.chunks_exact(b.max(1)).enumerate() {
        for ((w, used), acc) in modes.iter().zip(sums.chunks_exact_mut(b.max(1))) {
            if t < *used {
                let wt = w[t];
                for (a, &f) in acc.iter_mut().zip(phi_t) {
                    *a += f * wt;
                }
            }
        }
    }
    sums
}

/// The sensor map of a round plate's unknown circles with `terms` Fourier functions each: the
/// reading of sensor `i` per unit coefficient of function `j` of each hidden circle.
struct PolarMap {
    model: ForwardModel,
    /// `m × p`, the sensor map.
    a: nalgebra::DMatrix<f64>,
    /// Functions per circle.
    terms: usize,
}

impl PolarMap {
    fn new(plate: &Plate, sensors: &[Point], terms: usize) -> Result<Self> {
        let model = ForwardModel::new(
            plate,
            SeriesOptions {
                unknown_terms: terms,
                known_terms: 16,
            },
        )?;
        let a = model.sensor_map(sensors).matrix;
        Ok(PolarMap { model, a, terms })
    }

    /// The first column of `edge`'s functions in the map.
    fn first(&self, edge: Edge) -> Result<usize> {
        self.model
            .parameters()
            .iter()
            .position(
                |p| matches!(p, crate::forward::Parameter::Mode { edge: e, .. } if *e == edge),
            )
            .ok_or_else(|| {
                Error::Internal(format!("strict bounds: no unknowns on the {edge} edge"))
            })
    }

    /// The largest ratio `q` by which a mode of `edge` shrinks per order on its way to `p`:
    /// `a/r` from an inner circle of radius `a`, `r/R` toward the centre from an outer circle
    /// or rim of radius `R` (the response of order `m` is at most `2 q^m`, the factor 2
    /// covering an insulated or convective circle across).
    fn decay_ratio(shape: &Shape, edge: Edge, p: Point) -> f64 {
        let r = p.x.hypot(p.y);
        let re = shape.radius_of(edge).unwrap_or(r);
        if edge == Edge::Inner { re / r } else { r / re }
    }
}

/// The readings of every node's hat on a hidden circle: the hat's exact Fourier
/// coefficients ([`crate::forward::polar::fourier_coefficients`]) through the sensor map. The
/// first and the last node are the two half hats at 0 and at the full turn.
fn polar_hat_columns(map: &PolarMap, e: &EdgeNodes) -> Result<Vec<Vec<f64>>> {
    let first = map.first(e.edge)?;
    let radius = e.length_m / std::f64::consts::TAU;
    let cols = map.a.columns(first, map.terms);
    (0..e.positions_m.len())
        .into_par_iter()
        .map(|j| {
            let hat = hat_profile(&e.positions_m, j)?;
            let coef = crate::forward::polar::fourier_coefficients(&hat, radius, map.terms);
            let c = nalgebra::DVector::from_vec(coef);
            Ok((cols * c).iter().copied().collect())
        })
        .collect()
}

/// `ε_{ie}` for a hidden circle: the Fourier functions beyond order `M` (the map's) reach
/// sensor `i` with at most `2 q^m` per unit coefficient, and a profile whose total variation
/// round the circle (its jump at 0 included) is `S` has coefficients of order `m` at most
/// `S / (π m)` (integration by parts of a periodic function); two functions per order give
/// `Σ_{m>M} 4 S q^m / (π m) ≤ S · 4 q^{M+1} / (π (M+1) (1 − q))`.
fn polar_tail_factors(
    shape: &Shape,
    sensors: &[Point],
    edges: &[EdgeNodes],
    map: &PolarMap,
) -> (Vec<Vec<f64>>, f64) {
    let m_top = crate::forward::polar::order_of(map.terms - 1) as f64;
    let mut tail = vec![vec![0.0; edges.len()]; sensors.len()];
    let mut max_tail_factor = 0.0_f64;
    for (i, &p) in sensors.iter().enumerate() {
        for (ei, e) in edges.iter().enumerate() {
            let q = PolarMap::decay_ratio(shape, e.edge, p).min(1.0 - 1e-12);
            let eps =
                4.0 * q.powf(m_top + 1.0) / (std::f64::consts::PI * (m_top + 1.0) * (1.0 - q));
            tail[i][ei] = eps;
            max_tail_factor = max_tail_factor.max(eps);
        }
    }
    (tail, max_tail_factor)
}

/// `ρ_i` for hidden circles, as [`quasi_interpolation_allowance`] with the circle's kernel
/// `K(s) = Σ_j A_ij Θ_j(s/r) / ‖Θ_j‖²` (the sensor map's row times the Fourier functions; the
/// Poisson kernel of the disk or its annulus analogue). The omitted orders add at most
/// `|K_tail| ≤ τ = 4 q^{M+1} / (π r (1 − q))` (norms `π r`), and `2 τ L²` to `∫|R|`.
fn polar_quasi_interpolation_allowance(
    shape: &Shape,
    sensors: &[Point],
    edges: &[EdgeNodes],
    map: &PolarMap,
) -> Vec<f64> {
    let mut rho = vec![0.0; sensors.len()];
    let m_top = crate::forward::polar::order_of(map.terms - 1) as f64;
    for e in edges {
        let Ok(first) = map.first(e.edge) else {
            continue;
        };
        let radius = e.length_m / std::f64::consts::TAU;
        let n = map.terms;
        let FineGrid {
            per_cell,
            cells,
            fine,
            ds,
        } = FineGrid::new(shape, sensors, e);
        let m = sensors.len();
        let weights: Vec<Vec<f64>> = (0..m)
            .map(|i| (0..n).map(|j| map.a[(i, first + j)]).collect())
            .collect();
        let kernels = polar_kernels(&fine, radius, n, &weights);
        let per_sensor: Vec<f64> = (0..m)
            .into_par_iter()
            .map(|i| {
                let q = PolarMap::decay_ratio(shape, e.edge, sensors[i]).min(1.0 - 1e-12);
                let tau = 4.0 * q.powf(m_top + 1.0) / (std::f64::consts::PI * radius * (1.0 - q));
                let kernel = &kernels[i * fine.len()..(i + 1) * fine.len()];
                let len = e.length_m;
                integral_of_r(kernel, per_cell, cells, ds) + 2.0 * tau * len * len
            })
            .collect();
        for (acc, v) in rho.iter_mut().zip(per_sensor) {
            *acc += QUADRATURE_MARGIN * v;
        }
    }
    rho
}

/// The polar allowance's basis at arc length `s` (metres) on a circle of `radius`: the
/// functions of [`crate::forward::polar::trig_into`] over their norms squared (`2π r` for
/// the constant, `π r` for the others), as many as `row` holds.
fn polar_phi_into(s: f64, radius: f64, row: &mut [f64]) {
    crate::forward::polar::trig_into(s / radius, row);
    for (t, v) in row.iter_mut().enumerate() {
        *v /= if t == 0 {
            std::f64::consts::TAU * radius
        } else {
            std::f64::consts::PI * radius
        };
    }
}

/// Every sensor's kernel of the polar allowance at every fine position `fine` (metres along
/// a circle of `radius`): `Σ_j φ_j(s_k) w_j` over the `n` functions of [`polar_phi_into`]
/// with the sensor's weights `w` (`n` each), added in the order of `j` from −0.0 as
/// `Iterator::sum` adds them; sensor after sensor (`fine.len()` values each).
///
/// A block of [`KERNEL_BLOCK`] points at a time (eight points side by side in
/// [`super::dual::row_dots`]): the block's basis values stay in cache for all the sensors,
/// where a table of every point (about 16 MB at 1,921 points and 1,024 functions) was read
/// again from memory for each sensor. Each sum is the same as from the whole table.
fn polar_kernels(fine: &[f64], radius: f64, n: usize, weights: &[Vec<f64>]) -> Vec<f64> {
    let m = weights.len();
    let blocks: Vec<Vec<f64>> = fine
        .par_chunks(KERNEL_BLOCK)
        .map(|points| {
            let mut phi = vec![0.0; points.len() * n];
            for (row, &s) in phi.chunks_exact_mut(n.max(1)).zip(points) {
                polar_phi_into(s, radius, row);
            }
            let mut sums = vec![0.0; m * points.len()];
            for (w, out) in weights.iter().zip(sums.chunks_exact_mut(points.len())) {
                super::dual::row_dots(&phi, n, w, out);
            }
            sums
        })
        .collect();
    sensor_major(&blocks, m, fine.len())
}

/// The quadrature grid of an edge's kernels: `per_cell` points per node cell (at least
/// [`SUBPOINTS`], and a tenth of the shallowest sensor depth or finer), `cells` cells, the
/// fine positions and their spacing.
struct FineGrid {
    per_cell: usize,
    cells: usize,
    fine: Vec<f64>,
    ds: f64,
}

impl FineGrid {
    fn new(shape: &Shape, sensors: &[Point], e: &EdgeNodes) -> Self {
        let min_depth = sensors
            .iter()
            .map(|&p| shape.depth_from(e.edge, p))
            .fold(f64::INFINITY, f64::min);
        let per_cell = SUBPOINTS.max((10.0 * e.spacing_m / min_depth).ceil() as usize);
        let cells = e.positions_m.len() - 1;
        let fine = (0..=cells * per_cell)
            .map(|k| k as f64 * e.spacing_m / per_cell as f64)
            .collect();
        FineGrid {
            per_cell,
            cells,
            fine,
            ds: e.spacing_m / per_cell as f64,
        }
    }
}

/// `∫ |R|` with `R = ∫ (K − Q K)` for a kernel sampled at `per_cell` points per node cell
/// (`cells` cells of width `per_cell · ds`): node means `c_j = ⟨K, θ_j⟩ / ⟨1, θ_j⟩` by the
/// trapezoid rule, then the trapezoid rule again.
fn integral_of_r(kernel: &[f64], per_cell: usize, cells: usize, ds: f64) -> f64 {
    let n_fine = kernel.len();
    let mut c = vec![0.0; cells + 1];
    let mut wsum = vec![0.0; cells + 1];
    for (k, &kv) in kernel.iter().enumerate() {
        let tw = if k == 0 || k == n_fine - 1 { 0.5 } else { 1.0 };
        let cell = (k / per_cell).min(cells - 1);
        let t = (k - cell * per_cell) as f64 / per_cell as f64;
        for (j, theta) in [(cell, 1.0 - t), (cell + 1, t)] {
            c[j] += tw * theta * kv;
            wsum[j] += tw * theta;
        }
    }
    for (cj, wj) in c.iter_mut().zip(&wsum) {
        *cj /= wj;
    }
    let diff = |k: usize| {
        let cell = (k / per_cell).min(cells - 1);
        let t = (k - cell * per_cell) as f64 / per_cell as f64;
        kernel[k] - ((1.0 - t) * c[cell] + t * c[cell + 1])
    };
    let mut r = 0.0;
    let mut prev_d = diff(0);
    let mut integral = 0.0;
    for k in 1..n_fine {
        let dk = diff(k);
        let r_new = r + 0.5 * (prev_d + dk) * ds;
        integral += 0.5 * (r.abs() + r_new.abs()) * ds;
        r = r_new;
        prev_d = dk;
    }
    integral
}

/// The nodes of every hidden edge: `k_nodes` evenly spaced along it, ends included, numbered
/// edge after edge.
fn edge_nodes(shape: &Shape, hidden: &[Edge], k_nodes: usize) -> Vec<EdgeNodes> {
    let mut edges = Vec::new();
    let mut first = 0;
    for &edge in hidden {
        let Some(length) = shape.edge_length(edge) else {
            continue;
        };
        let h = length / (k_nodes - 1) as f64;
        let positions: Vec<f64> = (0..k_nodes).map(|j| j as f64 * h).collect();
        edges.push(EdgeNodes {
            edge,
            length_m: length,
            positions_m: positions,
            first,
            spacing_m: h,
        });
        first += k_nodes;
    }
    edges
}

/// Every sensor must lie strictly inside the plate, off each hidden edge.
fn sensors_off_hidden_edges(shape: &Shape, sensors: &[Point], edges: &[EdgeNodes]) -> Result<()> {
    for (i, p) in sensors.iter().enumerate() {
        for e in edges {
            if shape.depth_from(e.edge, *p) <= 0.0 {
                return Err(Error::invalid_field(
                    "sensors",
                    format!(
                        "sensor {} lies on the hidden {} edge: strict bounds need every \
                         sensor inside the plate",
                        i + 1,
                        e.edge
                    ),
                ));
            }
        }
    }
    Ok(())
}

/// The tail factor `ε_{ie}` of every sensor and hidden edge (the share of a unit edge change
/// beyond the series that can reach the sensor), and the largest of them.
fn tail_factors(
    shape: &Shape,
    sensors: &[Point],
    edges: &[EdgeNodes],
    known_terms: usize,
) -> (Vec<Vec<f64>>, f64) {
    let n_terms = known_terms as f64;
    let mut tail = vec![vec![0.0; edges.len()]; sensors.len()];
    let mut max_tail_factor = 0.0_f64;
    for (i, p) in sensors.iter().enumerate() {
        for (ei, e) in edges.iter().enumerate() {
            let d = shape.depth_from(e.edge, *p);
            // the first omitted mode: beyond the N terms, or where the series itself
            // stops because e^{−k d} fell below NEGLIGIBLE_DECAY
            let k = (n_terms * std::f64::consts::PI / e.length_m)
                .min((1.0 / NEGLIGIBLE_DECAY).ln() / d);
            let eps = 4.0 * (-k * d).exp()
                / (k * e.length_m * -(-std::f64::consts::PI * d / e.length_m).exp_m1());
            tail[i][ei] = eps;
            max_tail_factor = max_tail_factor.max(eps);
        }
    }
    (tail, max_tail_factor)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::forward::basis::{Decay, EdgeBasis, End};

    #[test]
    fn fine_kernels_are_the_per_sensor_sums_bit_for_bit() {
        // invented weights over many decades, sensors using different numbers of modes, fine
        // grids with whole blocks of KERNEL_BLOCK points, a remainder and fewer than four:
        // every value must be Σ_{t < used} (φ_t(s) / ‖φ_t‖²) w_t added in the order of t from
        // −0.0, as the plain loop forms it
        let mut next = crate::testing::uniform(0x9e37_79b9_7f4a_7c15);
        for (start, end) in [
            (End::Held, End::Held),
            (End::Insulated, End::Held),
            (End::Convective { beta: 3.0 }, End::Held),
        ] {
            let series = Series::new(EdgeBasis::new(start, end, 0.4), Decay::Unbounded, 40);
            for n_fine in [3, 64, 150] {
                let fine: Vec<f64> = (0..n_fine)
                    .map(|k| 0.4 * k as f64 / (n_fine - 1) as f64)
                    .collect();
                let modes: Vec<(Vec<f64>, usize)> = [40, 7, 23, 1]
                    .iter()
                    .map(|&used| {
                        let w = (0..40).map(|_| next() * 10f64.powf(6.0 * next())).collect();
                        (w, used)
                    })
                    .collect();
                let got = fine_kernels(&series, &fine, &modes);
                let mut row = vec![0.0; 40];
                for (k, &s) in fine.iter().enumerate() {
                    series.phi_into(s, &mut row);
                    for (i, (w, used)) in modes.iter().enumerate() {
                        let want: f64 = (0..*used).map(|t| row[t] / series.norm_sq(t) * w[t]).sum();
                        assert_eq!(
                            got[i * n_fine + k].to_bits(),
                            want.to_bits(),
                            "{start:?} n_fine={n_fine} sensor {i} point {k}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn polar_kernels_are_the_per_sensor_sums_bit_for_bit() {
        // invented weights over many decades; fine grids with whole blocks of KERNEL_BLOCK
        // points, a remainder, fewer than eight, and function counts odd and even: every
        // value must be Σ_j φ_j(s) w_j added in the order of j from −0.0, as the plain loop
        // over the whole table forms it
        let mut next = crate::testing::uniform(0x2545_f491_4f6c_dd1d);
        let radius = 0.05;
        for n in [1, 2, 9, 64] {
            for n_fine in [3, 64, 150] {
                let fine: Vec<f64> = (0..n_fine)
                    .map(|k| std::f64::consts::TAU * radius * k as f64 / (n_fine - 1) as f64)
                    .collect();
                let weights: Vec<Vec<f64>> = (0..3)
                    .map(|_| (0..n).map(|_| next() * 10f64.powf(6.0 * next())).collect())
                    .collect();
                let got = polar_kernels(&fine, radius, n, &weights);
                let mut row = vec![0.0; n];
                for (k, &s) in fine.iter().enumerate() {
                    polar_phi_into(s, radius, &mut row);
                    for (i, w) in weights.iter().enumerate() {
                        let want: f64 = row.iter().zip(w).map(|(p, w)| p * w).sum();
                        assert_eq!(
                            got[i * n_fine + k].to_bits(),
                            want.to_bits(),
                            "n={n} n_fine={n_fine} sensor {i} point {k}"
                        );
                    }
                }
            }
        }
    }
}
