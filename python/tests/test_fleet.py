"""The fleet example on a local Dask cluster (2 worker processes): its table equals the
command line's per-file results, and a bad log is reported in the table, not fatal.

The logs are cut from the bundled busbar-clamp log (stretches before, during and after its
hot spot; one with a sensor open circuit; one written as Parquet by pyarrow)
and one is damaged on purpose.
"""

import importlib.util
import shutil
from pathlib import Path

import pandas as pd
import pytest

from conftest import ROOT, SAMPLES, read_json

FLEET = ROOT / "examples" / "fleet" / "fleet.py"


def load_fleet():
    spec = importlib.util.spec_from_file_location("edgetherm_fleet_example", FLEET)
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def make_fleet(root: Path) -> dict:
    """Five plates: their case files and one log each (plate-e's is damaged)."""
    src = SAMPLES / "busbar-clamp"
    lines = (src / "log.csv").read_text().splitlines()
    header, body = lines[0], lines[1:]
    logs = {
        "plate-a": body[:300],            # cool: before the hot spot
        "plate-b": body[1300:1900],       # the hot spot: alarm
        "plate-c": body[2400:2880],       # hot and with TC03 open circuit
        "plate-d": body[0:400],           # TC06 open circuit from row 100 on
        "plate-e": body[0:200],           # damaged below
        "plate-f": body[600:1000],        # written as Parquet
    }
    paths = {}
    for plate, rows in logs.items():
        d = root / plate
        d.mkdir(parents=True)
        for f in ("plate.toml", "sensors.csv"):
            shutil.copy(src / f, d / f)
        if plate == "plate-d":
            rows = [",".join(c if (k != 6 or i < 100) else "OPEN" for k, c in enumerate(r.split(",")))
                    for i, r in enumerate(rows)]
        if plate == "plate-e":
            rows = list(rows)
            rows[57] = rows[57].replace(",", ";", 3)
        text = header + "\n" + "\n".join(rows) + "\n"
        if plate == "plate-f":
            import pyarrow as pa
            import pyarrow.parquet as pq
            import io

            df = pd.read_csv(io.StringIO(text), na_values=["OPEN"])
            df["time"] = pd.to_datetime(df["time"], utc=True)
            paths[plate] = d / "log.parquet"
            pq.write_table(pa.Table.from_pandas(df, preserve_index=False), paths[plate])
        else:
            paths[plate] = d / "log.csv"
            paths[plate].write_text(text)
    return paths


@pytest.fixture(scope="module")
def fleet_run(tmp_path_factory):
    root = tmp_path_factory.mktemp("fleet")
    logs = make_fleet(root / "plates")
    fleet = load_fleet()
    out = root / "out"
    table = fleet.run_fleet(str(root / "plates"), out, {"limit": 100.0, "calibrate": 60}, workers=2)
    return fleet, logs, table, out, root


def test_fleet_table_equals_the_command_line_per_file(fleet_run, cli):
    fleet, logs, table, out, root = fleet_run
    assert sorted(table["plate"]) == sorted(logs)
    by_plate = table.set_index("plate")
    alarms_seen = 0
    for plate, log in logs.items():
        cli_out = root / "cli" / plate
        status, _, err = cli("track", log.parent, "--log", log, "--out", cli_out, "--quiet",
                             "--limit", "100", "--calibrate", "60")
        row = by_plate.loc[plate]
        if plate == "plate-e":
            assert status == 2
            assert row["status"] == "error"
            assert err.strip() == f"edgetherm: {row['error']}"
            continue
        assert status in (0, 3), err
        expected = fleet.summary_row(read_json(cli_out / "summary.json"))
        for k, v in expected.items():
            assert row[k] == v or (pd.isna(row[k]) and v is None), (plate, k, row[k], v)
        assert (row["status"] == "alarm") == (status == 3), plate
        alarms = pd.read_csv(cli_out / "alarms.csv")
        assert row["alarm_episodes"] == len(alarms), plate
        alarms_seen += len(alarms)
        health = pd.read_csv(cli_out / "sensors-health.csv")
        for sensor in health["sensor"]:
            assert sensor in row["failing_sensors"], (plate, sensor)
    assert alarms_seen >= 1, "no alarm in the fleet: the check above proved little"
    assert "TC06" in by_plate.loc["plate-d", "failing_sensors"]


def test_fleet_outputs_are_sorted_by_risk_and_readable(fleet_run):
    fleet, logs, table, out, root = fleet_run
    pq_table = pd.read_parquet(out / "fleet.parquet")
    csv_table = pd.read_csv(out / "fleet.csv")
    assert list(pq_table["plate"]) == list(table["plate"]) == list(csv_table["plate"])
    status = list(table["status"])
    # unreadable logs first, then alarms, then the rest by the upper end of the interval
    assert status == sorted(status, key={"error": 0, "alarm": 1, "ok": 2}.get)
    ok = table[table["status"] == "ok"]["hottest_upper"].tolist()
    assert ok == sorted(ok, reverse=True)
    import pyarrow.parquet as pq

    meta = pq.read_schema(out / "fleet.parquet").metadata
    assert b"licensed practice" in meta[b"caution"]
    html = (out / "fleet.html").read_text()
    assert "estimates, not measurements" in html and "licensed practice" in html
    assert html.index("plate-e") < html.index(table[table["status"] == "ok"]["plate"].iloc[0])


def test_job_array_mode_gives_the_same_table(fleet_run):
    """The same task function run one task per process (as a Slurm or Kubernetes job array
    would), then collected: the table of the Dask run, but for the timing columns."""
    import subprocess
    import sys

    fleet, logs, table, out, root = fleet_run
    array_out = root / "array"
    args = [sys.executable, str(FLEET), str(root / "plates"), "--out", str(array_out),
            "--limit", "100", "--calibrate", "60"]
    n = int(subprocess.run(args + ["--list-tasks"], capture_output=True, text=True, check=True).stdout)
    assert n == len(logs)
    for i in range(n):
        subprocess.run(args + ["--task", str(i)], capture_output=True, check=True)
    subprocess.run(args + ["--collect"], capture_output=True, check=True)
    collected = pd.read_parquet(array_out / "fleet.parquet")
    timing = ["seconds", "peak_rss_mb"]
    pd.testing.assert_frame_equal(collected.drop(columns=timing), table.drop(columns=timing))
