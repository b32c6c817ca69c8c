//! A case: the validated, typed, ready-to-run form of a case directory.
//!
//! [`load_case`] reads `plate.toml` and `sensors.csv` (and any fixed-edge profile files
//! `plate.toml` names), checks everything once and converts to metres and kelvin. Nothing
//! downstream re-checks what is here. Readings are loaded separately with [`load_readings`],
//! because several commands take a case without them.

use crate::error::Result;
use crate::geometry::{Edge, EdgeProfile, Plate, Point};
use crate::io::{csv_files, plate_file};
use crate::noise::NoiseSpec;
use crate::units::Units;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// A thermocouple of the case.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Sensor {
    /// The id used in `sensors.csv` and `readings.csv`.
    pub id: String,
    /// Position, metres.
    pub position: Point,
    /// The sensor's own standard uncertainty, kelvin (the `sigma` column), if given.
    pub sigma_k: Option<f64>,
    /// The sensor's own position uncertainty, metres (the `position_sigma` column), if given.
    pub position_sigma_m: Option<f64>,
    /// 1-based line of the sensor in `sensors.csv`, for messages.
    pub line: usize,
}

/// The penalised derivative of the edge profile (`docs/case-files.md`, plate.toml `smoothing`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Smoothing {
    /// Penalise the profile's size (order 0).
    Size,
    /// Penalise its slope (order 1).
    Slope,
    /// Penalise its curvature (order 2).
    Curvature,
    /// Choose curvature or slope by the marginal likelihood of the readings (the default;
    /// see `docs/calibration.md`).
    Auto,
}

impl Smoothing {
    /// The order of the penalised derivative: 0, 1 or 2; `None` for [`Smoothing::Auto`].
    pub fn order(self) -> Option<usize> {
        match self {
            Smoothing::Size => Some(0),
            Smoothing::Slope => Some(1),
            Smoothing::Curvature => Some(2),
            Smoothing::Auto => None,
        }
    }

    /// The smoothing of a given order (0, 1, 2).
    pub fn of_order(order: usize) -> Option<Self> {
        match order {
            0 => Some(Smoothing::Size),
            1 => Some(Smoothing::Slope),
            2 => Some(Smoothing::Curvature),
            _ => None,
        }
    }

    /// The word used in plate files.
    pub fn name(self) -> &'static str {
        match self {
            Smoothing::Size => "size",
            Smoothing::Slope => "slope",
            Smoothing::Curvature => "curvature",
            Smoothing::Auto => "auto",
        }
    }
}

/// How the regularisation strength is chosen (`docs/case-files.md`, plate.toml `strength`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub enum StrengthRule {
    /// Not stated: the inversion applies the project's default rule (`docs/calibration.md`).
    Default,
    /// Generalised cross-validation.
    Gcv,
    /// The discrepancy principle (needs a stated sigma).
    Discrepancy,
    /// Marginal likelihood.
    Evidence,
    /// The L-curve corner.
    LCurve,
    /// A fixed strength.
    Fixed(f64),
}

impl StrengthRule {
    /// The word used in plate files (`default` when none was given, `fixed` for a number).
    pub fn name(self) -> &'static str {
        match self {
            StrengthRule::Default => "default",
            StrengthRule::Gcv => "gcv",
            StrengthRule::Discrepancy => "discrepancy",
            StrengthRule::Evidence => "evidence",
            StrengthRule::LCurve => "lcurve",
            StrengthRule::Fixed(_) => "fixed",
        }
    }
}

/// The `[fit]` settings.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FitSettings {
    /// Series terms per unknown edge.
    pub terms: usize,
    /// The penalised derivative.
    pub smoothing: Smoothing,
    /// How the strength is chosen.
    pub strength: StrengthRule,
}

/// The `[uncertainty]` settings.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct UncertaintySettings {
    /// Bootstrap replicates (at least 1).
    pub replicates: usize,
    /// Confidence level of the intervals, in (0, 1).
    pub confidence: f64,
    /// Random seed.
    pub seed: u64,
    /// Standard uncertainty of every sensor position, metres, if stated.
    pub position_sigma_m: Option<f64>,
}

/// The `[bounds]` settings: what strict bounds may assume about the hidden edges.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize)]
pub struct BoundsSettings {
    /// Steepest credible change of a hidden edge's temperature along it, K/m.
    pub max_gradient_k_per_m: Option<f64>,
    /// Lowest temperature a hidden edge can have, kelvin.
    pub min_temperature_k: Option<f64>,
    /// Highest temperature a hidden edge can have, kelvin.
    pub max_temperature_k: Option<f64>,
}

/// The files of a case.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct CaseFiles {
    /// The case directory.
    pub dir: PathBuf,
    /// `plate.toml` (or the `--plate` override).
    pub plate: PathBuf,
    /// `sensors.csv` (or the `--sensors` override).
    pub sensors: PathBuf,
    /// `readings.csv` (or the `--readings` override); it need not exist for every command.
    pub readings: PathBuf,
    /// Fixed-edge profile files named in `plate.toml`, filled in by [`load_case`].
    pub profiles: Vec<(Edge, PathBuf)>,
}

impl CaseFiles {
    /// The default files of a case directory: `plate.toml`, `sensors.csv`, `readings.csv`.
    pub fn in_dir(dir: impl Into<PathBuf>) -> Self {
        let dir = dir.into();
        CaseFiles {
            plate: dir.join("plate.toml"),
            sensors: dir.join("sensors.csv"),
            readings: dir.join("readings.csv"),
            profiles: Vec::new(),
            dir,
        }
    }

    /// Replace any of the three main files (the `--plate`, `--sensors`, `--readings` flags).
    pub fn with_overrides(
        mut self,
        plate: Option<PathBuf>,
        sensors: Option<PathBuf>,
        readings: Option<PathBuf>,
    ) -> Self {
        if let Some(p) = plate {
            self.plate = p;
        }
        if let Some(s) = sensors {
            self.sensors = s;
        }
        if let Some(r) = readings {
            self.readings = r;
        }
        self
    }

    /// Every input file that exists: the outputs must never replace one of these.
    pub fn inputs(&self) -> Vec<&Path> {
        let mut v: Vec<&Path> = vec![&self.plate, &self.sensors, &self.readings];
        v.extend(self.profiles.iter().map(|(_, p)| p.as_path()));
        v.retain(|p| p.exists());
        v
    }
}

/// A validated case, in SI units.
#[derive(Debug, Clone)]
pub struct Case {
    /// The units the case's files are written in (for reading and for reporting).
    pub units: Units,
    /// The plate and its edge conditions.
    pub plate: Plate,
    /// The sensors, in file order.
    pub sensors: Vec<Sensor>,
    /// The `[fit]` settings.
    pub fit: FitSettings,
    /// The stated reading uncertainty.
    pub noise: NoiseSpec,
    /// The `[uncertainty]` settings.
    pub uncertainty: UncertaintySettings,
    /// The `[design]` settings (used by `edgetherm design` only).
    pub design: DesignSettings,
    /// The `[bounds]` settings (strict bounds under a gradient limit).
    pub bounds: BoundsSettings,
    /// Where the case came from.
    pub files: CaseFiles,
}

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
    let sensors = if with_sensors {
        csv_files::read_sensors(&files.sensors, &pf.units, pf.plate.shape())?
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
        files,
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

/// An axis-aligned rectangle of the plate, metres (`[design] allowed` and `keep_out`).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Region {
    /// Smallest x, metres.
    pub x_min: f64,
    /// Largest x, metres.
    pub x_max: f64,
    /// Smallest y, metres.
    pub y_min: f64,
    /// Largest y, metres.
    pub y_max: f64,
}

impl Region {
    /// Whether `p` lies in the closed rectangle.
    pub fn contains(&self, p: Point) -> bool {
        p.x >= self.x_min && p.x <= self.x_max && p.y >= self.y_min && p.y <= self.y_max
    }
}

/// Where the candidate positions of a design come from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub enum CandidateSource {
    /// A regular grid with this spacing, metres; `None` picks one (see `crate::design`).
    Grid(Option<f64>),
    /// A CSV file of positions (`[design] candidates`), resolved against the plate file's
    /// directory.
    File(PathBuf),
}

/// The `[design]` settings (`docs/design.md`), validated and in SI units.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DesignSettings {
    /// Whether `plate.toml` has a `[design]` section at all.
    pub present: bool,
    /// Where sensors may go; empty means the whole plate.
    pub allowed: Vec<Region>,
    /// Where they may not.
    pub keep_out: Vec<Region>,
    /// Minimum distance from every edge of the plate, metres.
    pub edge_distance_m: f64,
    /// Minimum distance between two sensors, metres.
    pub sensor_spacing_m: f64,
    /// The candidate positions.
    pub candidates: CandidateSource,
    /// Expected standard uncertainty of a reading, kelvin; `None` falls back to `[noise]
    /// sigma`.
    pub noise_k: Option<f64>,
    /// Prior standard deviation of the hidden profile about its level, kelvin (averaged along
    /// the edge); `None` when not given (the design then refuses to run).
    pub variation_k: Option<f64>,
    /// The smoothing order of the prior; `None` uses `[fit] smoothing` when it names an
    /// order, else curvature.
    pub smoothing: Option<Smoothing>,
    /// The criterion word (`information`, `edge`, `worst`), checked; `None` for the default.
    pub criterion: Option<String>,
    /// The 1-based line of each `[design]` key given, for messages (`design.allowed`, ...).
    pub lines: Vec<(String, usize)>,
}

impl Default for DesignSettings {
    fn default() -> Self {
        DesignSettings {
            present: false,
            allowed: Vec::new(),
            keep_out: Vec::new(),
            edge_distance_m: 0.0,
            sensor_spacing_m: 0.0,
            candidates: CandidateSource::Grid(None),
            noise_k: None,
            variation_k: None,
            smoothing: None,
            criterion: None,
            lines: Vec::new(),
        }
    }
}

impl DesignSettings {
    /// The line of a `[design]` key (`design.variation`), when the file gave it.
    pub fn line_of(&self, field: &str) -> Option<usize> {
        self.lines.iter().find(|(f, _)| f == field).map(|(_, l)| *l)
    }
}

/// Read a readings file (`sensor,temperature`, one reading per row, case temperature unit)
/// into kelvin, aligned with `case.sensors`; a sensor with no reading gets `None`.
pub fn load_readings(path: &Path, case: &Case) -> Result<Vec<Option<f64>>> {
    csv_files::read_readings(path, case)
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
