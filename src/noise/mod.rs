//! The noise model: a reading's standard uncertainty.
//!
//! A reading's standard uncertainty comes from, in order of precedence: a `sigma` column in
//! `sensors.csv`, `[noise] sigma` in `plate.toml`, or a thermocouple tolerance class
//! ([`tolerance`]). With none given it is estimated from the fit's residuals.

pub mod tolerance;

use serde::{Deserialize, Serialize};

/// A thermocouple tolerance class from IEC 60584-1 or ASTM E230.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum ToleranceClass {
    /// IEC 60584-1 class 1 (`iec-1`).
    #[serde(rename = "iec-1")]
    Iec1,
    /// IEC 60584-1 class 2 (`iec-2`).
    #[serde(rename = "iec-2")]
    Iec2,
    /// IEC 60584-1 class 3 (`iec-3`).
    #[serde(rename = "iec-3")]
    Iec3,
    /// ASTM E230 standard limits (`astm-standard`).
    #[serde(rename = "astm-standard")]
    AstmStandard,
    /// ASTM E230 special limits (`astm-special`).
    #[serde(rename = "astm-special")]
    AstmSpecial,
}

impl ToleranceClass {
    /// The name used in plate files.
    pub fn name(self) -> &'static str {
        match self {
            ToleranceClass::Iec1 => "iec-1",
            ToleranceClass::Iec2 => "iec-2",
            ToleranceClass::Iec3 => "iec-3",
            ToleranceClass::AstmStandard => "astm-standard",
            ToleranceClass::AstmSpecial => "astm-special",
        }
    }

    /// Parse the name used in plate files.
    pub fn parse(s: &str) -> Option<Self> {
        [
            ToleranceClass::Iec1,
            ToleranceClass::Iec2,
            ToleranceClass::Iec3,
            ToleranceClass::AstmStandard,
            ToleranceClass::AstmSpecial,
        ]
        .into_iter()
        .find(|c| c.name() == s)
    }
}

/// A thermocouple type (letter designation, IEC 60584-1 / ASTM E230).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum ThermocoupleType {
    /// Type K (nickel-chromium / nickel-aluminium).
    K,
    /// Type J (iron / copper-nickel).
    J,
    /// Type T (copper / copper-nickel).
    T,
    /// Type N (nicrosil / nisil).
    N,
    /// Type E (nickel-chromium / copper-nickel).
    E,
}

impl ThermocoupleType {
    /// The letter.
    pub fn name(self) -> &'static str {
        match self {
            ThermocoupleType::K => "K",
            ThermocoupleType::J => "J",
            ThermocoupleType::T => "T",
            ThermocoupleType::N => "N",
            ThermocoupleType::E => "E",
        }
    }

    /// Parse the letter (upper or lower case).
    pub fn parse(s: &str) -> Option<Self> {
        match s.trim().to_ascii_uppercase().as_str() {
            "K" => Some(ThermocoupleType::K),
            "J" => Some(ThermocoupleType::J),
            "T" => Some(ThermocoupleType::T),
            "N" => Some(ThermocoupleType::N),
            "E" => Some(ThermocoupleType::E),
            _ => None,
        }
    }
}

/// Where the reading uncertainty of a case comes from, as stated in the inputs.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum NoiseSpec {
    /// `[noise] sigma`: one standard uncertainty for every reading, kelvin.
    Sigma(f64),
    /// `[noise] tolerance_class` and `type`.
    Tolerance {
        /// The class.
        class: ToleranceClass,
        /// The thermocouple type.
        tc_type: ThermocoupleType,
    },
    /// `[noise] sigma_emf_mv`: one standard uncertainty for every voltage reading, mV; a
    /// reading's uncertainty in kelvin is `sigma_mv / (dE/dt)` at its temperature, the slope of
    /// the type's ITS-90 reference function ([`crate::its90::Its90Type::slope_mv_per_c`]).
    Emf {
        /// The voltage uncertainty, mV.
        sigma_mv: f64,
        /// The thermocouple type.
        tc_type: crate::its90::Its90Type,
    },
    /// Nothing stated: estimate from the residuals (unless every sensor has its own sigma).
    Unstated,
}

/// Where the reading uncertainties of a fit came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum SigmaSource {
    /// Every reading's sigma from the `sigma` column of `sensors.csv` (with `[noise]` filling
    /// the gaps, if any).
    Sensors,
    /// `[noise] sigma`.
    Stated,
    /// A thermocouple tolerance class.
    ToleranceClass,
    /// Nothing stated: estimated from the fit's residuals.
    Estimated,
}

impl SigmaSource {
    /// The name used in summaries.
    pub fn name(self) -> &'static str {
        match self {
            SigmaSource::Sensors => "sensors",
            SigmaSource::Stated => "stated",
            SigmaSource::ToleranceClass => "tolerance-class",
            SigmaSource::Estimated => "estimated",
        }
    }
}

impl std::fmt::Display for SigmaSource {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// The standard uncertainty of each reading, kelvin, and where it came from.
///
/// `own` holds each sensor's `sigma` column (kelvin) and `readings_k` the readings (kelvin),
/// both for the readings used in the fit. Precedence: a sensor's own sigma, then
/// `[noise] sigma`, then the tolerance class at the reading's temperature converted to a
/// standard uncertainty with the GUM's rectangular rule `a/√3`. With nothing stated the
/// sigmas are all 1 K (relative weights only) and the source is
/// [`SigmaSource::Estimated`]: the caller scales them by the residual estimate. When only
/// some sensors have their own sigma and nothing else is stated, the error names the first
/// sensor without one (index into `own`).
pub fn reading_sigmas(
    spec: &NoiseSpec,
    own: &[Option<f64>],
    readings_k: &[f64],
) -> Result<(Vec<f64>, SigmaSource), (usize, String)> {
    let all_own = own.iter().all(Option::is_some);
    let any_own = own.iter().any(Option::is_some);
    let mut out = Vec::with_capacity(own.len());
    for (i, (s, &t)) in own.iter().zip(readings_k).enumerate() {
        let sigma = match (s, spec) {
            (Some(s), _) => *s,
            (None, NoiseSpec::Sigma(s)) => *s,
            (None, NoiseSpec::Tolerance { class, tc_type }) => {
                tolerance::standard_uncertainty(*class, *tc_type, t - 273.15).map_err(|m| (i, m))?
            }
            (None, NoiseSpec::Emf { sigma_mv, tc_type }) => {
                let slope = tc_type.slope_mv_per_c(t - 273.15).map_err(|_| {
                    (
                        i,
                        format!(
                            "the reading {:.3} K is outside the type {tc_type} reference \
                             function, so its voltage uncertainty cannot be converted",
                            t
                        ),
                    )
                })?;
                sigma_mv / slope
            }
            (None, NoiseSpec::Unstated) if any_own => {
                return Err((
                    i,
                    "this sensor has no sigma while others do, and plate.toml has no [noise] \
                     section: give every sensor a sigma, or add [noise] sigma"
                        .to_string(),
                ));
            }
            (None, NoiseSpec::Unstated) => 1.0,
        };
        out.push(sigma);
    }
    let source = if any_own {
        SigmaSource::Sensors
    } else {
        match spec {
            NoiseSpec::Sigma(_) | NoiseSpec::Emf { .. } => SigmaSource::Stated,
            NoiseSpec::Tolerance { .. } => SigmaSource::ToleranceClass,
            NoiseSpec::Unstated => SigmaSource::Estimated,
        }
    };
    debug_assert!(all_own || !any_own || !matches!(spec, NoiseSpec::Unstated));
    Ok((out, source))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn precedence_of_sigma_sources() {
        let (s, src) =
            reading_sigmas(&NoiseSpec::Sigma(0.2), &[Some(0.5), None], &[300.0, 301.0]).unwrap();
        assert_eq!(s, vec![0.5, 0.2]);
        assert_eq!(src, SigmaSource::Sensors);
        let (s, src) =
            reading_sigmas(&NoiseSpec::Unstated, &[None, None], &[300.0, 301.0]).unwrap();
        assert_eq!(s, vec![1.0, 1.0]);
        assert_eq!(src, SigmaSource::Estimated);
        assert_eq!(
            reading_sigmas(&NoiseSpec::Unstated, &[Some(0.1), None], &[300.0, 301.0])
                .unwrap_err()
                .0,
            1
        );
        // IEC 60584-1 class 1, type T: ±0.5 °C below 125 °C; u = a/√3 (GUM rectangular rule).
        let spec = NoiseSpec::Tolerance {
            class: ToleranceClass::Iec1,
            tc_type: ThermocoupleType::T,
        };
        let (s, src) = reading_sigmas(&spec, &[None], &[273.15 + 60.0]).unwrap();
        assert!((s[0] - 0.5 / 3f64.sqrt()).abs() < 1e-12);
        assert_eq!(src, SigmaSource::ToleranceClass);
        // A voltage uncertainty through the slope: type K near 100 °C has dE/dt ≈ 0.0415
        // mV/K (NIST Monograph 175 type K table: 4.096 mV at 100 °C, 4.138 mV at 101 °C —
        // recalled from memory), so 0.01 mV is about 0.24 K.
        let spec = NoiseSpec::Emf {
            sigma_mv: 0.01,
            tc_type: crate::its90::Its90Type::K,
        };
        let (s, src) = reading_sigmas(&spec, &[None], &[373.15]).unwrap();
        let slope = crate::its90::Its90Type::K.slope_mv_per_c(100.0).unwrap();
        assert!((s[0] - 0.01 / slope).abs() < 1e-12);
        assert!((slope - 0.042).abs() < 0.001, "{slope}");
        assert_eq!(src, SigmaSource::Stated);
    }
}
