//! Development probe: the marginal likelihood of each smoothing order on a case's readings.
//! `cargo run --release --example order_evidence -- CASE_DIR`
use edgetherm::estimate::fit::{FitInput, fit};
use edgetherm::estimate::penalty::penalty_weights;
use edgetherm::forward::{ForwardModel, SeriesOptions};
use edgetherm::inverse::{Strength, StrengthMethod};
use edgetherm::io::{CaseFiles, load_case, load_readings};
use nalgebra::DVector;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::env::args()
        .nth(1)
        .unwrap_or("sample-measurements/cold-plate".into());
    let case = load_case(&CaseFiles::in_dir(&dir))?;
    let readings = load_readings(&case.files.readings, &case)?;
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
    for order in [2, 1, 0] {
        let input = FitInput {
            a: map.matrix.clone(),
            d: DVector::from_iterator(
                pts.len(),
                (0..pts.len()).map(|i| readings[i].unwrap() - map.offset[i]),
            ),
            sigma: DVector::from_element(pts.len(), sigma),
            sigma_stated: true,
            penalty: penalty_weights(&model, order),
        };
        let f = fit(&input, Strength::Rule(StrengthMethod::Evidence))?;
        println!(
            "order {order}: -2 log evidence {:.3} at lambda {:.3e}, edf {:.2}",
            f.selection.criterion, f.selection.lambda, f.solution.effective_parameters
        );
    }
    Ok(())
}
