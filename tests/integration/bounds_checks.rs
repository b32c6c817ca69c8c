//! Strict bounds on whole plates: a closed form, an empty set, and coverage by simulation.
//!
//! Sources are named beside each check: the semi-infinite strip of Brown & Churchill
//! (*Complex Variables and Applications*, steady temperatures in a semi-infinite strip), and
//! for the coverage the stated confidence itself (Rust & Burrus 1972; Stark 1992: the true
//! profile lies in the chi-square set with probability at least the confidence, so the peak
//! lies between the bounds at least that often).

use edgetherm::bounds::{
    AdmissibleSet, BoundSpec, BoundsOptions, BoundsOutcome, Discretisation, bounds_under,
};
use edgetherm::case::CaseFiles;
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::geometry::{Edge, EdgeCondition, EdgeProfile, Plate, Point, Shape};
use edgetherm::io::load_case;
use edgetherm::simulate::{add_noise, exact_readings, truth_model};
use statrs::distribution::{ChiSquared, ContinuousCDF};
use std::f64::consts::PI;

/// The semi-infinite strip `0 < x < W, y > 0` with the base at `T0` and the sides at 0:
/// `T = (2 T0 / π) atan(sin(πx/W) / sinh(πy/W))` (Brown & Churchill).
fn strip_closed_form(t0: f64, w: f64, x: f64, y: f64) -> f64 {
    2.0 * t0 / PI * ((PI * x / w).sin() / (PI * y / w).sinh()).atan()
}

#[test]
fn bounds_shrink_onto_a_closed_form_truth_where_the_sensors_see_it() {
    // A strip 0.1 m wide, sides held at 300 K, base (the hidden edge) truly at 310 K.
    let w = 0.1;
    let (t_side, t0) = (300.0, 310.0);
    let mut conditions: [Option<EdgeCondition>; 4] = [None, None, None, None];
    conditions[Edge::Bottom.index()] = Some(EdgeCondition::Unknown);
    conditions[Edge::Left.index()] = Some(EdgeCondition::Fixed(EdgeProfile::constant(t_side)));
    conditions[Edge::Right.index()] = Some(EdgeCondition::Fixed(EdgeProfile::constant(t_side)));
    let plate = Plate::new(Shape::Strip { width_m: w }, conditions, None).expect("a strip");
    // 15 sensors 4 to 6 mm deep.
    let sensors: Vec<Point> = (0..15)
        .map(|k| {
            Point::new(
                0.006 + 0.088 * k as f64 / 14.0,
                0.004 + 0.002 * (k % 2) as f64,
            )
        })
        .collect();
    let exact: Vec<f64> = sensors
        .iter()
        .map(|p| t_side + strip_closed_form(t0 - t_side, w, p.x, p.y))
        .collect();
    let sigma = 1e-3;
    let readings = add_noise(&exact, sigma, 11).expect("noise");
    let set = AdmissibleSet::new(
        &plate,
        &sensors,
        &readings,
        &vec![sigma; sensors.len()],
        Discretisation::default(),
    )
    .expect("a set");
    // The truth is constant along the base: it obeys any gradient limit.
    let g = 20.0; // K/m
    let positions: Vec<f64> = (0..=100).map(|k| k as f64 * w / 100.0).collect();
    let spec = BoundSpec {
        gradient_k_per_m: g,
        confidence: 0.95,
        min_temperature_k: None,
        max_temperature_k: None,
    };
    let out = bounds_under(
        &set,
        &spec,
        &[(Edge::Bottom, positions.clone())],
        &BoundsOptions::default(),
    )
    .expect("bounds");
    let BoundsOutcome::Bounded {
        hottest_k, edges, ..
    } = out
    else {
        panic!("expected bounds, got {out:?}");
    };
    let e = &edges[0];
    let mut worst_inside: f64 = 0.0;
    for (k, &s) in positions.iter().enumerate() {
        // strict: the truth lies between the bounds everywhere
        assert!(
            e.lower_k[k] <= t0 && t0 <= e.upper_k[k],
            "truth {t0} outside [{}, {}] at {s}",
            e.lower_k[k],
            e.upper_k[k]
        );
        if (0.015..=0.085).contains(&s) {
            worst_inside = worst_inside.max(t0 - e.lower_k[k]).max(e.upper_k[k] - t0);
        }
    }
    println!(
        "closed form: worst distance of a bound from the truth over 15-85 mm {worst_inside:.4} K; \
         hottest in [{:.4}, {:.4}] K, truth {t0}",
        hottest_k[0], hottest_k[1]
    );
    // How far a bound may stay from the truth: a triangular wiggle of height a and slope G
    // (area a²/G) midway between two sensors (r = half the spacing, 3.1 mm, depth d ≤ 6 mm)
    // changes the nearest reading by about (a²/G) d / (π (r² + d²)) (the half-plane Poisson
    // kernel, common practice as an approximation of the strip's); the chi-square region lets
    // one reading move by up to √q σ, so wiggles up to a = sqrt(√q σ G π (r² + d²) / d) stay
    // hidden. Add the Lipschitz tent between the 49 programs (G H / 2, H = W / 48) and the node
    // allowance G h / 3 (h = W / 240). The kernel approximation and the other sensors' share
    // are rough, so the check allows twice that scale.
    // χ²_15(0.95) = 24.996 (statrs, checked against scipy in tests/integration/bounds_reference.rs)
    let q = ChiSquared::new(15.0).expect("chi-square").inverse_cdf(0.95);
    let (r, d) = (0.088 / 14.0 / 2.0, 0.006);
    let a = (q.sqrt() * sigma * g * PI * (r * r + d * d) / d).sqrt();
    let scale = a + g * (w / 48.0) / 2.0 + g * (w / 240.0) / 3.0;
    println!("closed form: hidden-wiggle scale {scale:.4} K");
    assert!(
        worst_inside < 2.0 * scale,
        "bounds did not shrink: {worst_inside} K against a scale of {scale} K"
    );
    assert!(hottest_k[0] <= t0 && t0 <= hottest_k[1]);
    // Near the corners the data pin the edge less: it may rise by G times the distance to
    // the first sensor (6 mm), 0.12 K, above what the nearest sensor allows.
    assert!(
        hottest_k[1] - t0 < 2.0 * scale + g * 0.006,
        "peak upper bound {}",
        hottest_k[1]
    );
}

/// The invented cold plate of the coverage study: 180 × 28 mm, top held at 297.15 K,
/// insulated ends, hidden bottom, ten sensors 7–9 mm deep.
fn cold_plate() -> (Plate, Vec<Point>) {
    let mut conditions: [Option<EdgeCondition>; 4] = [None, None, None, None];
    conditions[Edge::Bottom.index()] = Some(EdgeCondition::Unknown);
    conditions[Edge::Top.index()] = Some(EdgeCondition::Fixed(EdgeProfile::constant(297.15)));
    conditions[Edge::Left.index()] = Some(EdgeCondition::Insulated);
    conditions[Edge::Right.index()] = Some(EdgeCondition::Insulated);
    let plate = Plate::new(
        Shape::Rectangle {
            width_m: 0.18,
            height_m: 0.028,
        },
        conditions,
        None,
    )
    .expect("a plate");
    let sensors = (0..10)
        .map(|k| {
            let x = [
                12.0, 30.0, 48.0, 66.0, 84.0, 102.0, 120.0, 138.0, 156.0, 172.0,
            ][k];
            Point::new(x * 1e-3, if k % 2 == 0 { 0.007 } else { 0.009 })
        })
        .collect();
    (plate, sensors)
}

/// Invented truth: 307 K, a broad 3 K bump at 60 mm and a narrow triangular 6 K spot at
/// 93 mm, 10 mm wide at its base (between two sensors, narrower than the 15 mm the layout
/// resolves). Steepest slope 1.2 K/mm on the spot's flanks.
fn hot_spot_truth() -> EdgeProfile {
    let positions: Vec<f64> = (0..=720).map(|k| k as f64 * 0.18 / 720.0).collect();
    let temps = positions
        .iter()
        .map(|&s| {
            let broad = 3.0 * (-((s - 0.06) / 0.02).powi(2)).exp();
            let spot = (6.0 * (1.0 - (s - 0.093).abs() / 0.005)).max(0.0);
            307.0 + broad + spot
        })
        .collect();
    EdgeProfile::piecewise_linear(positions, temps).expect("a profile")
}

#[test]
fn a_gradient_limit_the_readings_rule_out_is_reported_not_a_panic() {
    let (plate, sensors) = cold_plate();
    let truth = truth_model(&plate, &[(Edge::Bottom, hot_spot_truth())]).expect("truth");
    let exact = exact_readings(&truth, &sensors).expect("readings");
    let readings = add_noise(&exact, 0.15, 3).expect("noise");
    let disc = Discretisation {
        nodes_per_edge: 121,
        terms: 512,
    };
    let set = AdmissibleSet::new(&plate, &sensors, &readings, &[0.15; 10], disc).expect("set");
    // 10 K/m lets the edge change by 1.8 K end to end: no such profile makes the readings,
    // which span several kelvin along the plate.
    let spec = BoundSpec {
        gradient_k_per_m: 10.0,
        confidence: 0.95,
        min_temperature_k: None,
        max_temperature_k: None,
    };
    let out = bounds_under(&set, &spec, &[], &BoundsOptions::default()).expect("no error");
    assert_eq!(out, BoundsOutcome::Empty);
    // ... and a temperature ceiling below the readings empties the set as well.
    let spec = BoundSpec {
        gradient_k_per_m: 1500.0,
        max_temperature_k: Some(300.0),
        ..spec
    };
    let out = bounds_under(&set, &spec, &[], &BoundsOptions::default()).expect("no error");
    assert_eq!(out, BoundsOutcome::Empty);
}

#[test]
fn strict_peak_interval_covers_a_sub_resolution_hot_spot() {
    let (plate, sensors) = cold_plate();
    let profile = hot_spot_truth();
    // the truth's steepest slope, from its own nodes
    let (p, t) = (profile.positions(), profile.temperatures());
    let steepest = p
        .windows(2)
        .zip(t.windows(2))
        .map(|(s, v)| ((v[1] - v[0]) / (s[1] - s[0])).abs())
        .fold(0.0, f64::max);
    let g = 1500.0; // K/m, stated
    assert!(steepest <= g, "the truth must obey the stated limit");
    let true_peak = t.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let truth = truth_model(&plate, &[(Edge::Bottom, profile.clone())]).expect("truth");
    let exact = exact_readings(&truth, &sensors).expect("readings");
    let sigma = 0.15;
    let disc = Discretisation {
        nodes_per_edge: 121,
        terms: 512,
    };
    let base = AdmissibleSet::new(&plate, &sensors, &exact, &[sigma; 10], disc).expect("set");
    let options = BoundsOptions {
        envelope_points: 25,
        peak_tolerance_k: 0.1,
        max_rounds: 10,
        ..BoundsOptions::default()
    };
    let spec = BoundSpec {
        gradient_k_per_m: g,
        confidence: 0.95,
        min_temperature_k: None,
        max_temperature_k: None,
    };

    // The estimate's own interval on the same readings, for comparison (a case directory
    // with the same plate and sensors; few replicates to keep the test cheap).
    let dir = tempfile::tempdir().expect("temp dir");
    std::fs::write(
        dir.path().join("plate.toml"),
        "# invented coverage case\n[plate]\nwidth = 180.0\nheight = 28.0\nlength_unit = \"mm\"\n\
         temperature_unit = \"K\"\n[edges.bottom]\ncondition = \"unknown\"\n[edges.top]\n\
         condition = \"fixed\"\ntemperature = 297.15\n[edges.left]\ncondition = \"insulated\"\n\
         [edges.right]\ncondition = \"insulated\"\n[noise]\nsigma = 0.15\n",
    )
    .expect("write plate");
    let mut csv = String::from("sensor,x,y\n");
    for (k, s) in sensors.iter().enumerate() {
        csv.push_str(&format!("S{k},{},{}\n", s.x * 1e3, s.y * 1e3));
    }
    std::fs::write(dir.path().join("sensors.csv"), csv).expect("write sensors");
    let case = load_case(&CaseFiles::in_dir(dir.path())).expect("case");
    let est_options = EstimateOptions {
        replicates: Some(100),
        keep_all: true,
        grid: (3, 3),
        ..EstimateOptions::default()
    };

    let draws = 100;
    let (mut t_bounds, mut t_est) = (0.0, 0.0);
    let (mut covered, mut width, mut programs_total) = (0, 0.0, 0);
    let (mut est_covered, mut est_width) = (0, 0.0);
    for k in 0..draws {
        let readings = add_noise(&exact, sigma, 1000 + k as u64).expect("noise");
        let set = base.with_readings(&readings).expect("readings");
        let clock = std::time::Instant::now();
        match bounds_under(&set, &spec, &[], &options).expect("bounds") {
            BoundsOutcome::Bounded {
                hottest_k,
                programs,
                ..
            } => {
                programs_total += programs;
                if hottest_k[0] <= true_peak && true_peak <= hottest_k[1] {
                    covered += 1;
                }
                width += hottest_k[1] - hottest_k[0];
            }
            other => panic!("draw {k}: {other:?}"),
        }
        t_bounds += clock.elapsed().as_secs_f64();
        let clock = std::time::Instant::now();
        let r = estimate(
            &case,
            &readings.iter().map(|&v| Some(v)).collect::<Vec<_>>(),
            &est_options,
            None,
        )
        .expect("estimate");
        let [lo, hi] = r.hottest.temperature_interval;
        if lo <= true_peak && true_peak <= hi {
            est_covered += 1;
        }
        est_width += hi - lo;
        t_est += clock.elapsed().as_secs_f64();
    }
    println!("time: bounds {t_bounds:.2} s ({programs_total} programs), estimate {t_est:.2} s");
    let share = covered as f64 / draws as f64;
    println!(
        "sub-resolution hot spot (true peak {true_peak:.2} K, G = {g} K/m, sigma {sigma} K, \
         {draws} draws): strict interval held the peak in {covered}/{draws} = {share:.3}, mean \
         width {:.2} K; the estimate's 95 % interval (100 replicates) in {est_covered}/{draws}, \
         mean width {:.2} K",
        width / draws as f64,
        est_width / draws as f64
    );
    // the stated confidence (Rust & Burrus 1972; Stark 1992)
    assert!(share >= 0.95, "coverage {share} below 0.95");
}
