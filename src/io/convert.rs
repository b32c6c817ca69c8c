//! From a cell of a readings file or a logger file to a temperature in kelvin: thermocouple
//! voltages through the ITS-90 reference function of the case's type (`[thermocouple]`,
//! [`crate::its90`]), then the sensor's calibration `offset`.
//!
//! The messages say what was read, the range the type allows and what to check; the callers
//! add the file, the line and the column.

use crate::case::{Case, ColdJunction, Signal};
use crate::its90::{RangeError, measured_temperature_c};
use crate::units::Units;

/// The column of readings.csv that holds the value: `temperature` or `emf_mv`.
pub(crate) fn value_column(case: &Case) -> &'static str {
    match case.thermocouple.map(|t| t.signal) {
        Some(Signal::EmfMv) => "emf_mv",
        _ => "temperature",
    }
}

/// Whether the readings carry a `cold_junction` column.
pub(crate) fn cold_junction_column(case: &Case) -> bool {
    matches!(
        case.thermocouple.and_then(|t| t.cold_junction),
        Some(ColdJunction::Column)
    )
}

/// A cold-junction cell (case temperature unit) to kelvin, checked against the type's range.
pub(crate) fn cold_junction_k(case: &Case, t: f64) -> Result<f64, String> {
    let k = crate::io::csv_files::absolute_temperature(&case.units, t)?;
    if let Some(tc) = case.thermocouple {
        let (lo, hi) = tc.tc_type.range_c();
        let c = k - 273.15;
        if !(c >= lo && c <= hi) {
            return Err(format!(
                "cold junction {t} {} is outside the type {} reference function ({lo} to {hi} °C)",
                case.units.temperature, tc.tc_type
            ));
        }
    }
    Ok(k)
}

/// A reading as written (a temperature in the case unit, or a voltage in mV) to kelvin,
/// before the sensor's offset. `cold_junction_k` is the row's cold junction when the case
/// takes it from a column.
pub(crate) fn reading_k(
    case: &Case,
    value: f64,
    cold_junction_k: Option<f64>,
) -> Result<f64, String> {
    let units = &case.units;
    let Some(conv) = case.conversion() else {
        return crate::io::csv_files::absolute_temperature(units, value);
    };
    let cj_k = match conv.cold_junction {
        ColdJunction::Fixed(k) => k,
        ColdJunction::Column => cold_junction_k
            .ok_or_else(|| "this row has no cold-junction temperature".to_string())?,
    };
    let ty = conv.tc_type;
    match measured_temperature_c(ty, value, cj_k - 273.15) {
        Ok(c) => Ok(c + 273.15),
        Err(RangeError::Voltage { lo, hi }) => {
            let (t_lo, t_hi) = ty.inverse_range_c();
            Err(format!(
                "{value} mV is outside what a type {ty} thermocouple gives with its cold junction \
                 at {}: {lo:.3} to {hi:.3} mV ({} to {} on the ITS-90 reference function); \
                 check the type, that the column is in millivolts and the cold junction",
                temp_text(units, cj_k),
                temp_text(units, t_lo + 273.15),
                temp_text(units, t_hi + 273.15),
            ))
        }
        Err(RangeError::Temperature { lo, hi }) => Err(format!(
            "the cold junction at {} is outside the type {ty} reference function ({lo} to {hi} \
             °C)",
            temp_text(units, cj_k)
        )),
    }
}

/// A reading in kelvin less the sensor's calibration offset.
pub(crate) fn with_offset(case: &Case, sensor: usize, k: f64) -> f64 {
    match case.sensors.get(sensor).and_then(|s| s.offset_k) {
        Some(o) => k - o,
        None => k,
    }
}

fn temp_text(units: &Units, k: f64) -> String {
    let v = format!("{:.3}", units.temp_from_k(k));
    let v = v.trim_end_matches('0').trim_end_matches('.');
    format!("{v} {}", crate::case::degree_symbol(units))
}
