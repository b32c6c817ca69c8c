//! Degenerate inputs nobody tries on purpose: all sensors at one depth, zero noise, identical
//! readings, a single sensor, a sensor almost on the hidden edge. Each must give either a
//! finite answer or an input error (exit status 2 at the command line), never a panic or a
//! non-finite number in the result. The physical checks name their source.

use edgetherm::case::{Case, CaseFiles, Sensor};
use edgetherm::estimate::{EstimateOptions, EstimateResult, estimate};
use edgetherm::geometry::{Edge, EdgeProfile, Point};
use edgetherm::io::load_case;
use edgetherm::simulate::{exact_readings, truth_model};

const K0: f64 = 273.15;

fn cold_plate() -> Case {
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/cold-plate");
    load_case(&CaseFiles::in_dir(dir)).unwrap()
}

fn quick() -> EstimateOptions {
    EstimateOptions {
        replicates: Some(50),
        ..EstimateOptions::default()
    }
}

fn sensors(points: &[(f64, f64)]) -> Vec<Sensor> {
    points
        .iter()
        .enumerate()
        .map(|(i, &(x, y))| Sensor {
            id: format!("S{i}"),
            position: Point::new(x, y),
            sigma_k: None,
            position_sigma_m: None,
            offset_k: None,
            line: i + 2,
        })
        .collect()
}

/// Every number a person or program reads is finite.
fn assert_finite(r: &EstimateResult) {
    let h = &r.hottest;
    for v in [h.position, h.temperature]
        .iter()
        .chain(&h.temperature_interval)
        .chain(&h.position_interval)
    {
        assert!(v.is_finite(), "hottest {h:?}");
    }
    for e in &r.edges {
        for v in e.estimate.iter().chain(&e.lower).chain(&e.upper) {
            assert!(v.is_finite(), "profile of the {} edge", e.edge);
        }
        assert!(e.resolution_length.is_finite() && e.resolution_length > 0.0);
    }
    for v in r
        .field
        .estimate
        .iter()
        .chain(&r.field.lower)
        .chain(&r.field.upper)
    {
        assert!(v.is_finite(), "field");
    }
    assert!(r.fit.chi_square.is_finite() && r.fit.sigma.is_finite());
}

/// Readings of a constant contact temperature `t` (kelvin) with the case's other edges.
fn exact(case: &Case, t: f64) -> Vec<Option<f64>> {
    let truth = EdgeProfile::constant(t);
    let model = truth_model(&case.plate, &[(Edge::Bottom, truth)]).unwrap();
    let pts: Vec<Point> = case.sensors.iter().map(|s| s.position).collect();
    exact_readings(&model, &pts)
        .unwrap()
        .into_iter()
        .map(Some)
        .collect()
}

/// All sensors at one depth, readings exactly on the model (zero noise): the estimate is
/// finite and, where the sensors see the edge, close to the truth.
#[test]
fn one_depth_and_zero_noise() {
    let mut case = cold_plate();
    case.sensors = sensors(
        &(0..10)
            .map(|k| (0.012 + 0.017 * k as f64, 0.007))
            .collect::<Vec<_>>(),
    );
    let readings = exact(&case, K0 + 40.0);
    let r = estimate(&case, &readings, &quick(), None).unwrap();
    assert_finite(&r);
    assert!(
        (r.hottest.temperature - (K0 + 40.0)).abs() < 1.0,
        "{:?}",
        r.hottest
    );
    assert!(r.sensors.iter().all(|s| s.flag.is_none()));
}

/// Identical readings everywhere, noise unstated: the residual estimate of σ is (nearly)
/// zero, which must not become a division by zero or a non-finite band.
#[test]
fn identical_readings_with_unstated_noise() {
    let mut case = cold_plate();
    case.noise = edgetherm::noise::NoiseSpec::Unstated;
    let readings = vec![Some(K0 + 30.0); case.sensors.len()];
    match estimate(&case, &readings, &quick(), None) {
        Ok(r) => assert_finite(&r),
        Err(e) => assert_eq!(e.exit_code(), 2, "{e}"),
    }
}

/// One sensor cannot determine the model: an input error naming the readings, not a panic.
#[test]
fn a_single_sensor_is_an_input_error() {
    let mut case = cold_plate();
    case.sensors = sensors(&[(0.09, 0.007)]);
    let e = estimate(&case, &[Some(K0 + 35.0)], &quick(), None).unwrap_err();
    assert_eq!(e.exit_code(), 2);
    assert!(e.to_string().contains("readings"), "{e}");
}

/// A sensor a hair above the hidden edge (1 µm): it sees the edge almost directly, so the
/// estimate there must follow its reading (the temperature is continuous up to the edge:
/// the Dirichlet problem's solution attains its boundary values, Evans, *PDE*, §2.2.4).
#[test]
fn a_sensor_almost_on_the_edge() {
    let mut case = cold_plate();
    let mut pts: Vec<(f64, f64)> = (0..9).map(|k| (0.012 + 0.02 * k as f64, 0.008)).collect();
    pts.push((0.1, 1e-6));
    case.sensors = sensors(&pts);
    let readings = exact(&case, K0 + 45.0);
    let r = estimate(&case, &readings, &quick(), None).unwrap();
    assert_finite(&r);
    let e = &r.edges[0];
    let j = e
        .positions
        .iter()
        .enumerate()
        .min_by(|a, b| (a.1 - 0.1).abs().total_cmp(&(b.1 - 0.1).abs()))
        .unwrap()
        .0;
    assert!(
        (e.estimate[j] - (K0 + 45.0)).abs() < 0.5,
        "{}",
        e.estimate[j]
    );
}
