//! Alarm episodes: an episode starts at the first row whose exceedance probability is above
//! the alarm probability `P`, and ends at the last such row once `N` rows in a row have
//! fallen back to `P` or below (`--clear N`); rows that could not be fitted neither extend
//! nor clear an episode. Each episode keeps its peak: the row with the highest hottest
//! temperature, with its interval and where on the edge it was.

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

    /// Update with a fitted row.
    pub fn update(&mut self, time: &str, line: u64, fit: &RowFit) {
        let Some(p) = fit.exceedance else { return };
        let above = p > self.probability;
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
                if above {
                    self.below = 0;
                    ep.rows = self.since_start;
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
