//! Sensor health over a log: which thermocouple is failing, when, and how.
//!
//! Four detectors, each simple enough to check by hand; the thresholds are the named
//! constants below (design choices of this project, set so that a healthy seeded log of many
//! thousand rows raises none, see `tests/integration/track_alarms.rs`; not from a standard):
//!
//! | problem | judged when | left out |
//! |---|---|---|
//! | `dropout` | the row has no reading (empty cell, NaN, a fault marker) | the row itself |
//! | `stuck` | the reading has not changed at all for [`STUCK_ROWS`] rows in a row | from the row that completes the run until the reading changes |
//! | `outlier` | the leave-one-out fault probability of `estimate`'s fault model exceeds [`crate::estimate::fit::FAULT_POSTERIOR`] for [`OUTLIER_ROWS`] rows in a row | from the next row until its prediction check passes for [`CLEAR_ROWS`] rows in a row |
//! | `doubtful` | an `outlier` or `drift` candidate reads above the others' prediction and a hot feature of a hidden edge explains it (a hot spot or a fault) | never; ends when its prediction check passes for [`CLEAR_ROWS`] rows in a row |
//! | `drift` | the straight line fitted to its standardised residual (clipped to ±[`DRIFT_CLIP_Z`]) over the last [`DRIFT_WINDOW`] rows changes by more than [`DRIFT_CHANGE`] across the window and ends beyond [`DRIFT_LEVEL`]; the reported start is where that line crosses zero; a candidate that `estimate`'s model refutes is tried again after a wait that doubles each time ([`MAX_DRIFT_BACKOFF`]) | as for `outlier` |
//!
//! Before a sensor is left out, the candidate is confirmed with `estimate`'s own fault model
//! on that row ([`crate::estimate::fit::loo_residuals`], whose prediction is averaged over the
//! smoothing strength): a real but narrow hot spot seen by one or two sensors makes their
//! plug-in residuals large when the strength is fixed (`--calibrate` on a quiet stretch), but
//! rougher strengths that the other readings allow explain it, and the averaged model does not
//! call it a fault. Then the physics: a candidate reading above the others' prediction is not
//! left out when a hot feature of a hidden edge explains its reading together with theirs
//! ([`crate::estimate::explain`]; the caller's `confirm` does both). A refuted candidate waits
//! twice as long before its next try. When a hot feature explains a candidate, the lesser
//! candidates of that row are not tried: their evidence came from fits that include the
//! possible witness of a hot spot, and a neighbour reading low beside it is no fault.
//!
//! A sensor that is left out is still checked, against the prediction of the fit without it
//! (the same distribution the leave-one-out check uses), so it comes back when it recovers;
//! a left-out sensor reading above that prediction also passes when a hot feature of a
//! hidden edge clearly explains its reading ([`crate::estimate::explain`], below the
//! readmission threshold `HOT_READMIT_CHI2`, stricter than the one that keeps a sensor in, so
//! that a borderline sensor does not go out and come back row after row): it has become the
//! witness of a hot spot, not a faulty sensor.
//! At most one sensor is newly left out per row for `outlier`/`drift` (the worst by its
//! standardised residual; the others' outlier runs and drift windows then start afresh, since their
//! evidence came from fits that included it), and never more than a quarter of the sensors at once,
//! as in `estimate`'s fault search: one gross fault makes its neighbours' residuals look odd too,
//! and dropping the only sensors that see a real hot spot would hide it.

use crate::estimate::explain::{HOT_READMIT_CHI2, HOT_REFUTE_CHI2};
use serde::Serialize;

/// A reading unchanged for this many rows is judged stuck.
pub const STUCK_ROWS: usize = 30;
/// Rows in a row over the fault probability before a sensor is judged an outlier.
pub const OUTLIER_ROWS: usize = 5;
/// Rows in a row of passing checks before a left-out sensor is used again.
pub const CLEAR_ROWS: usize = 20;
/// Rows in the drift window.
pub const DRIFT_WINDOW: usize = 120;
/// Change of the fitted residual trend across the window, in standard deviations.
pub const DRIFT_CHANGE: f64 = 3.0;
/// The standardised residuals enter the drift window clipped to ±this: one wild row (a row
/// whose own noise estimate comes out near zero, which scales every sensor's residual up
/// by orders of magnitude) would otherwise tilt the fitted line of every sensor for a whole
/// window. A steady drift crosses [`DRIFT_LEVEL`] long before it reaches the clip.
pub const DRIFT_CLIP_Z: f64 = 10.0;
/// The fitted trend's value at the window's end, in standard deviations.
pub const DRIFT_LEVEL: f64 = 3.0;
/// After each refuted candidate a sensor needs twice as many rows before the next try, up
/// to `OUTLIER_ROWS << MAX_BACKOFF`.
pub const MAX_BACKOFF: u32 = 8;
/// The drift trend is evaluated every this many rows (it costs O(window) per sensor).
pub const DRIFT_EVERY: u64 = 25;
/// After each refuted drift candidate in a row, a sensor's trend waits twice as long before
/// it is evaluated again, up to `DRIFT_EVERY << MAX_DRIFT_BACKOFF` rows (1,600, about the
/// longest wait of an outlier candidate); an evaluation that finds no drift starts afresh.
/// Without it a misfit that `estimate`'s model explains (a hot spot growing faster than the
/// reference strength follows) was confirmed again every `DRIFT_EVERY` rows, at the cost of
/// a decomposition each time.
pub const MAX_DRIFT_BACKOFF: u32 = 6;
/// A left-out sensor passes its check when its standardised residual is within this.
pub const CLEAR_Z: f64 = 2.5;
/// At most this many recorded problems per sensor (later ones are counted, not listed).
pub const MAX_EVENTS_PER_SENSOR: usize = 500;

/// The caller's leave-one-out verdict on sensor `i` fitted without the sensors given:
/// `(standardised residual, fault probability)` ([`HealthMonitor::after_fit`]).
pub type ConfirmFn<'a> = dyn FnMut(usize, &[usize]) -> Option<(f64, f64)> + 'a;

/// The kind of a sensor problem.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Problem {
    /// No reading.
    Dropout,
    /// Reading not changing.
    Stuck,
    /// Persistently far from what the other sensors predict.
    Outlier,
    /// Residual trending away.
    Drift,
    /// Reading above what the others predict, by as much as an outlier or a drift, but a hot
    /// feature of a hidden edge explains it: a hot spot or a fault. Never left out.
    Doubtful,
}

impl Problem {
    /// The word used in outputs.
    pub fn name(self) -> &'static str {
        match self {
            Problem::Dropout => "dropout",
            Problem::Stuck => "stuck",
            Problem::Outlier => "outlier",
            Problem::Drift => "drift",
            Problem::Doubtful => "doubtful",
        }
    }
}

/// One stretch of rows in which a sensor had a problem.
#[derive(Debug, Clone, Serialize)]
pub struct HealthEvent {
    /// Sensor index into `case.sensors`.
    pub sensor: usize,
    /// The problem.
    pub problem: Problem,
    /// Time of the first affected row, as written in the log.
    pub start: String,
    /// Time of the last affected row (`None`: still going at the end of the log).
    pub end: Option<String>,
    /// Line of the first affected row.
    pub start_line: u64,
    /// Rows affected.
    pub rows: u64,
    /// Rows in which the sensor was left out because of it.
    pub rows_left_out: u64,
}

#[derive(Debug, Clone, Default)]
struct Window {
    /// (row number, z) of the last rows that had a z.
    values: std::collections::VecDeque<(u64, f64)>,
    /// Running sums over `values` for [`Self::surely_level`]: of the rows and their squares
    /// (exact integers), and of z and z² (summed afresh every [`DRIFT_WINDOW`] pushes, so
    /// that their rounding cannot build up over a long log).
    sum_r: i128,
    sum_rr: i128,
    sum_z: f64,
    sum_zz: f64,
    pushes: usize,
}

impl Window {
    fn push(&mut self, row: u64, z: f64) {
        self.values.push_back((row, z));
        self.sum_r += i128::from(row);
        self.sum_rr += i128::from(row) * i128::from(row);
        self.sum_z += z;
        self.sum_zz += z * z;
        while let Some(&(r, old)) = self
            .values
            .front()
            .filter(|&&(r, _)| r + DRIFT_WINDOW as u64 <= row)
        {
            self.values.pop_front();
            self.sum_r -= i128::from(r);
            self.sum_rr -= i128::from(r) * i128::from(r);
            self.sum_z -= old;
            self.sum_zz -= old * old;
        }
        self.pushes += 1;
        if self.pushes >= DRIFT_WINDOW {
            self.pushes = 0;
            let (front, back) = self.values.as_slices();
            self.sum_z = front.iter().chain(back).map(|v| v.1).sum();
            self.sum_zz = front.iter().chain(back).map(|v| v.1 * v.1).sum();
        }
    }

    /// Whether the line of [`Self::trend`] surely ends within `level` of zero at `row`, from
    /// the running sums in O(1): `end = m_z − b m_x` and, by Cauchy–Schwarz,
    /// `|b| ≤ √(Σ(z − m_z)² / Σ(x − m_x)²)`, so `|end| ≤ |m_z| + |m_x| √(S_zz / S_xx)`. The
    /// margin (1e-6) is far above the rounding of both computations (z is clipped to
    /// ±[`DRIFT_CLIP_Z`], the sums are renewed every window), so when this says yes, the
    /// trend's own `end` is within `level` too. `false` when it cannot tell.
    fn surely_level(&self, row: u64, level: f64) -> bool {
        let n = self.values.len() as i128;
        if n == 0 {
            return false;
        }
        let row = i128::from(row);
        // x = r − row: Σx, Σx² and n·Σx² − (Σx)² = n·S_xx as exact integers
        let sx = self.sum_r - n * row;
        let sum_xx = self.sum_rr - 2 * row * self.sum_r + n * row * row;
        let n_sxx = n * sum_xx - sx * sx;
        if n_sxx <= 0 {
            return false;
        }
        let nf = n as f64;
        let sxx = n_sxx as f64 / nf;
        let (mx, mz) = (sx as f64 / nf, self.sum_z / nf);
        let szz = (self.sum_zz - nf * mz * mz).max(0.0);
        let bound = mz.abs() + mx.abs() * (szz / sxx).sqrt();
        bound + 1e-6 < level
    }

    /// Least-squares line through the window: (change across the window, value at its end).
    /// O(window) per call; called once per sensor per row (DRIFT_WINDOW is small).
    fn trend(&self, row: u64) -> Option<(f64, f64)> {
        let n = self.values.len();
        if n < DRIFT_WINDOW / 2 {
            return None;
        }
        // x = r − row, an integer well inside f64's exact range: summed as an integer and
        // converted once, it is the same number as the floating-point sum of the same terms
        let (front, back) = self.values.as_slices();
        let (mut sx_rows, mut sz) = (0i64, 0.0);
        for &(r, z) in front.iter().chain(back) {
            sx_rows += r as i64 - row as i64;
            sz += z;
        }
        let (mx, mz) = (sx_rows as f64 / n as f64, sz / n as f64);
        let (mut sxx, mut sxz) = (0.0, 0.0);
        for &(r, z) in front.iter().chain(back) {
            let x = (r as i64 - row as i64) as f64 - mx;
            sxx += x * x;
            sxz += x * (z - mz);
        }
        if sxx <= 0.0 {
            return None;
        }
        let b = sxz / sxx;
        Some((b * (DRIFT_WINDOW - 1) as f64, mz + b * (0.0 - mx)))
    }
}

#[derive(Debug, Clone, Default)]
struct SensorState {
    last_raw: Option<f64>,
    same: usize,
    same_start: Option<(String, u64)>,
    stuck: Option<usize>,
    dropout: Option<usize>,
    judged: Option<(Problem, usize)>,
    outlier_run: usize,
    outlier_start: Option<(String, u64)>,
    clear_run: usize,
    last_bad: Option<String>,
    drift_onset: u64,
    /// Failed confirmations so far (each doubles the rows needed before the next try).
    refuted: u32,
    /// Drift candidates refuted in a row, and the row from which the trend is evaluated again
    /// ([`MAX_DRIFT_BACKOFF`]).
    drift_refuted: u32,
    drift_next: u64,
    window: Window,
    event_count: usize,
    /// The open `doubtful` event, and passing rows in a row toward its end.
    doubt: Option<usize>,
    doubt_clear: usize,
}

/// The health monitor: fed each row's readings before the fit (dropouts and stuck readings)
/// and each row's diagnostics after it (outliers and drift).
#[derive(Debug, Clone)]
pub struct HealthMonitor {
    states: Vec<SensorState>,
    events: Vec<HealthEvent>,
    row: u64,
    max_out: usize,
    last_time: String,
    last_line: u64,
    /// (row, time, line) of the last DRIFT_WINDOW rows, to date a drift's onset.
    recent: std::collections::VecDeque<(u64, String, u64)>,
    /// Problems not listed because a sensor reached [`MAX_EVENTS_PER_SENSOR`].
    pub unlisted: u64,
    /// Candidates that `estimate`'s fault model did not confirm.
    pub refuted: u64,
}

impl HealthMonitor {
    /// A monitor for `n` sensors.
    pub fn new(n: usize) -> Self {
        HealthMonitor {
            states: vec![SensorState::default(); n],
            events: Vec::new(),
            row: 0,
            max_out: n / 4,
            last_time: String::new(),
            last_line: 0,
            recent: std::collections::VecDeque::new(),
            unlisted: 0,
            refuted: 0,
        }
    }

    fn open(&mut self, sensor: usize, problem: Problem, start: (String, u64)) -> usize {
        let st = &mut self.states[sensor];
        st.event_count += 1;
        if st.event_count > MAX_EVENTS_PER_SENSOR {
            self.unlisted += 1;
            return usize::MAX;
        }
        self.events.push(HealthEvent {
            sensor,
            problem,
            start: start.0,
            end: None,
            start_line: start.1,
            rows: 0,
            rows_left_out: 0,
        });
        self.events.len() - 1
    }

    fn close(&mut self, idx: usize) {
        if let Some(e) = self.events.get_mut(idx) {
            e.end = Some(self.last_time.clone());
        }
    }

    /// Before the fit: record this row's dropouts and stuck readings, and return, in `used`,
    /// the sensors with a reading that are not judged broken.
    pub fn before_fit(
        &mut self,
        time: &str,
        line: u64,
        readings: &[Option<f64>],
        keep_all: bool,
        used: &mut Vec<usize>,
    ) {
        self.row += 1;
        used.clear();
        for (i, r) in readings.iter().enumerate() {
            // dropout
            match (r, self.states[i].dropout) {
                (None, None) => {
                    let e = self.open(i, Problem::Dropout, (time.to_string(), line));
                    self.states[i].dropout = Some(e);
                }
                (Some(_), Some(e)) => {
                    self.close(e);
                    self.states[i].dropout = None;
                }
                _ => {}
            }
            if let Some(e) = self.states[i].dropout {
                if let Some(ev) = self.events.get_mut(e) {
                    ev.rows += 1;
                    ev.rows_left_out += 1;
                }
            }
            let Some(v) = *r else { continue };
            // stuck
            let st = &mut self.states[i];
            if st.last_raw == Some(v) {
                st.same += 1;
                if st.same == 2 {
                    // the run of equal readings began on the previous row
                    st.same_start = Some((self.last_time.clone(), self.last_line));
                }
            } else {
                st.same = 1;
                st.same_start = None;
                if let Some(e) = st.stuck.take() {
                    self.close(e);
                }
            }
            let st = &mut self.states[i];
            st.last_raw = Some(v);
            if st.same >= STUCK_ROWS && st.stuck.is_none() {
                let start = st.same_start.clone().unwrap_or((time.to_string(), line));
                let same = st.same as u64;
                let e = self.open(i, Problem::Stuck, start);
                if let Some(ev) = self.events.get_mut(e) {
                    ev.rows = same - 1;
                }
                self.states[i].stuck = Some(e);
            }
            let st = &self.states[i];
            if let Some(e) = st.stuck {
                if let Some(ev) = self.events.get_mut(e) {
                    ev.rows += 1;
                    if !keep_all {
                        ev.rows_left_out += 1;
                    }
                }
                if !keep_all {
                    continue;
                }
            }
            if let Some((_, e)) = st.judged {
                if let Some(ev) = self.events.get_mut(e) {
                    ev.rows += 1;
                    if !keep_all {
                        ev.rows_left_out += 1;
                    }
                }
                if !keep_all {
                    continue;
                }
            }
            used.push(i);
        }
        if self.recent.len() >= DRIFT_WINDOW {
            if let Some(mut old) = self.recent.pop_front() {
                old.0 = self.row;
                old.1.clear();
                old.1.push_str(time);
                old.2 = line;
                self.recent.push_back(old);
            }
        } else {
            self.recent.push_back((self.row, time.to_string(), line));
        }
        self.last_time.clear();
        self.last_time.push_str(time);
        self.last_line = line;
    }

    /// After the fit: update outlier and drift judgements from the row's diagnostics
    /// (standardised residual, fault probability) per sensor.
    ///
    /// `confirm(i, without)` gives `estimate`'s own leave-one-out verdict (standardised
    /// residual, fault probability) for sensor `i` on this row, fitted without the sensors
    /// `without` (those kept as doubtful); a sensor is left out only when it agrees and no
    /// hot feature explains its reading (module doc).
    ///
    /// `hot(i, without)` weighs a hot feature of a hidden edge against a fault for sensor
    /// `i`'s reading on this row ([`crate::estimate::explain`]): the statistic Δ, `-∞` when
    /// the readings cannot tell them apart, `+∞` when no hot feature applies (the reading is
    /// not above the others' prediction). A candidate with Δ at most
    /// [`crate::estimate::explain::HOT_REFUTE_CHI2`] is kept and named `doubtful`; a left-out
    /// sensor with Δ at most [`crate::estimate::explain::HOT_READMIT_CHI2`] passes its check.
    pub fn after_fit(
        &mut self,
        time: &str,
        line: u64,
        diagnostics: &[Option<(f64, f64)>],
        confirm: &mut ConfirmFn<'_>,
        hot: &mut dyn FnMut(usize, &[usize]) -> f64,
    ) {
        let judged_now = self.states.iter().filter(|s| s.judged.is_some()).count();
        let mut candidates = self.candidates(time, line, diagnostics, hot);
        if judged_now >= self.max_out || candidates.is_empty() {
            return;
        }
        // the worst: outliers before drift, then by strength of the evidence
        candidates.sort_by(|a, b| {
            (a.1 == Problem::Outlier)
                .cmp(&(b.1 == Problem::Outlier))
                .reverse()
                .then(b.2.total_cmp(&a.2))
        });
        if let Some((i, problem)) = self.confirm(&candidates, time, line, confirm, hot) {
            self.leave_out(i, problem, time, line);
        }
    }

    /// Update every sensor's running judgements from the row's diagnostics (a doubtful
    /// sensor's clearing, a left-out sensor's readmission, outlier streaks and drift trends)
    /// and return the candidates to leave out: `(sensor, problem, strength of evidence)`.
    fn candidates(
        &mut self,
        time: &str,
        line: u64,
        diagnostics: &[Option<(f64, f64)>],
        hot: &mut dyn FnMut(usize, &[usize]) -> f64,
    ) -> Vec<(usize, Problem, f64)> {
        let fault_limit = crate::estimate::fit::FAULT_POSTERIOR;
        let mut candidates: Vec<(usize, Problem, f64)> = Vec::new();
        for (i, d) in diagnostics.iter().enumerate() {
            let Some((z, p)) = *d else { continue };
            let st = &mut self.states[i];
            st.window
                .push(self.row, z.clamp(-DRIFT_CLIP_Z, DRIFT_CLIP_Z));
            if let Some(e) = st.doubt {
                if z.abs() <= CLEAR_Z {
                    st.doubt_clear += 1;
                } else {
                    st.doubt_clear = 0;
                    st.last_bad = Some(time.to_string());
                }
                if let Some(ev) = self.events.get_mut(e) {
                    ev.rows += 1;
                }
                if st.doubt_clear >= CLEAR_ROWS {
                    st.doubt = None;
                    st.doubt_clear = 0;
                    let end = st.last_bad.clone();
                    if let Some(ev) = self.events.get_mut(e) {
                        ev.end = end.or_else(|| Some(ev.start.clone()));
                        ev.rows = ev.rows.saturating_sub(CLEAR_ROWS as u64);
                    }
                }
            }
            if let Some((_, e)) = st.judged {
                if z.abs() <= CLEAR_Z || (z > CLEAR_Z && hot(i, &[]) <= HOT_READMIT_CHI2) {
                    st.clear_run += 1;
                } else {
                    st.clear_run = 0;
                    st.last_bad = Some(time.to_string());
                }
                if st.clear_run >= CLEAR_ROWS {
                    st.judged = None;
                    st.clear_run = 0;
                    st.outlier_run = 0;
                    st.window = Window::default();
                    // the problem ends at the last row that failed the check
                    let end = st.last_bad.take();
                    if let Some(ev) = self.events.get_mut(e) {
                        ev.end = end.or_else(|| Some(ev.start.clone()));
                        ev.rows = ev.rows.saturating_sub(CLEAR_ROWS as u64);
                    }
                }
                continue;
            }
            if p > fault_limit {
                if st.outlier_run == 0 {
                    st.outlier_start = Some((time.to_string(), line));
                }
                st.outlier_run += 1;
            } else {
                st.outlier_run = 0;
            }
            let needed = OUTLIER_ROWS << st.refuted.min(MAX_BACKOFF);
            if st.outlier_run >= needed {
                // ranked by |z|: the probability saturates at 1 for every gross misfit
                candidates.push((i, Problem::Outlier, z.abs()));
            } else if self.row % DRIFT_EVERY == 0
                && self.row >= st.drift_next
                && st.window.values.len() >= DRIFT_WINDOW / 2
            {
                // a line that surely ends within DRIFT_LEVEL is no drift: its exact fit
                // (O(window)) is needed only when it might be one
                let line = (!st.window.surely_level(self.row, DRIFT_LEVEL))
                    .then(|| st.window.trend(self.row))
                    .flatten();
                let drift = line.filter(|&(change, end)| {
                    change.abs() > DRIFT_CHANGE
                        && end.abs() > DRIFT_LEVEL
                        && change.signum() == end.signum()
                });
                if let Some((change, end)) = drift {
                    candidates.push((i, Problem::Drift, end.abs()));
                    // onset: where the fitted line crosses zero, within the window
                    let slope = change / (DRIFT_WINDOW - 1) as f64;
                    let back = (end / slope).clamp(0.0, (DRIFT_WINDOW - 1) as f64);
                    st.drift_onset = self.row.saturating_sub(back.round() as u64);
                } else {
                    // no drift now: a later candidate is fresh evidence
                    st.drift_refuted = 0;
                }
            }
        }
        candidates
    }

    /// Confirm the candidates, worst first, with `estimate`'s own fault model and the
    /// physics ([`Self::after_fit`]); returns the first one to leave out. A candidate that a
    /// hot feature explains is named doubtful and ends the search.
    fn confirm(
        &mut self,
        candidates: &[(usize, Problem, f64)],
        time: &str,
        line: u64,
        confirm: &mut ConfirmFn<'_>,
        hot: &mut dyn FnMut(usize, &[usize]) -> f64,
    ) -> Option<(usize, Problem)> {
        let fault_limit = crate::estimate::fit::FAULT_POSTERIOR;
        let mut chosen = None;
        // sensors kept as doubtful: a candidate beside one is checked without it, since a
        // high reading kept in the fit makes its neighbours look low
        let doubtful: Vec<usize> = (0..self.states.len())
            .filter(|&k| self.states[k].doubt.is_some())
            .collect();
        for &(i, problem, _) in candidates {
            let without: Vec<usize> = doubtful.iter().copied().filter(|&k| k != i).collect();
            let verdict = confirm(i, &without);
            let fault = verdict.is_some_and(|(z, p)| match problem {
                Problem::Outlier => p > fault_limit,
                _ => z.abs() > DRIFT_LEVEL,
            });
            // the physics, for a reading above the others' prediction
            let hot_feature = fault
                && verdict.is_some_and(|(z, _)| z > 0.0)
                && hot(i, &without) <= HOT_REFUTE_CHI2;
            if fault && !hot_feature {
                chosen = Some((i, problem));
                break;
            }
            let st = &mut self.states[i];
            if problem == Problem::Outlier {
                st.refuted += 1;
                st.outlier_run = 0;
            } else {
                // the trend is evaluated again after a wait that doubles with each refutation
                st.drift_refuted += 1;
                let wait = DRIFT_EVERY << st.drift_refuted.min(MAX_DRIFT_BACKOFF);
                st.drift_next = self.row + wait;
            }
            self.refuted += 1;
            if hot_feature {
                // named, never left out: a hot spot or a fault
                if self.states[i].doubt.is_none() {
                    let start = self.start_of(i, problem, time, line);
                    let e = self.open(i, Problem::Doubtful, start);
                    let st = &mut self.states[i];
                    st.doubt = Some(e);
                    st.doubt_clear = 0;
                    st.last_bad = Some(time.to_string());
                }
                // the others' evidence came from fits that include a sensor that may be the
                // witness of a hot spot: a neighbour reading low beside it is no fault
                break;
            }
        }
        chosen
    }

    /// Leave sensor `i` out for `problem` from this row on: open its event and start the
    /// other sensors' evidence afresh.
    fn leave_out(&mut self, i: usize, problem: Problem, time: &str, line: u64) {
        let start = self.start_of(i, problem, time, line);
        let run = self.states[i].outlier_run as u64;
        let e = self.open(i, problem, start);
        if let Some(ev) = self.events.get_mut(e) {
            ev.rows = match problem {
                Problem::Outlier => run,
                _ => self.row.saturating_sub(self.states[i].drift_onset) + 1,
            };
        }
        // the others' evidence came from fits that included this sensor: start afresh
        for (k, other) in self.states.iter_mut().enumerate() {
            if k != i {
                other.outlier_run = 0;
                other.window = Window::default();
            }
        }
        if let Some(d) = self.states[i].doubt.take() {
            self.close(d);
        }
        let st = &mut self.states[i];
        st.judged = Some((problem, e));
        st.clear_run = 0;
        st.last_bad = Some(time.to_string());
    }

    /// Where a problem of sensor `i` judged on this row began: the first row of its outlier
    /// streak, or where its drift line crosses zero.
    fn start_of(&self, i: usize, problem: Problem, time: &str, line: u64) -> (String, u64) {
        match problem {
            Problem::Outlier => self.states[i]
                .outlier_start
                .clone()
                .unwrap_or((time.to_string(), line)),
            _ => {
                let onset = self.states[i].drift_onset;
                self.recent
                    .iter()
                    .find(|r| r.0 >= onset)
                    .map_or((time.to_string(), line), |r| (r.1.clone(), r.2))
            }
        }
    }

    /// Whether sensor `i` is left out now for a problem other than a missing reading (stuck,
    /// or judged faulty): the guess for the rows after it, which [`Self::before_fit`]
    /// settles row by row.
    pub fn left_out_now(&self, i: usize) -> bool {
        let st = &self.states[i];
        st.stuck.is_some() || st.judged.is_some()
    }

    /// Why sensor `i` is left out now (stuck takes precedence).
    pub fn problem_of(&self, i: usize) -> Problem {
        let st = &self.states[i];
        if st.stuck.is_some() {
            Problem::Stuck
        } else {
            st.judged.map_or(Problem::Dropout, |(p, _)| p)
        }
    }

    /// Every problem recorded so far (open ones have no end).
    pub fn events(&self) -> &[HealthEvent] {
        &self.events
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Feed `rows` rows of `n` sensors to a monitor: every sensor reads, its standardised
    /// residual is `z(row, sensor)` (fault probability 0, so no outlier runs), and every
    /// confirmation is counted and answered by `verdict`. Returns the monitor and the rows
    /// on which a confirmation was asked.
    fn run(
        n: usize,
        rows: u64,
        z: impl Fn(u64, usize) -> f64,
        verdict: impl Fn(usize) -> Option<(f64, f64)>,
    ) -> (HealthMonitor, Vec<u64>) {
        let mut mon = HealthMonitor::new(n);
        let mut asked = Vec::new();
        let mut used = Vec::new();
        for row in 1..=rows {
            let time = format!("{row}");
            // distinct readings, so that nothing is stuck
            let readings: Vec<Option<f64>> = (0..n).map(|i| Some(row as f64 + i as f64)).collect();
            mon.before_fit(&time, row, &readings, false, &mut used);
            let diagnostics: Vec<Option<(f64, f64)>> =
                (0..n).map(|i| Some((z(row, i), 0.0))).collect();
            let mut confirm = |i: usize, _: &[usize]| {
                asked.push(row);
                verdict(i)
            };
            mon.after_fit(&time, row, &diagnostics, &mut confirm, &mut |_, _| {
                f64::INFINITY
            });
        }
        (mon, asked)
    }

    /// Invented residuals: a fixed pseudo-random sequence, uniform on [−1, 1), per row and
    /// sensor.
    fn noise(row: u64, i: usize) -> f64 {
        let v = (row as f64 * 12.9898 + i as f64 * 78.233).sin() * 43758.5453;
        (v - v.floor()) * 2.0 - 1.0
    }

    /// A residual rising by `rate` per row after row `from` (0 before).
    fn ramp(row: u64, from: u64, rate: f64) -> f64 {
        rate * row.saturating_sub(from) as f64
    }

    #[test]
    fn the_quick_level_check_never_contradicts_the_fitted_line() {
        // Windows of noise, with gaps (rows without a z), drifts of either sign and wild
        // values, over a long run (so that the running sums see many pushes and pops): when
        // the O(1) check says the line surely ends within the level, the fitted line does.
        let mut w = Window::default();
        let (mut said, mut checked) = (0, 0);
        for row in 1..20_000u64 {
            if row % 7 == 3 {
                continue; // a row without a z
            }
            let drift = match (row / 900) % 4 {
                0 => 0.0,
                1 => 0.004 * (row % 900) as f64,
                2 => -0.006 * (row % 900) as f64,
                _ => 2.0,
            };
            let wild = if row % 1013 == 0 { 400.0 } else { 0.0 };
            let z = (noise(row, 3) * 1.7 + drift + wild).clamp(-DRIFT_CLIP_Z, DRIFT_CLIP_Z);
            w.push(row, z);
            if w.values.len() < DRIFT_WINDOW / 2 {
                continue;
            }
            let quiet = (row / 900) % 4 == 0 && row % 900 > DRIFT_WINDOW as u64;
            for (k, level) in [0.5, 1.0, DRIFT_LEVEL].into_iter().enumerate() {
                let sure = w.surely_level(row, level);
                if sure {
                    let (_, end) = w.trend(row).unwrap();
                    assert!(end.abs() < level, "row {row}: end {end}, level {level}");
                }
                if quiet && k == 2 {
                    checked += 1;
                    said += usize::from(sure);
                }
            }
        }
        // and at the drift level it decides the windows of noise alone (sd about 1), the
        // checks that matter: most of a healthy log
        assert!(said * 10 > checked * 9, "{said} of {checked}");
    }

    #[test]
    fn one_wild_row_does_not_make_a_drift() {
        // Every sensor's residual is 800 on one row (a row whose noise estimate came out
        // near zero): without the clip the fitted line of every sensor tilts by far more
        // than DRIFT_CHANGE for a whole window, and every sensor becomes a drift candidate.
        let (mon, asked) = run(
            8,
            600,
            |row, i| if row == 300 { 800.0 } else { noise(row, i) },
            |_| Some((0.0, 0.0)),
        );
        assert!(asked.is_empty(), "confirmations asked on rows {asked:?}");
        assert!(mon.events().is_empty());
    }

    #[test]
    fn a_steady_drift_is_still_named() {
        // Sensor 2's residual grows by 0.1 per row from row 200: it crosses DRIFT_LEVEL about
        // 30 rows in and is named as soon as the trend across the window is clear, clip or
        // no clip (the clip is far above the level).
        let (mon, _) = run(
            8,
            600,
            |row, i| noise(row, i) + if i == 2 { ramp(row, 200, 0.1) } else { 0.0 },
            |i| Some((if i == 2 { 8.0 } else { 0.0 }, 0.0)),
        );
        let named: Vec<_> = mon
            .events()
            .iter()
            .filter(|e| e.sensor == 2 && e.problem == Problem::Drift)
            .collect();
        assert_eq!(named.len(), 1, "{:?}", mon.events());
        let first = named[0].start_line;
        // the start is where the fitted line crosses zero; a straight line through a flat
        // stretch and a ramp crosses before the ramp starts (here about 40 rows before), so
        // within half a window before row 200
        let earliest = 200 - DRIFT_WINDOW as u64 / 2;
        assert!(
            (earliest..=300).contains(&first),
            "drift named from line {first}"
        );
    }

    #[test]
    fn a_refuted_drift_waits_longer_each_time() {
        // Sensor 2's residual ramps up by 0.03 per row from row 1000 (a trend of 3.6 across
        // the window) until the clip flattens it; the model refutes every candidate. The
        // trend is tried again after 50, then 100 rows (doubling), not at every evaluation.
        let (_, asked) = run(
            8,
            2000,
            |row, i| noise(row, i) + if i == 2 { ramp(row, 1000, 0.03) } else { 0.0 },
            |_| Some((0.0, 0.0)),
        );
        assert!(asked.len() >= 3, "tried on rows {asked:?}");
        for (k, w) in asked.windows(2).enumerate() {
            assert_eq!(
                w[1] - w[0],
                DRIFT_EVERY << (k + 1),
                "tried on rows {asked:?}"
            );
        }
        // the trend stays a candidate from its first try to its clip (about 280 rows):
        // every evaluation would have asked without the wait
        assert!(
            asked.len() < 280 / DRIFT_EVERY as usize / 2,
            "tried on rows {asked:?}"
        );
    }
}
