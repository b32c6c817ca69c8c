"""The Python API gives the command line's numbers and messages.

Each check runs the built `edgetherm` binary on the bundled samples and compares its files
with what the Python call returns: `.summary` equals summary.json (the whole document), the
tables equal the CSV files, and an invalid input raises `InputError` carrying the message the
command line prints after `edgetherm: `. These are consistency checks between two front ends
of one library; the numbers themselves are checked against outside references in the Rust
tests (DEVELOPERS.md). pandas and pyarrow serve here as general-purpose CSV/Parquet readers
and writers.
"""

import io
import shutil
import threading
import time
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pandas as pd
import pytest

import edgetherm
from conftest import SAMPLES, read_json

ESTIMATE_CASES = [
    ("cold-plate", ["--limit", "60"]),
    ("fin-root", []),
    ("mould-insert", ["--limit", "150"]),
]


def kwargs_of(flags):
    """Command-line flags as keyword arguments (`--limit 60` -> limit=60.0)."""
    out = {}
    it = iter(flags)
    for f in it:
        name = f.lstrip("-").replace("-", "_")
        value = next(it)
        out[name] = int(value) if name in ("calibrate", "count", "replicates") else float(value)
    return out


@pytest.mark.parametrize("name,flags", ESTIMATE_CASES)
def test_estimate_equals_the_command_line(tmp_path, cli, name, flags):
    out = tmp_path / "cli"
    status, _, err = cli("estimate", SAMPLES / name, "--out", out, "--quiet", *flags)
    assert status in (0, 3), err
    r = edgetherm.estimate(edgetherm.Case.from_dir(SAMPLES / name), **kwargs_of(flags))
    assert r.exit_status == status
    assert r.summary == read_json(out / "summary.json")
    for table, file in ((r.profile, "profile.csv"), (r.field, "field.csv"), (r.sensors, "sensors.csv")):
        pd.testing.assert_frame_equal(table, pd.read_csv(out / file))
        assert r.files[file] == (out / file).read_bytes()
    assert r.files["report.html"] == (out / "report.html").read_bytes()
    assert edgetherm.SAFETY_CAUTION in r.summary["cautions"]


def test_readings_as_a_dict_give_the_same_estimate(cli):
    case = edgetherm.Case.from_dir(SAMPLES / "cold-plate")
    from_file = edgetherm.estimate(case, no_bounds=True)
    table = pd.read_csv(SAMPLES / "cold-plate" / "readings.csv")
    as_dict = dict(zip(table["sensor"], table["temperature"]))
    for readings in (as_dict, table, pd.Series(as_dict)):
        r = edgetherm.estimate(case, readings, no_bounds=True)
        a, b = dict(r.summary), dict(from_file.summary)
        # the one difference: readings.csv was not read, so it is not listed as read
        a.pop("inputs_read_as"), b.pop("inputs_read_as")
        assert a == b
    # one reading fewer: a different answer (the readings are used, not ignored)
    first = table["sensor"][0]
    fewer = {k: v for k, v in as_dict.items() if k != first}
    r = edgetherm.estimate(case, fewer, no_bounds=True)
    assert r.summary["hottest"] != from_file.summary["hottest"]


def test_track_equals_the_command_line(tmp_path, cli):
    case_dir = SAMPLES / "busbar-clamp"
    log = case_dir / "log.csv"
    out = tmp_path / "cli"
    flags = ["--limit", "100", "--calibrate", "60"]
    status, _, err = cli("track", case_dir, "--log", log, "--out", out, "--quiet", *flags)
    assert status == 3, err
    r = edgetherm.track(edgetherm.Case.from_dir(case_dir), log, **kwargs_of(flags))
    assert r.exit_status == 3 and r.alarm
    assert r.summary == read_json(out / "summary.json")
    for f in ("track.csv", "alarms.csv", "sensors-health.csv", "track.svg"):
        assert r.files[f] == (out / f).read_bytes(), f
    pd.testing.assert_frame_equal(r.rows, pd.read_csv(out / "track.csv"))
    assert list(r.health["sensor"]) == ["TC03"]
    assert len(r.alarms) == r.summary["alarm"]["episode_count"] == 1


def test_track_of_a_dataframe_equals_the_file(tmp_path, cli):
    case_dir = SAMPLES / "busbar-clamp"
    log = case_dir / "log.csv"
    out = tmp_path / "cli"
    status, _, err = cli("track", case_dir, "--log", log, "--out", out, "--quiet", "--limit", "100")
    assert status == 3, err
    df = pd.read_csv(log, na_values=["OPEN"])
    df["time"] = pd.to_datetime(df["time"], utc=True)
    r = edgetherm.track(edgetherm.Case.from_dir(case_dir), df, limit=100.0)
    for f in ("track.csv", "alarms.csv", "sensors-health.csv", "track.svg"):
        assert r.files[f] == (out / f).read_bytes(), f
    a, b = dict(r.summary), read_json(out / "summary.json")
    assert a.pop("inputs_read_as")[-1]["description"].startswith("in-memory table")
    b.pop("inputs_read_as")
    assert a == b
    # without the per-row table (constant memory): the same summary
    lean = edgetherm.track(edgetherm.Case.from_dir(case_dir), df, limit=100.0, rows=False)
    assert lean.rows is None and lean.summary == r.summary


def test_parquet_from_pyarrow_gives_the_csv_results(tmp_path, cli):
    """A Parquet file written by pyarrow (Snappy, its default; timestamps with a zone;
    nulls for the open-circuit cells) tracks as the CSV of the same data, byte for byte."""
    import pyarrow as pa
    import pyarrow.parquet as pq

    case_dir = SAMPLES / "busbar-clamp"
    log = case_dir / "log.csv"
    df = pd.read_csv(log, na_values=["OPEN"])
    df["time"] = pd.to_datetime(df["time"], utc=True)
    pq_path = tmp_path / "log.parquet"
    pq.write_table(pa.Table.from_pandas(df, preserve_index=False), pq_path)
    assert pq.ParquetFile(pq_path).metadata.row_group(0).column(1).compression == "SNAPPY"
    outs = {}
    for name, path in (("csv", log), ("parquet", pq_path)):
        outs[name] = tmp_path / name
        status, _, err = cli("track", case_dir, "--log", path, "--out", outs[name], "--quiet", "--limit", "100")
        assert status == 3, err
    for f in ("track.csv", "alarms.csv", "sensors-health.csv", "track.svg"):
        assert (outs["csv"] / f).read_bytes() == (outs["parquet"] / f).read_bytes(), f
    a, b = read_json(outs["csv"] / "summary.json"), read_json(outs["parquet"] / "summary.json")
    a.pop("inputs_read_as"), b.pop("inputs_read_as")
    assert a == b
    # and the Python call on the Parquet path equals the command line on it
    r = edgetherm.track(edgetherm.Case.from_dir(case_dir), pq_path, limit=100.0)
    assert r.summary == read_json(outs["parquet"] / "summary.json")


def _error_of(fn):
    with pytest.raises(edgetherm.InputError) as e:
        fn()
    return e.value


def test_errors_carry_the_command_line_messages(tmp_path, cli):
    # a logger file with text in a reading cell
    case_dir = SAMPLES / "busbar-clamp"
    lines = (case_dir / "log.csv").read_text().splitlines()
    cells = lines[5].split(",")
    cells[2] = "warm"
    lines[5] = ",".join(cells)
    bad = tmp_path / "bad.csv"
    bad.write_text("\n".join(lines) + "\n")
    status, _, err = cli("track", case_dir, "--log", bad, "--out", tmp_path / "o", "--quiet")
    assert status == 2
    e = _error_of(lambda: edgetherm.track(edgetherm.Case.from_dir(case_dir), bad))
    assert err.strip() == f"edgetherm: {e}"
    assert (e.file, e.line, e.field) == (str(bad), 6, "TC02")

    # a plate file with a misspelt key, for the estimate
    case = tmp_path / "case"
    shutil.copytree(SAMPLES / "cold-plate", case)
    plate = (case / "plate.toml").read_text()
    (case / "plate.toml").write_text(plate.replace("width", "widht", 1))
    status, _, err = cli("estimate", case, "--out", tmp_path / "e", "--quiet")
    assert status == 2
    e = _error_of(lambda: edgetherm.Case.from_dir(case))
    assert err.strip() == f"edgetherm: {e}"
    assert e.file.endswith("plate.toml") and e.line is not None

    # a setting out of range: the command line names the flag, Python the keyword
    status, _, err = cli("estimate", SAMPLES / "cold-plate", "--out", tmp_path / "p", "--probability", "2")
    assert status == 2 and "field `--probability`" in err
    e = _error_of(lambda: edgetherm.estimate(SAMPLES / "cold-plate", probability=2.0))
    assert "field `probability`" in str(e)
    assert err.strip().replace("--probability", "probability") == f"edgetherm: {e}"


def test_design_equals_the_command_line(tmp_path, cli):
    out = tmp_path / "d"
    status, _, err = cli("design", SAMPLES / "cold-plate", "--count", "6", "--out", out, "--quiet")
    assert status == 0, err
    r = edgetherm.design(edgetherm.Case.from_dir(SAMPLES / "cold-plate"), 6)
    assert r.summary == read_json(out / "design.json")
    assert r.files["layout.csv"] == (out / "layout.csv").read_bytes()
    assert len(r.layout) == 6


def test_case_from_a_dict_and_a_dataframe(tmp_path):
    import tomllib

    src = SAMPLES / "cold-plate"
    plate = tomllib.loads((src / "plate.toml").read_text())
    sensors = pd.read_csv(src / "sensors.csv")
    readings = pd.read_csv(src / "readings.csv")
    case = edgetherm.Case.from_dict(plate, sensors, dict(zip(readings["sensor"], readings["temperature"])))
    built = edgetherm.estimate(case, no_bounds=True).summary
    loaded = edgetherm.estimate(edgetherm.Case.from_dir(src), no_bounds=True).summary
    assert built["hottest"] == loaded["hottest"]
    assert case.sensor_ids == list(sensors["sensor"])


def test_save_writes_the_command_line_set(tmp_path, cli):
    r = edgetherm.estimate(SAMPLES / "fin-root", no_bounds=True)
    written = r.save(tmp_path / "py")
    assert {p.rsplit("/", 1)[-1] for p in map(str, written)} >= {"summary.json", "report.html"}
    status, _, err = cli("estimate", SAMPLES / "fin-root", "--no-bounds", "--out", tmp_path / "cli", "--quiet")
    assert status == 0, err
    for f in ("summary.json", "profile.csv", "report.html"):
        assert (tmp_path / "py" / f).read_bytes() == (tmp_path / "cli" / f).read_bytes()
    # an existing folder the run did not write is refused, as on the command line
    (tmp_path / "other").mkdir()
    (tmp_path / "other" / "summary.json").write_text("{}")
    with pytest.raises(edgetherm.InputError):
        r.save(tmp_path / "other")


def test_the_gil_is_released_during_computation():
    """While an estimate runs in one thread, Python code runs in another: with the GIL held
    the main thread could not run at all until the call returned."""
    case = edgetherm.Case.from_dir(SAMPLES / "cold-plate")
    span = {}

    def work():
        span["start"] = time.perf_counter()
        # 60,000 replicates: 30,000 took 0.28 s once the profile's bands were formed in
        # blocks, under the 0.3 s this test needs to tell a held lock from a released one
        edgetherm.estimate(case, replicates=60000, no_bounds=True)
        span["end"] = time.perf_counter()

    t = threading.Thread(target=work)
    ticks = []
    t.start()
    while t.is_alive():
        ticks.append(time.perf_counter())
        time.sleep(0.001)
    t.join()
    assert span["end"] - span["start"] > 0.3, "the call was too short to tell"
    inside = [x for x in ticks if span["start"] + 0.1 < x < span["end"] - 0.1]
    # at 1 ms per tick the main thread ran ~hundreds of times inside the call
    assert len(inside) > 0.2 * (span["end"] - span["start"] - 0.2) * 1000, (len(inside), span)


def test_thread_pool_runs_tracks_side_by_side():
    """Four tracks on a pool of two threads: the same results as one after the other (the
    time of each is printed; on 2 free cores the pool takes about half as long)."""
    case = edgetherm.Case.from_dir(SAMPLES / "busbar-clamp")
    log = SAMPLES / "busbar-clamp" / "log.csv"
    run = lambda seed: edgetherm.track(case, log, limit=100.0, seed=seed, rows=False).summary  # noqa: E731
    t0 = time.perf_counter()
    serial = [run(s) for s in range(4)]
    t1 = time.perf_counter()
    with ThreadPoolExecutor(2) as pool:
        pooled = list(pool.map(run, range(4)))
    t2 = time.perf_counter()
    print(f"4 tracks: one after the other {t1 - t0:.2f} s, pool of 2 threads {t2 - t1:.2f} s")
    assert pooled == serial


def test_float64_columns_cross_without_copies():
    """The arrays handed to the native call are the DataFrame's own memory for float64
    columns (numpy's shares_memory), and one converted copy for other number types."""
    from edgetherm import _float_column

    df = pd.DataFrame({"a": np.arange(5, dtype=np.float64), "b": np.arange(5, dtype=np.float64),
                       "c": np.arange(5, dtype=np.int64)})
    for name in ("a", "b"):
        assert np.shares_memory(_float_column(df[name]), df[name].to_numpy())
    c = _float_column(df["c"])
    assert c.dtype == np.float64 and not np.shares_memory(c, df["c"].to_numpy())
    nullable = pd.Series([1.0, None, 3.0], dtype="Float64")
    assert np.isnan(_float_column(nullable)[1])


def test_a_case_pickles_as_its_files():
    import pickle

    case = edgetherm.Case.from_dir(SAMPLES / "cold-plate")
    again = pickle.loads(pickle.dumps(case))
    assert again.path == case.path and again.sensor_ids == case.sensor_ids


def test_a_dataframe_column_that_is_not_a_sensor(cli, tmp_path):
    """Refused with the command line's message (naming the keyword where it names the flag),
    or ignored with ignore_extra=True, whatever the column holds."""
    case_dir = SAMPLES / "busbar-clamp"
    df = pd.read_csv(case_dir / "log.csv", na_values=["OPEN"]).head(200)
    df["note"] = "checked"
    e = _error_of(lambda: edgetherm.track(case_dir, df))
    assert e.field == "note" and str(e).endswith("to be ignored (ignore_extra=True)"), str(e)
    csv = tmp_path / "extra.csv"
    df.to_csv(csv, index=False)
    status, _, err = cli("track", case_dir, "--log", csv, "--out", tmp_path / "o", "--quiet")
    assert status == 2 and err.strip().endswith("to be ignored (--ignore-extra)"), err
    r = edgetherm.track(case_dir, df, ignore_extra=True)
    assert r.ignored_columns == ["note"]
    plain = edgetherm.track(case_dir, df.drop(columns=["note"]))
    assert r.files["track.csv"] == plain.files["track.csv"]


def test_tables_without_pandas_or_pyarrow(monkeypatch):
    """A bare install (NumPy only) still gives every table: a dict of NumPy arrays, equal to
    the DataFrame's columns; with pyarrow only, a pyarrow Table."""
    import sys

    r = edgetherm.estimate(SAMPLES / "fin-root", no_bounds=True)
    frame = r.profile
    monkeypatch.setitem(sys.modules, "pandas", None)
    table = edgetherm._table(r.files["profile.csv"])
    assert type(table).__name__ == "Table" and table.num_rows == len(frame)
    monkeypatch.setitem(sys.modules, "pyarrow.csv", None)
    plain = edgetherm._table(r.files["profile.csv"])
    assert isinstance(plain, dict) and list(plain) == list(frame.columns)
    np.testing.assert_array_equal(plain["estimate"], frame["estimate"].to_numpy())
    assert list(plain["edge"]) == list(frame["edge"])
