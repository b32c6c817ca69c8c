//! What an estimate produces: every number the outputs of `docs/case-files.md`, outputs print.
//!
//! Values are SI (metres, kelvin; temperature differences in kelvin); [`EstimateResult::units`]
//! says how the report converts them back to the case's units. Intervals are at
//! [`EstimateResult::confidence`].

use crate::case::Smoothing;
use crate::geometry::{Edge, Plate, Point};
use crate::inverse::Strength;
use crate::noise::SigmaSource;
use crate::uncertainty::BootstrapMode;
use crate::units::Units;
use serde::Serialize;

/// The reconstruction of one unknown edge, sampled finely along it.
#[derive(Debug, Clone, Serialize)]
pub struct EdgeResult {
    /// The edge.
    pub edge: Edge,
    /// Positions along the edge, metres from its lower coordinate.
    pub positions: Vec<f64>,
    /// The estimated temperature at each position, kelvin.
    pub estimate: Vec<f64>,
    /// Pointwise band from the bootstrap (lower, upper), kelvin.
    pub lower: Vec<f64>,
    /// See [`EdgeResult::lower`].
    pub upper: Vec<f64>,
    /// Simultaneous band over the whole edge (sup-t), kelvin.
    pub simultaneous_lower: Vec<f64>,
    /// See [`EdgeResult::simultaneous_lower`].
    pub simultaneous_upper: Vec<f64>,
    /// Linear (Gaussian posterior) band, the cross-check, kelvin.
    pub linear_lower: Vec<f64>,
    /// See [`EdgeResult::linear_lower`].
    pub linear_upper: Vec<f64>,
    /// Resolution length of the edge: the worst along it (the span over which the averaging
    /// kernel of the model resolution matrix smears a point feature; `docs/method.md`),
    /// metres.
    pub resolution_length: f64,
    /// Where along the edge the resolution is worst, metres.
    pub resolution_worst_position: f64,
    /// The resolution length at the edge's hottest point, metres.
    pub resolution_at_hottest: f64,
    /// Heat flow into the plate through this edge per unit depth, W/m, with its interval;
    /// `None` without a conductivity.
    pub heat_flow: Option<Interval>,
}

/// A value with an interval.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct Interval {
    /// The estimate.
    pub value: f64,
    /// Lower end.
    pub lower: f64,
    /// Upper end.
    pub upper: f64,
}

/// The field on a grid.
#[derive(Debug, Clone, Serialize)]
pub struct FieldResult {
    /// Grid abscissae, metres.
    pub xs: Vec<f64>,
    /// Grid ordinates, metres.
    pub ys: Vec<f64>,
    /// `estimate[j * xs.len() + i]` is the temperature at `(xs[i], ys[j])`, kelvin.
    pub estimate: Vec<f64>,
    /// Pointwise band, same layout, kelvin.
    pub lower: Vec<f64>,
    /// See [`FieldResult::lower`].
    pub upper: Vec<f64>,
}

/// Diagnostics of one sensor.
#[derive(Debug, Clone, Serialize)]
pub struct SensorResult {
    /// Sensor id.
    pub sensor: String,
    /// Position, metres.
    pub position: Point,
    /// The reading, kelvin; `None` when the readings had no value for this sensor.
    pub reading: Option<f64>,
    /// The fitted temperature at the sensor, kelvin.
    pub fitted: f64,
    /// Reading minus fitted, kelvin (`None` without a reading).
    pub residual: Option<f64>,
    /// Standardised leave-one-out residual (dimensionless; ~N(0,1) for a good sensor).
    pub loo_residual: Option<f64>,
    /// Leverage: the diagonal of the influence matrix (0..1).
    pub leverage: Option<f64>,
    /// Standard uncertainty used for this reading, kelvin.
    pub sigma: Option<f64>,
    /// Why the sensor was left out of the fit, if it was.
    pub flag: Option<String>,
    /// Whether the sensor was kept although its reading stands out (see
    /// [`EstimateResult::doubtful_sensors`]).
    pub doubtful: bool,
    /// The calibration offset subtracted from the reading, kelvin (`sensors.csv` `offset`).
    pub offset: Option<f64>,
}

/// A sensor kept although its reading stands out: a hot feature of a hidden edge explains
/// it as well as a fault does (`docs/method.md`, "Sensor decisions").
#[derive(Debug, Clone, Serialize)]
pub struct DoubtfulSensor {
    /// Index of the sensor in the case.
    #[serde(skip)]
    pub index: usize,
    /// Sensor id.
    pub sensor: String,
    /// Standardised leave-one-out residual.
    pub loo_residual: f64,
    /// Fault probability from the residual alone.
    pub fault_probability: f64,
    /// The edge of the hot feature that explains the reading.
    pub edge: Edge,
    /// Its centre along the edge, metres.
    pub position: f64,
    /// Its full width at half maximum, metres.
    pub width: f64,
    /// The edge temperature at its centre under the hot explanation, kelvin.
    pub peak_temperature: f64,
    /// The gradient along the edge (K/m) below which the hot explanation is ruled out.
    pub min_gradient: Option<f64>,
}

/// The hottest point on the unknown edges.
#[derive(Debug, Clone, Serialize)]
pub struct Hottest {
    /// The edge it is on (in the estimate).
    pub edge: Edge,
    /// Position along that edge, metres.
    pub position: f64,
    /// Interval for the position, metres (replicates whose hottest point lies on this edge).
    pub position_interval: [f64; 2],
    /// Its temperature, kelvin.
    pub temperature: f64,
    /// Interval for the hottest temperature, kelvin.
    pub temperature_interval: [f64; 2],
    /// Share of the bootstrap replicates whose hottest point lies on each edge.
    pub edge_shares: Vec<(Edge, f64)>,
    /// Share of the replicates whose hottest point lies within the position interval's
    /// neighbourhood of the estimate (a second peak elsewhere lowers it).
    pub main_peak_share: f64,
}

/// The probability that a hidden edge exceeds a limit anywhere.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct Exceedance {
    /// The limit, kelvin.
    pub limit: f64,
    /// Probability (share of replicates) that the hottest temperature exceeds it.
    pub probability: f64,
    /// The probability above which an alarm is raised.
    pub alarm_probability: f64,
    /// Whether the alarm is raised (exit status 3).
    pub alarm: bool,
}

/// How the strength was chosen.
#[derive(Debug, Clone, Serialize)]
pub struct StrengthSummary {
    /// The rule, or a fixed strength.
    pub method: Strength,
    /// The chosen strength.
    pub value: f64,
    /// Effective number of parameters (trace of the influence matrix).
    pub effective_parameters: f64,
    /// Whether the rule's optimum sat at the end of the search range.
    pub at_range_end: bool,
    /// The smoothing used (size, slope or curvature), after `auto` chose.
    pub smoothing: Smoothing,
    /// Whether the smoothing was chosen by `auto`.
    pub smoothing_auto: bool,
}

/// Goodness of fit.
#[derive(Debug, Clone, Serialize)]
pub struct FitSummary {
    /// Representative reading uncertainty (the root-mean-square of the sensors' sigmas),
    /// kelvin.
    pub sigma: f64,
    /// Where sigma came from.
    pub sigma_source: SigmaSource,
    /// Weighted residual sum of squares.
    pub chi_square: f64,
    /// Residual degrees of freedom (readings used minus effective parameters).
    pub dof: f64,
    /// Probability of a chi-square at least this large if the model and sigma are right.
    pub p_value: Option<f64>,
    /// Readings used in the fit.
    pub readings_used: usize,
}

/// Everything an estimate produces.
#[derive(Debug, Clone, Serialize)]
pub struct EstimateResult {
    /// The case's units (for the report).
    pub units: Units,
    /// The plate (outline and edge conditions), SI.
    pub plate: Plate,
    /// One entry per unknown edge.
    pub edges: Vec<EdgeResult>,
    /// The field on the grid.
    pub field: FieldResult,
    /// Per-sensor diagnostics, in the order of `sensors.csv`.
    pub sensors: Vec<SensorResult>,
    /// The hottest point.
    pub hottest: Hottest,
    /// Exceedance of a limit, when one was given.
    pub exceedance: Option<Exceedance>,
    /// Sensors kept under two explanations (hot feature or fault).
    pub doubtful_sensors: Vec<DoubtfulSensor>,
    /// The regularisation strength.
    pub strength: StrengthSummary,
    /// Goodness of fit.
    pub fit: FitSummary,
    /// Confidence level of every interval and band.
    pub confidence: f64,
    /// Bootstrap replicates.
    pub replicates: usize,
    /// Bootstrap mode (`residual` or `parametric`).
    pub bootstrap_mode: BootstrapMode,
    /// Seed of the bootstrap.
    pub seed: u64,
    /// Strict bounds under a gradient limit and the gradient study
    /// ([`crate::bounds::estimate_bounds`]); `None` when not asked for.
    pub bounds: Option<crate::bounds::BoundsResult>,
    /// Cautions for the reader.
    pub cautions: Vec<String>,
    /// How the readings were converted from thermocouple voltages, when they were.
    pub conversion: Option<crate::case::ReadingConversion>,
    /// How the input tables were read (CSV dialects), from [`crate::case::Case::read_as`].
    pub read_as: Vec<crate::case::ReadAs>,
    /// Heat transfer coefficients estimated from the readings (convective edges with
    /// `h = "unknown"`); empty otherwise.
    pub convection: Vec<super::convection::ConvectionEstimate>,
    /// Heat flow into the plate through each convective edge per unit depth, W/m (negative:
    /// heat leaves to the fluid), with its interval; empty without conductivity.
    pub convective_heat_flows: Vec<(Edge, Interval)>,
}

impl EstimateResult {
    /// Check that every number a verdict or a reader relies on is finite: the hottest point
    /// and its intervals, the exceedance probability, each edge's estimate and pointwise and
    /// simultaneous bands, the field and its band, the fitted values, the strength and the
    /// fit's sigma. [`crate::estimate::estimate`] calls it before returning, so no hottest
    /// point, exceedance verdict or exit status is ever made from a non-finite number.
    ///
    /// # Errors
    /// [`crate::Error::Internal`] naming the first quantity that is not finite.
    pub fn check_finite(&self) -> crate::Result<()> {
        fn all(v: &[f64]) -> bool {
            v.iter().all(|x| x.is_finite())
        }
        let h = &self.hottest;
        let mut checks: Vec<(String, bool)> = vec![
            (
                "the hottest temperature and its interval".into(),
                h.temperature.is_finite() && all(&h.temperature_interval),
            ),
            (
                "the hottest position and its interval".into(),
                h.position.is_finite() && all(&h.position_interval),
            ),
            (
                "the exceedance probability".into(),
                self.exceedance
                    .as_ref()
                    .is_none_or(|e| e.probability.is_finite()),
            ),
            (
                "the regularisation strength".into(),
                self.strength.value.is_finite(),
            ),
            ("the reading sigma".into(), self.fit.sigma.is_finite()),
            (
                "the fitted values".into(),
                self.sensors.iter().all(|s| s.fitted.is_finite()),
            ),
            (
                "the field and its band".into(),
                all(&self.field.estimate) && all(&self.field.lower) && all(&self.field.upper),
            ),
        ];
        for e in &self.edges {
            checks.push((
                format!("the {} edge's profile and its bands", e.edge),
                all(&e.estimate)
                    && all(&e.lower)
                    && all(&e.upper)
                    && all(&e.simultaneous_lower)
                    && all(&e.simultaneous_upper),
            ));
        }
        match checks.into_iter().find(|(_, ok)| !ok) {
            None => Ok(()),
            Some((what, _)) => Err(crate::Error::Internal(format!(
                "the computation gave a non-finite value for {what}, so no hottest point or \
                 verdict is given; the readings, their uncertainties or the settings are \
                 beyond what the method can compute in double precision (docs/case-files.md, \
                 plausible ranges)"
            ))),
        }
    }
}
