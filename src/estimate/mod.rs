//! The main job: reconstruct the hidden edges and the field from one set of readings, with
//! uncertainty (README).
//!
//! [`estimate`] runs, in order:
//! 1. the forward model's sensor map for the sensors that have a reading;
//! 2. the reading uncertainties ([`crate::noise::reading_sigmas`]);
//! 3. the regularised fit with the case's strength rule ([`fit`]), the search for suspect
//!    sensors by leave-one-out prediction, and the refit without them;
//! 4. the bootstrap of the estimation error ([`crate::uncertainty`]) for the edge profiles, the
//!    field grid and the heat flows, with the strength re-chosen in every replicate;
//! 5. the bands, the hottest point and its intervals, the exceedance probability, the
//!    resolution length from the model resolution matrix, and the cautions.
//!
//! Everything is SI inside; [`EstimateResult`] carries the case's units for the report.

pub mod calibration;
pub mod explain;
pub mod fit;
pub mod penalty;
pub mod resolution;
pub mod result;

pub use result::{
    DoubtfulSensor, EdgeResult, EstimateResult, Exceedance, FieldResult, FitSummary, Hottest,
    Interval, SensorResult, StrengthSummary,
};

use crate::case::{Case, Smoothing, StrengthRule};
use crate::error::{Error, Result};
use crate::forward::{ForwardModel, LinearMap, SeriesOptions};
use crate::geometry::{Edge, Point};
use crate::inverse::{Strength, StrengthMethod};
use crate::noise::{SigmaSource, reading_sigmas};
use crate::uncertainty::{
    BootstrapInput, BootstrapMode, bootstrap, pointwise_band, quantile, simultaneous_band,
};
use fit::{FAULT_POSTERIOR, FitInput, LooVerdict, loo_residuals};
use nalgebra::{DMatrix, DVector};
use statrs::distribution::{ChiSquared, ContinuousCDF, Normal};

/// The strength rule used when the case does not name one. Chosen by the calibration study
/// in `docs/calibration.md` (plain GCV fails with few, deep sensors).
pub const DEFAULT_STRENGTH: StrengthMethod = StrengthMethod::Evidence;

/// A sensor can be flagged after the first round only if its fault probability exceeded this
/// before any sensor was left out (see [`estimate`]).
pub const FIRST_ROUND_DOUBT: f64 = 0.5;

/// The caution every output carries (the project rules in DEVELOPERS.md).
pub const SAFETY_CAUTION: &str = "These are estimates, not measurements: the hidden edge was \
     inferred from interior sensors through a model. Decisions about live, hot or pressurised \
     equipment follow local codes and licensed practice.";

/// Options of an estimate beyond the case file.
#[derive(Debug, Clone)]
pub struct EstimateOptions {
    /// Bootstrap noise mode; `None` picks `parametric` when σ is stated, else `residual`.
    pub mode: Option<BootstrapMode>,
    /// Alarm limit on the hidden edges' temperature, kelvin.
    pub limit: Option<f64>,
    /// Probability of exceeding the limit above which the alarm is raised.
    pub alarm_probability: f64,
    /// Keep every sensor (no search for suspect sensors).
    pub keep_all: bool,
    /// Field grid size.
    pub grid: (usize, usize),
    /// Override the case's replicate count.
    pub replicates: Option<usize>,
    /// Override the case's seed.
    pub seed: Option<u64>,
    /// Override the case's strength rule.
    pub strength: Option<StrengthRule>,
    /// Sensors the user knows to be faulty (indices into `case.sensors`): left out before
    /// the fit, whatever their readings.
    pub exclude: Vec<usize>,
    /// Compute strict bounds and the gradient study ([`crate::bounds`]); off by default
    /// because they cost conic programs (the command line turns them on).
    pub strict_bounds: bool,
    /// Override the case's `[bounds] max_gradient`, K/m.
    pub max_gradient_k_per_m: Option<f64>,
}

impl Default for EstimateOptions {
    fn default() -> Self {
        EstimateOptions {
            mode: None,
            limit: None,
            alarm_probability: 0.05,
            keep_all: false,
            grid: crate::case::DEFAULT_GRID,
            replicates: None,
            seed: None,
            strength: None,
            exclude: Vec::new(),
            strict_bounds: false,
            max_gradient_k_per_m: None,
        }
    }
}

/// The strength setting for a rule as written in a case.
pub fn strength_of(rule: StrengthRule) -> Strength {
    match rule {
        StrengthRule::Default => Strength::Rule(DEFAULT_STRENGTH),
        StrengthRule::Gcv => Strength::Rule(StrengthMethod::Gcv),
        StrengthRule::Discrepancy => Strength::Rule(StrengthMethod::Discrepancy),
        StrengthRule::Evidence => Strength::Rule(StrengthMethod::Evidence),
        StrengthRule::LCurve => Strength::Rule(StrengthMethod::LCurve),
        StrengthRule::Fixed(v) => Strength::Fixed(v),
    }
}

/// Points per unknown edge in `profile.csv` and in the hottest-point scan.
pub fn profile_points(terms: usize) -> usize {
    (8 * terms + 1).max(401)
}

/// Run the estimate. `readings` are kelvin, aligned with `case.sensors` (`None`: no reading).
/// `progress` is called with the number of bootstrap replicates done.
pub fn estimate(
    case: &Case,
    readings: &[Option<f64>],
    options: &EstimateOptions,
    progress: Option<&(dyn Fn(usize) + Sync)>,
) -> Result<EstimateResult> {
    let plate = &case.plate;
    let unknown = plate.unknown_edges();
    let model = case_model(case)?;
    let mut used: Vec<usize> = (0..case.sensors.len())
        .filter(|&i| readings.get(i).copied().flatten().is_some())
        .collect();
    let q_null = unpenalised_count(&model);
    if used.len() <= q_null + 1 {
        return Err(too_few_readings(case, used.len(), q_null));
    }
    let points: Vec<Point> = case.sensors.iter().map(|s| s.position).collect();
    let full_map = model.sensor_map(&points);
    let mut chosen_order = case.fit.smoothing.order().unwrap_or(2);
    let penalty0 = penalty::penalty_weights(&model, chosen_order);
    let rule = options.strength.unwrap_or(case.fit.strength);
    let strength = strength_of(rule);

    // Sigmas for every sensor that has a reading (indexed like case.sensors).
    let (sigma_of, source) = resolve_sigmas(case, &used, readings)?;
    let stated = source != SigmaSource::Estimated;
    if strength == Strength::Rule(StrengthMethod::Discrepancy) && !stated {
        return Err(Error::invalid_at(
            &case.files.plate,
            None,
            Some(if options.strength.is_some() {
                "option.strength"
            } else {
                "fit.strength"
            }),
            "the discrepancy principle needs the reading uncertainty: add [noise] sigma, a \
             tolerance class or a sigma column in sensors.csv, or choose another rule",
        ));
    }
    let input_for = |rows: &[usize]| FitInput {
        a: full_map.matrix.select_rows(rows),
        d: DVector::from_iterator(
            rows.len(),
            rows.iter()
                .map(|&i| readings[i].unwrap_or(0.0) - full_map.offset[i]),
        ),
        sigma: DVector::from_iterator(rows.len(), rows.iter().map(|&i| sigma_of[i])),
        sigma_stated: stated,
        penalty: penalty0.clone(),
    };

    if case.fit.smoothing == Smoothing::Auto {
        chosen_order = choose_order(&input_for(&used), &model)?;
    }
    let penalty = penalty::penalty_weights(&model, chosen_order);
    let input_for = |rows: &[usize]| FitInput {
        penalty: penalty.clone(),
        ..input_for(rows)
    };

    // Linear maps of the profiles (the hot-feature test needs them before the fit).
    let n_prof = profile_points(case.fit.terms);
    let edge_positions = profile_positions(case);
    let edge_maps: Vec<LinearMap> = edge_positions
        .iter()
        .map(|(e, pos)| model.edge_profile_map(*e, pos))
        .collect();
    let hot_test = HotTest {
        bank: std::cell::OnceCell::new(),
        edge_positions: &edge_positions,
        edge_maps: &edge_maps,
        terms: case.fit.terms,
        max_gradient: options
            .max_gradient_k_per_m
            .or(case.bounds.max_gradient_k_per_m),
    };

    // Sensors the user knows to be bad.
    let mut flags: Vec<(usize, String)> = Vec::new();
    for &i in &options.exclude {
        if let Some(k) = used.iter().position(|&u| u == i) {
            used.remove(k);
            flags.push((i, "left out at the user's request".to_string()));
        }
    }
    if used.len() <= q_null + 1 {
        return Err(too_few_readings(case, used.len(), q_null));
    }

    // Fit, then look for suspect sensors and refit without them.
    let search = fault_search(
        case,
        &input_for,
        &mut used,
        strength,
        q_null,
        options.keep_all,
        &hot_test,
    )?;
    flags.extend(search.flags);
    let doubts = search.doubts;
    let loo_of = search.loo_of;
    let input = input_for(&used);
    let fit = fit::fit(&input, strength).map_err(|e| e.in_file(&case.files.plate, |_| None))?;
    let c_hat = fit.solution.coefficients.clone();
    let c_slice = c_hat.as_slice();
    // (the covariance already carries σ̂ when it was estimated: the refit uses σ = σ̂)

    // Linear maps of the outputs.
    let shape = *plate.shape();
    let bounds = options.strict_bounds.then(|| {
        crate::bounds::estimate_bounds(
            case,
            &points,
            readings,
            &used,
            fit.sigma.as_slice(),
            stated,
            options.max_gradient_k_per_m,
            &edge_positions,
        )
    });
    let prof_matrix = stack(edge_maps.iter().map(|m| &m.matrix));
    let prof_offset: Vec<f64> = edge_maps
        .iter()
        .flat_map(|m| m.offset.iter().copied())
        .collect();
    let (xs, ys) = crate::case::grid_coordinates(&shape, options.grid.0, options.grid.1);
    let grid_points: Vec<Point> = ys
        .iter()
        .flat_map(|&y| xs.iter().map(move |&x| Point::new(x, y)))
        .collect();
    let field_map = model.sensor_map(&grid_points);
    let heat_rows = heat_flow_rows(&model, &unknown)?;

    // Bootstrap.
    let replicates = options
        .replicates
        .unwrap_or(case.uncertainty.replicates)
        .max(1);
    let seed = options.seed.unwrap_or(case.uncertainty.seed);
    let mode = options.mode.unwrap_or(if stated {
        BootstrapMode::Parametric
    } else {
        BootstrapMode::Residual
    });
    let used_points: Vec<Point> = used.iter().map(|&i| points[i]).collect();
    let jitter_sd: Vec<f64> = used
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
    let heat_matrix = heat_rows.as_ref().map(|(m, _)| m.clone());
    let mut outputs: Vec<&DMatrix<f64>> = vec![&prof_matrix, &field_map.matrix];
    if let Some(h) = &heat_matrix {
        outputs.push(h);
    }
    let boot = bootstrap(&BootstrapInput {
        fit: &fit,
        strength,
        penalty: &penalty,
        mode,
        a: &input.a,
        jitter: has_jitter.then_some((
            jitter_sd.as_slice(),
            &shift as &(dyn Fn(&[(f64, f64)]) -> Vec<f64> + Sync),
        )),
        outputs: &outputs,
        center_on_estimate: false,
        replicates,
        seed,
        progress,
    })?;
    let confidence = case.uncertainty.confidence;
    let z = Normal::standard().inverse_cdf(0.5 + confidence / 2.0);

    // Profiles.
    let prof_est: Vec<f64> = (&prof_matrix * &c_hat)
        .iter()
        .zip(&prof_offset)
        .map(|(a, b)| a + b)
        .collect();
    let (p_lo, p_hi) = pointwise_band(&prof_est, &boot.errors[0], confidence);
    let (s_lo, s_hi) = simultaneous_band(&prof_est, &boot.errors[0], confidence);
    let prof_sd = linear_sd(&prof_matrix, &fit.solution.covariance);
    let mut hottest = hottest_point(&edge_positions, &prof_est, &p_lo, &p_hi, &boot.errors[0]);
    // A sensor kept under two explanations: the hotter one bounds the hottest temperature.
    for d in &doubts {
        hottest.temperature_interval[1] = hottest.temperature_interval[1].max(d.peak_temperature);
    }
    let resolution = resolution::resolution_lengths(
        &model,
        &fit.solution.resolution,
        &edge_positions,
        &edge_maps,
        &prof_est,
    );
    let mut edges = Vec::new();
    for (k, (edge, pos)) in edge_positions.iter().enumerate() {
        let r = k * n_prof..(k + 1) * n_prof;
        let heat_flow = heat_rows.as_ref().map(|(m, off)| {
            let est = (m.row(k) * &c_hat)[0] + off[k];
            let mut draws: Vec<f64> = (0..replicates)
                .map(|b| est - boot.errors[2][(b, k)])
                .collect();
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

    // Field.
    let field_est: Vec<f64> = (&field_map.matrix * &c_hat)
        .iter()
        .zip(field_map.offset.iter())
        .map(|(a, b)| a + b)
        .collect();
    let (f_lo, f_hi) = pointwise_band(&field_est, &boot.errors[1], confidence);
    let field = FieldResult {
        xs,
        ys,
        estimate: field_est,
        lower: f_lo,
        upper: f_hi,
    };

    // Exceedance.
    let exceedance = options.limit.map(|limit| {
        let over = (0..replicates)
            .filter(|&b| replicate_max(&prof_est, &boot.errors[0], b) > limit)
            .count();
        let probability = over as f64 / replicates as f64;
        Exceedance {
            limit,
            probability,
            alarm_probability: options.alarm_probability,
            // the hotter explanation of a doubtful sensor crossing the limit raises it too
            alarm: probability > options.alarm_probability
                || doubts.iter().any(|d| d.peak_temperature > limit),
        }
    });

    // Sensors.
    let flagged: Vec<usize> = flags.iter().map(|f| f.0).collect();
    let leverage_of = |i: usize| {
        used.iter()
            .position(|&u| u == i)
            .map(|k| fit.solution.leverages[k])
    };
    let sensors = case
        .sensors
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let fitted = model.temperature(c_slice, s.position)?;
            let reading = readings.get(i).copied().flatten();
            Ok(SensorResult {
                sensor: s.id.clone(),
                position: s.position,
                reading,
                fitted,
                residual: reading.map(|r| r - fitted),
                loo_residual: loo_of[i],
                leverage: leverage_of(i),
                sigma: reading.map(|_| sigma_of[i] * fit.sigma_scale.unwrap_or(1.0)),
                flag: flags.iter().find(|f| f.0 == i).map(|f| f.1.clone()),
                doubtful: doubts.iter().any(|d| d.index == i),
            })
        })
        .collect::<Result<Vec<_>>>()?;

    // Fit summary.
    let dof = fit.solution.residual_dof();
    let chi2 = fit.solution.chi_square;
    let p_value = (dof > 0.05 && stated)
        .then(|| ChiSquared::new(dof).ok().map(|d| 1.0 - d.cdf(chi2)))
        .flatten();
    let sig_used: Vec<f64> = fit.sigma.iter().copied().collect();
    let sigma_rms = (sig_used.iter().map(|s| s * s).sum::<f64>() / sig_used.len() as f64).sqrt();
    let fit_summary = FitSummary {
        sigma: sigma_rms,
        sigma_source: source.name().to_string(),
        chi_square: chi2,
        dof,
        p_value,
        readings_used: used.len(),
    };
    let strength_summary = StrengthSummary {
        method: match strength {
            Strength::Fixed(_) => "fixed".to_string(),
            Strength::Rule(m) => m.name().to_string(),
        },
        value: fit.selection.lambda,
        effective_parameters: fit.solution.effective_parameters,
        at_range_end: fit.selection.at_grid_end,
        smoothing: Smoothing::of_order(chosen_order)
            .map_or("curvature", Smoothing::name)
            .to_string(),
        smoothing_auto: case.fit.smoothing == Smoothing::Auto,
    };

    let cautions = cautions(
        case,
        &fit_summary,
        &strength_summary,
        &edges,
        &hottest,
        &flagged,
        &doubts,
        boot.fallbacks,
    );
    Ok(EstimateResult {
        units: case.units,
        plate: plate.clone(),
        edges,
        field,
        sensors,
        hottest,
        exceedance,
        doubtful_sensors: doubts,
        strength: strength_summary,
        fit: fit_summary,
        confidence,
        replicates,
        bootstrap_mode: mode.name().to_string(),
        seed,
        bounds,
        cautions,
    })
}

/// The hot-feature test of the fault search ([`explain`]), with its bank of features built
/// only when a high reading first needs it.
struct HotTest<'a> {
    bank: std::cell::OnceCell<explain::FeatureBank>,
    edge_positions: &'a [(Edge, Vec<f64>)],
    edge_maps: &'a [LinearMap],
    terms: usize,
    /// A stated gradient limit the feature must obey, K/m.
    max_gradient: Option<f64>,
}

impl HotTest<'_> {
    /// [`explain::hot_explanation`] for row `k` of `input`.
    fn verdict(
        &self,
        input: &FitInput,
        k: usize,
        strength: Strength,
    ) -> Result<Option<explain::HotVerdict>> {
        let bank = match self.bank.get() {
            Some(b) => b,
            None => {
                let built =
                    explain::FeatureBank::new(self.edge_positions, self.edge_maps, self.terms)?;
                self.bank.get_or_init(|| built)
            }
        };
        explain::hot_explanation(bank, self.edge_maps, input, k, strength, self.max_gradient)
    }
}

/// What the search for suspect sensors found.
struct FaultSearch {
    /// Sensors left out (index into `case.sensors`) and why.
    flags: Vec<(usize, String)>,
    /// Sensors kept although their reading stands out, because a hot feature of a hidden
    /// edge explains it as well as a fault does.
    doubts: Vec<DoubtfulSensor>,
    /// Standardised leave-one-out residual of every sensor with a reading.
    loo_of: Vec<Option<f64>>,
}

/// The search for suspect sensors (module [`fit`] for the fault model, [`explain`] for the
/// hot-feature test): each round computes every reading's leave-one-out verdict, takes the
/// candidates whose fault probability exceeds [`FAULT_POSTERIOR`] from the most to the least
/// likely, and leaves out the first one that no hot feature of a hidden edge explains (a
/// reading lower than predicted is always a candidate: leaving it out is the hotter
/// explanation). A candidate that a hot feature explains is kept and reported as doubtful;
/// with a stated gradient limit the feature must obey it.
/// The case is refitted and the search repeated, at most until a quarter of the sensors are
/// out. `used` is updated in place.
fn fault_search(
    case: &Case,
    input_for: &dyn Fn(&[usize]) -> FitInput,
    used: &mut Vec<usize>,
    strength: Strength,
    q_null: usize,
    keep_all: bool,
    hot_test: &HotTest<'_>,
) -> Result<FaultSearch> {
    let mut flags: Vec<(usize, String)> = Vec::new();
    let mut doubts: Vec<DoubtfulSensor> = Vec::new();
    let mut loo_of: Vec<Option<f64>> = vec![None; case.sensors.len()];
    let min_keep = (q_null + 3).max(used.len() - used.len() / 4);
    // Fault probabilities before anything is left out: a later round may flag only a sensor
    // that already looked doubtful here (FIRST_ROUND_DOUBT), so that leaving out one faulty
    // sensor cannot make its neighbour, the only other witness of a real feature, look faulty.
    let mut first_round: Option<Vec<f64>> = None;
    loop {
        let input = input_for(used);
        let z = loo_residuals(&input, strength);
        for (k, &i) in used.iter().enumerate() {
            loo_of[i] = z[k].map(|v| v.z);
        }
        if first_round.is_none() {
            let mut p0 = vec![0.0; case.sensors.len()];
            for (k, &i) in used.iter().enumerate() {
                p0[i] = z[k].map_or(0.0, |v| v.fault_probability);
            }
            first_round = Some(p0);
        }
        doubts.clear();
        if keep_all || used.len() <= min_keep {
            break;
        }
        let p0 = first_round.as_deref().unwrap_or(&[]);
        let mut candidates: Vec<(usize, LooVerdict)> = z
            .iter()
            .enumerate()
            .filter_map(|(k, v)| v.map(|v| (k, v)))
            .filter(|(k, v)| {
                v.fault_probability > FAULT_POSTERIOR
                    && (flags.is_empty() || p0[used[*k]] > FIRST_ROUND_DOUBT)
            })
            .collect();
        candidates.sort_by(|a, b| b.1.fault_probability.total_cmp(&a.1.fault_probability));
        let mut removed = None;
        for (k, v) in candidates {
            let hot = if v.z > 0.0 {
                hot_test.verdict(&input, k, strength)?
            } else {
                None
            };
            match hot {
                Some(h) if h.plausible() => doubts.push(doubtful_sensor(case, used[k], &v, &h)),
                _ => {
                    removed = Some((k, fault_reason(&v, hot.as_ref())));
                    break;
                }
            }
        }
        match removed {
            Some((k, reason)) => {
                let i = used.remove(k);
                flags.push((i, reason));
            }
            None => break,
        }
    }
    Ok(FaultSearch {
        flags,
        doubts,
        loo_of,
    })
}

/// A sensor kept under two explanations.
fn doubtful_sensor(
    case: &Case,
    i: usize,
    v: &LooVerdict,
    h: &explain::HotVerdict,
) -> DoubtfulSensor {
    DoubtfulSensor {
        index: i,
        sensor: case.sensors[i].id.clone(),
        loo_residual: v.z,
        fault_probability: v.fault_probability,
        edge: h.edge,
        position: h.position_m,
        width: h.fwhm_m,
        peak_temperature: h.peak_k,
        min_gradient: h.min_slope_k_per_m,
    }
}

/// Why a sensor was left out, for `sensors.csv` and the summary.
fn fault_reason(v: &LooVerdict, hot: Option<&explain::HotVerdict>) -> String {
    let mut reason = format!(
        "its reading is {:.1} standard deviations {} what the other sensors predict; the \
         chance that it is faulty is {:.4} (flagged above {FAULT_POSTERIOR})",
        v.z.abs(),
        if v.z > 0.0 { "above" } else { "below" },
        v.fault_probability,
    );
    match hot {
        Some(h) => reason.push_str(&format!(
            "; no hot feature of the {} edge explains it: one strong enough would raise the \
             neighbouring readings more than they show (misfit {} against {} allowed)",
            h.edge,
            h.statistic.map_or("n/a".to_string(), |s| format!("{s:.1}")),
            explain::HOT_REFUTE_CHI2
        )),
        None if v.z < 0.0 => reason.push_str(
            "; a reading lower than predicted is left out because leaving it out is the \
             hotter explanation",
        ),
        None => {}
    }
    reason.push_str("; left out and the case refitted");
    reason
}

/// The forward model an estimate fits: the case's plate with `case.fit.terms` series terms per
/// unknown edge. Shared by [`estimate`] and [`crate::track`].
///
/// # Errors
/// [`Error::Invalid`] when no edge is unknown, or the model cannot be built.
pub fn case_model(case: &Case) -> Result<ForwardModel> {
    if case.plate.unknown_edges().is_empty() {
        return Err(Error::invalid_at(
            &case.files.plate,
            None,
            Some("edges"),
            "no edge is unknown, so there is nothing to estimate; mark the hidden edge \
             condition = \"unknown\"",
        ));
    }
    ForwardModel::new(
        &case.plate,
        SeriesOptions {
            unknown_terms: case.fit.terms,
            ..SeriesOptions::default()
        },
    )
}

/// The number of coefficients no smoothing order penalises (levels and corners): every order
/// leaves the same ones free, so this is read off the curvature penalty.
pub fn unpenalised_count(model: &ForwardModel) -> usize {
    penalty::penalty_weights(model, 2)
        .iter()
        .filter(|&&v| v == 0.0)
        .count()
}

/// The smallest number of readings a fit of this model accepts: more than its `q_null`
/// unpenalised coefficients, plus one.
pub fn min_readings(q_null: usize) -> usize {
    q_null + 2
}

/// The error for a set of `n` readings too small for a model with `q_null` unpenalised
/// coefficients.
pub fn too_few_readings(case: &Case, n: usize, q_null: usize) -> Error {
    Error::invalid_at(
        &case.files.readings,
        None,
        Some("temperature"),
        format!(
            "{n} readings cannot determine this model: it needs at least {} (more than its \
             {q_null} unsmoothed coefficients, plus one)",
            min_readings(q_null),
        ),
    )
}

/// The reading uncertainty of every sensor in `used` (kelvin, indexed like `case.sensors`,
/// NaN for the others) and where it came from ([`reading_sigmas`]: a sensor's own sigma, the
/// case's `[noise]`, a tolerance class at the reading, or unit weights to be scaled by the
/// residual estimate).
///
/// # Errors
/// [`Error::Invalid`] naming the sensor's line when its sigma cannot be resolved.
pub fn resolve_sigmas(
    case: &Case,
    used: &[usize],
    readings: &[Option<f64>],
) -> Result<(Vec<f64>, SigmaSource)> {
    let own: Vec<Option<f64>> = used.iter().map(|&i| case.sensors[i].sigma_k).collect();
    let temps: Vec<f64> = used.iter().map(|&i| readings[i].unwrap_or(0.0)).collect();
    let (sig, source) = reading_sigmas(&case.noise, &own, &temps).map_err(|(k, msg)| {
        let s = &case.sensors[used[k]];
        if s.sigma_k.is_none() && matches!(case.noise, crate::noise::NoiseSpec::Tolerance { .. }) {
            // the reading lies outside the range of the tolerance class
            Error::invalid_at(
                &case.files.readings,
                None,
                Some("temperature"),
                format!("{}: {msg}", s.id),
            )
        } else {
            Error::invalid_at(
                &case.files.sensors,
                Some(s.line),
                Some("sigma"),
                format!("{}: {msg}", s.id),
            )
        }
    })?;
    let mut sigma_of = vec![f64::NAN; case.sensors.len()];
    for (k, &i) in used.iter().enumerate() {
        sigma_of[i] = sig[k];
    }
    Ok((sigma_of, source))
}

/// The positions along every unknown edge at which profiles are reported and the hottest
/// point is searched: [`profile_points`] evenly spaced points, ends included, metres.
pub fn profile_positions(case: &Case) -> Vec<(Edge, Vec<f64>)> {
    let shape = *case.plate.shape();
    let n_prof = profile_points(case.fit.terms);
    case.plate
        .unknown_edges()
        .iter()
        .map(|&e| {
            let len = shape.edge_length(e).unwrap_or(shape.width());
            (
                e,
                (0..n_prof)
                    .map(|i| len * i as f64 / (n_prof - 1) as f64)
                    .collect(),
            )
        })
        .collect()
}

/// The smoothing orders `auto` chooses between, in order of preference on a tie.
pub const AUTO_ORDERS: [usize; 2] = [2, 1];

/// Choose the penalty order for `auto` smoothing: the one whose prior gives the readings the
/// highest marginal likelihood at its best strength (model selection by evidence; MacKay
/// 1992, Neural Comput. 4:415–447). The evidences of different orders are comparable because
/// they share the data, the weights and the unpenalised coefficients. Size (order 0) is left
/// out: its white-noise prior gave bands several times wider than the others without better
/// coverage in the calibration study.
pub fn choose_order(input: &FitInput, model: &ForwardModel) -> Result<usize> {
    let mut best: Option<(f64, usize)> = None;
    for order in AUTO_ORDERS {
        let trial = FitInput {
            penalty: penalty::penalty_weights(model, order),
            ..input.clone()
        };
        if let Ok(f) = fit::fit(&trial, Strength::Rule(StrengthMethod::Evidence)) {
            let e = f.selection.criterion;
            if e.is_finite() && best.is_none_or(|(b, _)| e < b) {
                best = Some((e, order));
            }
        }
    }
    Ok(best.map_or(2, |(_, o)| o))
}

/// `v` with three significant digits, for cautions a person reads.
fn significant3(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let decimals = (2 - v.abs().log10().floor() as i32).max(0) as usize;
    format!("{v:.decimals$}")
}

/// Stack matrices with the same number of columns.
pub(crate) fn stack<'a>(parts: impl Iterator<Item = &'a DMatrix<f64>> + Clone) -> DMatrix<f64> {
    let rows: usize = parts.clone().map(|m| m.nrows()).sum();
    let cols = parts.clone().next().map_or(0, |m| m.ncols());
    let mut out = DMatrix::zeros(rows, cols);
    let mut r = 0;
    for m in parts {
        out.view_mut((r, 0), (m.nrows(), cols)).copy_from(m);
        r += m.nrows();
    }
    out
}

/// Standard deviations of `Q c` under the covariance `C`: `sqrt(diag(Q C Qᵀ))`.
pub(crate) fn linear_sd(q: &DMatrix<f64>, c: &DMatrix<f64>) -> Vec<f64> {
    let qc = q * c;
    (0..q.nrows())
        .map(|i| qc.row(i).dot(&q.row(i)).max(0.0).sqrt())
        .collect()
}

/// Rows `h_e` and offsets with heat flow through unknown edge `e` = `h_e · c + h0_e`
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

fn clamp_inside(shape: &crate::geometry::Shape, p: Point) -> Point {
    let w = shape.width();
    let eps = 1e-6 * w;
    let y_max = shape.height().map_or(f64::INFINITY, |h| h - eps);
    Point::new(p.x.clamp(eps, w - eps), p.y.clamp(eps, y_max))
}

fn replicate_max(est: &[f64], errors: &DMatrix<f64>, b: usize) -> f64 {
    est.iter()
        .enumerate()
        .map(|(j, e)| e - errors[(b, j)])
        .fold(f64::NEG_INFINITY, f64::max)
}

/// The maximum of sampled values with a parabolic refinement through its neighbours:
/// returns (index as a fraction, value).
pub(crate) fn refined_max(values: impl Fn(usize) -> f64, lo: usize, hi: usize) -> (f64, f64) {
    let mut k = lo;
    for j in lo..hi {
        if values(j) > values(k) {
            k = j;
        }
    }
    if k > lo && k + 1 < hi {
        let (y0, y1, y2) = (values(k - 1), values(k), values(k + 1));
        let den = y0 - 2.0 * y1 + y2;
        if den < 0.0 {
            let off = (0.5 * (y0 - y2) / den).clamp(-0.5, 0.5);
            return (k as f64 + off, y1 - 0.25 * (y0 - y2) * off);
        }
    }
    (k as f64, values(k))
}

/// The hottest point of the estimate and its intervals.
///
/// The interval for the hottest temperature is `[max_s L(s), max_s U(s)]` from the pointwise
/// band `[L, U]` of every unknown edge: if the band holds at the true hottest point `s*`
/// then `T* = u(s*) ≤ U(s*) ≤ max U`, and if it holds where `L` peaks then
/// `T* ≥ u(argmax L) ≥ max L`, so the interval misses only when one of two one-sided bounds
/// fails. It is wider than the spread of the replicates' maxima, which sits too high for a
/// smooth truth (the maximum of a rough draw exceeds the maximum of the truth) and too low at
/// a sharp peak (smoothing bias); see `docs/calibration.md`. The position interval is the
/// hull of the set `{s : U(s) ≥ max L}` on the hottest edge, the set that can hold the
/// maximum (`docs/method.md` §3). `main_peak_share` is the share of replicates whose own hottest point
/// falls inside it.
fn hottest_point(
    edge_positions: &[(Edge, Vec<f64>)],
    est: &[f64],
    lower: &[f64],
    upper: &[f64],
    errors: &DMatrix<f64>,
) -> Hottest {
    let n = edge_positions.first().map_or(0, |e| e.1.len());
    let locate = |val: &dyn Fn(usize) -> f64| -> (usize, f64, f64) {
        let mut best = (0, f64::NAN, f64::NEG_INFINITY);
        for (k, (_, pos)) in edge_positions.iter().enumerate() {
            let (idx, v) = refined_max(|j| val(k * n + j), 0, n);
            if v > best.2 {
                let step = pos[1] - pos[0];
                best = (k, pos[0] + idx * step, v);
            }
        }
        best
    };
    let (k0, pos0, t0) = locate(&|j| est[j]);
    let max_lower = lower.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let max_upper = upper.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let pos = &edge_positions[k0].1;
    let candidates: Vec<f64> = (0..n)
        .filter(|&j| upper[k0 * n + j] >= max_lower)
        .map(|j| pos[j])
        .collect();
    let p_lo = candidates.first().copied().unwrap_or(pos0).min(pos0);
    let p_hi = candidates.last().copied().unwrap_or(pos0).max(pos0);
    let b_count = errors.nrows();
    let mut counts = vec![0usize; edge_positions.len()];
    let mut inside = 0usize;
    for b in 0..b_count {
        let (k, p, _) = locate(&|j| est[j] - errors[(b, j)]);
        counts[k] += 1;
        inside += usize::from(k == k0 && p >= p_lo && p <= p_hi);
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
    if summary.sigma_source == "estimated" {
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
