//! `plate.toml`: parsed into a raw struct as written, then validated into typed settings.
//!
//! Stage one is serde with `deny_unknown_fields` everywhere, so a misspelt key is an error
//! naming the key and its line. Stage two checks every value, converts to metres and kelvin
//! and builds the [`Plate`]; its errors carry the file and the line of the key at fault,
//! found through [`TomlSpans`].

use crate::case::{
    BoundsSettings, CandidateSource, ColdJunction, Criterion, DesignSettings, FitSettings, Region,
    Signal, Smoothing, StrengthRule, ThermocoupleSettings, UncertaintySettings,
};
use crate::error::{Error, Result};
use crate::geometry::{Convection, Edge, EdgeCondition, EdgeProfile, HeatTransfer, Plate, Shape};
use crate::io::csv_files::{self, absolute_temperature};
use crate::io::spans::{TomlSpans, guess_field_on_line, header_name};
use crate::its90::Its90Type;
use crate::noise::{NoiseSpec, ThermocoupleType, ToleranceClass};
use crate::plausible::MAX_LENGTH_M;
use crate::units::{LengthUnit, TemperatureUnit, Units};
use serde::Deserialize;
use std::fmt;
use std::path::{Path, PathBuf};

/// Default number of series terms per unknown edge (`docs/case-files.md`, plate.toml).
pub const DEFAULT_TERMS: usize = 64;
/// Largest number of series terms accepted: beyond this the series only adds round-off.
pub const MAX_TERMS: usize = 4096;
/// Default bootstrap replicates (`docs/case-files.md`, plate.toml).
pub const DEFAULT_REPLICATES: usize = 2000;
/// Largest number of bootstrap replicates accepted.
pub const MAX_REPLICATES: usize = 1_000_000;
/// Default confidence level (`docs/case-files.md`, plate.toml).
pub const DEFAULT_CONFIDENCE: f64 = 0.95;
/// Default random seed (`docs/case-files.md`, plate.toml).
pub const DEFAULT_SEED: u64 = 7;

// ---- stage one: the file as written -------------------------------------------------------

/// The search range of an unknown heat transfer coefficient when `h_range` is not given,
/// W/(m² K): from free convection in gases to forced convection in liquids (Incropera et
/// al., Table 1.1; recalled from memory).
pub const DEFAULT_H_RANGE: (f64, f64) = (1.0, 1e5);

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    plate: RawPlate,
    #[serde(default)]
    edges: RawEdges,
    #[serde(default)]
    fit: RawFit,
    #[serde(default)]
    noise: RawNoise,
    #[serde(default)]
    uncertainty: RawUncertainty,
    design: Option<RawDesign>,
    #[serde(default)]
    bounds: RawBounds,
    thermocouple: Option<RawThermocouple>,
}

/// `[thermocouple]`: the type and what the readings hold.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawThermocouple {
    #[serde(rename = "type")]
    tc_type: String,
    signal: Option<String>,
    cold_junction: Option<NumberOrWord>,
}

/// `[bounds]`: the statement strict bounds rest on.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawBounds {
    max_gradient: Option<f64>,
    min_temperature: Option<f64>,
    max_temperature: Option<f64>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPlate {
    shape: Option<String>,
    width: Option<f64>,
    height: Option<NumberOrWord>,
    radius: Option<f64>,
    inner_radius: Option<f64>,
    outer_radius: Option<f64>,
    length_unit: LengthUnit,
    temperature_unit: TemperatureUnit,
    conductivity: Option<f64>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEdges {
    bottom: Option<RawEdge>,
    right: Option<RawEdge>,
    top: Option<RawEdge>,
    left: Option<RawEdge>,
    inner: Option<RawEdge>,
    outer: Option<RawEdge>,
    rim: Option<RawEdge>,
}

#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEdge {
    condition: String,
    temperature: Option<f64>,
    profile: Option<String>,
    // Convective edges: a number in W/(m^2 K) or the word "unknown"; the fluid temperature;
    // the search range of an unknown h.
    h: Option<toml::Value>,
    ambient: Option<toml::Value>,
    h_range: Option<toml::Value>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFit {
    terms: Option<i64>,
    smoothing: Option<Smoothing>,
    strength: Option<NumberOrWord>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawNoise {
    sigma: Option<f64>,
    tolerance_class: Option<String>,
    #[serde(rename = "type")]
    tc_type: Option<String>,
    sigma_emf_mv: Option<f64>,
}

#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawUncertainty {
    replicates: Option<i64>,
    confidence: Option<f64>,
    seed: Option<i64>,
    position_sigma: Option<f64>,
}

/// `[design]`: the constraints, candidates and prior of `edgetherm design`.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDesign {
    allowed: Option<Vec<RawRegion>>,
    keep_out: Option<Vec<RawRegion>>,
    edge_distance: Option<f64>,
    sensor_spacing: Option<f64>,
    candidate_spacing: Option<f64>,
    candidates: Option<String>,
    noise: Option<f64>,
    variation: Option<f64>,
    smoothing: Option<Smoothing>,
    criterion: Option<String>,
}

/// A rectangle written `{ x = [x0, x1], y = [y0, y1] }`, case length unit.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRegion {
    x: Option<[f64; 2]>,
    y: Option<[f64; 2]>,
    /// Round parts: radii and angles (degrees) of a ring sector.
    radius: Option<[f64; 2]>,
    angle: Option<[f64; 2]>,
}

/// A value that may be a number or a word (`height = "infinite"`, `strength = "gcv"`).
#[derive(Debug, Clone, PartialEq)]
enum NumberOrWord {
    Number(f64),
    Word(String),
}

impl<'de> Deserialize<'de> for NumberOrWord {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> std::result::Result<Self, D::Error> {
        struct V;
        impl serde::de::Visitor<'_> for V {
            type Value = NumberOrWord;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a number or a word in quotes")
            }
            fn visit_f64<E>(self, v: f64) -> std::result::Result<NumberOrWord, E> {
                Ok(NumberOrWord::Number(v))
            }
            fn visit_i64<E>(self, v: i64) -> std::result::Result<NumberOrWord, E> {
                Ok(NumberOrWord::Number(v as f64))
            }
            fn visit_u64<E>(self, v: u64) -> std::result::Result<NumberOrWord, E> {
                Ok(NumberOrWord::Number(v as f64))
            }
            fn visit_str<E>(self, v: &str) -> std::result::Result<NumberOrWord, E> {
                Ok(NumberOrWord::Word(v.to_string()))
            }
        }
        d.deserialize_any(V)
    }
}

// ---- stage two: validated -----------------------------------------------------------------

/// Everything `plate.toml` says, validated and in SI units.
#[derive(Debug, Clone)]
pub(crate) struct PlateFile {
    pub units: Units,
    pub plate: Plate,
    pub fit: FitSettings,
    pub noise: NoiseSpec,
    pub uncertainty: UncertaintySettings,
    pub design: DesignSettings,
    pub bounds: BoundsSettings,
    pub thermocouple: Option<ThermocoupleSettings>,
    /// The profile files the fixed edges refer to, resolved against the plate file's
    /// directory.
    pub profiles: Vec<(Edge, PathBuf)>,
    /// How each profile file was read (separator, decimal mark, ...), for the outputs.
    pub profiles_read_as: Vec<crate::case::ReadAs>,
}

/// The line of the key `field` (`uncertainty.replicates`) in the plate file at `path`, when the
/// file gives it (for messages about settings checked after loading, such as budgets).
pub fn plate_line_of(path: &Path, field: &str) -> Option<usize> {
    let bytes = csv_files::read_input(path).ok()?;
    let text = std::str::from_utf8(&bytes).ok()?;
    TomlSpans::new(text).line_of_key(field)
}

/// Read and validate `plate.toml`.
pub(crate) fn read_plate_file(path: &Path) -> Result<PlateFile> {
    let bytes = csv_files::read_input(path)?;
    let text = csv_files::utf8_text(path, &bytes, "a TOML file")?;
    let spans = TomlSpans::new(text);
    let raw: RawFile = toml::from_str(text).map_err(|e| toml_error(path, text, &spans, &e))?;
    Checker {
        path,
        spans: &spans,
    }
    .build(raw)
}

/// Turn a toml/serde error into a message naming the file, line and key.
fn toml_error(path: &Path, text: &str, spans: &TomlSpans, e: &toml::de::Error) -> Error {
    let msg = e.message().trim().to_string();
    let offset = e.span().map(|s| s.start);
    let line = offset.map(|o| spans.line(o));
    let mut field = offset
        .and_then(|o| spans.field_at(o))
        .map(str::to_string)
        .or_else(|| line.and_then(|l| guess_field_on_line(text, l)));
    let message = if let Some(name) = backticked(&msg, "missing field `") {
        let parent = field.take();
        let full = match &parent {
            Some(p) => format!("{p}.{name}"),
            None => name.to_string(),
        };
        let message = match parent {
            Some(p) => format!("[{p}] needs the key `{name}`; add it"),
            None => format!("the [{name}] section is missing; add it"),
        };
        field = Some(full);
        message
    } else if let Some(rest) = msg.strip_prefix("unknown field ") {
        format!("unknown key {rest}; check the spelling")
    } else if msg.starts_with("duplicate key") {
        duplicate_message(text, line)
    } else if msg.starts_with("unknown variant") {
        msg.replacen("unknown variant", "unknown value", 1)
    } else if !spans.parsed() {
        format!("not valid TOML: {msg}")
    } else {
        let msg = msg
            .replace("expected f64", "expected a number")
            .replace("expected i64", "expected a whole number");
        // serde names the Rust struct it wanted ("expected struct RawEdge"): say "a table"
        match msg.split_once("expected struct ") {
            Some((head, _)) => format!("{head}expected a table ([section] or {{ ... }})"),
            None => msg,
        }
    };
    Error::Invalid {
        location: crate::error::Location {
            file: Some(path.to_path_buf()),
            line,
            field,
        },
        message,
    }
}

/// The text between `prefix` and the next backtick of `msg`.
fn backticked<'a>(msg: &'a str, prefix: &str) -> Option<&'a str> {
    msg.strip_prefix(prefix)?.split('`').next()
}

fn duplicate_message(text: &str, line: Option<usize>) -> String {
    let lines: Vec<&str> = text.lines().collect();
    let here = line
        .and_then(|l| lines.get(l.saturating_sub(1)))
        .map(|l| l.trim())
        .unwrap_or("");
    if let Some(name) = header_name(here) {
        let first = line.and_then(|l| {
            lines[..l.saturating_sub(1)]
                .iter()
                .position(|x| header_name(x.trim()).as_deref() == Some(name.as_str()))
                .map(|i| i + 1)
        });
        let also = first.map_or(String::new(), |f| format!(" (first on line {f})"));
        let what = if let Some(edge) = name.strip_prefix("edges.") {
            format!("the {edge} edge is given twice{also}; give each edge once")
        } else {
            format!("the section [{name}] is given twice{also}; give each section once")
        };
        return what;
    }
    let key = here.split('=').next().unwrap_or("").trim();
    format!("the key `{key}` is given twice in its section; keep one")
}

/// Stage two: checks with access to the line of every key.
struct Checker<'a> {
    path: &'a Path,
    spans: &'a TomlSpans,
}

impl Checker<'_> {
    fn err(&self, field: &str, message: impl Into<String>) -> Error {
        Error::invalid_at(
            self.path,
            self.spans.line_for_field(field),
            Some(field),
            message,
        )
    }

    fn finite(&self, field: &str, v: f64) -> Result<f64> {
        if v.is_finite() {
            Ok(v)
        } else {
            Err(self.err(field, format!("must be a finite number, not {v}")))
        }
    }

    fn build(&self, raw: RawFile) -> Result<PlateFile> {
        let units = Units {
            length: raw.plate.length_unit,
            temperature: raw.plate.temperature_unit,
        };
        let length = |field: &str, v: f64, what: &str| -> Result<f64> {
            let v = self.finite(field, v)?;
            if v <= 0.0 {
                return Err(self.err(field, format!("{what} must be a positive number, not {v}")));
            }
            crate::plausible::length_m(&units, v, what).map_err(|m| self.err(field, m))
        };
        let p = &raw.plate;
        let kind = p.shape.as_deref().map(str::trim).unwrap_or("rectangle");
        // the keys of the other outlines are refused, so a typo never passes unnoticed
        let refuse = |keys: &[(&str, bool)]| -> Result<()> {
            match keys.iter().find(|(_, given)| *given) {
                Some((k, _)) => Err(self.err(
                    &format!("plate.{k}"),
                    format!(
                        "a {kind} has no `{k}`; remove it (or set `shape` to the outline meant)"
                    ),
                )),
                None => Ok(()),
            }
        };
        let need = |key: &str, v: Option<f64>, what: &str| -> Result<f64> {
            match v {
                Some(v) => length(&format!("plate.{key}"), v, what),
                None => Err(self.err(
                    &format!("plate.{key}"),
                    format!("a {kind} needs `{key} = <{what}>` under [plate]"),
                )),
            }
        };
        let shape = match kind {
            "rectangle" => {
                refuse(&[
                    ("radius", p.radius.is_some()),
                    ("inner_radius", p.inner_radius.is_some()),
                    ("outer_radius", p.outer_radius.is_some()),
                ])?;
                let width_m = need("width", p.width, "the width")?;
                match &p.height {
                    None => {
                        return Err(self.err(
                            "plate.height",
                            "a rectangle needs `height = <the height>` under [plate] (or \
                             \"infinite\" for a long strip)",
                        ));
                    }
                    Some(NumberOrWord::Number(h)) => Shape::Rectangle {
                        width_m,
                        height_m: length("plate.height", *h, "the height")?,
                    },
                    Some(NumberOrWord::Word(w)) if w == "infinite" => Shape::Strip { width_m },
                    Some(NumberOrWord::Word(w)) => {
                        return Err(self.err(
                            "plate.height",
                            format!(
                                "`{w}` is not a height; give a number or \"infinite\" for a long \
                                 strip"
                            ),
                        ));
                    }
                }
            }
            "disk" => {
                refuse(&[
                    ("width", p.width.is_some()),
                    ("height", p.height.is_some()),
                    ("inner_radius", p.inner_radius.is_some()),
                    ("outer_radius", p.outer_radius.is_some()),
                ])?;
                Shape::Disk {
                    radius_m: need("radius", p.radius, "the radius")?,
                }
            }
            "annulus" => {
                refuse(&[
                    ("width", p.width.is_some()),
                    ("height", p.height.is_some()),
                    ("radius", p.radius.is_some()),
                ])?;
                let inner_m = need("inner_radius", p.inner_radius, "the inner radius")?;
                let outer_m = need("outer_radius", p.outer_radius, "the outer radius")?;
                if outer_m <= inner_m {
                    return Err(self.err(
                        "plate.outer_radius",
                        "the outer radius must be larger than the inner radius",
                    ));
                }
                Shape::Annulus { inner_m, outer_m }
            }
            other => {
                return Err(self.err(
                    "plate.shape",
                    format!(
                        "unknown shape `{other}`; use \"rectangle\" (the default: width and \
                         height), \"disk\" (radius) or \"annulus\" (inner_radius, outer_radius)"
                    ),
                ));
            }
        };
        if let Some(k) = raw.plate.conductivity {
            self.finite("plate.conductivity", k)?;
            if k > 0.0 {
                crate::plausible::conductivity(k).map_err(|m| self.err("plate.conductivity", m))?;
            }
        }
        let mut conditions: Vec<(Edge, EdgeCondition)> = Vec::new();
        let mut profiles = Vec::new();
        let mut profiles_read_as = Vec::new();
        let raw_edges = [
            (Edge::Bottom, raw.edges.bottom),
            (Edge::Right, raw.edges.right),
            (Edge::Top, raw.edges.top),
            (Edge::Left, raw.edges.left),
            (Edge::Inner, raw.edges.inner),
            (Edge::Outer, raw.edges.outer),
            (Edge::Rim, raw.edges.rim),
        ];
        for (edge, raw_edge) in raw_edges {
            if let Some(r) = raw_edge {
                if !shape.has_edge(edge) {
                    let names: Vec<&str> = shape.edges().iter().map(|e| e.name()).collect();
                    return Err(self.err(
                        &format!("edges.{edge}"),
                        if matches!(shape, Shape::Strip { .. }) && edge == Edge::Top {
                            "a long strip (height = \"infinite\") has no top edge; remove \
                             [edges.top]"
                                .to_string()
                        } else {
                            format!(
                                "a {kind} has no {edge} edge; its edges are {} (remove \
                                 [edges.{edge}] or change `shape`)",
                                names.join(", ")
                            )
                        },
                    ));
                }
                let (cond, file) = self.edge(edge, r, &units, &shape)?;
                conditions.push((edge, cond));
                if let Some((f, how)) = file {
                    profiles.push((edge, f));
                    profiles_read_as.push(how);
                }
            }
        }
        let plate = Plate::from_edges(shape, &conditions, raw.plate.conductivity)
            .map_err(|e| e.in_file(self.path, |f| self.spans.line_for_field(f)))?;
        let thermocouple = raw
            .thermocouple
            .map(|t| self.thermocouple(t, &units))
            .transpose()?;
        let bounds = self.bounds(raw.bounds, &units, &plate)?;
        Ok(PlateFile {
            units,
            plate,
            fit: self.fit(raw.fit)?,
            noise: self.noise(raw.noise, &units, thermocouple.as_ref())?,
            thermocouple,
            uncertainty: self.uncertainty(raw.uncertainty, &units)?,
            design: match raw.design {
                Some(d) => self.design(d, &units, &shape)?,
                None => DesignSettings::default(),
            },
            bounds,
            profiles,
            profiles_read_as,
        })
    }

    /// `[bounds]`: a positive, finite gradient limit converted to K/m, and temperature limits
    /// in kelvin with `min < max`.
    fn bounds(&self, raw: RawBounds, units: &Units, plate: &Plate) -> Result<BoundsSettings> {
        // on a round part the limit is per degree of arc (crate::bounds::gradient_unit_m)
        let unit_name = if plate.shape().is_round() {
            "degree"
        } else {
            "length unit"
        };
        let unit_m = crate::bounds::gradient_unit_m(plate, units);
        let max_gradient_k_per_m = match raw.max_gradient {
            None => None,
            Some(g) => Some(
                crate::plausible::gradient_k_per_m_in(units, g, unit_m, unit_name)
                    .map_err(|m| self.err("bounds.max_gradient", m))?,
            ),
        };
        let temperature = |field: &str, v: Option<f64>| -> Result<Option<f64>> {
            match v {
                None => Ok(None),
                Some(t) => {
                    let t = self.finite(field, t)?;
                    absolute_temperature(units, t)
                        .map(Some)
                        .map_err(|m| self.err(field, m))
                }
            }
        };
        let min_temperature_k = temperature("bounds.min_temperature", raw.min_temperature)?;
        let max_temperature_k = temperature("bounds.max_temperature", raw.max_temperature)?;
        if let (Some(lo), Some(hi)) = (min_temperature_k, max_temperature_k) {
            if lo >= hi {
                return Err(self.err(
                    "bounds.max_temperature",
                    "max_temperature must be above min_temperature",
                ));
            }
        }
        Ok(BoundsSettings {
            max_gradient_k_per_m,
            min_temperature_k,
            max_temperature_k,
        })
    }

    fn edge(
        &self,
        edge: Edge,
        r: RawEdge,
        units: &Units,
        shape: &Shape,
    ) -> Result<(EdgeCondition, Option<(PathBuf, crate::case::ReadAs)>)> {
        let key = |k: &str| format!("edges.{edge}.{k}");
        let condition = r.condition.trim();
        if condition == "convective" {
            return self.convective(edge, &r, units).map(|c| (c, None));
        }
        self.refuse_keys(
            edge,
            condition,
            "convective",
            &[
                (r.h.is_some(), "h"),
                (r.ambient.is_some(), "ambient"),
                (r.h_range.is_some(), "h_range"),
            ],
        )?;
        if !matches!(condition, "fixed" | "insulated" | "unknown") {
            let hint = match condition.to_ascii_lowercase().as_str() {
                c @ ("fixed" | "insulated" | "unknown" | "convective") => {
                    format!(" (conditions are written in lower case: `{c}`)")
                }
                _ => String::new(),
            };
            return Err(self.err(
                &key("condition"),
                format!(
                    "unknown condition `{condition}`; use fixed, insulated, unknown or \
                     convective{hint}"
                ),
            ));
        }
        if condition != "fixed" {
            self.refuse_keys(
                edge,
                condition,
                "fixed",
                &[
                    (r.temperature.is_some(), "temperature"),
                    (r.profile.is_some(), "profile"),
                ],
            )?;
        }
        match condition {
            "insulated" => Ok((EdgeCondition::Insulated, None)),
            "unknown" => Ok((EdgeCondition::Unknown, None)),
            "fixed" => match (r.temperature, r.profile) {
                (Some(_), Some(_)) => Err(self.err(
                    &key("profile"),
                    "give either `temperature` or `profile` for a fixed edge, not both",
                )),
                (None, None) => Err(self.err(
                    &key("condition"),
                    format!(
                        "the fixed {edge} edge needs `temperature = <value>` or \
                         `profile = \"file.csv\"`"
                    ),
                )),
                (Some(t), None) => {
                    let t = self.finite(&key("temperature"), t)?;
                    let k = absolute_temperature(units, t)
                        .map_err(|m| self.err(&key("temperature"), m))?;
                    Ok((EdgeCondition::Fixed(EdgeProfile::constant(k)), None))
                }
                (None, Some(file)) => {
                    let base = self.path.parent().unwrap_or(Path::new(""));
                    let file_path = base.join(&file);
                    let length = shape.edge_length(edge).map(|m| units.length_from_m(m));
                    let (profile, how) = csv_files::read_edge_profile_as(
                        &file_path,
                        units,
                        edge,
                        length,
                        shape.radius_of(edge),
                    )
                    .map_err(|e| match e {
                        Error::Io { source, .. } => self.err(
                            &key("profile"),
                            format!(
                                "cannot read the profile file {}: {source}",
                                file_path.display()
                            ),
                        ),
                        other => other,
                    })?;
                    Ok((EdgeCondition::Fixed(profile), Some((file_path, how))))
                }
            },
            other => Err(self.err(
                &key("condition"),
                format!("unknown condition `{other}`; use fixed, insulated, unknown or convective"),
            )),
        }
    }

    /// Refuse the keys of another condition (`owner`) given on an edge that is `condition`:
    /// `(given, key)` pairs.
    fn refuse_keys(
        &self,
        edge: Edge,
        condition: &str,
        owner: &str,
        keys: &[(bool, &str)],
    ) -> Result<()> {
        match keys.iter().find(|(given, _)| *given) {
            Some((_, k)) => Err(self.err(
                &format!("edges.{edge}.{k}"),
                format!(
                    "`{k}` applies to a {owner} edge only, but the {edge} edge is \
                     `{condition}`; remove it or set condition = \"{owner}\""
                ),
            )),
            None => Ok(()),
        }
    }

    /// A convective edge: `h` (a number in W/(m² K), or "unknown" with an optional
    /// `h_range`) and `ambient` (the fluid temperature in the case's unit).
    fn convective(&self, edge: Edge, r: &RawEdge, units: &Units) -> Result<EdgeCondition> {
        let key = |k: &str| format!("edges.{edge}.{k}");
        for (given, k) in [
            (r.temperature.is_some(), "temperature"),
            (r.profile.is_some(), "profile"),
        ] {
            if given {
                return Err(self.err(
                    &key(k),
                    format!(
                        "`{k}` applies to a fixed edge only; a convective edge takes `h` and \
                         `ambient` (the fluid temperature)"
                    ),
                ));
            }
        }
        let number = |k: &str, v: &toml::Value| -> Result<f64> {
            match v {
                toml::Value::Float(f) => self.finite(&key(k), *f),
                toml::Value::Integer(i) => Ok(*i as f64),
                other => Err(self.err(
                    &key(k),
                    format!("expected a number, found {}", other.type_str()),
                )),
            }
        };
        let ambient = match &r.ambient {
            None => {
                return Err(self.err(
                    &key("condition"),
                    format!(
                        "the convective {edge} edge needs `ambient = <fluid temperature>` in the \
                         case's temperature unit"
                    ),
                ));
            }
            Some(v) => {
                let t = number("ambient", v)?;
                absolute_temperature(units, t).map_err(|m| self.err(&key("ambient"), m))?
            }
        };
        let plausible_h =
            |k: &str, v: f64| crate::plausible::heat_transfer(v).map_err(|m| self.err(&key(k), m));
        let h = match &r.h {
            None => {
                return Err(self.err(
                    &key("condition"),
                    format!(
                        "the convective {edge} edge needs `h = <W/(m^2 K)>`, or h = \"unknown\" \
                         to estimate it from the readings"
                    ),
                ));
            }
            Some(toml::Value::String(w)) if w.trim() == "unknown" => {
                let (low, high) = match &r.h_range {
                    None => (DEFAULT_H_RANGE.0, DEFAULT_H_RANGE.1),
                    Some(toml::Value::Array(a)) if a.len() == 2 => {
                        let lo = plausible_h("h_range", number("h_range", &a[0])?)?;
                        let hi = plausible_h("h_range", number("h_range", &a[1])?)?;
                        if hi <= lo {
                            return Err(self.err(
                                &key("h_range"),
                                format!(
                                    "the search range [{lo}, {hi}] must have its larger value \
                                     second"
                                ),
                            ));
                        }
                        (lo, hi)
                    }
                    Some(_) => {
                        return Err(self.err(
                            &key("h_range"),
                            "h_range takes two numbers in W/(m^2 K): h_range = [low, high]",
                        ));
                    }
                };
                HeatTransfer::Unknown { low, high }
            }
            Some(toml::Value::String(w)) => {
                return Err(self.err(
                    &key("h"),
                    format!(
                        "`{w}` is not a heat transfer coefficient: give a number in W/(m^2 K) \
                         or \"unknown\""
                    ),
                ));
            }
            Some(v) => {
                if r.h_range.is_some() {
                    return Err(self.err(
                        &key("h_range"),
                        "h_range applies only when h = \"unknown\"; remove it or set h = \"unknown\"",
                    ));
                }
                HeatTransfer::Known(plausible_h("h", number("h", v)?)?)
            }
        };
        Ok(EdgeCondition::Convective(Convection {
            h,
            ambient_k: ambient,
        }))
    }

    fn fit(&self, raw: RawFit) -> Result<FitSettings> {
        let terms = match raw.terms {
            None => DEFAULT_TERMS,
            Some(n) if n >= 1 && (n as u64) <= MAX_TERMS as u64 => n as usize,
            Some(n) => {
                return Err(self.err(
                    "fit.terms",
                    format!(
                        "the number of terms must be a whole number from 1 to {MAX_TERMS}, not {n}"
                    ),
                ));
            }
        };
        let strength = match raw.strength {
            None => StrengthRule::Default,
            Some(NumberOrWord::Number(v)) => {
                if !(v.is_finite() && v > 0.0) {
                    return Err(self.err(
                        "fit.strength",
                        format!("a fixed strength must be a positive number, not {v}"),
                    ));
                }
                StrengthRule::Fixed(v)
            }
            Some(NumberOrWord::Word(w)) => match w.as_str() {
                "gcv" => StrengthRule::Gcv,
                "discrepancy" => StrengthRule::Discrepancy,
                "evidence" => StrengthRule::Evidence,
                "lcurve" => StrengthRule::LCurve,
                other => {
                    return Err(self.err(
                        "fit.strength",
                        format!(
                            "unknown strength rule `{other}`; use gcv, discrepancy, evidence, \
                             lcurve or a positive number; leave it out for the default"
                        ),
                    ));
                }
            },
        };
        Ok(FitSettings {
            terms,
            smoothing: raw.smoothing.unwrap_or(Smoothing::Auto),
            strength,
        })
    }

    /// `[thermocouple]`: a known type, `signal` temperature (default) or `emf_mv`, and for
    /// voltages a cold junction (a temperature in the case unit, or "column").
    fn thermocouple(&self, raw: RawThermocouple, units: &Units) -> Result<ThermocoupleSettings> {
        let tc_type = Its90Type::parse(&raw.tc_type).ok_or_else(|| {
            self.err(
                "thermocouple.type",
                format!(
                    "unknown thermocouple type `{}`; use B, E, J, K, N, R, S or T",
                    raw.tc_type
                ),
            )
        })?;
        let signal = match raw.signal.as_deref().map(str::trim) {
            None | Some("temperature") => Signal::Temperature,
            Some("emf_mv") => Signal::EmfMv,
            Some(other) => {
                return Err(self.err(
                    "thermocouple.signal",
                    format!(
                        "unknown signal `{other}`; use \"temperature\" (readings in the case's \
                         temperature unit) or \"emf_mv\" (thermocouple voltages in mV)"
                    ),
                ));
            }
        };
        let cold_junction = match (signal, raw.cold_junction) {
            (Signal::Temperature, None) => None,
            (Signal::Temperature, Some(_)) => {
                return Err(self.err(
                    "thermocouple.cold_junction",
                    "a cold junction applies to voltage readings only; remove it or set \
                     signal = \"emf_mv\"",
                ));
            }
            (Signal::EmfMv, None) => {
                return Err(self.err(
                    "thermocouple.signal",
                    "voltage readings need `cold_junction`: the reference-junction temperature \
                     in the case's temperature unit, or \"column\" when the readings carry a \
                     `cold_junction` column",
                ));
            }
            (Signal::EmfMv, Some(NumberOrWord::Word(w))) if w.trim() == "column" => {
                Some(ColdJunction::Column)
            }
            (Signal::EmfMv, Some(NumberOrWord::Word(w))) => {
                return Err(self.err(
                    "thermocouple.cold_junction",
                    format!(
                        "`{w}` is not a cold junction; give a temperature in the case's unit or \
                         \"column\""
                    ),
                ));
            }
            (Signal::EmfMv, Some(NumberOrWord::Number(t))) => {
                let t = self.finite("thermocouple.cold_junction", t)?;
                let k = absolute_temperature(units, t)
                    .map_err(|m| self.err("thermocouple.cold_junction", m))?;
                let (lo, hi) = tc_type.range_c();
                let c = k - 273.15;
                if !(c >= lo && c <= hi) {
                    return Err(self.err(
                        "thermocouple.cold_junction",
                        format!(
                            "{t} {} is outside the type {tc_type} reference function ({lo} to \
                             {hi} °C)",
                            units.temperature
                        ),
                    ));
                }
                Some(ColdJunction::Fixed(k))
            }
        };
        Ok(ThermocoupleSettings {
            tc_type,
            signal,
            cold_junction,
        })
    }

    fn noise(
        &self,
        raw: RawNoise,
        units: &Units,
        thermocouple: Option<&ThermocoupleSettings>,
    ) -> Result<NoiseSpec> {
        if let Some(s) = raw.sigma_emf_mv {
            if raw.sigma.is_some() || raw.tolerance_class.is_some() {
                return Err(self.err(
                    "noise.sigma_emf_mv",
                    "give one of `sigma`, `sigma_emf_mv` or `tolerance_class`, not several",
                ));
            }
            let Some(tc) = thermocouple.filter(|t| t.signal == Signal::EmfMv) else {
                return Err(self.err(
                    "noise.sigma_emf_mv",
                    "a voltage uncertainty needs voltage readings: add [thermocouple] with \
                     `type` and signal = \"emf_mv\", or give `sigma` in the temperature unit",
                ));
            };
            if let Some(t) = &raw.tc_type {
                if Its90Type::parse(t) != Some(tc.tc_type) {
                    return Err(self.err(
                        "noise.type",
                        format!(
                            "[noise] type `{t}` differs from [thermocouple] type {}; state the \
                             type once, in [thermocouple]",
                            tc.tc_type
                        ),
                    ));
                }
            }
            if !(s.is_finite() && s > 0.0) {
                return Err(self.err(
                    "noise.sigma_emf_mv",
                    format!("the voltage uncertainty must be a positive number of mV, not {s}"),
                ));
            }
            return Ok(NoiseSpec::Emf {
                sigma_mv: s,
                tc_type: tc.tc_type,
            });
        }
        // The tolerance class takes the type of [thermocouple] when [noise] does not repeat it.
        let tc_type = match (raw.tc_type, thermocouple) {
            (Some(t), Some(tc)) => {
                if Its90Type::parse(&t) != Some(tc.tc_type) {
                    return Err(self.err(
                        "noise.type",
                        format!(
                            "[noise] type `{t}` differs from [thermocouple] type {}; state the \
                             type once, in [thermocouple]",
                            tc.tc_type
                        ),
                    ));
                }
                Some(t)
            }
            (Some(t), None) => Some(t),
            (None, Some(tc)) if raw.tolerance_class.is_some() => {
                if ThermocoupleType::parse(tc.tc_type.name()).is_none() {
                    return Err(self.err(
                        "noise.tolerance_class",
                        format!(
                            "this version has tolerance tables for types K, J, T, N and E only, \
                             not type {}; give [noise] sigma instead",
                            tc.tc_type
                        ),
                    ));
                }
                Some(tc.tc_type.name().to_string())
            }
            (None, _) => None,
        };
        match (raw.sigma, raw.tolerance_class, tc_type) {
            (Some(_), Some(_), _) | (Some(_), None, Some(_)) => Err(self.err(
                "noise.sigma",
                "give either `sigma` or `tolerance_class` with `type`, not both",
            )),
            (Some(s), None, None) => {
                if !(s.is_finite() && s > 0.0) {
                    return Err(self.err(
                        "noise.sigma",
                        format!("the standard uncertainty must be a positive number, not {s}"),
                    ));
                }
                crate::plausible::sigma_k(units, s)
                    .map(NoiseSpec::Sigma)
                    .map_err(|m| self.err("noise.sigma", m))
            }
            (None, Some(c), Some(t)) => {
                let class = ToleranceClass::parse(c.trim()).ok_or_else(|| {
                    self.err(
                        "noise.tolerance_class",
                        format!(
                            "unknown tolerance class `{c}`; use iec-1, iec-2, iec-3, \
                             astm-standard or astm-special"
                        ),
                    )
                })?;
                let tc_type = ThermocoupleType::parse(&t).ok_or_else(|| {
                    self.err(
                        "noise.type",
                        format!("unknown thermocouple type `{t}`; use K, J, T, N or E"),
                    )
                })?;
                Ok(NoiseSpec::Tolerance { class, tc_type })
            }
            (None, Some(_), None) => Err(self.err(
                "noise.type",
                "a tolerance class needs the thermocouple `type` too (K, J, T, N or E)",
            )),
            (None, None, Some(_)) => Err(self.err(
                "noise.tolerance_class",
                "a thermocouple `type` needs a `tolerance_class` too (iec-1, iec-2, iec-3, \
                 astm-standard or astm-special)",
            )),
            (None, None, None) => Ok(NoiseSpec::Unstated),
        }
    }

    fn design(&self, raw: RawDesign, units: &Units, shape: &Shape) -> Result<DesignSettings> {
        let allowed = self.design_regions("design.allowed", raw.allowed, units, shape)?;
        let keep_out = self.design_regions("design.keep_out", raw.keep_out, units, shape)?;
        let non_negative = |field: &str, v: Option<f64>, what: &str| -> Result<f64> {
            match v {
                None => Ok(0.0),
                Some(v) if v.is_finite() && v >= 0.0 => Ok(units.length_to_m(v)),
                Some(v) => Err(self.err(
                    field,
                    format!("{what} must be a length 0 or larger, not {v}"),
                )),
            }
        };
        let edge_distance_m = non_negative(
            "design.edge_distance",
            raw.edge_distance,
            "the minimum distance from the edges",
        )?;
        let half = match *shape {
            Shape::Annulus { inner_m, outer_m } => 0.5 * (outer_m - inner_m),
            Shape::Disk { radius_m } => radius_m,
            _ => {
                0.5 * shape
                    .height()
                    .map_or(shape.width(), |h| h.min(shape.width()))
            }
        };
        if edge_distance_m >= half {
            return Err(self.err(
                "design.edge_distance",
                "the minimum distance from the edges leaves no room inside the plate; make it \
                 smaller than half the plate's smaller side",
            ));
        }
        let sensor_spacing_m = non_negative(
            "design.sensor_spacing",
            raw.sensor_spacing,
            "the minimum spacing between sensors",
        )?;
        let candidates = self.design_candidates(raw.candidate_spacing, raw.candidates, units)?;
        let positive_dt = |field: &str, v: Option<f64>, what: &str| -> Result<Option<f64>> {
            match v {
                None => Ok(None),
                Some(v) if v.is_finite() && v > 0.0 => crate::plausible::sigma_k(units, v)
                    .map(Some)
                    .map_err(|m| self.err(field, format!("{what}: {m}"))),
                Some(v) => Err(self.err(
                    field,
                    format!("{what} must be a positive temperature difference, not {v}"),
                )),
            }
        };
        let noise_k = positive_dt("design.noise", raw.noise, "the expected reading noise")?;
        let variation_k = positive_dt(
            "design.variation",
            raw.variation,
            "the expected variation of the hidden profile",
        )?;
        if raw.smoothing == Some(Smoothing::Auto) {
            return Err(self.err(
                "design.smoothing",
                "a design needs one smoothing order for its prior, chosen before any reading \
                 exists; use size, slope or curvature (curvature is the usual choice)",
            ));
        }
        let criterion = match &raw.criterion {
            None => None,
            Some(c) => Some(Criterion::parse(c).ok_or_else(|| {
                self.err(
                    "design.criterion",
                    format!("unknown criterion `{c}`; use information, edge or worst"),
                )
            })?),
        };
        let lines = self.design_lines();
        Ok(DesignSettings {
            present: true,
            allowed,
            keep_out,
            edge_distance_m,
            sensor_spacing_m,
            candidates,
            noise_k,
            variation_k,
            smoothing: raw.smoothing,
            criterion,
            lines,
        })
    }

    /// The rectangles of `[design] allowed` or `keep_out` (`field`), checked against the
    /// plate and converted to metres.
    fn design_regions(
        &self,
        field: &str,
        list: Option<Vec<RawRegion>>,
        units: &Units,
        shape: &Shape,
    ) -> Result<Vec<Region>> {
        let w = units.length_from_m(shape.width());
        let h = shape.height().map(|h| units.length_from_m(h));
        let lu = units.length;
        let mut out = Vec::new();
        for (i, r) in list.unwrap_or_default().into_iter().enumerate() {
            let n = i + 1;
            if shape.is_round() {
                out.push(self.sector(field, n, &r, units, shape)?);
                continue;
            }
            if r.radius.is_some() || r.angle.is_some() {
                return Err(self.err(
                    field,
                    format!(
                        "region {n}: `radius` and `angle` describe a ring sector of a round part; \
                         on this plate write {{ x = [x_min, x_max], y = [y_min, y_max] }}"
                    ),
                ));
            }
            let (Some([x0, x1]), Some([y0, y1])) = (r.x, r.y) else {
                let missing = if r.x.is_none() { "x" } else { "y" };
                return Err(self.err(
                    &format!("{field}.{missing}"),
                    format!(
                        "rectangle {n} needs the key `{missing}`: write it {{ x = [x_min, x_max], \
                         y = [y_min, y_max] }}"
                    ),
                ));
            };
            if ![x0, x1, y0, y1].iter().all(|v| v.is_finite()) {
                return Err(self.err(
                    field,
                    format!("rectangle {n}: every bound must be a finite number"),
                ));
            }
            if !(x0 < x1 && y0 < y1) {
                return Err(self.err(
                    field,
                    format!(
                        "rectangle {n}: write it {{ x = [x_min, x_max], y = [y_min, y_max] }} \
                         with x_min < x_max and y_min < y_max; found x = [{x0}, {x1}], y = [{y0}, {y1}]"
                    ),
                ));
            }
            let y_top_ok = h.is_none_or(|h| y1 <= h);
            if x0 < 0.0 || x1 > w || y0 < 0.0 || !y_top_ok {
                let extent = match h {
                    Some(h) => format!("0 ≤ x ≤ {w} {lu}, 0 ≤ y ≤ {h} {lu}"),
                    None => format!("0 ≤ x ≤ {w} {lu}, y ≥ 0"),
                };
                return Err(self.err(
                    field,
                    format!("rectangle {n} reaches outside the plate ({extent})"),
                ));
            }
            out.push(Region {
                x_min: units.length_to_m(x0),
                x_max: units.length_to_m(x1),
                y_min: units.length_to_m(y0),
                y_max: units.length_to_m(y1),
                sector: None,
            });
        }
        Ok(out)
    }

    /// A ring sector of a round part, `{ radius = [r_min, r_max], angle = [start, end] }`
    /// (degrees counter-clockwise from +x; `start > end` wraps through 0°; `angle` left out:
    /// the whole ring), checked against the part and converted to metres and radians.
    fn sector(
        &self,
        field: &str,
        n: usize,
        r: &RawRegion,
        units: &Units,
        shape: &Shape,
    ) -> Result<Region> {
        if r.x.is_some() || r.y.is_some() {
            return Err(self.err(
                field,
                format!(
                    "region {n}: on a round part a region is a ring sector, written \
                     {{ radius = [r_min, r_max], angle = [start, end] }} (degrees, \
                     counter-clockwise from +x)"
                ),
            ));
        }
        let Some([r0, r1]) = r.radius else {
            return Err(self.err(
                field,
                format!("region {n}: give its radii, radius = [r_min, r_max]"),
            ));
        };
        let [a0, a1] = r.angle.unwrap_or([0.0, 360.0]);
        if !([r0, r1, a0, a1].iter().all(|v| v.is_finite()) && r0 >= 0.0 && r0 < r1) {
            return Err(self.err(
                field,
                format!(
                    "region {n}: the radii must be finite with 0 ≤ r_min < r_max; found \
                     radius = [{r0}, {r1}]"
                ),
            ));
        }
        if !(0.0..=360.0).contains(&a0) || !(0.0..=360.0).contains(&a1) {
            return Err(self.err(
                field,
                format!(
                    "region {n}: angles are degrees from 0 to 360, counter-clockwise from +x; \
                     found angle = [{a0}, {a1}]"
                ),
            ));
        }
        let outer = units.length_from_m(0.5 * shape.width());
        if r1 > outer * (1.0 + 1e-12) {
            return Err(self.err(
                field,
                format!(
                    "region {n} reaches outside the part: radius {r1} beyond the outer radius \
                     {outer} {}",
                    units.length
                ),
            ));
        }
        let (r_min, r_max) = (units.length_to_m(r0), units.length_to_m(r1));
        // a full turn stays a full turn (360 is not folded onto 0)
        let full = (a1 - a0).abs() >= 360.0;
        let (start, end) = if full {
            (0.0, std::f64::consts::TAU * (1.0 - 1e-15))
        } else {
            (
                a0.to_radians().rem_euclid(std::f64::consts::TAU),
                a1.to_radians().rem_euclid(std::f64::consts::TAU),
            )
        };
        Ok(Region {
            x_min: -r_max,
            x_max: r_max,
            y_min: -r_max,
            y_max: r_max,
            sector: Some(crate::case::Sector {
                r_min,
                r_max,
                start,
                end,
            }),
        })
    }

    /// Where the design's candidate positions come from: `candidate_spacing`, a
    /// `candidates` file (relative to the plate file), or the default grid.
    fn design_candidates(
        &self,
        spacing: Option<f64>,
        file: Option<String>,
        units: &Units,
    ) -> Result<CandidateSource> {
        Ok(match (spacing, file) {
            (Some(_), Some(_)) => {
                return Err(self.err(
                    "design.candidates",
                    "give either `candidate_spacing` or a `candidates` file, not both",
                ));
            }
            (Some(s), None) => {
                if !(s.is_finite() && s > 0.0) {
                    return Err(self.err(
                        "design.candidate_spacing",
                        format!("the candidate spacing must be a positive length, not {s}"),
                    ));
                }
                let m = crate::plausible::length_m(units, s, "the candidate spacing")
                    .map_err(|m| self.err("design.candidate_spacing", m))?;
                CandidateSource::Grid(Some(m))
            }
            (None, Some(f)) => {
                let base = self.path.parent().unwrap_or(Path::new(""));
                CandidateSource::File(base.join(f))
            }
            (None, None) => CandidateSource::Grid(None),
        })
    }

    /// The line of every `[design]` key the file gives, for messages.
    fn design_lines(&self) -> Vec<(String, usize)> {
        [
            "allowed",
            "keep_out",
            "edge_distance",
            "sensor_spacing",
            "candidate_spacing",
            "candidates",
            "noise",
            "variation",
            "smoothing",
            "criterion",
        ]
        .iter()
        .filter_map(|k| {
            let f = format!("design.{k}");
            self.spans.line_of_key(&f).map(|l| (f, l))
        })
        .chain(
            self.spans
                .line_of_key("design")
                .map(|l| ("design".to_string(), l)),
        )
        .collect()
    }

    fn uncertainty(&self, raw: RawUncertainty, units: &Units) -> Result<UncertaintySettings> {
        let replicates = match raw.replicates {
            None => DEFAULT_REPLICATES,
            Some(n) if n >= 1 && (n as u64) <= MAX_REPLICATES as u64 => n as usize,
            Some(n) => {
                return Err(self.err(
                    "uncertainty.replicates",
                    format!(
                        "the number of replicates must be a whole number from 1 to \
                         {MAX_REPLICATES}, not {n}"
                    ),
                ));
            }
        };
        let confidence = match raw.confidence {
            None => DEFAULT_CONFIDENCE,
            Some(c) if c > 0.0 && c < 1.0 => c,
            Some(c) => {
                return Err(self.err(
                    "uncertainty.confidence",
                    format!(
                        "the confidence must lie strictly between 0 and 1 (0.95, say), not {c}"
                    ),
                ));
            }
        };
        let seed = match raw.seed {
            None => DEFAULT_SEED,
            Some(s) => u64::try_from(s).map_err(|_| {
                self.err(
                    "uncertainty.seed",
                    format!("the seed must be a whole number 0 or larger, not {s}"),
                )
            })?,
        };
        let position_sigma_m = match raw.position_sigma {
            None => None,
            Some(s) if s.is_finite() && s >= 0.0 && units.length_to_m(s) <= MAX_LENGTH_M => {
                Some(units.length_to_m(s))
            }
            Some(s) => {
                return Err(self.err(
                    "uncertainty.position_sigma",
                    format!(
                        "the position uncertainty must be a number 0 or larger, up to \
                         {MAX_LENGTH_M} m, not {s}"
                    ),
                ));
            }
        };
        Ok(UncertaintySettings {
            replicates,
            confidence,
            seed,
            position_sigma_m,
        })
    }
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;

    const GOOD: &str = r#"
[plate]
width = 150.0
height = 60
length_unit = "mm"
temperature_unit = "C"
conductivity = 205.0

[edges.bottom]
condition = "unknown"

[edges.top]
condition = "fixed"
temperature = 25.0

[edges.left]
condition = "insulated"

[edges.right]
condition = "insulated"

[noise]
sigma = 0.5
"#;

    fn parse(text: &str) -> Result<PlateFile> {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("plate.toml");
        std::fs::write(&p, text).unwrap();
        read_plate_file(&p)
    }

    fn loc(e: &Error) -> (Option<usize>, Option<String>, String) {
        match e {
            Error::Invalid { location, message } => {
                (location.line, location.field.clone(), message.clone())
            }
            other => panic!("expected an invalid-input error, got {other:?}"),
        }
    }

    #[test]
    fn thermocouple_section() {
        let no_noise = GOOD.replace("[noise]\nsigma = 0.5\n", "");
        let f = parse(&format!(
            "{no_noise}[thermocouple]\ntype = \"k\"\nsignal = \"emf_mv\"\ncold_junction = 23.4\n\
             [noise]\ntolerance_class = \"iec-1\"\n"
        ))
        .unwrap();
        let tc = f.thermocouple.unwrap();
        assert_eq!(tc.tc_type, Its90Type::K);
        assert_eq!(tc.signal, Signal::EmfMv);
        match tc.cold_junction {
            Some(ColdJunction::Fixed(k)) => assert!((k - 296.55).abs() < 1e-9),
            other => panic!("{other:?}"),
        }
        // the tolerance class takes the [thermocouple] type
        assert_eq!(
            f.noise,
            NoiseSpec::Tolerance {
                class: ToleranceClass::Iec1,
                tc_type: ThermocoupleType::K
            }
        );
        let f = parse(&format!(
            "{no_noise}[thermocouple]\ntype = \"S\"\nsignal = \"emf_mv\"\n\
             cold_junction = \"column\"\n[noise]\nsigma_emf_mv = 0.002\n"
        ))
        .unwrap();
        assert_eq!(
            f.thermocouple.unwrap().cold_junction,
            Some(ColdJunction::Column)
        );
        assert_eq!(
            f.noise,
            NoiseSpec::Emf {
                sigma_mv: 0.002,
                tc_type: Its90Type::S
            }
        );
        let bad = [
            (
                "type = \"C\"\n",
                "thermocouple.type",
                "unknown thermocouple type",
            ),
            (
                "type = \"K\"\nsignal = \"emf_mv\"\n",
                "thermocouple.signal",
                "cold_junction",
            ),
            (
                "type = \"K\"\ncold_junction = 20\n",
                "thermocouple.cold_junction",
                "voltage readings only",
            ),
            (
                "type = \"K\"\nsignal = \"volts\"\n",
                "thermocouple.signal",
                "unknown signal",
            ),
            (
                "type = \"T\"\nsignal = \"emf_mv\"\ncold_junction = 500\n",
                "thermocouple.cold_junction",
                "outside the type T",
            ),
            (
                "type = \"K\"\nsignal = \"emf_mv\"\ncold_junction = \"room\"\n",
                "thermocouple.cold_junction",
                "not a cold junction",
            ),
            (
                "type = \"K\"\n[noise]\nsigma_emf_mv = 0.01\n",
                "noise.sigma_emf_mv",
                "needs voltage readings",
            ),
            (
                "type = \"R\"\n[noise]\ntolerance_class = \"iec-1\"\n",
                "noise.tolerance_class",
                "not type R",
            ),
            (
                "type = \"K\"\n[noise]\ntolerance_class = \"iec-1\"\ntype = \"J\"\n",
                "noise.type",
                "differs",
            ),
        ];
        for (section, field, gist) in bad {
            let text = format!("{no_noise}[thermocouple]\n{section}");
            let e = parse(&text).unwrap_err();
            let (line, f, m) = loc(&e);
            assert_eq!(f.as_deref(), Some(field), "{section}: {e}");
            assert!(line.is_some(), "{section}: {e}");
            assert!(m.contains(gist), "{section}: {e}");
        }
    }

    #[test]
    fn bounds_section_in_si_units() {
        let f = parse(GOOD).unwrap();
        assert_eq!(f.bounds, BoundsSettings::default());
        let f = parse(&format!(
            "{GOOD}\n[bounds]\nmax_gradient = 2.5\nmin_temperature = 10.0\nmax_temperature = 90.0\n"
        ))
        .unwrap();
        // 2.5 °C/mm = 2500 K/m; 0 °C = 273.15 K (definitions of the units)
        let g = f.bounds.max_gradient_k_per_m.unwrap();
        assert!((g - 2500.0).abs() < 1e-9, "{g}");
        assert!((f.bounds.min_temperature_k.unwrap() - 283.15).abs() < 1e-9);
        assert!((f.bounds.max_temperature_k.unwrap() - 363.15).abs() < 1e-9);
        // 1 °F/in = (5/9) K / 0.0254 m = 21.872 K/m (1 in = 25.4 mm exactly)
        let text = GOOD
            .replace("length_unit = \"mm\"", "length_unit = \"in\"")
            .replace("temperature_unit = \"C\"", "temperature_unit = \"F\"")
            .replace("width = 150.0", "width = 6.0")
            .replace("height = 60", "height = 2.5")
            + "\n[bounds]\nmax_gradient = 1.0\n";
        let f = parse(&text).expect("the inch/Fahrenheit plate parses");
        let g = f.bounds.max_gradient_k_per_m.unwrap();
        assert!((g - 5.0 / 9.0 / 0.0254).abs() < 1e-9, "{g}");
    }

    #[test]
    fn good_file_and_defaults() {
        let f = parse(GOOD).unwrap();
        assert_eq!(f.plate.unknown_edges(), vec![Edge::Bottom]);
        assert_eq!(f.plate.shape().width(), 0.15);
        assert_eq!(f.fit.terms, DEFAULT_TERMS);
        assert_eq!(f.fit.smoothing, Smoothing::Auto);
        assert_eq!(f.fit.strength, StrengthRule::Default);
        assert_eq!(f.noise, NoiseSpec::Sigma(0.5));
        assert_eq!(f.uncertainty.replicates, 2000);
        assert_eq!(f.uncertainty.seed, 7);
        assert_eq!(f.uncertainty.confidence, 0.95);
        assert!(f.uncertainty.position_sigma_m.is_none());
        match f.plate.condition(Edge::Top) {
            Some(EdgeCondition::Fixed(p)) => assert!((p.value(0.0) - 298.15).abs() < 1e-12),
            other => panic!("top should be fixed, got {other:?}"),
        }
    }

    #[test]
    fn errors_point_at_the_key() {
        let cases: Vec<(String, Option<usize>, &str, &str)> = vec![
            (
                GOOD.replace("width = 150.0", "widht = 150.0"),
                Some(3),
                "plate.widht",
                "unknown key",
            ),
            (
                GOOD.replace("temperature = 25.0", "temperature = -300"),
                Some(14),
                "edges.top.temperature",
                "below absolute zero",
            ),
            (
                GOOD.replace("height = 60", "height = \"tall\""),
                Some(4),
                "plate.height",
                "infinite",
            ),
            (
                GOOD.replace("height = 60", "height = true"),
                Some(4),
                "plate.height",
                "invalid type",
            ),
            (
                GOOD.replace("\"mm\"", "\"cm\""),
                Some(5),
                "plate.length_unit",
                "unknown value",
            ),
            (
                GOOD.replace(
                    "condition = \"insulated\"\n\n[edges.right]",
                    "condition = \"convective\"\n\n[edges.right]",
                ),
                Some(17),
                "edges.left.condition",
                "needs `ambient",
            ),
            (
                GOOD.replace("[edges.left]\ncondition = \"insulated\"\n", ""),
                None,
                "edges.left",
                "no condition",
            ),
            (
                GOOD.replace("[edges.right]", "[edges.top]"),
                Some(19),
                "edges.top",
                "given twice",
            ),
            (
                GOOD.replace("sigma = 0.5", "sigma = 0.5\ntolerance_class = \"iec-1\""),
                Some(23),
                "noise.sigma",
                "not both",
            ),
            (
                GOOD.replace("sigma = 0.5", "sigma = nan"),
                Some(23),
                "noise.sigma",
                "positive",
            ),
            (
                GOOD.replace("[noise]", "[fit]\nterms = 0\n[noise]"),
                Some(23),
                "fit.terms",
                "whole number",
            ),
            (
                GOOD.replace("[noise]", "[uncertainty]\nconfidence = 1.0\n[noise]"),
                Some(23),
                "uncertainty.confidence",
                "between 0 and 1",
            ),
            (
                GOOD.replace(
                    "[edges.top]\ncondition = \"fixed\"\ntemperature = 25.0",
                    "[edges.top]\ncondition = \"fixed\"",
                ),
                Some(13),
                "edges.top.condition",
                "needs `temperature",
            ),
            (
                GOOD.replace("condition = \"unknown\"", "temperature = 3"),
                Some(9),
                "edges.bottom.condition",
                "needs the key `condition`",
            ),
            (
                GOOD.replace("[plate]", "[plate]\nwidth = 1"),
                Some(4),
                "plate.width",
                "twice",
            ),
            (
                format!("edges = 3\n{}", &GOOD[..GOOD.find("[edges").unwrap()]),
                Some(1),
                "edges",
                "expected a table",
            ),
        ];
        for (text, line, field, gist) in cases {
            let e = parse(&text).unwrap_err();
            let (l, f, m) = loc(&e);
            assert_eq!(l, line, "{e}");
            assert_eq!(f.as_deref(), Some(field), "{e}");
            assert!(m.contains(gist), "{e}");
        }
    }

    #[test]
    fn design_section_is_read_in_si_units() {
        let f = parse(GOOD).unwrap();
        assert!(!f.design.present);
        let text = format!(
            "{GOOD}\n[design]\nallowed = [{{ x = [0, 150], y = [0, 20] }}]\n\
             keep_out = [{{ x = [70, 80], y = [0, 60] }}]\nedge_distance = 3\n\
             sensor_spacing = 10\ncandidate_spacing = 0.5\nnoise = 0.2\nvariation = 5\n\
             smoothing = \"slope\"\ncriterion = \"worst\"\n"
        );
        let d = parse(&text).unwrap().design;
        assert!(d.present);
        assert_eq!(d.allowed.len(), 1);
        assert!((d.allowed[0].y_max - 0.02).abs() < 1e-15);
        assert!((d.keep_out[0].x_min - 0.07).abs() < 1e-15);
        assert!((d.edge_distance_m - 0.003).abs() < 1e-15);
        assert!((d.sensor_spacing_m - 0.01).abs() < 1e-15);
        assert_eq!(d.candidates, CandidateSource::Grid(Some(0.0005)));
        assert_eq!(d.noise_k, Some(0.2));
        assert_eq!(d.variation_k, Some(5.0));
        assert_eq!(d.smoothing, Some(Smoothing::Slope));
        assert_eq!(d.criterion, Some(Criterion::Worst));
        assert_eq!(d.line_of("design.variation"), Some(32));
        assert_eq!(d.line_of("design"), Some(25));
    }

    #[test]
    fn design_errors_point_at_the_key() {
        let cases = [
            (
                "allowed = [{ x = [0, 200], y = [0, 20] }]",
                26,
                "design.allowed",
                "outside the plate",
            ),
            (
                "allowed = [{ x = [50, 10], y = [0, 20] }]",
                26,
                "design.allowed",
                "x_min < x_max",
            ),
            (
                "keep_out = [{ x = [1, 2] }]",
                26,
                "design.keep_out.y",
                "needs the key `y`",
            ),
            (
                "edge_distance = -1",
                26,
                "design.edge_distance",
                "0 or larger",
            ),
            ("edge_distance = 30", 26, "design.edge_distance", "no room"),
            (
                "candidate_spacing = 0",
                26,
                "design.candidate_spacing",
                "positive",
            ),
            (
                "candidate_spacing = 1\ncandidates = \"c.csv\"",
                27,
                "design.candidates",
                "not both",
            ),
            ("noise = -0.1", 26, "design.noise", "positive"),
            ("variation = 0", 26, "design.variation", "positive"),
            (
                "smoothing = \"auto\"",
                26,
                "design.smoothing",
                "one smoothing order",
            ),
            (
                "criterion = \"best\"",
                26,
                "design.criterion",
                "unknown criterion",
            ),
            ("count = 3", 26, "design.count", "unknown key"),
        ];
        for (body, line, field, gist) in cases {
            let text = format!("{GOOD}\n[design]\n{body}\n");
            let e = parse(&text).unwrap_err();
            let (l, f, m) = loc(&e);
            assert_eq!(l, Some(line), "{body}: {e}");
            assert_eq!(f.as_deref(), Some(field), "{body}: {e}");
            assert!(m.contains(gist), "{body}: {e}");
        }
    }

    #[test]
    fn strip_sides_cannot_be_unknown() {
        let text = GOOD
            .replace("height = 60", "height = \"infinite\"")
            .replace("[edges.top]\ncondition = \"fixed\"\ntemperature = 25.0", "")
            .replace(
                "[edges.left]\ncondition = \"insulated\"",
                "[edges.left]\ncondition = \"unknown\"",
            );
        let e = parse(&text).unwrap_err();
        let (l, f, m) = loc(&e);
        assert_eq!(f.as_deref(), Some("edges.left.condition"));
        assert_eq!(l, Some(15)); // the three lines of [edges.top] are gone
        assert!(m.contains("long strip"), "{m}");
    }

    proptest::proptest! {
        #![proptest_config(proptest::prelude::ProptestConfig::with_cases(300))]
        /// Any value on any line of a valid file gives a valid plate or an invalid-input
        /// error, never a panic.
        #[test]
        fn mutated_files_never_panic(line in 0usize..24, junk in "[ -~]{0,24}") {
            let text: Vec<String> = GOOD
                .lines()
                .enumerate()
                .map(|(i, l)| match (i == line, l.split_once('=')) {
                    (true, Some((k, _))) => format!("{k}= {junk}"),
                    (true, None) => junk.clone(),
                    _ => l.to_string(),
                })
                .collect();
            if let Err(e) = parse(&text.join("\n")) {
                proptest::prop_assert_eq!(e.exit_code(), 2, "{}", e);
            }
        }
    }

    #[test]
    fn garbage_is_an_error_not_a_panic() {
        for text in [
            "",
            "\u{0}\u{1}\u{2}",
            "[plate",
            "width = 1e999999",
            "[[plate]]\n",
        ] {
            let e = parse(text).unwrap_err();
            assert_eq!(e.exit_code(), 2, "{e}");
        }
    }
}
