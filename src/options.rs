//! Run settings given as plain values — command-line flags, Python keyword arguments —
//! checked once, for every front end. Errors name the field `option.NAME`; the command line
//! shows it as the flag `--NAME`, the Python module as the keyword argument `NAME`.

use crate::case::{Case, MAX_GRID, StrengthRule};
use crate::error::{Error, Result};

/// The alarm limit (case temperature unit, returned in kelvin) and the probability above
/// which a limit is an alarm (a fraction strictly between 0 and 1).
///
/// # Errors
/// [`Error::Invalid`] on `option.probability` or `option.limit`.
pub fn alarm(limit: Option<f64>, probability: f64, case: &Case) -> Result<Option<f64>> {
    if !(probability > 0.0 && probability < 1.0) {
        return Err(Error::invalid_field(
            "option.probability",
            format!(
                "must lie strictly between 0 and 1, not {probability}: it is a fraction \
                 (0.05 for 5 %)"
            ),
        ));
    }
    match limit {
        Some(t) => crate::plausible::temperature_k(&case.units, t)
            .map(Some)
            .map_err(|m| Error::invalid_field("option.limit", m)),
        None => Ok(None),
    }
}

/// A gradient limit in the case's temperature unit per length unit (per degree on a round
/// part), as K/m.
///
/// # Errors
/// [`Error::Invalid`] on `option.max_gradient`.
pub fn max_gradient(g: Option<f64>, case: &Case) -> Result<Option<f64>> {
    match g {
        // per degree of arc on a round part (crate::bounds::gradient_unit_m)
        Some(g) => crate::plausible::gradient_k_per_m_in(
            &case.units,
            g,
            crate::bounds::gradient_unit_m(&case.plate, &case.units),
            if case.plate.shape().is_round() {
                "degree"
            } else {
                "length unit"
            },
        )
        .map(Some)
        .map_err(|m| Error::invalid_field("option.max_gradient", m)),
        None => Ok(None),
    }
}

/// A strength rule: `gcv`, `discrepancy`, `evidence`, `lcurve` or a positive number (a
/// fixed strength).
///
/// # Errors
/// [`Error::Invalid`] on `option.strength`.
pub fn strength(s: &str) -> Result<StrengthRule> {
    let rule = match s.trim() {
        "gcv" => StrengthRule::Gcv,
        "discrepancy" => StrengthRule::Discrepancy,
        "evidence" => StrengthRule::Evidence,
        "lcurve" => StrengthRule::LCurve,
        other => match other.parse::<f64>() {
            Ok(v) if v.is_finite() && v > 0.0 => StrengthRule::Fixed(v),
            _ => {
                return Err(Error::invalid_field(
                    "option.strength",
                    format!(
                        "expected gcv, discrepancy, evidence, lcurve or a positive number, \
                         not `{s}`"
                    ),
                ));
            }
        },
    };
    Ok(rule)
}

/// A field grid of `nx × ny` points, each between 2 and [`MAX_GRID`].
///
/// # Errors
/// [`Error::Invalid`] on `option.grid`.
pub fn grid(nx: usize, ny: usize) -> Result<(usize, usize)> {
    if !(2..=MAX_GRID).contains(&nx) || !(2..=MAX_GRID).contains(&ny) {
        return Err(Error::invalid_field(
            "option.grid",
            format!("expected two whole numbers NX,NY between 2 and {MAX_GRID}, got {nx},{ny}"),
        ));
    }
    Ok((nx, ny))
}

/// A count that must be at least 1 (`option.NAME`).
///
/// # Errors
/// [`Error::Invalid`] on `option.NAME` for 0.
pub fn at_least_one(name: &str, v: Option<usize>) -> Result<()> {
    if v == Some(0) {
        return Err(Error::invalid_field(
            format!("option.{name}"),
            "must be at least 1",
        ));
    }
    Ok(())
}

/// The sensors named to be left out (`--exclude`, `exclude=`), as indices of `case.sensors`;
/// an unknown id is refused with the nearest id suggested.
///
/// # Errors
/// [`Error::Invalid`] on `option.exclude`.
pub fn exclude(ids: &[String], case: &Case) -> Result<Vec<usize>> {
    ids.iter()
        .map(|id| {
            case.sensors
                .iter()
                .position(|s| s.id == id.trim())
                .ok_or_else(|| {
                    Error::invalid_field(
                        "option.exclude",
                        format!(
                            "no sensor {:?} in {}{}",
                            id.trim(),
                            case.files.sensors.display(),
                            crate::io::suggest::did_you_mean(
                                id,
                                case.sensors.iter().map(|s| s.id.as_str())
                            )
                        ),
                    )
                })
        })
        .collect()
}
