//! Alarm episodes: an episode starts at the first row whose exceedance probability is above
//! the alarm probability `P`, and ends at the last such row once `N` rows in a row have
//! fallen back to `P` or below (`--clear N`); rows that could not be fitted neither extend
//! nor clear an episode. Each episode keeps its peak: the row with the highest hottest
//! temperature, with its interval and where on the edge it was.
//!
//! Leaving a sensor out never ends an episode by itself: while a sensor that was in use when
//! the episode began is left out by the health checks (or gives no reading), a row at or
//! below `P` holds the episode open instead of counting toward its end. A sensor that fails
//! during an overheat is as likely to be the witness of the hot spot as a bystander, and
//! "the estimate cooled because its hottest witness went silent" is not a reason to stand
//! down.

use super::engine::RowFit;
use crate::geometry::Edge;

/// One alarm episode.
#[derive(Debug, Clone)]
pub struct Episode {
    /// Time of the first row in alarm, as written in the log.
    pub start: String,
    /// Its line.
    pub start_line: u64,
    /// Time of the last row in alarm (`None`: still in alarm at the end of the log).
    pub end: Option<String>,
    /// Rows from the first to the last row in alarm.
    pub rows: u64,
    /// Time of the peak row.
    pub peak_time: String,
    /// The peak row's hottest temperature, kelvin.
    pub peak_temperature: f64,
    /// Its interval, kelvin.
    pub peak_interval: [f64; 2],
    /// Where: edge and position (metres).
    pub peak_edge: Option<Edge>,
    /// Position along the edge, metres.
    pub peak_position: f64,
    /// The highest exceedance probability in the episode.
    pub max_probability: f64,
    /// Rows at or below `P` that held the episode open because a sensor in use at its start
    /// was left out.
    pub held_rows: u64,
}

/// The alarm state machine.
#[derive(Debug, Clone)]
pub struct AlarmTracker {
    probability: f64,
    clear: usize,
    current: Option<Episode>,
    /// Rows since the start, and rows in a row at or below P.
    since_start: u64,
    below: usize,
    last_above: String,
    closed: Vec<Episode>,
}

impl AlarmTracker {
    /// A tracker raising alarms above `probability`, cleared after `clear` rows.
    pub fn new(probability: f64, clear: usize) -> Self {
        AlarmTracker {
            probability,
            clear: clear.max(1),
            current: None,
            since_start: 0,
            below: 0,
            last_above: String::new(),
            closed: Vec::new(),
        }
    }

    /// Update with a fitted row. `hold`: a sensor in use when the open episode began is left
    /// out on this row (module doc); `certain`: the row's strict bounds put the hottest
    /// temperature above the limit (the row is in alarm whatever its probability).
    pub fn update(&mut self, time: &str, line: u64, fit: &RowFit, hold: bool, certain: bool) {
        let Some(p) = fit.exceedance else { return };
        let above = p > self.probability || certain;
        match &mut self.current {
            None if above => {
                self.current = Some(Episode {
                    start: time.to_string(),
                    start_line: line,
                    end: None,
                    rows: 1,
                    peak_time: time.to_string(),
                    peak_temperature: fit.temperature,
                    peak_interval: fit.temperature_interval,
                    peak_edge: fit.edge,
                    peak_position: fit.position,
                    max_probability: p,
                    held_rows: 0,
                });
                self.since_start = 1;
                self.below = 0;
                self.last_above = time.to_string();
            }
            None => {}
            Some(ep) => {
                self.since_start += 1;
                if fit.temperature > ep.peak_temperature {
                    ep.peak_time = time.to_string();
                    ep.peak_temperature = fit.temperature;
                    ep.peak_interval = fit.temperature_interval;
                    ep.peak_edge = fit.edge;
                    ep.peak_position = fit.position;
                }
                ep.max_probability = ep.max_probability.max(p);
                if above || hold {
                    self.below = 0;
                    ep.rows = self.since_start;
                    ep.held_rows += u64::from(!above);
                    self.last_above.clear();
                    self.last_above.push_str(time);
                } else {
                    self.below += 1;
                    if self.below >= self.clear {
                        let mut ep = self.current.take().expect("open episode");
                        ep.end = Some(self.last_above.clone());
                        self.closed.push(ep);
                    }
                }
            }
        }
    }

    /// The episode open now, if any.
    pub fn current(&self) -> Option<&Episode> {
        self.current.as_ref()
    }

    /// The episodes closed so far, oldest first.
    pub fn closed(&self) -> &[Episode] {
        &self.closed
    }

    /// Whether an episode opened on the last update.
    pub fn just_opened(&self) -> bool {
        self.current.is_some() && self.since_start == 1
    }

    /// Whether an episode is open.
    pub fn in_alarm(&self) -> bool {
        self.current.is_some()
    }

    /// Whether any episode has started.
    pub fn any(&self) -> bool {
        self.current.is_some() || !self.closed.is_empty()
    }

    /// Closed episodes followed by the open one, if any.
    pub fn episodes_with_open(&self) -> Vec<Episode> {
        let mut v = self.closed.clone();
        v.extend(self.current.clone());
        v
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(p: f64) -> RowFit {
        RowFit {
            exceedance: Some(p),
            temperature: 300.0,
            ..RowFit::default()
        }
    }

    /// Rows at or below P close an episode after `clear` of them, unless a sensor in use at
    /// its start is left out: then they hold it open and are counted (module doc).
    #[test]
    fn a_left_out_sensor_holds_the_episode_open() {
        let mut a = AlarmTracker::new(0.05, 3);
        a.update("t0", 1, &row(0.9), false, false);
        assert!(a.just_opened());
        for k in 0..10 {
            a.update(&format!("h{k}"), 2 + k, &row(0.0), true, false);
            assert!(a.in_alarm(), "held row {k} closed the episode");
        }
        assert_eq!(a.current.as_ref().map(|e| e.held_rows), Some(10));
        for k in 0..3 {
            a.update(&format!("c{k}"), 20 + k, &row(0.0), false, false);
        }
        assert!(!a.in_alarm());
        let ep = &a.episodes_with_open()[0];
        assert_eq!(ep.end.as_deref(), Some("h9"), "ends at the last held row");
        assert_eq!(ep.held_rows, 10);
    }
}
