//! `track`: the estimate on every row of a logger file, the hottest point through time,
//! alarms when a hidden edge is probably over a limit, and the sensors that are failing
//! (the maintenance technician's job in README).
//!
//! [`Tracker`] is fed one [`LoggerRow`] at a time and keeps only bounded state, so a log
//! larger than memory streams through it:
//!
//! 1. [`health::HealthMonitor::before_fit`] records dropouts and stuck readings and says which
//!    sensors the row may use;
//! 2. [`engine::RowEstimator::fit_row`] fits the row with the same model, noise, smoothing and
//!    strength rule as `estimate` (module [`engine`] says how they match), giving the hottest
//!    point, its linear interval and the exceedance probability; with `bootstrap` the
//!    interval and the probability come instead from [`crate::estimate::estimate`] itself on
//!    that row;
//! 3. [`health::HealthMonitor::after_fit`] updates outlier and drift judgements;
//! 4. [`alarm::AlarmTracker`] opens and closes alarm episodes;
//! 5. [`series::TrackSeries`] keeps a fixed number of time bins for `track.svg`.
//!
//! [`Tracker::push_batch`] gives the same records as [`Tracker::push`] on each row, faster on
//! more than one core: with the strength chosen on every row or calibrated, a batch is fitted
//! ahead on a helper thread (with its own [`RowEstimator`]: a row's fit does not depend on the
//! rows before it, [`RowEstimator::fit_row_ahead`]) while the previous batch goes through
//! steps 1 and 3–5 in order on the calling thread, with the parts of step 2 that do depend on
//! the rows before (the exceedance probability and, with the strength chosen per row, the
//! sensor diagnostics, [`RowEstimator::finish_row`]); the calling thread then helps fit the
//! rest of the batch. A row the calibrated strength misfits is refitted in order.
//! A row fitted ahead with sensors other than the ones step 1 then picks (a sensor just found
//! stuck or faulty) is fitted again in order, so the sensor decisions, and every output, are
//! the sequential ones (`docs/track.md`, "Two cores").
//!
//! With `calibrate = N` the smoothing order and strength are chosen once from the first `N`
//! usable rows (the most common order, and the median log-strength of the rows that chose
//! it), and every row, those `N` included, is then fitted with them. Those rows are held in
//! memory until the choice is made (N rows, not the log).
//!
//! | file | role |
//! |---|---|
//! | [`engine`] | per-row fit with a pattern cache, hottest point, linear band, exceedance |
//! | [`health`] | dropout, stuck, outlier and drift detectors |
//! | [`alarm`] | alarm episodes |
//! | [`series`] | bounded time bins for the plot |
//! | (`report::track`, above) | the outputs: `track.csv` rows, `alarms.csv`, `sensors-health.csv`, `summary.json`, text, `track.svg` |
//! | [`synthetic`] | synthetic logs from known truths (demos, tests, benchmark) |

pub mod alarm;
pub mod bounds;
pub mod engine;
pub mod health;
pub mod series;
pub mod synthetic;

use crate::case::{Case, Smoothing, StrengthRule};
use crate::error::Result;
use crate::estimate::{EstimateOptions, SAFETY_CAUTION, strength_of};
use crate::inverse::Strength;
use crate::io::LoggerRow;
use alarm::AlarmTracker;
use engine::{AheadFit, RowEstimator, RowFit, RowStrength};
use health::HealthMonitor;
use series::TrackSeries;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Mutex, PoisonError};

/// Options of `track` beyond the case file.
#[derive(Debug, Clone)]
pub struct TrackOptions {
    /// Override the case's strength rule.
    pub strength: Option<StrengthRule>,
    /// Choose order and strength once on this many usable rows.
    pub calibrate: Option<usize>,
    /// Alarm limit, kelvin.
    pub limit: Option<f64>,
    /// Probability above which a row is in alarm.
    pub probability: f64,
    /// Rows below the probability that end an episode.
    pub clear_rows: usize,
    /// Posterior draws per pattern for the exceedance probability.
    pub draws: usize,
    /// Seed of the draws (and of the bootstrap) [default: the case's].
    pub seed: Option<u64>,
    /// Scan stride of the hottest-point search.
    pub stride: usize,
    /// Never leave out a sensor that has a reading (health is still reported).
    pub keep_all: bool,
    /// Per-row bootstrap (slow) instead of the linear band.
    pub bootstrap: bool,
    /// Bootstrap replicates per row [default: the case's].
    pub replicates: Option<usize>,
    /// Strict bounds under this gradient limit, K/m [default: the case's `[bounds]
    /// max_gradient`, else none] ([`bounds`]).
    pub max_gradient_k_per_m: Option<f64>,
    /// Bound every this many fitted rows (and the row that opens an episode).
    pub bounds_every: usize,
    /// The heat transfer coefficient estimated once from the first rows, when the case has
    /// `h = "unknown"` ([`estimate_h_from_rows`]); the case given to [`Tracker::new`] then
    /// carries `ĥ`.
    pub convection: Option<crate::estimate::convection::ConvectionEstimate>,
}

impl Default for TrackOptions {
    fn default() -> Self {
        TrackOptions {
            strength: None,
            calibrate: None,
            limit: None,
            probability: 0.05,
            clear_rows: 10,
            draws: engine::DEFAULT_DRAWS,
            seed: None,
            stride: engine::SCAN_STRIDE,
            keep_all: false,
            bootstrap: false,
            replicates: None,
            max_gradient_k_per_m: None,
            bounds_every: bounds::DEFAULT_BOUNDS_EVERY,
            convection: None,
        }
    }
}

/// What happened to a row.
#[derive(Debug, Clone, PartialEq)]
pub enum RowStatus {
    /// Fitted.
    Fitted,
    /// Skipped, with the reason.
    Skipped(String),
}

/// One row's outcome, handed to the caller (who writes `track.csv`).
#[derive(Debug)]
pub struct RowRecord<'a> {
    /// The row as read.
    pub row: &'a LoggerRow,
    /// Fitted or skipped.
    pub status: RowStatus,
    /// The fit (meaningful when fitted).
    pub fit: &'a RowFit,
    /// Sensors with a reading that were left out, with the problem.
    pub left_out: &'a [(usize, health::Problem)],
    /// Sensors without a reading.
    pub missing: &'a [usize],
    /// Readings the row could use.
    pub usable: usize,
    /// The row's strict bounds, when it was bounded.
    pub bound: Option<bounds::RowBound>,
}

/// Rows a thread claims at a time when fitting a batch ahead ([`Tracker::push_batch`]).
const CLAIM_ROWS: usize = 8;

/// A batch to fit ahead ([`Tracker::push_batch`]): its rows, a slot per row for the fit, the
/// counter by which the two threads claim rows, and what every row's fit takes.
struct BatchJob {
    rows: Vec<LoggerRow>,
    #[allow(clippy::vec_box)] // boxed slots move by pointer into `Ahead`
    slots: Vec<Mutex<Box<Slot>>>,
    next: AtomicUsize,
    /// Per sensor: left out as stuck or faulty when the batch was handed over.
    left_out: Vec<bool>,
    /// The fewest readings a fit takes.
    need: usize,
    limit: Option<f64>,
    strength: RowStrength,
}

impl BatchJob {
    /// Fit the rows not yet claimed by either thread, each with its guessed sensors; rows
    /// are claimed a few at a time: fewer trips of the counter's and the slots' cache lines
    /// between the cores.
    fn fit_rest(&self, est: &mut RowEstimator) {
        let rows = &self.rows;
        loop {
            let first = self.next.fetch_add(CLAIM_ROWS, Ordering::Relaxed);
            if first >= rows.len() {
                break;
            }
            let end = (first + CLAIM_ROWS).min(rows.len());
            for (row, slot) in rows[first..end].iter().zip(&self.slots[first..end]) {
                let mut guard = slot.lock().unwrap_or_else(PoisonError::into_inner);
                let slot: &mut Slot = &mut guard;
                slot.used.clear();
                slot.used.extend(guessed_sensors(row, &self.left_out));
                slot.fitted = slot.used.len() >= self.need
                    && est
                        .fit_row_ahead(
                            &row.values,
                            &slot.used,
                            self.strength,
                            self.limit,
                            &mut slot.ahead,
                        )
                        .is_ok();
            }
        }
    }
}

/// What the helper thread says when a batch is done: nothing, or the panic that stopped it.
type HelperDone = std::thread::Result<()>;

/// The thread that fits each batch ahead beside the calling thread ([`Tracker::push_batch`]),
/// with its own [`RowEstimator`], started once for the tracker's life. A thread started for
/// each batch, as before, began fitting about 0.4 ms after it was asked to on the 2-core
/// bench machine (its creation, then its wait for a core while the reading thread ran: the
/// scheduler lets a new thread wait), most of the time the calling thread spends finishing
/// the batch before; a thread woken from sleep starts within tens of microseconds.
struct HelperThread {
    /// The jobs' channel (taken and closed on drop, which ends the thread's loop).
    jobs: Option<std::sync::mpsc::Sender<std::sync::Arc<BatchJob>>>,
    done: std::sync::mpsc::Receiver<HelperDone>,
    handle: Option<std::thread::JoinHandle<()>>,
}

impl HelperThread {
    /// Start the thread with `estimator`; `None` when no thread can be started.
    fn start(mut estimator: RowEstimator) -> Option<Self> {
        let (jobs, job_rx) = std::sync::mpsc::channel::<std::sync::Arc<BatchJob>>();
        let (done_tx, done) = std::sync::mpsc::channel::<HelperDone>();
        let handle = std::thread::Builder::new()
            .name("edgetherm-track-ahead".into())
            .spawn(move || {
                for job in job_rx {
                    let outcome = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
                        job.fit_rest(&mut estimator);
                    }));
                    // the batch goes back to the calling thread whole: let go of it first
                    drop(job);
                    if done_tx.send(outcome).is_err() {
                        break;
                    }
                }
            })
            .ok()?;
        Some(HelperThread {
            jobs: Some(jobs),
            done,
            handle: Some(handle),
        })
    }
}

impl Drop for HelperThread {
    fn drop(&mut self) {
        drop(self.jobs.take());
        if let Some(handle) = self.handle.take() {
            let _ = handle.join();
        }
    }
}

/// Rows fitted ahead ([`Tracker::push_batch`]), each with its sensors that have a reading
/// less those left out as stuck or faulty when the batch was fitted, and the fits (not
/// fitted: too few sensors or an error; the row is then fitted in order).
struct Ahead {
    rows: Vec<LoggerRow>,
    #[allow(clippy::vec_box)] // a slot is a few hundred bytes, moved several times per row
    fits: Vec<Box<Slot>>,
}

/// One row fitted ahead: whether the fit succeeded, the sensors it was fitted with, and its
/// buffers (reused row after row).
#[derive(Default)]
struct Slot {
    fitted: bool,
    used: Vec<usize>,
    ahead: AheadFit,
}

enum Mode {
    Calibrating {
        rows: Vec<LoggerRow>,
        choices: Vec<(usize, f64)>,
        strength: Strength,
        target: usize,
    },
    Ready(RowStrength),
}

/// The streaming tracker.
pub struct Tracker {
    case: Case,
    options: TrackOptions,
    estimator: RowEstimator,
    mode: Mode,
    health: HealthMonitor,
    alarms: AlarmTracker,
    series: TrackSeries,
    used: Vec<usize>,
    left_out: Vec<(usize, health::Problem)>,
    /// The sensors in use when the open alarm episode began (ascending).
    episode_sensors: Vec<usize>,
    missing: Vec<usize>,
    fit: RowFit,
    /// Rows read, fitted, skipped.
    pub counts: Counts,
    first_time: Option<String>,
    last_time: Option<String>,
    hottest: Option<(String, RowFit)>,
    seed: u64,
    /// Strict bounds on rows, with a gradient limit.
    bounds: Option<bounds::RowBounds>,
    bound: Option<bounds::RowBound>,
    /// The helper thread of [`Self::push_batch`] (started on its first call).
    helper: Option<HelperThread>,
    /// Buffers of rows fitted ahead, for the next batch (boxed: they move by pointer).
    #[allow(clippy::vec_box)]
    spare: Vec<Box<Slot>>,
    /// The rows of the last batch finished, for the reader to fill again
    /// ([`Self::take_spent_rows`]).
    spent: Option<Vec<LoggerRow>>,
    /// Rows whose fit was made ahead and used ([`Self::rows_fitted_ahead`]).
    fitted_ahead: u64,
    /// The batch fitted ahead, waiting for its turn.
    ahead: Option<Ahead>,
}

/// Row counts.
#[derive(Debug, Clone, Copy, Default, serde::Serialize)]
pub struct Counts {
    /// Rows read.
    pub rows: u64,
    /// Rows fitted.
    pub fitted: u64,
    /// Rows skipped (too few readings, or a fit that failed).
    pub skipped: u64,
    /// Rows with at least one sensor left out by the health checks.
    pub with_left_out: u64,
    /// Rows refitted with the rule because the calibrated setting did not fit them.
    pub refitted: u64,
}

impl std::fmt::Debug for Tracker {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Tracker")
            .field("counts", &self.counts)
            .finish()
    }
}

impl Tracker {
    /// A tracker for a case.
    ///
    /// # Errors
    /// As [`RowEstimator::new`].
    pub fn new(case: &Case, options: TrackOptions) -> Result<Self> {
        let seed = options.seed.unwrap_or(case.uncertainty.seed);
        let estimator = RowEstimator::new(case, options.draws, seed, options.stride)?;
        let rule = options.strength.unwrap_or(case.fit.strength);
        let strength = strength_of(rule);
        let mode = match (strength, options.calibrate, case.fit.smoothing.order()) {
            (Strength::Fixed(l), _, Some(order)) => Mode::Ready(RowStrength::Fixed {
                order,
                lambda: l,
                refit: None,
            }),
            (s, Some(n), _) if n > 0 => Mode::Calibrating {
                rows: Vec::new(),
                choices: Vec::new(),
                strength: s,
                target: n,
            },
            (s, _, _) => Mode::Ready(RowStrength::PerRow(s)),
        };
        let bounds = options
            .max_gradient_k_per_m
            .or(case.bounds.max_gradient_k_per_m)
            .map(|g| bounds::RowBounds::new(case, g, options.bounds_every));
        Ok(Tracker {
            bounds,
            bound: None,
            health: HealthMonitor::new(case.sensors.len()),
            alarms: AlarmTracker::new(options.probability, options.clear_rows),
            series: TrackSeries::new(series::DEFAULT_BINS),
            case: case.clone(),
            options,
            estimator,
            mode,
            used: Vec::new(),
            left_out: Vec::new(),
            episode_sensors: Vec::new(),
            missing: Vec::new(),
            fit: RowFit::default(),
            counts: Counts::default(),
            first_time: None,
            last_time: None,
            hottest: None,
            seed,
            helper: None,
            spare: Vec::new(),
            spent: None,
            fitted_ahead: 0,
            ahead: None,
        })
    }

    /// The strength setting rows are fitted with once calibration (if any) is done.
    pub fn row_strength(&self) -> Option<RowStrength> {
        match self.mode {
            Mode::Ready(s) => Some(s),
            Mode::Calibrating { .. } => None,
        }
    }

    /// Feed one row; `sink` receives the outcome of every row processed (with `calibrate`,
    /// the first rows are handed over only once the strength is chosen).
    ///
    /// # Errors
    /// Invalid input that no row can get around (a strength rule that cannot be applied),
    /// and errors from `sink`.
    pub fn push(
        &mut self,
        row: &LoggerRow,
        sink: &mut dyn FnMut(&RowRecord<'_>) -> Result<()>,
    ) -> Result<()> {
        if let Mode::Calibrating {
            rows,
            choices,
            strength,
            target,
        } = &mut self.mode
        {
            rows.push(row.clone());
            let used: Vec<usize> = (0..row.values.len())
                .filter(|&i| row.values[i].is_some())
                .collect();
            if used.len() >= self.estimator.min_readings() {
                if let Ok(c) = self.estimator.choose(&row.values, &used, *strength) {
                    choices.push(c);
                }
            }
            if choices.len() >= *target {
                self.end_calibration(sink)?;
            }
            return Ok(());
        }
        self.flush_ahead(sink)?;
        self.process(row, None, sink)
    }

    /// Feed a batch of rows: the same records, in the same order, as [`Self::push`] on each,
    /// but once the strength is chosen on every row or calibrated, with more than one thread
    /// allowed (`rayon::current_num_threads`), the batch is fitted ahead on a helper thread
    /// while the previous batch is finished here, and this thread then helps fit the rest
    /// (module doc). The last batch's records come with the next call, [`Self::push`] or
    /// [`Self::finish`].
    ///
    /// # Errors
    /// As [`Self::push`].
    pub fn push_batch(
        &mut self,
        rows: Vec<LoggerRow>,
        sink: &mut dyn FnMut(&RowRecord<'_>) -> Result<()>,
    ) -> Result<()> {
        let strength = match self.mode {
            Mode::Ready(s)
                if !self.options.bootstrap
                    && !self.estimator.reference_path()
                    && rayon::current_num_threads() > 1 =>
            {
                s
            }
            _ => {
                for row in &rows {
                    self.push(row, sink)?;
                }
                return Ok(());
            }
        };
        let helper = match self.helper.take() {
            Some(h) => Some(h),
            None => HelperThread::start(RowEstimator::new(
                &self.case,
                self.options.draws,
                self.seed,
                self.options.stride,
            )?),
        };
        let Some(helper) = helper else {
            // no thread could be started: the rows one after another, as without one
            for row in &rows {
                self.push(row, sink)?;
            }
            return Ok(());
        };
        let left_out: Vec<bool> = (0..self.case.sensors.len())
            .map(|i| !self.options.keep_all && self.health.left_out_now(i))
            .collect();
        let slots: Vec<Mutex<Box<Slot>>> = rows
            .iter()
            .map(|_| Mutex::new(self.spare.pop().unwrap_or_default()))
            .collect();
        let job = std::sync::Arc::new(BatchJob {
            rows,
            slots,
            next: AtomicUsize::new(0),
            left_out,
            need: self.estimator.min_readings(),
            limit: self.options.limit,
            strength,
        });
        let sent = helper
            .jobs
            .as_ref()
            .is_some_and(|jobs| jobs.send(std::sync::Arc::clone(&job)).is_ok());
        let pending = self.ahead.take();
        let done = match pending {
            Some(a) => self.commit_ahead(a, sink),
            None => Ok(()),
        };
        job.fit_rest(&mut self.estimator);
        if sent {
            match helper.done.recv() {
                Ok(Ok(())) => {}
                Ok(Err(panic)) => std::panic::resume_unwind(panic),
                Err(_) => {
                    return Err(crate::error::Error::Internal(
                        "the thread fitting rows ahead stopped".into(),
                    ));
                }
            }
        }
        self.helper = Some(helper);
        // the helper let go of the batch before it said so
        let job = std::sync::Arc::try_unwrap(job).map_err(|_| {
            crate::error::Error::Internal("a batch fitted ahead is still in use".into())
        })?;
        self.ahead = Some(Ahead {
            rows: job.rows,
            fits: job
                .slots
                .into_iter()
                .map(|s| s.into_inner().unwrap_or_else(PoisonError::into_inner))
                .collect(),
        });
        done
    }

    /// Finish the rows fitted ahead, in order.
    fn commit_ahead(
        &mut self,
        ahead: Ahead,
        sink: &mut dyn FnMut(&RowRecord<'_>) -> Result<()>,
    ) -> Result<()> {
        let mut result = Ok(());
        for (row, mut slot) in ahead.rows.iter().zip(ahead.fits) {
            if result.is_ok() {
                let s: &mut Slot = &mut slot;
                let fit = s.fitted.then_some((s.used.as_slice(), &mut s.ahead));
                result = self.process(row, fit, sink);
            }
            self.spare.push(slot);
        }
        self.spent = Some(ahead.rows);
        result
    }

    /// The rows of the last batch [`Self::push_batch`] finished, done with: a reader can
    /// fill them again instead of allocating new ones (their buffers are reused).
    pub fn take_spent_rows(&mut self) -> Option<Vec<LoggerRow>> {
        self.spent.take()
    }

    /// Finish the batch fitted ahead, if any.
    fn flush_ahead(&mut self, sink: &mut dyn FnMut(&RowRecord<'_>) -> Result<()>) -> Result<()> {
        match self.ahead.take() {
            Some(a) => self.commit_ahead(a, sink),
            None => Ok(()),
        }
    }

    fn end_calibration(
        &mut self,
        sink: &mut dyn FnMut(&RowRecord<'_>) -> Result<()>,
    ) -> Result<()> {
        let Mode::Calibrating {
            rows,
            choices,
            strength,
            ..
        } = std::mem::replace(
            &mut self.mode,
            Mode::Ready(RowStrength::PerRow(Strength::Fixed(1.0))),
        )
        else {
            return Ok(());
        };
        self.mode = Mode::Ready(match calibrated(&choices, self.case.fit.smoothing) {
            Some((order, lambda)) => RowStrength::Fixed {
                order,
                lambda,
                refit: Some(strength),
            },
            None => RowStrength::PerRow(strength),
        });
        for r in &rows {
            self.process(r, None, sink)?;
        }
        Ok(())
    }

    /// One row: which sensors it uses, its fit (`ahead`: the row's fit without its
    /// exceedance and diagnostics, made ahead without the sensors marked, used if the row's
    /// sensors are those), then what follows from a fitted row ([`Self::after_fitted`]), and
    /// the record handed to `sink`.
    fn process(
        &mut self,
        row: &LoggerRow,
        ahead: Option<(&[usize], &mut AheadFit)>,
        sink: &mut dyn FnMut(&RowRecord<'_>) -> Result<()>,
    ) -> Result<()> {
        let Mode::Ready(strength) = self.mode else {
            return Ok(());
        };
        self.counts.rows += 1;
        self.note_time(row);
        self.choose_sensors(row);
        let status = self.fit_status(row, strength, ahead)?;
        match &status {
            RowStatus::Fitted => self.after_fitted(row),
            RowStatus::Skipped(_) => {
                self.counts.skipped += 1;
                self.series.push(
                    row.time_s,
                    None,
                    self.alarms.in_alarm(),
                    !(self.left_out.is_empty() && self.missing.is_empty()),
                );
            }
        }
        sink(&RowRecord {
            row,
            status,
            fit: &self.fit,
            left_out: &self.left_out,
            missing: &self.missing,
            usable: self.used.len(),
            bound: self.bound,
        })
    }

    /// Keep the first and the last time of the log.
    fn note_time(&mut self, row: &LoggerRow) {
        if self.first_time.is_none() {
            self.first_time = Some(row.time_text.clone());
        }
        match &mut self.last_time {
            Some(t) => {
                t.clear();
                t.push_str(&row.time_text);
            }
            None => self.last_time = Some(row.time_text.clone()),
        }
    }

    /// The sensors the row uses (sensor health decides, [`health`]), the ones without a
    /// reading, and the ones left out with their problem.
    fn choose_sensors(&mut self, row: &LoggerRow) {
        let keep_all = self.options.keep_all;
        self.health.before_fit(
            &row.time_text,
            row.line,
            &row.values,
            keep_all,
            &mut self.used,
        );
        self.missing.clear();
        self.missing
            .extend((0..row.values.len()).filter(|&i| row.values[i].is_none()));
        self.left_out.clear();
        // `used` is ascending (before_fit pushes sensors in order) and holds only sensors
        // with a reading: a merge finds the ones left out without a search per sensor
        debug_assert!(self.used.windows(2).all(|w| w[0] < w[1]));
        let mut next_used = self.used.iter().copied().peekable();
        for i in 0..row.values.len() {
            if row.values[i].is_none() {
                continue;
            }
            if next_used.next_if_eq(&i).is_none() {
                self.left_out.push((i, self.health.problem_of(i)));
            }
        }
        if !self.left_out.is_empty() {
            self.counts.with_left_out += 1;
        }
    }

    /// Fit the row ([`engine::RowEstimator::fit_row`], and the bootstrap when asked for), or
    /// say why it is skipped. An invalid first row is an error when the strength rule runs
    /// on every row: the settings are wrong, not the row.
    fn fit_status(
        &mut self,
        row: &LoggerRow,
        strength: RowStrength,
        ahead: Option<(&[usize], &mut AheadFit)>,
    ) -> Result<RowStatus> {
        let need = self.estimator.min_readings();
        if self.used.len() < need {
            return Ok(RowStatus::Skipped(format!(
                "{} usable readings, the model needs at least {need}",
                self.used.len()
            )));
        }
        let fitted = match (ahead, strength) {
            (Some((guessed, fit)), strength) if self.used == guessed => {
                // the row's numbers move in; the buffers they leave go back with the slot
                std::mem::swap(&mut self.fit, &mut fit.fit);
                self.fitted_ahead += 1;
                self.estimator
                    .finish_row(&row.values, &self.used, strength, fit, &mut self.fit)
            }
            _ => self.estimator.fit_row(
                &row.values,
                &self.used,
                strength,
                self.options.limit,
                &mut self.fit,
            ),
        };
        Ok(match fitted {
            Ok(()) => {
                if self.options.bootstrap {
                    self.bootstrap_row(row, strength)?;
                }
                RowStatus::Fitted
            }
            Err(e @ crate::Error::Invalid { .. }) if self.counts.fitted == 0 => {
                if matches!(strength, RowStrength::PerRow(Strength::Rule(_))) {
                    return Err(e);
                }
                RowStatus::Skipped(e.to_string())
            }
            Err(e) => RowStatus::Skipped(e.to_string()),
        })
    }

    /// What follows from a fitted row: the sensor decisions ([`health`]), strict bounds when
    /// due ([`bounds`]), the alarm state ([`alarm`]), the hottest row, the series for the
    /// plot.
    fn after_fitted(&mut self, row: &LoggerRow) {
        self.counts.fitted += 1;
        self.counts.refitted += u64::from(self.fit.refitted);
        self.judge_sensors(row);
        // strict bounds on the rows that are due (module `bounds`)
        self.bound = None;
        let opening = !self.alarms.in_alarm()
            && self
                .fit
                .exceedance
                .is_some_and(|p| p > self.options.probability);
        if let Some(b) = self.bounds.as_mut() {
            if b.due(self.counts.fitted, opening) {
                self.bound = Some(
                    b.bound(&self.case, &row.values, &self.fit, self.options.limit)
                        .unwrap_or(bounds::RowBound::Failed),
                );
            }
        }
        let certain = matches!(
            (self.bound, self.options.limit),
            (Some(bounds::RowBound::Interval([lo, _])), Some(l)) if lo > l
        );
        let hold = self.alarms.in_alarm()
            && self
                .episode_sensors
                .iter()
                .any(|i| self.used.binary_search(i).is_err());
        self.alarms
            .update(&row.time_text, row.line, &self.fit, hold, certain);
        if self.alarms.just_opened() {
            self.episode_sensors.clear();
            self.episode_sensors.extend_from_slice(&self.used);
        }
        if self
            .hottest
            .as_ref()
            .is_none_or(|(_, h)| self.fit.temperature > h.temperature)
        {
            self.hottest = Some((row.time_text.clone(), self.fit.clone()));
        }
        self.series.push(
            row.time_s,
            Some(&self.fit),
            self.alarms.in_alarm(),
            // marked in track.svg: a sensor left out, or one without a reading (a dropout)
            !(self.left_out.is_empty() && self.missing.is_empty()),
        );
    }

    /// The sensor decisions after a fitted row: estimate's fault model, then the physics
    /// (module `health`), both fitted without the sensors a candidate is judged without.
    fn judge_sensors(&mut self, row: &LoggerRow) {
        let rule = strength_of(self.options.strength.unwrap_or(self.case.fit.strength));
        let (est, used, order) = (&self.estimator, &self.used, self.fit.order);
        let without_these = |without: &[usize]| -> Vec<usize> {
            used.iter()
                .copied()
                .filter(|k| !without.contains(k))
                .collect()
        };
        let mut confirm = |i: usize, without: &[usize]| {
            est.loo_verdict(&row.values, &without_these(without), i, order, rule)
                .map(|v| (v.z, v.fault_probability))
        };
        let gradient = self
            .options
            .max_gradient_k_per_m
            .or(self.case.bounds.max_gradient_k_per_m);
        let mut hot = |i: usize, without: &[usize]| {
            est.hot_verdict(
                &row.values,
                &without_these(without),
                i,
                order,
                rule,
                gradient,
            )
            .map_or(f64::INFINITY, |h| h.score())
        };
        self.health.after_fit(
            &row.time_text,
            row.line,
            &self.fit.diagnostics,
            &mut confirm,
            &mut hot,
        );
    }

    fn bootstrap_row(&mut self, row: &LoggerRow, strength: RowStrength) -> Result<()> {
        let mut case = self.case.clone();
        let mut readings: Vec<Option<f64>> = vec![None; row.values.len()];
        for &i in &self.used {
            readings[i] = row.values[i];
        }
        let rule = match strength {
            RowStrength::Fixed { order, lambda, .. } if !self.fit.refitted => {
                case.fit.smoothing = Smoothing::of_penalty_order(order);
                Some(StrengthRule::Fixed(lambda))
            }
            _ => self.options.strength,
        };
        let opts = EstimateOptions {
            limit: self.options.limit,
            alarm_probability: self.options.probability,
            keep_all: true,
            grid: (2, 2),
            replicates: self.options.replicates,
            seed: Some(self.seed),
            strength: rule,
            ..EstimateOptions::default()
        };
        let r = crate::estimate::estimate(&case, &readings, &opts, None)?;
        self.fit.edge = Some(r.hottest.edge);
        self.fit.position = r.hottest.position;
        self.fit.position_interval = r.hottest.position_interval;
        self.fit.temperature = r.hottest.temperature;
        self.fit.temperature_interval = r.hottest.temperature_interval;
        self.fit.exceedance = r.exceedance.map(|e| e.probability);
        Ok(())
    }

    /// Finish: process rows still held for calibration (with whatever was learnt from them)
    /// and close open alarm episodes.
    ///
    /// # Errors
    /// As [`Self::push`].
    pub fn finish(&mut self, sink: &mut dyn FnMut(&RowRecord<'_>) -> Result<()>) -> Result<()> {
        self.flush_ahead(sink)?;
        if matches!(self.mode, Mode::Calibrating { .. }) {
            self.end_calibration(sink)?;
        }
        Ok(())
    }

    /// A snapshot of everything but the rows: for the summary files.
    pub fn snapshot(&self) -> TrackSummary {
        let (strength_mode, smoothing, lambda) = match self.mode {
            Mode::Ready(RowStrength::Fixed { order, lambda, .. }) => (
                if self.options.calibrate.is_some() {
                    StrengthMode::Calibrated
                } else {
                    StrengthMode::Fixed
                },
                Some(Smoothing::of_penalty_order(order)),
                Some(lambda),
            ),
            Mode::Ready(RowStrength::PerRow(_)) => (StrengthMode::PerRow, None, None),
            Mode::Calibrating { .. } => (StrengthMode::Calibrating, None, None),
        };
        let mut cautions = vec![SAFETY_CAUTION.to_string()];
        cautions.push(
            "Each row is treated as a steady state: while the plate is warming or cooling \
             quickly the estimate lags and is biased."
                .to_string(),
        );
        cautions.push(
            "Thermocouple tolerances act as a fixed offset per sensor that persists through \
             the log; the per-row bands treat reading errors as independent from row to row, \
             so a trend across rows is better known than any single row."
                .to_string(),
        );
        if let Some(c) = &self.options.convection {
            let three = crate::estimate::convection::three_digits;
            cautions.push(format!(
                "The heat transfer coefficient of the {} edge was estimated once, from the \
                 first rows of the log: h = {} W/(m² K), {:.0} % interval [{}, {}] W/(m² K){}. \
                 Every row is fitted with that h; the per-row bands do not include its \
                 uncertainty. If the coolant flow changes during the log, state h or split the \
                 log.",
                c.edge,
                three(c.h),
                100.0 * self.case.uncertainty.confidence,
                three(c.h_interval[0]),
                three(c.h_interval[1]),
                if c.identified() {
                    ""
                } else {
                    " - the rows do not pin h down (the whole search range)"
                }
            ));
        }
        if self.counts.skipped > 0 {
            cautions.push(format!(
                "{} rows were skipped (too few usable readings); see the status column of \
                 track.csv.",
                self.counts.skipped
            ));
        }
        TrackSummary {
            counts: self.counts,
            first_time: self.first_time.clone(),
            last_time: self.last_time.clone(),
            strength_mode,
            smoothing,
            lambda,
            limit: self.options.limit,
            probability: self.options.probability,
            clear_rows: self.options.clear_rows,
            draws: self.options.draws,
            bootstrap: self.options.bootstrap,
            seed: self.seed,
            episodes: self.alarms.episodes_with_open(),
            events: self.health.events().to_vec(),
            unlisted_events: self.health.unlisted,
            refuted: self.health.refuted,
            hottest: self.hottest.clone(),
            confidence: self.case.uncertainty.confidence,
            bounds: self.bounds.as_ref().map(|b| BoundsCounts {
                max_gradient_k_per_m: b.gradient_k_per_m(),
                every: b.every,
                rows: b.rows,
                limit_certain: b.certain,
                limit_ruled_out: b.ruled_out,
                empty: b.empty,
            }),
            cautions,
            convection: self.options.convection.clone(),
        }
    }

    /// The time bins for `track.svg`.
    pub fn series(&self) -> &TrackSeries {
        &self.series
    }

    /// The case.
    pub fn case(&self) -> &Case {
        &self.case
    }

    /// The alarm episode open now, if any (`--follow` prints its start as it happens).
    pub fn open_alarm(&self) -> Option<&alarm::Episode> {
        self.alarms.current()
    }

    /// The alarm episodes closed so far, oldest first.
    pub fn closed_alarms(&self) -> &[alarm::Episode] {
        self.alarms.closed()
    }

    /// Whether any alarm episode has started.
    pub fn any_alarm(&self) -> bool {
        self.alarms.any()
    }

    /// How many rows had their fit made ahead on a worker thread and used
    /// ([`Self::push_batch`]; the others were fitted in order). It depends on the thread
    /// count, so it is in no output.
    pub fn rows_fitted_ahead(&self) -> u64 {
        self.fitted_ahead
    }

    /// The per-row estimator (for checks).
    pub fn estimator_mut(&mut self) -> &mut RowEstimator {
        &mut self.estimator
    }
}

/// The sensors a row fitted ahead uses: those with a reading, less those marked left out.
fn guessed_sensors<'a>(
    row: &'a LoggerRow,
    left_out: &'a [bool],
) -> impl Iterator<Item = usize> + 'a {
    (0..row.values.len())
        .filter(|&i| row.values[i].is_some() && !left_out.get(i).copied().unwrap_or(false))
}

/// The calibrated order and λ from the rows' choices: the most common order (ties go to the
/// earlier of [`crate::estimate::AUTO_ORDERS`]), then the median of log λ over the rows that
/// chose it.
pub fn calibrated(choices: &[(usize, f64)], smoothing: Smoothing) -> Option<(usize, f64)> {
    if choices.is_empty() {
        return None;
    }
    let order = match smoothing.order() {
        Some(o) => o,
        None => {
            let mut best = (0usize, crate::estimate::AUTO_ORDERS[0]);
            for o in crate::estimate::AUTO_ORDERS {
                let n = choices.iter().filter(|c| c.0 == o).count();
                if n > best.0 {
                    best = (n, o);
                }
            }
            best.1
        }
    };
    let mut logs: Vec<f64> = choices
        .iter()
        .filter(|c| c.0 == order)
        .map(|c| c.1.ln())
        .collect();
    if logs.is_empty() {
        return None;
    }
    logs.sort_by(f64::total_cmp);
    let n = logs.len();
    let med = if n % 2 == 1 {
        logs[n / 2]
    } else {
        0.5 * (logs[n / 2 - 1] + logs[n / 2])
    };
    Some((order, med.exp()))
}

/// How the smoothing strength of a log is set.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StrengthMode {
    /// Chosen by the case's rule on every row.
    PerRow,
    /// Chosen once on the first rows (`--calibrate`), then fixed.
    Calibrated,
    /// Fixed by the case or the command line.
    Fixed,
    /// Still collecting the calibration rows (the log ended first).
    Calibrating,
}

impl StrengthMode {
    /// The word used in summaries.
    pub fn name(self) -> &'static str {
        match self {
            StrengthMode::PerRow => "per-row",
            StrengthMode::Calibrated => "calibrated",
            StrengthMode::Fixed => "fixed",
            StrengthMode::Calibrating => "calibrating",
        }
    }
}

impl std::fmt::Display for StrengthMode {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// Everything the summary files report.
#[derive(Debug, Clone)]
pub struct TrackSummary {
    /// Row counts.
    pub counts: Counts,
    /// Time of the first row processed.
    pub first_time: Option<String>,
    /// Time of the last row processed.
    pub last_time: Option<String>,
    /// How the strength was set.
    pub strength_mode: StrengthMode,
    /// The smoothing, when fixed.
    pub smoothing: Option<Smoothing>,
    /// Fixed λ, when fixed.
    pub lambda: Option<f64>,
    /// Limit, kelvin.
    pub limit: Option<f64>,
    /// Alarm probability.
    pub probability: f64,
    /// Rows that clear an episode.
    pub clear_rows: usize,
    /// Posterior draws per pattern.
    pub draws: usize,
    /// Per-row bootstrap.
    pub bootstrap: bool,
    /// Seed.
    pub seed: u64,
    /// Alarm episodes (the last may be open).
    pub episodes: Vec<alarm::Episode>,
    /// Sensor problems.
    pub events: Vec<health::HealthEvent>,
    /// Problems counted but not listed.
    pub unlisted_events: u64,
    /// Health candidates that `estimate`'s fault model did not confirm.
    pub refuted: u64,
    /// The hottest row of the log: its time and fit.
    pub hottest: Option<(String, RowFit)>,
    /// Confidence of the intervals.
    pub confidence: f64,
    /// Strict bounds on rows, with a gradient limit.
    pub bounds: Option<BoundsCounts>,
    /// Cautions.
    pub cautions: Vec<String>,
    /// The heat transfer coefficient estimated from the first rows, if the case had
    /// `h = "unknown"`.
    pub convection: Option<crate::estimate::convection::ConvectionEstimate>,
}

/// What the strict bounds found over a log ([`bounds`]).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct BoundsCounts {
    /// The gradient limit, K/m.
    pub max_gradient_k_per_m: f64,
    /// Bounded every this many fitted rows (and the rows that open an episode).
    pub every: usize,
    /// Rows bounded.
    pub rows: u64,
    /// Bounded rows whose hottest temperature is above the limit for every admissible edge.
    pub limit_certain: u64,
    /// Bounded rows where the limit is ruled out.
    pub limit_ruled_out: u64,
    /// Bounded rows whose admissible set was empty (the gradient limit contradicts them).
    pub empty: u64,
}

/// Rows the estimate of an unknown `h` uses at most (spread evenly over the rows read).
pub const H_ROWS: usize = 25;

/// Estimate a case's unknown heat transfer coefficient once from logger rows (readings in
/// kelvin, aligned with `case.sensors`): up to [`H_ROWS`] of them, spread evenly, their
/// marginal likelihoods added ([`crate::estimate::convection::profile_h`]). Rows with too few
/// readings for a fit are passed over.
///
/// # Errors
/// [`crate::Error::Invalid`] when no row has enough readings; errors of the profile.
pub fn estimate_h_from_rows(
    case: &Case,
    rows: &[Vec<Option<f64>>],
) -> Result<crate::estimate::convection::ConvectionEstimate> {
    let needed = case.sensors.len().min(3);
    let usable: Vec<&Vec<Option<f64>>> = rows
        .iter()
        .filter(|r| r.iter().filter(|v| v.is_some()).count() >= needed)
        .collect();
    if usable.is_empty() {
        return Err(crate::Error::invalid_field(
            "--log",
            "the log has no row with enough readings to estimate the unknown heat transfer \
             coefficient (h = \"unknown\"); state h in plate.toml",
        ));
    }
    let take = usable.len().min(H_ROWS);
    let chosen: Vec<Vec<Option<f64>>> = (0..take)
        .map(|i| usable[i * usable.len() / take].clone())
        .collect();
    crate::estimate::convection::profile_h(case, &chosen, &EstimateOptions::default())
}
