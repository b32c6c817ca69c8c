#!/usr/bin/env python3
"""Track a fleet of plates on a Dask cluster: one task per logger file, one fleet table.

    python examples/fleet/fleet.py FLEET_DIR --out fleet-out [--limit 100] \
        [--scheduler tcp://host:8786] [--workers 2]

FLEET_DIR (a local folder, or an fsspec URL such as ``s3://bucket/prefix`` when the matching
fsspec backend, e.g. s3fs, is installed) holds one folder per plate: its case files
(``plate.toml``, ``sensors.csv``) and one or more logger files (``*.csv`` other than
sensors.csv / readings.csv, or ``*.parquet``). Every logger file is one task, run with
``edgetherm.track`` on a Dask cluster (a ``LocalCluster`` of worker processes by default,
``--scheduler`` for a running cluster). Tasks share nothing: each reads its own files and
returns one row. A task that fails (a bad file) returns its error as its row; the others
finish.

Writes into ``--out``: ``fleet.parquet`` and ``fleet.csv`` (one row per plate, worst first)
and ``fleet.html`` (an overview page sorted by risk).

Without Dask, the same task function runs one task per process of a job array
(``--list-tasks`` for the array's size, ``--task N`` per element, ``--collect`` at the end);
see docs/fleet.md for Slurm, Kubernetes and Spark. Risk follows the hotter explanation:
plates whose log could not be read come first (their risk is unknown), then plates with
alarm episodes, then by the upper end of the hottest point's interval.

These are estimates, not measurements: decisions about live, hot or pressurised equipment
follow local codes and licensed practice. See docs/fleet.md.
"""

from __future__ import annotations

import argparse
import html
import os
import sys
import tempfile
import time
from pathlib import Path
from typing import Any, Dict, List, Optional

CAUTION = (
    "These are estimates, not measurements: each hidden edge was inferred from interior "
    "sensors through a model. Decisions about live, hot or pressurised equipment follow "
    "local codes and licensed practice."
)

CASE_FILES = ("plate.toml", "sensors.csv")
NOT_LOGS = {"sensors.csv", "readings.csv", "plate.toml"}

# the fleet table's columns, in order
COLUMNS = [
    "plate", "logs", "status", "risk", "unit", "hottest_temperature", "hottest_lower",
    "hottest_upper", "hottest_time", "hottest_edge", "hottest_position", "alarm_episodes",
    "alarm_rows", "max_probability", "first_alarm", "failing_sensors", "rows", "error",
    "seconds", "peak_rss_mb",
]


def find_tasks(root: str) -> List[Dict[str, str]]:
    """One task per logger file: (plate, case folder, log) under ``root``."""
    import fsspec

    fs, base = fsspec.core.url_to_fs(root)
    protocol = fs.protocol if isinstance(fs.protocol, str) else fs.protocol[0]
    local = protocol in ("file", "local")

    def url(p: str) -> str:
        return p if local else f"{protocol}://{p}"

    tasks = []
    for entry in sorted(fs.ls(base, detail=True), key=lambda e: e["name"]):
        if entry["type"] != "directory":
            continue
        plate_dir = entry["name"].rstrip("/")
        plate = plate_dir.rsplit("/", 1)[-1]
        names = sorted(e.rsplit("/", 1)[-1] for e in fs.ls(plate_dir, detail=False))
        logs = [n for n in names
                if n not in NOT_LOGS and (n.endswith(".csv") or n.endswith(".parquet"))]
        if not logs:
            tasks.append({"plate": plate, "case": url(plate_dir), "log": ""})
        for n in logs:
            tasks.append({"plate": plate, "case": url(plate_dir), "log": url(f"{plate_dir}/{n}")})
    return tasks


def _peak_rss_mb() -> Optional[float]:
    try:
        import resource

        kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        return round(kb / 1024.0, 1)
    except Exception:  # pragma: no cover - not on every platform
        return None


def _local_copy(case_url: str, log_url: str, tmp: str):
    """Case folder and log as local paths (remote ones are copied into ``tmp``)."""
    import fsspec

    fs, case_path = fsspec.core.url_to_fs(case_url)
    protocol = fs.protocol if isinstance(fs.protocol, str) else fs.protocol[0]
    if protocol in ("file", "local"):
        return case_path, fsspec.core.url_to_fs(log_url)[1]
    for name in CASE_FILES:
        fs.get(f"{case_path}/{name}", os.path.join(tmp, name))
    log_local = os.path.join(tmp, "log-" + log_url.rsplit("/", 1)[-1])
    fs.get(fsspec.core.url_to_fs(log_url)[1], log_local)
    return tmp, log_local


def track_one(task: Dict[str, str], options: Dict[str, Any]) -> Dict[str, Any]:
    """The unit of work: track one logger file and return one fleet-table row. Pure: no
    shared state; an error is returned as the row's ``error`` (never raised), so the other
    tasks finish."""
    import edgetherm

    t0 = time.perf_counter()
    row: Dict[str, Any] = {c: None for c in COLUMNS}
    row.update(plate=task["plate"], logs=task["log"].rsplit("/", 1)[-1])
    try:
        if not task["log"]:
            raise FileNotFoundError(f"{task['case']}: no logger file (*.csv or *.parquet)")
        with tempfile.TemporaryDirectory(prefix="edgetherm-fleet-") as tmp:
            case_dir, log = _local_copy(task["case"], task["log"], tmp)
            result = edgetherm.track(edgetherm.Case.from_dir(case_dir), log, rows=False, **options)
        row.update(summary_row(result.summary))
        row["status"] = "alarm" if result.summary["alarm"] and result.summary["alarm"]["episode_count"] else "ok"
    except edgetherm.InputError as e:
        row.update(status="error", error=str(e))
    except Exception as e:  # a task never takes the fleet down
        row.update(status="error", error=f"{type(e).__name__}: {e}")
    row["seconds"] = round(time.perf_counter() - t0, 3)
    row["peak_rss_mb"] = _peak_rss_mb()
    return row


def summary_row(s: Dict[str, Any]) -> Dict[str, Any]:
    """The fleet-table columns from a track ``summary.json`` (the command line's)."""
    h = s.get("hottest") or {}
    interval = h.get("temperature_interval") or [None, None]
    alarm = s.get("alarm") or {}
    episodes = alarm.get("episodes") or []
    problems = s.get("sensor_problems") or []
    failing = "; ".join(
        f"{p['sensor']} {p['problem']} from {p['start']}" + (f" to {p['end']}" if p.get("end") else " (ongoing)")
        for p in problems
    )
    if s.get("unlisted_sensor_problems"):
        failing += f"; and {s['unlisted_sensor_problems']} more"
    return {
        "unit": s["units"]["temperature"],
        "hottest_temperature": h.get("temperature"),
        "hottest_lower": interval[0],
        "hottest_upper": interval[1],
        "hottest_time": h.get("time"),
        "hottest_edge": h.get("edge"),
        "hottest_position": h.get("position"),
        "alarm_episodes": alarm.get("episode_count", 0) if alarm else 0,
        "alarm_rows": sum(e.get("rows") or 0 for e in episodes),
        "max_probability": max((e.get("max_probability") or 0.0 for e in episodes), default=None),
        "first_alarm": episodes[0]["start"] if episodes else None,
        "failing_sensors": failing,
        "rows": s.get("rows"),
        "risk": interval[1],
    }


def per_plate(rows: List[Dict[str, Any]]):
    """One row per plate: a plate with several logs keeps its worst (hotter) values, every
    alarm episode and every failing sensor, and any error."""
    import pandas as pd

    df = pd.DataFrame(rows, columns=COLUMNS)
    out = []
    for plate, g in df.groupby("plate", sort=True):
        if len(g) == 1:
            out.append(g.iloc[0].to_dict())
            continue
        ok = g[g["status"] != "error"]
        worst = ok.sort_values("hottest_upper", ascending=False).iloc[0].to_dict() if len(ok) else g.iloc[0].to_dict()
        worst["logs"] = ", ".join(g["logs"])
        worst["alarm_episodes"] = int(ok["alarm_episodes"].sum()) if len(ok) else None
        worst["alarm_rows"] = int(ok["alarm_rows"].sum()) if len(ok) else None
        worst["failing_sensors"] = "; ".join(x for x in ok["failing_sensors"] if x)
        worst["rows"] = int(ok["rows"].sum()) if len(ok) else None
        errors = [f"{lg}: {e}" for lg, e in zip(g["logs"], g["error"]) if e]
        worst["error"] = " | ".join(errors) if errors else None
        worst["status"] = ("error" if errors else
                           "alarm" if (worst["alarm_episodes"] or 0) > 0 else "ok")
        worst["seconds"] = float(g["seconds"].sum())
        worst["peak_rss_mb"] = g["peak_rss_mb"].max()
        out.append(worst)
    table = pd.DataFrame(out, columns=COLUMNS)
    # counts stay whole numbers beside the error rows' empty cells
    for c in ("alarm_episodes", "alarm_rows", "rows"):
        table[c] = pd.to_numeric(table[c], errors="coerce").round().astype("Int64")
    return sort_by_risk(table)


def sort_by_risk(table):
    """Worst first: unreadable logs (unknown risk), then alarms, then by the upper end of
    the hottest interval (the hotter explanation), then by plate."""
    import pandas as pd

    rank = table["status"].map({"error": 0, "alarm": 1, "ok": 2})
    upper = pd.to_numeric(table["hottest_upper"], errors="coerce").fillna(float("-inf"))
    order = sorted(range(len(table)), key=lambda i: (rank.iloc[i], -upper.iloc[i], table["plate"].iloc[i]))
    return table.iloc[order].reset_index(drop=True)


def _missing(v: Any) -> bool:
    import pandas as pd

    return v is None or (not isinstance(v, (list, tuple, dict)) and bool(pd.isna(v)))


def _cell(v: Any) -> str:
    if _missing(v):
        return ""
    if isinstance(v, float):
        return f"{v:.2f}"
    return html.escape(str(v))


def overview_html(table, limit: Optional[float]) -> str:
    """A self-contained page: the fleet sorted by risk, with the caution."""
    counts = table["status"].value_counts().to_dict()
    rows = []
    for _, r in table.iterrows():
        status = r["status"]
        detail = r["error"] if status == "error" else r["failing_sensors"]
        unit = "" if _missing(r["unit"]) else ("K" if r["unit"] == "K" else f"°{r['unit']}")
        estimate = "" if _missing(r["hottest_temperature"]) else f"{r['hottest_temperature']:.1f} {unit}"
        detail_class = "detail error" if status == "error" else ("detail sensors" if detail else "detail")
        lower, upper = r["hottest_lower"], r["hottest_upper"]
        known = not _missing(lower) and not _missing(upper)
        interval = f"{lower:.1f} – {upper:.1f} {unit}" if known else ""
        upper_text = f"{upper:.1f} {unit}" if known else ""
        rows.append(
            f'<tr class="{status}"><td class="plate">{_cell(r["plate"])}</td>'
            f'<td><span class="badge {status}">{status.upper()}</span></td>'
            f'<td class="num"><b>{upper_text}</b></td>'
            f'<td class="num">{interval}</td>'
            f'<td class="num">{estimate}</td>'
            f'<td class="time">{_cell(r["hottest_time"])}</td>'
            f'<td class="num">{_cell(r["alarm_episodes"])}</td>'
            f'<td class="time">{_cell(r["first_alarm"])}</td>'
            f'<td class="{detail_class}">{_cell(detail)}</td>'
            f'<td class="log">{_cell(r["logs"])}</td></tr>'
        )
    limit_text = f"alarm limit {limit:g} (each plate's temperature unit)" if limit is not None else "no alarm limit given"
    generated = time.strftime("%Y-%m-%d %H:%M UTC", time.gmtime())
    return f"""<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>edgetherm fleet overview</title>
<style>
body {{ font-family: system-ui, -apple-system, "Segoe UI", sans-serif; margin: 24px; color: #1d2430; }}
h1 {{ font-size: 22px; margin: 0 0 4px 0; }}
p.meta {{ color: #556; margin: 0 0 14px 0; font-size: 14px; }}
.caution {{ border-left: 5px solid #c77700; background: #fff6e5; padding: 10px 14px; margin: 0 0 16px 0; font-size: 14px; max-width: 1100px; }}
.counts span {{ display: inline-block; margin-right: 14px; font-size: 14px; }}
table {{ border-collapse: collapse; width: 100%; font-size: 13px; margin-top: 10px; }}
th {{ text-align: left; background: #eef1f5; padding: 6px 8px; border-bottom: 2px solid #c9d0da; white-space: nowrap; }}
td {{ padding: 5px 8px; border-bottom: 1px solid #e3e7ec; vertical-align: top; }}
td.num {{ text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }}
td.plate {{ font-weight: 600; white-space: nowrap; }}
td.detail {{ max-width: 440px; }}
td.detail.sensors {{ color: #a34700; font-weight: 600; }}
td.detail.error {{ color: #8c1d18; }}
td.time {{ white-space: nowrap; font-variant-numeric: tabular-nums; }}
td.log {{ color: #556; white-space: nowrap; }}
tr.error td {{ background: #fdecec; }}
tr.alarm td {{ background: #fff3e0; }}
.badge {{ display: inline-block; padding: 1px 7px; border-radius: 9px; font-size: 11px; font-weight: 700; color: #fff; }}
.badge.error {{ background: #b3261e; }} .badge.alarm {{ background: #d9480f; }} .badge.ok {{ background: #2b8a3e; }}
</style></head><body>
<h1>Fleet overview: hidden-edge temperatures</h1>
<p class="meta">{len(table)} plates, {limit_text}; generated {generated} by edgetherm (examples/fleet).
Sorted by risk: unreadable logs first (their risk is unknown), then plates with alarm episodes, then by the upper end of the hottest point's interval.</p>
<div class="caution"><strong>Caution.</strong> {html.escape(CAUTION)} The interval's upper end is shown first: when the data allow a hotter and a cooler explanation, the hotter one is kept.</div>
<div class="counts"><span>errors: <b>{counts.get("error", 0)}</b></span><span>alarms: <b>{counts.get("alarm", 0)}</b></span><span>ok: <b>{counts.get("ok", 0)}</b></span></div>
<table>
<thead><tr><th>plate</th><th>status</th><th>hottest, upper end</th><th>hottest interval</th><th>estimate</th><th>at</th><th>alarm episodes</th><th>first alarm</th><th>failing sensors / error</th><th>log</th></tr></thead>
<tbody>
{chr(10).join(rows)}
</tbody></table>
</body></html>
"""


def _write_atomic(path: Path, data: bytes) -> None:
    tmp = path.with_name(f".{path.name}.tmp-{os.getpid()}")
    tmp.write_bytes(data)
    os.replace(tmp, path)


def write_outputs(table, out: Path, limit: Optional[float]) -> List[Path]:
    """fleet.parquet, fleet.csv and fleet.html, each written atomically."""
    import io

    out.mkdir(parents=True, exist_ok=True)
    import pyarrow as pa
    import pyarrow.parquet as pq

    buf = io.BytesIO()
    arrow = pa.Table.from_pandas(table, preserve_index=False)
    # the caution travels with the table (Parquet key-value metadata; the CSV stays plain)
    meta = dict(arrow.schema.metadata or {})
    meta[b"caution"] = CAUTION.encode()
    meta[b"sorted_by"] = b"risk: errors, then alarms, then hottest_upper descending"
    pq.write_table(arrow.replace_schema_metadata(meta), buf)
    paths = []
    for name, data in (
        ("fleet.parquet", buf.getvalue()),
        ("fleet.csv", table.to_csv(index=False).encode()),
        ("fleet.html", overview_html(table, limit).encode()),
    ):
        _write_atomic(out / name, data)
        paths.append(out / name)
    return paths


def run_fleet(root: str, out: Path, options: Dict[str, Any], scheduler: Optional[str] = None,
              workers: int = 2, threads: int = 1, client=None):
    """Run every task on a Dask cluster and write the fleet outputs; returns the table."""
    from dask.distributed import Client, LocalCluster, as_completed

    tasks = find_tasks(root)
    if __name__ != "__main__" and __name__ in sys.modules:
        # imported (a notebook, the tests): ship this module's functions to the workers by
        # value, so that they need not import it from a path of their own
        import cloudpickle

        cloudpickle.register_pickle_by_value(sys.modules[__name__])
    own = None
    if client is None:
        if scheduler:
            client = own = Client(scheduler)
        else:
            cluster = LocalCluster(n_workers=workers, threads_per_worker=threads, processes=True,
                                   dashboard_address=None)
            client = own = Client(cluster)
    try:
        futures = {client.submit(track_one, t, options, pure=False): t for t in tasks}
        rows = []
        for f in as_completed(futures):
            t = futures[f]
            if f.status == "error":  # a worker died: still a row, with the error
                row = {c: None for c in COLUMNS}
                row.update(plate=t["plate"], logs=t["log"].rsplit("/", 1)[-1], status="error",
                           error=f"task failed: {f.exception()!r}")
                rows.append(row)
            else:
                rows.append(f.result())
    finally:
        if own is not None:
            cluster = getattr(own, "cluster", None)
            own.close()
            if cluster is not None:
                cluster.close()
    table = per_plate(rows)
    write_outputs(table, out, options.get("limit"))
    return table


def run_one_task(root: str, index: int, out: Path, options: Dict[str, Any]) -> Path:
    """Without Dask: run task ``index`` of ``find_tasks(root)`` (the same ``track_one``) and
    write its row to ``out/parts/task-INDEX.json``, for a Slurm or Kubernetes job array;
    ``collect`` then makes the fleet table from the parts."""
    import json

    tasks = find_tasks(root)
    if not 0 <= index < len(tasks):
        raise SystemExit(f"--task {index}: there are {len(tasks)} tasks (0 to {len(tasks) - 1})")
    row = track_one(tasks[index], options)
    parts = out / "parts"
    parts.mkdir(parents=True, exist_ok=True)
    path = parts / f"task-{index:06d}.json"
    _write_atomic(path, json.dumps(row).encode())
    return path


def collect(out: Path, options: Dict[str, Any]):
    """The fleet table from the parts a job array wrote (``run_one_task``)."""
    import json

    rows = [json.loads(p.read_text()) for p in sorted((out / "parts").glob("task-*.json"))]
    table = per_plate(rows)
    write_outputs(table, out, options.get("limit"))
    return table


def main(argv: Optional[List[str]] = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("fleet", help="folder (or fsspec URL) with one folder per plate")
    p.add_argument("--out", default="edgetherm-fleet", help="output folder")
    p.add_argument("--limit", type=float, help="alarm limit (each case's temperature unit)")
    p.add_argument("--probability", type=float, default=0.05)
    p.add_argument("--calibrate", type=int, help="choose the strength on the first N rows")
    p.add_argument("--scheduler", help="address of a running Dask scheduler")
    p.add_argument("--workers", type=int, default=2, help="LocalCluster worker processes")
    p.add_argument("--threads", type=int, default=1, help="threads per worker")
    p.add_argument("--list-tasks", action="store_true",
                   help="print the number of tasks (for a job array's size) and stop")
    p.add_argument("--task", type=int,
                   help="without Dask: run only task N (e.g. $SLURM_ARRAY_TASK_ID) into OUT/parts/")
    p.add_argument("--collect", action="store_true",
                   help="without Dask: make the fleet table from OUT/parts/")
    a = p.parse_args(argv)
    options: Dict[str, Any] = {"probability": a.probability}
    if a.limit is not None:
        options["limit"] = a.limit
    if a.calibrate is not None:
        options["calibrate"] = a.calibrate
    if a.list_tasks:
        print(len(find_tasks(a.fleet)))
        return 0
    if a.task is not None:
        print(run_one_task(a.fleet, a.task, Path(a.out), options))
        return 0
    if a.collect:
        table = collect(Path(a.out), options)
    else:
        table = run_fleet(a.fleet, Path(a.out), options, a.scheduler, a.workers, a.threads)
    n_err = int((table["status"] == "error").sum())
    n_alarm = int((table["status"] == "alarm").sum())
    print(f"{len(table)} plates: {n_alarm} with alarms, {n_err} with errors; wrote "
          f"{a.out}/fleet.parquet, fleet.csv, fleet.html")
    print(CAUTION)
    return 0


if __name__ == "__main__":
    sys.exit(main())
