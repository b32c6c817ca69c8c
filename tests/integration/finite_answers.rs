//! Property (issue 16), on 48 generated cases of which at least a quarter must reach the
//! estimate: any plate / sensors / readings combination the parsers accept gives a
//! finite answer or an error, never a NaN or an infinity in an output or a verdict.
//!
//! The generated cases span the plausible ranges and far beyond them on purpose: sizes from
//! 1e-9 to 1e9 in the case unit, reading sigmas from 1e-12 to 1e12, temperatures from −500
//! to 1e12, every unit, every strength rule, a limit. Each accepted case is estimated with a
//! few replicates on a small grid (no strict bounds) and rendered; the CSV files must hold no
//! non-finite number and `summary.json` a finite hottest temperature. An error is fine when
//! it is an input error (exit status 2) or says what was not finite. — (behaviour; the ranges
//! are in `src/plausible.rs`.)

use edgetherm::case::CaseFiles;
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::report::estimate::render_outputs;
use proptest::prelude::*;

/// A value spread over many decades: `mantissa × 10^exponent`.
fn decades(lo: i32, hi: i32) -> impl Strategy<Value = f64> {
    (1.0..9.99f64, lo..=hi).prop_map(|(m, e)| m * 10f64.powi(e))
}

fn unit() -> impl Strategy<Value = (&'static str, &'static str)> {
    (
        prop_oneof![Just("mm"), Just("m"), Just("in")],
        prop_oneof![Just("C"), Just("K"), Just("F")],
    )
}

fn rule() -> impl Strategy<Value = &'static str> {
    prop_oneof![
        Just("gcv"),
        Just("discrepancy"),
        Just("evidence"),
        Just("lcurve"),
        Just("1e-3")
    ]
}

/// Mostly plausible values, sometimes far outside: `in_range` nine times in ten.
fn mostly(in_range: BoxedStrategy<f64>, wild: BoxedStrategy<f64>) -> BoxedStrategy<f64> {
    prop_oneof![9 => in_range, 1 => wild].boxed()
}

/// One generated case: the plate's numbers, units, rule, sensors and readings.
type Generated = (
    (f64, f64, (&'static str, &'static str), f64, f64),
    Vec<(f64, f64)>,
    Vec<f64>,
    &'static str,
    f64,
);

fn generated() -> impl Strategy<Value = Generated> {
    let reading = || {
        mostly(
            (0.0..400.0f64).boxed(),
            prop_oneof![(-500.0..6000.0f64).boxed(), decades(-3, 12).boxed()].boxed(),
        )
    };
    (
        (
            mostly(decades(-2, 3).boxed(), decades(-9, 9).boxed()),
            0.05..3.0f64,
            unit(),
            mostly(decades(-3, 1).boxed(), decades(-12, 12).boxed()),
            reading(),
        ),
        prop::collection::vec((0.01..0.99f64, 0.01..0.99f64), 2..7),
        prop::collection::vec(reading(), 7),
        rule(),
        0.0..400.0f64,
    )
}

/// Runs the property on 48 generated cases and checks that it was not vacuous: at least a
/// quarter of them must be accepted and estimated.
#[test]
fn accepted_cases_give_finite_answers_or_errors() {
    use proptest::test_runner::{Config, RngAlgorithm, TestRng, TestRunner};
    use std::sync::atomic::{AtomicUsize, Ordering};
    let estimated = AtomicUsize::new(0);
    let cases = 48;
    // a fixed seed: the same 48 cases every run, so the count below cannot flicker
    let mut runner = TestRunner::new_with_rng(
        Config {
            cases,
            failure_persistence: None,
            ..Config::default()
        },
        TestRng::deterministic_rng(RngAlgorithm::ChaCha),
    );
    runner
        .run(&generated(), |g| {
            let r = one_case(g)?;
            estimated.fetch_add(usize::from(r), Ordering::Relaxed);
            Ok(())
        })
        .unwrap();
    let n = estimated.load(Ordering::Relaxed);
    assert!(
        n * 4 >= cases as usize,
        "only {n} of {cases} cases reached the estimate"
    );
}

/// One case: `Ok(true)` when it was accepted and estimated.
fn one_case(g: Generated) -> Result<bool, TestCaseError> {
    let ((width, aspect, (lu, tu), sigma, top), sensors, readings, rule, limit) = g;
    {
        let dir = tempfile::tempdir().unwrap();
        let height = width * aspect;
        let plate = format!(
            "[plate]\nwidth = {width:e}\nheight = {height:e}\nlength_unit = \"{lu}\"\n\
             temperature_unit = \"{tu}\"\n\n[edges.bottom]\ncondition = \"unknown\"\n\n\
             [edges.top]\ncondition = \"fixed\"\ntemperature = {top:e}\n\n[edges.left]\n\
             condition = \"insulated\"\n\n[edges.right]\ncondition = \"insulated\"\n\n\
             [fit]\nterms = 8\nstrength = {}\n\n[noise]\nsigma = {sigma:e}\n",
            if rule.starts_with('1') {
                rule.to_string()
            } else {
                format!("\"{rule}\"")
            }
        );
        let mut s = String::from("sensor,x,y\n");
        let mut r = String::from("sensor,temperature\n");
        for (k, (fx, fy)) in sensors.iter().enumerate() {
            s.push_str(&format!("S{k},{:e},{:e}\n", fx * width, fy * height));
            r.push_str(&format!("S{k},{:e}\n", readings[k]));
        }
        std::fs::write(dir.path().join("plate.toml"), plate).unwrap();
        std::fs::write(dir.path().join("sensors.csv"), s).unwrap();
        std::fs::write(dir.path().join("readings.csv"), r).unwrap();

        let case = match edgetherm::io::load_case(&CaseFiles::in_dir(dir.path())) {
            Ok(c) => c,
            Err(e) => {
                prop_assert_eq!(e.exit_code(), 2, "{}", e);
                return Ok(false);
            }
        };
        let values = match edgetherm::io::load_readings(&case.files.readings, &case) {
            Ok(v) => v,
            Err(e) => {
                prop_assert_eq!(e.exit_code(), 2, "{}", e);
                return Ok(false);
            }
        };
        let options = EstimateOptions {
            replicates: Some(8),
            grid: (5, 5),
            limit: Some(case.units.temp_to_k(limit)),
            ..EstimateOptions::default()
        };
        match estimate(&case, &values, &options, None) {
            Ok(result) => {
                prop_assert!(result.hottest.temperature.is_finite());
                let p = result.exceedance.as_ref().map(|e| e.probability);
                prop_assert!(p.is_some_and(|p| (0.0..=1.0).contains(&p)), "{:?}", p);
                for o in render_outputs(&result).unwrap() {
                    let text = String::from_utf8_lossy(&o.bytes);
                    if o.name.ends_with(".csv") {
                        for cell in text.split([',', '\n']) {
                            let c = cell.trim().to_ascii_lowercase();
                            prop_assert!(
                                !(c.contains("nan") || c.contains("inf")),
                                "{}: `{}`",
                                o.name,
                                cell
                            );
                        }
                    }
                    if o.name == "summary.json" {
                        let v: serde_json::Value = serde_json::from_str(&text).unwrap();
                        prop_assert!(
                            v["hottest"]["temperature"]
                                .as_f64()
                                .is_some_and(f64::is_finite),
                            "{}",
                            v["hottest"]
                        );
                    }
                }
            }
            Err(e) => {
                let msg = e.to_string();
                prop_assert!(
                    e.exit_code() == 2 || msg.contains("finite") || msg.contains("strength"),
                    "{}",
                    msg
                );
                return Ok(false);
            }
        }
    }
    Ok(true)
}
