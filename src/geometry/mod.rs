//! Plate geometry and edge conditions: the problem the forward model solves.
//!
//! The plate is a rectangle `0 < x < width`, `0 < y < height`, or a long strip
//! `0 < x < width`, `y > 0` with no top edge. The origin is the bottom-left corner. Each edge
//! carries one [`EdgeCondition`]. All values are SI: metres and kelvin.
//!
//! Positions along an edge are measured from the edge's lower coordinate: `x` on the bottom
//! and top edges, `y` on the left and right edges (`docs/case-files.md`, outputs).

mod profile;

pub use profile::EdgeProfile;

use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};
use std::fmt;

/// One of the four edges of a plate.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Edge {
    /// `y = 0`
    Bottom,
    /// `x = width`
    Right,
    /// `y = height`
    Top,
    /// `x = 0`
    Left,
}

impl Edge {
    /// The four edges, in a fixed order (bottom, right, top, left).
    pub const ALL: [Edge; 4] = [Edge::Bottom, Edge::Right, Edge::Top, Edge::Left];

    /// Index in [`Edge::ALL`].
    pub fn index(self) -> usize {
        match self {
            Edge::Bottom => 0,
            Edge::Right => 1,
            Edge::Top => 2,
            Edge::Left => 3,
        }
    }

    /// The name used in files (`bottom`, `right`, `top`, `left`).
    pub fn name(self) -> &'static str {
        match self {
            Edge::Bottom => "bottom",
            Edge::Right => "right",
            Edge::Top => "top",
            Edge::Left => "left",
        }
    }

    /// Parse an edge name as written in files.
    pub fn parse(s: &str) -> Option<Edge> {
        match s.trim() {
            "bottom" => Some(Edge::Bottom),
            "right" => Some(Edge::Right),
            "top" => Some(Edge::Top),
            "left" => Some(Edge::Left),
            _ => None,
        }
    }

    /// The edges adjacent to this one, at the start (position 0) and at the end of its
    /// position coordinate.
    pub fn neighbours(self) -> (Edge, Edge) {
        match self {
            Edge::Bottom | Edge::Top => (Edge::Left, Edge::Right),
            Edge::Left | Edge::Right => (Edge::Bottom, Edge::Top),
        }
    }

    /// The edge across the plate.
    pub fn opposite(self) -> Edge {
        match self {
            Edge::Bottom => Edge::Top,
            Edge::Top => Edge::Bottom,
            Edge::Left => Edge::Right,
            Edge::Right => Edge::Left,
        }
    }

    /// Whether the position coordinate along this edge is `x` (bottom, top) rather than `y`.
    pub fn runs_along_x(self) -> bool {
        matches!(self, Edge::Bottom | Edge::Top)
    }
}

impl fmt::Display for Edge {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// A point of the plate, in metres.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Point {
    /// Along the width, from the left edge.
    pub x: f64,
    /// Along the height, from the bottom edge.
    pub y: f64,
}

impl Point {
    /// A point at `(x, y)` metres.
    pub fn new(x: f64, y: f64) -> Self {
        Point { x, y }
    }
}

/// The outline of the plate.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum Shape {
    /// `0 < x < width_m`, `0 < y < height_m`.
    Rectangle {
        /// Extent along x, metres.
        width_m: f64,
        /// Extent along y, metres.
        height_m: f64,
    },
    /// `0 < x < width_m`, `y > 0`: a long strip with no top edge, bounded far from the
    /// bottom.
    Strip {
        /// Extent along x, metres.
        width_m: f64,
    },
}

impl Shape {
    /// Width (extent along x), metres.
    pub fn width(&self) -> f64 {
        match *self {
            Shape::Rectangle { width_m, .. } | Shape::Strip { width_m } => width_m,
        }
    }

    /// Height, metres; `None` for a strip.
    pub fn height(&self) -> Option<f64> {
        match *self {
            Shape::Rectangle { height_m, .. } => Some(height_m),
            Shape::Strip { .. } => None,
        }
    }

    /// Whether the plate has this edge (a strip has no top).
    pub fn has_edge(&self, edge: Edge) -> bool {
        !(matches!(self, Shape::Strip { .. }) && edge == Edge::Top)
    }

    /// Length of an edge, metres; `None` for the infinite sides of a strip (and for the
    /// strip's missing top).
    pub fn edge_length(&self, edge: Edge) -> Option<f64> {
        if edge.runs_along_x() {
            self.has_edge(edge).then(|| self.width())
        } else {
            self.height()
        }
    }

    /// Distance from `edge` to the edge across the plate, metres; `None` from the bottom of a
    /// strip (nothing across it).
    pub fn across(&self, edge: Edge) -> Option<f64> {
        if edge.runs_along_x() {
            self.height()
        } else {
            Some(self.width())
        }
    }

    /// Distance from `p` to `edge`, measured into the plate, metres.
    pub fn depth_from(&self, edge: Edge, p: Point) -> f64 {
        match edge {
            Edge::Bottom => p.y,
            Edge::Left => p.x,
            Edge::Right => self.width() - p.x,
            Edge::Top => self.height().map_or(f64::INFINITY, |h| h - p.y),
        }
    }

    /// Position of `p` along `edge` (x on bottom/top, y on left/right).
    pub fn position_along(&self, edge: Edge, p: Point) -> f64 {
        if edge.runs_along_x() { p.x } else { p.y }
    }

    /// The point on `edge` at `position` along it.
    pub fn point_on(&self, edge: Edge, position: f64) -> Point {
        match edge {
            Edge::Bottom => Point::new(position, 0.0),
            Edge::Top => Point::new(position, self.height().unwrap_or(f64::INFINITY)),
            Edge::Left => Point::new(0.0, position),
            Edge::Right => Point::new(self.width(), position),
        }
    }

    /// Whether `p` lies strictly inside the plate.
    pub fn contains_strictly(&self, p: Point) -> bool {
        let inside_x = p.x > 0.0 && p.x < self.width();
        let inside_y = p.y > 0.0 && self.height().is_none_or(|h| p.y < h);
        inside_x && inside_y
    }
}

/// The condition on one edge.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub enum EdgeCondition {
    /// A known temperature: constant or a profile along the edge (kelvin).
    Fixed(EdgeProfile),
    /// Zero normal heat flux.
    Insulated,
    /// The temperature profile to reconstruct.
    Unknown,
    /// Heat leaves to (or comes from) a fluid through a heat transfer coefficient: the Robin
    /// condition `−κ ∂T/∂n_out = h (T − T∞)`.
    Convective(Convection),
}

/// The heat transfer coefficient of a convective edge.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum HeatTransfer {
    /// Known, W/(m² K).
    Known(f64),
    /// To be estimated from the readings, within `[low, high]` W/(m² K).
    Unknown {
        /// Lower end of the search range, W/(m² K).
        low: f64,
        /// Upper end of the search range, W/(m² K).
        high: f64,
    },
}

/// A convective edge's data.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Convection {
    /// The heat transfer coefficient.
    pub h: HeatTransfer,
    /// The fluid temperature `T∞`, kelvin.
    pub ambient_k: f64,
}

impl Convection {
    /// The known coefficient, W/(m² K); `None` while it is unknown.
    pub fn known_h(&self) -> Option<f64> {
        match self.h {
            HeatTransfer::Known(h) => Some(h),
            HeatTransfer::Unknown { .. } => None,
        }
    }
}

impl EdgeCondition {
    /// Whether the edge prescribes a temperature (fixed or unknown): a Dirichlet edge.
    pub fn is_dirichlet(&self) -> bool {
        matches!(self, EdgeCondition::Fixed(_) | EdgeCondition::Unknown)
    }

    /// Whether the edge ties the temperature level: it holds a temperature or exchanges heat
    /// with a fluid.
    pub fn fixes_level(&self) -> bool {
        !matches!(self, EdgeCondition::Insulated)
    }

    /// The word used in plate files.
    pub fn name(&self) -> &'static str {
        match self {
            EdgeCondition::Fixed(_) => "fixed",
            EdgeCondition::Insulated => "insulated",
            EdgeCondition::Unknown => "unknown",
            EdgeCondition::Convective(_) => "convective",
        }
    }
}

/// A validated plate: outline, one condition per edge, optional conductivity.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Plate {
    shape: Shape,
    /// Indexed by [`Edge::index`]; the top of a strip is `None`.
    conditions: [Option<EdgeCondition>; 4],
    conductivity: Option<f64>,
}

/// Check a convective edge's numbers: a conductivity to divide by, a finite positive `h`
/// (or a valid search range) and a finite fluid temperature.
fn validate_convection(edge: Edge, conv: &Convection, conductivity: Option<f64>) -> Result<()> {
    if conductivity.is_none() {
        return Err(Error::invalid_field(
            "plate.conductivity",
            format!(
                "the {edge} edge is convective, so the plate needs its conductivity in W/(m K) \
                 (add conductivity = ... under [plate]): h/conductivity sets the edge's condition"
            ),
        ));
    }
    match conv.h {
        HeatTransfer::Known(h) if !(h.is_finite() && h > 0.0) => {
            return Err(Error::invalid_field(
                format!("edges.{edge}.h"),
                format!(
                    "the heat transfer coefficient must be a positive number in W/(m^2 K), not {h}"
                ),
            ));
        }
        HeatTransfer::Unknown { low, high }
            if !(low.is_finite() && high.is_finite() && low > 0.0 && high > low) =>
        {
            return Err(Error::invalid_field(
                format!("edges.{edge}.h_range"),
                format!(
                    "the search range for h must be two positive numbers in W/(m^2 K), the \
                     second larger, not [{low}, {high}]"
                ),
            ));
        }
        _ => {}
    }
    if !conv.ambient_k.is_finite() {
        return Err(Error::invalid_field(
            format!("edges.{edge}.ambient"),
            "the fluid temperature must be a finite number",
        ));
    }
    Ok(())
}

impl Plate {
    /// Build and validate a plate.
    ///
    /// `conditions` is indexed by [`Edge::index`]. Errors name the field at fault
    /// (`plate.width`, `edges.left`, ...) so that the input layer can point at its line:
    /// - sizes must be finite and positive; conductivity finite and positive;
    /// - every edge of the outline needs exactly one condition; a strip has no top;
    /// - at least one edge must fix the temperature level (fixed or unknown);
    /// - the sides of a strip cannot be unknown, and a fixed side of a strip must be
    ///   constant (a profile along an infinite side has no series of this kind);
    /// - a fixed profile must span its edge.
    pub fn new(
        shape: Shape,
        conditions: [Option<EdgeCondition>; 4],
        conductivity: Option<f64>,
    ) -> Result<Plate> {
        let w = shape.width();
        if !(w.is_finite() && w > 0.0) {
            return Err(Error::invalid_field(
                "plate.width",
                "the width must be a positive number".to_string(),
            ));
        }
        if let Some(h) = shape.height() {
            if !(h.is_finite() && h > 0.0) {
                return Err(Error::invalid_field(
                    "plate.height",
                    "the height must be a positive number or \"infinite\"".to_string(),
                ));
            }
        }
        if let Some(k) = conductivity {
            if !(k.is_finite() && k > 0.0) {
                return Err(Error::invalid_field(
                    "plate.conductivity",
                    format!("the conductivity must be a positive number in W/(m K), not {k}"),
                ));
            }
        }
        for edge in Edge::ALL {
            let c = &conditions[edge.index()];
            match (shape.has_edge(edge), c) {
                (true, None) => {
                    return Err(Error::invalid_field(
                        format!("edges.{edge}"),
                        format!(
                            "the {edge} edge has no condition; add an [edges.{edge}] section \
                             with condition = \"fixed\", \"insulated\" or \"unknown\""
                        ),
                    ));
                }
                (false, Some(_)) => {
                    return Err(Error::invalid_field(
                        format!("edges.{edge}"),
                        "a long strip (height = \"infinite\") has no top edge; remove [edges.top]",
                    ));
                }
                _ => {}
            }
            if let Some(EdgeCondition::Fixed(profile)) = c {
                let len = shape.edge_length(edge);
                if let Some(len) = len {
                    profile
                        .check_spans(len)
                        .map_err(|m| Error::invalid_field(format!("edges.{edge}.profile"), m))?;
                } else if !profile.is_constant() {
                    return Err(Error::invalid_field(
                        format!("edges.{edge}.profile"),
                        format!(
                            "the {edge} side of a long strip is infinite: it can be fixed at a \
                             constant temperature, not at a profile"
                        ),
                    ));
                }
            }
            if let Some(EdgeCondition::Convective(conv)) = c {
                validate_convection(edge, conv, conductivity)?;
                if shape.edge_length(edge).is_none() {
                    return Err(Error::invalid_field(
                        format!("edges.{edge}.condition"),
                        format!(
                            "the {edge} side of a long strip is infinite; a convective side of a \
                             strip is not supported in this version (only the bottom of a strip \
                             may be convective): use a finite height, or a fixed or insulated side"
                        ),
                    ));
                }
            }
            if matches!(c, Some(EdgeCondition::Unknown)) && shape.edge_length(edge).is_none() {
                return Err(Error::invalid_field(
                    format!("edges.{edge}.condition"),
                    format!(
                        "the {edge} side of a long strip is infinite and cannot be unknown; \
                         only the bottom of a strip can be reconstructed"
                    ),
                ));
            }
        }
        let fixes_level = conditions.iter().flatten().any(EdgeCondition::fixes_level);
        if !fixes_level {
            return Err(Error::invalid_field(
                "edges",
                "every edge is insulated, so nothing fixes the temperature level and the \
                 problem has no unique answer; make at least one edge fixed, unknown or convective",
            ));
        }
        Ok(Plate {
            shape,
            conditions,
            conductivity,
        })
    }

    /// The outline.
    pub fn shape(&self) -> &Shape {
        &self.shape
    }

    /// Thermal conductivity, W/(m K), when given.
    pub fn conductivity(&self) -> Option<f64> {
        self.conductivity
    }

    /// The condition on `edge`; `None` for the top of a strip.
    pub fn condition(&self, edge: Edge) -> Option<&EdgeCondition> {
        self.conditions[edge.index()].as_ref()
    }

    /// The edges whose profile is unknown, in [`Edge::ALL`] order.
    pub fn unknown_edges(&self) -> Vec<Edge> {
        Edge::ALL
            .into_iter()
            .filter(|&e| matches!(self.condition(e), Some(EdgeCondition::Unknown)))
            .collect()
    }

    /// Whether `edge` exists and prescribes a temperature (fixed or unknown).
    pub fn is_dirichlet(&self, edge: Edge) -> bool {
        self.condition(edge)
            .is_some_and(EdgeCondition::is_dirichlet)
    }

    /// The convection data of `edge`, when it is convective.
    pub fn convection(&self, edge: Edge) -> Option<&Convection> {
        match self.condition(edge) {
            Some(EdgeCondition::Convective(c)) => Some(c),
            _ => None,
        }
    }

    /// `β = h/κ` of a convective edge whose coefficient is known, 1/m.
    pub fn convective_beta(&self, edge: Edge) -> Option<f64> {
        let h = self.convection(edge)?.known_h()?;
        Some(h / self.conductivity?)
    }

    /// The convective edges whose heat transfer coefficient is to be estimated, with their
    /// search ranges (W/(m² K)).
    pub fn unknown_heat_transfer(&self) -> Vec<(Edge, f64, f64)> {
        Edge::ALL
            .into_iter()
            .filter_map(|e| match self.convection(e)?.h {
                HeatTransfer::Unknown { low, high } => Some((e, low, high)),
                HeatTransfer::Known(_) => None,
            })
            .collect()
    }

    /// A copy of this plate with the heat transfer coefficient of the convective `edge` set to
    /// `h` (W/(m² K)).
    pub fn with_heat_transfer(&self, edge: Edge, h: f64) -> Result<Plate> {
        let mut conditions = self.conditions.clone();
        match &mut conditions[edge.index()] {
            Some(EdgeCondition::Convective(c)) => c.h = HeatTransfer::Known(h),
            _ => {
                return Err(Error::Internal(format!(
                    "the {edge} edge is not convective"
                )));
            }
        }
        Plate::new(self.shape, conditions, self.conductivity)
    }

    /// Whether `edge` exists and is insulated.
    pub fn is_insulated(&self, edge: Edge) -> bool {
        matches!(self.condition(edge), Some(EdgeCondition::Insulated))
    }

    /// A copy of this plate with the unknown edges fixed at the given profiles: the "true"
    /// plate behind a simulation. Every unknown edge must be given a profile.
    pub fn with_unknowns_fixed(&self, profiles: &[(Edge, EdgeProfile)]) -> Result<Plate> {
        let mut conditions = self.conditions.clone();
        for edge in self.unknown_edges() {
            let profile = profiles
                .iter()
                .find(|(e, _)| *e == edge)
                .map(|(_, p)| p.clone())
                .ok_or_else(|| {
                    Error::invalid_field(
                        "edge",
                        format!("no truth profile given for the unknown {edge} edge"),
                    )
                })?;
            conditions[edge.index()] = Some(EdgeCondition::Fixed(profile));
        }
        Plate::new(self.shape, conditions, self.conductivity)
    }
}
