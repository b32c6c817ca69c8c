//! The fast per-row path of `track` (strength chosen on every row, the default) gives the
//! outputs of the straightforward computation to well below their printed precision.
//!
//! References, each computed independently of the fast path on the same rows:
//!
//! * **λ and order**: a fresh [`Decomposition`] of the row's weighted problem and the full
//!   search of [`Decomposition::select`] (200-point grid then Brent), once per smoothing
//!   order, the order with the lower evidence criterion winning (the rule of `estimate`,
//!   `crate::estimate::choose_order`). Tolerance on λ: 1e-6 relative. The full search's own
//!   Brent step stops at a relative tolerance of √ε ≈ 1.5e-8 on log₁₀ λ (about 1e-7 relative
//!   in λ), so the two agree only to that; the fast search converges to 1e-12 in ln λ.
//! * **Leverages**: the diagonal of the explicit m × m influence matrix
//!   ([`Decomposition::influence_matrix`]), to 1e-12 absolute (both are sums of a few dozen
//!   terms of size ≤ 1).
//! * **Everything written per row** (hottest temperature, position, interval, exceedance
//!   probability, sensors used and left out) **and the alarm episodes**: the tracker with the
//!   engine's check path ([`RowEstimator::use_reference_path`]: the full grid search per
//!   order and again per row, `coefficients_into`, the explicit influence matrix — the
//!   per-row path as it was before it was made fast). Temperatures within 1e-5 K and
//!   positions within 1e-7 m (`track.csv` prints 1e-4 K and 1e-6 m): both paths compute the
//!   same quantities at λ equal to about 1e-7 relative (above), and a band limit moves by up
//!   to a few kelvin per unit of ln λ, so differences of up to about 1e-6 K are expected (seen:
//!   4.8e-7 K at most on this log); 1e-5 K leaves a margin of 20 and is still ten
//!   times below the printed digit. The exceedance probability is a count of posterior draws
//!   over 2000, so it is compared exactly, as are the alarm episodes.
//!
//! The fast path forms the fitted values, the scan profile and the fine window through the
//! pattern's maps in the singular basis (`Decomposition::basis_map`), the evidence search reads
//! the grid's data-independent parts from a table, and the coefficients are formed only for a
//! row with a sensor left out; the check path does none of this, so the comparison covers it.
//!
//! The log is invented (busbar-clamp case, a hot spot that grows past the limit, a sensor
//! open circuit for a stretch so that two missing-sensor patterns are exercised). A second
//! log has a sensor frozen for a stretch, which the health checks leave out; it runs with σ
//! stated, then with one smoothing order and σ estimated per row.

use edgetherm::case::{Case, CaseFiles};
use edgetherm::estimate::{AUTO_ORDERS, case_model, penalty};
use edgetherm::geometry::{EdgeProfile, Point};
use edgetherm::inverse::{Decomposition, Problem, Strength, StrengthMethod};
use edgetherm::io::{LoggerOptions, LoggerReader, LoggerRow, load_case};
use edgetherm::track::engine::{RowEstimator, RowFit, RowStrength};
use edgetherm::track::synthetic::{Fault, FaultKind, Spec, write_log};
use edgetherm::track::{RowStatus, TrackOptions, TrackSummary, Tracker};
use nalgebra::{DMatrix, DVector};

const K: f64 = 273.15;

fn busbar() -> Case {
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/busbar-clamp");
    load_case(&CaseFiles::in_dir(dir)).unwrap()
}

/// An invented log: a flat 50 °C edge plus a hot spot at 78 mm growing by 0.25 K per row,
/// sensor 3 open circuit on rows 120..200. Returns the file (in its temp dir).
fn log(case: &Case, rows: usize) -> (tempfile::TempDir, std::path::PathBuf) {
    log_with(
        case,
        rows,
        vec![Fault {
            sensor: 3,
            from: 120,
            to: Some(200),
            kind: FaultKind::Marker("OPEN".into()),
        }],
    )
}

/// The log of [`log`] with other sensor faults.
fn log_with(
    case: &Case,
    rows: usize,
    faults: Vec<Fault>,
) -> (tempfile::TempDir, std::path::PathBuf) {
    let s: Vec<f64> = (0..=120).map(|i| f64::from(i) * 0.001).collect();
    let bump: Vec<f64> = s
        .iter()
        .map(|&x| (-((x - 0.078) / 0.013f64).powi(2)).exp())
        .collect();
    let amp = |r: usize| 0.25 * r as f64;
    let spec = Spec {
        rows,
        step_s: 10.0,
        start: Some(1_772_348_400),
        sigma: 0.2,
        seed: 23,
        base: EdgeProfile::piecewise_linear(s.clone(), vec![K + 50.0; s.len()]).unwrap(),
        bump: EdgeProfile::piecewise_linear(s, bump).unwrap(),
        amplitude: &amp,
        faults,
        decimals: 2,
    };
    let mut out = Vec::new();
    write_log(case, &spec, &mut out).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("log.csv");
    std::fs::write(&path, out).unwrap();
    (dir, path)
}

fn read_rows(case: &Case, path: &std::path::Path) -> Vec<LoggerRow> {
    let mut reader = LoggerReader::open(path, case, &LoggerOptions::default()).unwrap();
    let mut rows = Vec::new();
    let mut row = LoggerRow::default();
    while reader.next_row(&mut row).unwrap() {
        rows.push(row.clone());
    }
    rows
}

/// What `track.csv` and the summary show of a row.
#[derive(Debug, Clone)]
struct Shown {
    fitted: bool,
    fit: RowFit,
    left_out: Vec<usize>,
}

fn run(case: &Case, rows: &[LoggerRow], reference: bool) -> (Vec<Shown>, TrackSummary) {
    let opts = TrackOptions {
        limit: Some(K + 70.0),
        ..TrackOptions::default()
    };
    let mut tracker = Tracker::new(case, opts).unwrap();
    tracker.estimator_mut().use_reference_path(reference);
    let mut shown = Vec::new();
    let mut sink = |rec: &edgetherm::track::RowRecord<'_>| {
        shown.push(Shown {
            fitted: rec.status == RowStatus::Fitted,
            fit: rec.fit.clone(),
            left_out: rec.left_out.iter().map(|l| l.0).collect(),
        });
        Ok(())
    };
    for row in rows {
        tracker.push(row, &mut sink).unwrap();
    }
    tracker.finish(&mut sink).unwrap();
    (shown, tracker.snapshot())
}

#[test]
fn per_row_path_matches_the_reference_computation() {
    let case = busbar();
    let (_dir, path) = log(&case, 320);
    let rows = read_rows(&case, &path);
    let (fitted, _) = compare_paths(&case, &rows, 1e-6);
    assert!(fitted > 300, "{fitted} rows fitted");
}

/// The same comparison with a sensor whose reading freezes on rows 100..260, which the health
/// checks leave out (its diagnostics then come from the coefficients, which the fast path
/// forms only for such rows): with σ stated and the order chosen per row, then with one
/// smoothing order (no order choice) and σ estimated from each row's residuals (the
/// profiled-scale evidence, `σ̂` scaling every band).
#[test]
fn per_row_path_matches_the_reference_with_a_sensor_left_out_and_sigma_estimated() {
    let mut case = busbar();
    let (_dir, path) = log_with(
        &case,
        320,
        vec![Fault {
            sensor: 1,
            from: 100,
            to: Some(260),
            kind: FaultKind::Stuck,
        }],
    );
    let rows = read_rows(&case, &path);
    let (fitted, left_out) = compare_paths(&case, &rows, 1e-6);
    assert!(fitted > 300, "{fitted} rows fitted");
    // the scenario must exercise the left-out sensor's diagnostics
    assert!(left_out > 20, "{left_out} rows with a sensor left out");
    case.fit.smoothing = edgetherm::case::Smoothing::Curvature;
    case.noise = edgetherm::noise::NoiseSpec::Unstated;
    // λ to 1e-5 here: the profiled-scale evidence is flat to rounding over about 1e-6
    // relative in λ about its minimum (row 24 of this log: 1.04e-6 apart), and the reference's
    // Brent step, which compares criterion values, cannot place λ closer than that; the fast
    // search solves dE/d ln λ = 0 by Newton's method and is not limited by it
    let (fitted, _) = compare_paths(&case, &rows, 1e-5);
    assert!(fitted > 300, "{fitted} rows fitted");
}

/// Run the tracker on `rows` by the fast path and by the engine's check path and compare
/// every number shown (module doc for the tolerances; `lambda_tol` relative on λ). Returns the
/// rows fitted and the rows with a sensor left out.
fn compare_paths(case: &Case, rows: &[LoggerRow], lambda_tol: f64) -> (usize, usize) {
    let (fast, fast_summary) = run(case, rows, false);
    let (slow, slow_summary) = run(case, rows, true);
    assert_eq!(fast.len(), rows.len());
    assert_eq!(slow.len(), rows.len());
    let mut fitted = 0;
    let mut left_out = 0;
    let mut worst_lambda: f64 = 0.0;
    let mut worst_t: f64 = 0.0;
    let mut worst_p: f64 = 0.0;
    // the diagnostics move with λ (at the reference λ, which follows the rows' λ): their
    // tolerances scale with λ's
    let follow = lambda_tol / 1e-6;
    for (k, (a, b)) in fast.iter().zip(&slow).enumerate() {
        assert_eq!(a.fitted, b.fitted, "row {k}");
        assert_eq!(a.left_out, b.left_out, "row {k}");
        if !a.fitted {
            continue;
        }
        fitted += 1;
        left_out += usize::from(!a.left_out.is_empty());
        let (a, b) = (&a.fit, &b.fit);
        assert_eq!(a.used, b.used, "row {k}");
        assert_eq!(a.order, b.order, "row {k}");
        let rel = (a.lambda - b.lambda).abs() / b.lambda;
        worst_lambda = worst_lambda.max(rel);
        assert!(rel < lambda_tol, "row {k}: λ {} vs {}", a.lambda, b.lambda);
        assert_eq!(a.edge, b.edge, "row {k}");
        for (x, y, what) in [
            (a.temperature, b.temperature, "temperature"),
            (
                a.temperature_interval[0],
                b.temperature_interval[0],
                "lower",
            ),
            (
                a.temperature_interval[1],
                b.temperature_interval[1],
                "upper",
            ),
        ] {
            worst_t = worst_t.max((x - y).abs());
            assert!((x - y).abs() < 1e-5, "row {k} {what}: {x} vs {y}");
        }
        for (x, y) in [
            (a.position, b.position),
            (a.position_interval[0], b.position_interval[0]),
            (a.position_interval[1], b.position_interval[1]),
        ] {
            worst_p = worst_p.max((x - y).abs());
            assert!((x - y).abs() < 1e-7, "row {k} position: {x} vs {y}");
        }
        // a share of 2000 draws: the same count
        assert_eq!(a.exceedance, b.exceedance, "row {k}");
        for (i, (da, db)) in a.diagnostics.iter().zip(&b.diagnostics).enumerate() {
            match (da, db) {
                (Some((za, pa)), Some((zb, pb))) => {
                    // at the reference λ, which follows the rows' λ (1e-7 relative apart):
                    // 1e-5 for a z of order one, relative for a large one (with σ estimated
                    // per row a z reaches about 1e3 on this log, and moves with σ̂ and λ)
                    assert!(
                        (za - zb).abs() < 1e-5 * follow * zb.abs().max(1.0),
                        "row {k} sensor {i}: z {za} vs {zb}"
                    );
                    assert!(
                        (pa - pb).abs() < 1e-6 * follow,
                        "row {k} sensor {i}: p {pa} vs {pb}"
                    );
                }
                (None, None) => {}
                _ => panic!("row {k} sensor {i}: {da:?} vs {db:?}"),
            }
        }
    }
    println!(
        "{fitted} rows fitted; largest λ difference {worst_lambda:.2e} relative, largest \
         temperature difference {worst_t:.2e} K, largest position difference {worst_p:.2e} m"
    );
    // the same alarm episodes (the scenario has one: the hot spot passes 70 °C)
    let (ea, eb) = (&fast_summary.episodes, &slow_summary.episodes);
    assert!(!ea.is_empty(), "the scenario must raise an alarm");
    assert_eq!(ea.len(), eb.len());
    for (a, b) in ea.iter().zip(eb) {
        assert_eq!(
            (&a.start, &a.end, a.rows, &a.peak_time),
            (&b.start, &b.end, b.rows, &b.peak_time)
        );
        assert!((a.peak_temperature - b.peak_temperature).abs() < 1e-5);
    }
    assert_eq!(fast_summary.counts.fitted, slow_summary.counts.fitted);
    assert_eq!(fast_summary.events.len(), slow_summary.events.len());
    for (a, b) in fast_summary.events.iter().zip(&slow_summary.events) {
        assert_eq!(
            (a.sensor, a.problem, &a.start, &a.end, a.rows),
            (b.sensor, b.problem, &b.start, &b.end, b.rows)
        );
    }
    (fitted, left_out)
}

/// The row's weighted problem at one smoothing order, for the independent references.
fn decomposition(
    case: &Case,
    readings: &[Option<f64>],
    used: &[usize],
    order: usize,
) -> Decomposition {
    let model = case_model(case).unwrap();
    let points: Vec<Point> = case.sensors.iter().map(|s| s.position).collect();
    let map = model.sensor_map(&points);
    let a = map.matrix.select_rows(used);
    let d = DVector::from_iterator(
        used.len(),
        used.iter().map(|&i| readings[i].unwrap() - map.offset[i]),
    );
    let sigma = DVector::from_iterator(
        used.len(),
        used.iter().map(|&i| case.sensors[i].sigma_k.unwrap_or(0.2)),
    );
    let problem = Problem::new(a, d, sigma, penalty::penalty_weights(&model, order), true).unwrap();
    Decomposition::new(&problem).unwrap()
}

#[test]
fn per_row_strength_and_leverages_match_fresh_full_searches() {
    let case = busbar();
    // the busbar case states σ = 0.2 K for every reading (plate.toml); the reference problem
    // above uses it
    assert!(matches!(case.noise, edgetherm::noise::NoiseSpec::Sigma(s) if (s - 0.2).abs() < 1e-12));
    let (_dir, path) = log(&case, 200);
    let rows = read_rows(&case, &path);
    let mut est = RowEstimator::new(&case, 200, 1, 8).unwrap();
    let rule = Strength::Rule(StrengthMethod::Evidence);
    let mut checked = 0;
    for (k, row) in rows.iter().enumerate().step_by(7) {
        let used: Vec<usize> = (0..row.values.len())
            .filter(|&i| row.values[i].is_some())
            .collect();
        let mut fit = RowFit::default();
        est.fit_row(
            &row.values,
            &used,
            RowStrength::PerRow(rule),
            None,
            &mut fit,
        )
        .unwrap();
        // the reference: the full search at each order, the lower evidence criterion wins
        let mut best: Option<(f64, usize, f64, Decomposition)> = None;
        for order in AUTO_ORDERS {
            let dec = decomposition(&case, &row.values, &used, order);
            let sel = dec
                .select(rule, &edgetherm::estimate::fit::select_options(false))
                .unwrap();
            if best.as_ref().is_none_or(|b| sel.criterion < b.0) {
                best = Some((sel.criterion, order, sel.lambda, dec));
            }
        }
        let (_, order, lambda, dec) = best.unwrap();
        assert_eq!(fit.order, order, "row {k}");
        let rel = (fit.lambda - lambda).abs() / lambda;
        assert!(rel < 1e-6, "row {k}: λ {} vs {lambda}", fit.lambda);
        // leverages in O(m r) against the explicit influence matrix
        let h: DMatrix<f64> = dec.influence_matrix(fit.lambda).unwrap();
        let mut lev = Vec::new();
        dec.leverages_into(fit.lambda, &mut lev).unwrap();
        assert_eq!(lev.len(), used.len());
        for (i, l) in lev.iter().enumerate() {
            assert!((l - h[(i, i)]).abs() < 1e-12, "row {k} sensor {i}");
            assert!(*l > 0.0 && *l < 1.0);
        }
        checked += 1;
    }
    assert!(checked >= 28, "{checked}");
}

/// Rows fitted ahead on a helper thread (`Tracker::push_batch`, the command line's path) give
/// the records and the summary of the rows fed one by one (`Tracker::push`) bit for bit: a
/// row's fit does not depend on the rows before it, its diagnostics and exceedance are formed
/// in row order, and a row whose sensors the health checks change is fitted again in order.
/// Two logs (an open circuit; a frozen sensor and a drifting one, which the checks leave
/// out), batches of 1, 37 and 512 rows, on a pool of two threads; then σ estimated per row
/// with one smoothing order; then both again with the strength calibrated on the first 40
/// rows (`--calibrate`: with σ stated, the rows the calibrated strength misfits are refitted
/// in order). Records are compared through their `Debug` text, which prints every number to
/// the last bit.
#[test]
fn rows_fitted_ahead_give_the_sequential_records_bit_for_bit() {
    let mut case = busbar();
    let (_d1, open) = log(&case, 320);
    let (_d2, faulty) = log_with(
        &case,
        320,
        vec![
            Fault {
                sensor: 1,
                from: 100,
                to: Some(260),
                kind: FaultKind::Stuck,
            },
            Fault {
                sensor: 5,
                from: 150,
                to: None,
                kind: FaultKind::Drift(0.05),
            },
        ],
    );
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    let stated = case.clone();
    let (mut refitted, mut ahead_beside_refits) = (0, 0);
    for round in 0..4 {
        let calibrate = (round >= 2).then_some(40);
        if round == 1 || round == 3 {
            case.fit.smoothing = edgetherm::case::Smoothing::Curvature;
            case.noise = edgetherm::noise::NoiseSpec::Unstated;
        } else {
            case = stated.clone();
        }
        for path in [&open, &faulty] {
            let rows = read_rows(&case, path);
            let (one_by_one, _) = records(&case, &rows, None, calibrate);
            let refit_here = one_by_one
                .0
                .iter()
                .filter(|r| r.contains("refitted: true"))
                .count();
            refitted += refit_here;

            for batch in [1, 37, 512] {
                let (ahead, used_ahead) =
                    pool.install(|| records(&case, &rows, Some(batch), calibrate));
                assert_eq!(one_by_one.0.len(), ahead.0.len());
                for (k, (a, b)) in one_by_one.0.iter().zip(&ahead.0).enumerate() {
                    assert_eq!(a, b, "round {round}, batch {batch}, row {k}");
                }
                assert_eq!(
                    one_by_one.1, ahead.1,
                    "summary, round {round}, batch {batch}"
                );
                // most rows' fits were made ahead, not all in order (a single batch of 512
                // guesses every row's sensors from the state before the log: the fewest).
                // Rows that can be fitted ahead: not those of the batches the calibration
                // ends in or before (fed in order), nor those refitted; with refits, the few
                // rows left may all fall in the batch where the calibration ends
                let calibrating = calibrate.map_or(0, |c| c.next_multiple_of(batch));
                let eligible = rows.len().saturating_sub(calibrating + refit_here);
                if calibrate.is_some() && batch >= rows.len() {
                    // one batch holding the rows calibrated on is fed in order
                    assert_eq!(used_ahead, 0, "round {round}, batch {batch}");
                } else if refit_here == 0 {
                    assert!(
                        used_ahead as usize > eligible / 2,
                        "round {round}, batch {batch}: {used_ahead} rows fitted ahead"
                    );
                } else {
                    ahead_beside_refits += used_ahead;
                }
            }
        }
    }
    // the misfit path was taken (the calibrated strength misfits this log's later rows),
    // beside rows fitted ahead at the calibrated strength
    assert!(refitted > 0, "no row refitted");
    assert!(
        ahead_beside_refits > 0,
        "no row fitted ahead beside the refits"
    );
}

/// Every record of a run as text, the summary, and the rows fitted ahead (`batch`: rows per
/// `push_batch`; `None`: `push` row by row; `calibrate`: rows to calibrate the strength on).
fn records(
    case: &Case,
    rows: &[LoggerRow],
    batch: Option<usize>,
    calibrate: Option<usize>,
) -> ((Vec<String>, String), u64) {
    let opts = TrackOptions {
        calibrate,
        limit: Some(K + 70.0),
        ..TrackOptions::default()
    };
    let mut tracker = Tracker::new(case, opts).unwrap();
    let mut out = Vec::new();
    let mut sink = |rec: &edgetherm::track::RowRecord<'_>| {
        out.push(format!(
            "{:?} {:?} {:?} {:?} {} {:?}",
            rec.status, rec.fit, rec.left_out, rec.missing, rec.usable, rec.bound
        ));
        Ok(())
    };
    match batch {
        None => {
            for row in rows {
                tracker.push(row, &mut sink).unwrap();
            }
        }
        Some(b) => {
            for chunk in rows.chunks(b) {
                tracker.push_batch(chunk.to_vec(), &mut sink).unwrap();
            }
        }
    }
    tracker.finish(&mut sink).unwrap();
    let summary = format!("{:?}", tracker.snapshot());
    ((out, summary), tracker.rows_fitted_ahead())
}

/// At a calibrated (fixed) strength the engine keeps each pattern's exceedance ratios (scan
/// sd over the draws' sd) for the σ scale it formed them at, instead of forming them on every
/// row; the check path forms them on every row. With σ estimated on every row (a σ̂ of its
/// own, so the scale changes from row to row) and a limit inside the rows' bands, the two
/// give every row the same exceedance probability, bit for bit; a kept ratio reused at
/// another scale would move it.
#[test]
fn calibrated_exceedance_with_kept_ratios_matches_the_check_path() {
    let mut case = busbar();
    case.fit.smoothing = edgetherm::case::Smoothing::Curvature;
    case.noise = edgetherm::noise::NoiseSpec::Unstated;
    let (_dir, path) = log(&case, 320);
    let rows = read_rows(&case, &path);
    let exceedances = |reference: bool, limit: f64| {
        let opts = TrackOptions {
            calibrate: Some(40),
            limit: Some(limit),
            ..TrackOptions::default()
        };
        let mut tracker = Tracker::new(&case, opts).unwrap();
        tracker.estimator_mut().use_reference_path(reference);
        let mut out = Vec::new();
        let mut sink = |rec: &edgetherm::track::RowRecord<'_>| {
            out.push((rec.fit.temperature, rec.fit.exceedance));
            Ok(())
        };
        for row in &rows {
            tracker.push(row, &mut sink).unwrap();
        }
        tracker.finish(&mut sink).unwrap();
        out
    };
    // the limit at the median hottest temperature: many rows neither surely below nor above
    let mut hottest: Vec<f64> = exceedances(false, K + 500.0).iter().map(|r| r.0).collect();
    hottest.sort_by(f64::total_cmp);
    let limit = hottest[hottest.len() / 2];
    let (kept, formed) = (exceedances(false, limit), exceedances(true, limit));
    assert_eq!(kept.len(), formed.len());
    let mut between = 0;
    for (k, (a, b)) in kept.iter().zip(&formed).enumerate() {
        let bits = |p: Option<f64>| p.map(f64::to_bits);
        assert_eq!(bits(a.1), bits(b.1), "row {k}: {:?} vs {:?}", a.1, b.1);
        between += usize::from(a.1.is_some_and(|p| p > 0.0 && p < 1.0));
    }
    assert!(between > 20, "only {between} rows between 0 and 1");
}
