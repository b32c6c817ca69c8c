//! Numbers and units for every output: SI values converted back to the case's units once,
//! written with a fixed precision, missing or non-finite values left empty (CSV) or `null`
//! (JSON), and text escaped for HTML and SVG.

use crate::geometry::{Edge, Shape};
use crate::units::{LengthUnit, Units};
use serde_json::Value;

/// Decimals of a temperature (or temperature difference) in the data files: 0.1 mK in
/// kelvin and Celsius, well below any thermocouple's resolution, so rounding never shows.
pub(crate) const TEMP_FILE_DECIMALS: usize = 4;

/// Decimals of dimensionless diagnostics (leverage, standardised residuals, probabilities,
/// effective parameters, chi-square) in the data files.
pub(crate) const RATIO_FILE_DECIMALS: usize = 4;

/// Significant digits for values that span decades (the strength, p-values).
pub(crate) const SIGNIFICANT_DIGITS: i32 = 4;

/// Case units and conversions from the library's SI values, with the formats each output
/// uses.
#[derive(Debug, Clone, Copy)]
pub(crate) struct CaseUnits {
    units: Units,
    /// Round parts: metres of arc per degree at which gradients are stated
    /// ([`crate::bounds::gradient_unit_m`]); `None`: per length unit.
    degree_m: Option<f64>,
}

impl CaseUnits {
    pub(crate) fn new(units: Units) -> Self {
        CaseUnits {
            units,
            degree_m: None,
        }
    }

    /// The units of a case on `plate`: gradients per degree on a round part.
    pub(crate) fn of_plate(units: Units, plate: &crate::geometry::Plate) -> Self {
        CaseUnits {
            units,
            degree_m: plate
                .shape()
                .is_round()
                .then(|| crate::bounds::gradient_unit_m(plate, &units)),
        }
    }

    /// A gradient, K/m, in the case's temperature unit per length unit (per degree on a
    /// round part).
    pub(crate) fn gradient(&self, g_k_per_m: f64) -> f64 {
        match self.degree_m {
            Some(m) => self.dtemp(g_k_per_m) * m,
            None => self.dtemp(g_k_per_m) / self.len(1.0),
        }
    }

    /// The position unit of a gradient in files (`mm`, `deg`).
    pub(crate) fn gradient_per(&self) -> &'static str {
        if self.degree_m.is_some() {
            "deg"
        } else {
            self.len_symbol()
        }
    }

    /// The position unit of a gradient for a reader (`mm`, `°`).
    pub(crate) fn gradient_per_show(&self) -> &'static str {
        if self.degree_m.is_some() {
            "°"
        } else {
            self.len_symbol()
        }
    }

    /// Metres → case length.
    pub(crate) fn len(&self, m: f64) -> f64 {
        self.units.length_from_m(m)
    }

    /// Kelvin → case temperature.
    pub(crate) fn temp(&self, k: f64) -> f64 {
        self.units.temp_from_k(k)
    }

    /// Kelvin difference → case temperature difference.
    pub(crate) fn dtemp(&self, k: f64) -> f64 {
        self.units.dtemp_from_k(k)
    }

    /// Length unit symbol (`mm`, `m`, `in`).
    pub(crate) fn len_symbol(&self) -> &'static str {
        self.units.length.symbol()
    }

    /// Temperature unit as a reader writes it (`°C`, `K`, `°F`).
    pub(crate) fn temp_symbol(&self) -> &'static str {
        self.units.temperature.reader_symbol()
    }

    /// Temperature unit as written in case files (`C`, `K`, `F`).
    pub(crate) fn temp_code(&self) -> &'static str {
        self.units.temperature.symbol()
    }

    /// Decimals of a length in the data files: 1 µm in millimetres and metres, 0.0001 in.
    pub(crate) fn len_file_decimals(&self) -> usize {
        match self.units.length {
            LengthUnit::Millimetre => 3,
            LengthUnit::Metre => 6,
            LengthUnit::Inch => 4,
        }
    }

    /// Decimals of a length shown to a reader: 0.1 mm, 0.1 mm in metres, 0.001 in.
    pub(crate) fn len_show_decimals(&self) -> usize {
        match self.units.length {
            LengthUnit::Millimetre => 1,
            LengthUnit::Metre => 4,
            LengthUnit::Inch => 3,
        }
    }

    /// A position along `edge` (metres along a straight edge, arc length along a circle) in
    /// the unit its files use: the case length unit, or degrees counter-clockwise from `+x`
    /// on a circle.
    pub(crate) fn pos(&self, shape: &Shape, edge: Edge, s: f64) -> f64 {
        match shape.radius_of(edge) {
            Some(r) => (s / r).to_degrees(),
            None => self.len(s),
        }
    }

    /// The unit of a position along `edge` for a reader (`°` on a circle).
    pub(crate) fn pos_symbol(&self, shape: &Shape, edge: Edge) -> &'static str {
        if shape.radius_of(edge).is_some() {
            "°"
        } else {
            self.len_symbol()
        }
    }

    /// A position along `edge` for a reader, number only.
    pub(crate) fn pos_num(&self, shape: &Shape, edge: Edge, s: f64) -> String {
        if shape.radius_of(edge).is_some() {
            fixed_or_dash(self.pos(shape, edge, s), 1)
        } else {
            self.len_num(s)
        }
    }

    /// A position along `edge` for a data file (degrees to 0.001 on a circle).
    pub(crate) fn pos_file(&self, shape: &Shape, edge: Edge, s: f64) -> String {
        if shape.radius_of(edge).is_some() {
            fixed(self.pos(shape, edge, s), 3)
        } else {
            self.len_file(s)
        }
    }

    /// A position along `edge` as JSON.
    pub(crate) fn pos_json(&self, shape: &Shape, edge: Edge, s: f64) -> Value {
        if shape.radius_of(edge).is_some() {
            rounded(self.pos(shape, edge, s), 3)
        } else {
            self.len_json(s)
        }
    }

    /// A position along `edge` for a reader, with its unit (`123.4°` on a circle).
    pub(crate) fn pos_show(&self, shape: &Shape, edge: Edge, s: f64) -> String {
        if shape.radius_of(edge).is_some() {
            format!("{}°", fixed_or_dash(self.pos(shape, edge, s), 1))
        } else {
            self.len_show(s)
        }
    }

    /// A length (metres) for a data file, in case units.
    pub(crate) fn len_file(&self, m: f64) -> String {
        fixed(self.len(m), self.len_file_decimals())
    }

    /// A temperature (kelvin) for a data file, in case units.
    pub(crate) fn temp_file(&self, k: f64) -> String {
        fixed(self.temp(k), TEMP_FILE_DECIMALS)
    }

    /// A temperature difference (kelvin) for a data file, in case units.
    pub(crate) fn dtemp_file(&self, k: f64) -> String {
        fixed(self.dtemp(k), TEMP_FILE_DECIMALS)
    }

    /// A length (metres) as JSON, in case units.
    pub(crate) fn len_json(&self, m: f64) -> Value {
        rounded(self.len(m), self.len_file_decimals())
    }

    /// A temperature (kelvin) as JSON, in case units.
    pub(crate) fn temp_json(&self, k: f64) -> Value {
        rounded(self.temp(k), TEMP_FILE_DECIMALS)
    }

    /// A temperature difference (kelvin) as JSON, in case units.
    pub(crate) fn dtemp_json(&self, k: f64) -> Value {
        rounded(self.dtemp(k), TEMP_FILE_DECIMALS)
    }

    /// A length (metres) for a reader, number only.
    pub(crate) fn len_num(&self, m: f64) -> String {
        fixed_or_dash(self.len(m), self.len_show_decimals())
    }

    /// A length (metres) for a reader, with its unit.
    pub(crate) fn len_show(&self, m: f64) -> String {
        format!("{} {}", self.len_num(m), self.len_symbol())
    }

    /// A temperature (kelvin) for a reader, number only (two decimals).
    pub(crate) fn temp_num(&self, k: f64) -> String {
        fixed_or_dash(self.temp(k), 2)
    }

    /// A temperature (kelvin) for a reader, with its unit.
    pub(crate) fn temp_show(&self, k: f64) -> String {
        format!("{} {}", self.temp_num(k), self.temp_symbol())
    }

    /// A length already in case units, for a reader, with its unit.
    pub(crate) fn case_len_show(&self, v: f64) -> String {
        format!(
            "{} {}",
            fixed_or_dash(v, self.len_show_decimals()),
            self.len_symbol()
        )
    }

    /// A temperature already in case units, for a reader, with its unit.
    pub(crate) fn case_temp_show(&self, v: f64) -> String {
        format!("{} {}", fixed_or_dash(v, 2), self.temp_symbol())
    }

    /// A temperature difference (kelvin) for a reader, number only.
    pub(crate) fn dtemp_num(&self, k: f64) -> String {
        fixed_or_dash(self.dtemp(k), 2)
    }

    /// A temperature difference (kelvin) for a reader, with its unit.
    pub(crate) fn dtemp_show(&self, k: f64) -> String {
        format!("{} {}", self.dtemp_num(k), self.temp_symbol())
    }
}

/// The coordinate that positions run along on `edge` (`docs/case-files.md`, outputs).
pub(crate) fn edge_coordinate(edge: Edge) -> &'static str {
    if edge.is_circular() {
        "angle"
    } else if edge.runs_along_x() {
        "x"
    } else {
        "y"
    }
}

/// `v` with `decimals` decimals; empty when `v` is not finite; never `-0.000`.
pub(crate) fn fixed(v: f64, decimals: usize) -> String {
    if !v.is_finite() {
        return String::new();
    }
    if v.abs() >= 1e15 {
        // three hundred digits help no reader: a value this large is written in exponent form
        return format!("{v:.decimals$e}");
    }
    if let Some(units) = fixed_units(v, decimals) {
        let mut out = Vec::with_capacity(24);
        push_units(&mut out, units, decimals);
        // only ASCII digits, a sign and a point were pushed
        return String::from_utf8(out).unwrap_or_default();
    }
    let s = format!("{v:.decimals$}");
    if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
        s[1..].to_string()
    } else {
        s
    }
}

/// Powers of ten that are exact in `f64`, up to the most decimals [`fixed_units`] takes.
const POW10: [f64; 16] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
];

/// `v` in units of its last decimal, rounded as `{v:.decimals$}` rounds it (the exact
/// binary value to the nearest unit, ties to even), as `(negative, units)`; `None` for NaN,
/// more than 15 decimals, or 2⁵² units or more.
///
/// `x = |v| · 10^decimals` is the exact product `y` rounded once. Below 2⁵² every half unit
/// `n + ½` is a double, and rounding is monotone, so `x > n + ½` implies `y > n + ½` and
/// `x < n + ½` implies `y < n + ½`: `x` rounds to the nearest integer as `y` does, except when
/// `x` is a half unit itself (a tie, or a product that rounded onto one); then the sign of
/// the exact error `y − x` decides, and a zero error is a tie, rounded to the even unit.
/// Outputs write tens of thousands of numbers (and positions on a grid of binary fractions
/// are often exact ties); this spares all of them the formatter's exact digit generation,
/// and the text is the formatter's.
#[allow(clippy::float_cmp)] // a half unit is compared exactly
pub(crate) fn fixed_units(v: f64, decimals: usize) -> Option<(bool, u64)> {
    let scale = *POW10.get(decimals)?;
    let x = v.abs() * scale;
    if x.is_nan() || x >= 4_503_599_627_370_496.0 {
        return None; // 2⁵²
    }
    let whole = x.floor();
    let frac = x - whole; // exact below 2⁵²
    let up = if frac == 0.5 {
        // a half unit: the product's rounding error decides, and it is exact (the error of a
        // rounded product is a double, which a fused multiply-add returns unrounded: Dekker
        // 1971, "A floating-point technique for extending the available precision", Numer.
        // Math. 18:224–242; |v| ≥ ½·10⁻¹⁵ here, far from underflow). A zero error is a true
        // tie, which goes to the even unit
        let err = v.abs().mul_add(scale, -x);
        if err == 0.0 {
            whole % 2.0 == 1.0
        } else {
            err > 0.0
        }
    } else {
        frac > 0.5
    };
    let units = whole as u64 + u64::from(up);
    // `{:.N}` keeps the sign of a negative value that rounds to zero; [`fixed`] drops it
    Some((v.is_sign_negative() && units != 0, units))
}

/// Append `units` (from [`fixed_units`]) as a decimal number with `decimals` decimals.
pub(crate) fn push_units(out: &mut Vec<u8>, (negative, units): (bool, u64), decimals: usize) {
    let mut buf = [0u8; 24];
    let mut i = buf.len();
    let mut rest = units;
    let mut written = 0;
    // the digits from the last decimal back, with the point after `decimals` of them and at
    // least one digit before it
    while rest != 0 || written <= decimals {
        if written == decimals && decimals > 0 {
            i -= 1;
            buf[i] = b'.';
        }
        i -= 1;
        buf[i] = b'0' + (rest % 10) as u8;
        rest /= 10;
        written += 1;
    }
    if negative {
        i -= 1;
        buf[i] = b'-';
    }
    // a few bytes, pushed one by one: a copy of unknown length is a call to memcpy, which
    // costs more than the digits (`track.csv` writes millions of these)
    out.reserve(buf.len() - i);
    for &b in &buf[i..] {
        out.push(b);
    }
}

/// Like [`fixed`], but an en dash for a missing value (for a reader).
pub(crate) fn fixed_or_dash(v: f64, decimals: usize) -> String {
    if v.is_finite() {
        fixed(v, decimals)
    } else {
        "–".to_string()
    }
}

/// An optional value: [`fixed`] of the converted value, empty for `None`.
pub(crate) fn opt_fixed(v: Option<f64>, decimals: usize) -> String {
    v.map_or_else(String::new, |v| fixed(v, decimals))
}

/// `v` rounded to `decimals` decimals as a JSON number; `null` when not finite.
pub(crate) fn rounded(v: f64, decimals: usize) -> Value {
    if !v.is_finite() {
        return Value::Null;
    }
    // the rounding of [`fixed`] (an exact tie to the even unit), so that a JSON number and
    // the CSV text of the same value agree
    let r = match fixed_units(v, decimals) {
        Some((negative, units)) => {
            let magnitude = units as f64 / POW10[decimals];
            if negative { -magnitude } else { magnitude }
        }
        None => {
            let scale = 10f64.powi(decimals as i32);
            (v * scale).round() / scale
        }
    };
    // Normalise -0.0 so that files never show `-0.0`.
    json_number(if r == 0.0 { 0.0 } else { r })
}

/// `v` rounded to `digits` significant digits as a JSON number; `null` when not finite.
pub(crate) fn significant(v: f64, digits: i32) -> Value {
    if !v.is_finite() {
        return Value::Null;
    }
    if v == 0.0 {
        return json_number(0.0);
    }
    let magnitude = v.abs().log10().floor() as i32;
    let scale = 10f64.powi(digits - 1 - magnitude);
    json_number((v * scale).round() / scale)
}

/// `v` with `digits` significant digits for a reader (`1.234e-3` style for small or large
/// values).
pub(crate) fn significant_text(v: f64, digits: usize) -> String {
    if !v.is_finite() {
        return "–".to_string();
    }
    if v == 0.0 {
        return "0".to_string();
    }
    let magnitude = v.abs().log10().floor() as i32;
    if (-3..5).contains(&magnitude) {
        let decimals = (digits as i32 - 1 - magnitude).max(0) as usize;
        format!("{v:.decimals$}")
    } else {
        let decimals = digits.saturating_sub(1);
        format!("{v:.decimals$e}")
    }
}

fn json_number(v: f64) -> Value {
    serde_json::Number::from_f64(v).map_or(Value::Null, Value::Number)
}

/// Escape text for HTML or XML content and attribute values.
pub(crate) fn escape_html(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// A number for an axis tick: as few decimals as the value needs (ticks are round numbers,
/// so floating-point noise such as `0.30000000000000004` is trimmed).
pub(crate) fn tick(v: f64) -> String {
    let s = fixed(v, 6);
    if s.contains('.') {
        let t = s.trim_end_matches('0').trim_end_matches('.');
        if t == "-0" {
            "0".to_string()
        } else {
            t.to_string()
        }
    } else {
        s
    }
}

/// The fewest decimals (up to 6) that write multiples of `step` exactly.
pub(crate) fn step_decimals(step: f64) -> usize {
    (0..=6)
        .find(|&d| {
            let scaled = step * 10f64.powi(d as i32);
            (scaled - scaled.round()).abs() < 1e-6 * scaled.abs().max(1.0)
        })
        .unwrap_or(6)
}

/// A number for people: six significant digits at most, no trailing zeros (the text of
/// `check` and `simulate`).
pub fn num(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{}", if v == 0.0 { 0.0 } else { v });
    }
    let mag = v.abs().log10().floor() as i32;
    if !(-4..15).contains(&mag) {
        let s = format!("{v:.5e}");
        let (m, e) = s.split_once('e').unwrap_or((s.as_str(), "0"));
        let m = m.trim_end_matches('0').trim_end_matches('.');
        return format!("{m}e{e}");
    }
    let decimals = (5 - mag).max(0) as usize;
    let s = format!("{v:.decimals$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" { "0".into() } else { s }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::units::TemperatureUnit;

    #[test]
    fn fixed_precision_and_missing_values() {
        assert_eq!(fixed(1.23456, 3), "1.235");
        assert_eq!(fixed(1e308, 2), "1.00e308");
        assert_eq!(fixed(-2.5e20, 1), "-2.5e20");
        assert_eq!(fixed(-0.00001, 3), "0.000");
        assert_eq!(fixed(f64::NAN, 3), "");
        assert_eq!(fixed(f64::INFINITY, 1), "");
        assert_eq!(opt_fixed(None, 2), "");
        assert_eq!(rounded(f64::NAN, 2), Value::Null);
        assert_eq!(rounded(-0.00001, 2), serde_json::json!(0.0));
        assert_eq!(rounded(71.23456, 2), serde_json::json!(71.23));
        assert_eq!(significant(0.001234567, 4), serde_json::json!(0.001235));
        assert_eq!(significant(123456.0, 2), serde_json::json!(120000.0));
    }

    #[test]
    fn fixed_is_the_float_formatter_digit_for_digit() {
        // the reference is the standard library's exact formatter (`{:.N}`), with
        // `fixed`'s own rule (no `-0.000`); values of every magnitude `fixed` writes in
        // decimal form, ties and near-ties (k + 1/2 units of the last decimal, and their
        // neighbours one ulp away), and values that round to zero from below
        use rand::{RngExt, SeedableRng};
        let reference = |v: f64, d: usize| {
            let s = format!("{v:.d$}");
            if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
                s[1..].to_string()
            } else {
                s
            }
        };
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let mut fast = 0;
        let mut values = vec![
            0.0, -0.0, 0.5, -0.5, 1.5, 2.5, 0.125, 0.375, 1e-300, -1e-300,
        ];
        for _ in 0..200_000 {
            let e: i32 = rng.random_range(-12..15);
            let m: f64 = rng.random_range(-10.0..10.0);
            values.push(m * 10f64.powi(e));
        }
        for d in 0..=15usize {
            for k in [0u64, 1, 2, 7, 12, 125, 999, 123_456, 987_654_321] {
                let tie = (k as f64 + 0.5) / 10f64.powi(d as i32);
                for v in [tie, -tie, tie.next_up(), tie.next_down()] {
                    values.push(v);
                }
            }
        }
        // exact ties in binary: odd / 2^j is odd · 5^(j−1) / 2 units of decimal j − 1 (and
        // the positions of a profile on a grid of binary fractions are such values)
        let mut exact_ties = Vec::new();
        for j in 1..=12i32 {
            for odd in [1u64, 3, 5, 7, 9, 11, 13, 15, 101, 1001, 65_537, 1_048_575] {
                let v = odd as f64 / 2f64.powi(j);
                exact_ties.push((v, (j - 1) as usize));
                exact_ties.push((-v, (j - 1) as usize));
            }
        }
        for &(v, d) in &exact_ties {
            assert_eq!(
                fixed(v, d),
                reference(v, d),
                "exact tie {v:e} with {d} decimals"
            );
            assert!(fixed_units(v, d).is_some(), "{v:e} with {d} decimals");
        }
        let mut typical = 0;
        for &v in &values {
            for d in 0..=16usize {
                if v.abs() < 1e15 {
                    assert_eq!(fixed(v, d), reference(v, d), "{v:e} with {d} decimals");
                }
                // what the outputs write: up to six decimals of values below a million
                if v.abs() < 1e6 && d <= 6 {
                    typical += 1;
                    fast += usize::from(fixed_units(v, d).is_some());
                }
            }
        }
        // there the fast path decides every value (ties included), so the formatter is never
        // called for them (else this test checks little)
        assert_eq!(fast, typical, "fast path taken {fast} of {typical} times");
    }

    #[test]
    fn json_numbers_round_as_the_csv_text() {
        // summary.json and the CSV files write the same quantities: the JSON number is the
        // value of the CSV text, exact ties (a position of 104.0625 mm at 3 decimals) and
        // products that land on a half unit included
        use rand::{RngExt, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let mut values = vec![104.0625, -104.0625, 0.125, 2.5, -0.0004, 1.0005, 0.0];
        for _ in 0..20_000 {
            let e: i32 = rng.random_range(-6..7);
            let m: f64 = rng.random_range(-10.0..10.0);
            values.push(m * 10f64.powi(e));
            // a binary fraction: an exact tie at some decimal count
            values.push(f64::from(rng.random_range(-100_000..100_000)) / 1024.0);
        }
        for &v in &values {
            for d in 0..=6usize {
                let text: f64 = fixed(v, d).parse().unwrap();
                assert_eq!(
                    rounded(v, d).as_f64(),
                    Some(text),
                    "{v:e} with {d} decimals"
                );
            }
        }
        assert_eq!(rounded(104.0625, 3).to_string(), "104.062");
    }

    #[test]
    fn readable_numbers() {
        assert_eq!(significant_text(0.001234567, 3), "0.00123");
        assert_eq!(significant_text(1.5e-7, 3), "1.50e-7");
        assert_eq!(tick(0.30000000000000004), "0.3");
        assert_eq!(tick(20.0), "20");
        assert_eq!(tick(-0.0), "0");
        assert_eq!(step_decimals(2.5), 1);
        assert_eq!(step_decimals(5.0), 0);
        assert_eq!(step_decimals(0.02), 2);
    }

    #[test]
    fn escapes_markup() {
        assert_eq!(escape_html("<b>&\"x'"), "&lt;b&gt;&amp;&quot;x&#39;");
    }

    // 0 °C = 273.15 K (SI brochure); a difference of 1 K is 1.8 °F (definition of the
    // Fahrenheit degree).
    #[test]
    fn converts_to_case_units() {
        let u = CaseUnits::new(Units {
            length: LengthUnit::Inch,
            temperature: TemperatureUnit::Fahrenheit,
        });
        assert_eq!(u.temp_file(373.15), "212.0000");
        assert_eq!(u.dtemp_file(1.0), "1.8000");
        assert_eq!(u.len_file(0.0254), "1.0000");
        assert_eq!(u.temp_symbol(), "°F");
        assert_eq!(u.temp_show(273.15), "32.00 °F");
    }

    #[test]
    fn numbers_for_people() {
        assert_eq!(num(150.00000000000003), "150");
        assert_eq!(num(0.053333333), "0.0533333");
        assert_eq!(num(-273.15), "-273.15");
        assert_eq!(num(0.0), "0");
        assert_eq!(num(25.0), "25");
        assert_eq!(num(1234567.0), "1234567");
        assert_eq!(num(1.5e20), "1.5e20");
        assert_eq!(num(2e-7), "2e-7");
    }
}
