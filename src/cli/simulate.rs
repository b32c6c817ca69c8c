//! `edgetherm simulate CASE_DIR --truth PROFILE.csv`: synthetic readings from a known edge
//! profile (demos, what-if studies, tests).
//!
//! Writes `readings.csv` (`sensor,temperature`) to `--out` or, without it, to stdout;
//! `--field FILE` also writes the true field (`x,y,temperature`) on the grid.

use super::{GlobalOptions, parse_grid, print_stdout};
use edgetherm::case::{DEFAULT_GRID, grid_coordinates};
use edgetherm::io::{check_output_file, load_case, read_truth_profiles, write_atomic};
use edgetherm::report::num;
use edgetherm::simulate::{add_noise, exact_readings, true_field, truth_model};
use edgetherm::{Error, Result};
use std::path::PathBuf;

/// Arguments of `edgetherm simulate`.
#[derive(Debug, clap::Args)]
pub struct SimulateArgs {
    /// The case directory (plate.toml and sensors.csv).
    #[arg(value_name = "CASE_DIR")]
    pub case_dir: PathBuf,
    /// The true profile of each unknown edge: CSV `edge,position,temperature` (the `edge`
    /// column may be left out when one edge is unknown), case units, linearly interpolated.
    #[arg(long, value_name = "PROFILE.csv")]
    pub truth: PathBuf,
    /// Standard deviation of the Gaussian noise added to every reading, in the case's
    /// temperature unit; 0 gives the exact forward values.
    #[arg(
        long,
        value_name = "SIGMA",
        default_value_t = 0.0,
        allow_negative_numbers = true
    )]
    pub noise: f64,
    /// Seed of the noise generator [default: the case's [uncertainty] seed].
    #[arg(long, value_name = "N", allow_negative_numbers = true, value_parser = super::seed_arg)]
    pub seed: Option<u64>,
    /// Write the readings here instead of stdout.
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Also write the true field on a grid (`x,y,temperature`) to this file.
    #[arg(long, value_name = "FILE")]
    pub field: Option<PathBuf>,
    /// Grid for --field: NX,NY points, edges included (a strip's grid is one width deep; a round part's is NX angles by NY radii)
    /// [default: 41,41].
    #[arg(long, value_name = "NX,NY")]
    pub grid: Option<String>,
}

/// Run `simulate`.
pub fn run(args: &SimulateArgs, global: &GlobalOptions) -> Result<i32> {
    let files = global.case_files(&args.case_dir, true, false, None)?;
    let case = load_case(&files)?;
    if case.plate.unknown_edges().is_empty() {
        return Err(Error::invalid_at(
            &case.files.plate,
            None,
            Some("edges"),
            "no edge is unknown, so there is no profile to simulate from; mark the hidden \
             edge condition = \"unknown\"",
        ));
    }
    if !(args.noise.is_finite() && args.noise >= 0.0) {
        return Err(Error::invalid_field(
            "--noise",
            format!(
                "the noise is a standard deviation, a finite number 0 or more in the case's \
                 temperature unit (0 for exact readings); {} means nothing here",
                args.noise
            ),
        ));
    }
    if args.noise > 0.0 {
        edgetherm::plausible::sigma_k(&case.units, args.noise)
            .map_err(|m| Error::invalid_field("--noise", format!("{m}; or 0 for no noise")))?;
    }
    let (nx, ny) = match &args.grid {
        Some(g) => parse_grid(g)?,
        None => DEFAULT_GRID,
    };
    // simulate reads the plate, the sensors, the fixed-edge profiles and the truth; an old
    // readings.csv is not among its inputs and may be replaced by --out, but only with
    // --overwrite (it may hold measurements)
    let mut inputs: Vec<&std::path::Path> = case
        .files
        .inputs()
        .into_iter()
        .filter(|p| *p != case.files.readings.as_path())
        .collect();
    inputs.push(&args.truth);
    for (path, flag) in [(&args.out, "--out"), (&args.field, "--field")] {
        if let Some(p) = path {
            check_output_file(p, flag, &inputs, global.overwrite)?;
        }
    }

    let truths = read_truth_profiles(&args.truth, &case)?;
    let model = truth_model(&case.plate, &truths).map_err(|e| {
        e.in_file(&case.files.plate, |f| {
            edgetherm::io::plate_line_of(&case.files.plate, f)
        })
    })?;
    let points: Vec<_> = case.sensors.iter().map(|s| s.position).collect();
    let exact = exact_readings(&model, &points)?;
    let seed = args.seed.unwrap_or(case.uncertainty.seed);
    let u = case.units;
    let noisy = add_noise(&exact, u.dtemp_to_k(args.noise), seed)?;

    let mut readings = csv_writer();
    write_row(&mut readings, &["sensor", "temperature"])?;
    for (s, t) in case.sensors.iter().zip(&noisy) {
        write_row(
            &mut readings,
            &[&s.id, &format!("{:.4}", u.temp_from_k(*t))],
        )?;
    }
    let readings = finish(readings)?;

    if let Some(field_path) = &args.field {
        let (xs, ys) = grid_coordinates(case.plate.shape(), nx, ny);
        let grid = true_field(&model, &xs, &ys)?;
        let shape = *case.plate.shape();
        let round = shape.is_round();
        let mut w = csv_writer();
        if round {
            write_row(&mut w, &["x", "y", "temperature", "radius", "angle"])?;
        } else {
            write_row(&mut w, &["x", "y", "temperature"])?;
        }
        for (j, &gy) in ys.iter().enumerate() {
            for (i, &gx) in xs.iter().enumerate() {
                let p = edgetherm::case::grid_point(&shape, gx, gy);
                let mut row = vec![
                    num(u.length_from_m(p.x)),
                    num(u.length_from_m(p.y)),
                    format!("{:.4}", u.temp_from_k(grid[(j, i)])),
                ];
                if round {
                    row.push(num(u.length_from_m(gy)));
                    row.push(format!("{:.3}", gx.to_degrees()));
                }
                let refs: Vec<&str> = row.iter().map(String::as_str).collect();
                write_row(&mut w, &refs)?;
            }
        }
        write_atomic(field_path, &finish(w)?)?;
    }

    match &args.out {
        Some(out) => {
            write_atomic(out, &readings)?;
            if global.json {
                let summary = serde_json::json!({
                    "readings": out,
                    "sensors": case.sensors.len(),
                    "noise": args.noise,
                    "seed": seed,
                    "field": args.field,
                    "units": {"length": u.length.symbol(), "temperature": u.temperature.symbol()},
                });
                print_stdout(&format!("{summary:#}\n"))?;
            } else if !global.quiet {
                let noise = if args.noise == 0.0 {
                    "no noise (exact forward values)".to_string()
                } else {
                    format!(
                        "Gaussian noise of standard deviation {} {} (seed {seed})",
                        num(args.noise),
                        u.temperature.symbol()
                    )
                };
                let mut text = format!(
                    "Wrote {} simulated readings to {}, with {noise}.\n",
                    case.sensors.len(),
                    out.display()
                );
                if let Some(f) = &args.field {
                    text.push_str(&format!(
                        "Wrote the true field on a {nx} x {ny} grid to {}.\n",
                        f.display()
                    ));
                }
                text.push_str(
                    "These are simulated values from an assumed profile, not measurements.\n",
                );
                print_stdout(&text)?;
            }
        }
        None => print_stdout(std::str::from_utf8(&readings).unwrap_or_default())?,
    }
    Ok(0)
}

fn csv_writer() -> csv::Writer<Vec<u8>> {
    csv::Writer::from_writer(Vec::new())
}

fn write_row(w: &mut csv::Writer<Vec<u8>>, fields: &[&str]) -> Result<()> {
    w.write_record(fields)
        .map_err(|e| Error::Internal(format!("cannot format CSV: {e}")))
}

fn finish(w: csv::Writer<Vec<u8>>) -> Result<Vec<u8>> {
    w.into_inner()
        .map_err(|e| Error::Internal(format!("cannot format CSV: {e}")))
}
