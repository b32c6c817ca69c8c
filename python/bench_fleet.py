#!/usr/bin/env python3
"""What one fleet task costs, per million rows: time and peak memory of a track run from
Python (file path CSV / Parquet, a DataFrame) and of the same run as a Dask task, each in a
fresh process (figures in docs/fleet.md).

    python python/bench_fleet.py CASE_DIR LOG.csv LOG.parquet [--limit 70] [--repeats 1]

The benchmark log and its case: `TRACK_BENCH_KEEP=1 cargo bench --bench track` (prints where
it kept them); the Parquet copy: `python python/bench_fleet.py --to-parquet LOG.csv`.
"""

import argparse
import json
import subprocess
import sys
import time

RUN = r"""
import json, resource, sys, time
import edgetherm
case_dir, log, mode, limit = sys.argv[1], sys.argv[2], sys.argv[3], float(sys.argv[4])
case = edgetherm.Case.from_dir(case_dir)
t0 = time.perf_counter()
if mode == "path":
    r = edgetherm.track(case, log, limit=limit, rows=False)
elif mode == "path+rows":
    r = edgetherm.track(case, log, limit=limit, rows=True)
elif mode == "dataframe":
    import pandas as pd
    df = pd.read_parquet(log)
    t1 = time.perf_counter()
    r = edgetherm.track(case, df, limit=limit, rows=False)
elif mode == "dask":
    from dask.distributed import Client, LocalCluster
    sys.path.insert(0, "examples/fleet")
    import fleet
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True, dashboard_address=None) as c, Client(c) as cl:
        t0 = time.perf_counter()
        row = cl.submit(fleet.track_one, {"plate": "bench", "case": case_dir, "log": log}, {"limit": limit}).result()
        worker_rss = row["peak_rss_mb"]
        assert row["status"] != "error", row["error"]
seconds = time.perf_counter() - t0
rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
out = {"seconds": seconds, "peak_rss_mb": rss}
if mode == "dask":
    out["worker_peak_rss_mb"] = worker_rss
    out["rows"] = row["rows"]
else:
    out["rows"] = r.summary["rows"]
if mode == "dataframe":
    out["read_parquet_seconds"] = t1 - t0
print(json.dumps(out))
"""


def main():
    p = argparse.ArgumentParser()
    p.add_argument("case", nargs="?")
    p.add_argument("csv", nargs="?")
    p.add_argument("parquet", nargs="?")
    p.add_argument("--limit", type=float, default=70.0)
    p.add_argument("--repeats", type=int, default=1)
    p.add_argument("--to-parquet", metavar="LOG_CSV")
    a = p.parse_args()
    if a.to_parquet:
        import pandas as pd
        import pyarrow as pa
        import pyarrow.parquet as pq

        # the logger's text fault markers (src/io/logger.rs FAULT_MARKERS) as missing values,
        # ISO times as UTC timestamps: the table the CSV holds, as the CSV reader reads it
        markers = ["nan", "-nan", "na", "n/a", "null", "none", "-", "--", "---", "----", "*",
                   "****", "*****", "open", "oc", "o/c", "ol", "+ol", "-ol", "over", "under",
                   "ovr", "err", "error", "fault", "burnout"]
        na = markers + [m.upper() for m in markers] + [m.capitalize() for m in markers]
        df = pd.read_csv(a.to_parquet, na_values=na, keep_default_na=False)
        if df["time"].dtype == object:
            df["time"] = pd.to_datetime(df["time"], utc=True)
        out = a.to_parquet.rsplit(".", 1)[0] + ".parquet"
        pq.write_table(pa.Table.from_pandas(df, preserve_index=False), out)
        print(out)
        return
    runs = [("CSV path", a.csv, "path"), ("Parquet path", a.parquet, "path"),
            ("CSV path, per-row table kept", a.csv, "path+rows"),
            ("DataFrame (from Parquet)", a.parquet, "dataframe"),
            ("Dask task (CSV)", a.csv, "dask"), ("Dask task (Parquet)", a.parquet, "dask")]
    for name, log, mode in runs:
        for _ in range(a.repeats):
            r = subprocess.run([sys.executable, "-c", RUN, a.case, log, mode, str(a.limit)],
                               capture_output=True, text=True)
            if r.returncode != 0:
                print(name, "FAILED", r.stderr[-2000:])
                continue
            d = json.loads(r.stdout.strip().splitlines()[-1])
            per_m = 1e6 / d["rows"]
            extra = "".join(f", {k} {v:.2f}" for k, v in d.items()
                            if k not in ("seconds", "peak_rss_mb", "rows"))
            print(f"{name}: {d['rows']} rows, {d['seconds']:.2f} s ({d['seconds'] * per_m:.2f} s per "
                  f"million rows), peak memory {d['peak_rss_mb']:.0f} MB{extra}", flush=True)


if __name__ == "__main__":
    main()
