//! Shared pieces of the fuzz targets: a scratch case directory per process (in `/dev/shm`
//! when there is one, so the files never touch a disk), a valid base case, and the checks
//! every target makes on what the library returns: an error of the input kind (exit status
//! 2) or a result whose numbers are finite. A panic, an abort or a non-finite number is a
//! finding.

use std::path::{Path, PathBuf};

/// A valid invented case: a 150 × 60 mm plate, bottom edge hidden, top edge fixed (line
/// `TOP_LINE` is replaced by the profile target), four sensors.
pub const PLATE: &str = "[plate]\nwidth = 150.0\nheight = 60.0\nlength_unit = \"mm\"\n\
temperature_unit = \"C\"\nconductivity = 205.0\n\n[edges.bottom]\ncondition = \"unknown\"\n\n\
[edges.top]\ncondition = \"fixed\"\ntemperature = 25.0\n\n[edges.left]\ncondition = \"insulated\"\n\n\
[edges.right]\ncondition = \"insulated\"\n\n[fit]\nterms = 12\n\n[noise]\nsigma = 0.5\n\n\
[uncertainty]\nreplicates = 16\n";
/// The line of `PLATE` that fixes the top edge.
pub const TOP_LINE: &str = "temperature = 25.0";
/// Sensors of the base case.
pub const SENSORS: &str = "sensor,x,y\nTC01,20,8\nTC02,60,10\nTC03,100,9\nTC04,130,12\n";
/// Readings of the base case.
pub const READINGS: &str = "sensor,temperature\nTC01,61.3\nTC02,70.2\nTC03,66.0\nTC04,58.1\n";

/// This process's scratch directory (created once).
pub fn scratch() -> PathBuf {
    let base = if Path::new("/dev/shm").is_dir() {
        PathBuf::from("/dev/shm")
    } else {
        std::env::temp_dir()
    };
    let dir = base.join(format!("edgetherm-fuzz-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("scratch directory");
    dir
}

/// Write the case files (`None` leaves the base file) into the scratch directory.
pub fn write_case(dir: &Path, plate: &[u8], sensors: &[u8], readings: &[u8]) {
    std::fs::write(dir.join("plate.toml"), plate).unwrap();
    std::fs::write(dir.join("sensors.csv"), sensors).unwrap();
    std::fs::write(dir.join("readings.csv"), readings).unwrap();
}

/// An error must be an input error (exit status 2): an internal error from a parser is a
/// finding. The message must not be empty.
pub fn input_error(e: &edgetherm::Error) {
    let msg = e.to_string();
    assert!(!msg.is_empty());
    assert_eq!(e.exit_code(), 2, "not an input error: {msg}");
}

/// Load the case in `dir` and, when it loads, its readings and the `check` description; every
/// number a loaded case holds must be finite.
pub fn load_and_check(dir: &Path) -> Option<(edgetherm::case::Case, Vec<Option<f64>>)> {
    use edgetherm::case::CaseFiles;
    let case = match edgetherm::io::load_case(&CaseFiles::in_dir(dir)) {
        Ok(c) => c,
        Err(e) => {
            input_error(&e);
            return None;
        }
    };
    for s in &case.sensors {
        assert!(s.position.x.is_finite() && s.position.y.is_finite());
        assert!(s.sigma_k.is_none_or(|v| v.is_finite() && v > 0.0));
    }
    let readings = match edgetherm::io::load_readings(&case.files.readings, &case) {
        Ok(r) => r,
        Err(e) => {
            input_error(&e);
            return None;
        }
    };
    for r in readings.iter().flatten() {
        assert!(r.is_finite() && (0.0..=5000.0).contains(r), "reading {r}");
    }
    // check's description of the case (builds the forward model)
    match edgetherm::report::check::CheckReport::new(&case, Some(&readings)) {
        Ok(report) => {
            let text = report.text();
            assert!(!text.contains("NaN"), "{text}");
        }
        Err(e) => input_error(&e),
    }
    Some((case, readings))
}
