//! The CSV outputs of `docs/case-files.md`, outputs: `profile.csv`, `field.csv` and `sensors.csv`, in the case's
//! units, with fixed precision and empty cells for missing values.

use crate::error::{Error, Result};
use crate::estimate::EstimateResult;
use crate::report::format::{CaseUnits, RATIO_FILE_DECIMALS, opt_fixed};

/// Header of `profile.csv`: the five columns of `docs/case-files.md`, outputs, then the simultaneous band, the
/// linear cross-check band and the strict bounds under the stated gradient limit (empty
/// cells without one).
pub(crate) const PROFILE_HEADER: [&str; 11] = [
    "edge",
    "position",
    "estimate",
    "lower",
    "upper",
    "simultaneous_lower",
    "simultaneous_upper",
    "linear_lower",
    "linear_upper",
    "bound_lower",
    "bound_upper",
];

/// Header of `field.csv` (`docs/case-files.md`, outputs).
pub(crate) const FIELD_HEADER: [&str; 5] = ["x", "y", "estimate", "lower", "upper"];

/// Header of `sensors.csv`.
pub(crate) const SENSORS_HEADER: [&str; 11] = [
    "sensor",
    "x",
    "y",
    "reading",
    "fitted",
    "residual",
    "loo_residual",
    "leverage",
    "sigma",
    "flag",
    "note",
];

fn csv_error(e: impl std::fmt::Display) -> Error {
    Error::Internal(format!("cannot format a CSV output: {e}"))
}

fn finish(w: csv::Writer<Vec<u8>>) -> Result<Vec<u8>> {
    w.into_inner().map_err(csv_error)
}

/// `profile.csv`: one row per sampled position along each unknown edge.
pub(crate) fn profile_csv(r: &EstimateResult) -> Result<Vec<u8>> {
    let u = CaseUnits::new(r.units);
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record(PROFILE_HEADER).map_err(csv_error)?;
    for e in &r.edges {
        let get = |v: &[f64], k: usize| v.get(k).copied().unwrap_or(f64::NAN);
        let (b_lo, b_hi) = super::bounds::edge_envelope(r, e.edge).unwrap_or((&[], &[]));
        for (k, &s) in e.positions.iter().enumerate() {
            w.write_record([
                e.edge.name().to_string(),
                u.pos_file(r.plate.shape(), e.edge, s),
                u.temp_file(get(&e.estimate, k)),
                u.temp_file(get(&e.lower, k)),
                u.temp_file(get(&e.upper, k)),
                u.temp_file(get(&e.simultaneous_lower, k)),
                u.temp_file(get(&e.simultaneous_upper, k)),
                u.temp_file(get(&e.linear_lower, k)),
                u.temp_file(get(&e.linear_upper, k)),
                u.temp_file(get(b_lo, k)),
                u.temp_file(get(b_hi, k)),
            ])
            .map_err(csv_error)?;
        }
    }
    finish(w)
}

/// `field.csv`: one row per grid node, x varying fastest.
pub(crate) fn field_csv(r: &EstimateResult) -> Result<Vec<u8>> {
    let u = CaseUnits::new(r.units);
    let f = &r.field;
    let nx = f.xs.len();
    let get = |v: &[f64], k: usize| v.get(k).copied().unwrap_or(f64::NAN);
    let shape = *r.plate.shape();
    let round = shape.is_round();
    let mut w = csv::Writer::from_writer(Vec::new());
    if round {
        // a round part's grid is polar: its radius and angle (degrees) follow
        let mut header = FIELD_HEADER.to_vec();
        header.extend(["radius", "angle"]);
        w.write_record(header).map_err(csv_error)?;
    } else {
        w.write_record(FIELD_HEADER).map_err(csv_error)?;
    }
    for (j, &gy) in f.ys.iter().enumerate() {
        for (i, &gx) in f.xs.iter().enumerate() {
            let k = j * nx + i;
            let p = crate::case::grid_point(&shape, gx, gy);
            let mut row = vec![
                u.len_file(p.x),
                u.len_file(p.y),
                u.temp_file(get(&f.estimate, k)),
                u.temp_file(get(&f.lower, k)),
                u.temp_file(get(&f.upper, k)),
            ];
            if round {
                row.push(u.len_file(gy));
                row.push(crate::report::format::fixed(gx.to_degrees(), 3));
            }
            w.write_record(row).map_err(csv_error)?;
        }
    }
    finish(w)
}

/// `sensors.csv`: the diagnostics of every sensor, in the order of the case's sensors file.
pub(crate) fn sensors_csv(r: &EstimateResult) -> Result<Vec<u8>> {
    let u = CaseUnits::new(r.units);
    let mut w = csv::Writer::from_writer(Vec::new());
    // The calibration offsets, when any sensor has one, in a last column.
    let with_offset = r.sensors.iter().any(|s| s.offset.is_some());
    let mut header: Vec<&str> = SENSORS_HEADER.to_vec();
    if with_offset {
        header.push("offset");
    }
    w.write_record(&header).map_err(csv_error)?;
    for s in &r.sensors {
        let mut record = vec![
            s.sensor.clone(),
            u.len_file(s.position.x),
            u.len_file(s.position.y),
            s.reading.map_or_else(String::new, |v| u.temp_file(v)),
            u.temp_file(s.fitted),
            s.residual.map_or_else(String::new, |v| u.dtemp_file(v)),
            opt_fixed(s.loo_residual, RATIO_FILE_DECIMALS),
            opt_fixed(s.leverage, RATIO_FILE_DECIMALS),
            s.sigma.map_or_else(String::new, |v| u.dtemp_file(v)),
            s.flag.clone().unwrap_or_default(),
            r.doubtful_sensors
                .iter()
                .find(|d| d.sensor == s.sensor && s.doubtful)
                .map_or_else(String::new, |d| super::summary::doubt_message(r, d)),
        ];
        if with_offset {
            record.push(s.offset.map_or_else(String::new, |v| u.dtemp_file(v)));
        }
        w.write_record(&record).map_err(csv_error)?;
    }
    finish(w)
}

/// Mean of `upper - lower` halved over the finite pairs: the typical half-width of a band.
pub(crate) fn mean_half_width(lower: &[f64], upper: &[f64]) -> f64 {
    let widths: Vec<f64> = lower
        .iter()
        .zip(upper)
        .map(|(l, u)| 0.5 * (u - l))
        .filter(|w| w.is_finite())
        .collect();
    if widths.is_empty() {
        f64::NAN
    } else {
        widths.iter().sum::<f64>() / widths.len() as f64
    }
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;

    #[test]
    fn half_width_ignores_missing_values() {
        assert_eq!(mean_half_width(&[0.0, f64::NAN], &[2.0, 1.0]), 1.0);
        assert!(mean_half_width(&[], &[]).is_nan());
    }
}
