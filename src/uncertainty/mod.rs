//! Uncertainty: a bootstrap of the estimation error that re-chooses the strength in every
//! replicate, and the bands and intervals drawn from it.
//!
//! ## Why not the plain bootstrap
//! Replicates generated around the smoothed fit reproduce the spread of the estimate, not its
//! smoothing bias, so plain percentile bands cover the *smoothed* truth and miss peaks
//! (Kuusela & Panaretos 2015, Ann. Appl. Stat. 9:1671–1705; `docs/calibration.md`).
//!
//! ## What is done instead
//! Each replicate `b` draws a *possible truth* `c_b` and new readings for it, re-runs the
//! estimate, and records the estimation error `ε_b = ĉ_b − c_b`:
//!
//! 1. `c_b` is drawn from the smoothness prior the fit itself implies,
//!    `c_{b,j} ~ N(0, 1/(λ̂ l_j²))` for the penalised coefficients (the unpenalised ones do
//!    not affect the error of a linear estimator, which reproduces them exactly);
//! 2. readings `d_b = A c_b + e_b`, with `e_b` Gaussian with the readings' σ (`parametric`)
//!    or resampled from the fit's leverage-corrected, centred residuals
//!    `r_i = e_i / sqrt([(I−S) Σ (I−S)ᵀ]_ii)` scaled by σ_i (`residual`, `docs/method.md` §3); with
//!    position uncertainty the readings are taken at jittered sensor positions in the field of
//!    the estimate;
//! 3. the strength is re-chosen on `d_b` with the case's rule and `ĉ_b` computed on the
//!    same decomposition (one SVD for everything).
//!
//! The draws `t_b = Q ĉ − Q ε_b` of any linear quantity `Q c` (the edge profile, the field,
//! the heat flow) are then samples of what the truth may be given the readings. For a fixed
//! strength and Gaussian noise this reproduces exactly the Bayesian posterior
//! `N(ĉ, (AᵀW²A + λ LᵀL)⁻¹)`, because averaged over the prior the estimation error has that
//! covariance; the prior's variance is what carries the smoothing bias into the band (Wahba
//! 1983, J. R. Statist. Soc. B 45:133–150; Nychka 1988, JASA 83:1134–1143: such bands cover
//! close to nominally on average across the function). Re-choosing the strength adds the
//! uncertainty of the choice, and the residual mode drops the Gaussian assumption on the
//! noise. The calibration study in `docs/calibration.md` measures the coverage.
//!
//! Reproducible: replicate `b` draws from its own ChaCha8 stream `(seed, b)`, so the numbers
//! do not depend on the number of threads or on scheduling.

use crate::error::Result;
use crate::inverse::fit::{Fit, select_options};
use crate::inverse::{EvidenceSearch, Strength, StrengthMethod};
use nalgebra::{DMatrix, DVector};
use rand::{RngExt, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;
use rayon::prelude::*;
use serde::Serialize;

/// How replicate readings get their noise.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum BootstrapMode {
    /// Resampled leverage-corrected residuals.
    Residual,
    /// Gaussian draws with the readings' σ.
    Parametric,
}

impl BootstrapMode {
    /// The name used on the command line and in summaries.
    pub fn name(self) -> &'static str {
        match self {
            BootstrapMode::Residual => "residual",
            BootstrapMode::Parametric => "parametric",
        }
    }
}

impl std::fmt::Display for BootstrapMode {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// The temperature change (kelvin) of each reading when the sensors move by the given
/// displacements `(dx, dy)` (metres), one per reading.
pub type PositionShift<'a> = &'a (dyn Fn(&[(f64, f64)]) -> Vec<f64> + Sync);

/// Everything the bootstrap needs.
pub struct BootstrapInput<'a> {
    /// The final fit (its decomposition is reused for every replicate).
    pub fit: &'a Fit,
    /// The strength rule (re-applied per replicate) or the fixed strength.
    pub strength: Strength,
    /// The penalty diagonal `l_j`.
    pub penalty: &'a DVector<f64>,
    /// Noise mode.
    pub mode: BootstrapMode,
    /// The sensor-map rows of the readings in use (m × p).
    pub a: &'a DMatrix<f64>,
    /// Optional position jitter: standard deviation per reading (metres) and a function
    /// giving the readings' temperature change for displacements `(dx, dy)` per reading.
    pub jitter: Option<(&'a [f64], PositionShift<'a>)>,
    /// Centre the replicate truths on the estimate (`true`) or on the prior mean (`false`).
    pub center_on_estimate: bool,
    /// Number of replicates.
    pub replicates: usize,
    /// Seed.
    pub seed: u64,
    /// Called with the number of replicates done so far (from worker threads).
    pub progress: Option<&'a (dyn Fn(usize) + Sync)>,
}

/// The estimation errors of every replicate, in the coefficients; the errors of any linear
/// quantity follow from them ([`BootstrapOutput::errors_of`],
/// [`BootstrapOutput::pointwise_band_of`]).
#[derive(Debug, Clone)]
pub struct BootstrapOutput {
    /// `B × p`: row `b` is `ε_b = ĉ_b − c_b`.
    pub coefficient_errors: DMatrix<f64>,
    /// The strength chosen in each replicate.
    pub lambdas: Vec<f64>,
    /// Replicates where the rule failed and the case's own strength was used instead.
    pub fallbacks: usize,
}

/// Leverage-corrected, centred residuals of a fit (dimensionless; `docs/method.md` §3).
pub fn standardised_residuals(fit: &Fit) -> Result<Vec<f64>> {
    let m = fit.sigma.len();
    let s = fit.decomposition.influence_matrix(fit.selection.lambda)?;
    let i_minus_s = DMatrix::<f64>::identity(m, m) - s;
    let mut r: Vec<f64> = (0..m)
        .map(|i| {
            let var: f64 = (0..m)
                .map(|k| (i_minus_s[(i, k)] * fit.sigma[k]).powi(2))
                .sum();
            let e = fit.solution.residuals[i];
            if var > 1e-300 { e / var.sqrt() } else { 0.0 }
        })
        .collect();
    let mean = r.iter().sum::<f64>() / m as f64;
    for v in &mut r {
        *v -= mean;
    }
    Ok(r)
}

/// Run the bootstrap (module doc).
pub fn bootstrap(input: &BootstrapInput<'_>) -> Result<BootstrapOutput> {
    let fit = input.fit;
    let dec = &fit.decomposition;
    let lambda = fit.selection.lambda;
    let (m, p) = input.a.shape();
    let prior_sd: Vec<f64> = input
        .penalty
        .iter()
        .map(|&l| {
            if l > 0.0 {
                1.0 / (lambda.sqrt() * l)
            } else {
                0.0
            }
        })
        .collect();
    let residuals = match input.mode {
        BootstrapMode::Residual => standardised_residuals(fit)?,
        BootstrapMode::Parametric => Vec::new(),
    };
    let opts = select_options(false);
    // the evidence rule's choice by the search that bounds most of the grid away and refines
    // by Newton's method (`crate::inverse::search`): the same grid point as the full search,
    // and the same minimum to a tighter tolerance than its Brent step (about 1e-7 relative
    // in λ), for a fraction of the cost; where it starts does not change what it finds, so
    // replicates may run on any thread in any order
    let evidence = input.strength == Strength::Rule(StrengthMethod::Evidence);
    // the other rules' data-independent tables, shared by every replicate
    let grid = match input.strength {
        Strength::Rule(_) if !evidence => dec.strength_grid(&opts),
        _ => None,
    };
    let done = std::sync::atomic::AtomicUsize::new(0);

    struct Scratch {
        proj: crate::inverse::Projection,
        search: EvidenceSearch,
        c_true: DVector<f64>,
        c_hat: DVector<f64>,
        coef_work: Vec<f64>,
        d: DVector<f64>,
    }
    // each replicate's errors into its row of a row-major table, its λ and whether it fell
    // back: written in place by whichever thread runs it, no allocation per replicate
    let b_count = input.replicates;
    let width = p.max(1);
    let mut rows = vec![0.0; b_count * width];
    let mut lambdas = vec![0.0; b_count];
    let mut fell_back = vec![false; b_count];
    rows.par_chunks_mut(width)
        .zip(lambdas.par_iter_mut())
        .zip(fell_back.par_iter_mut())
        .enumerate()
        .for_each_init(
            || Scratch {
                proj: dec.empty_projection(),
                search: EvidenceSearch::default(),
                c_true: DVector::zeros(p),
                c_hat: DVector::zeros(p),
                coef_work: Vec::new(),
                d: DVector::zeros(m),
            },
            |s, (b, ((row, lam_out), fell_out))| {
                let mut rng = ChaCha8Rng::seed_from_u64(input.seed);
                rng.set_stream(b as u64);
                for (j, (c, &sd)) in s.c_true.iter_mut().zip(&prior_sd).enumerate() {
                    let z: f64 = rng.sample(StandardNormal);
                    let centre = if input.center_on_estimate {
                        fit.solution.coefficients[j]
                    } else {
                        0.0
                    };
                    *c = centre + sd * z;
                }
                crate::simd::gemv(&mut s.d, input.a, &s.c_true, false);
                for i in 0..m {
                    let e = match input.mode {
                        BootstrapMode::Parametric => {
                            let z: f64 = rng.sample(StandardNormal);
                            z
                        }
                        BootstrapMode::Residual => residuals[rng.random_range(0..m)],
                    };
                    s.d[i] += fit.sigma[i] * e;
                }
                if let Some((sigmas, shift)) = input.jitter {
                    let moves: Vec<(f64, f64)> = sigmas
                        .iter()
                        .map(|&sg| {
                            let dx: f64 = rng.sample(StandardNormal);
                            let dy: f64 = rng.sample(StandardNormal);
                            (sg * dx, sg * dy)
                        })
                        .collect();
                    for (di, dt) in s.d.iter_mut().zip(shift(&moves)) {
                        *di += dt;
                    }
                }
                let mut fallback = false;
                let lam_b = if dec.project_into(&s.d, &mut s.proj).is_ok() {
                    match input.strength {
                        Strength::Fixed(_) => lambda,
                        rule => {
                            let chosen = if evidence {
                                dec.select_evidence(&s.proj, &opts, &mut s.search)
                            } else {
                                dec.select_on(&s.proj, rule, &opts, grid.as_ref())
                            };
                            chosen.map(|sel| sel.lambda).unwrap_or_else(|_| {
                                fallback = true;
                                lambda
                            })
                        }
                    }
                } else {
                    fallback = true;
                    lambda
                };
                // the filter once per singular value, not once per coefficient and singular
                // value: the same coefficients to rounding (every sample output and the
                // 14-sensor bench case came out byte-identical when this replaced
                // `coefficients_into`)
                if dec
                    .coefficients_fast_into(&s.proj, lam_b, &mut s.coef_work, &mut s.c_hat)
                    .is_err()
                {
                    fallback = true;
                    s.c_hat.copy_from(&s.c_true);
                }
                for (e, (&h, &t)) in row.iter_mut().zip(s.c_hat.iter().zip(s.c_true.iter())) {
                    *e = h - t;
                }
                (*lam_out, *fell_out) = (lam_b, fallback);
                if let Some(cb) = input.progress {
                    let n = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
                    cb(n);
                }
            },
        );
    let coefficient_errors = if p == 0 {
        DMatrix::zeros(b_count, 0)
    } else {
        DMatrix::from_row_slice(b_count, p, &rows)
    };
    let fallbacks = fell_back.iter().filter(|&&f| f).count();
    Ok(BootstrapOutput {
        coefficient_errors,
        lambdas,
        fallbacks,
    })
}

/// Points per block of [`BootstrapOutput::pointwise_band_of`]: the errors of one block
/// (`B × BAND_BLOCK`) are formed, read and dropped, so memory does not grow with the grid.
const BAND_BLOCK: usize = 64;

/// The blocks `(first point, points)` of 64 (`BAND_BLOCK`) points that cover `n` points, a
/// remainder of a few points joined to the block before it.
///
/// A block's errors are the same numbers as the whole product's columns only while the
/// product goes to the same kernel: nalgebra multiplies a matrix of at most five columns by
/// its own loop instead of `matrixmultiply` (a different rounding), so no block is left
/// that narrow unless all `n` points are.
pub fn band_blocks(n: usize) -> impl Iterator<Item = (usize, usize)> {
    /// Widest product nalgebra does not hand to `matrixmultiply` (its `SMALL_DIM`).
    const NARROW: usize = 5;
    let whole = n / BAND_BLOCK;
    let rest = n % BAND_BLOCK;
    let (count, last) = match (whole, rest) {
        (0, _) => (usize::from(n > 0), n),
        (w, r) if r <= NARROW => (w, BAND_BLOCK + r),
        (w, r) => (w + 1, r),
    };
    (0..count).map(move |b| {
        let len = if b + 1 == count { last } else { BAND_BLOCK };
        (b * BAND_BLOCK, len)
    })
}

impl BootstrapOutput {
    /// The errors `Q ε_b` of the linear quantity `Q c` (`Q` is n × p): `B × n`, row `b` for
    /// replicate `b` (one matrix product).
    pub fn errors_of(&self, q: &DMatrix<f64>) -> DMatrix<f64> {
        &self.coefficient_errors * q.transpose()
    }

    /// The errors of rows `start..start + len` of the quantity `Q c` into `errors` (made
    /// `B × len` if it is not): the same numbers as those columns of [`Self::errors_of`]
    /// when `len` is one of [`band_blocks`]' widths (the same call to the product kernel;
    /// `gemm` with β = 0 writes over what the buffer held), without a new matrix per block.
    pub fn errors_of_rows_into(
        &self,
        q: &DMatrix<f64>,
        (start, len): (usize, usize),
        errors: &mut DMatrix<f64>,
    ) {
        let b = self.coefficient_errors.nrows();
        if errors.shape() != (b, len) {
            *errors = DMatrix::zeros(b, len);
        }
        errors.gemm(
            1.0,
            &self.coefficient_errors,
            &q.rows(start, len).transpose(),
            0.0,
        );
    }

    /// The pointwise band ([`pointwise_band`]) of the quantity `Q c` whose estimate is
    /// `estimate`, formed block by block of points in parallel without holding every
    /// replicate's error at every point: the same numbers as
    /// `pointwise_band(estimate, &self.errors_of(q), confidence)`.
    pub fn pointwise_band_of(
        &self,
        q: &DMatrix<f64>,
        estimate: &[f64],
        confidence: f64,
    ) -> (Vec<f64>, Vec<f64>) {
        let n = q.nrows();
        let blocks: Vec<(Vec<f64>, Vec<f64>)> = band_blocks(n)
            .collect::<Vec<_>>()
            .into_par_iter()
            // one errors buffer per worker, written over block after block
            .map_init(
                || DMatrix::zeros(0, 0),
                |errors, (start, len)| {
                    self.errors_of_rows_into(q, (start, len), errors);
                    pointwise_band(&estimate[start..start + len], errors, confidence)
                },
            )
            .collect();
        joined(blocks, n)
    }

    /// [`Self::pointwise_band_of`] with the errors `Q ε_b` formed in single precision: `Q`
    /// and `ε_b` rounded to `f32` and multiplied in `f32` (`sgemm`, twice the values per
    /// instruction of `dgemm`, half the bytes); each point's tails are gathered from them
    /// and widened to `f64` (`TailQuantiles::pair_of_single_differences`), the same band
    /// as [`pointwise_band`] of every error widened.
    ///
    /// **Accuracy.** Each error is then within `γ_{p+2} Σ_k |q_jk ε_bk|` of the exact one
    /// (`p` the coefficients, `γ_n = n u / (1 − n u)`, `u = 2⁻²⁴`: two roundings of the
    /// factors and the inner product's bound, Higham 2002, *Accuracy and Stability of
    /// Numerical Algorithms*, §3.1), about `4e-6` of the size of the terms at 64
    /// coefficients, and a quantile moves by no more than the largest change of the values
    /// it is taken from. The band's own Monte Carlo error is four orders of magnitude larger
    /// (`docs/method.md` §3). A row of `Q` that is zero (a fixed edge) still gives a band of
    /// zero width.
    ///
    /// Where the terms could leave the range of `f32` (an error or an entry of `Q` above
    /// `1e30`, or not finite), the band is [`Self::pointwise_band_of`]'s.
    pub fn pointwise_band_single(
        &self,
        q: &DMatrix<f64>,
        estimate: &[f64],
        confidence: f64,
    ) -> (Vec<f64>, Vec<f64>) {
        /// Largest error, entry of `Q` and row sum of their products kept in `f32`
        /// (whose largest value is about 3.4e38).
        const SINGLE_RANGE: f64 = 1e30;
        // a value that is not finite counts as infinitely large (and fails the test below)
        let size = |v: f64| {
            if v.is_finite() {
                v.abs()
            } else {
                f64::INFINITY
            }
        };
        let e_max = self
            .coefficient_errors
            .iter()
            .fold(0.0_f64, |a, &v| a.max(size(v)));
        // the rows' sums of sizes, column after column (`Q` is column-major); a row's sum
        // bounds each of its entries
        let mut row_sums = vec![0.0_f64; q.nrows()];
        for column in q.column_iter() {
            for (sum, &v) in row_sums.iter_mut().zip(column.iter()) {
                *sum += size(v);
            }
        }
        let q_row_sum = row_sums.iter().fold(0.0_f64, |a, &v| a.max(v));
        if !(e_max < SINGLE_RANGE && q_row_sum < SINGLE_RANGE && e_max * q_row_sum < SINGLE_RANGE) {
            return self.pointwise_band_of(q, estimate, confidence);
        }
        let errors_single = self.coefficient_errors.map(|v| v as f32);
        // `Qᵀ`, so that a block of points is a block of columns
        let q_single = q.transpose().map(|v| v as f32);
        let b = errors_single.nrows();
        let alpha = 1.0 - confidence;
        let (q_lo, q_hi) = (alpha / 2.0, 1.0 - alpha / 2.0);
        let blocks: Vec<(Vec<f64>, Vec<f64>)> = band_blocks(q.nrows())
            .collect::<Vec<_>>()
            .into_par_iter()
            .map_init(
                || {
                    let errors = DMatrix::<f32>::zeros(0, 0);
                    (errors, Vec::new(), Vec::new(), TailQuantiles::default())
                },
                |(errors, column, scratch, tails), (start, len)| {
                    if errors.shape() != (b, len) {
                        *errors = DMatrix::zeros(b, len);
                    }
                    errors.gemm(1.0, &errors_single, &q_single.columns(start, len), 0.0);
                    let mut lower = Vec::with_capacity(len);
                    let mut upper = Vec::with_capacity(len);
                    for (j, &e) in estimate[start..start + len].iter().enumerate() {
                        // column-major: column `j` is entries `j b .. (j + 1) b`
                        let single = &errors.as_slice()[j * b..(j + 1) * b];
                        let (lo, hi) = tails
                            .pair_of_single_differences(e, single, q_lo, q_hi)
                            .unwrap_or_else(|| {
                                column.clear();
                                column.extend(single.iter().map(|&v| f64::from(v)));
                                tails.pair_of_differences(e, column, scratch, q_lo, q_hi)
                            });
                        lower.push(lo);
                        upper.push(hi);
                    }
                    (lower, upper)
                },
            )
            .collect();
        joined(blocks, q.nrows())
    }
}

/// The lower and upper ends of consecutive blocks' bands, joined.
fn joined(blocks: Vec<(Vec<f64>, Vec<f64>)>, n: usize) -> (Vec<f64>, Vec<f64>) {
    let mut lower = Vec::with_capacity(n);
    let mut upper = Vec::with_capacity(n);
    for (lo, hi) in blocks {
        lower.extend(lo);
        upper.extend(hi);
    }
    (lower, upper)
}

/// The `q`-quantile of `values` (linear interpolation between order statistics, the
/// "type 7" definition of Hyndman & Fan 1996). `values` is reordered.
pub fn quantile(values: &mut [f64], q: f64) -> f64 {
    if values.is_empty() {
        return f64::NAN;
    }
    let (h, lo, hi) = position(values.len(), q);
    interpolated(values, lo, hi, h - lo as f64)
}

/// Where the type-7 `q`-quantile of `n ≥ 1` values lies: `h = (n − 1) q` and the order
/// statistics `⌊h⌋`, `⌈h⌉` around it.
fn position(n: usize, q: f64) -> (f64, usize, usize) {
    let h = (n - 1) as f64 * q.clamp(0.0, 1.0);
    (h, h.floor() as usize, h.ceil() as usize)
}

/// The `q_lo`- and `q_hi`-quantiles of `values` (`q_lo ≤ q_hi`), the same numbers as two
/// calls of [`quantile`] but with the second selection confined to the values above the
/// first one's order statistic. `values` is reordered.
pub fn quantile_pair(values: &mut [f64], q_lo: f64, q_hi: f64) -> (f64, f64) {
    let n = values.len();
    if n == 0 {
        return (f64::NAN, f64::NAN);
    }
    let (h1, lo1, hi1) = position(n, q_lo);
    let (h2, lo2, hi2) = position(n, q_hi);
    let first = interpolated(values, lo1, hi1, h1 - lo1 as f64);
    if lo2 <= lo1 {
        // the upper quantile falls on the same order statistics (tiny samples)
        return (first, interpolated(values, lo2, hi2, h2 - lo2 as f64));
    }
    // everything above position lo1 is at least its order statistic: select within it
    let skipped = lo1 + 1;
    let second = interpolated(
        &mut values[skipped..],
        lo2 - skipped,
        hi2 - skipped,
        h2 - lo2 as f64,
    );
    (first, second)
}

/// Scratch space of [`TailQuantiles`]: one buffer per tail.
#[derive(Debug, Default)]
pub struct TailQuantiles {
    low: Vec<f64>,
    high: Vec<f64>,
    /// The single-precision errors gathered by `TailQuantiles::pair_of_single_differences`.
    low_single: Vec<f32>,
    high_single: Vec<f32>,
}

/// How far beyond the mean, in standard deviations, [`TailQuantiles::pair`] cuts each tail
/// before selecting in it: about 7 % of normal draws lie beyond, against the 2.5 % a 95 %
/// band needs; draws that leave too few beyond are handled by the full selection.
const TAIL_CUT_SD: f64 = 1.5;

/// How many values [`TailQuantiles::pair_of_differences`] places its cuts from. Their mean
/// and standard deviation are then within about 0.06 and 4 % of the whole sample's (one
/// standard error), which moves the share beyond a cut between about 5.5 and 8.5 %, still
/// more than twice the 2.5 % a 95 % band needs.
const CUT_SAMPLE: usize = 256;

impl TailQuantiles {
    /// The same numbers as [`quantile_pair`]`(values, q_lo, q_hi)`, found faster when both
    /// quantiles lie in the outer eighths of many values: every value beyond a cut on either
    /// side (the mean ∓ 1.5 standard deviations) is gathered in one pass, and each order
    /// statistic needed is selected among the few gathered. The values on each side of a
    /// cut are exactly the smallest (largest) of all, so their order statistics are the
    /// whole sample's; when a side gathered too few (skewed or non-finite values), or the
    /// quantiles are central, the full selection runs instead. `values` may be reordered.
    pub fn pair(&mut self, values: &mut [f64], q_lo: f64, q_hi: f64) -> (f64, f64) {
        self.gathered(values, q_lo, q_hi)
            .unwrap_or_else(|| quantile_pair(values, q_lo, q_hi))
    }

    /// [`quantile_pair`] of the values `estimate − errors[k]` (the same numbers), with
    /// `values` as scratch. The values are bootstrap replicates in the order they were drawn,
    /// so the first 256 of them are a random sample: the cuts are placed from their mean and
    /// spread, and the values are formed and the tails gathered in one pass over `errors`.
    /// Where the cuts fall decides only how many values are gathered, never which order
    /// statistics come out; when too few are (or a value is NaN, which the cuts cannot
    /// place), the values are written into `values` and fully selected.
    pub fn pair_of_differences(
        &mut self,
        estimate: f64,
        errors: &[f64],
        values: &mut Vec<f64>,
        q_lo: f64,
        q_hi: f64,
    ) -> (f64, f64) {
        if let Some(pair) = self.gathered_differences(estimate, errors, q_lo, q_hi) {
            return pair;
        }
        values.clear();
        values.extend(errors.iter().map(|err| estimate - err));
        quantile_pair(values, q_lo, q_hi)
    }

    /// [`TailQuantiles::pair_of_differences`] from tails gathered while the values are
    /// formed; `None` when the full selection is needed.
    fn gathered_differences(
        &mut self,
        estimate: f64,
        errors: &[f64],
        q_lo: f64,
        q_hi: f64,
    ) -> Option<(f64, f64)> {
        let at = TailPositions::new(errors.len(), q_lo, q_hi)?;
        let sample = &errors[..errors.len().min(CUT_SAMPLE)];
        let moments = lane_moments_of(sample, |err| estimate - err);
        self.select_in_tails(errors, Some(estimate), &at, moments)
    }

    /// [`TailQuantiles::pair_of_differences`] of single-precision errors, each widened to
    /// `f64` (exactly), with the tails gathered before widening, eight errors to an
    /// instruction: a value `estimate − e` falls as `e` rises (rounding keeps the order,
    /// ties aside), so the values' low tail is the errors' high one, and the errors beyond
    /// cuts at their own mean ± [`TAIL_CUT_SD`] standard deviations (of the first
    /// [`CUT_SAMPLE`]) give exactly the values the double-precision gathering selects from:
    /// the same numbers. `None` when a tail gathered too few (or an error is NaN): the
    /// caller widens the errors and takes [`TailQuantiles::pair_of_differences`].
    pub(crate) fn pair_of_single_differences(
        &mut self,
        estimate: f64,
        errors: &[f32],
        q_lo: f64,
        q_hi: f64,
    ) -> Option<(f64, f64)> {
        let at = TailPositions::new(errors.len(), q_lo, q_hi)?;
        let n = at.n;
        let (mean, mean_sq) = lane_moments_of(&errors[..n.min(CUT_SAMPLE)], f64::from);
        let cut = TAIL_CUT_SD * (mean_sq - mean * mean).max(0.0).sqrt();
        // where the cuts fall decides only how many errors are gathered
        let (below, above) = ((mean - cut) as f32, (mean + cut) as f32);
        self.low_single.resize(n + 8, 0.0);
        self.high_single.resize(n + 8, 0.0);
        let (n_err_low, n_err_high, nan) = crate::simd::gather_tails_single(
            &errors[..n],
            (below, above),
            &mut self.low_single,
            &mut self.high_single,
        );
        // the values' low tail holds `n_err_high` values, their high tail `n_err_low`
        if nan || !at.enough(n_err_high, n_err_low) {
            return None;
        }
        self.low.clear();
        self.low.extend(
            self.high_single[..n_err_high]
                .iter()
                .map(|&e| estimate - f64::from(e)),
        );
        self.high.clear();
        self.high.extend(
            self.low_single[..n_err_low]
                .iter()
                .map(|&e| estimate - f64::from(e)),
        );
        Some(self.tails_pair(&at, n_err_high, n_err_low))
    }

    /// [`TailQuantiles::pair`] from the gathered tails; `None` (and `values` untouched) when
    /// the full selection is needed.
    fn gathered(&mut self, values: &[f64], q_lo: f64, q_hi: f64) -> Option<(f64, f64)> {
        let at = TailPositions::new(values.len(), q_lo, q_hi)?;
        let moments = lane_moments_of(values, |v| v);
        self.select_in_tails(values, None, &at, moments)
    }

    /// Gather the values (`estimate − source_i`, or `source_i` without an estimate) beyond the
    /// cuts at the mean ∓ [`TAIL_CUT_SD`] standard deviations (from `(mean, mean square)`)
    /// and select the two order statistics of `at` in them; `None` when a tail gathered too
    /// few or a value is NaN (neither below nor above a cut, it still has a rank among the
    /// others under `f64::total_cmp`).
    fn select_in_tails(
        &mut self,
        source: &[f64],
        estimate: Option<f64>,
        at: &TailPositions,
        (mean, mean_sq): (f64, f64),
    ) -> Option<(f64, f64)> {
        let n = at.n;
        let cut = TAIL_CUT_SD * (mean_sq - mean * mean).max(0.0).sqrt();
        let (below, above) = (mean - cut, mean + cut);
        // room for the gathering's four-value stores past its counts
        self.low.resize(n + 4, 0.0);
        self.high.resize(n + 4, 0.0);
        let (n_low, n_high, nan) = crate::simd::gather_tails(
            &source[..n],
            estimate,
            (below, above),
            &mut self.low,
            &mut self.high,
        );
        if nan || !at.enough(n_low, n_high) {
            return None;
        }
        Some(self.tails_pair(at, n_low, n_high))
    }

    /// The two quantiles of `at` from the `n_low` smallest values (the first of `low`) and
    /// the `n_high` largest (the first of `high`), gathered beyond the cuts.
    fn tails_pair(&mut self, at: &TailPositions, n_low: usize, n_high: usize) -> (f64, f64) {
        let low = &mut self.low[..n_low];
        let first = interpolated(low, at.lo1, at.hi1, at.h1 - at.lo1 as f64);
        let skipped = at.n - n_high; // ranks below the high tail
        let high = &mut self.high[..n_high];
        let second = interpolated(
            high,
            at.lo2 - skipped,
            at.hi2 - skipped,
            at.h2 - at.lo2 as f64,
        );
        (first, second)
    }
}

/// The positions ([`position`]) of a pair of quantiles of `n` values.
struct TailPositions {
    n: usize,
    h1: f64,
    lo1: usize,
    hi1: usize,
    h2: f64,
    lo2: usize,
    hi2: usize,
}

impl TailPositions {
    /// Whether `n_low` smallest and `n_high` largest values hold both quantiles' order
    /// statistics.
    fn enough(&self, n_low: usize, n_high: usize) -> bool {
        n_low > self.hi1 && n_high >= self.n - self.lo2
    }

    /// The positions of the `q_lo`- and `q_hi`-quantiles of `n` values, when
    /// [`TailQuantiles`] may gather them: both in the outer eighths of at least 64 values
    /// (ranks `0..=hi1` must fall in the low tail, `lo2..n` in the high one).
    fn new(n: usize, q_lo: f64, q_hi: f64) -> Option<Self> {
        if n < 64 {
            return None;
        }
        let (h1, lo1, hi1) = position(n, q_lo);
        let (h2, lo2, hi2) = position(n, q_hi);
        if hi1 + 1 > n / 8 || n - lo2 > n / 8 || q_lo > q_hi {
            return None;
        }
        Some(TailPositions {
            n,
            h1,
            lo1,
            hi1,
            h2,
            lo2,
            hi2,
        })
    }
}

/// The mean and the mean square of the values `f(x)` for `x` in `source` (at least one), for
/// [`TailQuantiles`]' cuts, which need not be exact, only cheap: sums in eight independent
/// lanes (which the compiler vectorises).
#[inline(always)]
fn lane_moments_of<T: Copy>(source: &[T], f: impl Fn(T) -> f64) -> (f64, f64) {
    let n = source.len() as f64;
    let (mut sum, mut sum_sq) = ([0.0_f64; 8], [0.0_f64; 8]);
    let chunks = source.chunks_exact(8);
    let rest = chunks.remainder();
    for chunk in chunks {
        let v: [f64; 8] = std::array::from_fn(|l| f(chunk[l]));
        for ((s, q), &x) in sum.iter_mut().zip(sum_sq.iter_mut()).zip(&v) {
            *s += x;
            *q += x * x;
        }
    }
    let mut last = [0.0_f64; 8];
    for (t, &x) in last.iter_mut().zip(rest) {
        *t = f(x);
    }
    let tail = &last[..rest.len()];
    let mean = (sum.iter().sum::<f64>() + tail.iter().sum::<f64>()) / n;
    let mean_sq = (sum_sq.iter().sum::<f64>() + tail.iter().map(|v| v * v).sum::<f64>()) / n;
    (mean, mean_sq)
}

/// The type-7 interpolation between the order statistics `lo` and `hi` (`hi` is `lo` or
/// `lo + 1`) of `values` with weight `frac` on the upper one, as [`quantile`] computes it.
/// `values` is reordered.
fn interpolated(values: &mut [f64], lo: usize, hi: usize, frac: f64) -> f64 {
    let (_, &mut v_lo, rest) = values.select_nth_unstable_by(lo, f64::total_cmp);
    if hi == lo {
        return v_lo;
    }
    let v_hi = rest.iter().copied().fold(f64::INFINITY, f64::min);
    v_lo + frac * (v_hi - v_lo)
}

/// Pointwise percentile band of the draws `t_b = estimate − errors[b, :]` at `confidence`.
pub fn pointwise_band(
    estimate: &[f64],
    errors: &DMatrix<f64>,
    confidence: f64,
) -> (Vec<f64>, Vec<f64>) {
    let alpha = 1.0 - confidence;
    let mut col = Vec::with_capacity(errors.nrows());
    let mut tails = TailQuantiles::default();
    let mut lower = Vec::with_capacity(estimate.len());
    let mut upper = Vec::with_capacity(estimate.len());
    for (j, &e) in estimate.iter().enumerate() {
        let (lo, hi) = tails.pair_of_differences(
            e,
            errors.column(j).as_slice(),
            &mut col,
            alpha / 2.0,
            1.0 - alpha / 2.0,
        );
        lower.push(lo);
        upper.push(hi);
    }
    (lower, upper)
}

/// Per column `j` of `errors`, the sum from zero in the order of the rows of its values
/// (`centres` `None`) or of their squared deviations `(e − centres[j])²`: the same numbers
/// as a fold over the column. Four columns go side by side, so that their chains of
/// additions overlap instead of each waiting on its last addition.
fn column_sums(errors: &DMatrix<f64>, centres: Option<&[f64]>, out: &mut [f64]) {
    let (rows, n) = errors.shape();
    // column-major storage: column j is entries j·rows .. (j + 1)·rows
    let all = errors.as_slice();
    let column = |j: usize| &all[j * rows..(j + 1) * rows];
    let centre = |j: usize| centres.map_or(0.0, |c| c[j]);
    let mut j0 = 0;
    while j0 + 4 <= n {
        let (c0, c1, c2, c3) = (column(j0), column(j0 + 1), column(j0 + 2), column(j0 + 3));
        let mu: [f64; 4] = std::array::from_fn(|l| centre(j0 + l));
        let mut acc = [0.0_f64; 4];
        let quads = c0.iter().zip(c1).zip(c2).zip(c3);
        if centres.is_some() {
            for (((&a, &b), &c), &d) in quads {
                acc[0] += (a - mu[0]).powi(2);
                acc[1] += (b - mu[1]).powi(2);
                acc[2] += (c - mu[2]).powi(2);
                acc[3] += (d - mu[3]).powi(2);
            }
        } else {
            for (((&a, &b), &c), &d) in quads {
                acc[0] += a;
                acc[1] += b;
                acc[2] += c;
                acc[3] += d;
            }
        }
        out[j0..j0 + 4].copy_from_slice(&acc);
        j0 += 4;
    }
    for (j, o) in out.iter_mut().enumerate().skip(j0) {
        let mu = centre(j);
        *o = column(j).iter().fold(0.0, |acc, &e| {
            acc + if centres.is_some() {
                (e - mu).powi(2)
            } else {
                e
            }
        });
    }
}

/// Simultaneous band (sup-t; Montiel Olea & Plagborg-Møller 2019, J. Appl. Econometrics
/// 34:1–17): with `se_j` the standard deviation of the draws at `j` and
/// `T_b = max_j |t_bj − t̄_j| / se_j`, the band is `t̄_j ± c se_j` where `c` is the
/// `confidence` quantile of `T_b` and `t̄_j` the draws' mean.
pub fn simultaneous_band(
    estimate: &[f64],
    errors: &DMatrix<f64>,
    confidence: f64,
) -> (Vec<f64>, Vec<f64>) {
    let mut band = SimultaneousBand::new(errors.nrows());
    band.add_block(estimate, errors);
    band.finish(confidence)
}

/// [`simultaneous_band`] from the points' errors a block of points at a time, in order:
/// each point's mean and standard deviation come from its own column, and each replicate's
/// `T_b` is the largest of its standardised deviations so far (a maximum does not depend on
/// the order it is taken in), so the band is the same to the bit as from all the points at
/// once.
#[derive(Debug, Clone)]
pub struct SimultaneousBand {
    mean: Vec<f64>,
    se: Vec<f64>,
    t: Vec<f64>,
}

impl SimultaneousBand {
    /// No points yet, for `replicates` draws.
    pub fn new(replicates: usize) -> Self {
        SimultaneousBand {
            mean: Vec::new(),
            se: Vec::new(),
            t: vec![0.0; replicates],
        }
    }

    /// The next points: their estimates and their errors (`B × points`, a column per point).
    pub fn add_block(&mut self, estimate: &[f64], errors: &DMatrix<f64>) {
        let (b_count, n) = errors.shape();
        // each point's mean error once (the band's centre and its spread both use it): the
        // sum of the column from zero in order, as `errors.column(j).mean()` forms it
        let mut mean_err = vec![0.0; n];
        column_sums(errors, None, &mut mean_err);
        for m in &mut mean_err {
            *m /= b_count as f64;
        }
        let mean: Vec<f64> = (0..n).map(|j| estimate[j] - mean_err[j]).collect();
        let mut se = vec![0.0; n];
        column_sums(errors, Some(&mean_err), &mut se);
        for v in &mut se {
            *v = (*v / (b_count.max(2) - 1) as f64).sqrt().max(1e-12);
        }
        // T_b, point after point (each point's column is contiguous)
        for (j, column) in errors.as_slice().chunks_exact(b_count.max(1)).enumerate() {
            let (e, m, s) = (estimate[j], mean[j], se[j]);
            // a slice (not the matrix's iterator), so that the loop runs in vector lanes
            for (t_b, err) in self.t.iter_mut().zip(column) {
                *t_b = t_b.max(((e - err) - m).abs() / s);
            }
        }
        self.mean.extend(mean);
        self.se.extend(se);
    }

    /// The band's lower and upper ends at every point added.
    pub fn finish(mut self, confidence: f64) -> (Vec<f64>, Vec<f64>) {
        let c = quantile(&mut self.t, confidence);
        let (mean, se) = (&self.mean, &self.se);
        (
            mean.iter().zip(se).map(|(m, s)| m - c * s).collect(),
            mean.iter().zip(se).map(|(m, s)| m + c * s).collect(),
        )
    }
}

#[cfg(test)]
#[allow(clippy::float_cmp)] // the checked values are exact by construction
mod tests {
    use super::*;

    /// Invented bootstrap errors (`b × p`) and a quantity `Q` (`n × p`) whose first row is
    /// zero (a fixed edge), with columns and rows of sizes far apart.
    fn invented_errors_and_map(b: usize, p: usize, n: usize) -> (BootstrapOutput, DMatrix<f64>) {
        let mut next = crate::testing::uniform(0x2545_f491_4f6c_dd1d);
        let errors = DMatrix::from_fn(b, p, |_, k| next() * 3.0 / (1.0 + k as f64));
        let q = DMatrix::from_fn(n, p, |j, k| {
            if j == 0 {
                0.0
            } else {
                next() * (0.5 + j as f64 / n as f64) * 0.9_f64.powi(k as i32)
            }
        });
        let boot = BootstrapOutput {
            coefficient_errors: errors,
            lambdas: vec![1.0; b],
            fallbacks: 0,
        };
        (boot, q)
    }

    #[test]
    fn the_single_precision_band_is_within_its_rounding_bound() {
        // the bound of `pointwise_band_single`'s doc: each error within
        // γ_{p+2}(2⁻²⁴) Σ_k |q_jk ε_bk| of the exact one, the double-precision product within
        // γ_p(2⁻⁵³) of it, and a quantile moving by no more than its values (Higham 2002,
        // Accuracy and Stability of Numerical Algorithms, §3.1; order statistics are
        // 1-Lipschitz in the largest change)
        let (b, p, n) = (600, 48, 150);
        let (boot, q) = invented_errors_and_map(b, p, n);
        let estimate: Vec<f64> = (0..n).map(|j| 20.0 + j as f64 * 0.1).collect();
        let (lo64, hi64) = boot.pointwise_band_of(&q, &estimate, 0.95);
        let (lo32, hi32) = boot.pointwise_band_single(&q, &estimate, 0.95);
        let gamma = |k: usize, u: f64| k as f64 * u / (1.0 - k as f64 * u);
        let factor = gamma(p + 2, f64::powi(2.0, -24)) + gamma(p, f64::powi(2.0, -53));
        let mut largest_share = 0.0_f64;
        let mut moved = 0;
        for j in 0..n {
            let terms = (0..b)
                .map(|r| {
                    (0..p)
                        .map(|k| (q[(j, k)] * boot.coefficient_errors[(r, k)]).abs())
                        .sum::<f64>()
                })
                .fold(0.0_f64, f64::max);
            // the subtraction from the estimate, rounded in either path
            let bound = factor * terms + 4.0 * f64::EPSILON * (estimate[j].abs() + terms);
            for (single, double) in [(lo32[j], lo64[j]), (hi32[j], hi64[j])] {
                let change = (single - double).abs();
                assert!(
                    change <= bound,
                    "point {j}: moved {change:e}, bound {bound:e}"
                );
                largest_share = largest_share.max(change / bound);
                moved += usize::from(change > 0.0);
            }
        }
        // a fixed edge's row keeps a band of zero width
        assert_eq!((lo32[0], hi32[0]), (estimate[0], estimate[0]));
        // the products did run in single precision: most ends moved, by a part of the bound
        assert!(moved > n, "only {moved} of {} band ends moved", 2 * n);
        assert!(
            largest_share > 1e-3,
            "largest change {largest_share:e} of the bound"
        );
    }

    #[test]
    fn single_precision_tails_give_the_widened_errors_quantiles_bit_for_bit() {
        // invented single-precision errors: normal-like, skewed (one tail too thin for the
        // cuts, so the gathering gives up), with ties, tiny and large; every answer must be
        // the double-precision path's on the widened errors
        let mut next = crate::testing::uniform(0x0bad_cafe_f00d_1234);
        let (mut gathered, mut declined) = (0, 0);
        for n in [64, 100, 257, 2000] {
            for kind in 0..5 {
                let errors: Vec<f32> = (0..n)
                    .map(|i| {
                        let u = next();
                        let v = match kind {
                            0 => (u + next() + next()) * 2.0,
                            1 => (u + 0.5).powi(8) * 40.0,
                            2 => (u * 8.0).round() / 8.0,
                            3 => u * 1e-30,
                            _ => u * 3e4 + (i % 7) as f64,
                        };
                        v as f32
                    })
                    .collect();
                let widened: Vec<f64> = errors.iter().map(|&e| f64::from(e)).collect();
                for (estimate, q) in [(21.5, 0.025), (-3.0, 0.05), (0.0, 0.1)] {
                    let mut tails = TailQuantiles::default();
                    let want =
                        tails.pair_of_differences(estimate, &widened, &mut Vec::new(), q, 1.0 - q);
                    match tails.pair_of_single_differences(estimate, &errors, q, 1.0 - q) {
                        Some(got) => {
                            gathered += 1;
                            assert_eq!(got.0.to_bits(), want.0.to_bits(), "n {n} kind {kind}");
                            assert_eq!(got.1.to_bits(), want.1.to_bits(), "n {n} kind {kind}");
                        }
                        None => declined += 1,
                    }
                }
            }
        }
        // both ways were taken (a tenth in each tail is more than the cuts gather from
        // normal-like errors, so those decline too)
        assert!(
            gathered >= 15 && declined >= 15,
            "gathered {gathered}, declined {declined}"
        );
    }

    #[test]
    fn a_band_out_of_single_range_is_the_double_precision_band() {
        let (mut boot, q) = invented_errors_and_map(300, 20, 40);
        let estimate = vec![5.0; 40];
        for (at, value) in [((3, 2), 4e31), ((7, 0), f64::NAN), ((1, 1), f64::INFINITY)] {
            let saved = boot.coefficient_errors[at];
            boot.coefficient_errors[at] = value;
            let want = boot.pointwise_band_of(&q, &estimate, 0.9);
            let got = boot.pointwise_band_single(&q, &estimate, 0.9);
            for (a, b) in want.0.iter().chain(&want.1).zip(got.0.iter().chain(&got.1)) {
                assert_eq!(a.to_bits(), b.to_bits(), "error {value:e}");
            }
            boot.coefficient_errors[at] = saved;
        }
    }

    // Type-7 quantiles, as numpy.quantile's default "linear" method (Hyndman & Fan 1996).
    #[test]
    fn quantiles_match_the_type_7_definition() {
        let mut v = vec![3.0, 1.0, 4.0, 1.0, 5.0, 9.0, 2.0, 6.0];
        // sorted: 1 1 2 3 4 5 6 9; q=0.25 -> h=1.75 -> 1 + 0.75*(2-1) = 1.75
        assert!((quantile(&mut v, 0.25) - 1.75).abs() < 1e-12);
        assert!((quantile(&mut v, 0.5) - 3.5).abs() < 1e-12);
        assert_eq!(quantile(&mut v, 1.0), 9.0);
        assert_eq!(quantile(&mut v, 0.0), 1.0);
    }

    #[test]
    fn a_quantile_pair_equals_two_quantiles() {
        // quantile_pair is an optimisation of two `quantile` calls: same numbers, any size
        let mut rng = ChaCha8Rng::seed_from_u64(11);
        for n in [1usize, 2, 3, 5, 40, 401, 2000] {
            let v: Vec<f64> = (0..n).map(|_| rng.sample(StandardNormal)).collect();
            for (a, b) in [
                (0.025, 0.975),
                (0.05, 0.95),
                (0.5, 0.5),
                (0.0, 1.0),
                (0.3, 0.31),
            ] {
                let (mut x, mut y, mut z) = (v.clone(), v.clone(), v.clone());
                let pair = quantile_pair(&mut z, a, b);
                assert_eq!(
                    pair,
                    (quantile(&mut x, a), quantile(&mut y, b)),
                    "n {n} {a} {b}"
                );
            }
        }
    }

    #[test]
    fn tail_quantiles_equal_the_full_selection() {
        // TailQuantiles::pair is an optimisation of quantile_pair: the same numbers on
        // normal, skewed, heavy-tailed and tied draws, with and without a non-finite value,
        // whether or not the tails gathered enough values
        let mut rng = ChaCha8Rng::seed_from_u64(23);
        let mut tails = TailQuantiles::default();
        let (mut fast_used, mut fast_differences) = (0, 0);
        for n in [63usize, 64, 100, 401, 2000, 2001] {
            for kind in 0..8 {
                let v: Vec<f64> = (0..n)
                    .map(|i| {
                        let z: f64 = rng.sample(StandardNormal);
                        match kind {
                            0 => z,
                            1 => z.exp() * 30.0 + 300.0, // skewed
                            2 => z.powi(3),              // heavy tails
                            3 => (z * 2.0).round(),      // ties
                            4 if i == 7 => f64::NAN,     // a NaN among the draws
                            5 if i == 3 => -0.0,
                            // a NaN, or an infinity, after the values the cuts are placed from
                            6 if i == n - 5 => f64::NAN,
                            7 if i == n - 3 => f64::INFINITY,
                            6 | 7 => z,
                            _ => -z.abs(), // one-sided
                        }
                    })
                    .collect();
                for (a, b) in [(0.025, 0.975), (0.05, 0.95), (0.005, 0.995), (0.3, 0.7)] {
                    let mut x = v.clone();
                    let mut y = v.clone();
                    let want = quantile_pair(&mut x, a, b);
                    fast_used += usize::from(tails.gathered(&y, a, b).is_some());
                    let got = tails.pair(&mut y, a, b);
                    assert_eq!(want.0.to_bits(), got.0.to_bits(), "n {n} kind {kind} {a}");
                    assert_eq!(want.1.to_bits(), got.1.to_bits(), "n {n} kind {kind} {b}");
                    // the same values as an estimate minus errors, written by the pair
                    let e = 1.5;
                    let errors: Vec<f64> = v.iter().map(|x| e - x).collect();
                    let mut want = errors.iter().map(|err| e - err).collect::<Vec<f64>>();
                    let want = quantile_pair(&mut want, a, b);
                    let mut buf = Vec::new();
                    fast_differences +=
                        usize::from(tails.gathered_differences(e, &errors, a, b).is_some());
                    let got = tails.pair_of_differences(e, &errors, &mut buf, a, b);
                    assert_eq!(want.0.to_bits(), got.0.to_bits(), "n {n} kind {kind} {a}");
                    assert_eq!(want.1.to_bits(), got.1.to_bits(), "n {n} kind {kind} {b}");
                }
            }
        }
        // the gathered tails served most of the cases (normal draws always)
        assert!(fast_used >= 20, "{fast_used}");
        assert!(fast_differences >= 20, "{fast_differences}");
        let normal: Vec<f64> = (0..2000).map(|_| rng.sample(StandardNormal)).collect();
        assert!(tails.gathered(&normal, 0.025, 0.975).is_some());
    }

    #[test]
    fn column_sums_are_the_folds_bit_for_bit() {
        // the sums four columns side by side are each column's fold in order: nalgebra's
        // mean, and the spread's sum of squares, on 9 columns (two groups of four and one
        // left over) of values of mixed magnitudes
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let errors = DMatrix::from_fn(37, 9, |_, j| {
            let z: f64 = rng.sample(StandardNormal);
            z * 10f64.powi(j as i32 - 4) + 1e3 * (j % 2) as f64
        });
        let mut sums = vec![0.0; 9];
        column_sums(&errors, None, &mut sums);
        let mut squares = vec![0.0; 9];
        column_sums(&errors, Some(&sums), &mut squares);
        for j in 0..9 {
            let col = errors.column(j);
            assert_eq!(
                (sums[j] / 37.0).to_bits(),
                col.mean().to_bits(),
                "column {j}"
            );
            let want: f64 = col.iter().map(|e| (e - sums[j]).powi(2)).sum();
            assert_eq!(squares[j].to_bits(), want.to_bits(), "column {j}");
        }
    }

    #[test]
    fn bands_of_gaussian_draws_have_the_normal_width() {
        // errors ~ N(0, 1) at two points: the 95 % pointwise band is about ±1.96.
        let b = 20000;
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let errors = DMatrix::from_fn(b, 2, |_, _| rng.sample::<f64, _>(StandardNormal));
        let (lo, hi) = pointwise_band(&[10.0, 20.0], &errors, 0.95);
        assert!((hi[0] - 10.0 - 1.96).abs() < 0.06, "{hi:?}");
        assert!((10.0 - lo[0] - 1.96).abs() < 0.06, "{lo:?}");
        // sup-t over two independent points: c solves (2Φ(c)−1)² = 0.95 → c ≈ 2.236
        let (slo, shi) = simultaneous_band(&[10.0, 20.0], &errors, 0.95);
        assert!(
            (shi[1] - slo[1] - 2.0 * 2.236).abs() < 0.1,
            "{slo:?} {shi:?}"
        );
    }
}
