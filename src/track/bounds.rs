//! Strict bounds on the hottest temperature of logger rows under a stated gradient limit
//! (`track --max-gradient G`, or `[bounds] max_gradient` in the case).
//!
//! Each bound costs a few dozen conic programs ([`crate::bounds`]), far more than the rest of a
//! row, so they are computed on every [`RowBounds::every`]-th fitted row and on the row that
//! opens an alarm episode, not on every row. The admissible set is built once per pattern of
//! sensors in use and reading uncertainties, and only its readings change between rows of the
//! same pattern ([`AdmissibleSet::with_readings`]).
//!
//! How they enter the alarm (conservative, as in `estimate`): a bounded row whose strict lower
//! bound of the hottest temperature lies above the limit is in alarm whatever its exceedance
//! probability (the readings cannot be reproduced by any edge under the limit that obeys the
//! gradient limit); bounds never take a row out of alarm. A bounded row whose upper bound lies
//! below the limit says the limit is ruled out under G, which `track.csv` shows.

use super::engine::RowFit;
use crate::bounds::{AdmissibleSet, BoundSpec, BoundsOptions, BoundsOutcome, bounds_under};
use crate::case::Case;
use crate::error::Result;
use crate::geometry::Point;

/// Default stride of bounded rows.
pub const DEFAULT_BOUNDS_EVERY: usize = 30;

/// The strict bounds of one row.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum RowBound {
    /// The hottest temperature lies in `[lower, upper]`, kelvin.
    Interval([f64; 2]),
    /// No hidden edge obeying the gradient limit reproduces the row's readings.
    Empty,
    /// The programs failed on this row.
    Failed,
}

/// Strict bounds over a log: settings, the cached admissible set, and counts.
#[derive(Debug)]
pub struct RowBounds {
    spec: BoundSpec,
    options: BoundsOptions,
    /// Bound every this many fitted rows.
    pub every: usize,
    cache: Option<(Vec<usize>, Vec<u64>, AdmissibleSet)>,
    /// Rows bounded so far.
    pub rows: u64,
    /// Rows whose bounds put the hottest temperature above the limit.
    pub certain: u64,
    /// Rows whose bounds rule the limit out.
    pub ruled_out: u64,
    /// Rows whose admissible set was empty.
    pub empty: u64,
}

impl RowBounds {
    /// Bounds under `gradient_k_per_m` at the case's confidence and temperature limits,
    /// every `every` fitted rows.
    pub fn new(case: &Case, gradient_k_per_m: f64, every: usize) -> Self {
        RowBounds {
            spec: BoundSpec {
                gradient_k_per_m,
                confidence: case.uncertainty.confidence,
                min_temperature_k: case.bounds.min_temperature_k,
                max_temperature_k: case.bounds.max_temperature_k,
            },
            options: BoundsOptions::default(),
            every: every.max(1),
            cache: None,
            rows: 0,
            certain: 0,
            ruled_out: 0,
            empty: 0,
        }
    }

    /// The gradient limit, K/m.
    pub fn gradient_k_per_m(&self) -> f64 {
        self.spec.gradient_k_per_m
    }

    /// Whether the `fitted`-th fitted row (1-based) is bounded; `opening` says the row opens
    /// an alarm episode on its probability.
    pub fn due(&self, fitted: u64, opening: bool) -> bool {
        opening || fitted.saturating_sub(1) % self.every as u64 == 0
    }

    /// The bounds of a fitted row: `readings` indexed like `case.sensors`, the row's fit.
    ///
    /// # Errors
    /// Only for a sensor set the forward model rejects (a sensor on a hidden edge).
    pub fn bound(
        &mut self,
        case: &Case,
        readings: &[Option<f64>],
        fit: &RowFit,
        limit: Option<f64>,
    ) -> Result<RowBound> {
        let used = &fit.used;
        let (sig, _) = crate::estimate::resolve_sigmas(case, used, readings)?;
        let scale = fit.sigma_scale.unwrap_or(1.0);
        let sigmas: Vec<f64> = used.iter().map(|&i| sig[i] * scale).collect();
        let d: Vec<f64> = used
            .iter()
            .map(|&i| readings[i].unwrap_or(f64::NAN))
            .collect();
        let key: Vec<u64> = sigmas.iter().map(|s| s.to_bits()).collect();
        let set = match &self.cache {
            Some((u, k, set)) if u == used && *k == key => set.with_readings(&d)?,
            _ => {
                let points: Vec<Point> = used.iter().map(|&i| case.sensors[i].position).collect();
                let set = AdmissibleSet::new(
                    &case.plate,
                    &points,
                    &d,
                    &sigmas,
                    self.options.discretisation,
                )?;
                self.cache = Some((used.clone(), key, set.clone()));
                set
            }
        };
        self.rows += 1;
        let bound = match bounds_under(&set, &self.spec, &[], &self.options)? {
            BoundsOutcome::Bounded { hottest_k, .. } => RowBound::Interval(hottest_k),
            BoundsOutcome::Empty => RowBound::Empty,
            BoundsOutcome::Failed { .. } => RowBound::Failed,
        };
        match (bound, limit) {
            (RowBound::Interval([lo, _]), Some(l)) if lo > l => self.certain += 1,
            (RowBound::Interval([_, hi]), Some(l)) if hi < l => self.ruled_out += 1,
            (RowBound::Empty, _) => self.empty += 1,
            _ => {}
        }
        Ok(bound)
    }
}
