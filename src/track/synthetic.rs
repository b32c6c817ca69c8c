//! Synthetic logger files from known truths, for demos, tests and the benchmark: the hidden
//! edge is `base(s) + a(row) · bump(s)` (both piecewise linear), the readings are the forward
//! model's exact temperatures at the sensors plus seeded Gaussian noise, and sensors can be
//! made to fail at known rows.
//!
//! The plate is linear in its edge data, so the readings of every row are
//! `r_base + a(row) · (r_bump − r_base)` where `r_base` and `r_bump` are the readings for the
//! truths `base` and `base + bump`: two forward solutions serve the whole log.

use crate::case::Case;
use crate::error::{Error, Result};
use crate::geometry::{Edge, EdgeProfile, Point};
use crate::simulate::{exact_readings, truth_model};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::Normal;
use std::io::Write;

/// How a sensor fails.
#[derive(Debug, Clone, PartialEq)]
pub enum FaultKind {
    /// The logger writes this marker (an open circuit, say).
    Marker(String),
    /// The reading freezes at its last value.
    Stuck,
    /// A constant offset, kelvin.
    Offset(f64),
    /// An offset growing by this many kelvin per row.
    Drift(f64),
}

/// A sensor failure over rows `from..to`.
#[derive(Debug, Clone, PartialEq)]
pub struct Fault {
    /// Sensor index.
    pub sensor: usize,
    /// First failing row (0-based).
    pub from: usize,
    /// First row after the failure (`None`: to the end).
    pub to: Option<usize>,
    /// How.
    pub kind: FaultKind,
}

/// A synthetic log.
pub struct Spec<'a> {
    /// Rows.
    pub rows: usize,
    /// Seconds between rows.
    pub step_s: f64,
    /// Time of the first row, seconds since 1970 (written as ISO 8601 UTC), or `None` to
    /// write plain seconds from 0.
    pub start: Option<i64>,
    /// Reading noise, kelvin.
    pub sigma: f64,
    /// Seed of the noise.
    pub seed: u64,
    /// The base edge profile (positions metres, temperatures kelvin).
    pub base: EdgeProfile,
    /// The bump added with amplitude `amplitude(row)` (kelvin per unit amplitude).
    pub bump: EdgeProfile,
    /// Amplitude of the bump per row.
    pub amplitude: &'a dyn Fn(usize) -> f64,
    /// Failures.
    pub faults: Vec<Fault>,
    /// Decimals written (in the case's temperature unit).
    pub decimals: usize,
}

impl std::fmt::Debug for Spec<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Spec").field("rows", &self.rows).finish()
    }
}

/// Write the log (header and rows, case units) to `out`; returns the true hottest
/// temperature of the edge per row, kelvin (sampled at 1001 points).
///
/// # Errors
/// When the case has not exactly one unknown edge, the forward model fails, or writing
/// fails.
pub fn write_log(case: &Case, spec: &Spec<'_>, out: &mut dyn Write) -> Result<Vec<f64>> {
    let unknown = case.plate.unknown_edges();
    let [edge]: [Edge; 1] = unknown.as_slice().try_into().map_err(|_| {
        Error::invalid_field("edges", "a synthetic log needs exactly one unknown edge")
    })?;
    let len = case
        .plate
        .shape()
        .edge_length(edge)
        .unwrap_or(case.plate.shape().width());
    let s: Vec<f64> = (0..1001).map(|i| len * i as f64 / 1000.0).collect();
    let base_t: Vec<f64> = s.iter().map(|&x| spec.base.value(x)).collect();
    let bump_t: Vec<f64> = s.iter().map(|&x| spec.bump.value(x)).collect();
    let with_bump: Vec<f64> = base_t.iter().zip(&bump_t).map(|(a, b)| a + b).collect();
    let points: Vec<Point> = case.sensors.iter().map(|s| s.position).collect();
    let p_base = EdgeProfile::piecewise_linear(s.clone(), base_t.clone())
        .map_err(|e| Error::invalid_field("truth", e))?;
    let p_bump = EdgeProfile::piecewise_linear(s.clone(), with_bump)
        .map_err(|e| Error::invalid_field("truth", e))?;
    let r_base = exact_readings(&truth_model(&case.plate, &[(edge, p_base)])?, &points)?;
    let r_bump = exact_readings(&truth_model(&case.plate, &[(edge, p_bump)])?, &points)?;
    let normal = Normal::new(0.0, spec.sigma.max(0.0))
        .map_err(|e| Error::invalid_field("noise", e.to_string()))?;
    let mut rng = ChaCha8Rng::seed_from_u64(spec.seed);
    let io = |e: std::io::Error| Error::Io {
        path: "<synthetic log>".into(),
        source: e,
        input: false,
    };
    let mut header = String::from("time");
    for sensor in &case.sensors {
        header.push(',');
        header.push_str(&sensor.id);
    }
    writeln!(out, "{header}").map_err(io)?;
    let mut truths = Vec::with_capacity(spec.rows);
    let mut last: Vec<String> = vec![String::new(); points.len()];
    let mut line = String::new();
    for row in 0..spec.rows {
        let a = (spec.amplitude)(row);
        truths.push(
            base_t
                .iter()
                .zip(&bump_t)
                .map(|(b, u)| b + a * u)
                .fold(f64::NEG_INFINITY, f64::max),
        );
        line.clear();
        let t = spec.step_s * row as f64;
        match spec.start {
            Some(s0) => line.push_str(&iso_time(s0 as f64 + t)),
            None => line.push_str(&format!("{t}")),
        }
        for i in 0..points.len() {
            let noise: f64 = rng.sample(normal);
            let mut v = r_base[i] + a * (r_bump[i] - r_base[i]) + noise;
            let fault = spec
                .faults
                .iter()
                .find(|f| f.sensor == i && row >= f.from && f.to.is_none_or(|e| row < e));
            let cell = match fault.map(|f| (&f.kind, f.from)) {
                Some((FaultKind::Marker(m), _)) => m.clone(),
                Some((FaultKind::Stuck, _)) if !last[i].is_empty() => last[i].clone(),
                Some((FaultKind::Offset(o), _)) => {
                    v += o;
                    fmt_temp(case, v, spec.decimals)
                }
                Some((FaultKind::Drift(d), from)) => {
                    v += d * (row - from + 1) as f64;
                    fmt_temp(case, v, spec.decimals)
                }
                _ => fmt_temp(case, v, spec.decimals),
            };
            line.push(',');
            line.push_str(&cell);
            if fault.is_none() || !matches!(fault.map(|f| &f.kind), Some(FaultKind::Stuck)) {
                last[i] = cell;
            }
        }
        writeln!(out, "{line}").map_err(io)?;
    }
    Ok(truths)
}

fn fmt_temp(case: &Case, k: f64, decimals: usize) -> String {
    format!("{:.*}", decimals, case.units.temp_from_k(k))
}

/// `YYYY-MM-DDTHH:MM:SSZ` for seconds since 1970 (whole seconds).
pub fn iso_time(t: f64) -> String {
    let secs = t.floor() as i64;
    let days = secs.div_euclid(86_400);
    let rem = secs.rem_euclid(86_400);
    // civil from days (H. Hinnant's public-domain algorithm)
    let z = days + 719_468;
    let era = if z >= 0 { z } else { z - 146_096 } / 146_097;
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = if m <= 2 { y + 1 } else { y };
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;

    #[test]
    fn iso_time_round_trips_through_the_logger_parser() {
        for t in [0.0, 951_782_400.0, 1_772_000_123.0, 4_102_444_799.0] {
            let s = iso_time(t);
            let (back, _) = crate::io::logger::parse_time(&s).unwrap();
            assert_eq!(back, t, "{s}");
        }
        assert_eq!(iso_time(951_782_400.0), "2000-02-29T00:00:00Z");
    }
}
