//! Plate geometry and edge conditions: the problem the forward model solves.
//!
//! The plate is a rectangle `0 < x < width`, `0 < y < height`, or a long strip
//! `0 < x < width`, `y > 0` with no top edge (origin at the bottom-left corner); or a round
//! part: a disk `r < R` with one edge, its rim, or an annulus `a < r < b` (a pipe wall) with an
//! inner and an outer edge (origin at the centre). Each edge carries one [`EdgeCondition`].
//! All values are SI: metres and kelvin.
//!
//! Positions along an edge are measured from the edge's lower coordinate: `x` on the bottom
//! and top edges, `y` on the left and right edges. Along a circular edge of radius `r_e` the
//! position is the arc length `r_e θ`, with `θ` counter-clockwise from `+x` in `[0, 2π)`, so
//! that every length-based quantity (gradients, resolution lengths, heat flows) keeps its
//! meaning; files give and receive the angle in degrees (`docs/case-files.md`, outputs).

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
    /// The inner circle of an annulus, `r = a`.
    Inner,
    /// The outer circle of an annulus, `r = b`.
    Outer,
    /// The rim of a disk, `r = R`.
    Rim,
}

impl Edge {
    /// Every edge any outline can have, in a fixed order (bottom, right, top, left of a
    /// rectangle; inner, outer of an annulus; rim of a disk). A plate has only some of them
    /// ([`Shape::has_edge`]).
    pub const ALL: [Edge; 7] = [
        Edge::Bottom,
        Edge::Right,
        Edge::Top,
        Edge::Left,
        Edge::Inner,
        Edge::Outer,
        Edge::Rim,
    ];

    /// The four edges of a rectangle.
    pub const STRAIGHT: [Edge; 4] = [Edge::Bottom, Edge::Right, Edge::Top, Edge::Left];

    /// Index in [`Edge::ALL`].
    pub fn index(self) -> usize {
        match self {
            Edge::Bottom => 0,
            Edge::Right => 1,
            Edge::Top => 2,
            Edge::Left => 3,
            Edge::Inner => 4,
            Edge::Outer => 5,
            Edge::Rim => 6,
        }
    }

    /// The name used in files (`bottom`, `right`, `top`, `left`, `inner`, `outer`, `rim`).
    pub fn name(self) -> &'static str {
        match self {
            Edge::Bottom => "bottom",
            Edge::Right => "right",
            Edge::Top => "top",
            Edge::Left => "left",
            Edge::Inner => "inner",
            Edge::Outer => "outer",
            Edge::Rim => "rim",
        }
    }

    /// Parse an edge name as written in files.
    pub fn parse(s: &str) -> Option<Edge> {
        Edge::ALL.into_iter().find(|e| e.name() == s.trim())
    }

    /// Whether the edge is a circle (the position along it is an arc length, written as an
    /// angle in files).
    pub fn is_circular(self) -> bool {
        matches!(self, Edge::Inner | Edge::Outer | Edge::Rim)
    }

    /// The edges adjacent to this one, at the start (position 0) and at the end of its
    /// position coordinate. A circle closes on itself: it has no neighbours, and the answer
    /// for it is the circle twice.
    pub fn neighbours(self) -> (Edge, Edge) {
        match self {
            Edge::Bottom | Edge::Top => (Edge::Left, Edge::Right),
            Edge::Left | Edge::Right => (Edge::Bottom, Edge::Top),
            Edge::Inner | Edge::Outer | Edge::Rim => (self, self),
        }
    }

    /// The edge across the plate (across a disk's centre: the rim itself).
    pub fn opposite(self) -> Edge {
        match self {
            Edge::Bottom => Edge::Top,
            Edge::Top => Edge::Bottom,
            Edge::Left => Edge::Right,
            Edge::Right => Edge::Left,
            Edge::Inner => Edge::Outer,
            Edge::Outer => Edge::Inner,
            Edge::Rim => Edge::Rim,
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
    /// A disk `r < radius_m` around the origin; its one edge is the [`Edge::Rim`].
    Disk {
        /// Radius, metres.
        radius_m: f64,
    },
    /// An annulus `inner_m < r < outer_m` around the origin (a pipe wall, a ring); its edges
    /// are [`Edge::Inner`] and [`Edge::Outer`].
    Annulus {
        /// Inner radius, metres.
        inner_m: f64,
        /// Outer radius, metres.
        outer_m: f64,
    },
}

/// The angle of `p` about the origin, counter-clockwise from `+x`, in `[0, 2π)`.
pub fn angle_of(p: Point) -> f64 {
    let t = p.y.atan2(p.x);
    if t < 0.0 {
        // `t + 2π` can round to exactly 2π for a tiny negative angle
        let w = t + std::f64::consts::TAU;
        if w >= std::f64::consts::TAU { 0.0 } else { w }
    } else {
        t
    }
}

impl Shape {
    /// Width, metres: the extent along x of a rectangle or strip; the outer diameter of a
    /// round part (its extent along x, the scale used where a plate size is needed).
    pub fn width(&self) -> f64 {
        match *self {
            Shape::Rectangle { width_m, .. } | Shape::Strip { width_m } => width_m,
            Shape::Disk { radius_m } => 2.0 * radius_m,
            Shape::Annulus { outer_m, .. } => 2.0 * outer_m,
        }
    }

    /// Height, metres; `None` for a strip; the outer diameter of a round part.
    pub fn height(&self) -> Option<f64> {
        match *self {
            Shape::Rectangle { height_m, .. } => Some(height_m),
            Shape::Strip { .. } => None,
            Shape::Disk { .. } | Shape::Annulus { .. } => Some(self.width()),
        }
    }

    /// The plate's smaller extent, metres: the smaller side of a rectangle, a strip's width,
    /// an annulus's wall thickness, a disk's diameter (the scale of design defaults).
    pub fn smaller_side(&self) -> f64 {
        match *self {
            Shape::Annulus { inner_m, outer_m } => outer_m - inner_m,
            _ => self.height().map_or(self.width(), |h| h.min(self.width())),
        }
    }

    /// Whether the outline is round (a disk or an annulus, origin at the centre).
    pub fn is_round(&self) -> bool {
        matches!(self, Shape::Disk { .. } | Shape::Annulus { .. })
    }

    /// The radius of a circular edge of this outline, metres.
    pub fn radius_of(&self, edge: Edge) -> Option<f64> {
        match (*self, edge) {
            (Shape::Disk { radius_m }, Edge::Rim) => Some(radius_m),
            (Shape::Annulus { inner_m, .. }, Edge::Inner) => Some(inner_m),
            (Shape::Annulus { outer_m, .. }, Edge::Outer) => Some(outer_m),
            _ => None,
        }
    }

    /// The edges of this outline, in [`Edge::ALL`] order.
    pub fn edges(&self) -> Vec<Edge> {
        Edge::ALL
            .into_iter()
            .filter(|&e| self.has_edge(e))
            .collect()
    }

    /// Whether the plate has this edge (a strip has no top; a disk only its rim; an annulus
    /// its inner and outer circles).
    pub fn has_edge(&self, edge: Edge) -> bool {
        match self {
            Shape::Rectangle { .. } => !edge.is_circular(),
            Shape::Strip { .. } => !edge.is_circular() && edge != Edge::Top,
            Shape::Disk { .. } => edge == Edge::Rim,
            Shape::Annulus { .. } => matches!(edge, Edge::Inner | Edge::Outer),
        }
    }

    /// Length of an edge, metres (a circle's circumference); `None` for the infinite sides of
    /// a strip and for edges the outline does not have.
    pub fn edge_length(&self, edge: Edge) -> Option<f64> {
        if !self.has_edge(edge) {
            return None;
        }
        if let Some(r) = self.radius_of(edge) {
            return Some(std::f64::consts::TAU * r);
        }
        if edge.runs_along_x() {
            Some(self.width())
        } else {
            self.height()
        }
    }

    /// Distance from `edge` to the edge across the plate, metres; `None` from the bottom of a
    /// strip (nothing across it). From a disk's rim: its radius (the distance to the centre).
    pub fn across(&self, edge: Edge) -> Option<f64> {
        match *self {
            Shape::Disk { radius_m } => Some(radius_m),
            Shape::Annulus { inner_m, outer_m } => Some(outer_m - inner_m),
            _ if edge.runs_along_x() => self.height(),
            _ => Some(self.width()),
        }
    }

    /// Distance from `p` to `edge`, measured into the plate, metres.
    pub fn depth_from(&self, edge: Edge, p: Point) -> f64 {
        let r = p.x.hypot(p.y);
        match edge {
            Edge::Bottom => p.y,
            Edge::Left => p.x,
            Edge::Right => self.width() - p.x,
            Edge::Top => self.height().map_or(f64::INFINITY, |h| h - p.y),
            Edge::Inner => r - self.radius_of(edge).unwrap_or(0.0),
            Edge::Outer | Edge::Rim => self.radius_of(edge).unwrap_or(0.0) - r,
        }
    }

    /// Position of `p` along `edge` (x on bottom/top, y on left/right, the arc length
    /// `r_e θ` of `p`'s angle on a circle of radius `r_e`).
    pub fn position_along(&self, edge: Edge, p: Point) -> f64 {
        if let Some(r) = self.radius_of(edge) {
            return r * angle_of(p);
        }
        if edge.runs_along_x() { p.x } else { p.y }
    }

    /// The point on `edge` at `position` along it.
    pub fn point_on(&self, edge: Edge, position: f64) -> Point {
        match edge {
            Edge::Bottom => Point::new(position, 0.0),
            Edge::Top => Point::new(position, self.height().unwrap_or(f64::INFINITY)),
            Edge::Left => Point::new(0.0, position),
            Edge::Right => Point::new(self.width(), position),
            Edge::Inner | Edge::Outer | Edge::Rim => {
                let r = self.radius_of(edge).unwrap_or(0.0);
                let t = position / r;
                Point::new(r * t.cos(), r * t.sin())
            }
        }
    }

    /// Whether `p` lies strictly inside the plate.
    pub fn contains_strictly(&self, p: Point) -> bool {
        match *self {
            Shape::Disk { radius_m } => p.x.hypot(p.y) < radius_m,
            Shape::Annulus { inner_m, outer_m } => {
                let r = p.x.hypot(p.y);
                r > inner_m && r < outer_m
            }
            _ => {
                let inside_x = p.x > 0.0 && p.x < self.width();
                let inside_y = p.y > 0.0 && self.height().is_none_or(|h| p.y < h);
                inside_x && inside_y
            }
        }
    }

    /// The period of positions along `edge`: a circle's circumference; `None` on a straight
    /// edge.
    pub fn period(&self, edge: Edge) -> Option<f64> {
        self.radius_of(edge).map(|r| std::f64::consts::TAU * r)
    }

    /// The smallest interval of positions along `edge` that holds every one of `positions`:
    /// `[min, max]` on a straight edge; on a circle the shortest arc holding them, written
    /// `[start, end]` counter-clockwise, so that `start > end` when it wraps through 0 (for
    /// instance 350° to 12°). `None` for no positions.
    pub fn position_hull(&self, edge: Edge, positions: &[f64]) -> Option<[f64; 2]> {
        let mut p: Vec<f64> = positions
            .iter()
            .copied()
            .filter(|v| v.is_finite())
            .collect();
        if p.is_empty() {
            return None;
        }
        let Some(period) = self.period(edge) else {
            let lo = p.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = p.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            return Some([lo, hi]);
        };
        for v in &mut p {
            *v = v.rem_euclid(period);
        }
        p.sort_by(f64::total_cmp);
        // the arc is the complement of the largest gap between neighbours round the circle
        let n = p.len();
        let mut best = (p[0] + period - p[n - 1], n - 1); // the gap through 0
        for i in 0..n - 1 {
            let gap = p[i + 1] - p[i];
            if gap > best.0 {
                best = (gap, i);
            }
        }
        let (_, i) = best;
        Some(if i == n - 1 {
            [p[0], p[n - 1]]
        } else {
            [p[i + 1], p[i]]
        })
    }

    /// Whether position `s` along `edge` lies in `interval` (an arc of [`Self::position_hull`]
    /// on a circle, which may wrap through 0).
    pub fn interval_contains(&self, edge: Edge, interval: [f64; 2], s: f64) -> bool {
        let [lo, hi] = interval;
        match self.period(edge) {
            None => s >= lo && s <= hi,
            Some(period) => {
                let s = s.rem_euclid(period);
                // a position at the full turn is at 0 again
                let s_alt = s + period;
                if lo <= hi {
                    (s >= lo && s <= hi) || (s_alt >= lo && s_alt <= hi)
                } else {
                    s >= lo || s <= hi
                }
            }
        }
    }

    /// Whether `p` lies inside the plate or on its outline.
    pub fn contains(&self, p: Point) -> bool {
        let tol = 1e-12 * self.width();
        match *self {
            Shape::Disk { radius_m } => p.x.hypot(p.y) <= radius_m + tol,
            Shape::Annulus { inner_m, outer_m } => {
                let r = p.x.hypot(p.y);
                r >= inner_m - tol && r <= outer_m + tol
            }
            _ => {
                let inside_x = p.x >= -tol && p.x <= self.width() + tol;
                let inside_y = p.y >= -tol && self.height().is_none_or(|h| p.y <= h + tol);
                inside_x && inside_y
            }
        }
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
    /// Indexed by [`Edge::index`]; edges the outline lacks (the top of a strip, the circles
    /// of a rectangle, the sides of a round part) are `None`.
    conditions: [Option<EdgeCondition>; 7],
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
        let [b, r, t, l] = conditions;
        Plate::build(shape, [b, r, t, l, None, None, None], conductivity)
    }

    /// Build and validate a plate of any outline from the conditions of its edges, with the
    /// checks of [`Plate::new`]; for a round plate (a disk or an annulus) radii must be finite
    /// and positive,
    /// and an annulus's inner radius smaller than its outer one. A fixed profile along a
    /// circle must span `[0, 2π r]` (the reader closes a periodic profile, see
    /// [`EdgeProfile::periodic`]).
    pub fn from_edges(
        shape: Shape,
        conditions: &[(Edge, EdgeCondition)],
        conductivity: Option<f64>,
    ) -> Result<Plate> {
        let mut all: [Option<EdgeCondition>; 7] = Default::default();
        for (e, c) in conditions {
            all[e.index()] = Some(c.clone());
        }
        Plate::build(shape, all, conductivity)
    }

    fn build(
        shape: Shape,
        conditions: [Option<EdgeCondition>; 7],
        conductivity: Option<f64>,
    ) -> Result<Plate> {
        match shape {
            Shape::Disk { radius_m } if !(radius_m.is_finite() && radius_m > 0.0) => {
                return Err(Error::invalid_field(
                    "plate.radius",
                    "the radius must be a positive number",
                ));
            }
            Shape::Annulus { inner_m, outer_m } => {
                if !(inner_m.is_finite() && inner_m > 0.0) {
                    return Err(Error::invalid_field(
                        "plate.inner_radius",
                        "the inner radius must be a positive number",
                    ));
                }
                if !(outer_m.is_finite() && outer_m > inner_m) {
                    return Err(Error::invalid_field(
                        "plate.outer_radius",
                        "the outer radius must be a number larger than the inner radius",
                    ));
                }
            }
            _ => {}
        }
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
                    let names: Vec<&str> = shape.edges().iter().map(|e| e.name()).collect();
                    return Err(Error::invalid_field(
                        format!("edges.{edge}"),
                        if matches!(shape, Shape::Strip { .. }) {
                            "a long strip (height = \"infinite\") has no top edge; remove [edges.top]"
                                .to_string()
                        } else {
                            format!(
                                "this plate has no {edge} edge (its edges are {}); remove \
                                 [edges.{edge}]",
                                names.join(", ")
                            )
                        },
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
        Plate::build(self.shape, conditions, self.conductivity)
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
        Plate::build(self.shape, conditions, self.conductivity)
    }
}
