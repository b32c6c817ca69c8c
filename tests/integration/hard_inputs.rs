//! Hard inputs (issue 16): physically absurd and non-finite values refused with exit status
//! 2 naming the file, line and field in every command; extreme reading uncertainties at the
//! ends of the plausible range give a finite answer, never a panic; outputs never replace a
//! file the run did not write; budgets refuse runs that would not fit; output sets are never
//! mixed. The ranges themselves are `edgetherm::plausible` (docs/case-files.md, "Plausible
//! ranges"); the checks here are behaviour, not outside values (— format and behaviour).

use assert_cmd::cargo::cargo_bin_cmd;
use std::path::Path;
use tempfile::TempDir;

/// A small invented case (a 150 × 60 mm plate, bottom edge hidden, four sensors). Line
/// numbers in the tests refer to this text.
const PLATE: &str = "\
[plate]
width = 150.0
height = 60.0
length_unit = \"mm\"
temperature_unit = \"C\"
conductivity = 205.0

[edges.bottom]
condition = \"unknown\"

[edges.top]
condition = \"fixed\"
temperature = 25.0

[edges.left]
condition = \"insulated\"

[edges.right]
condition = \"insulated\"

[fit]
terms = 16

[noise]
sigma = 0.5

[uncertainty]
replicates = 40
";

const SENSORS: &str = "sensor,x,y\nTC01,20,8\nTC02,60,10\nTC03,100,9\nTC04,130,12\n";
const READINGS: &str = "sensor,temperature\nTC01,61.3\nTC02,70.2\nTC03,66.0\nTC04,58.1\n";

fn case(plate: &str, sensors: &str, readings: &str) -> TempDir {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("plate.toml"), plate).unwrap();
    std::fs::write(dir.path().join("sensors.csv"), sensors).unwrap();
    std::fs::write(dir.path().join("readings.csv"), readings).unwrap();
    dir
}

fn plate_with(from: &str, to: &str) -> String {
    assert!(
        PLATE.contains(from),
        "test setup: `{from}` not in the plate"
    );
    PLATE.replacen(from, to, 1)
}

/// Run the binary; returns (status, stdout, stderr).
fn run(args: &[&std::ffi::OsStr]) -> (i32, String, String) {
    let out = cargo_bin_cmd!("edgetherm").args(args).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// `edgetherm COMMAND DIR EXTRA...` (estimate without strict bounds, to stay fast).
fn cmd(command: &str, dir: &Path, extra: &[&str]) -> (i32, String, String) {
    let mut args: Vec<&std::ffi::OsStr> = vec![command.as_ref(), dir.as_os_str()];
    if command == "estimate" {
        args.push("--no-bounds".as_ref());
    }
    args.extend(extra.iter().map(|s| std::ffi::OsStr::new(*s)));
    run(&args)
}

fn assert_refused(
    res: &(i32, String, String),
    file: Option<&str>,
    line: Option<usize>,
    field: &str,
    gist: &str,
) {
    let (code, _, err) = res;
    assert_eq!(*code, 2, "exit status; stderr: {err}");
    assert!(!err.contains("panicked"), "{err}");
    if let Some(f) = file {
        assert!(err.contains(f), "file {f}: {err}");
    }
    if let Some(l) = line {
        assert!(err.contains(&format!("line {l},")), "line {l}: {err}");
    }
    assert!(
        err.contains(&format!("field `{field}`")),
        "field {field}: {err}"
    );
    assert!(err.contains(gist), "gist `{gist}`: {err}");
}

#[test]
fn absurd_readings_are_refused_by_every_command_that_reads_them() {
    let dir = case(PLATE, SENSORS, &READINGS.replace("70.2", "1e308"));
    for command in ["check", "estimate"] {
        let out = dir.path().join("out");
        let res = cmd(
            command,
            dir.path(),
            &["--out", out.to_str().unwrap()][..if command == "check" { 0 } else { 2 }],
        );
        assert_refused(
            &res,
            Some("readings.csv"),
            Some(3),
            "temperature",
            "not a plausible temperature",
        );
        // the message writes the value short, not as three hundred digits
        assert!(res.2.contains("1e308") && res.2.len() < 400, "{}", res.2);
        assert!(!out.exists(), "{command} wrote outputs");
    }
    // one absurd reading with --keep-all and a limit: still refused, never a verdict
    let out = dir.path().join("out");
    let res = cmd(
        "estimate",
        dir.path(),
        &[
            "--keep-all",
            "--limit",
            "70",
            "--out",
            out.to_str().unwrap(),
        ],
    );
    assert_refused(&res, Some("readings.csv"), Some(3), "temperature", "5000 K");
    // track: the logger file's absurd reading is refused with its line and column
    let log = dir.path().join("log.csv");
    std::fs::write(
        &log,
        "time,TC01,TC02,TC03,TC04\n0,61.3,70.2,66.0,58.1\n10,61.3,1e308,66.0,58.1\n",
    )
    .unwrap();
    let res = cmd(
        "track",
        dir.path(),
        &[
            "--log",
            log.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ],
    );
    assert_refused(
        &res,
        Some("log.csv"),
        Some(3),
        "TC02",
        "not a plausible reading",
    );
}

#[test]
fn absurd_plate_values_are_refused_on_their_own_line() {
    let cases = [
        (
            "temperature = 25.0",
            "temperature = 1e308",
            13,
            "edges.top.temperature",
            "not a plausible temperature",
        ),
        (
            "temperature = 25.0",
            "temperature = 4800",
            13,
            "edges.top.temperature",
            "5000 K",
        ),
        (
            "sigma = 0.5",
            "sigma = 1e-200",
            25,
            "noise.sigma",
            "plausible range",
        ),
        (
            "sigma = 0.5",
            "sigma = 1e300",
            25,
            "noise.sigma",
            "plausible range",
        ),
        (
            "width = 150.0",
            "width = 1e308",
            2,
            "plate.width",
            "plausible range",
        ),
        (
            "height = 60.0",
            "height = 1e-9",
            3,
            "plate.height",
            "plausible range",
        ),
        (
            "conductivity = 205.0",
            "conductivity = 1e300",
            6,
            "plate.conductivity",
            "plausible range",
        ),
        // a capitalised condition is blamed on the condition line, not on `temperature`
        (
            "condition = \"fixed\"",
            "condition = \"Fixed\"",
            12,
            "edges.top.condition",
            "lower case",
        ),
    ];
    for (from, to, line, field, gist) in cases {
        let dir = case(&plate_with(from, to), SENSORS, READINGS);
        let res = cmd("check", dir.path(), &[]);
        assert_refused(&res, Some("plate.toml"), Some(line), field, gist);
    }
    // a fixed-edge profile with an absurd temperature
    let plate = plate_with("temperature = 25.0", "profile = \"top.csv\"");
    let dir = case(&plate, SENSORS, READINGS);
    std::fs::write(
        dir.path().join("top.csv"),
        "position,temperature\n0,25\n150,9e300\n",
    )
    .unwrap();
    let res = cmd("check", dir.path(), &[]);
    assert_refused(
        &res,
        Some("top.csv"),
        Some(3),
        "temperature",
        "not a plausible temperature",
    );
    // a sensor's own sigma
    let dir = case(
        PLATE,
        "sensor,x,y,sigma\nTC01,20,8,1e-300\nTC02,60,10,\nTC03,100,9,\nTC04,130,12,\n",
        READINGS,
    );
    let res = cmd("check", dir.path(), &[]);
    assert_refused(
        &res,
        Some("sensors.csv"),
        Some(2),
        "sigma",
        "plausible range",
    );
}

#[test]
fn absurd_limits_and_gradients_on_the_command_line() {
    let dir = case(PLATE, SENSORS, READINGS);
    let out = dir.path().join("out");
    let o = out.to_str().unwrap();
    for (extra, field, gist) in [
        (vec!["--limit=-300"], "--limit", "below absolute zero"),
        (
            vec!["--limit", "1e308"],
            "--limit",
            "not a plausible temperature",
        ),
        (
            vec!["--max-gradient", "1e-300"],
            "--max-gradient",
            "plausible range",
        ),
    ] {
        let mut args = extra.clone();
        args.extend(["--out", o]);
        let res = cmd("estimate", dir.path(), &args);
        assert_refused(&res, None, None, field, gist);
        assert!(!out.exists());
    }
    let truth = dir.path().join("truth.csv");
    std::fs::write(&truth, "position,temperature\n0,60\n150,60\n").unwrap();
    let res = cmd(
        "simulate",
        dir.path(),
        &["--truth", truth.to_str().unwrap(), "--noise", "1e300"],
    );
    assert_refused(&res, None, None, "--noise", "plausible range");
}

/// The ends of the plausible sigma range with the discrepancy rule (which once panicked when
/// the chi-square curve overflowed): a finite answer and exit 0, in `estimate` and `track`.
#[test]
fn extreme_sigmas_at_the_range_ends_give_finite_answers() {
    for sigma in ["0.000001", "1000"] {
        let dir = case(
            &plate_with("sigma = 0.5", &format!("sigma = {sigma}")),
            SENSORS,
            READINGS,
        );
        let out = dir.path().join("out");
        let (code, _, err) = cmd(
            "estimate",
            dir.path(),
            &[
                "--strength",
                "discrepancy",
                "--limit",
                "70",
                "--quiet",
                "--out",
                out.to_str().unwrap(),
            ],
        );
        assert!(
            code == 0 || code == 3,
            "sigma {sigma}: status {code}: {err}"
        );
        let json: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap())
                .unwrap();
        let t = json["hottest"]["temperature"].as_f64();
        assert!(
            t.is_some_and(f64::is_finite),
            "sigma {sigma}: {}",
            json["hottest"]
        );
        let p = json["exceedance"]["probability"].as_f64();
        assert!(
            p.is_some_and(|p| (0.0..=1.0).contains(&p)),
            "sigma {sigma}: {}",
            json["exceedance"]
        );
        let profile = std::fs::read_to_string(out.join("profile.csv")).unwrap();
        assert!(
            !profile.contains("NaN") && !profile.contains("inf"),
            "sigma {sigma}"
        );

        let log = dir.path().join("log.csv");
        std::fs::write(
            &log,
            "time,TC01,TC02,TC03,TC04\n0,61.3,70.2,66.0,58.1\n10,61.4,70.0,66.2,58.0\n",
        )
        .unwrap();
        let tout = dir.path().join("track-out");
        let (code, _, err) = cmd(
            "track",
            dir.path(),
            &[
                "--log",
                log.to_str().unwrap(),
                "--strength",
                "discrepancy",
                "--quiet",
                "--out",
                tout.to_str().unwrap(),
            ],
        );
        assert!(!err.contains("panicked"), "{err}");
        assert_eq!(code, 0, "track, sigma {sigma}: {err}");
        let rows = std::fs::read_to_string(tout.join("track.csv")).unwrap();
        assert!(
            !rows.contains("NaN") && !rows.contains("inf"),
            "sigma {sigma}: {rows}"
        );
    }
}

#[test]
fn simulate_never_replaces_an_existing_file_without_overwrite() {
    let dir = case(PLATE, SENSORS, READINGS);
    let truth = dir.path().join("truth.csv");
    std::fs::write(&truth, "position,temperature\n0,60\n150,60\n").unwrap();
    let readings = dir.path().join("readings.csv");
    let t = truth.to_str().unwrap();
    let r = readings.to_str().unwrap();
    let res = cmd("simulate", dir.path(), &["--truth", t, "--out", r]);
    assert_refused(&res, Some("readings.csv"), None, "--out", "--overwrite");
    assert_eq!(
        std::fs::read_to_string(&readings).unwrap(),
        READINGS,
        "measurements replaced"
    );
    // --field over an existing file too
    let field = dir.path().join("field.csv");
    std::fs::write(&field, "x,y,temperature\n").unwrap();
    let new = dir.path().join("sim.csv");
    let res = cmd(
        "simulate",
        dir.path(),
        &[
            "--truth",
            t,
            "--out",
            new.to_str().unwrap(),
            "--field",
            field.to_str().unwrap(),
        ],
    );
    assert_refused(&res, Some("field.csv"), None, "--field", "--overwrite");
    assert!(!new.exists(), "nothing written when one output is refused");
    // asked for explicitly, the old readings may go (they are not an input of simulate)
    let (code, _, err) = cmd(
        "simulate",
        dir.path(),
        &["--truth", t, "--out", r, "--overwrite", "--quiet"],
    );
    assert_eq!(code, 0, "{err}");
    assert_ne!(std::fs::read_to_string(&readings).unwrap(), READINGS);
    // an input is never replaced, --overwrite or not
    let res = cmd(
        "simulate",
        dir.path(),
        &["--truth", t, "--out", t, "--overwrite"],
    );
    assert_refused(&res, Some("truth.csv"), None, "--out", "an input");
}

#[test]
fn output_sets_replace_only_what_an_earlier_run_wrote() {
    let dir = case(PLATE, SENSORS, READINGS);
    let out = dir.path().join("out");
    std::fs::create_dir(&out).unwrap();
    std::fs::write(out.join("summary.json"), "not ours").unwrap();
    // a stale temporary of a process that no longer runs (4294967295 is above any Linux pid)
    let stale = dir.path().join(".edgetherm-4294967295-ab12.tmp");
    std::fs::create_dir(&stale).unwrap();
    std::fs::write(stale.join("profile.csv"), "half").unwrap();
    let o = out.to_str().unwrap();
    let res = cmd("estimate", dir.path(), &["--out", o, "--quiet"]);
    assert_refused(
        &res,
        Some("summary.json"),
        None,
        "--overwrite",
        "no earlier run",
    );
    assert_eq!(
        std::fs::read_to_string(out.join("summary.json")).unwrap(),
        "not ours"
    );
    let (code, _, err) = cmd(
        "estimate",
        dir.path(),
        &["--out", o, "--quiet", "--overwrite"],
    );
    assert_eq!(code, 0, "{err}");
    assert_eq!(edgetherm::io::verify_manifest(&out).unwrap().len(), 7);
    #[cfg(target_os = "linux")]
    assert!(!stale.exists(), "the stale temporary was not removed");
    // the set this program wrote is replaced without the flag
    let (code, _, err) = cmd(
        "estimate",
        dir.path(),
        &["--out", o, "--quiet", "--seed", "3"],
    );
    assert_eq!(code, 0, "{err}");
    let leftovers: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().starts_with(".edgetherm-"))
        .collect();
    assert!(leftovers.is_empty(), "temporaries left: {leftovers:?}");
    // design and track refuse a foreign file of their output names the same way
    let mut plate = PLATE.to_string();
    plate.push_str("\n[design]\nvariation = 4.0\n");
    std::fs::write(dir.path().join("plate.toml"), plate).unwrap();
    let dout = dir.path().join("dout");
    std::fs::create_dir(&dout).unwrap();
    std::fs::write(dout.join("layout.csv"), "mine").unwrap();
    let res = cmd(
        "design",
        dir.path(),
        &["--count", "2", "--out", dout.to_str().unwrap()],
    );
    assert_refused(
        &res,
        Some("layout.csv"),
        None,
        "--overwrite",
        "no earlier run",
    );
    let tout = dir.path().join("tout");
    std::fs::create_dir(&tout).unwrap();
    std::fs::write(tout.join("track.csv"), "mine").unwrap();
    let log = dir.path().join("log.csv");
    std::fs::write(&log, "time,TC01,TC02,TC03,TC04\n0,61.3,70.2,66.0,58.1\n").unwrap();
    let res = cmd(
        "track",
        dir.path(),
        &[
            "--log",
            log.to_str().unwrap(),
            "--out",
            tout.to_str().unwrap(),
        ],
    );
    assert_refused(
        &res,
        Some("track.csv"),
        None,
        "--overwrite",
        "no earlier run",
    );
    assert_eq!(
        std::fs::read_to_string(tout.join("track.csv")).unwrap(),
        "mine"
    );
}

/// Settings at their documented limits are refused before anything large is allocated, with
/// exit status 2 naming the setting, the cost and what to change; the budget is overridable.
#[test]
fn budgets_refuse_runs_that_would_not_fit() {
    let dir = case(
        &plate_with("replicates = 40", "replicates = 1000000"),
        SENSORS,
        READINGS,
    );
    let out = dir.path().join("out");
    let o = out.to_str().unwrap();
    let res = cmd("estimate", dir.path(), &["--grid", "9,9", "--out", o]);
    assert_refused(
        &res,
        Some("plate.toml"),
        Some(28),
        "uncertainty.replicates",
        "fewer replicates",
    );
    assert!(res.2.contains("GB of memory"), "{}", res.2);
    // (with 16 terms the 2001 x 2001 grid at 2000 replicates fits the default budget, in about
    // 5 minutes; 20 000 replicates do not)
    let dir = case(PLATE, SENSORS, READINGS);
    let res = cmd(
        "estimate",
        dir.path(),
        &["--grid", "2001,2001", "--replicates", "20000", "--out", o],
    );
    assert_refused(&res, None, None, "--grid", "coarser --grid");
    assert!(
        !res.2.contains("plate.toml"),
        "a flag is not in the plate file: {}",
        res.2
    );
    let res = cmd(
        "estimate",
        dir.path(),
        &["--replicates", "1000000", "--out", o],
    );
    assert_refused(&res, None, None, "--replicates", "fewer replicates");
    let dir = case(&plate_with("terms = 16", "terms = 4096"), SENSORS, READINGS);
    let res = cmd("estimate", dir.path(), &["--out", o]);
    assert_refused(
        &res,
        Some("plate.toml"),
        Some(22),
        "fit.terms",
        "fewer terms",
    );
    let mut plate = PLATE.to_string();
    plate.push_str("\n[design]\nvariation = 4.0\ncandidate_spacing = 0.001\n");
    let dir = case(&plate, SENSORS, READINGS);
    let res = cmd("design", dir.path(), &["--count", "3", "--out", o]);
    assert_refused(
        &res,
        Some("plate.toml"),
        Some(32),
        "design.candidate_spacing",
        "larger candidate_spacing",
    );
    let log = dir.path().join("log.csv");
    std::fs::write(&log, "time,TC01,TC02,TC03,TC04\n0,61.3,70.2,66.0,58.1\n").unwrap();
    let res = cmd(
        "track",
        dir.path(),
        &[
            "--log",
            log.to_str().unwrap(),
            "--draws",
            "1000000000",
            "--out",
            o,
        ],
    );
    assert_refused(&res, None, None, "--draws", "fewer --draws");
    // the budget is the user's to set: a tiny one refuses even this small run, and a bad
    // value is an error
    let res = cmd(
        "estimate",
        dir.path(),
        &["--memory-budget", "0.001", "--out", o],
    );
    assert_eq!(res.0, 2, "{}", res.2);
    assert!(res.2.contains("above the budget"), "{}", res.2);
    let res = cmd("estimate", dir.path(), &["--time-budget=-1", "--out", o]);
    assert_refused(&res, None, None, "--time-budget", "positive");
    assert!(!out.exists());
}

/// A fixed-edge profile naming a device that never ends is refused, not read without limit;
/// so is a logger "file" whose line never ends.
#[cfg(unix)]
#[test]
fn devices_are_not_read_without_limit() {
    let dir = case(
        &plate_with("temperature = 25.0", "profile = \"/dev/zero\""),
        SENSORS,
        READINGS,
    );
    let res = cmd("check", dir.path(), &[]);
    assert_eq!(res.0, 2, "{}", res.2);
    assert!(
        res.2.contains("/dev/zero") && res.2.contains("larger than 64 MiB"),
        "{}",
        res.2
    );
    let dir = case(PLATE, SENSORS, READINGS);
    let out = dir.path().join("out");
    let res = cmd(
        "track",
        dir.path(),
        &[
            "--log",
            "/dev/zero",
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ],
    );
    assert_eq!(res.0, 2, "{}", res.2);
    // the log's dialect is detected from its first 64 KB (src/io/dialect.rs), so a device
    // without line ends is refused there, before the 1 MiB line limit of the reader is reached
    assert!(
        res.2.contains("/dev/zero") && res.2.contains("no line ends in the first 64 KB"),
        "{}",
        res.2
    );
}
