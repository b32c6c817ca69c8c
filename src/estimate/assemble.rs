//! Step 5 of an estimate: the result, assembled from the fit, the output maps and the
//! bootstrap: the edge profiles with their bands, the hottest point, the field, the
//! exceedance probability, every sensor's residuals and decision, the summaries of the fit
//! and of the strength, and the cautions.

use super::faults::Fitted;
use super::outputs::{OutputMaps, Resampled};
use super::problem::Problem;
use super::{
    DoubtfulSensor, EdgeResult, EstimateOptions, EstimateResult, Exceedance, FieldResult,
    FitSummary, Hottest, Interval, SAFETY_CAUTION, SensorResult, StrengthSummary, linear_sd,
    parabola_vertex, profile_points, refined_max, resolution,
};
use crate::case::{Case, Smoothing};
use crate::error::Result;
use crate::geometry::Edge;
use crate::noise::SigmaSource;
use crate::uncertainty::{SimultaneousBand, band_blocks, pointwise_band, quantile};
use nalgebra::DMatrix;
use statrs::distribution::{ChiSquared, ContinuousCDF, Normal};

/// Put the result together; the strict bounds, if any, are the caller's to add.
pub(super) fn assemble(
    problem: &Problem<'_>,
    fitted: Fitted,
    maps: OutputMaps,
    resampled: Resampled,
    options: &EstimateOptions,
) -> Result<EstimateResult> {
    let case = problem.case;
    let boot = &resampled.output;
    let confidence = case.uncertainty.confidence;
    // the field's bands need nothing of the edges': formed side by side with them (the
    // edges' work, mostly sequential, on this thread; the field's parallel blocks wherever
    // a thread is free)
    let (edge_side, field) = rayon::join(
        || -> Result<_> {
            let prof_est = profile_estimate(&maps, &fitted);
            // the profiles' bands and each replicate's hottest point and largest value (the
            // hottest point's shares and the exceedance read them), from the profiles'
            // errors in every replicate a block of points at a time
            let profile = ProfileBands::new(
                &problem.edge_positions,
                &prof_est,
                boot,
                &maps.profile,
                confidence,
            );
            let (edges, hottest) =
                edge_results(problem, &fitted, &maps, &resampled, &prof_est, &profile)?;
            Ok((edges, hottest, profile.peaks))
        },
        || field_result(&fitted, &maps, boot, confidence),
    );
    let (edges, hottest, peaks) = edge_side?;
    let convective_heat_flows = convective_flows(problem, &fitted, &maps, &resampled);
    let exceedance = options
        .limit
        .map(|limit| exceedance(&peaks.maxima, &fitted, limit, options));
    let sensors = sensor_results(problem, &fitted)?;
    let fit_summary = fit_summary(problem, &fitted);
    let strength_summary = strength_summary(problem, &fitted);
    let flagged: Vec<usize> = fitted.flags.iter().map(|f| f.0).collect();
    let mut cautions = cautions(
        case,
        &fit_summary,
        &strength_summary,
        &edges,
        &hottest,
        &flagged,
        &fitted.doubts,
        boot.fallbacks,
    );
    if let Some(hint) = temperature_unit_hint(case, problem.readings) {
        cautions.insert(1, hint);
    }
    Ok(EstimateResult {
        units: case.units,
        plate: case.plate.clone(),
        edges,
        field,
        sensors,
        hottest,
        exceedance,
        doubtful_sensors: fitted.doubts,
        strength: strength_summary,
        fit: fit_summary,
        confidence,
        replicates: resampled.replicates,
        bootstrap_mode: resampled.mode,
        seed: resampled.seed,
        bounds: None,
        cautions,
        conversion: case.conversion(),
        read_as: case.read_as.clone(),
        convection: Vec::new(),
        convective_heat_flows,
    })
}

/// Heat flow through each convective edge with its interval, from the rows that follow the
/// unknown edges' in the heat-flow map ([`super::outputs::flow_edges`]).
fn convective_flows(
    problem: &Problem<'_>,
    fitted: &Fitted,
    maps: &OutputMaps,
    resampled: &Resampled,
) -> Vec<(crate::geometry::Edge, Interval)> {
    let Some((m, off)) = maps.heat.as_ref() else {
        return Vec::new();
    };
    let confidence = problem.case.uncertainty.confidence;
    let c_hat = &fitted.fit.solution.coefficients;
    let edges = super::outputs::flow_edges(&problem.case.plate);
    let first = problem.case.plate.unknown_edges().len();
    let err = resampled.output.errors_of(m);
    (first..edges.len())
        .map(|k| {
            let est = (m.row(k) * c_hat)[0] + off[k];
            let mut draws: Vec<f64> = (0..resampled.replicates)
                .map(|b| est - err[(b, k)])
                .collect();
            let lower = quantile(&mut draws, (1.0 - confidence) / 2.0);
            let upper = quantile(&mut draws, (1.0 + confidence) / 2.0);
            (
                edges[k],
                Interval {
                    value: est,
                    lower,
                    upper,
                },
            )
        })
        .collect()
}

/// The profiles of the unknown edges with their bands, resolution lengths and heat flows,
/// and the hottest point (widened by the hotter explanation of any doubtful sensor).
fn edge_results(
    problem: &Problem<'_>,
    fitted: &Fitted,
    maps: &OutputMaps,
    resampled: &Resampled,
    prof_est: &[f64],
    profile: &ProfileBands,
) -> Result<(Vec<EdgeResult>, Hottest)> {
    let case = problem.case;
    let boot = &resampled.output;
    let replicates = resampled.replicates;
    let c_hat = &fitted.fit.solution.coefficients;
    let confidence = case.uncertainty.confidence;
    let z = Normal::standard().inverse_cdf(0.5 + confidence / 2.0);
    let n_prof = profile_points(case.fit.terms);
    let ((p_lo, p_hi), (s_lo, s_hi)) = (&profile.pointwise, &profile.simultaneous);
    let peaks = &profile.peaks;
    let heat_err = maps.heat.as_ref().map(|(m, _)| boot.errors_of(m));
    let prof_sd = linear_sd(&maps.profile, &fitted.fit.solution.covariance);
    let mut hottest = hottest_point(
        case.plate.shape(),
        &problem.edge_positions,
        prof_est,
        p_lo,
        p_hi,
        &peaks.located,
    );
    // A sensor kept under two explanations: the hotter one bounds the hottest temperature.
    for d in &fitted.doubts {
        hottest.temperature_interval[1] = hottest.temperature_interval[1].max(d.peak_temperature);
    }
    let resolution = resolution::resolution_lengths(
        &problem.model,
        &fitted.fit.solution.resolution,
        &problem.edge_positions,
        &problem.edge_maps,
        prof_est,
    );
    let mut edges = Vec::new();
    for (k, (edge, pos)) in problem.edge_positions.iter().enumerate() {
        let r = k * n_prof..(k + 1) * n_prof;
        let heat_flow = maps
            .heat
            .as_ref()
            .zip(heat_err.as_ref())
            .map(|((m, off), err)| {
                let est = (m.row(k) * c_hat)[0] + off[k];
                let mut draws: Vec<f64> = (0..replicates).map(|b| est - err[(b, k)]).collect();
                let lo = quantile(&mut draws, (1.0 - confidence) / 2.0);
                let hi = quantile(&mut draws, (1.0 + confidence) / 2.0);
                Interval {
                    value: est,
                    lower: lo,
                    upper: hi,
                }
            });
        edges.push(EdgeResult {
            edge: *edge,
            positions: pos.clone(),
            estimate: prof_est[r.clone()].to_vec(),
            lower: p_lo[r.clone()].to_vec(),
            upper: p_hi[r.clone()].to_vec(),
            simultaneous_lower: s_lo[r.clone()].to_vec(),
            simultaneous_upper: s_hi[r.clone()].to_vec(),
            linear_lower: r.clone().map(|j| prof_est[j] - z * prof_sd[j]).collect(),
            linear_upper: r.clone().map(|j| prof_est[j] + z * prof_sd[j]).collect(),
            resolution_length: resolution[k].worst,
            resolution_worst_position: resolution[k].worst_position,
            resolution_at_hottest: resolution[k].at_hottest,
            heat_flow,
        });
    }
    Ok((edges, hottest))
}

/// The stacked profile estimate `Q ĉ + q0` of every unknown edge.
fn profile_estimate(maps: &OutputMaps, fitted: &Fitted) -> Vec<f64> {
    (&maps.profile * &fitted.fit.solution.coefficients)
        .iter()
        .zip(&maps.profile_offset)
        .map(|(a, b)| a + b)
        .collect()
}

/// The field on the grid with its pointwise band.
fn field_result(
    fitted: &Fitted,
    maps: &OutputMaps,
    boot: &crate::uncertainty::BootstrapOutput,
    confidence: f64,
) -> FieldResult {
    let field_est: Vec<f64> = (&maps.field.matrix * &fitted.fit.solution.coefficients)
        .iter()
        .zip(maps.field.offset.iter())
        .map(|(a, b)| a + b)
        .collect();
    // The field map's band with the products in single precision (on the samples within
    // 5e-6 K of double precision's, against a Monte Carlo error near 0.05 K; the map is printed to
    // 1e-4 K and its grid may have millions of points). The profile's errors stay in double
    // precision: they also give the simultaneous band, the hottest point and the exceedance.
    let (f_lo, f_hi) = boot.pointwise_band_single(&maps.field.matrix, &field_est, confidence);
    FieldResult {
        xs: maps.xs.clone(),
        ys: maps.ys.clone(),
        estimate: field_est,
        lower: f_lo,
        upper: f_hi,
    }
}

/// The probability that the hottest point of the hidden edges exceeds `limit`: the share of
/// bootstrap replicates whose profile maximum does. The hotter explanation of a doubtful
/// sensor crossing the limit raises the alarm too.
fn exceedance(
    maxima: &[f64],
    fitted: &Fitted,
    limit: f64,
    options: &EstimateOptions,
) -> Exceedance {
    let over = maxima.iter().filter(|&&m| m > limit).count();
    let probability = over as f64 / maxima.len() as f64;
    Exceedance {
        limit,
        probability,
        alarm_probability: options.alarm_probability,
        alarm: probability > options.alarm_probability
            || fitted.doubts.iter().any(|d| d.peak_temperature > limit),
    }
}

/// Every sensor of the case: reading, fitted value, residuals, leverage, uncertainty and the
/// decision taken about it.
fn sensor_results(problem: &Problem<'_>, fitted: &Fitted) -> Result<Vec<SensorResult>> {
    let fit = &fitted.fit;
    let c_slice = fit.solution.coefficients.as_slice();
    let leverage_of = |i: usize| {
        fitted
            .used
            .iter()
            .position(|&u| u == i)
            .map(|k| fit.solution.leverages[k])
    };
    problem
        .case
        .sensors
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let fitted_t = problem.model.temperature(c_slice, s.position)?;
            let reading = problem.readings.get(i).copied().flatten();
            Ok(SensorResult {
                sensor: s.id.clone(),
                position: s.position,
                reading,
                fitted: fitted_t,
                residual: reading.map(|r| r - fitted_t),
                loo_residual: fitted.loo_of[i],
                leverage: leverage_of(i),
                sigma: reading.map(|_| problem.sigma_of[i] * fit.sigma_scale.unwrap_or(1.0)),
                flag: fitted.flags.iter().find(|f| f.0 == i).map(|f| f.1.clone()),
                doubtful: fitted.doubts.iter().any(|d| d.index == i),
                offset: s.offset_k,
            })
        })
        .collect()
}

/// The fit's noise level, chi-square and its p-value (when the noise was stated).
fn fit_summary(problem: &Problem<'_>, fitted: &Fitted) -> FitSummary {
    let fit = &fitted.fit;
    let dof = fit.solution.residual_dof();
    let chi2 = fit.solution.chi_square;
    let p_value = (dof > 0.05 && problem.stated)
        .then(|| ChiSquared::new(dof).ok().map(|d| 1.0 - d.cdf(chi2)))
        .flatten();
    let sig_used: Vec<f64> = fit.sigma.iter().copied().collect();
    let sigma_rms = (sig_used.iter().map(|s| s * s).sum::<f64>() / sig_used.len() as f64).sqrt();
    FitSummary {
        sigma: sigma_rms,
        sigma_source: problem.sigma_source,
        chi_square: chi2,
        dof,
        p_value,
        readings_used: fitted.used.len(),
    }
}

/// The strength chosen, by which rule, and the smoothing order.
fn strength_summary(problem: &Problem<'_>, fitted: &Fitted) -> StrengthSummary {
    let fit = &fitted.fit;
    StrengthSummary {
        method: problem.strength,
        value: fit.selection.lambda,
        effective_parameters: fit.solution.effective_parameters,
        at_range_end: fit.selection.at_grid_end,
        smoothing: Smoothing::of_penalty_order(problem.order),
        smoothing_auto: problem.case.fit.smoothing == Smoothing::Auto,
    }
}

/// Replicates per block of `ReplicatePeaks::new` (the tests' reference).
#[cfg(test)]
const REPLICATE_BLOCK: usize = 64;

/// The stacked profiles' pointwise and simultaneous bands and every replicate's peak, from
/// the profile errors `Q ε_b` formed a block of points at a time
/// ([`crate::uncertainty::band_blocks`]) and read while the block is in cache: the whole
/// `B × n` matrix (8 MB at 2000 replicates and 513 points) was memory the kernel handed out
/// page by page and read three times from main memory. The same numbers to the bit as the
/// bands and `ReplicatePeaks::new` of the whole matrix (each block's columns are the
/// whole product's; each point's band reads its own column; each replicate's peak is taken
/// point after point in order).
struct ProfileBands {
    pointwise: (Vec<f64>, Vec<f64>),
    simultaneous: (Vec<f64>, Vec<f64>),
    peaks: ReplicatePeaks,
}

impl ProfileBands {
    fn new(
        edge_positions: &[(Edge, Vec<f64>)],
        est: &[f64],
        boot: &crate::uncertainty::BootstrapOutput,
        q: &DMatrix<f64>,
        confidence: f64,
    ) -> Self {
        let b = boot.coefficient_errors.nrows();
        let (mut lower, mut upper) = (Vec::with_capacity(est.len()), Vec::with_capacity(est.len()));
        let mut simultaneous = SimultaneousBand::new(b);
        let mut peaks = PeakTracker::new(edge_positions, b);
        let mut errors = DMatrix::<f64>::zeros(0, 0);
        for (start, len) in band_blocks(q.nrows()) {
            boot.errors_of_rows_into(q, (start, len), &mut errors);
            let block_est = &est[start..start + len];
            let (lo, hi) = pointwise_band(block_est, &errors, confidence);
            lower.extend(lo);
            upper.extend(hi);
            simultaneous.add_block(block_est, &errors);
            peaks.add_block(start, block_est, &errors);
        }
        ProfileBands {
            pointwise: (lower, upper),
            simultaneous: simultaneous.finish(confidence),
            peaks: peaks.finish(),
        }
    }
}

crate::simd::avx2_dispatch! {
    /// One point `t > 0` of an edge for every replicate `b` ([`PeakTracker::add_block`]):
    /// with `v = estimate − errors[b]`, a value above the best so far becomes the best (its
    /// index `t`, the value before it), else the value just after the best is kept; then the
    /// last value and the running maximum. The choices as selections instead of branches, so
    /// that the replicates go four to an instruction in the AVX2 build: the same comparisons
    /// (`>` is false for NaN) and the same values as the branches.
    fn peak_step(
        point: (f64, &[f64], usize),
        best: (&mut [usize], &mut [f64]),
        beside: (&mut [f64], &mut [f64]),
        running: (&mut [f64], &mut [f64]),
    ) = peak_step_body;
}

/// The body of [`peak_step`].
#[inline(always)]
fn peak_step_body(
    (estimate, errors, t): (f64, &[f64], usize),
    (k, top): (&mut [usize], &mut [f64]),
    (before, after): (&mut [f64], &mut [f64]),
    (last, maxima): (&mut [f64], &mut [f64]),
) {
    let n = errors.len();
    let (k, top, before, after) = (
        &mut k[..n],
        &mut top[..n],
        &mut before[..n],
        &mut after[..n],
    );
    let (last, maxima) = (&mut last[..n], &mut maxima[..n]);
    for b in 0..n {
        let v = estimate - errors[b];
        let higher = v > top[b];
        let next = !higher && t == k[b] + 1;
        after[b] = if next { v } else { after[b] };
        before[b] = if higher { last[b] } else { before[b] };
        k[b] = if higher { t } else { k[b] };
        top[b] = if higher { v } else { top[b] };
        last[b] = v;
        maxima[b] = maxima[b].max(v);
    }
}

/// [`ReplicatePeaks`] taken point after point (blocks of points in order): per replicate,
/// the running maximum of its profile, and on the edge under way the first grid point of
/// its largest value with that value's neighbours, refined as [`refined_max`] refines it when
/// the edge's last point is in; the first edge wins a tie, as in [`locate_hottest`].
struct PeakTracker<'a> {
    edge_positions: &'a [(Edge, Vec<f64>)],
    /// Points per edge.
    n: usize,
    /// Per replicate: the edge's best point so far (its index on the edge), its value, the
    /// values before and after it, and the value at the last point seen.
    k: Vec<usize>,
    top: Vec<f64>,
    before: Vec<f64>,
    after: Vec<f64>,
    last: Vec<f64>,
    /// Per replicate: the best edge so far, the position on it and the refined value.
    best: Vec<(usize, f64, f64)>,
    maxima: Vec<f64>,
}

impl<'a> PeakTracker<'a> {
    fn new(edge_positions: &'a [(Edge, Vec<f64>)], replicates: usize) -> Self {
        let nan = vec![f64::NAN; replicates];
        PeakTracker {
            edge_positions,
            n: edge_positions.first().map_or(0, |e| e.1.len()),
            k: vec![0; replicates],
            top: nan.clone(),
            before: nan.clone(),
            after: nan.clone(),
            last: nan,
            best: vec![(0, f64::NAN, f64::NEG_INFINITY); replicates],
            maxima: vec![f64::NEG_INFINITY; replicates],
        }
    }

    /// Points `start..start + est.len()` of the stacked profiles: their estimates and their
    /// errors (`B × points`); replicate `b`'s profile is `est − errors[b, :]`.
    fn add_block(&mut self, start: usize, est: &[f64], errors: &DMatrix<f64>) {
        let b_count = errors.nrows();
        let n = self.n;
        for (c, column) in errors.as_slice().chunks_exact(b_count.max(1)).enumerate() {
            let j = start + c;
            let (edge, t) = (j / n, j % n);
            if t == 0 {
                for (b, err) in column.iter().enumerate() {
                    let v = est[c] - err;
                    (self.k[b], self.top[b]) = (0, v);
                    self.last[b] = v;
                    self.maxima[b] = self.maxima[b].max(v);
                }
            } else {
                peak_step(
                    (est[c], column, t),
                    (&mut self.k, &mut self.top),
                    (&mut self.before, &mut self.after),
                    (&mut self.last, &mut self.maxima),
                );
            }
            if t + 1 == n {
                self.finish_edge(edge);
            }
        }
    }

    /// The edge's refined maximum per replicate ([`refined_max`]'s parabola through the best
    /// point and its neighbours, away from the edge's ends), kept if above the best so far.
    fn finish_edge(&mut self, edge: usize) {
        let n = self.n;
        let pos = &self.edge_positions[edge].1;
        for b in 0..self.k.len() {
            let (k, y1) = (self.k[b], self.top[b]);
            let inside = k > 0 && k + 1 < n;
            let (idx, v) = inside
                .then(|| parabola_vertex(k, (self.before[b], y1, self.after[b])))
                .flatten()
                .unwrap_or((k as f64, y1));
            if v > self.best[b].2 {
                let step = pos[1] - pos[0];
                self.best[b] = (edge, pos[0] + idx * step, v);
            }
        }
    }

    fn finish(self) -> ReplicatePeaks {
        ReplicatePeaks {
            located: self.best.iter().map(|&(k, p, _)| (k, p)).collect(),
            maxima: self.maxima,
        }
    }
}

/// Every bootstrap replicate's hottest point and largest profile value.
struct ReplicatePeaks {
    /// Per replicate: the unknown edge (index) and the position of its profile's hottest
    /// point ([`locate_hottest`]).
    located: Vec<(usize, f64)>,
    /// Per replicate: the largest value of its profile, kelvin.
    maxima: Vec<f64>,
}

impl ReplicatePeaks {
    /// The reference [`PeakTracker`] is held to in the tests: from the profiles' errors
    /// `errors` (B × n, column `j` holding every replicate's error at point `j`): replicate
    /// `b`'s profile is `est − errors[b, :]`. The errors are read
    /// block by block of replicates, each block's profiles gathered contiguous, rather than
    /// transposed whole.
    #[cfg(test)]
    fn new(edge_positions: &[(Edge, Vec<f64>)], est: &[f64], errors: &DMatrix<f64>) -> Self {
        let (b_count, n) = errors.shape();
        let mut located = Vec::with_capacity(b_count);
        let mut maxima = Vec::with_capacity(b_count);
        let mut block = vec![0.0; REPLICATE_BLOCK * n];
        for b0 in (0..b_count).step_by(REPLICATE_BLOCK) {
            let len = REPLICATE_BLOCK.min(b_count - b0);
            for (j, &e) in est.iter().enumerate() {
                // column-major storage: point j's errors are contiguous
                let column = &errors.as_slice()[j * b_count + b0..j * b_count + b0 + len];
                for (i, err) in column.iter().enumerate() {
                    block[i * n + j] = e - err;
                }
            }
            for draw in block.chunks_exact(n.max(1)).take(len) {
                let (k, p, _) = locate_hottest(edge_positions, |j| draw[j]);
                located.push((k, p));
                maxima.push(draw.iter().copied().fold(f64::NEG_INFINITY, f64::max));
            }
        }
        ReplicatePeaks { located, maxima }
    }
}

/// The hottest point of the stacked profiles `val(j)` (every unknown edge's points in turn,
/// as [`profile_positions`] orders them): `(edge index, position, temperature)`, refined
/// between grid points by [`refined_max`]; the first edge wins a tie.
fn locate_hottest(
    edge_positions: &[(Edge, Vec<f64>)],
    val: impl Fn(usize) -> f64,
) -> (usize, f64, f64) {
    let n = edge_positions.first().map_or(0, |e| e.1.len());
    let mut best = (0, f64::NAN, f64::NEG_INFINITY);
    for (k, (_, pos)) in edge_positions.iter().enumerate() {
        let (idx, v) = refined_max(|j| val(k * n + j), 0, n);
        if v > best.2 {
            let step = pos[1] - pos[0];
            best = (k, pos[0] + idx * step, v);
        }
    }
    best
}

/// The hottest point of the estimate and its intervals.
///
/// The interval for the hottest temperature is `[max_s L(s), max_s U(s)]` from the pointwise
/// band `[L, U]` of every unknown edge: if the band holds at the true hottest point `s*`
/// then `T* = u(s*) ≤ U(s*) ≤ max U`, and if it holds where `L` peaks then
/// `T* ≥ u(argmax L) ≥ max L`, so the interval misses only when one of two one-sided bounds
/// fails. It is wider than the spread of the replicates' maxima, which sits too high for a
/// smooth truth (the maximum of a rough draw exceeds the maximum of the truth) and too low at a
/// sharp peak (smoothing bias); see `docs/calibration.md`. The position interval is the hull of the
/// set `{s : U(s) ≥ max L}` on the hottest edge, the set that can hold the maximum
/// (`docs/method.md` §3). `main_peak_share` is the share of replicates whose own hottest point
/// falls inside it.
fn hottest_point(
    shape: &crate::geometry::Shape,
    edge_positions: &[(Edge, Vec<f64>)],
    est: &[f64],
    lower: &[f64],
    upper: &[f64],
    replicate_peaks: &[(usize, f64)],
) -> Hottest {
    let n = edge_positions.first().map_or(0, |e| e.1.len());
    let (k0, pos0, t0) = locate_hottest(edge_positions, |j| est[j]);
    let max_lower = lower.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let max_upper = upper.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let pos = &edge_positions[k0].1;
    let mut candidates: Vec<f64> = (0..n)
        .filter(|&j| upper[k0 * n + j] >= max_lower)
        .map(|j| pos[j])
        .collect();
    candidates.push(pos0);
    // on a circle the hull is the shortest arc, which may wrap through 0
    let hot_edge = edge_positions[k0].0;
    let [p_lo, p_hi] = shape
        .position_hull(hot_edge, &candidates)
        .unwrap_or([pos0, pos0]);
    let b_count = replicate_peaks.len();
    let mut counts = vec![0usize; edge_positions.len()];
    let mut inside = 0usize;
    for &(k, p) in replicate_peaks {
        counts[k] += 1;
        inside += usize::from(k == k0 && shape.interval_contains(hot_edge, [p_lo, p_hi], p));
    }
    Hottest {
        edge: edge_positions[k0].0,
        position: pos0,
        position_interval: [p_lo, p_hi],
        temperature: t0,
        temperature_interval: [max_lower.min(t0), max_upper.max(t0)],
        edge_shares: edge_positions
            .iter()
            .zip(&counts)
            .map(|((e, _), &c)| (*e, c as f64 / b_count.max(1) as f64))
            .collect(),
        main_peak_share: inside as f64 / b_count.max(1) as f64,
    }
}

#[allow(clippy::too_many_arguments)]
fn cautions(
    case: &Case,
    summary: &FitSummary,
    strength: &StrengthSummary,
    edges: &[EdgeResult],
    hottest: &Hottest,
    flagged: &[usize],
    doubts: &[DoubtfulSensor],
    fallbacks: usize,
) -> Vec<String> {
    let u = &case.units;
    let lu = u.length.symbol();
    let tu = u.temperature.symbol();
    let mut out = vec![SAFETY_CAUTION.to_string()];
    out.push(
        "The model assumes steady conduction with constant conductivity and the stated edge \
         conditions; a plate still warming up, or a contact that is not as modelled, biases \
         the estimate."
            .to_string(),
    );
    for e in edges {
        out.push(format!(
            "Along the {} edge, features shorter than about {} {lu} (the resolution length, \
             the worst along the edge: between or beyond the sensors a point feature is smeared \
             over that much) are smoothed away: a narrow hot spot appears wider and cooler than \
             it is.",
            e.edge,
            significant3(u.length_from_m(e.resolution_length))
        ));
    }
    if summary.sigma_source == SigmaSource::Estimated {
        out.push(format!(
            "No reading uncertainty was stated: it was estimated from the residuals as {} \
             {tu}, with {:.1} degrees of freedom. State [noise] sigma for firmer intervals.",
            significant3(u.dtemp_from_k(summary.sigma)),
            summary.dof
        ));
    }
    if let Some(p) = summary.p_value {
        if p < 0.01 {
            out.push(format!(
                "The readings scatter about the fit more than the stated noise explains \
                 (chi-square {:.1} on {:.1} degrees of freedom, p = {p:.2e}): the noise may be \
                 understated, the plate not steady, or a sensor position or edge condition \
                 wrong.",
                summary.chi_square, summary.dof
            ));
        }
    }
    if strength.at_range_end {
        out.push(format!(
            "The {} rule found no interior optimum for the smoothing strength; the value at \
             the end of the search range was used.",
            strength.method
        ));
    }
    for &i in flagged {
        out.push(format!(
            "Sensor {} was left out as suspect (see sensors.csv).",
            case.sensors[i].id
        ));
    }
    for d in doubts {
        out.push(format!(
            "Sensor {} stands out from its neighbours and was kept: a hot spot under it \
             explains its reading as well as a fault does (see sensors.csv and the summary).",
            d.sensor
        ));
    }
    if hottest.main_peak_share < 0.8 {
        out.push(format!(
            "The hottest point is not well located: only {:.0} % of the bootstrap replicates \
             put it within the reported position interval on the {} edge.",
            100.0 * hottest.main_peak_share,
            hottest.edge
        ));
    }
    if fallbacks > 0 {
        out.push(format!(
            "In {fallbacks} bootstrap replicates the strength rule failed and the case's own \
             strength was used."
        ));
    }
    out
}
/// A hint that the readings may be in another temperature unit than the case states: when
/// the plate has known temperatures (fixed edges, fluid temperatures), the readings as
/// stated all lie far outside them (more than 30 K and twice their spread beyond), and every
/// reading taken in one of the other units would lie near them (within 25 K, or their
/// spread, and three times nearer than as stated). A hot hidden edge can put
/// the readings above every known temperature, so this never changes an answer; it names
/// the coincidence and the key to check (issue 13: unit mix-ups).
pub(super) fn temperature_unit_hint(case: &Case, readings: &[Option<f64>]) -> Option<String> {
    use crate::geometry::{Edge, EdgeCondition};
    use crate::units::TemperatureUnit;
    let mut known: Vec<f64> = Vec::new();
    for e in Edge::ALL {
        match case.plate.condition(e) {
            Some(EdgeCondition::Fixed(p)) => known.extend_from_slice(p.temperatures()),
            Some(EdgeCondition::Convective(c)) => known.push(c.ambient_k),
            _ => {}
        }
    }
    let values: Vec<f64> = readings.iter().flatten().copied().collect();
    if known.is_empty() || values.is_empty() {
        return None;
    }
    let lo = known.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = known.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let spread = hi - lo;
    let stated = case.units.temperature;
    let beyond = |t: f64| (t - hi).max(lo - t);
    let nearest = values
        .iter()
        .map(|&t| beyond(t))
        .fold(f64::INFINITY, f64::min);
    // as stated, every reading far from every known temperature
    if nearest <= 30.0_f64.max(2.0 * spread) {
        return None;
    }
    for other in [
        TemperatureUnit::Celsius,
        TemperatureUnit::Fahrenheit,
        TemperatureUnit::Kelvin,
    ] {
        if other == stated {
            continue;
        }
        // each reading as written in the file, read in the other unit: all of them near the
        // known temperatures, several times nearer than as stated
        let farthest = values
            .iter()
            .map(|&k| beyond(other.to_kelvin(stated.from_kelvin(k))))
            .fold(f64::NEG_INFINITY, f64::max);
        if farthest < 25.0_f64.max(spread) && farthest < nearest / 3.0 {
            let side = if values[0] > hi { "above" } else { "below" };
            let sym = TemperatureUnit::reader_symbol;
            let range = if spread > 0.0 {
                format!(
                    "{} to {} {}",
                    significant3(stated.from_kelvin(lo)),
                    significant3(stated.from_kelvin(hi)),
                    sym(stated)
                )
            } else {
                format!("{} {}", significant3(stated.from_kelvin(lo)), sym(stated))
            };
            return Some(format!(
                "Every reading lies more than {} K {side} every known temperature of the plate \
                 (the fixed edges and fluids: {range}); read as {} instead of {} they would \
                 all lie within {} K of them. A hidden edge far hotter or colder than the rest \
                 can do this, but so can a unit mix-up: check the readings' unit against \
                 temperature_unit in plate.toml.",
                significant3(nearest),
                sym(other),
                sym(stated),
                significant3(farthest),
            ));
        }
    }
    None
}

/// `v` with three significant digits, for cautions a person reads.
pub(super) fn significant3(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let decimals = (2 - v.abs().log10().floor() as i32).max(0) as usize;
    format!("{v:.decimals$}")
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::uncertainty::{BootstrapOutput, simultaneous_band};

    #[test]
    fn profile_bands_by_blocks_are_the_whole_matrix_bands_bit_for_bit() {
        // invented coefficient errors and maps: one to three edges of 77, 65, 2 and 129
        // points (blocks of 64 with a remainder, a remainder of one joined to the block
        // before, a single narrow block), peaks at an edge's ends and inside; once with
        // values of full precision near zero (where a product by another kernel would round
        // differently, and nothing larger absorbs the difference) and once on a coarse grid
        // of exact values (where profiles tie)
        let mut next = crate::testing::uniform(0x5851_f42d_4c95_7f2d);
        let cases = [(1, 77), (2, 65), (3, 2), (1, 129)];
        for ((edges, points), coarse) in cases.iter().flat_map(|&c| [(c, false), (c, true)]) {
            let (b, p) = (300, 9);
            let n = edges * points;
            let mut value = |scale: f64| {
                let v = next();
                if coarse {
                    (v * scale).round() / scale
                } else {
                    v
                }
            };
            let coefficient_errors = DMatrix::from_fn(b, p, |_, _| value(2.0));
            let q = DMatrix::from_fn(n, p, |_, _| value(2.0));
            let est: Vec<f64> = (0..n)
                .map(|j| 0.1 * ((j % points) as f64 - 20.0).abs().min(3.0) + value(1.0))
                .collect();
            let edge_positions: Vec<(Edge, Vec<f64>)> = [Edge::Bottom, Edge::Left, Edge::Top]
                [..edges]
                .iter()
                .map(|&e| (e, (0..points).map(|k| 0.002 * k as f64).collect()))
                .collect();
            let boot = BootstrapOutput {
                coefficient_errors,
                lambdas: vec![1.0; b],
                fallbacks: 0,
            };
            let got = ProfileBands::new(&edge_positions, &est, &boot, &q, 0.95);
            let whole = boot.errors_of(&q);
            let want_p = pointwise_band(&est, &whole, 0.95);
            let want_s = simultaneous_band(&est, &whole, 0.95);
            let want_peaks = ReplicatePeaks::new(&edge_positions, &est, &whole);
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            let case = format!("{edges} edges of {points} points, coarse {coarse}");
            for (what, got, want) in [
                ("pointwise lower", &got.pointwise.0, &want_p.0),
                ("pointwise upper", &got.pointwise.1, &want_p.1),
                ("simultaneous lower", &got.simultaneous.0, &want_s.0),
                ("simultaneous upper", &got.simultaneous.1, &want_s.1),
                ("maxima", &got.peaks.maxima, &want_peaks.maxima),
            ] {
                assert_eq!(bits(got), bits(want), "{case}: {what}");
            }
            let located =
                |l: &[(usize, f64)]| l.iter().map(|&(k, x)| (k, x.to_bits())).collect::<Vec<_>>();
            assert_eq!(
                located(&got.peaks.located),
                located(&want_peaks.located),
                "{case}: located"
            );
        }
    }

    #[test]
    fn band_blocks_cover_every_point_without_a_narrow_block() {
        for n in [0, 1, 5, 6, 63, 64, 65, 69, 70, 128, 133, 134, 513, 1681] {
            let blocks: Vec<(usize, usize)> = band_blocks(n).collect();
            let mut next = 0;
            for &(start, len) in &blocks {
                assert_eq!(start, next, "n = {n}: blocks in order, no gap");
                assert!(len > 5 || blocks.len() == 1, "n = {n}: a block of {len}");
                next += len;
            }
            assert_eq!(next, n, "n = {n}: every point once");
        }
    }
}
