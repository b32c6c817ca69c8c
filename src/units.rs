//! Units of length and temperature, converted once at the edge of the program.
//!
//! Inside the library every length is in metres and every temperature in kelvin; a
//! temperature *difference* (a standard uncertainty, a band half-width) is in kelvin too.
//! [`Units`] converts between those and the units a case is written in.

use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

/// A unit of length accepted in case files.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum LengthUnit {
    /// millimetre
    #[serde(rename = "mm")]
    Millimetre,
    /// metre
    #[serde(rename = "m")]
    Metre,
    /// inch (exactly 25.4 mm)
    #[serde(rename = "in")]
    Inch,
}

impl LengthUnit {
    /// Metres per unit.
    pub fn metres(self) -> f64 {
        match self {
            LengthUnit::Millimetre => 1e-3,
            LengthUnit::Metre => 1.0,
            LengthUnit::Inch => 0.0254,
        }
    }
    /// The symbol as written in case files.
    pub fn symbol(self) -> &'static str {
        match self {
            LengthUnit::Millimetre => "mm",
            LengthUnit::Metre => "m",
            LengthUnit::Inch => "in",
        }
    }
}

impl FromStr for LengthUnit {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s {
            "mm" => Ok(LengthUnit::Millimetre),
            "m" => Ok(LengthUnit::Metre),
            "in" => Ok(LengthUnit::Inch),
            _ => Err(format!("unknown length unit `{s}`; use mm, m or in")),
        }
    }
}

impl fmt::Display for LengthUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.symbol())
    }
}

/// A temperature scale accepted in case files.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum TemperatureUnit {
    /// degree Celsius
    #[serde(rename = "C")]
    Celsius,
    /// kelvin
    #[serde(rename = "K")]
    Kelvin,
    /// degree Fahrenheit
    #[serde(rename = "F")]
    Fahrenheit,
}

impl TemperatureUnit {
    /// The symbol as written in case files.
    pub fn symbol(self) -> &'static str {
        match self {
            TemperatureUnit::Celsius => "C",
            TemperatureUnit::Kelvin => "K",
            TemperatureUnit::Fahrenheit => "F",
        }
    }
    /// The symbol as a reader writes it: `°C`, `K`, `°F`.
    pub fn reader_symbol(self) -> &'static str {
        match self {
            TemperatureUnit::Celsius => "°C",
            TemperatureUnit::Kelvin => "K",
            TemperatureUnit::Fahrenheit => "°F",
        }
    }
    /// Kelvin per degree of this scale (the factor for differences).
    pub fn kelvin_per_degree(self) -> f64 {
        match self {
            TemperatureUnit::Celsius | TemperatureUnit::Kelvin => 1.0,
            TemperatureUnit::Fahrenheit => 5.0 / 9.0,
        }
    }
    /// An absolute temperature on this scale, in kelvin.
    pub fn to_kelvin(self, t: f64) -> f64 {
        match self {
            TemperatureUnit::Celsius => t + 273.15,
            TemperatureUnit::Kelvin => t,
            TemperatureUnit::Fahrenheit => (t - 32.0) * 5.0 / 9.0 + 273.15,
        }
    }
    /// An absolute temperature in kelvin, on this scale.
    pub fn from_kelvin(self, k: f64) -> f64 {
        match self {
            TemperatureUnit::Celsius => k - 273.15,
            TemperatureUnit::Kelvin => k,
            TemperatureUnit::Fahrenheit => (k - 273.15) * 9.0 / 5.0 + 32.0,
        }
    }
}

impl FromStr for TemperatureUnit {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s {
            "C" => Ok(TemperatureUnit::Celsius),
            "K" => Ok(TemperatureUnit::Kelvin),
            "F" => Ok(TemperatureUnit::Fahrenheit),
            _ => Err(format!("unknown temperature unit `{s}`; use C, K or F")),
        }
    }
}

impl fmt::Display for TemperatureUnit {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.symbol())
    }
}

/// The units a case is written in, with conversions to and from the library's SI values.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct Units {
    /// Length unit of the case.
    pub length: LengthUnit,
    /// Temperature scale of the case.
    pub temperature: TemperatureUnit,
}

impl Default for Units {
    fn default() -> Self {
        Units {
            length: LengthUnit::Millimetre,
            temperature: TemperatureUnit::Celsius,
        }
    }
}

impl Units {
    /// Case length → metres.
    pub fn length_to_m(&self, v: f64) -> f64 {
        v * self.length.metres()
    }
    /// Metres → case length.
    pub fn length_from_m(&self, m: f64) -> f64 {
        m / self.length.metres()
    }
    /// Case temperature → kelvin.
    pub fn temp_to_k(&self, t: f64) -> f64 {
        self.temperature.to_kelvin(t)
    }
    /// Kelvin → case temperature.
    pub fn temp_from_k(&self, k: f64) -> f64 {
        self.temperature.from_kelvin(k)
    }
    /// Case temperature difference → kelvin.
    pub fn dtemp_to_k(&self, d: f64) -> f64 {
        d * self.temperature.kelvin_per_degree()
    }
    /// Kelvin difference → case temperature difference.
    pub fn dtemp_from_k(&self, d: f64) -> f64 {
        d / self.temperature.kelvin_per_degree()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Fixed points of the scales: 0 °C = 273.15 K and 212 °F = 100 °C are definitions
    // (ITS-90 / SI brochure for the kelvin offset; the Fahrenheit scale's definition).
    #[test]
    fn temperature_conversions_round_trip() {
        let u = TemperatureUnit::Fahrenheit;
        assert!((u.to_kelvin(212.0) - 373.15).abs() < 1e-12);
        assert!((u.to_kelvin(32.0) - 273.15).abs() < 1e-12);
        assert!((u.from_kelvin(u.to_kelvin(-40.0)) + 40.0).abs() < 1e-12);
        assert!((TemperatureUnit::Celsius.to_kelvin(0.0) - 273.15).abs() < 1e-12);
    }

    // 1 in = 25.4 mm exactly (international yard and pound agreement, 1959).
    #[test]
    fn length_conversions() {
        let u = Units {
            length: LengthUnit::Inch,
            temperature: TemperatureUnit::Kelvin,
        };
        assert!((u.length_to_m(1.0) - 0.0254).abs() < 1e-15);
        assert!((u.length_from_m(0.0254) - 1.0).abs() < 1e-12);
    }
}
