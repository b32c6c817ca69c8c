//! The estimate end to end on cases simulated from known truths.

use edgetherm::case::{Case, CaseFiles, Sensor, Smoothing};
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::geometry::{Edge, EdgeCondition, EdgeProfile, Plate, Point, Shape};
use edgetherm::io::{load_case, load_readings};
use edgetherm::simulate::{add_noise, exact_readings, truth_model};

fn sample(name: &str) -> Case {
    let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-measurements")
        .join(name);
    load_case(&CaseFiles::in_dir(dir)).unwrap()
}

fn profile(len: f64, f: impl Fn(f64) -> f64) -> EdgeProfile {
    let n = 181;
    let s: Vec<f64> = (0..n).map(|i| len * i as f64 / (n - 1) as f64).collect();
    let t = s.iter().map(|&x| f(x)).collect();
    EdgeProfile::piecewise_linear(s, t).unwrap()
}

fn readings_for(
    case: &Case,
    truths: &[(Edge, EdgeProfile)],
    sigma: f64,
    seed: u64,
) -> Vec<Option<f64>> {
    let model = truth_model(&case.plate, truths).unwrap();
    let points: Vec<Point> = case.sensors.iter().map(|s| s.position).collect();
    let exact = exact_readings(&model, &points).unwrap();
    add_noise(&exact, sigma, seed)
        .unwrap()
        .into_iter()
        .map(Some)
        .collect()
}

fn quick() -> EstimateOptions {
    EstimateOptions {
        replicates: Some(300),
        ..EstimateOptions::default()
    }
}

fn rmse(r: &edgetherm::estimate::EstimateResult, truth: &EdgeProfile) -> f64 {
    let e = &r.edges[0];
    (e.positions
        .iter()
        .zip(&e.estimate)
        .map(|(&s, &t)| (t - truth.value(s)).powi(2))
        .sum::<f64>()
        / e.positions.len() as f64)
        .sqrt()
}

/// Error bound for the recovery tests: `3 σ exp(π d / s)`, with `d` the deepest sensor's depth
/// and `s` the sensor spacing along the edge. A feature of the shortest wavelength the array
/// samples (2 s) is damped by `exp(π d / s)` at depth `d` (`docs/method.md` §2, resolution length), so noise is amplified
/// by that factor when it is recovered; the factor 3 leaves room for the smoothing bias of
/// features near that scale. The bound grows with σ and with depth, as the issue asks.
fn bound(sigma: f64, depth: f64, spacing: f64) -> f64 {
    3.0 * sigma * (std::f64::consts::PI * depth / spacing).exp()
}

const K0: f64 = 273.15;
const W: f64 = 0.18;

#[test]
fn recovers_smooth_and_hot_spot_profiles_within_bounds() {
    let case = sample("cold-plate");
    let sigma = 0.15;
    let truths = [
        (
            "smooth",
            profile(W, |x| {
                K0 + 34.0 + 3.0 * (std::f64::consts::PI * x / W).sin()
            }),
        ),
        (
            "one hot spot",
            profile(W, |x| {
                K0 + 33.5 + 8.0 * (-((x - 0.097) / 0.02f64).powi(2)).exp()
            }),
        ),
        (
            "two hot spots",
            profile(W, |x| {
                K0 + 33.0
                    + 6.0 * (-((x - 0.05) / 0.018f64).powi(2)).exp()
                    + 5.0 * (-((x - 0.135) / 0.018f64).powi(2)).exp()
            }),
        ),
    ];
    let b = bound(sigma, 0.009, 0.018);
    for (name, truth) in &truths {
        let readings = readings_for(&case, &[(Edge::Bottom, truth.clone())], sigma, 31);
        let r = estimate(&case, &readings, &quick(), None).unwrap();
        let e = rmse(&r, truth);
        eprintln!("{name}: profile RMSE {e:.3} K (bound {b:.3} K)");
        assert!(e < b, "{name}: RMSE {e} above the bound {b}");
        assert!(
            r.sensors.iter().all(|s| s.flag.is_none()),
            "{name}: a good sensor was flagged"
        );
    }
}

#[test]
fn deep_sensors_recover_a_smooth_profile_with_a_wider_bound() {
    let mut case = sample("cold-plate");
    for s in &mut case.sensors {
        s.position.y += 0.011; // 18 to 20 mm above the hidden edge, of 28 mm
    }
    let sigma = 0.15;
    let truth = profile(W, |x| {
        K0 + 34.0 + 3.0 * (std::f64::consts::PI * x / W).sin() + 1.0 * (x / W)
    });
    let readings = readings_for(&case, &[(Edge::Bottom, truth.clone())], sigma, 5);
    let r = estimate(&case, &readings, &quick(), None).unwrap();
    let e = rmse(&r, &truth);
    let b = bound(sigma, 0.020, 0.018);
    eprintln!(
        "deep sensors: profile RMSE {e:.3} K (bound {b:.3} K), resolution {:.1} mm",
        1e3 * r.edges[0].resolution_length
    );
    assert!(e < b);
    // deeper sensors see less: the resolution length is longer than with the shallow layout
    let shallow = sample("cold-plate");
    let readings = readings_for(&shallow, &[(Edge::Bottom, truth)], sigma, 5);
    let r2 = estimate(&shallow, &readings, &quick(), None).unwrap();
    assert!(r.edges[0].resolution_length > r2.edges[0].resolution_length);
}

// Square plate, one edge unknown and three held at T0; readings simulated from the unknown
// edge at a constant T1. Superposition of the four rotations gives the centre exactly
// (3 T0 + T1)/4 (standard textbook argument). Through the whole pipeline the
// constant is recovered within the band away from the corners (where the hidden edge must
// jump to T0), and the centre within the field band.
#[test]
fn square_plate_fact_holds_through_the_pipeline() {
    let side = 0.1;
    let (t0, t1) = (K0 + 20.0, K0 + 60.0);
    let fixed = |t| Some(EdgeCondition::Fixed(EdgeProfile::constant(t)));
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: side,
            height_m: side,
        },
        [
            Some(EdgeCondition::Unknown),
            fixed(t0),
            fixed(t0),
            fixed(t0),
        ],
        None,
    )
    .unwrap();
    let mut case = sample("cold-plate");
    case.plate = plate;
    case.sensors = (0..12)
        .map(|i| Sensor {
            id: format!("S{i}"),
            position: Point::new(
                side * (0.06 + 0.08 * i as f64),
                side * (0.12 + 0.06 * (i % 3) as f64),
            ),
            sigma_k: None,
            position_sigma_m: None,
            offset_k: None,
            line: i + 2,
        })
        .collect();
    case.noise = edgetherm::noise::NoiseSpec::Sigma(0.05);
    let truth = EdgeProfile::constant(t1);
    let readings = readings_for(&case, &[(Edge::Bottom, truth)], 0.05, 9);
    let r = estimate(
        &case,
        &readings,
        &EstimateOptions {
            grid: (41, 41),
            ..quick()
        },
        None,
    )
    .unwrap();
    let e = &r.edges[0];
    for (j, &s) in e.positions.iter().enumerate() {
        if s > 0.2 * side && s < 0.8 * side {
            assert!(
                e.lower[j] <= t1 && t1 <= e.upper[j],
                "s = {s}: [{}, {}]",
                e.lower[j],
                e.upper[j]
            );
        }
    }
    let centre = 20 * 41 + 20; // (x, y) = (side/2, side/2) on the 41 × 41 grid
    assert!((r.field.xs[20] - side / 2.0).abs() < 1e-12);
    let expected = (3.0 * t0 + t1) / 4.0;
    assert!(
        r.field.lower[centre] <= expected && expected <= r.field.upper[centre],
        "centre band [{}, {}] misses {expected}",
        r.field.lower[centre],
        r.field.upper[centre]
    );
    assert!((r.field.estimate[centre] - expected).abs() < 0.5);
}

#[test]
fn a_broken_thermocouple_is_caught_and_good_ones_are_not() {
    for name in ["cold-plate", "fin-root"] {
        let case = sample(name);
        let readings = load_readings(&case.files.readings, &case).unwrap();
        let r = estimate(&case, &readings, &quick(), None).unwrap();
        assert!(
            r.sensors.iter().all(|s| s.flag.is_none()),
            "{name}: a good sensor was flagged"
        );
        for (k, bump) in [(2usize, 40.0), (7, -40.0), (4, 40.0)] {
            let mut broken = readings.clone();
            *broken[k].as_mut().unwrap() += bump;
            let r = estimate(&case, &broken, &quick(), None).unwrap();
            let flagged: Vec<&str> = r
                .sensors
                .iter()
                .filter(|s| s.flag.is_some())
                .map(|s| s.sensor.as_str())
                .collect();
            assert_eq!(
                flagged,
                vec![case.sensors[k].id.as_str()],
                "{name}: {bump:+} K on sensor {k}"
            );
        }
    }
    // --keep-all keeps it
    let case = sample("cold-plate");
    let mut readings = load_readings(&case.files.readings, &case).unwrap();
    *readings[2].as_mut().unwrap() += 40.0;
    let r = estimate(
        &case,
        &readings,
        &EstimateOptions {
            keep_all: true,
            ..quick()
        },
        None,
    )
    .unwrap();
    assert!(r.sensors.iter().all(|s| s.flag.is_none()));
}

#[allow(clippy::float_cmp)] // the point of the test: bit-identical numbers
#[test]
fn same_seed_same_numbers_whatever_the_thread_count() {
    let case = sample("cold-plate");
    let readings = load_readings(&case.files.readings, &case).unwrap();
    let run = |threads: usize| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap()
            .install(|| estimate(&case, &readings, &quick(), None).unwrap())
    };
    let a = run(1);
    let b = run(3);
    assert_eq!(a.edges[0].lower, b.edges[0].lower);
    assert_eq!(a.edges[0].upper, b.edges[0].upper);
    assert_eq!(a.field.upper, b.field.upper);
    assert_eq!(
        a.hottest.temperature_interval,
        b.hottest.temperature_interval
    );
    // the fault search's leave-one-out fits run in parallel: the same verdicts
    for (sa, sb) in a.sensors.iter().zip(&b.sensors) {
        assert_eq!(sa.loo_residual, sb.loo_residual, "{}", sa.sensor);
        assert_eq!(sa.flag, sb.flag, "{}", sa.sensor);
    }
    let c = estimate(
        &case,
        &readings,
        &EstimateOptions {
            seed: Some(8),
            ..quick()
        },
        None,
    )
    .unwrap();
    assert_ne!(a.edges[0].upper, c.edges[0].upper);
}

#[test]
fn unstated_noise_is_estimated_and_said() {
    let mut case = sample("cold-plate");
    case.noise = edgetherm::noise::NoiseSpec::Unstated;
    case.fit.smoothing = Smoothing::Curvature;
    let truth = profile(W, |x| {
        K0 + 34.0 + 3.0 * (std::f64::consts::PI * x / W).sin()
    });
    let readings = readings_for(&case, &[(Edge::Bottom, truth)], 0.3, 77);
    let r = estimate(&case, &readings, &quick(), None).unwrap();
    assert_eq!(r.fit.sigma_source.name(), "estimated");
    assert_eq!(r.bootstrap_mode.name(), "residual");
    assert!(
        r.fit.sigma > 0.05 && r.fit.sigma < 1.0,
        "σ̂ = {}",
        r.fit.sigma
    );
    assert!(
        r.cautions
            .iter()
            .any(|c| c.contains("estimated from the residuals"))
    );
}

#[allow(clippy::float_cmp)] // probabilities 0 and 1 and a strength passed through are exact
#[test]
fn exceedance_probability_follows_the_limit() {
    let case = sample("cold-plate");
    let readings = load_readings(&case.files.readings, &case).unwrap();
    let at = |limit_c: f64| {
        let opts = EstimateOptions {
            limit: Some(K0 + limit_c),
            ..quick()
        };
        estimate(&case, &readings, &opts, None)
            .unwrap()
            .exceedance
            .unwrap()
    };
    let low = at(30.0);
    let high = at(80.0);
    assert_eq!(low.probability, 1.0);
    assert!(low.alarm);
    assert_eq!(high.probability, 0.0);
    assert!(!high.alarm);
}

#[test]
fn position_uncertainty_widens_the_bands() {
    let mut case = sample("cold-plate");
    let readings = load_readings(&case.files.readings, &case).unwrap();
    let width = |r: &edgetherm::estimate::EstimateResult| {
        let e = &r.edges[0];
        e.upper
            .iter()
            .zip(&e.lower)
            .map(|(u, l)| u - l)
            .sum::<f64>()
            / e.upper.len() as f64
    };
    let plain = estimate(&case, &readings, &quick(), None).unwrap();
    case.uncertainty.position_sigma_m = Some(0.001); // 1 mm on every sensor
    let jittered = estimate(&case, &readings, &quick(), None).unwrap();
    eprintln!(
        "mean band width {:.3} K without, {:.3} K with 1 mm position uncertainty",
        width(&plain),
        width(&jittered)
    );
    assert!(width(&jittered) > width(&plain));
}

// IEC 60584-1:2013 class 1, type T: ±0.5 °C from −40 to 125 °C, as a standard
// uncertainty 0.5/√3 °C by the GUM's rectangular rule (JCGM 100:2008, 4.3.7).
#[test]
fn tolerance_class_sets_the_reading_uncertainty() {
    let mut case = sample("cold-plate");
    case.noise = edgetherm::noise::NoiseSpec::Tolerance {
        class: edgetherm::noise::ToleranceClass::Iec1,
        tc_type: edgetherm::noise::ThermocoupleType::T,
    };
    let readings = load_readings(&case.files.readings, &case).unwrap();
    let r = estimate(&case, &readings, &quick(), None).unwrap();
    assert_eq!(r.fit.sigma_source.name(), "tolerance-class");
    assert!((r.fit.sigma - 0.5 / 3f64.sqrt()).abs() < 1e-12);
    for s in &r.sensors {
        assert!((s.sigma.unwrap() - 0.5 / 3f64.sqrt()).abs() < 1e-12);
    }
}

#[allow(clippy::float_cmp)] // probabilities 0 and 1 and a strength passed through are exact
#[test]
fn every_strength_rule_runs_end_to_end() {
    use edgetherm::case::StrengthRule;
    let case = sample("cold-plate");
    let readings = load_readings(&case.files.readings, &case).unwrap();
    for rule in [
        StrengthRule::Gcv,
        StrengthRule::Discrepancy,
        StrengthRule::Evidence,
        StrengthRule::LCurve,
        StrengthRule::Fixed(0.05),
    ] {
        let opts = EstimateOptions {
            strength: Some(rule),
            ..quick()
        };
        let r = estimate(&case, &readings, &opts, None).unwrap();
        let expected = match rule {
            StrengthRule::Fixed(_) => "fixed",
            other => other.name(),
        };
        assert_eq!(r.strength.method.name(), expected);
        if let StrengthRule::Fixed(v) = rule {
            assert_eq!(r.strength.value, v);
        }
        let e = &r.edges[0];
        assert!(
            e.lower
                .iter()
                .zip(&e.estimate)
                .zip(&e.upper)
                .all(|((l, m), u)| l <= m && m <= u),
            "{expected}: the estimate lies outside its own band"
        );
    }
}

#[test]
fn two_unknown_edges_are_recovered_together() {
    // the plate of the two-unknown finite-element fixture: bottom and left hidden
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/fem/two-unknown");
    let mut case = load_case(&CaseFiles::in_dir(&dir)).unwrap();
    let truths = edgetherm::io::read_truth_profiles(&dir.join("truth.csv"), &case).unwrap();
    case.noise = edgetherm::noise::NoiseSpec::Sigma(0.1);
    // a layout of 20 sensors in an L along the two hidden edges
    let (w, h) = (0.0875, 0.0625);
    let mut sensors = Vec::new();
    for i in 0..12 {
        sensors.push(Point::new(
            w * (0.05 + 0.9 * i as f64 / 11.0),
            0.006 + 0.003 * (i % 2) as f64,
        ));
    }
    for i in 0..8 {
        sensors.push(Point::new(
            0.006 + 0.003 * (i % 2) as f64,
            h * (0.15 + 0.8 * i as f64 / 7.0),
        ));
    }
    case.sensors = sensors
        .into_iter()
        .enumerate()
        .map(|(i, p)| Sensor {
            id: format!("S{i}"),
            position: p,
            sigma_k: None,
            position_sigma_m: None,
            offset_k: None,
            line: i + 2,
        })
        .collect();
    let readings = readings_for(&case, &truths, 0.1, 4);
    let r = estimate(&case, &readings, &quick(), None).unwrap();
    assert_eq!(r.edges.len(), 2);
    for e in &r.edges {
        let truth = &truths.iter().find(|(t, _)| *t == e.edge).unwrap().1;
        let inside = e
            .positions
            .iter()
            .enumerate()
            .filter(|&(j, &s)| (e.lower[j]..=e.upper[j]).contains(&truth.value(s)))
            .count() as f64
            / e.positions.len() as f64;
        eprintln!(
            "{}: truth inside the band at {:.0} % of points",
            e.edge,
            100.0 * inside
        );
        assert!(inside > 0.8, "{}: {inside}", e.edge);
    }
    // the shared corner is a free parameter: the two profiles meet there
    let b0 = r
        .edges
        .iter()
        .find(|e| e.edge == Edge::Bottom)
        .unwrap()
        .estimate[0];
    let l0 = r
        .edges
        .iter()
        .find(|e| e.edge == Edge::Left)
        .unwrap()
        .estimate[0];
    assert!((b0 - l0).abs() < 1e-9, "{b0} vs {l0}");
    assert!(r.sensors.iter().all(|s| s.flag.is_none()));
}

#[test]
fn a_sensor_without_a_reading_is_left_out_but_reported() {
    let case = sample("cold-plate");
    let mut readings = load_readings(&case.files.readings, &case).unwrap();
    readings[3] = None;
    let r = estimate(&case, &readings, &quick(), None).unwrap();
    assert_eq!(r.fit.readings_used, 9);
    let s = &r.sensors[3];
    assert!(s.reading.is_none() && s.residual.is_none() && s.leverage.is_none());
    assert!(s.fitted.is_finite());
}

// The heat flow through the hidden edge is a linear functional of the profile: on a smooth
// truth its interval holds the truth's own heat flow (computed by the forward model of the
// true plate, which the slab test checks against Fourier's law).
#[test]
fn heat_flow_interval_holds_the_true_heat_flow() {
    let case = sample("cold-plate");
    let truth = profile(W, |x| {
        K0 + 34.0 + 3.0 * (std::f64::consts::PI * x / W).sin()
    });
    let truths = [(Edge::Bottom, truth)];
    let true_flow = truth_model(&case.plate, &truths)
        .unwrap()
        .heat_flow(Edge::Bottom, &[])
        .unwrap()
        .unwrap();
    let readings = readings_for(&case, &truths, 0.15, 12);
    let r = estimate(&case, &readings, &quick(), None).unwrap();
    let hf = r.edges[0].heat_flow.unwrap();
    eprintln!(
        "heat flow into the bottom: true {true_flow:.1} W/m, estimate {:.1} [{:.1}, {:.1}]",
        hf.value, hf.lower, hf.upper
    );
    assert!(hf.lower <= true_flow && true_flow <= hf.upper);
    assert!(
        true_flow > 0.0,
        "heat enters the plate through the warm bottom"
    );
}

/// An invented clamp-like plate 200 × 40 mm: the bottom edge hidden, the top held at 30 °C,
/// the ends insulated; `xs` the sensors' positions along it at depth `depth` (metres).
fn clamp_case(xs: &[f64], depth: impl Fn(usize) -> f64) -> Case {
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: 0.2,
            height_m: 0.04,
        },
        // bottom, right, top, left
        [
            Some(EdgeCondition::Unknown),
            Some(EdgeCondition::Insulated),
            Some(EdgeCondition::Fixed(EdgeProfile::constant(K0 + 30.0))),
            Some(EdgeCondition::Insulated),
        ],
        None,
    )
    .unwrap();
    let mut case = sample("cold-plate");
    case.plate = plate;
    case.sensors = xs
        .iter()
        .enumerate()
        .map(|(i, &x)| Sensor {
            id: format!("S{:02}", i + 1),
            position: Point::new(x, depth(i)),
            sigma_k: None,
            position_sigma_m: None,
            offset_k: None,
            line: i + 2,
        })
        .collect();
    case.noise = edgetherm::noise::NoiseSpec::Sigma(0.2);
    case
}

/// A smooth contact temperature with an optional Gaussian hot spot of `height` kelvin and
/// full width at half maximum `fwhm` metres centred at `centre`.
fn spot_profile(height: f64, centre: f64, fwhm: f64) -> EdgeProfile {
    let sd = fwhm / (2.0 * (2.0 * std::f64::consts::LN_2).sqrt());
    let n = 801;
    let s: Vec<f64> = (0..n).map(|i| 0.2 * i as f64 / (n - 1) as f64).collect();
    let t = s
        .iter()
        .map(|&x| {
            K0 + 45.0
                + 3.0 * (std::f64::consts::PI * x / 0.2).sin()
                + height * (-0.5 * ((x - centre) / sd).powi(2)).exp()
        })
        .collect();
    EdgeProfile::piecewise_linear(s, t).unwrap()
}

/// A sensor right above a narrow hot spot (8 mm wide, +20 K, its neighbours 20 mm away)
/// stands out from the others, and the residual alone calls it faulty; the physics does not
/// (`docs/method.md`, "Sensor decisions"): a hot spot explains it, so it must be kept in
/// every noise draw. Before the hot-feature test it was left out and the reported hottest
/// temperature, 49.3 °C [48.5, 50.6], lay below the sensor's own reading of 52.5 °C.
///
/// The check that cannot be argued with is the maximum principle (Evans, *PDE*, §2.2.3):
/// with the other edges cooler, the hottest point of the plate lies on the hidden edge, so
/// the hottest edge temperature is at least every interior reading; the interval's upper end
/// must not fall below the hottest reading by more than the noise allows (3 σ).
#[test]
fn a_sensor_over_a_narrow_hot_spot_is_kept_in_every_draw() {
    let xs: Vec<f64> = (0..10).map(|k| 0.01 + 0.02 * k as f64).collect();
    let case = clamp_case(&xs, |_| 0.006);
    let truth = spot_profile(20.0, 0.09, 0.008);
    let mut doubted = 0;
    for seed in 0..20 {
        let readings = readings_for(&case, &[(Edge::Bottom, truth.clone())], 0.2, 100 + seed);
        let r = estimate(
            &case,
            &readings,
            &EstimateOptions {
                replicates: Some(100),
                ..EstimateOptions::default()
            },
            None,
        )
        .unwrap();
        assert!(
            r.sensors.iter().all(|s| s.flag.is_none()),
            "seed {seed}: a sensor was left out: {:?}",
            r.sensors
                .iter()
                .filter_map(|s| s.flag.as_ref())
                .collect::<Vec<_>>()
        );
        let hottest_reading = readings.iter().flatten().copied().fold(f64::MIN, f64::max);
        assert!(
            r.hottest.temperature_interval[1] >= hottest_reading - 3.0 * 0.2,
            "seed {seed}: interval {:?} below the hottest reading {hottest_reading}",
            r.hottest.temperature_interval
        );
        for d in &r.doubtful_sensors {
            assert_eq!(d.sensor, "S05", "seed {seed}: the wrong sensor is in doubt");
            assert!(
                (d.position - 0.09).abs() < 0.01,
                "seed {seed}: {}",
                d.position
            );
            assert!(d.peak_temperature > hottest_reading);
            assert!(r.sensors[4].doubtful);
        }
        doubted += usize::from(!r.doubtful_sensors.is_empty());
    }
    // the residual alone would have left S05 out in most draws: the test must have bitten
    eprintln!("S05 kept under two explanations in {doubted} of 20 draws");
    assert!(
        doubted >= 10,
        "only {doubted} draws exercised the hot-feature test"
    );
}

/// A gross fault stays easy: a thermocouple reading 40 K high (or low) among neighbours 10 mm
/// apart at similar depth is left out in every draw, since a hot spot strong enough to give
/// its reading would raise theirs by several kelvin (a point source under a sensor at depth
/// d is seen at horizontal distance r attenuated by d²/(d² + r²) in a half-plane: the Poisson
/// kernel, Evans, *PDE*, §2.2.4).
#[test]
fn a_gross_fault_among_close_neighbours_is_left_out_in_every_draw() {
    let xs: Vec<f64> = (0..19).map(|k| 0.01 + 0.01 * k as f64).collect();
    let case = clamp_case(&xs, |i| if i % 2 == 0 { 0.005 } else { 0.007 });
    let truth = spot_profile(0.0, 0.1, 0.01);
    for seed in 0..10 {
        for (k, bump) in [(8usize, 40.0), (11, -40.0)] {
            let mut readings =
                readings_for(&case, &[(Edge::Bottom, truth.clone())], 0.2, 300 + seed);
            *readings[k].as_mut().unwrap() += bump;
            let r = estimate(
                &case,
                &readings,
                &EstimateOptions {
                    replicates: Some(50),
                    ..EstimateOptions::default()
                },
                None,
            )
            .unwrap();
            let flagged: Vec<&str> = r
                .sensors
                .iter()
                .filter(|s| s.flag.is_some())
                .map(|s| s.sensor.as_str())
                .collect();
            assert_eq!(
                flagged,
                vec![case.sensors[k].id.as_str()],
                "seed {seed}, {bump:+} K"
            );
            assert!(r.doubtful_sensors.is_empty());
        }
    }
}

/// A sensor the user names as faulty is left out whatever it reads, and said to be.
#[test]
fn a_sensor_named_as_faulty_is_left_out() {
    let case = sample("cold-plate");
    let readings = load_readings(&case.files.readings, &case).unwrap();
    let r = estimate(
        &case,
        &readings,
        &EstimateOptions {
            exclude: vec![3],
            ..quick()
        },
        None,
    )
    .unwrap();
    assert_eq!(r.fit.readings_used, 9);
    assert!(r.sensors[3].flag.as_deref().unwrap().contains("request"));
    assert!(
        r.sensors
            .iter()
            .enumerate()
            .all(|(k, s)| (k == 3) == s.flag.is_some())
    );
}

/// The resolution length counts sensor spacing (`docs/method.md`, resolution length): at the
/// same depth and the same smoothing strength, sensors twice as far apart resolve a coarser
/// feature between them. A point feature midway between sensors 2 s apart at depth d is seen
/// through kernels of width about the spacing, not the depth (the Poisson kernel spreads as
/// d² + r²: Evans, *PDE*, §2.2.4). The strength is fixed because a rule re-chooses it with
/// the data, and the smoothing it chooses then sets the length as much as the layout does.
#[test]
fn sparser_sensors_give_a_longer_resolution_length() {
    let lengths: Vec<f64> = [0.01, 0.02, 0.04]
        .iter()
        .map(|&spacing| {
            let xs: Vec<f64> = (0..)
                .map(|k| 0.01 + spacing * k as f64)
                .take_while(|&x| x < 0.195)
                .collect();
            let case = clamp_case(&xs, |_| 0.006);
            let readings = readings_for(
                &case,
                &[(Edge::Bottom, spot_profile(0.0, 0.1, 0.01))],
                0.2,
                7,
            );
            let opts = EstimateOptions {
                strength: Some(edgetherm::case::StrengthRule::Fixed(1e-3)),
                ..quick()
            };
            let r = estimate(&case, &readings, &opts, None).unwrap();
            let e = &r.edges[0];
            assert!(e.resolution_at_hottest <= e.resolution_length);
            e.resolution_length
        })
        .collect();
    eprintln!("resolution length at spacing 10, 20, 40 mm: {lengths:?} m");
    assert!(
        lengths[0] < lengths[1] && lengths[1] < lengths[2],
        "{lengths:?}"
    );
    // never shorter than half the spacing: midway between two sensors the kernel peaks at a
    // sensor, and the span holds both the point and that sensor (measured: 21, 35 and 36 mm;
    // the span is about half the gap plus the kernel's own width, not the whole gap, as a
    // first draft of this test assumed)
    assert!(lengths[2] >= 0.02, "{lengths:?}");
}

/// The gradient a doubtful sensor's message names is what rules the hot spot out: stating a
/// gradient limit below it leaves the sensor out; without the limit it is kept. Cold-plate
/// sample with TC03 raised by 15 °C (the example in `docs/case-files.md`).
#[test]
fn a_gradient_limit_below_the_named_one_rules_the_hot_spot_out() {
    let case = sample("cold-plate");
    let mut readings = load_readings(&case.files.readings, &case).unwrap();
    *readings[2].as_mut().unwrap() += 15.0;
    let r = estimate(&case, &readings, &quick(), None).unwrap();
    let d = r.doubtful_sensors.first().expect("TC03 kept as doubtful");
    assert_eq!(d.sensor, "TC03");
    let g = d.min_gradient.expect("a gradient that rules it out");
    let limited = estimate(
        &case,
        &readings,
        &EstimateOptions {
            max_gradient_k_per_m: Some(0.8 * g),
            ..quick()
        },
        None,
    )
    .unwrap();
    assert!(limited.doubtful_sensors.is_empty());
    assert!(
        limited.sensors[2].flag.is_some(),
        "TC03 left out under 0.8 × {g} K/m"
    );
}
