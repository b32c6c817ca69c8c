//! The report layer: every output of `docs/case-files.md` made from hand-built estimate results
//! (a bottom edge with a hot bump, a long strip, two unknown edges, °F/inch units), checked
//! for shape, units, the safety caution, escaping and well-formed SVG/HTML.
//!
//! The results are invented for these tests (demo data, not a check of the estimate): the
//! field is the series solution of Laplace's equation for the invented edge profile, so that
//! the plots show a plausible picture.

use edgetherm::estimate::{
    DoubtfulSensor, EdgeResult, EstimateResult, Exceedance, FieldResult, FitSummary, Hottest,
    Interval, SensorResult, StrengthSummary,
};
use edgetherm::geometry::{Edge, EdgeCondition, EdgeProfile, Plate, Point, Shape};
use edgetherm::report::estimate::{
    SAFETY_CAUTION, render_outputs, summary_json, text_summary, write_outputs,
};
use edgetherm::units::{LengthUnit, TemperatureUnit, Units};
use serde_json::Value;
use std::f64::consts::PI;

const C0: f64 = 273.15;

/// A hot bump on a warm base: kelvin at `x` metres.
fn bump(x: f64, centre: f64, width: f64, base_c: f64, rise: f64) -> f64 {
    C0 + base_c + rise * (-(x - centre).powi(2) / (2.0 * width * width)).exp()
}

/// Sine (`cosine = false`) or cosine coefficients of `f - base` on (0, len) by the
/// midpoint rule, n = 0..terms (n = 0 is the mean for cosines, 0 for sines).
fn coefficients(
    f: &dyn Fn(f64) -> f64,
    base: f64,
    len: f64,
    terms: usize,
    cosine: bool,
) -> Vec<f64> {
    let m = 2000;
    let samples: Vec<(f64, f64)> = (0..m)
        .map(|k| {
            let x = (k as f64 + 0.5) * len / m as f64;
            (x, f(x) - base)
        })
        .collect();
    (0..terms)
        .map(|n| {
            let k = n as f64 * PI / len;
            let sum: f64 = samples
                .iter()
                .map(|&(x, v)| v * if cosine { (k * x).cos() } else { (k * x).sin() })
                .sum();
            let scale = if cosine && n == 0 { 1.0 } else { 2.0 };
            scale * sum / m as f64
        })
        .collect()
}

/// `sinh(k (h - y)) / sinh(k h)` in overflow-safe form.
fn sinh_ratio(k: f64, h: f64, y: f64) -> f64 {
    (-k * y).exp() * (1.0 - (-2.0 * k * (h - y)).exp()) / (1.0 - (-2.0 * k * h).exp())
}

/// Field of a plate `w × h` with the bottom at `f`, the top fixed at `t_top`, insulated
/// sides (cosine series).
fn plate_field(f: &dyn Fn(f64) -> f64, t_top: f64, w: f64, h: f64) -> impl Fn(f64, f64) -> f64 {
    let a = coefficients(f, t_top, w, 40, true);
    move |x, y| {
        let mut t = t_top + a[0] * (h - y) / h;
        for (n, an) in a.iter().enumerate().skip(1) {
            let k = n as f64 * PI / w;
            t += an * (k * x).cos() * sinh_ratio(k, h, y);
        }
        t
    }
}

/// Field of a strip of width `w` with the bottom at `f` and both sides fixed at `t_side`
/// (sine series, exponential decay).
fn strip_field(f: &dyn Fn(f64) -> f64, t_side: f64, w: f64) -> impl Fn(f64, f64) -> f64 {
    let b = coefficients(f, t_side, w, 60, false);
    move |x, y| {
        let mut t = t_side;
        for (n, bn) in b.iter().enumerate().skip(1) {
            let k = n as f64 * PI / w;
            t += bn * (k * x).sin() * (-k * y).exp();
        }
        t
    }
}

/// The part of a field from one edge of length `len` (fixed neighbours at `base`) that
/// decays across a plate `across` deep: sine series with sinh ratios.
fn sine_part(g: &dyn Fn(f64) -> f64, base: f64, len: f64, across: f64) -> impl Fn(f64, f64) -> f64 {
    let b = coefficients(g, base, len, 40, false);
    move |s, d| {
        b.iter()
            .enumerate()
            .skip(1)
            .map(|(n, bn)| {
                let k = n as f64 * PI / len;
                bn * (k * s).sin() * sinh_ratio(k, across, d)
            })
            .sum()
    }
}

fn linspace(a: f64, b: f64, n: usize) -> Vec<f64> {
    (0..n)
        .map(|i| a + (b - a) * i as f64 / (n - 1) as f64)
        .collect()
}

/// An edge result with bands around `f`, wider near the peak.
fn edge_result(edge: Edge, len: f64, f: &dyn Fn(f64) -> f64, peak: f64, heat: bool) -> EdgeResult {
    let positions = linspace(0.0, len, 361);
    let estimate: Vec<f64> = positions.iter().map(|&s| f(s)).collect();
    let half = |s: f64| 0.8 + 1.4 * (-(s - peak).powi(2) / (2.0 * (0.1 * len).powi(2))).exp();
    let band = |k: f64, sign: f64| -> Vec<f64> {
        positions
            .iter()
            .zip(&estimate)
            .map(|(&s, &t)| t + sign * k * half(s))
            .collect()
    };
    EdgeResult {
        edge,
        lower: band(1.0, -1.0),
        upper: band(1.0, 1.0),
        simultaneous_lower: band(1.6, -1.0),
        simultaneous_upper: band(1.6, 1.0),
        linear_lower: band(0.9, -1.0),
        linear_upper: band(0.9, 1.0),
        positions,
        estimate,
        resolution_length: 0.018,
        resolution_worst_position: 0.25 * len,
        resolution_at_hottest: 0.012,
        heat_flow: heat.then_some(Interval {
            value: 412.5,
            lower: 380.3,
            upper: 447.0,
        }),
    }
}

fn field_result(xs: Vec<f64>, ys: Vec<f64>, t: &dyn Fn(f64, f64) -> f64) -> FieldResult {
    let mut estimate = Vec::new();
    for &y in &ys {
        for &x in &xs {
            estimate.push(t(x, y));
        }
    }
    let lower = estimate.iter().map(|v| v - 1.0).collect();
    let upper = estimate.iter().map(|v| v + 1.0).collect();
    FieldResult {
        xs,
        ys,
        estimate,
        lower,
        upper,
    }
}

/// Sensors at `(id, x, y)` metres reading the field plus a small deterministic scatter;
/// the sensor named `bad` reads 3 K high and is flagged.
fn sensors(
    at: &[(&str, f64, f64)],
    t: &dyn Fn(f64, f64) -> f64,
    bad: Option<&str>,
) -> Vec<SensorResult> {
    at.iter()
        .enumerate()
        .map(|(k, &(id, x, y))| {
            let fitted = t(x, y);
            let scatter = 0.12 * ((k as f64 * 2.1).sin());
            let flagged = bad == Some(id);
            let reading = fitted + scatter + if flagged { 3.0 } else { 0.0 };
            SensorResult {
                sensor: id.to_string(),
                position: Point::new(x, y),
                reading: Some(reading),
                fitted,
                residual: Some(reading - fitted),
                loo_residual: Some(if flagged { 9.8 } else { scatter / 0.15 }),
                leverage: Some(0.3 + 0.04 * k as f64),
                sigma: Some(0.15),
                flag: flagged.then(|| {
                    "left out of the fit: standardised leave-one-out residual 9.8 exceeds 4"
                        .to_string()
                }),
                doubtful: false,
                offset: None,
            }
        })
        .collect()
}

fn common(
    units: Units,
    plate: Plate,
    edges: Vec<EdgeResult>,
    field: FieldResult,
    sensors: Vec<SensorResult>,
    hottest: Hottest,
) -> EstimateResult {
    EstimateResult {
        units,
        plate,
        edges,
        field,
        sensors,
        hottest,
        exceedance: None,
        doubtful_sensors: Vec::new(),
        strength: StrengthSummary {
            method: edgetherm::inverse::Strength::Rule(edgetherm::inverse::StrengthMethod::Evidence),
            value: 1.234_567e-3,
            effective_parameters: 6.3,
            at_range_end: false,
            smoothing: edgetherm::case::Smoothing::Curvature,
            smoothing_auto: true,
        },
        fit: FitSummary {
            sigma: 0.15,
            sigma_source: edgetherm::noise::SigmaSource::Stated,
            chi_square: 7.9,
            dof: 3.7,
            p_value: Some(0.21),
            readings_used: 9,
        },
        confidence: 0.95,
        replicates: 2000,
        bootstrap_mode: edgetherm::uncertainty::BootstrapMode::Residual,
        seed: 7,
        bounds: None,
        cautions: vec!["The peak is narrower than twice the resolution length: its height may be underestimated.".into()],
        conversion: None,
        read_as: Vec::new(),
        convection: Vec::new(),
        convective_heat_flows: Vec::new(),
    }
}

fn mm() -> Units {
    Units {
        length: LengthUnit::Millimetre,
        temperature: TemperatureUnit::Celsius,
    }
}

/// A cold plate (`w × h` metres): bottom unknown with a hot bump, top fixed at 24 °C,
/// insulated ends; ten sensors in two rows; TC07 flagged.
pub fn cold_plate_in(units: Units, w: f64, h: f64) -> EstimateResult {
    let top = C0 + 24.0;
    let centre = 0.3956 * w;
    let f = move |x: f64| bump(x, centre, 0.09 * w, 40.0, 38.0);
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: w,
            height_m: h,
        },
        [
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Insulated),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(top))),
            Some(EdgeCondition::Insulated),
        ],
        Some(167.0),
    )
    .unwrap();
    let t = plate_field(&f, top, w, h);
    let at: Vec<(String, f64, f64)> = (0..10)
        .map(|k| {
            let x = w * (0.067 + 0.1 * k as f64);
            let y = h * if k % 2 == 0 { 0.25 } else { 0.32 };
            (format!("TC{:02}", k + 1), x, y)
        })
        .collect();
    let at_ref: Vec<(&str, f64, f64)> = at.iter().map(|(s, x, y)| (s.as_str(), *x, *y)).collect();
    let (xs, ys) = (linspace(0.0, w, 41), linspace(0.0, h, 41));
    let hottest = Hottest {
        edge: Edge::Bottom,
        position: centre,
        position_interval: [centre - 0.029 * w, centre + 0.029 * w],
        temperature: f(centre),
        temperature_interval: [f(centre) - 3.3, f(centre) + 3.5],
        edge_shares: vec![(Edge::Bottom, 1.0)],
        main_peak_share: 0.97,
    };
    common(
        units,
        plate,
        vec![edge_result(Edge::Bottom, w, &f, centre, true)],
        field_result(xs, ys, &t),
        sensors(&at_ref, &t, Some("TC07")),
        hottest,
    )
}

/// The cold plate in millimetres and Celsius: 180 mm × 28 mm.
pub fn cold_plate() -> EstimateResult {
    cold_plate_in(mm(), 0.180, 0.028)
}

/// A long strip 40 mm wide: bottom unknown, sides fixed at 30 °C; one sensor without a
/// reading; a limit that raises the alarm.
pub fn strip() -> EstimateResult {
    let w = 0.040;
    let side = C0 + 30.0;
    // The bump vanishes at the corners, where the fixed sides meet the edge.
    let f = move |x: f64| {
        side + 55.0 * (PI * x / w).sin().powi(2) * (1.0 + 0.3 * (2.0 * PI * x / w).sin())
    };
    let plate = Plate::new(
        Shape::Strip { width_m: w },
        [
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(side))),
            None,
            Some(EdgeCondition::Fixed(EdgeProfile::constant(side))),
        ],
        Some(390.0),
    )
    .unwrap();
    let t = strip_field(&f, side, w);
    let at = [
        ("F1", 0.008, 0.006),
        ("F2", 0.016, 0.010),
        ("F3", 0.024, 0.006),
        ("F4", 0.032, 0.010),
        ("F5", 0.020, 0.020),
        ("F6", 0.012, 0.060), // beyond the region shown (one width deep)
    ];
    let positions = linspace(0.0, w, 361);
    let (k_max, _) = positions
        .iter()
        .enumerate()
        .map(|(k, &s)| (k, f(s)))
        .max_by(|a, b| a.1.total_cmp(&b.1))
        .unwrap();
    let peak = positions[k_max];
    let mut s = sensors(&at, &t, None);
    s[4].reading = None;
    s[4].residual = None;
    s[4].loo_residual = None;
    s[4].leverage = None;
    let hottest = Hottest {
        edge: Edge::Bottom,
        position: peak,
        position_interval: [peak - 0.002, peak + 0.0025],
        temperature: f(peak),
        temperature_interval: [f(peak) - 2.5, f(peak) + 2.9],
        edge_shares: vec![(Edge::Bottom, 1.0)],
        main_peak_share: 0.99,
    };
    let mut r = common(
        mm(),
        plate,
        vec![edge_result(Edge::Bottom, w, &f, peak, true)],
        field_result(linspace(0.0, w, 41), linspace(0.0, w, 41), &t),
        s,
        hottest,
    );
    r.exceedance = Some(Exceedance {
        limit: C0 + 85.0,
        probability: 0.62,
        alarm_probability: 0.5,
        alarm: true,
    });
    r.fit.readings_used = 5;
    r
}

/// A 120 mm × 80 mm plate with the bottom and left edges unknown, the top and right fixed
/// at 20 °C; no conductivity; a sensor id that needs escaping.
pub fn two_edges() -> EstimateResult {
    let (w, h) = (0.120, 0.080);
    let base = C0 + 20.0;
    let fb =
        move |x: f64| base + 45.0 * (PI * x / w).sin().powi(2) * (-(x - 0.07).powi(2) / 8e-4).exp();
    let fl = move |y: f64| base + 25.0 * (PI * y / h).sin().powi(2);
    let bottom = sine_part(&fb, base, w, h);
    let left = sine_part(&fl, base, h, w);
    let t = move |x: f64, y: f64| base + bottom(x, y) + left(y, x);
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: w,
            height_m: h,
        },
        [
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(base))),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(base))),
            Some(EdgeCondition::Unknown),
        ],
        None,
    )
    .unwrap();
    let at = [
        ("A1", 0.030, 0.012),
        ("A2", 0.060, 0.015),
        ("A3", 0.090, 0.012),
        ("<b>&\"x", 0.062, 0.017),
        ("L1", 0.012, 0.025),
        ("L2", 0.015, 0.050),
        ("C1", 0.060, 0.050),
    ];
    let peak = 0.0694;
    let hottest = Hottest {
        edge: Edge::Bottom,
        position: peak,
        position_interval: [0.062, 0.077],
        temperature: fb(peak),
        temperature_interval: [fb(peak) - 4.0, fb(peak) + 4.4],
        edge_shares: vec![(Edge::Bottom, 0.93), (Edge::Left, 0.07)],
        main_peak_share: 0.85,
    };
    let mut r = common(
        mm(),
        plate,
        vec![
            edge_result(Edge::Bottom, w, &fb, peak, false),
            edge_result(Edge::Left, h, &fl, 0.04, false),
        ],
        field_result(linspace(0.0, w, 41), linspace(0.0, h, 41), &t),
        sensors(&at, &t, Some("<b>&\"x")),
        hottest,
    );
    r.cautions.clear();
    r.fit.readings_used = 6;
    r
}

/// The cold plate in inches and Fahrenheit: 6 in × 1.5 in, and a hottest point at exactly
/// 350 K and 3 in.
pub fn fahrenheit_inch() -> EstimateResult {
    let units = Units {
        length: LengthUnit::Inch,
        temperature: TemperatureUnit::Fahrenheit,
    };
    let mut r = cold_plate_in(units, 6.0 * 0.0254, 1.5 * 0.0254);
    r.hottest.temperature = 350.0;
    r.hottest.position = 3.0 * 0.0254;
    r.hottest.position_interval = [2.8 * 0.0254, 3.2 * 0.0254];
    r
}

fn output(r: &EstimateResult, name: &str) -> String {
    let outs = render_outputs(r).unwrap();
    let o = outs.iter().find(|o| o.name == name).unwrap();
    String::from_utf8(o.bytes.clone()).unwrap()
}

fn csv_rows(text: &str) -> Vec<Vec<String>> {
    let mut rd = csv::ReaderBuilder::new()
        .has_headers(false)
        .from_reader(text.as_bytes());
    rd.records()
        .map(|r| r.unwrap().iter().map(str::to_string).collect())
        .collect()
}

fn cautions_contain(j: &Value, needle: &str) -> bool {
    j["cautions"].as_array().is_some_and(|c| {
        c.iter()
            .any(|c| c.as_str().is_some_and(|c| c.contains(needle)))
    })
}

fn num(v: &Value) -> f64 {
    v.as_f64().unwrap_or_else(|| panic!("not a number: {v}"))
}

// ---- CSV ------------------------------------------------------------------------------------

#[test]
fn csv_headers_and_row_counts() {
    let r = cold_plate();
    let profile = csv_rows(&output(&r, "profile.csv"));
    assert_eq!(
        profile[0],
        [
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
            "bound_upper"
        ]
    );
    assert_eq!(profile.len(), 1 + 361);
    // without a stated gradient limit the bound cells are empty
    assert!(profile[1..].iter().all(|row| row[0] == "bottom"
        && row.len() == 11
        && row[9].is_empty()
        && row[10].is_empty()));
    // positions run from 0 to the edge's length, in mm with the case's precision
    assert_eq!(profile[1][1], "0.000");
    assert_eq!(profile[361][1], "180.000");

    let field = csv_rows(&output(&r, "field.csv"));
    assert_eq!(field[0], ["x", "y", "estimate", "lower", "upper"]);
    assert_eq!(field.len(), 1 + 41 * 41);
    // x varies fastest
    assert_eq!(field[1][..2], ["0.000", "0.000"]);
    assert_eq!(field[2][..2], ["4.500", "0.000"]);
    assert_eq!(field[42][..2], ["0.000", "0.700"]);

    let sensors = csv_rows(&output(&r, "sensors.csv"));
    assert_eq!(
        sensors[0],
        [
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
            "note"
        ]
    );
    assert_eq!(sensors.len(), 1 + 10);
    let tc07 = sensors.iter().find(|s| s[0] == "TC07").unwrap();
    assert!(tc07[9].contains("leave-one-out"));
    assert_eq!(tc07[6], "9.8000");
    let tc01 = sensors.iter().find(|s| s[0] == "TC01").unwrap();
    assert_eq!(tc01[9], "", "no flag, empty cell");
    // reading - fitted = residual, in the file's precision
    let f = |s: &str| s.parse::<f64>().unwrap();
    assert!((f(&tc07[3]) - f(&tc07[4]) - f(&tc07[5])).abs() < 2e-4);
    assert_eq!(tc07[8], "0.1500");
}

#[test]
fn missing_and_non_finite_values_are_empty_or_null() {
    let mut r = strip();
    r.edges[0].linear_lower[3] = f64::NAN;
    r.field.upper[5] = f64::INFINITY;
    r.hottest.position_interval[0] = f64::NAN;
    r.fit.p_value = None;
    let outs = render_outputs(&r).unwrap();
    for o in &outs {
        let text = String::from_utf8_lossy(&o.bytes);
        if o.name.ends_with(".csv") {
            for row in csv_rows(&text) {
                for cell in row {
                    let lower = cell.to_ascii_lowercase();
                    assert!(
                        !["nan", "inf", "-inf"].contains(&lower.as_str()),
                        "{}",
                        o.name
                    );
                }
            }
        }
        if o.name.ends_with(".json") {
            assert!(
                !text.contains("NaN") && !text.contains("Infinity"),
                "{}",
                o.name
            );
            serde_json::from_str::<Value>(&text).unwrap();
        }
    }
    let profile = csv_rows(&output(&r, "profile.csv"));
    assert_eq!(profile[4][7], "");
    let field = csv_rows(&output(&r, "field.csv"));
    assert_eq!(field[6][4], "");
    let sensors = csv_rows(&output(&r, "sensors.csv"));
    let f5 = sensors.iter().find(|s| s[0] == "F5").unwrap();
    assert_eq!(
        (f5[3].as_str(), f5[5].as_str(), f5[6].as_str()),
        ("", "", "")
    );
    assert!(!f5[4].is_empty(), "the fitted value is still there");
    let j = summary_json(&r);
    assert!(j["hottest"]["position_interval"][0].is_null());
    assert!(j["fit"]["p_value"].is_null());
}

// ---- units ----------------------------------------------------------------------------------

/// (350 K − 273.15) × 9/5 + 32 = 170.33 °F; 0.0762 m = 3 in (1 in = 25.4 mm exactly; the
/// kelvin–Celsius offset and the Fahrenheit degree are definitions).
#[test]
fn values_are_in_the_case_units() {
    let r = fahrenheit_inch();
    let j = summary_json(&r);
    assert!((num(&j["hottest"]["temperature"]) - 170.33).abs() < 1e-9);
    assert!((num(&j["hottest"]["position"]) - 3.0).abs() < 1e-9);
    assert_eq!(j["units"]["length"], "in");
    assert_eq!(j["units"]["temperature"], "F");
    // a temperature difference converts by 9/5 only: sigma 0.15 K = 0.27 °F
    assert!((num(&j["fit"]["sigma"]) - 0.27).abs() < 1e-9);
    // resolution 18 mm = 0.7087 in (to the file's 4 decimals)
    assert!((num(&j["resolution_length"]["bottom"]) - 0.7087).abs() < 1e-9);

    let profile = csv_rows(&output(&r, "profile.csv"));
    let e = &r.edges[0];
    let k = 100;
    let expect_f = (e.estimate[k] - 273.15) * 9.0 / 5.0 + 32.0;
    let got: f64 = profile[k + 1][2].parse().unwrap();
    assert!((got - expect_f).abs() < 6e-5, "{got} vs {expect_f}");
    let expect_in = e.positions[k] / 0.0254;
    let got: f64 = profile[k + 1][1].parse().unwrap();
    assert!((got - expect_in).abs() < 6e-5);
    assert_eq!(profile.last().unwrap()[1], "6.0000");

    let text = text_summary(&r);
    assert!(text.contains("170.33 °F"), "{text}");
    assert!(text.contains("x = 3.000 in"), "{text}");
    let svg = output(&r, "profile.svg");
    assert!(svg.contains("temperature [°F]"));
    assert!(svg.contains("position along the bottom edge, x [in]"));
}

// ---- summary.json ---------------------------------------------------------------------------

#[test]
fn summary_json_has_the_keys_of_spec_3_4_with_their_meaning() {
    let r = cold_plate();
    let j = summary_json(&r);
    let h = &j["hottest"];
    assert_eq!(h["edge"], "bottom");
    let pos = num(&h["position"]);
    assert!(
        (pos - 0.3956 * 180.0).abs() < 1e-3,
        "mm along the edge: {pos}"
    );
    let pi = h["position_interval"].as_array().unwrap();
    assert_eq!(pi.len(), 2);
    assert!(num(&pi[0]) < pos && pos < num(&pi[1]));
    let t = num(&h["temperature"]);
    assert!((t - 78.0).abs() < 1e-3, "°C: {t}");
    let ti = h["temperature_interval"].as_array().unwrap();
    assert!((num(&ti[0]) - (t - 3.3)).abs() < 1e-3 && (num(&ti[1]) - (t + 3.5)).abs() < 1e-3);
    assert!(j.get("exceedance").is_none(), "only with --limit");
    assert_eq!(j["strength"]["method"], "evidence");
    assert!((num(&j["strength"]["value"]) - 1.235e-3).abs() < 1e-12);
    assert!((num(&j["strength"]["effective_parameters"]) - 6.3).abs() < 1e-12);
    let fit = &j["fit"];
    assert_eq!(fit["sigma_source"], "stated");
    for (key, v) in [
        ("sigma", 0.15),
        ("chi_square", 7.9),
        ("dof", 3.7),
        ("p_value", 0.21),
    ] {
        assert!((num(&fit[key]) - v).abs() < 1e-12, "{key}");
    }
    assert!((num(&j["resolution_length"]["bottom"]) - 18.0).abs() < 1e-12);
    let flagged = j["flagged_sensors"].as_array().unwrap();
    assert_eq!(flagged.len(), 1);
    assert_eq!(flagged[0]["sensor"], "TC07");
    assert!((num(&flagged[0]["loo_residual"]) - 9.8).abs() < 1e-12);
    assert!(flagged[0]["reason"].as_str().unwrap().contains("left out"));
    assert_eq!(j["units"]["length"], "mm");
    assert_eq!(j["units"]["temperature"], "C");
    assert!((num(&j["confidence"]) - 0.95).abs() < 1e-12);
    assert_eq!(j["replicates"], 2000);
    assert_eq!(j["seed"], 7);
    assert_eq!(j["version"], env!("CARGO_PKG_VERSION"));
    let cautions: Vec<&str> = j["cautions"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap())
        .collect();
    assert_eq!(cautions.len(), 2);
    assert!(cautions[0].contains("narrower than twice"));
    assert_eq!(cautions[1], SAFETY_CAUTION);
    // additions
    assert!((num(&j["heat_flow"]["bottom"]["value"]) - 412.5).abs() < 1e-12);
    assert_eq!(j["bootstrap_mode"], "residual");
    assert_eq!(j["fit"]["readings_used"], 9);
    assert!((num(&j["hottest"]["edge_shares"]["bottom"]) - 1.0).abs() < 1e-12);
    // the written file is the same value
    let written: Value = serde_json::from_str(&output(&r, "summary.json")).unwrap();
    assert_eq!(written, j);
}

#[test]
fn exceedance_appears_with_a_limit() {
    let r = strip();
    let j = summary_json(&r);
    assert!((num(&j["exceedance"]["limit"]) - 85.0).abs() < 1e-9);
    assert!((num(&j["exceedance"]["probability"]) - 0.62).abs() < 1e-12);
    assert_eq!(j["exceedance"]["alarm"], true);
    let text = text_summary(&r);
    assert!(
        text.contains("Limit            85.00 °C: ALARM - exceeded with probability 0.620"),
        "{text}"
    );
    let html = output(&r, "report.html");
    assert!(html.contains("ALARM"));
    let svg = output(&r, "profile.svg");
    assert!(svg.contains("limit 85.00 °C"));
}

#[test]
fn a_safety_caution_is_never_duplicated() {
    let mut r = cold_plate();
    r.cautions.push(SAFETY_CAUTION.to_string());
    // the same caution in other words is not repeated either
    r.cautions.insert(
        0,
        "These are estimates from a model, not measurements; decisions about live equipment \
         follow local codes and licensed practice."
            .to_string(),
    );
    let j = summary_json(&r);
    let n = j["cautions"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|c| c.as_str().unwrap().contains("licensed practice"))
        .count();
    assert_eq!(n, 1);
    assert_eq!(j["cautions"].as_array().unwrap().len(), 2);
    assert_eq!(j["cautions"][1], SAFETY_CAUTION);
}

// ---- the safety caution everywhere ------------------------------------------------------------

#[test]
fn the_safety_caution_is_in_text_json_and_html() {
    for r in [cold_plate(), strip(), two_edges(), fahrenheit_inch()] {
        assert!(text_summary(&r).contains(SAFETY_CAUTION));
        let j = summary_json(&r);
        assert!(
            j["cautions"]
                .as_array()
                .unwrap()
                .iter()
                .any(|c| c.as_str() == Some(SAFETY_CAUTION))
        );
        let html = output(&r, "report.html");
        assert!(
            html.contains(SAFETY_CAUTION),
            "the caution has no characters to escape"
        );
        assert!(SAFETY_CAUTION.contains("estimates, not measurements"));
        assert!(SAFETY_CAUTION.contains("local codes and licensed practice"));
    }
}

// ---- HTML -----------------------------------------------------------------------------------

#[test]
fn html_escapes_sensor_ids_and_is_self_contained() {
    let r = two_edges();
    let html = output(&r, "report.html");
    assert!(
        html.contains("&lt;b&gt;&amp;&quot;x"),
        "escaped id in the sensor table"
    );
    assert!(
        !html.contains("<b>&\"x"),
        "the raw id never reaches the page"
    );
    assert!(html.contains("<tr class=\"flagged\"><td class=\"text\">&lt;b&gt;"));
    assert!(html.starts_with("<!DOCTYPE html>"));
    for banned in ["<script", "<link", " src=", "@import", "url("] {
        assert!(
            !html.contains(banned),
            "external resource or script: {banned}"
        );
    }
    // the only URL is the SVG namespace, which is a name, not a resource
    let urls = html.matches("http").count();
    let ns = html.matches("http://www.w3.org/2000/svg").count();
    assert_eq!(urls, ns);
    assert_eq!(ns, 2, "both pictures inlined");
    assert_eq!(html.matches("<svg").count(), 2);
    assert_eq!(html.matches("</svg>").count(), 2);
    // the key sections
    for heading in [
        "Hottest point",
        "Limit",
        "Fit",
        "Edges: resolution and heat flow",
        "Sensors",
        "The case",
    ] {
        assert!(html.contains(heading), "{heading}");
    }
}

/// The page parses as XML once the HTML-only doctype is dropped: every tag is closed and
/// every entity is well formed (a cheap structural check with no HTML parser).
#[test]
fn html_is_well_formed() {
    for r in [cold_plate(), two_edges()] {
        let html = output(&r, "report.html");
        let body = html
            .trim_start_matches("<!DOCTYPE html>\n")
            .replace("&middot;", "&#183;");
        let doc = roxmltree::Document::parse(&body).unwrap_or_else(|e| panic!("{e}"));
        assert_eq!(doc.root_element().tag_name().name(), "html");
        let rows = doc.descendants().filter(|n| n.has_tag_name("tr")).count();
        assert!(
            rows > r.sensors.len(),
            "a header row and one row per sensor"
        );
    }
}

// ---- SVG ------------------------------------------------------------------------------------

fn parse_svg(svg: &str) -> roxmltree::Document<'_> {
    let doc = roxmltree::Document::parse(svg).unwrap_or_else(|e| panic!("not XML: {e}"));
    assert_eq!(doc.root_element().tag_name().name(), "svg");
    doc
}

fn texts(doc: &roxmltree::Document<'_>) -> Vec<String> {
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| n.text().unwrap_or("").trim().to_string())
        .collect()
}

#[test]
fn profile_svg_is_well_formed_with_the_expected_elements() {
    let r = cold_plate();
    let svg = output(&r, "profile.svg");
    let doc = parse_svg(&svg);
    let t = texts(&doc);
    assert!(t.iter().any(|s| s == "temperature [°C]"), "{t:?}");
    assert!(
        t.iter()
            .any(|s| s == "position along the bottom edge, x [mm]")
    );
    assert!(t.iter().any(|s| s == "depth [mm]"));
    for k in 1..=10 {
        let id = format!("TC{k:02}");
        assert!(t.contains(&id), "sensor {id} labelled");
    }
    assert!(
        t.iter()
            .any(|s| s.starts_with("Hottest point 78.00 °C [74.70, 81.50]")),
        "{t:?}"
    );
    // the shaded band is a polygon; lines are polylines
    assert!(doc.descendants().any(|n| n.has_tag_name("polygon")));
    assert!(
        doc.descendants()
            .filter(|n| n.has_tag_name("polyline"))
            .count()
            > 20
    );
    // one panel per unknown edge
    assert_eq!(
        t.iter()
            .filter(|s| s.starts_with("Bottom edge (y = 0)"))
            .count(),
        1
    );
}

/// The box `(x0, y0, x1, y1)` of the white rect drawn just before the first `<text>` whose
/// content starts with `prefix` (labels on the plots sit on such a box).
fn label_rect(doc: &roxmltree::Document<'_>, prefix: &str) -> (f64, f64, f64, f64) {
    let t = doc
        .descendants()
        .find(|n| n.has_tag_name("text") && n.text().unwrap_or("").trim().starts_with(prefix))
        .unwrap_or_else(|| panic!("no text starting {prefix:?}"));
    let r = t
        .prev_sibling_element()
        .filter(|n| n.has_tag_name("rect"))
        .unwrap_or_else(|| panic!("{prefix:?} has no box"));
    let a = |k: &str| r.attribute(k).unwrap().parse::<f64>().unwrap();
    (a("x"), a("y"), a("x") + a("width"), a("y") + a("height"))
}

/// Bounding boxes of the polylines drawn with the given stroke colour.
fn polyline_boxes(doc: &roxmltree::Document<'_>, stroke: &str) -> Vec<(f64, f64, f64, f64)> {
    doc.descendants()
        .filter(|n| n.has_tag_name("polyline") && n.attribute("stroke") == Some(stroke))
        .map(|n| {
            let pts: Vec<(f64, f64)> = n
                .attribute("points")
                .unwrap()
                .split_whitespace()
                .map(|p| {
                    let (x, y) = p.split_once(',').unwrap();
                    (x.parse().unwrap(), y.parse().unwrap())
                })
                .collect();
            pts.iter().fold(
                (
                    f64::INFINITY,
                    f64::INFINITY,
                    f64::NEG_INFINITY,
                    f64::NEG_INFINITY,
                ),
                |b, &(x, y)| (b.0.min(x), b.1.min(y), b.2.max(x), b.3.max(y)),
            )
        })
        .collect()
}

fn boxes_overlap(a: (f64, f64, f64, f64), b: (f64, f64, f64, f64)) -> bool {
    a.0 < b.2 && b.0 < a.2 && a.1 < b.3 && b.1 < a.3
}

#[test]
fn profile_svg_keeps_the_limit_label_off_the_hottest_whisker() {
    // The hottest point near the right end, the limit inside its temperature interval: the
    // label's usual place (above the line, flush right) would cover the whisker.
    let mut r = cold_plate();
    let w = 0.18;
    r.hottest.position = 0.85 * w;
    r.hottest.position_interval = [0.8 * w, 0.9 * w];
    r.exceedance = Some(Exceedance {
        limit: r.hottest.temperature + 1.5,
        probability: 0.3,
        alarm_probability: 0.5,
        alarm: false,
    });
    let svg = output(&r, "profile.svg");
    let doc = parse_svg(&svg);
    let label = label_rect(&doc, "limit 79.50 °C  ·  P(exceeded)");
    // the hottest point's bars: the polylines in its colour that are not the legend's
    let bars: Vec<_> = polyline_boxes(&doc, "#C8431A")
        .into_iter()
        .filter(|b| b.1 > 140.0)
        .collect();
    assert!(bars.len() >= 2, "{bars:?}");
    for b in bars {
        assert!(!boxes_overlap(label, b), "label {label:?} over bar {b:?}");
    }
}

#[test]
fn profile_svg_marks_a_flagged_sensor_on_the_temperature_chart() {
    let r = cold_plate(); // TC07 flagged
    let svg = output(&r, "profile.svg");
    let doc = parse_svg(&svg);
    let y_of = |s: &str| -> f64 {
        doc.descendants()
            .find(|n| n.has_tag_name("text") && n.text().unwrap_or("").trim() == s)
            .unwrap_or_else(|| panic!("no text {s:?}"))
            .attribute("y")
            .unwrap()
            .parse()
            .unwrap()
    };
    let on_chart = y_of("TC07 flagged");
    let in_depth_panel = y_of("TC07");
    let axis = y_of("depth [mm]");
    assert!(on_chart < in_depth_panel, "{on_chart} vs {in_depth_panel}");
    assert!(
        on_chart < axis - 60.0,
        "above the depth panel: {on_chart} vs {axis}"
    );
    assert!(
        !texts(&doc).iter().any(|s| s == "TC01 flagged"),
        "only the flagged one"
    );
}

#[test]
fn profile_svg_says_when_the_position_interval_spans_the_edge() {
    let mut r = cold_plate();
    let note = "position interval spans the whole edge";
    assert!(!output(&r, "profile.svg").contains(note));
    r.hottest.position_interval = [0.0, 0.18];
    assert!(output(&r, "profile.svg").contains(note));
}

#[test]
fn profile_svg_has_one_panel_per_unknown_edge() {
    let r = two_edges();
    let svg = output(&r, "profile.svg");
    let doc = parse_svg(&svg);
    let t = texts(&doc);
    assert!(t.iter().any(|s| s.starts_with("Bottom edge (y = 0)")));
    assert!(t.iter().any(|s| s.starts_with("Left edge (x = 0)")));
    assert!(
        t.iter()
            .any(|s| s == "position along the left edge, y [mm]")
    );
    // the awkward id survives escaping and parsing
    assert!(t.iter().any(|s| s == "<b>&\"x"));
    let csv = csv_rows(&output(&r, "profile.csv"));
    assert_eq!(csv.len(), 1 + 2 * 361);
    assert_eq!(csv.iter().filter(|row| row[0] == "left").count(), 361);
    let j = summary_json(&r);
    assert!(j["resolution_length"]["left"].is_number());
    assert!(
        j["heat_flow"].as_object().unwrap().is_empty(),
        "no conductivity, no heat flow"
    );
}

#[allow(clippy::float_cmp)] // values printed from exactly representable inputs, read back
#[test]
fn field_svg_is_well_formed_with_map_isotherms_and_markers() {
    let r = cold_plate();
    let svg = output(&r, "field.svg");
    let doc = parse_svg(&svg);
    let t = texts(&doc);
    // colour cells
    let rects = doc.descendants().filter(|n| n.has_tag_name("rect")).count();
    assert!(rects > 500, "{rects} rectangles");
    // isotherm labels are round numbers inside the field's range (24 .. 78 °C, every 5)
    let labels: Vec<f64> = t.iter().filter_map(|s| s.parse::<f64>().ok()).collect();
    assert!(
        labels.iter().any(|&v| v == 50.0 || v == 40.0 || v == 30.0),
        "{t:?}"
    );
    assert!(
        t.iter().any(|s| s.contains("isotherms every 5 °C")),
        "{t:?}"
    );
    assert!(t.iter().any(|s| s == "bottom edge: unknown"));
    assert!(t.iter().any(|s| s.starts_with("hottest 78.00 °C")));
    for k in 1..=10 {
        assert!(t.contains(&format!("TC{k:02}")));
    }
    assert!(
        t.iter()
            .any(|s| s.starts_with("Edges: bottom unknown (thick line)"))
    );
    assert!(t.iter().any(|s| s.contains("top fixed at 24.00 °C")));
    assert!(
        t.iter().any(|s| s.starts_with("Depth drawn")),
        "a 180 × 28 plate is stretched"
    );
}

/// The boxes of `field.svg`'s labels drawn on a white box of the given opacity (isotherm
/// labels 0.8, sensor labels 0.75, the bold labels 0.85), with their text.
fn field_labels(
    doc: &roxmltree::Document<'_>,
    opacity: &str,
) -> Vec<(String, (f64, f64, f64, f64))> {
    doc.descendants()
        .filter(|n| n.has_tag_name("text"))
        .filter_map(|t| {
            let r = t.prev_sibling_element()?;
            (r.has_tag_name("rect")
                && r.attribute("opacity") == Some(opacity)
                && r.attribute("fill") == Some("#FFFFFF"))
            .then(|| {
                let a = |k: &str| r.attribute(k).unwrap().parse::<f64>().unwrap();
                (
                    t.text().unwrap_or("").trim().to_string(),
                    (a("x"), a("y"), a("x") + a("width"), a("y") + a("height")),
                )
            })
        })
        .collect()
}

#[test]
fn field_svg_labels_keep_apart_and_the_hottest_leaves_the_isotherms_labelled() {
    let r = cold_plate();
    let svg = output(&r, "field.svg");
    let doc = parse_svg(&svg);
    let iso = field_labels(&doc, "0.8");
    let sensors = field_labels(&doc, "0.75");
    let bold = field_labels(&doc, "0.85");
    assert!(iso.len() >= 5, "{iso:?}");
    assert_eq!(sensors.len(), 10, "{sensors:?}");
    let hottest = bold
        .iter()
        .find(|(t, _)| t.starts_with("hottest"))
        .expect("hottest labelled")
        .1;
    let grow = |b: (f64, f64, f64, f64), g: f64| (b.0 - g, b.1 - g, b.2 + g, b.3 + g);
    for (t, b) in &iso {
        assert!(!boxes_overlap(*b, hottest), "{t} under the hottest label");
        for (s, sb) in &sensors {
            // a gap of at least 2 px (the placer keeps 3) between an isotherm's label and a
            // sensor's
            assert!(
                !boxes_overlap(grow(*b, 2.0), *sb),
                "{t} touches {s}: {b:?} {sb:?}"
            );
        }
    }
    // the hottest label leaves the isotherms next to the peak labelled: the field peaks at
    // 78 °C with isotherms every 5 °C; the 70 and 75 °C loops are too small to carry a
    // label, and the 65 °C label sits just above the peak, where the hottest label went
    // before it learned to look for a place clear of the isotherm labels
    let levels: Vec<f64> = iso.iter().filter_map(|(t, _)| t.parse().ok()).collect();
    assert!(levels.iter().any(|&v| v >= 65.0), "{levels:?}");
}

#[test]
fn field_svg_labels_the_far_end_of_the_plate() {
    // 130 mm: the round ticks (every 20 mm) stop at 120, and the end gets its own label
    let r = cold_plate_in(mm(), 0.130, 0.028);
    let doc_text = output(&r, "field.svg");
    let t = texts(&parse_svg(&doc_text));
    assert_eq!(t.iter().filter(|s| *s == "130").count(), 1, "{t:?}");
    assert_eq!(t.iter().filter(|s| *s == "120").count(), 1, "{t:?}");
    // 180 mm: the end is a round tick already, labelled once
    let doc_text = output(&cold_plate(), "field.svg");
    let t = texts(&parse_svg(&doc_text));
    assert_eq!(t.iter().filter(|s| *s == "180").count(), 1, "{t:?}");
}

#[test]
fn field_svg_points_a_side_edge_label_at_its_edge() {
    // a side edge's level label carries an arrow toward its edge, so that it does not read
    // as the label of the edge along which it lies
    let t = texts(&parse_svg(&output(&two_edges(), "field.svg")));
    assert!(
        t.iter().any(|s| s == "\u{2190} left edge: unknown"),
        "{t:?}"
    );
    assert!(t.iter().any(|s| s == "bottom edge: unknown"), "{t:?}");
}

#[test]
fn field_svg_of_a_strip_says_where_it_stops() {
    let r = strip();
    let doc_text = output(&r, "field.svg");
    let doc = parse_svg(&doc_text);
    let t = texts(&doc);
    assert!(
        t.iter()
            .any(|s| s.starts_with("Long strip: shown from the bottom edge to 40.0 mm"))
    );
    assert!(t.iter().any(|s| s.starts_with("1 sensor(s) lie beyond")));
    assert!(
        !t.iter().any(|s| s.starts_with("Depth drawn")),
        "a square region is not stretched"
    );
}

// ---- text summary -----------------------------------------------------------------------------

#[test]
fn text_summary_key_lines() {
    let r = cold_plate();
    let text = text_summary(&r);
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(
        lines[0],
        format!(
            "edgetherm {} - hidden edge estimate (95 % intervals, 2000 residual bootstrap \
             replicates, seed 7)",
            env!("CARGO_PKG_VERSION")
        )
    );
    let expected = [
        "Hottest point    78.00 °C   95 % interval [74.70, 81.50] °C",
        "                 bottom edge, x = 71.2 mm   95 % interval [66.0, 76.4] mm",
        "Flagged sensors  TC07 (standardised LOO residual 9.80): left out of the fit: \
         standardised leave-one-out residual 9.8 exceeds 4",
        "Resolution       bottom edge 18.0 mm, the worst along it (at x = 45.0 mm); 12.0 mm at \
         the hottest point; narrower features are smoothed away",
        "Fit              chi-square 7.90 on 3.7 dof, p = 0.21",
        "                 9 readings of 10 sensors, sigma 0.15 °C (stated)",
        "Strength         0.00123 by evidence, curvature smoothing (chosen by evidence), 6.3 effective parameters",
        "Heat flow in     bottom edge 412.5 W/m   95 % interval [380.3, 447.0] (per unit depth)",
        "Cautions",
    ];
    for e in expected {
        assert!(lines.contains(&e), "missing line:\n{e}\nin:\n{text}");
    }
    assert!(!text.contains("Limit"), "no limit given");
    let caution_lines: Vec<&&str> = lines.iter().filter(|l| l.starts_with("  ! ")).collect();
    assert_eq!(caution_lines.len(), 2);
    assert_eq!(*caution_lines[1], format!("  ! {SAFETY_CAUTION}"));
    // short enough to read in ten seconds
    assert!(lines.len() <= 20, "{}", lines.len());
}

#[test]
fn text_summary_mentions_other_edges_and_doubtful_peaks() {
    let text = text_summary(&two_edges());
    assert!(
        text.contains("replicates whose hottest point is on another edge: left 7 %"),
        "{text}"
    );
    assert!(text.contains("only 85 % of the replicates put the peak near this position"));
    assert!(text.contains("Resolution       bottom edge 18.0 mm"));
    assert!(text.contains("                 left edge 18.0 mm"));
    assert!(!text.contains("Heat flow"), "no conductivity");
}

// ---- writing ----------------------------------------------------------------------------------

#[test]
fn write_outputs_creates_the_directory_and_writes_every_file() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("new").join("out");
    let r = cold_plate();
    let paths = write_outputs(&r, &out).unwrap();
    let names: Vec<String> = paths
        .iter()
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names, edgetherm::io::OUTPUT_FILE_NAMES);
    for p in &paths {
        assert!(std::fs::metadata(p).unwrap().len() > 0, "{}", p.display());
    }
    // again, over the previous run: replaced, no temporary files left (the seven outputs
    // and the manifest, which lists them; nothing beside the directory either)
    write_outputs(&r, &out).unwrap();
    assert_eq!(std::fs::read_dir(&out).unwrap().count(), 8);
    assert_eq!(
        edgetherm::io::verify_manifest(&out).unwrap(),
        edgetherm::io::OUTPUT_FILE_NAMES
    );
    assert_eq!(std::fs::read_dir(out.parent().unwrap()).unwrap().count(), 1);
    // same result, same bytes
    let a = std::fs::read(out.join("field.svg")).unwrap();
    let b = render_outputs(&r).unwrap()[5].bytes.clone();
    assert_eq!(a, b);
}

#[test]
fn write_outputs_reports_an_unwritable_directory() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("plate.toml");
    std::fs::write(&file, "x").unwrap();
    let e = write_outputs(&cold_plate(), &file.join("out")).unwrap_err();
    assert_eq!(e.exit_code(), 1);
    assert_eq!(std::fs::read_to_string(&file).unwrap(), "x");
}

// ---- degenerate inputs ------------------------------------------------------------------------

/// One sensor, a constant field, empty bands and a hottest point with no interval: every
/// output still renders, and the SVGs and JSON stay well formed.
#[test]
fn degenerate_results_still_render() {
    let mut r = cold_plate();
    r.sensors.truncate(1);
    for v in r.field.estimate.iter_mut() {
        *v = C0 + 30.0;
    }
    for e in r.edges.iter_mut() {
        for v in e.estimate.iter_mut() {
            *v = C0 + 30.0;
        }
        e.lower.clear();
        e.upper.clear();
        e.simultaneous_lower = vec![f64::NAN; e.positions.len()];
        e.resolution_length = f64::NAN;
    }
    r.hottest.position_interval = [f64::NAN, f64::NAN];
    r.hottest.temperature_interval = [f64::NAN, f64::NAN];
    r.fit.p_value = None;
    let outs = render_outputs(&r).unwrap();
    assert_eq!(outs.len(), 7);
    parse_svg(&output(&r, "profile.svg"));
    let field = output(&r, "field.svg");
    let doc = parse_svg(&field);
    // a constant field has no isotherms; the colour bar states the value
    let t = texts(&doc);
    assert!(
        t.iter().any(|s| s.starts_with("map range 29.50 to 30.50")),
        "{t:?}"
    );
    assert!(!t.iter().any(|s| s.contains("isotherms every")), "{t:?}");
    let j = summary_json(&r);
    assert!(j["resolution_length"]["bottom"].is_null());
    let text = text_summary(&r);
    assert!(text.contains("interval [–, –]"), "{text}");
    assert!(text.contains("p not available"));

    // no field at all, no unknown edge in the list
    let mut r = strip();
    r.field.xs.clear();
    r.field.estimate.clear();
    r.edges.clear();
    let doc_text = output(&r, "field.svg");
    assert!(
        texts(&parse_svg(&doc_text))
            .iter()
            .any(|s| s == "no field values to show")
    );
    let doc_text = output(&r, "profile.svg");
    assert!(
        texts(&parse_svg(&doc_text))
            .iter()
            .any(|s| s == "No unknown edge in this result.")
    );
}

/// A sensor kept under two explanations is said so, in the case's units, in every output a
/// person or program reads: the text summary, `summary.json`, the `note` column of
/// `sensors.csv` and a marked row of the HTML table; and it is not counted as flagged.
#[test]
fn a_doubtful_sensor_is_reported_everywhere() {
    let mut r = cold_plate();
    r.sensors[2].doubtful = true;
    let id = r.sensors[2].sensor.clone();
    r.doubtful_sensors.push(DoubtfulSensor {
        index: 2,
        sensor: id.clone(),
        loo_residual: 5.2,
        fault_probability: 0.9989,
        edge: Edge::Bottom,
        position: 0.0938,
        width: 0.011,
        peak_temperature: C0 + 67.08,
        min_gradient: Some(949.0), // K/m = 0.949 °C/mm
    });
    let text = text_summary(&r);
    assert!(text.contains("Kept, doubtful"), "{text}");
    assert!(text.contains("x = 93.8 mm"), "{text}");
    assert!(text.contains("67.08 °C"), "{text}");
    assert!(text.contains("0.949 °C/mm"), "{text}");
    let json = summary_json(&r);
    let d = &json["doubtful_sensors"][0];
    assert_eq!(d["sensor"], Value::String(id.clone()));
    assert!((num(&d["hot_explanation"]["position"]) - 93.8).abs() < 0.1);
    assert!((num(&d["hot_explanation"]["peak_temperature"]) - 67.08).abs() < 0.01);
    assert!((num(&d["hot_explanation"]["min_gradient"]) - 0.949).abs() < 1e-3);
    assert!(
        json["flagged_sensors"]
            .as_array()
            .unwrap()
            .iter()
            .all(|f| f["sensor"] != Value::String(id.clone()))
    );
    let rows = csv_rows(&output(&r, "sensors.csv"));
    let row = rows.iter().find(|s| s[0] == id).unwrap();
    assert_eq!(row[9], "", "not flagged");
    assert!(row[10].contains("hot spot"), "{}", row[10]);
    let html = output(&r, "report.html");
    assert!(html.contains("class=\"doubtful\""), "no marked row");
    assert!(html.contains("kept, doubtful"));
}

// ---- strict bounds ------------------------------------------------------------------------

/// The cold plate with invented strict bounds under 1 °C/mm (envelopes 4 K either side of the
/// estimate) and a gradient study; `empty` makes the stated limit ruled out instead.
fn with_bounds(empty: bool) -> EstimateResult {
    use edgetherm::bounds::{BoundsOutcome, BoundsResult, EdgeBounds, GradientRow, GradientStudy};
    let mut r = cold_plate();
    let e = &r.edges[0];
    let outcome = if empty {
        BoundsOutcome::Empty
    } else {
        BoundsOutcome::Bounded {
            hottest_k: [C0 + 40.0, C0 + 52.5],
            edges: vec![EdgeBounds {
                edge: Edge::Bottom,
                positions_m: e.positions.clone(),
                lower_k: e.estimate.iter().map(|t| t - 4.0).collect(),
                upper_k: e.estimate.iter().map(|t| t + 4.0).collect(),
            }],
            programs: 100,
        }
    };
    r.bounds = Some(BoundsResult {
        confidence: 0.95,
        chi_square_radius: 18.307,
        approximate: false,
        node_spacing_m: vec![(Edge::Bottom, 0.00075)],
        stated: Some((1000.0, outcome)),
        temperature_limits_k: (None, None),
        study: GradientStudy {
            min_gradient_k_per_m: Some(325.0),
            rows: vec![
                GradientRow {
                    gradient_k_per_m: 500.0,
                    hottest_upper_k: Some(C0 + 46.3),
                },
                GradientRow {
                    gradient_k_per_m: 1000.0,
                    hottest_upper_k: Some(C0 + 52.5),
                },
            ],
        },
        failure: None,
    });
    r
}

#[allow(clippy::float_cmp)] // values printed from exactly representable inputs, read back
#[test]
fn strict_bounds_appear_in_every_output_in_case_units() {
    let r = with_bounds(false);
    let profile = csv_rows(&output(&r, "profile.csv"));
    let est: f64 = profile[1][2].parse().unwrap();
    let lo: f64 = profile[1][9].parse().unwrap();
    let hi: f64 = profile[1][10].parse().unwrap();
    assert!((est - lo - 4.0).abs() < 1e-3 && (hi - est - 4.0).abs() < 1e-3);
    let j = summary_json(&r);
    let b = &j["bounds"];
    assert_eq!(num(&b["max_gradient"]), 1.0); // 1000 K/m = 1 °C/mm
    assert_eq!(b["max_gradient_unit"], "C/mm");
    assert_eq!(num(&b["confidence"]), 0.95);
    assert!((num(&b["hottest_temperature_interval"][0]) - 40.0).abs() < 1e-9);
    assert!((num(&b["hottest_temperature_interval"][1]) - 52.5).abs() < 1e-9);
    assert_eq!(b["admissible"], true);
    let g = &j["gradient_study"];
    assert_eq!(num(&g["minimum_required_gradient"]), 0.325);
    assert_eq!(num(&g["peak_upper_bound"][0]["max_gradient"]), 0.5);
    assert!(
        (num(&g["peak_upper_bound"][0]["hottest_temperature_upper_bound"]) - 46.3).abs() < 1e-9
    );
    let text = text_summary(&r);
    assert!(text.contains("Strict bounds    hottest temperature in [40.00, 52.50] °C"));
    assert!(text.contains("at least 0.325 °C/mm"));
    let svg = output(&r, "profile.svg");
    assert!(svg.contains("strict bounds (|slope| ≤ G = 1.0 °C/mm, 95 %)"));
    let html = output(&r, "report.html");
    assert!(html.contains("How hot could it be?"));
    assert!(html.contains("<td>0.5</td><td>46.30</td>"));
    for out in [text.as_str(), html.as_str(), &j.to_string()] {
        assert_eq!(
            out.matches(SAFETY_CAUTION).count(),
            1,
            "safety caution once"
        );
    }
    roxmltree::Document::parse(&svg).expect("well-formed SVG");
}

#[test]
fn a_ruled_out_gradient_is_said_plainly_with_no_number() {
    let r = with_bounds(true);
    let j = summary_json(&r);
    assert_eq!(j["bounds"]["admissible"], false);
    assert!(j["bounds"]["hottest_temperature_interval"].is_null());
    assert!(
        j["bounds"]["message"]
            .as_str()
            .unwrap()
            .contains("ruled out by the readings")
    );
    let text = text_summary(&r);
    assert!(text.contains("none: the readings rule out a gradient limit of 1.0 °C/mm"));
    let profile = csv_rows(&output(&r, "profile.csv"));
    assert!(
        profile[1..]
            .iter()
            .all(|row| row[9].is_empty() && row[10].is_empty())
    );
    assert!(
        cautions_contain(&j, "ruled out by the readings"),
        "the empty set is among the cautions"
    );
}
