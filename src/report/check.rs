//! The outputs of `edgetherm check`: a validated case described in its own units, as text
//! for a person or as JSON ([`CheckReport`] serialises with `serde`): the plate outline,
//! each edge and its condition, the unknown edges, each sensor's position and depth below
//! each unknown edge, the readings count, the settings, and the forward model the case
//! will use with how finely the sensors can see each unknown edge. Nothing is fitted.

use super::format::num;
use crate::Result;
use crate::case::{Case, StrengthRule};
use crate::forward::{ForwardModel, ModelDescription, SeriesOptions};
use crate::geometry::{Edge, EdgeCondition, Shape};
use crate::noise::NoiseSpec;
use serde::Serialize;
use std::fmt::Write as _;
use std::path::PathBuf;

/// What `check` says about a valid case, in the case's units. Serialises to the `--json`
/// output; [`CheckReport::text`] is the text a person reads.
#[derive(Debug, Serialize)]
pub struct CheckReport {
    valid: bool,
    files: FilesReport,
    units: UnitsReport,
    plate: PlateReport,
    edges: Vec<EdgeReport>,
    unknown_edges: Vec<Edge>,
    sensors: Vec<SensorReport>,
    readings: Option<ReadingsReport>,
    fit: FitReport,
    noise: NoiseReport,
    /// How voltage readings are converted to temperatures, when they are voltages.
    #[serde(skip_serializing_if = "Option::is_none")]
    readings_conversion: Option<String>,
    uncertainty: UncertaintyReport,
    /// How each table was read (separator, decimal mark, ...), so that a misread file is
    /// noticed.
    read_as: Vec<crate::case::ReadAs>,
    /// The forward model: filled in by [`forward_model`].
    #[serde(skip_serializing_if = "Option::is_none")]
    model: Option<ForwardModelReport>,
}

#[derive(Debug, Serialize)]
struct FilesReport {
    plate: PathBuf,
    sensors: PathBuf,
    readings: Option<PathBuf>,
}

#[derive(Debug, Serialize)]
struct UnitsReport {
    length: &'static str,
    temperature: &'static str,
}

#[derive(Debug, Serialize)]
struct PlateReport {
    /// `rectangle`, `strip`, `disk` or `annulus`.
    shape: &'static str,
    /// The outer diameter of a round part.
    width: f64,
    /// `None` for a long strip; the outer diameter of a round part.
    height: Option<f64>,
    /// A disk's radius, an annulus's outer radius.
    #[serde(skip_serializing_if = "Option::is_none")]
    radius: Option<f64>,
    /// An annulus's inner radius.
    #[serde(skip_serializing_if = "Option::is_none")]
    inner_radius: Option<f64>,
    /// W/(m K).
    conductivity: Option<f64>,
}

#[derive(Debug, Serialize)]
struct EdgeReport {
    edge: Edge,
    /// `fixed`, `insulated`, `unknown`; `absent` for the top of a strip.
    condition: &'static str,
    /// `None` for an infinite side of a strip (and the absent top).
    length: Option<f64>,
    /// A fixed edge's constant temperature.
    temperature: Option<f64>,
    /// A fixed edge's profile file.
    profile: Option<ProfileReport>,
    /// A convective edge's data.
    #[serde(skip_serializing_if = "Option::is_none")]
    convection: Option<ConvectionReport>,
}

#[derive(Debug, Serialize)]
struct ConvectionReport {
    /// `h`, W/(m² K); `None` when it is to be estimated.
    h: Option<f64>,
    /// The search range of an unknown `h`, W/(m² K).
    h_range: Option<[f64; 2]>,
    /// The fluid temperature, in the case's unit.
    ambient: f64,
    /// The Biot number `h L / κ` over the distance to the opposite edge (`None` for a
    /// strip's bottom or an unknown `h`).
    biot: Option<f64>,
}

#[derive(Debug, Serialize)]
struct ProfileReport {
    file: Option<PathBuf>,
    points: usize,
    min_temperature: f64,
    max_temperature: f64,
}

#[derive(Debug, Serialize)]
struct SensorReport {
    sensor: String,
    x: f64,
    y: f64,
    sigma: Option<f64>,
    position_sigma: Option<f64>,
    /// Distance below each unknown edge.
    depths: Vec<DepthReport>,
}

#[derive(Debug, Serialize)]
struct DepthReport {
    edge: Edge,
    depth: f64,
    /// Depth as a fraction of that edge's length.
    fraction_of_edge: f64,
}

#[derive(Debug, Serialize)]
struct ReadingsReport {
    file: PathBuf,
    count: usize,
    sensors_without_reading: Vec<String>,
}

#[derive(Debug, Serialize)]
struct FitReport {
    terms: usize,
    smoothing: &'static str,
    smoothing_order: Option<usize>,
    strength: &'static str,
    strength_value: Option<f64>,
}

#[derive(Debug, Serialize)]
struct NoiseReport {
    /// `sigma`, `sigma-emf`, `tolerance` or `unstated`.
    source: &'static str,
    /// The stated sigma: in the case's temperature unit, or in mV for `sigma-emf`.
    sigma: Option<f64>,
    tolerance_class: Option<&'static str>,
    thermocouple_type: Option<&'static str>,
    sensors_with_own_sigma: usize,
}

#[derive(Debug, Serialize)]
struct UncertaintyReport {
    replicates: usize,
    confidence: f64,
    seed: u64,
    position_sigma: Option<f64>,
}

/// What the forward model will be for the case.
#[derive(Debug, Serialize)]
struct ForwardModelReport {
    #[serde(flatten)]
    description: ModelDescription,
    /// Per unknown edge: the shortest feature the shallowest sensor still sees.
    reach: Vec<ReachReport>,
    /// Lines for the text output.
    #[serde(skip)]
    lines: Vec<String>,
}

/// How finely the sensors can see an unknown edge.
#[derive(Debug, Serialize)]
struct ReachReport {
    edge: Edge,
    /// Depth of the sensor nearest the edge, case length unit.
    shallowest_depth: f64,
    /// Wavelength along the edge damped 100-fold at that depth, case length unit.
    wavelength_damped_100x: f64,
    /// Finest feature the series can represent (half the shortest wavelength), case length
    /// unit.
    series_resolution: f64,
}

/// The forward model `check` describes: the basis functions on each edge (sines, cosines
/// with the constant mode, quarter-wave), the decay across the plate, the term counts, and
/// how deep the sensors sit in terms of what they can see.
fn forward_model(case: &Case) -> Result<ForwardModelReport> {
    let options = SeriesOptions {
        unknown_terms: case.fit.terms,
        ..SeriesOptions::default()
    };
    // an unknown h is described at the geometric middle of its search range
    let mut plate = case.plate.clone();
    for (edge, lo, hi) in case.plate.unknown_heat_transfer() {
        plate = plate.with_heat_transfer(edge, (lo * hi).sqrt())?;
    }
    let model = ForwardModel::new(&plate, options)?;
    let description = model.describe();
    let u = &case.units;
    let len = |m: f64| u.length_from_m(m);
    let mut lines = Vec::new();
    for e in &description.edges {
        let mut line = format!("{:<7}{:<11}", e.edge.name(), e.condition);
        match (e.basis, e.decay) {
            (Some(b), Some(d)) => {
                let plural = if e.terms == 1 { "" } else { "s" };
                let _ = write!(line, "{} term{plural} of {b}; decay: {d}", e.terms);
                if e.terms == 0 {
                    line = format!(
                        "{:<7}{:<11}carried by the corner base (no series needed)",
                        e.edge.name(),
                        e.condition
                    );
                }
            }
            _ if e.condition == "insulated" => line.push_str("no series (zero flux)"),
            _ => line.push_str("constant, carried by the corner base"),
        }
        lines.push(line);
    }
    if !description.corner_parameters.is_empty() {
        lines.push(format!(
            "corner temperatures estimated where two unknown edges meet: {}",
            description.corner_parameters.join(", ")
        ));
    }
    lines.push(format!("unknowns: {}", description.unknowns));
    // Mode k is damped by about exp(-k d) at depth d (`docs/method.md` §2, resolution length): 100-fold when
    // k = ln(100)/d, i.e. a wavelength of 2πd/ln(100).
    let shape = case.plate.shape();
    let mut reach = Vec::new();
    for edge in case.plate.unknown_edges() {
        let Some(d) = case
            .sensors
            .iter()
            .map(|s| shape.depth_from(edge, s.position))
            .min_by(f64::total_cmp)
        else {
            continue;
        };
        let edge_len = shape.edge_length(edge).unwrap_or(f64::INFINITY);
        let r = ReachReport {
            edge,
            shallowest_depth: len(d),
            wavelength_damped_100x: len(2.0 * std::f64::consts::PI * d / 100f64.ln()),
            series_resolution: len(edge_len / case.fit.terms as f64),
        };
        lines.push(format!(
            "{edge}: the shallowest sensor is {} {lu} deep; features along the edge shorter \
             than about {} {lu} reach it damped more than 100-fold; the series resolves down \
             to {} {lu}",
            num(r.shallowest_depth),
            num(round3(r.wavelength_damped_100x)),
            num(round3(r.series_resolution)),
            lu = u.length.symbol(),
        ));
        reach.push(r);
    }
    Ok(ForwardModelReport {
        description,
        reach,
        lines,
    })
}
// ==========================================================================================

impl CheckReport {
    /// Describe `case`, with the readings when there are any (one per sensor, `None` for a
    /// sensor without a reading). Fails only if the forward model cannot be built.
    pub fn new(case: &Case, readings: Option<&[Option<f64>]>) -> Result<Self> {
        let u = &case.units;
        let shape = case.plate.shape();
        let len = |m: f64| u.length_from_m(m);
        let unknown = case.plate.unknown_edges();
        // a rectangle or strip lists its four sides (a strip's missing top as absent)
        let edges = if shape.is_round() {
            shape.edges()
        } else {
            Edge::STRAIGHT.to_vec()
        }
        .into_iter()
        .map(|edge| edge_report(case, edge))
        .collect();
        let sensors = case
            .sensors
            .iter()
            .map(|s| SensorReport {
                sensor: s.id.clone(),
                x: len(s.position.x),
                y: len(s.position.y),
                sigma: s.sigma_k.map(|k| u.dtemp_from_k(k)),
                position_sigma: s.position_sigma_m.map(len),
                depths: unknown
                    .iter()
                    .map(|&edge| {
                        let d = shape.depth_from(edge, s.position);
                        let l = shape.edge_length(edge).unwrap_or(f64::INFINITY);
                        DepthReport {
                            edge,
                            depth: len(d),
                            fraction_of_edge: d / l,
                        }
                    })
                    .collect(),
            })
            .collect();
        let readings = readings.map(|r| ReadingsReport {
            file: case.files.readings.clone(),
            count: r.iter().flatten().count(),
            sensors_without_reading: case
                .sensors
                .iter()
                .zip(r)
                .filter(|(_, v)| v.is_none())
                .map(|(s, _)| s.id.clone())
                .collect(),
        });
        let (source, sigma, class, tc) = match case.noise {
            NoiseSpec::Sigma(k) => ("sigma", Some(u.dtemp_from_k(k)), None, None),
            NoiseSpec::Emf { sigma_mv, tc_type } => {
                ("sigma-emf", Some(sigma_mv), None, Some(tc_type.name()))
            }
            NoiseSpec::Tolerance { class, tc_type } => {
                ("tolerance", None, Some(class.name()), Some(tc_type.name()))
            }
            NoiseSpec::Unstated => ("unstated", None, None, None),
        };
        Ok(CheckReport {
            read_as: case.read_as.clone(),
            valid: true,
            files: FilesReport {
                plate: case.files.plate.clone(),
                sensors: case.files.sensors.clone(),
                readings: readings.as_ref().map(|r| r.file.clone()),
            },
            units: UnitsReport {
                length: u.length.symbol(),
                temperature: u.temperature.symbol(),
            },
            plate: PlateReport {
                shape: match shape {
                    Shape::Rectangle { .. } => "rectangle",
                    Shape::Strip { .. } => "strip",
                    Shape::Disk { .. } => "disk",
                    Shape::Annulus { .. } => "annulus",
                },
                width: len(shape.width()),
                height: shape.height().map(len),
                radius: shape.is_round().then(|| len(0.5 * shape.width())),
                inner_radius: shape.radius_of(Edge::Inner).map(len),
                conductivity: case.plate.conductivity(),
            },
            edges,
            unknown_edges: unknown,
            sensors,
            readings,
            fit: FitReport {
                terms: case.fit.terms,
                smoothing: case.fit.smoothing.name(),
                smoothing_order: case.fit.smoothing.order(),
                strength: case.fit.strength.name(),
                strength_value: match case.fit.strength {
                    StrengthRule::Fixed(v) => Some(v),
                    _ => None,
                },
            },
            noise: NoiseReport {
                source,
                sigma,
                tolerance_class: class,
                thermocouple_type: tc,
                sensors_with_own_sigma: case.sensors.iter().filter(|s| s.sigma_k.is_some()).count(),
            },
            readings_conversion: case.conversion().map(|c| c.describe(&case.units)),
            uncertainty: UncertaintyReport {
                replicates: case.uncertainty.replicates,
                confidence: case.uncertainty.confidence,
                seed: case.uncertainty.seed,
                position_sigma: case.uncertainty.position_sigma_m.map(len),
            },
            model: Some(forward_model(case)?),
        })
    }

    /// The text `check` prints: one section after another, each written by the step named
    /// after it.
    pub fn text(&self) -> String {
        let mut s = String::new();
        self.files_text(&mut s);
        self.plate_text(&mut s);
        self.edges_text(&mut s);
        self.sensors_text(&mut s);
        self.settings_text(&mut s);
        self.model_text(&mut s);
        s
    }

    /// The verdict and the files read (a readings file is optional for `check`).
    fn files_text(&self, s: &mut String) {
        let _ = writeln!(s, "The case is valid.");
        let _ = writeln!(s);
        let _ = writeln!(s, "Files");
        let _ = writeln!(s, "  plate     {}", self.files.plate.display());
        let _ = writeln!(s, "  sensors   {}", self.files.sensors.display());
        match &self.files.readings {
            Some(r) => {
                let _ = writeln!(s, "  readings  {}", r.display());
            }
            None => {
                let _ = writeln!(s, "  readings  none (estimate needs a readings.csv)");
            }
        }
        for how in &self.read_as {
            let _ = writeln!(s, "  read as   {}: {}", how.file, how.description);
        }
        let _ = writeln!(s);
    }

    /// The plate's outline, the units and the conductivity.
    fn plate_text(&self, s: &mut String) {
        let lu = self.units.length;
        let tu = self.units.temperature;
        let p = &self.plate;
        match (p.shape, p.radius, p.inner_radius) {
            ("disk", Some(r), _) => {
                let _ = writeln!(
                    s,
                    "Plate: disk of radius {} {lu}, origin at the centre; positions along the rim \
                     are angles in degrees, counter-clockwise from +x",
                    num(r)
                );
            }
            ("annulus", Some(b), Some(a)) => {
                let _ = writeln!(
                    s,
                    "Plate: annulus (pipe wall) from radius {} {lu} to {} {lu} ({} {lu} thick), \
                     origin at the centre; positions along the circles are angles in degrees, \
                     counter-clockwise from +x",
                    num(a),
                    num(b),
                    num(b - a)
                );
            }
            _ => self.rectangle_text(s),
        }
        let _ = writeln!(s, "Units: length {lu}, temperature {tu}");
        match p.conductivity {
            Some(k) => {
                let _ = writeln!(s, "Conductivity: {} W/(m K)", num(k));
            }
            None => {
                let _ = writeln!(s, "Conductivity: not given (no heat-flow outputs)");
            }
        }
        let _ = writeln!(s);
    }

    fn rectangle_text(&self, s: &mut String) {
        let lu = self.units.length;
        let p = &self.plate;
        match p.height {
            Some(h) => {
                let _ = writeln!(
                    s,
                    "Plate: rectangle {} {lu} wide (x) by {} {lu} high (y), origin at the \
                     bottom-left corner",
                    num(p.width),
                    num(h)
                );
            }
            None => {
                let _ = writeln!(
                    s,
                    "Plate: long strip {} {lu} wide (x), unbounded upward (y > 0), no top edge",
                    num(p.width)
                );
            }
        }
    }

    /// Each edge with its length and condition, then the unknown edges.
    fn edges_text(&self, s: &mut String) {
        let lu = self.units.length;
        let tu = self.units.temperature;
        let _ = writeln!(s, "Edges");
        for e in &self.edges {
            let along = if e.edge.is_circular() {
                "circle"
            } else if e.edge.runs_along_x() {
                "along x"
            } else {
                "along y"
            };
            let length = match e.length {
                Some(l) => format!("{} {lu}", num(l)),
                None => "infinite".to_string(),
            };
            let what = match (e.condition, e.temperature, &e.profile) {
                ("absent", ..) => "none (a long strip has no top edge)".to_string(),
                ("unknown", ..) => "unknown: to be reconstructed".to_string(),
                ("fixed", Some(t), _) => format!("fixed at {} {tu}", num(t)),
                ("fixed", None, Some(pr)) => format!(
                    "fixed, profile {}: {} points, {} to {} {tu}",
                    pr.file
                        .as_ref()
                        .map_or(String::from("(inline)"), |f| f.display().to_string()),
                    pr.points,
                    num(pr.min_temperature),
                    num(pr.max_temperature)
                ),
                ("convective", ..) => match &e.convection {
                    Some(ConvectionReport {
                        h: Some(h),
                        ambient,
                        biot,
                        ..
                    }) => format!(
                        "convective, h {} W/(m^2 K) to fluid at {} {tu}{}",
                        num(*h),
                        num(*ambient),
                        biot.map_or(String::new(), |b| format!(
                            " (Biot number across the plate h L/k = {})",
                            num(b)
                        ))
                    ),
                    Some(ConvectionReport {
                        h_range: Some([lo, hi]),
                        ambient,
                        ..
                    }) => format!(
                        "convective, h unknown (estimated from the readings within {} to {} \
                     W/(m^2 K)), fluid at {} {tu}",
                        num(*lo),
                        num(*hi),
                        num(*ambient)
                    ),
                    _ => "convective".to_string(),
                },
                (c, ..) => c.to_string(),
            };
            let head = if e.condition == "absent" {
                String::new()
            } else {
                format!("({along}, {length})")
            };
            let _ = writeln!(s, "  {:<7}{head:<24}{what}", e.edge.name());
        }
        let names: Vec<&str> = self.unknown_edges.iter().map(|e| e.name()).collect();
        let _ = writeln!(s, "Unknown edges: {}", names.join(", "));
        let _ = writeln!(s);
    }

    /// The sensor table: position, and depth below each unknown edge (also as a fraction of
    /// that edge's length).
    fn sensors_text(&self, s: &mut String) {
        let lu = self.units.length;
        let _ = writeln!(s, "Sensors ({})", self.sensors.len());
        let mut rows: Vec<Vec<String>> = Vec::new();
        let mut header = vec![
            "sensor".to_string(),
            format!("x [{lu}]"),
            format!("y [{lu}]"),
        ];
        for e in &self.unknown_edges {
            if e.is_circular() {
                header.push(format!("radial distance from {e} [{lu}]"));
                header.push("/ circumference".to_string());
            } else {
                header.push(format!("depth below {e} [{lu}]"));
                header.push("/ edge length".to_string());
            }
        }
        rows.push(header);
        for sr in &self.sensors {
            let mut r = vec![sr.sensor.clone(), num(sr.x), num(sr.y)];
            for d in &sr.depths {
                r.push(num(d.depth));
                r.push(format!("{:.3}", d.fraction_of_edge));
            }
            rows.push(r);
        }
        s.push_str(&table(&rows));
        let _ = writeln!(s);
    }

    /// The readings count and the fit, noise and uncertainty settings.
    fn settings_text(&self, s: &mut String) {
        let lu = self.units.length;
        let tu = self.units.temperature;
        match &self.readings {
            Some(r) => {
                let _ = write!(s, "Readings: {} of {} sensors", r.count, self.sensors.len());
                if r.sensors_without_reading.is_empty() {
                    let _ = writeln!(s);
                } else {
                    let _ = writeln!(
                        s,
                        "; no reading for {}",
                        r.sensors_without_reading.join(", ")
                    );
                }
            }
            None => {
                let _ = writeln!(s, "Readings: none");
            }
        }
        let f = &self.fit;
        let strength = match f.strength_value {
            Some(v) => format!("fixed at {}", num(v)),
            None if f.strength == "default" => "the default rule".to_string(),
            None => f.strength.to_string(),
        };
        let smoothing = match f.smoothing_order {
            Some(o) => format!("{} penalty (derivative order {o})", f.smoothing),
            None => "curvature or slope penalty, whichever the readings favour".to_string(),
        };
        let _ = writeln!(
            s,
            "Fit: {} terms per unknown edge, {smoothing}, strength: {strength}",
            f.terms
        );
        let n = &self.noise;
        let noise = match (n.source, n.sigma) {
            ("sigma", Some(sg)) => format!("sigma {} {tu} for every reading", num(sg)),
            ("sigma-emf", Some(mv)) => format!(
                "sigma {} mV for every voltage reading, in temperature through the slope of \
                 the type {} reference function",
                num(mv),
                n.thermocouple_type.unwrap_or("?")
            ),
            ("tolerance", _) => format!(
                "thermocouple tolerance class {}, type {}",
                n.tolerance_class.unwrap_or("?"),
                n.thermocouple_type.unwrap_or("?")
            ),
            _ => "not stated: estimated from the fit residuals".to_string(),
        };
        let own = if n.sensors_with_own_sigma > 0 {
            match n.sensors_with_own_sigma {
                1 => " (1 sensor gives its own sigma)".to_string(),
                k => format!(" ({k} sensors give their own sigma)"),
            }
        } else {
            String::new()
        };
        let _ = writeln!(s, "Noise: {noise}{own}");
        if let Some(c) = &self.readings_conversion {
            let _ = writeln!(s, "Readings: {c}");
        }
        let un = &self.uncertainty;
        let pos = un.position_sigma.map_or(String::new(), |p| {
            format!(", position sigma {} {lu}", num(p))
        });
        let _ = writeln!(
            s,
            "Uncertainty: {} bootstrap replicates, confidence {}, seed {}{pos}",
            un.replicates,
            num(un.confidence),
            un.seed
        );
    }

    /// The forward model's lines, when it was described.
    fn model_text(&self, s: &mut String) {
        if let Some(m) = &self.model {
            let _ = writeln!(s);
            let _ = writeln!(s, "Forward model");
            for l in &m.lines {
                let _ = writeln!(s, "  {l}");
            }
        }
    }
}

fn edge_report(case: &Case, edge: Edge) -> EdgeReport {
    let u = &case.units;
    let shape = case.plate.shape();
    let length = shape.edge_length(edge).map(|m| u.length_from_m(m));
    let (condition, temperature, profile) = match case.plate.condition(edge) {
        None => ("absent", None, None),
        Some(EdgeCondition::Fixed(p)) if p.positions().len() == 1 => {
            ("fixed", Some(u.temp_from_k(p.temperatures()[0])), None)
        }
        Some(EdgeCondition::Fixed(p)) => {
            let t = p.temperatures();
            let lo = t.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = t.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let file = case
                .files
                .profiles
                .iter()
                .find(|(e, _)| *e == edge)
                .map(|(_, f)| f.clone());
            let pr = ProfileReport {
                file,
                points: t.len(),
                min_temperature: u.temp_from_k(lo),
                max_temperature: u.temp_from_k(hi),
            };
            ("fixed", None, Some(pr))
        }
        Some(c) => (c.name(), None, None),
    };
    let convection = case.plate.convection(edge).map(|c| {
        let depth = shape.across(edge);
        let h_range = match c.h {
            crate::geometry::HeatTransfer::Unknown { low, high } => Some([low, high]),
            crate::geometry::HeatTransfer::Known(_) => None,
        };
        ConvectionReport {
            h: c.known_h(),
            h_range,
            ambient: u.temp_from_k(c.ambient_k),
            biot: match (c.known_h(), depth, case.plate.conductivity()) {
                (Some(h), Some(d), Some(k)) => Some(h * d / k),
                _ => None,
            },
        }
    });
    EdgeReport {
        edge,
        condition,
        length,
        temperature,
        profile,
        convection,
    }
}

/// Columns padded to their widest cell: the first left-aligned, the rest right-aligned.
fn table(rows: &[Vec<String>]) -> String {
    let ncol = rows.iter().map(Vec::len).max().unwrap_or(0);
    let widths: Vec<usize> = (0..ncol)
        .map(|j| {
            rows.iter()
                .filter_map(|r| r.get(j))
                .map(|c| c.chars().count())
                .max()
                .unwrap_or(0)
        })
        .collect();
    let mut s = String::new();
    for r in rows {
        s.push_str("  ");
        for (j, c) in r.iter().enumerate() {
            if j == 0 {
                let _ = write!(s, "{c:<w$}", w = widths[0]);
            } else {
                let _ = write!(s, "  {c:>w$}", w = widths[j]);
            }
        }
        s.push('\n');
    }
    s
}

/// `v` rounded to three significant digits: these lengths are estimates of scale, and more
/// digits would claim a precision they do not have.
fn round3(v: f64) -> f64 {
    if v == 0.0 || !v.is_finite() {
        return v;
    }
    let scale = 10f64.powi(2 - v.abs().log10().floor() as i32);
    (v * scale).round() / scale
}
