//! Step 2 of an estimate: the fit, with the search for faulty sensors.
//!
//! Sensors the user excludes are left out first. Then each round computes every reading's
//! leave-one-out verdict ([`super::fit`]) and weighs a high reading's two explanations, a
//! fault or a hot feature of a hidden edge ([`super::explain`]); the case is refitted
//! without the sensors left out (`docs/method.md`, "Sensor decisions").

use super::problem::Problem;
use super::{DoubtfulSensor, EstimateOptions, FIRST_ROUND_DOUBT, explain, fit, too_few_readings};
use crate::case::Case;
use crate::error::Result;
use crate::forward::LinearMap;
use crate::geometry::Edge;
use crate::inverse::Strength;
use fit::{FAULT_POSTERIOR, Fit, FitInput, LooVerdict, loo_residuals};

/// The fit an estimate reports, and the sensor decisions behind it.
pub(super) struct Fitted {
    /// The sensors fitted (indices into `case.sensors`).
    pub used: Vec<usize>,
    /// Sensors left out and why.
    pub flags: Vec<(usize, String)>,
    /// Sensors kept under two explanations.
    pub doubts: Vec<DoubtfulSensor>,
    /// Standardised leave-one-out residual of every sensor with a reading.
    pub loo_of: Vec<Option<f64>>,
    /// The fit input of the sensors fitted.
    pub input: FitInput,
    /// The fit.
    pub fit: Fit,
}

/// Leave out the excluded sensors, search for faulty ones ([`fault_search`]) and fit the rest.
pub(super) fn fit_leaving_out_faults(
    problem: &Problem<'_>,
    options: &EstimateOptions,
) -> Result<Fitted> {
    let case = problem.case;
    let hot_test = HotTest {
        bank: std::cell::OnceCell::new(),
        edge_positions: &problem.edge_positions,
        edge_maps: &problem.edge_maps,
        terms: case.fit.terms,
        max_gradient: options
            .max_gradient_k_per_m
            .or(case.bounds.max_gradient_k_per_m),
    };

    // Sensors the user knows to be bad.
    let mut used = problem.with_reading.clone();
    let mut flags: Vec<(usize, String)> = Vec::new();
    for &i in &options.exclude {
        if let Some(k) = used.iter().position(|&u| u == i) {
            used.remove(k);
            flags.push((i, "left out at the user's request".to_string()));
        }
    }
    if used.len() <= problem.q_null + 1 {
        return Err(too_few_readings(case, used.len(), problem.q_null));
    }

    let search = fault_search(
        case,
        &|rows: &[usize]| problem.input(rows),
        &mut used,
        problem.strength,
        problem.q_null,
        options.keep_all,
        &hot_test,
    )?;
    flags.extend(search.flags);
    let input = problem.input(&used);
    // (the covariance carries σ̂ when it was estimated: the refit uses σ = σ̂)
    let fit =
        fit::fit(&input, problem.strength).map_err(|e| e.in_file(&case.files.plate, |_| None))?;
    Ok(Fitted {
        used,
        flags,
        doubts: search.doubts,
        loo_of: search.loo_of,
        input,
        fit,
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
