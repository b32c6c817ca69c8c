//! Reading a case directory into a validated [`Case`].
//!
//! [`load_case`] reads `plate.toml` and `sensors.csv` (and any fixed-edge profile files
//! `plate.toml` names), checks everything once and converts to metres and kelvin. Readings are
//! loaded separately with [`load_readings`], because several commands take a case without
//! them.

use crate::case::{Case, CaseFiles, Sensor};
use crate::error::Result;
use crate::geometry::{Edge, EdgeProfile, Point};
use crate::io::dialect::DialectOptions;
use crate::io::{csv_files, plate_file};
use std::path::Path;

/// Read and validate a case: `plate.toml` (with its profile files) and `sensors.csv`.
///
/// Every invalid input is an [`crate::Error::Invalid`] naming the file, line and field; a
/// missing file is an [`crate::Error::Io`] with `input: true`.
pub fn load_case(files: &CaseFiles) -> Result<Case> {
    load(files, true)
}

/// Read and validate a case for `edgetherm design`: like [`load_case`], but `sensors.csv` may
/// be absent (a layout is designed before anything is drilled); its sensors are then empty.
/// A sensors file that exists must be valid.
pub fn load_design_case(files: &CaseFiles) -> Result<Case> {
    load(files, files.sensors.exists())
}

/// Read `plate.toml` and, when `with_sensors`, `sensors.csv`.
fn load(files: &CaseFiles, with_sensors: bool) -> Result<Case> {
    let pf = plate_file::read_plate_file(&files.plate)?;
    let mut read_as = pf.profiles_read_as.clone();
    let sensors = if with_sensors {
        let (sensors, how) =
            csv_files::read_sensors_as(&files.sensors, &pf.units, pf.plate.shape())?;
        read_as.push(how);
        sensors
    } else {
        Vec::new()
    };
    let mut files = files.clone();
    files.profiles = pf.profiles;
    Ok(Case {
        units: pf.units,
        plate: pf.plate,
        sensors,
        fit: pf.fit,
        noise: pf.noise,
        uncertainty: pf.uncertainty,
        design: pf.design,
        bounds: pf.bounds,
        thermocouple: pf.thermocouple,
        files,
        read_as,
    })
}

/// Read a sensor layout in the format of `sensors.csv` (`sensor,x,y`, case units), such as a
/// `layout.csv` written by `edgetherm design` or a layout given to `--evaluate`.
pub fn read_layout(path: &Path, case: &Case) -> Result<Vec<Sensor>> {
    csv_files::read_sensors(path, &case.units, case.plate.shape())
}

/// Read a candidate file for `edgetherm design`: `x,y` (case length unit; an optional
/// `sensor` column names the holes). Returns each position in metres with its 1-based line;
/// every position must lie strictly inside the plate.
pub fn read_candidates(path: &Path, case: &Case) -> Result<Vec<(Point, usize)>> {
    let table = csv_files::CsvTable::read(
        path,
        &csv_files::Columns {
            required: &["x", "y"],
            optional: &["sensor"],
        },
    )?;
    if table.rows.is_empty() {
        return Err(crate::Error::invalid_at(
            path,
            None,
            None,
            "the file lists no candidate positions; add one row `x,y` per possible hole",
        ));
    }
    let shape = case.plate.shape();
    let mut out = Vec::with_capacity(table.rows.len());
    for row in &table.rows {
        let x = table.number(row, "x")?;
        let y = table.number(row, "y")?;
        let p = Point::new(case.units.length_to_m(x), case.units.length_to_m(y));
        if !shape.contains_strictly(p) {
            let x_bad = !(p.x > 0.0 && p.x < shape.width());
            return Err(table.error(
                row.line,
                if x_bad { "x" } else { "y" },
                format!(
                    "the candidate ({x}, {y}) {} is not strictly inside the plate",
                    case.units.length
                ),
            ));
        }
        out.push((p, row.line));
    }
    Ok(out)
}
/// Read a readings file (`sensor,temperature`, one reading per row, case temperature unit)
/// into kelvin, aligned with `case.sensors`; a sensor with no reading gets `None`.
pub fn load_readings(path: &Path, case: &Case) -> Result<Vec<Option<f64>>> {
    csv_files::read_readings(path, case, &DialectOptions::default()).map(|(v, _)| v)
}

/// [`load_readings`] with the file's dialect declared in part or whole (`options`; what is
/// not declared is detected), returning also how the file was read, for the outputs (push it
/// onto [`Case::read_as`]).
pub fn load_readings_as(
    path: &Path,
    case: &Case,
    options: &DialectOptions,
) -> Result<(Vec<Option<f64>>, crate::case::ReadAs)> {
    csv_files::read_readings(path, case, options)
}

/// Readings handed over as numbers rather than a file (the Python module's dicts, Series
/// and arrays): `values[i]` for `case.sensors[i]`, in the case's temperature unit (or
/// millivolts when the case reads thermocouple voltages with a fixed cold junction), `None`
/// or NaN for no reading. Each is converted and checked as a `readings.csv` value is (the
/// plausible range, the thermocouple conversion, the sensor's offset); `source` names them in
/// messages, with the sensor id as the field.
///
/// # Errors
/// [`crate::Error::Invalid`] naming `source` and the sensor: a count that differs from the
/// case's sensors, a non-finite or implausible value, a case that takes its cold junction
/// from a column of `readings.csv`, or no reading at all.
pub fn readings_from_values(
    case: &Case,
    values: &[Option<f64>],
    source: &Path,
) -> Result<Vec<Option<f64>>> {
    use crate::error::Error;
    if values.len() != case.sensors.len() {
        return Err(Error::invalid_at(
            source,
            None,
            None,
            format!(
                "{} readings for the {} sensors of {}; give one per sensor (none or NaN for a \
                 sensor without a reading)",
                values.len(),
                case.sensors.len(),
                case.files.sensors.display()
            ),
        ));
    }
    if crate::io::convert::cold_junction_column(case) {
        return Err(Error::invalid_at(
            source,
            None,
            Some("cold_junction"),
            "plate.toml takes the cold junction from a column of the readings: give the \
             readings as a readings.csv file with its cold_junction column",
        ));
    }
    let mut out = vec![None; values.len()];
    for (i, v) in values.iter().enumerate() {
        let Some(v) = v.filter(|v| !v.is_nan()) else {
            continue;
        };
        let id = case.sensors[i].id.as_str();
        if !v.is_finite() {
            return Err(Error::invalid_at(
                source,
                None,
                Some(id),
                format!("`{v}` is not a finite number; give a reading, or none"),
            ));
        }
        let k = crate::io::convert::reading_k(case, v, None)
            .map_err(|m| Error::invalid_at(source, None, Some(id), m))?;
        out[i] = Some(crate::io::convert::with_offset(case, i, k));
    }
    if out.iter().all(Option::is_none) {
        return Err(Error::invalid_at(
            source,
            None,
            None,
            "no reading at all; give at least one sensor's reading",
        ));
    }
    Ok(out)
}

/// Read truth profiles (`edge,position,temperature`, case units; the `edge` column may be
/// left out when exactly one edge is unknown): one profile per unknown edge, in metres and
/// kelvin, each spanning its edge.
pub fn read_truth_profiles(path: &Path, case: &Case) -> Result<Vec<(Edge, EdgeProfile)>> {
    csv_files::read_truth_profiles(path, case)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::error::Error;

    fn write(dir: &Path, name: &str, text: &str) {
        std::fs::write(dir.join(name), text).unwrap();
    }

    fn case_dir(unknown_left: bool) -> tempfile::TempDir {
        let d = tempfile::tempdir().unwrap();
        let left = if unknown_left { "unknown" } else { "insulated" };
        write(
            d.path(),
            "plate.toml",
            &format!(
                "[plate]\nwidth = 100\nheight = 50\nlength_unit = \"mm\"\ntemperature_unit = \"F\"\n\
                 [edges.bottom]\ncondition = \"unknown\"\n[edges.top]\ncondition = \"fixed\"\n\
                 profile = \"top.csv\"\n[edges.left]\ncondition = \"{left}\"\n\
                 [edges.right]\ncondition = \"insulated\"\n[uncertainty]\nposition_sigma = 0.5\n"
            ),
        );
        write(d.path(), "top.csv", "position,temperature\n0,32\n100,212\n");
        write(
            d.path(),
            "sensors.csv",
            "sensor,x,y\nA,10,10\nB,50,25\nC,90,40\n",
        );
        d
    }

    #[test]
    fn loads_a_case_in_si_units() {
        let d = case_dir(false);
        let case = load_case(&CaseFiles::in_dir(d.path())).unwrap();
        assert_eq!(case.sensors.len(), 3);
        assert_eq!(case.files.profiles.len(), 1);
        assert_eq!(case.uncertainty.position_sigma_m, Some(0.0005));
        // 32 F = 273.15 K and 212 F = 373.15 K by the definition of the Fahrenheit scale
        match case.plate.condition(Edge::Top) {
            Some(crate::geometry::EdgeCondition::Fixed(p)) => {
                assert!((p.value(0.0) - 273.15).abs() < 1e-9);
                assert!((p.value(0.1) - 373.15).abs() < 1e-9);
            }
            other => panic!("top should be fixed, got {other:?}"),
        }
        assert_eq!(case.files.inputs().len(), 3); // plate, sensors, top.csv (no readings)
    }

    #[test]
    fn readings_align_with_sensors() {
        let d = case_dir(false);
        let case = load_case(&CaseFiles::in_dir(d.path())).unwrap();
        write(d.path(), "readings.csv", "sensor,temperature\nC,50\nA,32\n");
        let r = load_readings(&d.path().join("readings.csv"), &case).unwrap();
        assert_eq!(r.len(), 3);
        assert!((r[0].unwrap() - 273.15).abs() < 1e-9);
        assert_eq!(r[1], None);
        assert!((r[2].unwrap() - 283.15).abs() < 1e-9);
        for (text, line, gist) in [
            ("sensor,temperature\nA,40\nZ,50\n", 3, "not in"),
            ("sensor,temperature\nA,40\nA,50\n", 3, "second reading"),
            ("sensor,temperature\nA,-500\n", 2, "below absolute zero"),
            ("sensor,temperature\nA,\n", 2, "empty cell"),
        ] {
            write(d.path(), "readings.csv", text);
            let e = load_readings(&d.path().join("readings.csv"), &case).unwrap_err();
            match &e {
                Error::Invalid { location, message } => {
                    assert_eq!(location.line, Some(line), "{e}");
                    assert!(message.contains(gist), "{e}");
                }
                other => panic!("{other:?}"),
            }
        }
    }

    #[test]
    fn truth_profiles() {
        let d = case_dir(false);
        let case = load_case(&CaseFiles::in_dir(d.path())).unwrap();
        write(
            d.path(),
            "truth.csv",
            "position,temperature\n0,100\n50,150\n100,100\n",
        );
        let t = read_truth_profiles(&d.path().join("truth.csv"), &case).unwrap();
        assert_eq!(t.len(), 1);
        assert_eq!(t[0].0, Edge::Bottom);
        assert!(case.plate.with_unknowns_fixed(&t).is_ok());

        let d = case_dir(true);
        let case = load_case(&CaseFiles::in_dir(d.path())).unwrap();
        write(
            d.path(),
            "truth.csv",
            "position,temperature\n0,100\n50,150\n100,100\n",
        );
        let e = read_truth_profiles(&d.path().join("truth.csv"), &case).unwrap_err();
        assert!(e.to_string().contains("`edge` column"), "{e}");
        write(
            d.path(),
            "truth2.csv",
            "edge,position,temperature\nbottom,0,100\nbottom,100,90\nleft,0,100\nleft,50,80\n",
        );
        let t = read_truth_profiles(&d.path().join("truth2.csv"), &case).unwrap();
        assert_eq!(t.len(), 2);
        write(
            d.path(),
            "truth3.csv",
            "edge,position,temperature\nbottom,0,100\nbottom,100,90\ntop,0,100\ntop,100,80\n",
        );
        let e = read_truth_profiles(&d.path().join("truth3.csv"), &case).unwrap_err();
        assert!(e.to_string().contains("line 4"), "{e}");
    }
}
