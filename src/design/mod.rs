//! Sensor-layout design: choose where the sensors go before anything is drilled, and score a
//! layout by the uncertainty it will leave along the hidden edges (`docs/design.md`).
//!
//! A design uses the forward model and the smoothness prior of the inversion: the readings
//! are `d = A c + e`, `e ~ N(0, σ²)`, and the coefficients have the prior of [`prior`]
//! (the inversion's penalty read as a Gaussian prior, scaled to the variation the
//! experimenter expects). Everything is linear and Gaussian, so the posterior covariance of a
//! layout, `C = (Σ₀⁻¹ + Aᵀ W² A)⁻¹`, is known before any reading exists; it gives:
//!
//! * the predicted standard deviation of the reconstructed profile at every point of every
//!   unknown edge, `√diag(P C Pᵀ)` (`P` the profile map), and the band half-width `z · sd` at
//!   the case's confidence;
//! * the resolution length along each edge, from the posterior resolution matrix
//!   `R = C AᵀW²A = I − C Σ₀⁻¹` through [`crate::estimate::resolution::resolution_length_at`];
//! * the criteria `information` (`log det(C⁻¹) − log det Σ₀⁻¹`, twice the expected
//!   information gain in nats), `edge` (the mean of `diag(P C Pᵀ)` over the edge points) and
//!   `worst` (its maximum, reported as a standard deviation);
//! * the condition number of the weighted sensor map `W A`.
//!
//! [`DesignSpace::design`] chooses a layout by greedy selection and exchange ([`search`])
//! among the feasible candidates ([`candidates`]); [`DesignSpace::evaluate`] scores a given
//! layout. The outputs (`layout.csv`, `design.json`, the text summary and `design.svg`) are
//! rendered from a [`DesignResult`] by `report::design`, which sits above this module.
//!
//! The predicted spread is that of the posterior-mean estimate with the strength fixed at
//! the prior's equivalent `λ = 1/τ²`, for profiles drawn from the prior; `estimate` chooses
//! its strength from the readings, so its bands differ: [`DesignSpace::estimate_check`]
//! states by how much, on simulated readings of prior-like and of rougher edges
//! (`docs/design.md`, "What `estimate` will give").

pub mod candidates;
pub mod prior;
pub mod search;

pub use candidates::{Constraints, random_layout, uniform_layout};
pub use prior::Prior;
pub use search::{Goal, SearchOutcome};

use crate::case::{CandidateSource, Case, Sensor};
use crate::error::{Error, Result};
use crate::estimate::SAFETY_CAUTION;
use crate::estimate::resolution::{resolution_length_at, worst_resolution};
use crate::forward::{ForwardModel, LinearMap, SeriesOptions};
use crate::geometry::{Edge, Plate, Point};
use crate::noise::NoiseSpec;
use crate::units::Units;
use nalgebra::{DMatrix, DVector};
use serde::Serialize;
use statrs::distribution::{ContinuousCDF, Normal};

pub use crate::case::Criterion;

impl Criterion {
    fn goal(self) -> Goal {
        match self {
            Criterion::Information => Goal::Information,
            Criterion::Edge => Goal::Edge,
            Criterion::Worst => Goal::Worst,
        }
    }
}

/// The criterion used when neither the case nor the command names one.
pub const DEFAULT_CRITERION: Criterion = Criterion::Edge;

/// Points per unknown edge at which the design evaluates the profile's uncertainty.
pub fn edge_points(terms: usize) -> usize {
    (4 * terms + 1).max(201)
}

/// Positions along each edge at which the resolution length is reported.
pub const RESOLUTION_POSITIONS: usize = 25;

/// One sensor of a layout.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LayoutSensor {
    /// Its id.
    pub id: String,
    /// Its position, metres.
    pub position: Point,
    /// Its own standard uncertainty, kelvin, if it has one (else the design noise).
    pub sigma_k: Option<f64>,
    /// Whether it was already there (kept fixed) rather than chosen by the design.
    pub fixed: bool,
}

impl LayoutSensor {
    /// A layout sensor from a case sensor.
    pub fn from_sensor(s: &Sensor, fixed: bool) -> Self {
        LayoutSensor {
            id: s.id.clone(),
            position: s.position,
            sigma_k: s.sigma_k,
            fixed,
        }
    }
}

/// The predicted uncertainty along one unknown edge.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EdgeScore {
    /// The edge.
    pub edge: Edge,
    /// Positions along it, metres.
    pub positions: Vec<f64>,
    /// Posterior standard deviation of the profile at each position, kelvin.
    pub sd: Vec<f64>,
    /// Prior standard deviation of the profile about its level at each position (what the
    /// experimenter expects before any reading; its root mean square is the stated
    /// variation), kelvin.
    pub prior_sd: Vec<f64>,
    /// Root-mean-square posterior standard deviation along the edge, kelvin.
    pub rms_sd: f64,
    /// Largest posterior standard deviation along the edge, kelvin.
    pub max_sd: f64,
    /// Resolution length (metres) at [`RESOLUTION_POSITIONS`] positions: (position, length).
    pub resolution: Vec<(f64, f64)>,
    /// Median of those resolution lengths, metres.
    pub resolution_median: f64,
    /// The largest resolution length along the edge and where it occurs, `(position,
    /// length)`, metres: the same quantity `estimate` reports as the edge's resolution length
    /// ([`crate::estimate::resolution::worst_resolution`]).
    pub resolution_worst: (f64, f64),
}

/// How good a layout is.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LayoutScore {
    /// `log det(C⁻¹) − log det(Σ₀⁻¹)` (twice the expected information gain, nats).
    pub information: f64,
    /// Mean posterior variance over the edge points, K².
    pub edge_mean_variance: f64,
    /// Largest posterior standard deviation over the edge points, kelvin.
    pub worst_sd: f64,
    /// Where that largest standard deviation is: (edge, position in metres).
    pub worst_at: (Edge, f64),
    /// Condition number of the weighted sensor map `W A` (largest over smallest of its
    /// `min(m, p)` singular values); `None` when the smallest is zero.
    pub condition_number: Option<f64>,
    /// Per unknown edge.
    pub edges: Vec<EdgeScore>,
}

impl LayoutScore {
    /// The value of a criterion (information: log det gain; edge: mean variance, K²; worst:
    /// largest standard deviation, K).
    pub fn value(&self, c: Criterion) -> f64 {
        match c {
            Criterion::Information => self.information,
            Criterion::Edge => self.edge_mean_variance,
            Criterion::Worst => self.worst_sd,
        }
    }
}

/// How the layout was searched for.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SearchSummary {
    /// New sensors asked for.
    pub count: usize,
    /// Criterion value after the greedy stage.
    pub greedy_value: f64,
    /// Criterion value after the exchange passes.
    pub value: f64,
    /// Exchange passes made.
    pub passes: usize,
    /// Swaps made.
    pub swaps: usize,
}

/// A layout compared against.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Comparison {
    /// Its name (the file it came from).
    pub name: String,
    /// Its sensors.
    pub layout: Vec<LayoutSensor>,
    /// Its score.
    pub score: LayoutScore,
}

/// The result of `edgetherm design` (a designed layout, or a scored one).
#[derive(Debug, Clone, Serialize)]
pub struct DesignResult {
    /// The case's units.
    pub units: Units,
    /// The plate.
    pub plate: Plate,
    /// The criterion.
    pub criterion: Criterion,
    /// The prior.
    pub prior: Prior,
    /// The design's reading noise, kelvin.
    pub noise_k: f64,
    /// Confidence of the band half-widths.
    pub confidence: f64,
    /// The constraints.
    pub constraints: Constraints,
    /// Number of feasible candidates.
    pub candidate_count: usize,
    /// Grid spacing of the candidates, metres (`None`: from a file).
    pub candidate_spacing_m: Option<f64>,
    /// The layout (fixed sensors first, then the new ones).
    pub layout: Vec<LayoutSensor>,
    /// Its score.
    pub score: LayoutScore,
    /// How it was found (`None` when a layout was only scored).
    pub search: Option<SearchSummary>,
    /// The layout it is compared with, if any.
    pub against: Option<Comparison>,
    /// Cautions for the reader.
    pub cautions: Vec<String>,
    /// The design settings that took their default, one sentence each ([`apply_defaults`]).
    pub defaults: Vec<String>,
    /// What `estimate` would give on readings from this layout
    /// ([`DesignSpace::estimate_check`]); `None` when no simulated fit succeeded.
    pub estimate_check: Option<EstimateCheck>,
}

/// Simulated `estimate` fits on a layout: the band `estimate` would give, as opposed to the
/// design's prediction at the prior's strength.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EstimateCheck {
    /// Simulated readings sets fitted.
    pub draws: usize,
    /// The strength rule used (the case's).
    pub rule: String,
    /// Per unknown edge: the median over the draws of the root-mean-square half-width of the
    /// linear band at the case's confidence, kelvin, for profiles drawn from the design's
    /// prior.
    pub edges: Vec<(Edge, f64)>,
    /// The same for rougher profiles: drawn from the prior one smoothing order lower (slope
    /// instead of curvature, size instead of slope) with the same variation; `None` when the
    /// prior is already of order 0.
    pub rough_edges: Option<Vec<(Edge, f64)>>,
}

/// Simulated readings sets behind [`EstimateCheck`].
pub const ESTIMATE_CHECK_DRAWS: usize = 40;

/// Default minimum distance from the edges when `plate.toml` has no `[design]` section, as
/// a fraction of the plate's smaller side (a long strip: its width).
pub const DEFAULT_EDGE_DISTANCE_FRACTION: f64 = 0.05;
/// Default minimum spacing between sensors when `plate.toml` has no `[design]` section, as
/// a fraction of the plate's smaller side (a long strip: its width).
pub const DEFAULT_SPACING_FRACTION: f64 = 0.10;
/// Default expected variation of the hidden profile, as a multiple of the reading noise,
/// when neither `--variation` nor `[design] variation` states it.
pub const DEFAULT_VARIATION_PER_NOISE: f64 = 10.0;
/// The room temperature at which a tolerance class gives the design's default noise when
/// nothing else states it, degrees Celsius.
const DEFAULT_NOISE_AT_C: f64 = 25.0;
/// The reading noise a design assumes when nothing states one, kelvin: a thermocouple reading
/// with its offset calibrated out is commonly good to a few tenths of a kelvin (common
/// practice, not a measured value). The layout depends on the ratio of variation to noise,
/// which the default variation fixes at [`DEFAULT_VARIATION_PER_NOISE`]; the predicted bands
/// scale with this value.
pub const DEFAULT_NOISE_K: f64 = 0.5;

/// Fill every design setting the case leaves open with its documented default
/// (`docs/design.md`, "Defaults") and say which ones were used, one sentence each, in the
/// case's units.
///
/// * no `[design]` section: the whole plate is allowed, the minimum distance from the edges
///   is [`DEFAULT_EDGE_DISTANCE_FRACTION`] and the minimum spacing
///   [`DEFAULT_SPACING_FRACTION`] of the plate's smaller side (a section that exists keeps
///   its own defaults of 0 for keys it leaves out);
/// * the reading noise: `[design] noise`, else `[noise] sigma`, else a tolerance class's
///   standard uncertainty (or a voltage uncertainty through the type's slope) at 25 °C,
///   else [`DEFAULT_NOISE_K`] when no sensor states its own sigma;
/// * the variation: `variation_k` (from `--variation`), else `[design] variation`, else
///   [`DEFAULT_VARIATION_PER_NOISE`] times the reading noise;
/// * an unknown heat transfer coefficient (`h = "unknown"`): the geometric middle of its
///   search range, `√(low · high)` (the middle on the log scale the estimate searches).
///
/// # Errors
/// [`Error::Invalid`] when a stated `--variation` is not a positive finite difference.
pub fn apply_defaults(case: &mut Case, variation_k: Option<f64>) -> Result<Vec<String>> {
    let u = case.units;
    let t_sym = temp_symbol(u);
    let l_sym = u.length.symbol();
    let len = |m: f64| format!("{} {l_sym}", tidy(u.length_from_m(m)));
    let dt = |k: f64| format!("{} {t_sym}", tidy(u.dtemp_from_k(k)));
    let mut used = Vec::new();
    for (edge, low, high) in case.plate.unknown_heat_transfer() {
        let h = (low * high).sqrt();
        case.plate = case.plate.with_heat_transfer(edge, h)?;
        used.push(format!(
            "heat transfer coefficient of the convective {edge} edge {} W/(m^2 K), the \
             geometric middle of its search range [{}, {}] (h = \"unknown\"; state h to \
             design for the value you expect)",
            tidy(h),
            tidy(low),
            tidy(high)
        ));
    }
    let ds = &mut case.design;
    if !ds.present {
        let shape = case.plate.shape();
        let side = shape.smaller_side();
        let side_name = match shape {
            crate::geometry::Shape::Annulus { .. } => "the wall thickness",
            crate::geometry::Shape::Disk { .. } => "the disk's diameter",
            _ => "the plate's smaller side",
        };
        ds.edge_distance_m = DEFAULT_EDGE_DISTANCE_FRACTION * side;
        ds.sensor_spacing_m = DEFAULT_SPACING_FRACTION * side;
        used.push(
            "no [design] section in plate.toml: sensors may go anywhere on the plate".to_string(),
        );
        used.push(format!(
            "minimum distance from the edges {} ({:.0} % of {side_name}; set [design] \
             edge_distance to the closest a hole can really come)",
            len(ds.edge_distance_m),
            100.0 * DEFAULT_EDGE_DISTANCE_FRACTION
        ));
        used.push(format!(
            "minimum spacing between sensors {} ({:.0} % of {side_name}; set [design] \
             sensor_spacing)",
            len(ds.sensor_spacing_m),
            100.0 * DEFAULT_SPACING_FRACTION
        ));
        ds.present = true;
    }
    if ds.noise_k.is_none() {
        let stated = match &case.noise {
            NoiseSpec::Emf { sigma_mv, tc_type } => tc_type
                .slope_mv_per_c(DEFAULT_NOISE_AT_C)
                .ok()
                .map(|slope| (sigma_mv / slope, "the voltage uncertainty at 25 °C")),
            NoiseSpec::Unstated if !case.sensors.iter().any(|s| s.sigma_k.is_some()) => Some((
                DEFAULT_NOISE_K,
                "nothing states it: an assumed value; the predicted bands scale with it",
            )),
            _ => None,
        };
        if let Some((s, why)) = stated {
            ds.noise_k = Some(s);
            used.push(format!(
                "reading noise {} ({why}; set [noise] sigma or [design] noise)",
                dt(s)
            ));
        }
        if let NoiseSpec::Tolerance { class, tc_type } = &case.noise {
            let s =
                crate::noise::tolerance::standard_uncertainty(*class, *tc_type, DEFAULT_NOISE_AT_C)
                    .map_err(|m| Error::invalid_at(&case.files.plate, None, Some("noise"), m))?;
            ds.noise_k = Some(s);
            used.push(format!(
                "reading noise {} (the tolerance class's standard uncertainty at 25 °C; set \
                 [design] noise to state it)",
                dt(s)
            ));
        }
    }
    if let Some(v) = variation_k {
        if !(v.is_finite() && v > 0.0) {
            return Err(Error::invalid_field(
                "--variation",
                format!("must be a positive temperature difference, not {v}"),
            ));
        }
        ds.variation_k = Some(v);
    } else if ds.variation_k.is_none() {
        let noise = match (ds.noise_k, &case.noise) {
            (Some(s), _) => Some(s),
            (None, NoiseSpec::Sigma(s)) => Some(*s),
            _ => None,
        };
        if let Some(s) = noise {
            let v = DEFAULT_VARIATION_PER_NOISE * s;
            ds.variation_k = Some(v);
            used.push(format!(
                "expected variation of the hidden profile {} ({} times the reading noise {}; \
                 state what you expect with --variation or [design] variation: a larger \
                 variation favours positions close to the hidden edge)",
                dt(v),
                tidy(DEFAULT_VARIATION_PER_NOISE),
                dt(s)
            ));
        }
    }
    Ok(used)
}

/// A temperature difference in the case's unit, three significant digits.
fn show_dt(u: Units, k: f64) -> String {
    format!("±{} {}", tidy(u.dtemp_from_k(k)), temp_symbol(u))
}

/// The temperature unit as printed: °C, °F or K.
fn temp_symbol(u: Units) -> &'static str {
    u.temperature.reader_symbol()
}

/// A number with at most four significant digits and no trailing zeros.
fn tidy(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{v}");
    }
    let mag = v.abs().log10().floor() as i32;
    let prec = (3 - mag).clamp(0, 12) as usize;
    let s = format!("{v:.prec$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// Everything a design needs, computed once from a case: the model, the prior, the noise,
/// the constraints, the feasible candidates and the edge points.
#[derive(Debug, Clone)]
pub struct DesignSpace {
    case_units: Units,
    plate_file: std::path::PathBuf,
    design_line: Option<usize>,
    model: ForwardModel,
    prior: Prior,
    noise_k: f64,
    confidence: f64,
    criterion: Criterion,
    constraints: Constraints,
    candidates: Vec<Point>,
    candidate_spacing_m: Option<f64>,
    edges: Vec<(Edge, Vec<f64>)>,
    maps: Vec<LinearMap>,
    /// All edge points' profile rows stacked, n × p.
    edge_rows: DMatrix<f64>,
}

impl DesignSpace {
    /// Build the design space of `case`. `candidate_file` holds the positions of a
    /// `[design] candidates` file when the case names one (read by the caller through
    /// [`crate::io::case::read_candidates`]); `criterion` overrides the case's.
    ///
    /// # Errors
    /// [`Error::Invalid`] naming `plate.toml` and the `[design]` key when the case has no
    /// unknown edge, no `[design]` section, no variation, no usable noise, or no feasible
    /// candidate.
    pub fn new(
        case: &Case,
        candidate_file: Option<&[(Point, usize)]>,
        criterion: Option<Criterion>,
    ) -> Result<Self> {
        let ds = &case.design;
        let plate_file = case.files.plate.clone();
        let design_line = ds.line_of("design");
        let err = |field: &str, msg: String| {
            Error::invalid_at(
                &plate_file,
                ds.line_of(field).or(design_line),
                Some(field),
                msg,
            )
        };
        if case.plate.unknown_edges().is_empty() {
            return Err(Error::invalid_at(
                &plate_file,
                None,
                Some("edges"),
                "no edge is unknown, so there is nothing for a layout to see; mark the hidden \
                 edge condition = \"unknown\"",
            ));
        }
        if !ds.present {
            return Err(Error::invalid_at(
                &plate_file,
                None,
                Some("design"),
                "the plate file has no [design] section; add one with at least `variation = \
                 <expected standard deviation of the hidden profile>` (see docs/design.md)",
            ));
        }
        let Some(variation_k) = ds.variation_k else {
            return Err(err(
                "design.variation",
                "the design needs the expected variation of the hidden profile about its \
                 level, as a standard deviation in the case's temperature unit: give \
                 --variation V or [design] variation (without a reading noise to derive it \
                 from, it has no default)"
                    .into(),
            ));
        };
        let noise_k = match (ds.noise_k, &case.noise) {
            (Some(s), _) => s,
            (None, NoiseSpec::Sigma(s)) => *s,
            (None, _) => {
                return Err(err(
                    "design.noise",
                    "[design] needs `noise`, the expected standard uncertainty of a reading \
                     (or state [noise] sigma); a tolerance class depends on the reading, \
                     which a design does not have yet"
                        .into(),
                ));
            }
        };
        let criterion = criterion.or(ds.criterion).unwrap_or(DEFAULT_CRITERION);
        let order = ds
            .smoothing
            .and_then(|s| s.order())
            .or(case.fit.smoothing.order())
            .unwrap_or(2);
        let model = ForwardModel::new(
            &case.plate,
            SeriesOptions {
                unknown_terms: case.fit.terms,
                ..SeriesOptions::default()
            },
        )?;
        let prior = Prior::new(&model, order, variation_k);
        let constraints = Constraints::new(*case.plate.shape(), ds);
        let (candidates, candidate_spacing_m) = match (&ds.candidates, candidate_file) {
            (CandidateSource::File(_), Some(points)) => (
                points
                    .iter()
                    .map(|(p, _)| *p)
                    .filter(|&p| constraints.feasible(p))
                    .collect::<Vec<_>>(),
                None,
            ),
            (CandidateSource::File(path), None) => {
                return Err(Error::Internal(format!(
                    "the candidate file {} was not read",
                    path.display()
                )));
            }
            (CandidateSource::Grid(h), _) => {
                let h = h.unwrap_or_else(|| constraints.default_spacing());
                (constraints.grid(h), Some(h))
            }
        };
        if candidates.is_empty() {
            return Err(err(
                "design",
                "no candidate position satisfies the constraints: the allowed regions, less \
                 the keep-out regions and the minimum distance from the edges, leave no room \
                 (or no point of the candidate grid or file falls there); widen `allowed`, \
                 shrink `keep_out` or `edge_distance`, or refine `candidate_spacing`"
                    .into(),
            ));
        }
        let n = edge_points(case.fit.terms);
        let shape = case.plate.shape();
        let mut edges = Vec::new();
        let mut maps = Vec::new();
        for e in case.plate.unknown_edges() {
            let len = shape.edge_length(e).unwrap_or(shape.width());
            let pos: Vec<f64> = (0..n).map(|i| len * i as f64 / (n - 1) as f64).collect();
            maps.push(model.edge_profile_map(e, &pos));
            edges.push((e, pos));
        }
        let p = model.parameter_count();
        let mut edge_rows = DMatrix::zeros(n * edges.len(), p);
        for (k, m) in maps.iter().enumerate() {
            edge_rows.view_mut((k * n, 0), (n, p)).copy_from(&m.matrix);
        }
        Ok(DesignSpace {
            case_units: case.units,
            plate_file,
            design_line,
            model,
            prior,
            noise_k,
            confidence: case.uncertainty.confidence,
            criterion,
            constraints,
            candidates,
            candidate_spacing_m,
            edges,
            maps,
            edge_rows,
        })
    }

    /// The forward model.
    pub fn model(&self) -> &ForwardModel {
        &self.model
    }
    /// The prior.
    pub fn prior(&self) -> &Prior {
        &self.prior
    }
    /// The design's reading noise, kelvin.
    pub fn noise_k(&self) -> f64 {
        self.noise_k
    }
    /// The criterion.
    pub fn criterion(&self) -> Criterion {
        self.criterion
    }
    /// The constraints.
    pub fn constraints(&self) -> &Constraints {
        &self.constraints
    }
    /// The feasible candidates.
    pub fn candidates(&self) -> &[Point] {
        &self.candidates
    }
    /// The unknown edges and the positions at which they are scored.
    pub fn edges(&self) -> &[(Edge, Vec<f64>)] {
        &self.edges
    }
    /// The profile maps of the unknown edges at those positions.
    pub fn edge_maps(&self) -> &[LinearMap] {
        &self.maps
    }

    /// Whitened sensor-map rows `g/σ` of `sensors`.
    fn whitened(&self, sensors: &[LayoutSensor]) -> DMatrix<f64> {
        let points: Vec<Point> = sensors.iter().map(|s| s.position).collect();
        let mut g = self.model.sensor_map(&points).matrix;
        for (i, s) in sensors.iter().enumerate() {
            let sigma = s.sigma_k.unwrap_or(self.noise_k);
            g.row_mut(i).scale_mut(1.0 / sigma);
        }
        g
    }

    /// The posterior covariance after `sensors`, and the log det gain.
    fn posterior(&self, sensors: &[LayoutSensor]) -> Result<(DMatrix<f64>, f64, DMatrix<f64>)> {
        let h = self.whitened(sensors);
        let mut precision = DMatrix::from_diagonal(&self.prior.variances.map(|v| 1.0 / v));
        precision += h.transpose() * &h;
        let chol = precision.cholesky().ok_or_else(|| {
            Error::Internal("the posterior precision of a layout is not positive definite".into())
        })?;
        let logdet: f64 = chol
            .l()
            .diagonal()
            .iter()
            .map(|x| 2.0 * x.ln())
            .sum::<f64>()
            + self.prior.variances.iter().map(|v| v.ln()).sum::<f64>();
        Ok((chol.inverse(), logdet, h))
    }

    /// What `estimate` gives on readings from `sensors`: [`ESTIMATE_CHECK_DRAWS`] profiles
    /// drawn from the prior, readings with the design's noise, each fitted with the case's
    /// strength rule and smoothing (`auto`: chosen per draw) as `estimate` fits; per edge the
    /// median root-mean-square half-width of the linear band (`estimate`'s cross-check band,
    /// at the chosen strength). The design's own prediction fixes the strength at the prior's
    /// equivalent; readings choose a weaker smoothing when they can, which widens the band.
    ///
    /// # Errors
    /// None in practice: draws whose fit fails are skipped; `Ok(None)` when none succeeds.
    pub fn estimate_check(
        &self,
        case: &Case,
        sensors: &[LayoutSensor],
    ) -> Result<Option<EstimateCheck>> {
        if sensors.is_empty() {
            return Ok(None);
        }
        let strength = crate::estimate::strength_of(case.fit.strength);
        let Some((edges, mut draws)) = self.simulated_bands(case, sensors, &self.prior.variances)
        else {
            return Ok(None);
        };
        let rough_edges = (self.prior.order > 0)
            .then(|| {
                let rough = Prior::new(&self.model, self.prior.order - 1, self.prior.variation_k);
                self.simulated_bands(case, sensors, &rough.variances)
            })
            .flatten()
            .map(|(bands, n)| {
                draws = draws.min(n);
                bands
            });
        Ok(Some(EstimateCheck {
            draws,
            rule: strength.name().to_string(),
            edges,
            rough_edges,
        }))
    }

    /// Median linear-band half-widths per edge of `estimate`-style fits on readings of
    /// profiles drawn with the prior `variances` ([`DesignSpace::estimate_check`]), and how
    /// many of the draws' fits succeeded.
    fn simulated_bands(
        &self,
        case: &Case,
        sensors: &[LayoutSensor],
        variances: &DVector<f64>,
    ) -> Option<(Vec<(Edge, f64)>, usize)> {
        use rand::SeedableRng;
        use rand_distr::{Distribution, StandardNormal};
        let points: Vec<Point> = sensors.iter().map(|s| s.position).collect();
        let a = self.model.sensor_map(&points).matrix;
        let sigma = DVector::from_iterator(
            sensors.len(),
            sensors.iter().map(|s| s.sigma_k.unwrap_or(self.noise_k)),
        );
        let strength = crate::estimate::strength_of(case.fit.strength);
        let z = Normal::standard().inverse_cdf(0.5 + self.confidence / 2.0);
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(case.uncertainty.seed);
        let stated_order = case.fit.smoothing.order().unwrap_or(self.prior.order);
        let stated_penalty = crate::estimate::penalty::penalty_weights(&self.model, stated_order);
        let mut widths: Vec<Vec<f64>> = vec![Vec::new(); self.maps.len()];
        let mut fitted = 0;
        for _ in 0..ESTIMATE_CHECK_DRAWS {
            let c = DVector::from_iterator(
                variances.len(),
                variances.iter().map(|v| {
                    let n: f64 = StandardNormal.sample(&mut rng);
                    v.sqrt() * n
                }),
            );
            let mut d = &a * c;
            for (i, di) in d.iter_mut().enumerate() {
                let n: f64 = StandardNormal.sample(&mut rng);
                *di += sigma[i] * n;
            }
            let mut input = crate::estimate::fit::FitInput {
                a: a.clone(),
                d,
                sigma: sigma.clone(),
                sigma_stated: true,
                penalty: stated_penalty.clone(),
            };
            if case.fit.smoothing == crate::case::Smoothing::Auto {
                if let Ok(o) = crate::estimate::choose_order(&input, &self.model) {
                    input.penalty = crate::estimate::penalty::penalty_weights(&self.model, o);
                }
            }
            let Ok(fit) = crate::estimate::fit::fit(&input, strength) else {
                continue;
            };
            fitted += 1;
            for (k, map) in self.maps.iter().enumerate() {
                let sd = crate::estimate::linear_sd(&map.matrix, &fit.solution.covariance);
                let rms = (sd.iter().map(|v| v * v).sum::<f64>() / sd.len().max(1) as f64).sqrt();
                if rms.is_finite() {
                    widths[k].push(z * rms);
                }
            }
        }
        let mut edges = Vec::new();
        for (k, (edge, _)) in self.edges.iter().enumerate() {
            let w = &mut widths[k];
            if w.is_empty() {
                return None;
            }
            w.sort_by(f64::total_cmp);
            edges.push((*edge, w[w.len() / 2]));
        }
        Some((edges, fitted))
    }

    /// Score a layout: predicted uncertainty along the edges, resolution lengths, criteria,
    /// condition number.
    #[allow(clippy::float_cmp)] // positions copied from one grid: equal means the same point
    pub fn evaluate(&self, sensors: &[LayoutSensor]) -> Result<LayoutScore> {
        let (c, information, h) = self.posterior(sensors)?;
        let p = self.model.parameter_count();
        // the prior's spread about the level: the penalised coefficients only
        let penalised = crate::estimate::penalty::penalty_weights(&self.model, self.prior.order);
        let prior_cov = DMatrix::from_diagonal(&DVector::from_iterator(
            p,
            (0..p).map(|j| {
                if penalised[j] > 0.0 {
                    self.prior.variances[j]
                } else {
                    0.0
                }
            }),
        ));
        // R = I − C Σ₀⁻¹
        let mut resolution = DMatrix::<f64>::identity(p, p);
        for j in 0..p {
            let inv = 1.0 / self.prior.variances[j];
            for i in 0..p {
                resolution[(i, j)] -= c[(i, j)] * inv;
            }
        }
        let mut edges = Vec::new();
        let mut sum_var = 0.0;
        let mut count = 0usize;
        let mut worst = (f64::NEG_INFINITY, Edge::Bottom, 0.0);
        for ((edge, pos), map) in self.edges.iter().zip(&self.maps) {
            let sd = diag_sd(&map.matrix, &c);
            let prior_sd = diag_sd(&map.matrix, &prior_cov);
            for (k, &s) in sd.iter().enumerate() {
                sum_var += s * s;
                count += 1;
                if s > worst.0 {
                    worst = (s, *edge, pos[k]);
                }
            }
            let n = pos.len();
            let mut res: Vec<(f64, f64)> = (0..RESOLUTION_POSITIONS)
                .map(|k| {
                    let i0 = (((k as f64 + 0.5) / RESOLUTION_POSITIONS as f64) * (n - 1) as f64)
                        .round() as usize;
                    let len = resolution_length_at(&self.model, &resolution, *edge, pos, map, i0);
                    (pos[i0], len)
                })
                .collect();
            res.dedup_by(|a, b| a.0 == b.0);
            let mut lens: Vec<f64> = res.iter().map(|r| r.1).collect();
            lens.sort_by(f64::total_cmp);
            let resolution_median = lens[lens.len() / 2];
            let resolution_worst = worst_resolution(&self.model, &resolution, *edge, pos, map);
            let rms_sd = (sd.iter().map(|s| s * s).sum::<f64>() / n as f64).sqrt();
            let max_sd = sd.iter().copied().fold(0.0, f64::max);
            edges.push(EdgeScore {
                edge: *edge,
                positions: pos.clone(),
                sd,
                prior_sd,
                rms_sd,
                max_sd,
                resolution: res,
                resolution_median,
                resolution_worst,
            });
        }
        let condition_number = if h.nrows() == 0 {
            None
        } else {
            let sv = h.clone().svd(false, false).singular_values;
            let max = sv.iter().copied().fold(0.0, f64::max);
            let min = sv.iter().copied().fold(f64::INFINITY, f64::min);
            (min > 0.0).then(|| max / min)
        };
        Ok(LayoutScore {
            information,
            edge_mean_variance: sum_var / count.max(1) as f64,
            worst_sd: worst.0,
            worst_at: (worst.1, worst.2),
            condition_number,
            edges,
        })
    }

    /// The [`search::SearchInput`] pieces for adding to `fixed`: whitened candidate and fixed
    /// rows.
    pub fn search_rows(&self, fixed: &[LayoutSensor]) -> (DMatrix<f64>, DMatrix<f64>) {
        let cands: Vec<LayoutSensor> = self
            .candidates
            .iter()
            .map(|&p| LayoutSensor {
                id: String::new(),
                position: p,
                sigma_k: None,
                fixed: false,
            })
            .collect();
        (self.whitened(&cands), self.whitened(fixed))
    }

    /// Run the search for `count` new sensors beside `fixed` on the candidate rows from
    /// [`Self::search_rows`]; returns candidate indices.
    pub fn search_with(
        &self,
        rows: &(DMatrix<f64>, DMatrix<f64>),
        fixed: &[LayoutSensor],
        count: usize,
        progress: &dyn Fn(usize, usize),
    ) -> Result<SearchOutcome> {
        let fixed_positions: Vec<Point> = fixed.iter().map(|s| s.position).collect();
        let spaced = |a: Point, b: Point| self.constraints.spaced(a, b);
        let input = search::SearchInput {
            candidates: &rows.0,
            positions: &self.candidates,
            fixed: &rows.1,
            fixed_positions: &fixed_positions,
            prior_variances: &self.prior.variances,
            edge_points: &self.edge_rows,
            goal: self.criterion.goal(),
            count,
            spaced: &spaced,
        };
        search::search(&input, progress)
    }

    /// Check `count` against the candidates: a clear error (exit status 2) when it is zero
    /// or larger than the number of feasible candidates. `flag` names the option.
    pub fn check_count(&self, count: usize, flag: &str) -> Result<()> {
        if count == 0 {
            return Err(Error::invalid_field(flag, "ask for at least one sensor"));
        }
        if count > self.candidates.len() {
            return Err(Error::invalid_field(
                flag,
                format!(
                    "{count} sensors asked for, but only {} candidate positions satisfy the \
                     constraints of {}{}; ask for fewer, or refine `candidate_spacing` or widen \
                     `allowed`",
                    self.candidates.len(),
                    self.plate_file.display(),
                    self.design_line
                        .map_or(String::new(), |l| format!(" (line {l})"))
                ),
            ));
        }
        Ok(())
    }

    /// Choose `count` new sensors beside `fixed` and score the result. New sensors are
    /// numbered `D01`, `D02`, ... in order of x then y (skipping ids the fixed ones use).
    pub fn design(
        &self,
        fixed: &[LayoutSensor],
        count: usize,
        flag: &str,
        progress: &dyn Fn(usize, usize),
    ) -> Result<(Vec<LayoutSensor>, SearchSummary)> {
        self.check_count(count, flag)?;
        let rows = self.search_rows(fixed);
        let outcome = self
            .search_with(&rows, fixed, count, progress)
            .map_err(|e| match e {
                Error::Invalid { message, .. } => Error::invalid_field(flag, message),
                other => other,
            })?;
        let mut new: Vec<Point> = outcome.chosen.iter().map(|&i| self.candidates[i]).collect();
        new.sort_by(|a, b| a.x.total_cmp(&b.x).then(a.y.total_cmp(&b.y)));
        let mut layout: Vec<LayoutSensor> = fixed.to_vec();
        let mut next = 1;
        for p in new {
            let id = loop {
                let id = format!("D{next:02}");
                next += 1;
                if !fixed.iter().any(|s| s.id == id) {
                    break id;
                }
            };
            layout.push(LayoutSensor {
                id,
                position: p,
                sigma_k: None,
                fixed: false,
            });
        }
        Ok((
            layout,
            SearchSummary {
                count,
                greedy_value: report_value(self.criterion, outcome.greedy_value),
                value: report_value(self.criterion, outcome.value),
                passes: outcome.passes,
                swaps: outcome.swaps,
            },
        ))
    }

    /// Which constraints a layout breaks, for people (empty when it honours them all).
    pub fn violations(&self, layout: &[LayoutSensor]) -> Vec<String> {
        let u = self.case_units;
        let l = |m: f64| format!("{:.1} {}", u.length_from_m(m), u.length);
        let mut out = Vec::new();
        for s in layout {
            if !self.constraints.feasible(s.position) {
                out.push(format!(
                    "{} at ({}, {}) is outside the allowed region, in a keep-out region or \
                     closer to an edge than {}",
                    s.id,
                    l(s.position.x),
                    l(s.position.y),
                    l(self.constraints.edge_distance_m)
                ));
            }
        }
        for (i, a) in layout.iter().enumerate() {
            for b in &layout[i + 1..] {
                if !self.constraints.spaced(a.position, b.position) {
                    out.push(format!(
                        "{} and {} are closer than the minimum spacing {}",
                        a.id,
                        b.id,
                        l(self.constraints.sensor_spacing_m)
                    ));
                }
            }
        }
        out
    }

    /// Assemble the result: score the layout (and the comparison), add the cautions.
    pub fn result(
        &self,
        case: &Case,
        layout: Vec<LayoutSensor>,
        search: Option<SearchSummary>,
        against: Option<(String, Vec<LayoutSensor>)>,
    ) -> Result<DesignResult> {
        let score = self.evaluate(&layout)?;
        let against = against
            .map(|(name, l)| {
                self.evaluate(&l).map(|score| Comparison {
                    name,
                    layout: l,
                    score,
                })
            })
            .transpose()?;
        let u = case.units;
        let mut cautions = vec![SAFETY_CAUTION.to_string()];
        cautions.push(format!(
            "The predicted uncertainty assumes the model and its edge conditions, readings with \
             independent noise of {:.3} {}, and a hidden profile that varies about its level by \
             about {:.3} {} with the smoothness of the {} prior; a real edge with sharper \
             features is resolved less well than predicted.",
            u.dtemp_from_k(self.noise_k),
            temp_symbol(u),
            u.dtemp_from_k(self.prior.variation_k),
            temp_symbol(u),
            crate::case::Smoothing::of_penalty_order(self.prior.order).name(),
        ));
        let estimate_check = self.estimate_check(case, &layout)?;
        if let Some(check) = &estimate_check {
            let z = Normal::standard().inverse_cdf(0.5 + self.confidence / 2.0);
            for ((edge, w), e) in check.edges.iter().zip(&score.edges) {
                let predicted = z * e.rms_sd;
                if *w > 1.5 * predicted {
                    cautions.push(format!(
                        "On the {edge} edge, `estimate` gives bands about {:.1} times wider than \
                         predicted here ({} against {} on average, median of {} simulated \
                         readings fitted as `estimate` fits them): the prediction fixes the \
                         smoothing at the prior's, while `estimate` chooses it from the readings \
                         ({} rule) and, with few degrees of freedom left, chooses it weaker. \
                         Compare layouts by the prediction; expect the estimate's band.",
                        w / predicted,
                        show_dt(u, *w),
                        show_dt(u, predicted),
                        check.draws,
                        check.rule
                    ));
                }
            }
        }
        for v in self.violations(&layout) {
            let whose = if search.is_some() {
                "A sensor kept from the existing layout breaks a constraint: "
            } else {
                "The scored layout breaks a constraint: "
            };
            cautions.push(format!("{whose}{v}."));
        }
        if let Some(a) = &against {
            for v in self.violations(&a.layout) {
                cautions.push(format!(
                    "The layout compared against breaks a constraint: {v}."
                ));
            }
        }
        Ok(DesignResult {
            units: case.units,
            plate: case.plate.clone(),
            criterion: self.criterion,
            prior: self.prior.clone(),
            noise_k: self.noise_k,
            confidence: self.confidence,
            constraints: self.constraints.clone(),
            candidate_count: self.candidates.len(),
            candidate_spacing_m: self.candidate_spacing_m,
            layout,
            score,
            search,
            against,
            cautions,
            defaults: Vec::new(),
            estimate_check,
        })
    }

    /// The z-score of a two-sided band at the case's confidence.
    pub fn z(&self) -> f64 {
        z_of(self.confidence)
    }
}

/// The z-score of a two-sided band at confidence `conf`.
pub fn z_of(conf: f64) -> f64 {
    Normal::new(0.0, 1.0).map_or(1.96, |n| n.inverse_cdf(0.5 + conf / 2.0))
}

/// The search's internal value as reported: the worst criterion is searched on the variance
/// and reported as a standard deviation.
fn report_value(c: Criterion, v: f64) -> f64 {
    match c {
        Criterion::Worst => v.max(0.0).sqrt(),
        _ => v,
    }
}

/// `sqrt(diag(M C Mᵀ))`.
fn diag_sd(m: &DMatrix<f64>, c: &DMatrix<f64>) -> Vec<f64> {
    let mc = m * c;
    (0..m.nrows())
        .map(|i| mc.row(i).dot(&m.row(i)).max(0.0).sqrt())
        .collect()
}

/// Draw a coefficient vector from the design prior (levels and corners from their broad
/// prior about `level_k`), with a standard normal stream `normal` — for Monte Carlo checks of
/// a design.
pub fn prior_draw(
    space: &DesignSpace,
    level_k: f64,
    mut normal: impl FnMut() -> f64,
) -> DVector<f64> {
    let model = space.model();
    let prior = space.prior();
    DVector::from_iterator(
        model.parameter_count(),
        (0..model.parameter_count()).map(|j| {
            let z = normal() * prior.variances[j].sqrt();
            match model.parameters()[j] {
                crate::forward::Parameter::Corner { .. } => level_k + z,
                crate::forward::Parameter::Mode {
                    wavenumber: 0.0, ..
                } => level_k + z,
                _ => z,
            }
        }),
    )
}
