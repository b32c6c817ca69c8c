//! Steps 3 and 4 of an estimate: the linear maps of what is reported, and the bootstrap of
//! their estimation error.
//!
//! Every output (profiles along the unknown edges, the field grid, the heat flows) is affine
//! in the coefficients, `Q c + q0`; the bootstrap ([`crate::uncertainty`]) returns the error
//! `Q (ĉ_b − ĉ)` of each replicate for each map.

use super::faults::Fitted;
use super::problem::Problem;
use super::{EstimateOptions, stack};
use crate::error::Result;
use crate::forward::{ForwardModel, LinearMap};
use crate::geometry::{Edge, Point, Shape};
use crate::uncertainty::{BootstrapInput, BootstrapMode, BootstrapOutput, bootstrap};
use nalgebra::DMatrix;

/// The affine maps from the coefficients to the reported quantities.
pub(super) struct OutputMaps {
    /// Profiles of every unknown edge, stacked in the order of `Problem::edge_positions`.
    pub profile: DMatrix<f64>,
    pub profile_offset: Vec<f64>,
    /// The field grid's coordinates, metres.
    pub xs: Vec<f64>,
    pub ys: Vec<f64>,
    /// The field at the grid points, row by row (y outer, x inner).
    pub field: LinearMap,
    /// Heat flow through every unknown edge (W/m) when the conductivity is given.
    pub heat: Option<(DMatrix<f64>, Vec<f64>)>,
}

impl OutputMaps {
    /// The maps of `problem` with a field grid of `grid` points.
    pub fn new(problem: &Problem<'_>, grid: (usize, usize)) -> Result<Self> {
        let model = &problem.model;
        let shape = *problem.case.plate.shape();
        let profile = stack(problem.edge_maps.iter().map(|m| &m.matrix));
        let profile_offset: Vec<f64> = problem
            .edge_maps
            .iter()
            .flat_map(|m| m.offset.iter().copied())
            .collect();
        let (xs, ys) = crate::case::grid_coordinates(&shape, grid.0, grid.1);
        let grid_points: Vec<Point> = ys
            .iter()
            .flat_map(|&y| {
                xs.iter()
                    .map(move |&x| crate::case::grid_point(&shape, x, y))
            })
            .collect();
        let field = model.sensor_map(&grid_points);
        let heat = heat_flow_rows(model, &flow_edges(&problem.case.plate))?;
        Ok(OutputMaps {
            profile,
            profile_offset,
            xs,
            ys,
            field,
            heat,
        })
    }
}

/// The bootstrap of an estimate and the settings it ran with.
pub(super) struct Resampled {
    /// The replicates' estimation errors.
    pub output: BootstrapOutput,
    pub replicates: usize,
    pub seed: u64,
    pub mode: BootstrapMode,
}

/// Run the bootstrap of the fit's estimation error (in the coefficients), with the strength
/// re-chosen in each replicate and, when positions are uncertain, the sensors moved.
pub(super) fn resample(
    problem: &Problem<'_>,
    fitted: &Fitted,
    options: &EstimateOptions,
    progress: Option<&(dyn Fn(usize) + Sync)>,
) -> Result<Resampled> {
    let case = problem.case;
    let model = &problem.model;
    let shape = *case.plate.shape();
    let c_slice = fitted.fit.solution.coefficients.as_slice();
    let replicates = options
        .replicates
        .unwrap_or(case.uncertainty.replicates)
        .max(1);
    let seed = options.seed.unwrap_or(case.uncertainty.seed);
    let mode = options.mode.unwrap_or(if problem.stated {
        BootstrapMode::Parametric
    } else {
        BootstrapMode::Residual
    });
    let used_points: Vec<Point> = fitted.used.iter().map(|&i| problem.points[i]).collect();
    let jitter_sd: Vec<f64> = fitted
        .used
        .iter()
        .map(|&i| {
            case.sensors[i]
                .position_sigma_m
                .or(case.uncertainty.position_sigma_m)
                .unwrap_or(0.0)
        })
        .collect();
    let base_temps: Vec<f64> = used_points
        .iter()
        .map(|&p| model.temperature(c_slice, p))
        .collect::<Result<_>>()?;
    let shift = |moves: &[(f64, f64)]| -> Vec<f64> {
        used_points
            .iter()
            .zip(moves)
            .zip(&base_temps)
            .map(|((p, (dx, dy)), t0)| {
                let q = clamp_inside(&shape, Point::new(p.x + dx, p.y + dy));
                model.temperature(c_slice, q).map_or(0.0, |t| t - t0)
            })
            .collect()
    };
    let has_jitter = jitter_sd.iter().any(|&s| s > 0.0);
    let output = bootstrap(&BootstrapInput {
        fit: &fitted.fit,
        strength: problem.strength,
        penalty: &problem.penalty,
        mode,
        a: &fitted.input.a,
        jitter: has_jitter.then_some((
            jitter_sd.as_slice(),
            &shift as &(dyn Fn(&[(f64, f64)]) -> Vec<f64> + Sync),
        )),
        center_on_estimate: false,
        replicates,
        seed,
        progress,
    })?;
    Ok(Resampled {
        output,
        replicates,
        seed,
        mode,
    })
}

/// The edges whose heat flow an estimate reports: the unknown edges, then the convective
/// ones.
pub(super) fn flow_edges(plate: &crate::geometry::Plate) -> Vec<Edge> {
    let mut edges = plate.unknown_edges();
    edges.extend(
        Edge::ALL
            .into_iter()
            .filter(|&e| plate.convection(e).is_some()),
    );
    edges
}

/// Rows `h_e` and offsets with heat flow through edge `e` = `h_e · c + h0_e`
/// (W/m); `None` without conductivity. The heat flow is affine in the unknowns, so its rows
/// are read off by evaluating it at zero and at each unit vector.
fn heat_flow_rows(
    model: &ForwardModel,
    unknown: &[Edge],
) -> Result<Option<(DMatrix<f64>, Vec<f64>)>> {
    if model.plate().conductivity().is_none() {
        return Ok(None);
    }
    let p = model.parameter_count();
    let mut rows = DMatrix::zeros(unknown.len(), p);
    let mut offsets = Vec::new();
    let mut c = vec![0.0; p];
    for (k, &e) in unknown.iter().enumerate() {
        let h0 = model.heat_flow(e, &c)?.unwrap_or(0.0);
        offsets.push(h0);
        for j in 0..p {
            c[j] = 1.0;
            rows[(k, j)] = model.heat_flow(e, &c)?.unwrap_or(0.0) - h0;
            c[j] = 0.0;
        }
    }
    Ok(Some((rows, offsets)))
}

/// `p` moved just inside the plate (a jittered sensor must stay where the model is defined).
fn clamp_inside(shape: &Shape, p: Point) -> Point {
    let w = shape.width();
    let eps = 1e-6 * w;
    let y_max = shape.height().map_or(f64::INFINITY, |h| h - eps);
    Point::new(p.x.clamp(eps, w - eps), p.y.clamp(eps, y_max))
}
