//! `track` on synthetic logs with known truths (invented scenarios on the busbar-clamp case):
//! an alarm starts when and where the hidden hot spot crosses the limit, failing sensors are
//! named with their time ranges, and a long healthy log below the limit raises (almost)
//! nothing. Truths come from the forward model (checked against closed forms and FEM
//! references in `forward_*`), noise from a seeded generator.

use edgetherm::case::{Case, CaseFiles};
use edgetherm::geometry::EdgeProfile;
use edgetherm::io::{LoggerOptions, LoggerReader, LoggerRow, load_case};
use edgetherm::track::bounds::RowBound;
use edgetherm::track::health::Problem;
use edgetherm::track::synthetic::{Fault, FaultKind, Spec, write_log};
use edgetherm::track::{RowStatus, TrackOptions, TrackSummary, Tracker};
use std::path::Path;

fn busbar() -> Case {
    let dir =
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-measurements/busbar-clamp");
    load_case(&CaseFiles::in_dir(dir)).unwrap()
}

const K: f64 = 273.15;
/// The hot spot's centre, metres.
const SPOT: f64 = 0.078;

/// Write a log: flat 50 °C edge plus a hot spot at `SPOT` with amplitude `amp(row)`.
fn log(
    case: &Case,
    rows: usize,
    amp: &dyn Fn(usize) -> f64,
    faults: Vec<Fault>,
    seed: u64,
) -> (tempfile::TempDir, std::path::PathBuf, Vec<f64>) {
    let s: Vec<f64> = (0..=120).map(|i| f64::from(i) * 0.001).collect();
    let bump: Vec<f64> = s
        .iter()
        .map(|&x| (-((x - SPOT) / 0.013f64).powi(2)).exp())
        .collect();
    let spec = Spec {
        rows,
        step_s: 10.0,
        start: Some(1_772_348_400),
        sigma: 0.2,
        seed,
        base: EdgeProfile::piecewise_linear(s.clone(), vec![K + 50.0; s.len()]).unwrap(),
        bump: EdgeProfile::piecewise_linear(s, bump).unwrap(),
        amplitude: amp,
        faults,
        decimals: 2,
    };
    let mut out = Vec::new();
    let truths = write_log(case, &spec, &mut out).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("log.csv");
    std::fs::write(&path, out).unwrap();
    (dir, path, truths)
}

/// Run the tracker over a log file; returns the summary and the per-row exceedance.
fn run(case: &Case, path: &std::path::Path, opts: TrackOptions) -> (TrackSummary, Vec<f64>) {
    let mut tracker = Tracker::new(case, opts).unwrap();
    let mut reader = LoggerReader::open(path, case, &LoggerOptions::default()).unwrap();
    let mut row = LoggerRow::default();
    let mut probs = Vec::new();
    let mut sink = |rec: &edgetherm::track::RowRecord<'_>| {
        probs.push(match rec.status {
            RowStatus::Fitted => rec.fit.exceedance.unwrap_or(0.0),
            RowStatus::Skipped(_) => f64::NAN,
        });
        Ok(())
    };
    while reader.next_row(&mut row).unwrap() {
        tracker.push(&row, &mut sink).unwrap();
    }
    tracker.finish(&mut sink).unwrap();
    (tracker.snapshot(), probs)
}

fn row_of(time: &str) -> usize {
    let (t, _) = edgetherm::io::logger::parse_time(time).unwrap();
    ((t - 1_772_348_400.0) / 10.0).round() as usize
}

#[test]
fn alarm_starts_when_and_where_the_hot_spot_crosses_the_limit() {
    let case = busbar();
    // amplitude 0 until row 300, then +0.1 K per row: the true maximum passes 90 °C at row 700
    let amp = |r: usize| 0.1 * (r as f64 - 300.0).max(0.0);
    let (_d, path, truth) = log(&case, 1200, &amp, vec![], 41);
    let cross = truth.iter().position(|&t| t > K + 90.0).unwrap();
    assert_eq!(cross, 701);
    let opts = TrackOptions {
        limit: Some(K + 90.0),
        probability: 0.05,
        ..TrackOptions::default()
    };
    let (s, _) = run(&case, &path, opts);
    assert_eq!(s.episodes.len(), 1, "{:?}", s.episodes);
    let ep = &s.episodes[0];
    let start = row_of(&ep.start);
    // Expected window: the alarm is raised on the probability of exceeding, so it may lead
    // the truth while the upper tail of the band reaches the limit; the hot spot (26 mm at
    // half height) is narrower than the resolution at 7–10 mm depth, so the estimate is
    // biased low and may lag. 150 rows = 15 K of truth either way. Measured: see the
    // message.
    println!("alarm starts at row {start}; the truth crosses at row {cross}");
    assert!(
        start + 150 >= cross && start <= cross + 150,
        "alarm at row {start}, truth crosses at {cross}"
    );
    assert!(
        ep.end.is_none(),
        "the hot spot stays over the limit to the end"
    );
    // where: near the true hot spot on the bottom edge
    assert_eq!(ep.peak_edge.map(|e| e.name()), Some("bottom"));
    assert!(
        (ep.peak_position - SPOT).abs() < 0.005,
        "peak at {} m, hot spot at {SPOT} m",
        ep.peak_position
    );
    // the peak interval holds the truth at the peak row
    let pr = row_of(&ep.peak_time);
    assert!(
        ep.peak_interval[0] <= truth[pr] + 1e-9,
        "{:?} vs {}",
        ep.peak_interval,
        truth[pr]
    );
    // no sensor is blamed for the hot spot
    assert!(
        s.events.iter().all(|e| e.problem == Problem::Dropout),
        "{:?}",
        s.events
    );
}

#[test]
fn failing_sensors_are_named_with_their_time_ranges() {
    let case = busbar();
    let amp = |_r: usize| 10.0;
    let faults = vec![
        Fault {
            sensor: 5, // TC06: +12 K offset (a lead on the wrong channel) rows 400..700
            from: 400,
            to: Some(700),
            kind: FaultKind::Offset(12.0),
        },
        Fault {
            sensor: 1, // TC02 freezes rows 200..500
            from: 200,
            to: Some(500),
            kind: FaultKind::Stuck,
        },
        Fault {
            sensor: 6, // TC07 open circuit from row 800
            from: 800,
            to: None,
            kind: FaultKind::Marker("OPEN".into()),
        },
        Fault {
            sensor: 3, // TC04 drifts 0.02 K per row from row 300 to the end
            from: 300,
            to: None,
            kind: FaultKind::Drift(0.02),
        },
    ];
    let (_d, path, _) = log(&case, 1000, &amp, faults, 7);
    for calibrate in [Some(50), None] {
        println!("calibrate {calibrate:?}");
        check_faults(&case, &path, calibrate);
    }
}

fn check_faults(case: &Case, path: &Path, calibrate: Option<usize>) {
    let (s, _) = run(
        case,
        path,
        TrackOptions {
            calibrate,
            ..TrackOptions::default()
        },
    );
    let find = |sensor: usize, p: Problem| {
        s.events
            .iter()
            .find(|e| e.sensor == sensor && e.problem == p)
            .unwrap_or_else(|| panic!("no {p:?} for sensor {sensor}: {:#?}", s.events))
    };
    println!("refuted candidates: {}", s.refuted);
    for e in &s.events {
        println!(
            "{} {:?} rows {}..{:?}, left out {}",
            e.sensor,
            e.problem,
            row_of(&e.start),
            e.end.as_deref().map(row_of),
            e.rows_left_out
        );
    }
    // Since the physics check ("Sensor decisions" in docs/method.md), a sensor reading high
    // is left out only when no hot feature of the hidden edge explains it. The two high
    // faults of this log sit on the deepest sensors (10 mm, neighbours at 7 mm, 15 mm away)
    // while two other sensors are out (stuck, open), and there a +12 K step or a slow drift
    // cannot always be told from a narrow hot spot under the sensor: the tool then names the
    // sensor `doubtful` (kept, a hot spot or a fault) instead of leaving it out. The old
    // expectations (TC06 left out to row 700, TC04 judged `drift` by row 450, nobody else
    // named) assumed the residual alone decides; what must hold now is that each fault is
    // named from its start, whether as left out or as doubtful, and that only the faulty
    // sensors are ever left out.
    let named = |sensor: usize, row: usize| {
        s.events.iter().any(|e| {
            e.sensor == sensor
                && row_of(&e.start) <= row
                && e.end.as_deref().is_none_or(|t| row_of(t) >= row)
        })
    };
    let off = find(5, Problem::Outlier);
    assert_eq!(
        row_of(&off.start),
        400,
        "TC06's offset named from its start"
    );
    let covered = (400..700).filter(|&r| named(5, r)).count();
    assert!(
        covered >= 270,
        "TC06 named in only {covered} of its 300 faulty rows"
    );
    let stuck = find(1, Problem::Stuck);
    println!("TC02 stuck: {:?}", stuck);
    // the frozen value is row 199's last good reading, so the run of equal values starts there
    assert!((199..=200).contains(&row_of(&stuck.start)));
    assert_eq!(row_of(stuck.end.as_deref().unwrap()), 499);
    let open = find(6, Problem::Dropout);
    assert_eq!(row_of(&open.start), 800);
    assert!(open.end.is_none());
    // TC04 drifts 0.02 K per row from row 300: over σ = 0.2 K, DRIFT_LEVEL (3 σ) of offset is
    // reached ~30 rows in and the trend over the window needs the rest; named (drift or
    // doubtful) within 150 rows of its start, and named to the end of the log
    let first = s
        .events
        .iter()
        .filter(|e| e.sensor == 3 && matches!(e.problem, Problem::Drift | Problem::Doubtful))
        .map(|e| row_of(&e.start))
        .min()
        .expect("TC04's drift is named");
    assert!((300..=450).contains(&first), "drift named from row {first}");
    assert!(named(3, 999), "TC04 named to the end");
    // only the faulty sensors are ever left out
    for e in &s.events {
        assert!(
            e.rows_left_out == 0 || [5, 1, 6, 3].contains(&e.sensor),
            "a good sensor was left out: {e:?}"
        );
    }
}

#[test]
fn false_alarm_rate_on_a_long_healthy_log_below_the_limit() {
    let case = busbar();
    // the true maximum wanders between 70 and 80 °C; the limit is 90 °C
    let amp = |r: usize| 25.0 + 5.0 * (r as f64 / 500.0).sin();
    let rows = 20_000;
    let (_d, path, truth) = log(&case, rows, &amp, vec![], 2027);
    assert!(truth.iter().all(|&t| t < K + 81.0));
    let (s, probs) = run(
        &case,
        &path,
        TrackOptions {
            limit: Some(K + 90.0),
            calibrate: Some(100),
            ..TrackOptions::default()
        },
    );
    let in_alarm = probs.iter().filter(|&&p| p > 0.05).count();
    let rate = in_alarm as f64 / rows as f64;
    println!(
        "false alarms: {} episodes, {in_alarm} of {rows} rows over the probability (rate {rate:.2e})",
        s.episodes.len()
    );
    assert_eq!(s.episodes.len(), 0);
    assert!(
        s.events.is_empty(),
        "healthy sensors blamed: {:?}",
        s.events
    );
}

/// A narrow hot spot (about 10 mm at half height) grows under TC05 while TC02 goes open
/// circuit: the witness of the hot spot is never left out (a hot feature of the hidden edge
/// explains its departure, `docs/method.md`, "Sensor decisions"), and the alarm, once
/// raised, stays on to the end of the log, since the truth stays over the limit. Before the
/// physics check, the witness was left out as "drift" and the alarm ended as if the part had
/// cooled.
#[test]
fn a_hot_spot_growing_under_one_sensor_keeps_its_witness_and_its_alarm() {
    let case = busbar();
    let s: Vec<f64> = (0..=240).map(|i| f64::from(i) * 0.0005).collect();
    let bump: Vec<f64> = s
        .iter()
        .map(|&x| (-((x - 0.068) / 0.006f64).powi(2)).exp())
        .collect();
    let amp = |r: usize| 0.15 * (r as f64 - 100.0).max(0.0);
    let spec = Spec {
        rows: 900,
        step_s: 10.0,
        start: Some(1_772_348_400),
        sigma: 0.2,
        seed: 77,
        base: EdgeProfile::piecewise_linear(s.clone(), vec![K + 50.0; s.len()]).unwrap(),
        bump: EdgeProfile::piecewise_linear(s, bump).unwrap(),
        amplitude: &amp,
        faults: vec![Fault {
            sensor: 1,
            from: 500,
            to: None,
            kind: FaultKind::Marker("OPEN".into()),
        }],
        decimals: 2,
    };
    let mut out = Vec::new();
    let truth = write_log(&case, &spec, &mut out).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("log.csv");
    std::fs::write(&path, out).unwrap();
    let limit = K + 80.0;
    let cross = truth.iter().position(|&t| t > limit).unwrap();
    let (s, _) = run(
        &case,
        &path,
        TrackOptions {
            limit: Some(limit),
            probability: 0.05,
            ..TrackOptions::default()
        },
    );
    println!("truth crosses at row {cross}; episodes {:?}", s.episodes);
    println!("events {:?}", s.events);
    // TC05 may be named `doubtful` (it reads high: a hot spot or a fault), never left out
    assert!(
        s.events
            .iter()
            .all(|e| e.sensor != 4 || (e.problem == Problem::Doubtful && e.rows_left_out == 0)),
        "the witness was left out: {:?}",
        s.events
    );
    assert!(
        !s.episodes.is_empty(),
        "no alarm while the truth is over the limit"
    );
    let last = s.episodes.last().unwrap();
    assert!(last.end.is_none(), "the alarm ended: {last:?}");
    assert!(
        s.episodes.iter().all(|e| row_of(&e.start) + 50 >= cross),
        "an episode started well before the truth crossed"
    );
    assert_eq!(s.episodes.len(), 1, "{:?}", s.episodes);
}

/// `track` with a stated gradient limit bounds every N-th row strictly: on the log of the
/// alarm test (a 26 mm hot spot growing to 90 K, steepest slope 90 K · √(2/e) / 13 mm ≈
/// 5.9 K/mm), under G = 7 K/mm the strict interval of every bounded row holds the true
/// hottest temperature (each row's bounds hold with at least 95 %, and the chi-square region
/// over 8 sensors makes them conservative; Stark 1992), and a row bounded above the limit is
/// in alarm.
#[test]
fn strict_bounds_on_rows_hold_the_truth() {
    let case = busbar();
    let amp = |r: usize| 0.1 * (r as f64 - 300.0).max(0.0);
    let (_d, path, truth) = log(&case, 1200, &amp, vec![], 43);
    let opts = TrackOptions {
        limit: Some(K + 90.0),
        max_gradient_k_per_m: Some(7000.0),
        bounds_every: 100,
        ..TrackOptions::default()
    };
    let mut tracker = Tracker::new(&case, opts).unwrap();
    let mut reader = LoggerReader::open(&path, &case, &LoggerOptions::default()).unwrap();
    let mut row = LoggerRow::default();
    let mut bounded = Vec::new();
    let mut k = 0usize;
    let mut sink = |rec: &edgetherm::track::RowRecord<'_>| {
        if let Some(b) = rec.bound {
            bounded.push((k, b));
        }
        k += 1;
        Ok(())
    };
    while reader.next_row(&mut row).unwrap() {
        tracker.push(&row, &mut sink).unwrap();
    }
    tracker.finish(&mut sink).unwrap();
    let s = tracker.snapshot();
    let counts = s.bounds.expect("bounds were asked for");
    assert_eq!(counts.rows as usize, bounded.len());
    assert!(bounded.len() >= 12, "only {} rows bounded", bounded.len());
    for &(r, b) in &bounded {
        match b {
            RowBound::Interval([lo, hi]) => {
                println!("row {r}: truth {:.2} in [{lo:.2}, {hi:.2}]", truth[r]);
                assert!(
                    lo <= truth[r] && truth[r] <= hi,
                    "row {r}: {:?} vs {}",
                    b,
                    truth[r]
                );
                if lo > K + 90.0 {
                    let in_alarm = s.episodes.iter().any(|e| row_of(&e.start) <= r);
                    assert!(in_alarm, "row {r} bounded above the limit but not in alarm");
                }
            }
            other => panic!("row {r}: {other:?} although the truth obeys the limit"),
        }
    }
}
