//! Plausibility ranges: one documented range per physical quantity a case states, checked
//! where the value is read (every command reads through [`crate::io`], so every command
//! refuses the same values).
//!
//! The ranges are wide on purpose: they are not statements about any particular hardware,
//! only limits outside which a value is a typing or unit mistake, or an over-range code,
//! and outside which the arithmetic of the method (squares of weighted residuals, decays
//! `exp(−nπd/W)`, sums of many series terms) is no longer safe in double precision. They are
//! listed in `docs/case-files.md` ("Plausible ranges").
//!
//! | quantity | range | why |
//! |---|---|---|
//! | temperature (readings, fixed edges, profiles, limits) | 0 K to 5000 K | below absolute zero is impossible; no thermocouple type in IEC 60584-1 is specified above about 2100 K (type B, up to 1820 °C; recalled from memory), so 5000 K is far outside any instrumented plate and leaves headroom |
//! | reading standard uncertainty (`sigma`, `--noise`) | 1e-6 K to 1000 K | a micro-kelvin is below any thermocouple's resolution (common practice); 1000 K is a fifth of the whole temperature range; within it the weighted residuals `(d − Ac)/σ` stay far from overflow and underflow |
//! | plate size, sensor depth along a strip, candidate spacing, position uncertainty | 1 µm to 1 km | smaller is below machining tolerance, larger is not a plate (common practice); keeps lengths, positions and their ratios far from overflow |
//! | conductivity | 1e-4 to 1e5 W/(m K) | still air is about 0.026 W/(m K) and diamond about 2000 W/(m K) (Incropera et al., appendix A; recalled from memory) |
//! | heat transfer coefficient (`h`, `h_range`) | 1e-3 to 1e7 W/(m² K) | free convection in gases is about 2–25 W/(m² K) and boiling or condensation up to about 1e5 W/(m² K) (Incropera et al., Table 1.1; recalled from memory); outside the range `h/κ` over any plausible plate is either no exchange at all or a held temperature |
//! | gradient limit (`max_gradient`) | 1e-9 K/m to 5e12 K/m | the whole temperature range over the smallest length, and a gradient too small to matter |
//!
//! Each check returns the value in SI units or a message for the caller to attach to a file,
//! line and field.

use crate::units::Units;

/// Lowest plausible absolute temperature, kelvin (absolute zero).
pub const MIN_TEMPERATURE_K: f64 = 0.0;
/// Highest plausible temperature of a reading, an edge or a limit, kelvin.
pub const MAX_TEMPERATURE_K: f64 = 5000.0;
/// Smallest plausible reading standard uncertainty, kelvin.
pub const MIN_SIGMA_K: f64 = 1e-6;
/// Largest plausible reading standard uncertainty, kelvin.
pub const MAX_SIGMA_K: f64 = 1000.0;
/// Smallest plausible length (plate size, spacing, position uncertainty), metres.
pub const MIN_LENGTH_M: f64 = 1e-6;
/// Largest plausible length (plate size, depth along a strip), metres.
pub const MAX_LENGTH_M: f64 = 1e3;
/// Smallest plausible conductivity, W/(m K).
pub const MIN_CONDUCTIVITY: f64 = 1e-4;
/// Largest plausible conductivity, W/(m K).
pub const MAX_CONDUCTIVITY: f64 = 1e5;
/// Smallest plausible heat transfer coefficient, W/(m² K).
pub const MIN_HEAT_TRANSFER: f64 = 1e-3;
/// Largest plausible heat transfer coefficient, W/(m² K).
pub const MAX_HEAT_TRANSFER: f64 = 1e7;
/// Smallest plausible gradient limit, K/m.
pub const MIN_GRADIENT_K_PER_M: f64 = 1e-9;
/// Largest plausible gradient limit, K/m.
pub const MAX_GRADIENT_K_PER_M: f64 = 5e12;

/// A value converted back to the case unit for a message, without the round-off of the
/// conversion (`4726.85`, not `4726.850000000001`).
fn tidy(v: f64) -> String {
    format!("{v:.9e}").parse::<f64>().unwrap_or(v).to_string()
}

/// `v` as written, short: `1e308` rather than three hundred digits.
pub fn short(v: f64) -> String {
    if v != 0.0 && v.is_finite() && !(1e-4..1e9).contains(&v.abs()) {
        format!("{v:e}")
    } else {
        v.to_string()
    }
}

/// An absolute temperature `t` in the case unit, checked against
/// [`MIN_TEMPERATURE_K`]..=[`MAX_TEMPERATURE_K`], in kelvin.
///
/// # Errors
/// A message saying which end of the range `t` is beyond, in the case unit.
pub fn temperature_k(units: &Units, t: f64) -> Result<f64, String> {
    let u = units.temperature;
    if !t.is_finite() {
        return Err(format!(
            "{} is not a finite temperature; give a value in {u}",
            short(t)
        ));
    }
    let k = units.temp_to_k(t);
    if k < MIN_TEMPERATURE_K {
        let zero = tidy(units.temp_from_k(MIN_TEMPERATURE_K));
        return Err(format!(
            "{} {u} is below absolute zero ({zero} {u}); check the value and temperature_unit",
            short(t)
        ));
    }
    if k > MAX_TEMPERATURE_K {
        let top = tidy(units.temp_from_k(MAX_TEMPERATURE_K));
        return Err(format!(
            "{} {u} is not a plausible temperature (above {top} {u}, that is \
             {MAX_TEMPERATURE_K} K); check the value and temperature_unit",
            short(t)
        ));
    }
    Ok(k)
}

/// A reading standard uncertainty `s` in the case's temperature unit (a difference), checked
/// against [`MIN_SIGMA_K`]..=[`MAX_SIGMA_K`], in kelvin.
///
/// # Errors
/// A message giving the range in the case unit.
pub fn sigma_k(units: &Units, s: f64) -> Result<f64, String> {
    let k = units.dtemp_to_k(s);
    if s.is_finite() && (MIN_SIGMA_K..=MAX_SIGMA_K).contains(&k) {
        return Ok(k);
    }
    let u = units.temperature;
    Err(format!(
        "a standard uncertainty of {} {u} is outside the plausible range {} to {} {u} \
         ({MIN_SIGMA_K:e} K to {MAX_SIGMA_K} K)",
        short(s),
        tidy(units.dtemp_from_k(MIN_SIGMA_K)),
        tidy(units.dtemp_from_k(MAX_SIGMA_K)),
    ))
}

/// A length `v` in the case unit, checked against [`MIN_LENGTH_M`]..=[`MAX_LENGTH_M`], in
/// metres. `what` names the quantity for the message ("the width").
///
/// # Errors
/// A message giving the range in the case unit.
pub fn length_m(units: &Units, v: f64, what: &str) -> Result<f64, String> {
    let m = units.length_to_m(v);
    if v.is_finite() && (MIN_LENGTH_M..=MAX_LENGTH_M).contains(&m) {
        return Ok(m);
    }
    let l = units.length;
    Err(format!(
        "{what} {} {l} is outside the plausible range {} to {} {l} ({MIN_LENGTH_M:e} m to \
         {MAX_LENGTH_M} m)",
        short(v),
        tidy(units.length_from_m(MIN_LENGTH_M)),
        tidy(units.length_from_m(MAX_LENGTH_M)),
    ))
}

/// A conductivity in W/(m K), checked against [`MIN_CONDUCTIVITY`]..=[`MAX_CONDUCTIVITY`].
///
/// # Errors
/// A message giving the range.
pub fn conductivity(k: f64) -> Result<f64, String> {
    if k.is_finite() && (MIN_CONDUCTIVITY..=MAX_CONDUCTIVITY).contains(&k) {
        return Ok(k);
    }
    Err(format!(
        "a conductivity of {} W/(m K) is outside the plausible range {MIN_CONDUCTIVITY:e} to \
         {MAX_CONDUCTIVITY:e} W/(m K)",
        short(k)
    ))
}

/// A heat transfer coefficient in W/(m² K), checked against
/// [`MIN_HEAT_TRANSFER`]..=[`MAX_HEAT_TRANSFER`].
///
/// # Errors
/// A message giving the range.
pub fn heat_transfer(h: f64) -> Result<f64, String> {
    if h.is_finite() && (MIN_HEAT_TRANSFER..=MAX_HEAT_TRANSFER).contains(&h) {
        return Ok(h);
    }
    Err(format!(
        "a heat transfer coefficient of {} W/(m^2 K) is outside the plausible range \
         {MIN_HEAT_TRANSFER:e} to {MAX_HEAT_TRANSFER:e} W/(m^2 K)",
        short(h)
    ))
}

/// A gradient limit `g` in the case's temperature unit per length unit, checked against
/// [`MIN_GRADIENT_K_PER_M`]..=[`MAX_GRADIENT_K_PER_M`], in K/m.
///
/// # Errors
/// A message giving the range in K/m.
pub fn gradient_k_per_m(units: &Units, g: f64) -> Result<f64, String> {
    gradient_k_per_m_in(units, g, units.length_to_m(1.0), "length unit")
}

/// [`gradient_k_per_m`] for a gradient stated per `unit_m` metres of position (a degree of
/// arc on a round part, `unit_name` naming it in the message).
pub fn gradient_k_per_m_in(
    units: &Units,
    g: f64,
    unit_m: f64,
    unit_name: &str,
) -> Result<f64, String> {
    let k = units.dtemp_to_k(g) / unit_m;
    if g.is_finite() && (MIN_GRADIENT_K_PER_M..=MAX_GRADIENT_K_PER_M).contains(&k) {
        return Ok(k);
    }
    Err(format!(
        "a gradient limit of {} (temperature unit per {unit_name}) is outside the plausible \
         range {MIN_GRADIENT_K_PER_M:e} to {MAX_GRADIENT_K_PER_M:e} K/m; it must be a positive \
         number",
        short(g)
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::{LengthUnit, TemperatureUnit};

    fn units(t: TemperatureUnit) -> Units {
        Units {
            length: LengthUnit::Millimetre,
            temperature: t,
        }
    }

    #[test]
    fn temperature_range_in_every_unit() {
        // 0 °C = 273.15 K and 0 °F = 255.372 K (the definitions of the scales).
        let c = units(TemperatureUnit::Celsius);
        assert!((temperature_k(&c, 25.0).unwrap() - 298.15).abs() < 1e-9);
        assert!(
            temperature_k(&c, -273.16)
                .unwrap_err()
                .contains("below absolute zero")
        );
        let e = temperature_k(&c, 1e308).unwrap_err();
        assert!(e.contains("1e308") && e.contains("4726.85"), "{e}");
        assert!(temperature_k(&c, 4726.85).is_ok());
        assert!(temperature_k(&c, f64::NAN).is_err());
        let f = units(TemperatureUnit::Fahrenheit);
        assert!(temperature_k(&f, -459.67).is_ok());
        assert!(temperature_k(&f, -459.7).is_err());
    }

    #[test]
    fn sigma_length_and_others() {
        let c = units(TemperatureUnit::Celsius);
        assert!(sigma_k(&c, 0.1).is_ok());
        for bad in [1e-200, 1e300, 0.0, -1.0, f64::INFINITY, 5e-7, 1001.0] {
            assert!(sigma_k(&c, bad).is_err(), "{bad}");
        }
        assert!(length_m(&c, 100.0, "the width").is_ok());
        let e = length_m(&c, 1e308, "the width").unwrap_err();
        assert!(e.contains("the width 1e308 mm"), "{e}");
        assert!(length_m(&c, 1e-4, "the width").is_err());
        assert!(conductivity(200.0).is_ok());
        assert!(conductivity(0.0).is_err() && conductivity(1e300).is_err());
        assert!(gradient_k_per_m(&c, 1.0).is_ok());
        assert!(gradient_k_per_m(&c, 1e-300).is_err() && gradient_k_per_m(&c, -1.0).is_err());
        assert_eq!(short(1e308), "1e308");
        assert_eq!(short(12.5), "12.5");
    }
}
