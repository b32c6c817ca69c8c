//! The corner base: a simple harmonic function that carries the corner temperatures.
//!
//! `B(x, y)` is taken from `span{1, x, y, xy}` — every member is harmonic — restricted so that
//! its normal derivative vanishes on insulated edges (an insulated left or right edge removes
//! `x` and `xy`; an insulated bottom or top, or a strip's missing top, removes `y` and `xy`).
//! It interpolates the temperatures at the *held corners*, where both edges prescribe a
//! temperature. Subtracting `B` from every edge's data makes that data vanish at the held
//! corners, so the sine series of the edges converge as `1/n²` instead of `1/n`, and an
//! unknown edge's profile is `B` along the edge (the *lift*) plus its series: the profile meets
//! the neighbouring held temperatures at the corners by construction.
//!
//! Corner values: where a fixed edge meets an unknown one, the fixed edge's value; where two
//! fixed edges meet and disagree (a temperature jump), their mean (the jump is left to the
//! series, which converges inside the plate); where two unknown edges meet, a free parameter
//! of the model. On a long strip a fixed side is constant and has no series, so `B` takes the
//! side's temperature at its corner whatever the bottom is.

use crate::geometry::{Edge, EdgeCondition, Plate, Point, Shape};

/// The four corners, counter-clockwise from the origin.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Corner {
    /// `(0, 0)`: bottom and left.
    BottomLeft,
    /// `(W, 0)`: bottom and right.
    BottomRight,
    /// `(W, H)`: top and right.
    TopRight,
    /// `(0, H)`: top and left.
    TopLeft,
}

impl Corner {
    /// All corners, counter-clockwise from the origin.
    pub const ALL: [Corner; 4] = [
        Corner::BottomLeft,
        Corner::BottomRight,
        Corner::TopRight,
        Corner::TopLeft,
    ];

    /// The horizontal and vertical edges meeting at this corner.
    pub fn edges(self) -> (Edge, Edge) {
        match self {
            Corner::BottomLeft => (Edge::Bottom, Edge::Left),
            Corner::BottomRight => (Edge::Bottom, Edge::Right),
            Corner::TopRight => (Edge::Top, Edge::Right),
            Corner::TopLeft => (Edge::Top, Edge::Left),
        }
    }

    /// Position of the corner along `edge` (which must meet it), metres.
    pub fn position_on(self, edge: Edge, shape: &Shape) -> f64 {
        let at_far_x = matches!(self, Corner::BottomRight | Corner::TopRight);
        let at_far_y = matches!(self, Corner::TopRight | Corner::TopLeft);
        if edge.runs_along_x() {
            if at_far_x { shape.width() } else { 0.0 }
        } else if at_far_y {
            shape.height().unwrap_or(f64::INFINITY)
        } else {
            0.0
        }
    }

    fn index(self) -> usize {
        self as usize
    }

    /// A name for people and files.
    pub fn name(self) -> &'static str {
        match self {
            Corner::BottomLeft => "bottom-left",
            Corner::BottomRight => "bottom-right",
            Corner::TopRight => "top-right",
            Corner::TopLeft => "top-left",
        }
    }
}

/// What the base knows about a corner's temperature.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum CornerValue {
    /// The base does not use this corner.
    Unused,
    /// A known temperature, kelvin.
    Known(f64),
    /// The model parameter with this index.
    Parameter(usize),
}

/// Which functions the base may use.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Span {
    /// `1, x, y, xy`: bilinear in the four corners.
    Bilinear,
    /// `1, y`: a left or right edge is insulated; the held corners lie on one vertical side.
    AlongY,
    /// `1, x`: a bottom or top edge is insulated (or the plate is a strip).
    AlongX,
    /// `1`: at most one held corner.
    Constant,
}

/// The corner base `B`.
#[derive(Debug, Clone, PartialEq)]
pub struct Base {
    span: Span,
    width: f64,
    height: f64,
    values: [CornerValue; 4],
}

impl Base {
    /// Build the base for a plate. `next_parameter` is the index the first corner parameter
    /// gets; the corners that become parameters are returned alongside, in order.
    pub fn new(plate: &Plate, next_parameter: usize) -> (Base, Vec<Corner>) {
        let shape = plate.shape();
        let strip = shape.height().is_none();
        let ins_v = plate.is_insulated(Edge::Left) || plate.is_insulated(Edge::Right);
        let ins_h = strip || plate.is_insulated(Edge::Bottom) || plate.is_insulated(Edge::Top);
        let span = match (ins_v, ins_h) {
            (false, false) => Span::Bilinear,
            (true, false) => Span::AlongY,
            (false, true) => Span::AlongX,
            (true, true) => Span::Constant,
        };
        let mut values = [CornerValue::Unused; 4];
        let mut parameters = Vec::new();
        for corner in Corner::ALL {
            let (h, v) = corner.edges();
            let value_on = |edge: Edge| match plate.condition(edge) {
                Some(EdgeCondition::Fixed(p)) => Some(p.value(corner.position_on(edge, shape))),
                _ => None,
            };
            values[corner.index()] = if strip {
                // A strip's fixed side has no series of its own: the base must carry it.
                if h == Edge::Top {
                    CornerValue::Unused
                } else {
                    value_on(v).map_or(CornerValue::Unused, CornerValue::Known)
                }
            } else if plate.is_dirichlet(h) && plate.is_dirichlet(v) {
                match (value_on(h), value_on(v)) {
                    (Some(a), Some(b)) => CornerValue::Known(0.5 * (a + b)),
                    (Some(a), None) | (None, Some(a)) => CornerValue::Known(a),
                    (None, None) => {
                        parameters.push(corner);
                        CornerValue::Parameter(next_parameter + parameters.len() - 1)
                    }
                }
            } else {
                CornerValue::Unused
            };
        }
        let base = Base {
            span,
            width: shape.width(),
            height: shape.height().unwrap_or(f64::INFINITY),
            values,
        };
        (base, parameters)
    }

    /// The corner values.
    pub fn values(&self) -> &[CornerValue; 4] {
        &self.values
    }

    /// Weights `w_c` with `B(p) = Σ_c w_c · value_c` over the four corners.
    pub fn weights(&self, p: Point) -> [f64; 4] {
        let used = |c: Corner| !matches!(self.values[c.index()], CornerValue::Unused);
        match self.span {
            Span::Bilinear => {
                let xi = p.x / self.width;
                let eta = p.y / self.height;
                [
                    (1.0 - xi) * (1.0 - eta),
                    xi * (1.0 - eta),
                    xi * eta,
                    (1.0 - xi) * eta,
                ]
            }
            Span::AlongY => {
                // the held corners sit on one vertical side (or none)
                let eta = if self.height.is_finite() {
                    p.y / self.height
                } else {
                    0.0
                };
                let (lo, hi) = if used(Corner::BottomLeft) || used(Corner::TopLeft) {
                    (Corner::BottomLeft, Corner::TopLeft)
                } else {
                    (Corner::BottomRight, Corner::TopRight)
                };
                let mut w = [0.0; 4];
                w[lo.index()] = 1.0 - eta;
                w[hi.index()] = eta;
                w
            }
            Span::AlongX => {
                let xi = p.x / self.width;
                let (lo, hi) = if used(Corner::BottomLeft) || used(Corner::BottomRight) {
                    (Corner::BottomLeft, Corner::BottomRight)
                } else {
                    (Corner::TopLeft, Corner::TopRight)
                };
                let mut w = [0.0; 4];
                w[lo.index()] = 1.0 - xi;
                w[hi.index()] = xi;
                w
            }
            Span::Constant => {
                let mut w = [0.0; 4];
                if let Some(c) = Corner::ALL.into_iter().find(|&c| used(c)) {
                    w[c.index()] = 1.0;
                }
                w
            }
        }
    }

    /// Gradient weights: `∇B(p) = Σ_c g_c · value_c`, as `(∂/∂x, ∂/∂y)` per corner.
    pub fn gradient_weights(&self, p: Point) -> [(f64, f64); 4] {
        // Every span is at most bilinear: central differences of the weights are exact.
        let h = 1e-3 * self.width;
        let wx0 = self.weights(Point::new(p.x - h, p.y));
        let wx1 = self.weights(Point::new(p.x + h, p.y));
        let (wy0, wy1) = if self.height.is_finite() {
            let hy = 1e-3 * self.height;
            (
                self.weights(Point::new(p.x, p.y - hy)),
                self.weights(Point::new(p.x, p.y + hy)),
            )
        } else {
            (self.weights(p), self.weights(p))
        };
        let hy = if self.height.is_finite() {
            1e-3 * self.height
        } else {
            1.0
        };
        let mut g = [(0.0, 0.0); 4];
        for c in 0..4 {
            g[c] = (
                (wx1[c] - wx0[c]) / (2.0 * h),
                (wy1[c] - wy0[c]) / (2.0 * hy),
            );
        }
        g
    }

    /// `B(p)` split into the known part and the weights of the corner parameters:
    /// calls `param(index, weight)` for each parameter and returns the known part.
    pub fn evaluate(&self, p: Point, mut param: impl FnMut(usize, f64)) -> f64 {
        let w = self.weights(p);
        let mut known = 0.0;
        for (c, &wc) in w.iter().enumerate() {
            match self.values[c] {
                CornerValue::Unused => {}
                CornerValue::Known(v) => known += wc * v,
                CornerValue::Parameter(i) => param(i, wc),
            }
        }
        known
    }
}
