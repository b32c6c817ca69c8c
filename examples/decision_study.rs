//! Sensor-decision study: how often the search for suspect sensors leaves out the one sensor
//! above a real narrow hot spot (it never should), and how often it catches a gross fault
//! among close neighbours (it always should), over seeded noise draws. The figures in
//! `docs/calibration.md`, "Sensor decisions".
//!
//! `cargo run --release --example decision_study -- [DRAWS]` (default 100)
//!
//! The plate is invented: 200 × 40 mm, the bottom edge hidden, the top held at 30 °C, the
//! ends insulated, σ = 0.2 K; the contact temperature is 45 °C plus a 3 K sine, plus a
//! Gaussian hot spot under one sensor. Readings come from the forward model (`simulate`).

use edgetherm::case::{CaseFiles, Sensor};
use edgetherm::estimate::{EstimateOptions, estimate};
use edgetherm::geometry::{Edge, EdgeCondition, EdgeProfile, Plate, Point, Shape};
use edgetherm::io::load_case;
use edgetherm::simulate::{add_noise, exact_readings, truth_model};

const K0: f64 = 273.15;

fn case(xs: &[f64], depth: impl Fn(usize) -> f64) -> edgetherm::case::Case {
    let mut case = load_case(&CaseFiles::in_dir("sample-measurements/cold-plate")).unwrap();
    case.plate = Plate::new(
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

fn truth(height: f64, centre: f64, fwhm: f64) -> EdgeProfile {
    let sd = fwhm / (2.0 * (2.0 * std::f64::consts::LN_2).sqrt());
    let s: Vec<f64> = (0..=1600).map(|i| 0.2 * f64::from(i) / 1600.0).collect();
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

fn readings(c: &edgetherm::case::Case, t: &EdgeProfile, seed: u64) -> Vec<Option<f64>> {
    let model = truth_model(&c.plate, &[(Edge::Bottom, t.clone())]).unwrap();
    let pts: Vec<Point> = c.sensors.iter().map(|s| s.position).collect();
    let exact = exact_readings(&model, &pts).unwrap();
    add_noise(&exact, 0.2, seed)
        .unwrap()
        .into_iter()
        .map(Some)
        .collect()
}

fn main() {
    let draws: u64 = std::env::args().nth(1).map_or(100, |s| s.parse().unwrap());
    let opts = EstimateOptions {
        replicates: Some(1), // the decisions do not depend on the bootstrap
        ..EstimateOptions::default()
    };
    println!("witness above a real hot spot (sensor S05 at x = 90 mm); spacing 20 mm");
    println!("depth_mm height_K fwhm_mm  left_out  kept_doubtful  (of {draws} draws)");
    let xs: Vec<f64> = (0..10).map(|k| 0.01 + 0.02 * f64::from(k)).collect();
    for depth in [0.004, 0.006, 0.010] {
        let c = case(&xs, |_| depth);
        for (height, fwhm) in [
            (10.0, 4.0e-3),
            (20.0, 8.0e-3),
            (40.0, 6.0e-3),
            (20.0, 16.0e-3),
        ] {
            let t = truth(height, 0.09, fwhm);
            let (mut out, mut doubt) = (0, 0);
            for seed in 0..draws {
                let r = estimate(&c, &readings(&c, &t, 1000 + seed), &opts, None).unwrap();
                out += usize::from(r.sensors.iter().any(|s| s.flag.is_some()));
                doubt += usize::from(!r.doubtful_sensors.is_empty());
            }
            println!(
                "{:8.0} {:8.0} {:7.0} {:9} {:14}",
                depth * 1e3,
                height,
                fwhm * 1e3,
                out,
                doubt
            );
        }
    }
    println!();
    println!("gross fault on S09 among neighbours 10 mm apart at 5-7 mm depth, smooth edge");
    println!("fault_K  caught  kept_doubtful  other_left_out  (of {draws} draws)");
    let xs: Vec<f64> = (0..19).map(|k| 0.01 + 0.01 * f64::from(k)).collect();
    let c = case(&xs, |i| if i % 2 == 0 { 0.005 } else { 0.007 });
    let t = truth(0.0, 0.1, 0.01);
    for fault in [10.0, 20.0, 40.0, -40.0] {
        let (mut caught, mut doubt, mut other) = (0, 0, 0);
        for seed in 0..draws {
            let mut d = readings(&c, &t, 5000 + seed);
            *d[8].as_mut().unwrap() += fault;
            let r = estimate(&c, &d, &opts, None).unwrap();
            caught += usize::from(r.sensors[8].flag.is_some());
            doubt += usize::from(r.sensors[8].doubtful);
            other += usize::from(
                r.sensors
                    .iter()
                    .enumerate()
                    .any(|(k, s)| k != 8 && s.flag.is_some()),
            );
        }
        println!("{fault:7.0} {caught:7} {doubt:14} {other:15}");
    }
}
