//! Development probe: leave-one-out verdicts, optionally with one reading displaced.
//! `cargo run --release --example loo_probe -- CASE_DIR [BUMP_K [SENSOR_INDEX]]`, and
//! `SECOND=INDEX:BUMP` in the environment to displace a second reading.
use edgetherm::case::CaseFiles;
use edgetherm::estimate::fit::{FitInput, loo_residuals};
use edgetherm::estimate::penalty::penalty_weights;
use edgetherm::forward::{ForwardModel, SeriesOptions};
use edgetherm::inverse::{Strength, StrengthMethod};
use edgetherm::io::{load_case, load_readings};
use nalgebra::DVector;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::env::args()
        .nth(1)
        .unwrap_or("sample-measurements/cold-plate".into());
    let bump: f64 = std::env::args().nth(2).map_or(0.0, |s| s.parse().unwrap());
    let which: usize = std::env::args().nth(3).map_or(2, |s| s.parse().unwrap());
    let case = load_case(&CaseFiles::in_dir(&dir))?;
    let mut readings = load_readings(&case.files.readings, &case)?;
    if let Some(r) = readings[which].as_mut() {
        *r += bump;
    }
    // SECOND=INDEX:BUMP displaces a second reading
    if let Ok(second) = std::env::var("SECOND") {
        let (k, b) = second.split_once(':').expect("INDEX:BUMP");
        if let Some(r) = readings[k.parse::<usize>().unwrap()].as_mut() {
            *r += b.parse::<f64>().unwrap();
        }
    }
    let model = ForwardModel::new(
        &case.plate,
        SeriesOptions {
            unknown_terms: case.fit.terms,
            ..Default::default()
        },
    )?;
    let pts: Vec<_> = case.sensors.iter().map(|s| s.position).collect();
    let map = model.sensor_map(&pts);
    let sigma = match case.noise {
        edgetherm::noise::NoiseSpec::Sigma(s) => s,
        _ => 1.0,
    };
    let input = FitInput {
        a: map.matrix.clone(),
        d: DVector::from_iterator(
            pts.len(),
            (0..pts.len()).map(|i| readings[i].unwrap() - map.offset[i]),
        ),
        sigma: DVector::from_element(pts.len(), sigma),
        sigma_stated: true,
        penalty: penalty_weights(&model, case.fit.smoothing.order().unwrap_or(2)),
    };
    let v = loo_residuals(&input, Strength::Rule(StrengthMethod::Evidence));
    for (s, v) in case.sensors.iter().zip(v) {
        if let Some(v) = v {
            println!(
                "  {}  z {:8.2}  P(fault) {:.3e}",
                s.id, v.z, v.fault_probability
            );
        }
    }
    Ok(())
}
