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
    /// Nothing stated: estimate from the residuals (unless every sensor has its own sigma).
    Unstated,
}
