//! A fixed number of time bins summarising the whole log for `track.svg`: when the bins are
//! full, neighbours are merged in pairs and each bin then covers twice as many rows, so the
//! memory stays constant however long the log is and every row counts in exactly one bin.

use super::engine::RowFit;
use crate::geometry::Edge;

/// Bins kept for the plot.
pub const DEFAULT_BINS: usize = 1200;

/// One time bin.
#[derive(Debug, Clone, Copy)]
pub struct Bin {
    /// First and last time, seconds.
    pub t0: f64,
    /// See [`Bin::t0`].
    pub t1: f64,
    /// Rows fitted.
    pub fitted: u64,
    /// Rows skipped.
    pub skipped: u64,
    /// Sum, minimum and maximum of the hottest temperature, kelvin.
    pub temp_sum: f64,
    /// See [`Bin::temp_sum`].
    pub temp_min: f64,
    /// See [`Bin::temp_sum`].
    pub temp_max: f64,
    /// Lowest lower and highest upper end of the interval, kelvin.
    pub lower_min: f64,
    /// See [`Bin::lower_min`].
    pub upper_max: f64,
    /// Sum, minimum and maximum of the hottest position, metres.
    pub pos_sum: f64,
    /// See [`Bin::pos_sum`].
    pub pos_min: f64,
    /// See [`Bin::pos_sum`].
    pub pos_max: f64,
    /// Edge of the last fitted row.
    pub edge: Option<Edge>,
    /// Some row of the bin was in alarm.
    pub alarm: bool,
    /// Rows of the bin in alarm.
    pub alarm_rows: u64,
    /// Rows of the bin with at least one sensor left out by the health checks.
    pub left_out_rows: u64,
    /// Highest exceedance probability.
    pub prob_max: f64,
}

impl Bin {
    fn empty(t: f64) -> Self {
        Bin {
            t0: t,
            t1: t,
            fitted: 0,
            skipped: 0,
            temp_sum: 0.0,
            temp_min: f64::INFINITY,
            temp_max: f64::NEG_INFINITY,
            lower_min: f64::INFINITY,
            upper_max: f64::NEG_INFINITY,
            pos_sum: 0.0,
            pos_min: f64::INFINITY,
            pos_max: f64::NEG_INFINITY,
            edge: None,
            alarm: false,
            alarm_rows: 0,
            left_out_rows: 0,
            prob_max: 0.0,
        }
    }

    fn merge(&mut self, o: &Bin) {
        self.t1 = o.t1;
        self.fitted += o.fitted;
        self.skipped += o.skipped;
        self.temp_sum += o.temp_sum;
        self.temp_min = self.temp_min.min(o.temp_min);
        self.temp_max = self.temp_max.max(o.temp_max);
        self.lower_min = self.lower_min.min(o.lower_min);
        self.upper_max = self.upper_max.max(o.upper_max);
        self.pos_sum += o.pos_sum;
        self.pos_min = self.pos_min.min(o.pos_min);
        self.pos_max = self.pos_max.max(o.pos_max);
        self.edge = o.edge.or(self.edge);
        self.alarm |= o.alarm;
        self.alarm_rows += o.alarm_rows;
        self.left_out_rows += o.left_out_rows;
        self.prob_max = self.prob_max.max(o.prob_max);
    }

    /// Mean hottest temperature of the fitted rows, kelvin.
    pub fn temp_mean(&self) -> f64 {
        self.temp_sum / self.fitted as f64
    }

    /// Mean hottest position of the fitted rows, metres.
    pub fn pos_mean(&self) -> f64 {
        self.pos_sum / self.fitted as f64
    }
}

/// The bins.
#[derive(Debug, Clone)]
pub struct TrackSeries {
    bins: Vec<Bin>,
    pending: Option<Bin>,
    pending_rows: u64,
    per_bin: u64,
    cap: usize,
}

impl TrackSeries {
    /// At most `cap` bins (at least 2).
    pub fn new(cap: usize) -> Self {
        TrackSeries {
            bins: Vec::with_capacity(cap.max(2)),
            pending: None,
            pending_rows: 0,
            per_bin: 1,
            cap: cap.max(2),
        }
    }

    /// Add a row (fitted or not); `left_out`: a sensor with a reading was left out of it.
    pub fn push(&mut self, t: f64, fit: Option<&RowFit>, alarm: bool, left_out: bool) {
        let b = self.pending.get_or_insert_with(|| Bin::empty(t));
        b.t1 = t;
        b.left_out_rows += u64::from(left_out);
        b.alarm |= alarm;
        b.alarm_rows += u64::from(alarm);
        match fit {
            Some(f) => {
                b.fitted += 1;
                b.temp_sum += f.temperature;
                b.temp_min = b.temp_min.min(f.temperature);
                b.temp_max = b.temp_max.max(f.temperature);
                b.lower_min = b.lower_min.min(f.temperature_interval[0]);
                b.upper_max = b.upper_max.max(f.temperature_interval[1]);
                b.pos_sum += f.position;
                b.pos_min = b.pos_min.min(f.position);
                b.pos_max = b.pos_max.max(f.position);
                b.edge = f.edge;
                b.prob_max = b.prob_max.max(f.exceedance.unwrap_or(0.0));
            }
            None => b.skipped += 1,
        }
        self.pending_rows += 1;
        if self.pending_rows >= self.per_bin {
            if let Some(b) = self.pending.take() {
                self.bins.push(b);
            }
            self.pending_rows = 0;
            if self.bins.len() >= self.cap {
                let old = std::mem::take(&mut self.bins);
                for pair in old.chunks(2) {
                    let mut b = pair[0];
                    if let Some(o) = pair.get(1) {
                        b.merge(o);
                    }
                    self.bins.push(b);
                }
                self.per_bin *= 2;
            }
        }
    }

    /// The bins, the partly filled last one included.
    pub fn bins(&self) -> Vec<Bin> {
        let mut v = self.bins.clone();
        v.extend(self.pending);
        v
    }

    /// Rows per full bin.
    pub fn rows_per_bin(&self) -> u64 {
        self.per_bin
    }
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;

    #[test]
    fn bins_stay_bounded_and_count_every_row() {
        let mut s = TrackSeries::new(10);
        let f = RowFit {
            temperature: 300.0,
            temperature_interval: [299.0, 301.0],
            ..RowFit::default()
        };
        for i in 0..1005 {
            s.push(i as f64, (i % 7 != 0).then_some(&f), false, false);
        }
        let bins = s.bins();
        assert!(bins.len() <= 11);
        let total: u64 = bins.iter().map(|b| b.fitted + b.skipped).sum();
        assert_eq!(total, 1005);
        assert_eq!(bins.iter().map(|b| b.skipped).sum::<u64>(), 144);
        assert_eq!(bins[0].t0, 0.0);
        assert_eq!(bins.last().unwrap().t1, 1004.0);
    }
}
