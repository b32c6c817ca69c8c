//! The validated case: what a run takes, in SI units.
//!
//! A [`Case`] is the typed, checked form of a case directory: the plate and its edge
//! conditions, the sensors, and the settings of the fit, the uncertainty, the design and the
//! strict bounds. `crate::io` builds one from the files (`crate::io::load_case`) and checks
//! everything once; nothing downstream re-checks what is here. The computation
//! (`forward`, `inverse`, `uncertainty`, `estimate`, `design`, `track`) takes a `Case` and
//! never reads a file.

use crate::geometry::{Edge, Plate, Point, Shape};
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
    /// A calibration offset, kelvin (the `offset` column): subtracted from every reading of
    /// the sensor (after any voltage conversion).
    pub offset_k: Option<f64>,
    /// 1-based line of the sensor in `sensors.csv`, for messages.
    pub line: usize,
}

/// What the readings hold (`[thermocouple] signal`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Signal {
    /// Temperatures in the case's unit (the default).
    Temperature,
    /// Thermoelectric voltages in millivolts, converted with the type's ITS-90 reference
    /// function ([`crate::its90`]).
    EmfMv,
}

/// Where the reference (cold) junction temperature of voltage readings comes from.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum ColdJunction {
    /// One temperature for every reading, kelvin.
    Fixed(f64),
    /// A `cold_junction` column of the readings (case temperature unit), row by row.
    Column,
}

/// The `[thermocouple]` section: the type of the case's thermocouples and what the readings
/// hold.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ThermocoupleSettings {
    /// The type (its ITS-90 reference function; also the type of `[noise] tolerance_class`).
    pub tc_type: crate::its90::Its90Type,
    /// Temperatures or voltages.
    pub signal: Signal,
    /// The cold junction, for voltage readings (`None` for temperatures).
    pub cold_junction: Option<ColdJunction>,
}

impl ThermocoupleSettings {
    /// The voltage conversion, when the readings are voltages.
    pub fn conversion(&self) -> Option<ReadingConversion> {
        match (self.signal, self.cold_junction) {
            (Signal::EmfMv, Some(cold_junction)) => Some(ReadingConversion {
                tc_type: self.tc_type,
                cold_junction,
            }),
            _ => None,
        }
    }
}

/// How voltage readings were converted to temperatures, for the outputs.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ReadingConversion {
    /// The thermocouple type.
    pub tc_type: crate::its90::Its90Type,
    /// The cold junction used.
    pub cold_junction: ColdJunction,
}

impl ReadingConversion {
    /// One sentence for people, temperatures in `units`: "Readings converted from
    /// thermocouple voltages (mV): type K, NIST ITS-90 reference function, cold junction
    /// 23.4 °C."
    pub fn describe(&self, units: &Units) -> String {
        let cj = match self.cold_junction {
            ColdJunction::Fixed(k) => {
                let v = units.temp_from_k(k);
                let v = format!("{v:.6}");
                let v = v.trim_end_matches('0').trim_end_matches('.');
                format!("cold junction {v} {}", degree_symbol(units))
            }
            ColdJunction::Column => {
                "cold junction row by row from the `cold_junction` column".to_string()
            }
        };
        format!(
            "Readings converted from thermocouple voltages (mV) to {}: type {}, NIST ITS-90 \
             reference function (NIST Monograph 175) solved to 1e-6 K, {cj}.",
            degree_symbol(units),
            self.tc_type
        )
    }
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

    /// The smoothing of a penalty order as reported: `size`, `slope` or `curvature` (an
    /// order beyond 2 does not occur; it reads as curvature).
    pub fn of_penalty_order(order: usize) -> Self {
        Self::of_order(order).unwrap_or(Smoothing::Curvature)
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

impl std::fmt::Display for Smoothing {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
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
    /// Fixed-edge profile files named in `plate.toml`, filled in by [`crate::io::load_case`].
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
    /// The `[thermocouple]` section, if given.
    pub thermocouple: Option<ThermocoupleSettings>,
    /// Where the case came from.
    pub files: CaseFiles,
    /// How each table file read so far was written (separator, decimal mark, ...), in the
    /// order read: `sensors.csv` by [`crate::io::load_case`], then what a command adds
    /// (readings, a logger file). Echoed in the outputs so that a misread file is noticed.
    pub read_as: Vec<ReadAs>,
}

/// How one input table was read: its CSV dialect, detected or declared
/// (`docs/case-files.md`, CSV dialects).
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct ReadAs {
    /// The file's name (without its directory).
    pub file: String,
    /// `comma`, `semicolon` or `tab`.
    pub separator: String,
    /// `point` or `comma`.
    pub decimal_mark: String,
    /// Whether the file starts with a UTF-8 byte-order mark.
    pub byte_order_mark: bool,
    /// `LF` or `CRLF`.
    pub line_ends: String,
    /// Lines skipped before the header.
    pub lines_before_header: usize,
    /// The units row under the header, if there was one.
    pub units_row: Option<Vec<String>>,
    /// The time format of a logger file.
    pub time_format: Option<String>,
    /// What the command line declared rather than detection found.
    pub declared: Vec<String>,
    /// All of it in words ("semicolon-separated, decimal comma, times DD.MM.YYYY hh:mm:ss").
    pub description: String,
}
/// The temperature unit as people write it: °C, K, °F.
pub(crate) fn degree_symbol(units: &Units) -> &'static str {
    match units.temperature {
        crate::units::TemperatureUnit::Celsius => "°C",
        crate::units::TemperatureUnit::Kelvin => "K",
        crate::units::TemperatureUnit::Fahrenheit => "°F",
    }
}

impl Case {
    /// How the readings are converted from voltages, if they are voltages.
    pub fn conversion(&self) -> Option<ReadingConversion> {
        self.thermocouple.and_then(|t| t.conversion())
    }
}

/// A ring sector of a round part, `r_min ≤ r ≤ r_max` and the angle from `start` counter-
/// clockwise to `end` (radians in `[0, 2π)`; `start > end` wraps through 0).
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Sector {
    /// Smallest radius, metres.
    pub r_min: f64,
    /// Largest radius, metres.
    pub r_max: f64,
    /// First angle, radians.
    pub start: f64,
    /// Last angle, radians.
    pub end: f64,
}

impl Sector {
    /// Whether `p` lies in the closed sector, with `slack` metres of tolerance on the radii
    /// and `slack / r` radians on the angles.
    pub fn contains(&self, p: Point, slack: f64) -> bool {
        let r = p.x.hypot(p.y);
        if r < self.r_min - slack || r > self.r_max + slack {
            return false;
        }
        let a = crate::geometry::angle_of(p);
        let da = if r > 0.0 {
            slack / r
        } else {
            std::f64::consts::TAU
        };
        let tau = std::f64::consts::TAU;
        // the angle measured from `start`, counter-clockwise, in [0, 2π)
        let from_start = (a - self.start).rem_euclid(tau);
        let span = (self.end - self.start).rem_euclid(tau);
        from_start <= span + da || from_start >= tau - da
    }
}

/// An axis-aligned rectangle of the plate, metres (`[design] allowed` and `keep_out`), or on
/// a round part a ring sector (its `x`/`y` bounds are then the sector's bounding square).
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
    /// A ring sector instead of the rectangle (round parts).
    pub sector: Option<Sector>,
}

impl Region {
    /// Whether `p` lies in the closed rectangle (or sector).
    pub fn contains(&self, p: Point) -> bool {
        self.contains_within(p, 0.0)
    }

    /// Whether `p` lies in the region grown by `slack` metres on every side.
    pub fn contains_within(&self, p: Point, slack: f64) -> bool {
        match &self.sector {
            Some(s) => s.contains(p, slack),
            None => {
                p.x >= self.x_min - slack
                    && p.x <= self.x_max + slack
                    && p.y >= self.y_min - slack
                    && p.y <= self.y_max + slack
            }
        }
    }

    /// The whole of a plate's bounding box: `[0, width] × [0, height]` (a strip: one width
    /// up), or the square round a round part.
    pub fn whole(shape: &Shape) -> Region {
        if shape.is_round() {
            let r = 0.5 * shape.width();
            Region {
                x_min: -r,
                x_max: r,
                y_min: -r,
                y_max: r,
                sector: None,
            }
        } else {
            Region {
                x_min: 0.0,
                x_max: shape.width(),
                y_min: 0.0,
                y_max: shape.height().unwrap_or(shape.width()),
                sector: None,
            }
        }
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

/// The design criteria (`docs/design.md`).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Criterion {
    /// D-optimal: the most information about all the coefficients.
    Information,
    /// A-optimal on the edges: the smallest mean posterior variance along them (default).
    Edge,
    /// The smallest largest posterior standard deviation along the edges.
    Worst,
}

impl Criterion {
    /// Parse the word used in files and flags.
    pub fn parse(s: &str) -> Option<Criterion> {
        match s.trim() {
            "information" => Some(Criterion::Information),
            "edge" => Some(Criterion::Edge),
            "worst" => Some(Criterion::Worst),
            _ => None,
        }
    }

    /// The word used in files and flags.
    pub fn name(self) -> &'static str {
        match self {
            Criterion::Information => "information",
            Criterion::Edge => "edge",
            Criterion::Worst => "worst",
        }
    }

    /// What it measures, for people.
    pub fn describe(self) -> &'static str {
        match self {
            Criterion::Information => "D-optimal: most information about the hidden edges",
            Criterion::Edge => "A-optimal: smallest mean posterior variance along the hidden edges",
            Criterion::Worst => {
                "smallest worst-case posterior standard deviation along the hidden edges"
            }
        }
    }
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
    /// The criterion; `None` for the default.
    pub criterion: Option<Criterion>,
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

/// Default grid size (`docs/case-files.md`, outputs).
pub const DEFAULT_GRID: (usize, usize) = (41, 41);

/// Largest grid accepted along one direction: beyond this a CSV of the field is no longer
/// something a person or a plotting script can use.
pub const MAX_GRID: usize = 2001;

/// Grid coordinates in metres: `nx` points across the width and `ny` up the height, edges
/// included. A long strip has no height: its grid runs from the bottom to one width up,
/// where the field has relaxed to within `e^{-π}` (4 %) of its far value.
///
/// A round part has a polar grid: the first coordinate is the angle (radians, `nx` points
/// evenly round the circle from 0, the full turn left out since it is 0 again), the second
/// the radius (`ny` points from the inner radius, or the centre of a disk, to the outer
/// radius, both included); [`grid_point`] gives the point of a pair.
pub fn grid_coordinates(shape: &Shape, nx: usize, ny: usize) -> (Vec<f64>, Vec<f64>) {
    match *shape {
        Shape::Disk { radius_m } => return polar_grid(0.0, radius_m, nx, ny),
        Shape::Annulus { inner_m, outer_m } => return polar_grid(inner_m, outer_m, nx, ny),
        _ => {}
    }
    let w = shape.width();
    let h = shape.height().unwrap_or(w);
    let lin = |len: f64, n: usize| (0..n).map(|i| len * i as f64 / (n - 1) as f64).collect();
    (lin(w, nx), lin(h, ny))
}

fn polar_grid(r0: f64, r1: f64, na: usize, nr: usize) -> (Vec<f64>, Vec<f64>) {
    let angles = (0..na)
        .map(|i| std::f64::consts::TAU * i as f64 / na as f64)
        .collect();
    let radii = (0..nr)
        .map(|j| r0 + (r1 - r0) * j as f64 / (nr - 1) as f64)
        .collect();
    (angles, radii)
}

/// The point of grid coordinates `(gx, gy)` of [`grid_coordinates`]: `(x, y)` itself, or
/// `(r cos θ, r sin θ)` for the polar grid of a round part.
pub fn grid_point(shape: &Shape, gx: f64, gy: f64) -> crate::geometry::Point {
    if shape.is_round() {
        crate::geometry::Point::new(gy * gx.cos(), gy * gx.sin())
    } else {
        crate::geometry::Point::new(gx, gy)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn strip_grid_is_one_width_deep() {
        let (xs, ys) = grid_coordinates(&Shape::Strip { width_m: 0.04 }, 5, 3);
        assert_eq!(xs.len(), 5);
        assert_eq!(ys, vec![0.0, 0.02, 0.04]);
    }
}
