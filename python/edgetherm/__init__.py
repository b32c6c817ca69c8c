"""edgetherm: recover the temperature of a hidden plate edge from interior thermocouples.

The Python face of the edgetherm library (the command line's engine, through PyO3). Every
run gives the same numbers and files as the command line, and every result has
``.summary``, a dict equal to what the command line writes to ``summary.json``::

    import edgetherm
    case = edgetherm.Case.from_dir("sample-measurements/cold-plate")
    r = edgetherm.estimate(case, limit=60)
    r.summary["hottest"]["temperature_interval"]   # the hottest point's interval
    r.profile                                      # profile.csv as a DataFrame
    t = edgetherm.track(edgetherm.Case.from_dir("sample-measurements/busbar-clamp"),
                        "sample-measurements/busbar-clamp/log.csv", limit=100)
    t.alarms, t.health, t.rows                     # alarm episodes, sensor health, per row

These are estimates, not measurements: decisions about live, hot or pressurised equipment
follow local codes and licensed practice. See docs/python.md for the whole API.
"""

from __future__ import annotations

import functools
import io
import json
import os
import tempfile
from pathlib import Path
from typing import Any, Dict, Iterable, Mapping, Optional, Union

import numpy as np

from . import _edgetherm
from ._edgetherm import EdgethermError, InputError

__all__ = [
    "Case",
    "EdgethermError",
    "InputError",
    "EstimateResult",
    "TrackResult",
    "DesignResult",
    "estimate",
    "track",
    "design",
    "SAFETY_CAUTION",
]

# the location of an error, when the message has one (set on each instance raised by the
# library; None for errors raised here, before the library is called)
for _cls in (InputError, EdgethermError):
    _cls.file = None
    _cls.line = None
    _cls.field = None

__version__ = _edgetherm.__version__
SAFETY_CAUTION: str = _edgetherm.SAFETY_CAUTION

PathLike = Union[str, "os.PathLike[str]"]


def _table(data: bytes):
    """A CSV output as a pandas DataFrame; a pyarrow Table when pandas is absent; a dict of
    NumPy arrays (column name -> values; numbers as float64 with NaN for an empty cell, other
    columns as text) when neither is installed."""
    try:
        import pandas as pd
    except ImportError:
        pd = None
    if pd is not None:
        return pd.read_csv(io.BytesIO(data))
    try:
        import pyarrow.csv as pacsv
    except ImportError:
        pacsv = None
    if pacsv is not None:
        return pacsv.read_csv(io.BytesIO(data))
    import csv

    rows = list(csv.reader(io.StringIO(data.decode("utf-8"))))
    header, body = rows[0], rows[1:]
    out = {}
    for k, name in enumerate(header):
        cells = [r[k] if k < len(r) else "" for r in body]
        try:
            out[name] = np.array([float(c) if c != "" else np.nan for c in cells], dtype=np.float64)
        except ValueError:
            out[name] = np.array(cells, dtype=object)
    return out


class _Result:
    """Rendered outputs of a run: the files the command line would write, by name."""

    _command = ""

    def __init__(self, native: Mapping[str, Any], inputs: Iterable[PathLike]):
        self.files: Dict[str, bytes] = dict(native["files"])
        self.exit_status: int = int(native["exit_status"])
        self._inputs = [os.fspath(p) for p in inputs]

    def save(self, out: PathLike, overwrite: bool = False) -> list:
        """Write the outputs into folder ``out`` as one set, atomically, as the command line
        does (an input is never replaced; an existing file no earlier run wrote only with
        ``overwrite=True``). Returns the paths written."""
        return _edgetherm.write_outputs(
            os.fspath(out), self._command, list(self.files.items()), self._inputs, overwrite
        )


class Case:
    """A case: plate.toml, sensors.csv and (for ``estimate``) readings.csv.

    ``Case.from_dir(path)`` loads a case folder; ``Case.from_dict(plate, sensors)`` builds one
    from a dict (the contents of plate.toml) and a table of sensors (``sensor, x, y`` and
    optional ``sigma``, ``position_sigma``, ``offset``), written to a folder of its own.
    """

    def __init__(self, native: "_edgetherm.Case", folder: Optional[tempfile.TemporaryDirectory] = None):
        self._native = native
        self._folder = folder  # kept alive with the case when from_dict made it

    @classmethod
    def from_dir(
        cls,
        path: PathLike,
        plate: Optional[PathLike] = None,
        sensors: Optional[PathLike] = None,
        readings: Optional[PathLike] = None,
    ) -> "Case":
        """Load the case folder ``path`` (files replaced by ``plate``, ``sensors``,
        ``readings`` as the command line's ``--plate``, ``--sensors``, ``--readings``).
        Raises ``InputError`` naming the file, line and field of a problem."""
        f = lambda p: None if p is None else os.fspath(p)  # noqa: E731
        return cls(_edgetherm.Case.from_dir(os.fspath(path), f(plate), f(sensors), f(readings)))

    @classmethod
    def from_dict(cls, plate: Mapping[str, Any], sensors: Any, readings: Any = None,
                  folder: Optional[PathLike] = None) -> "Case":
        """Build a case from ``plate`` (a dict shaped like plate.toml, e.g.
        ``{"plate": {"width": 180, "height": 40, "length_unit": "mm", ...}, "edges": {...}}``)
        and ``sensors`` (a DataFrame or a dict of columns: ``sensor``, ``x``, ``y``, ...).
        ``readings`` (optional): a dict ``{sensor: temperature}``. The files are written to
        ``folder`` (a new temporary folder by default, removed with the case) and loaded as
        ``from_dir`` loads them, so messages name those files."""
        tmp = None
        if folder is None:
            tmp = tempfile.TemporaryDirectory(prefix="edgetherm-case-")
            folder = tmp.name
        d = Path(folder)
        d.mkdir(parents=True, exist_ok=True)
        _write_new(d / "plate.toml", _toml(plate))
        _write_new(d / "sensors.csv", _csv_of(sensors))
        if readings is not None:
            rows = "".join(f"{k},{_num(v)}\n" for k, v in dict(readings).items())
            _write_new(d / "readings.csv", "sensor,temperature\n" + rows)
        case = cls(_edgetherm.Case.from_dir(str(d)), tmp)
        return case

    @property
    def path(self) -> Path:
        """The case folder."""
        return Path(self._native.path)

    @property
    def sensor_ids(self) -> list:
        """The sensor ids, in sensors.csv order."""
        return list(self._native.sensor_ids)

    @property
    def units(self) -> tuple:
        """(length unit, temperature unit) as plate.toml states them."""
        return tuple(self._native.units)

    def _inputs(self) -> list:
        return [p for p in self._native.files]

    def __reduce__(self):
        # pickled as its file paths (to a process that sees the same files: a Dask worker
        # of a local cluster, a thread pool, a process pool)
        plate, sensors, readings = self._native.files
        return (Case.from_dir, (str(self.path), plate, sensors, readings))

    def __repr__(self) -> str:
        return repr(self._native)


def _write_new(path: Path, text: str) -> None:
    if path.exists():
        raise FileExistsError(f"{path} exists; Case.from_dict writes into a new folder")
    path.write_text(text, encoding="utf-8")


def _num(v: Any) -> str:
    return repr(float(v))


def _toml_value(v: Any) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    if isinstance(v, (float, np.floating)):
        return repr(float(v))
    if isinstance(v, str):
        return json.dumps(v)  # a TOML basic string is a JSON string
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, Mapping):  # inside an array: an inline table
        return "{ " + ", ".join(f"{json.dumps(str(k))} = {_toml_value(x)}" for k, x in v.items()) + " }"
    raise TypeError(f"cannot write {v!r} ({type(v).__name__}) to plate.toml")


def _toml(d: Mapping[str, Any], prefix: str = "") -> str:
    """A nested dict as TOML: scalars first, then one [table] per nested dict."""
    lines = []
    tables = []
    for k, v in d.items():
        if isinstance(v, Mapping):
            tables.append((k, v))
        else:
            lines.append(f"{json.dumps(str(k))} = {_toml_value(v)}")
    out = "\n".join(lines) + ("\n" if lines else "")
    for k, v in tables:
        key = json.dumps(str(k))
        name = f"{prefix}.{key}" if prefix else key
        body = _toml(v, name)
        out += f"\n[{name}]\n" + body
    return out


def _csv_of(table: Any) -> str:
    """A DataFrame, pyarrow Table or dict of columns as CSV text."""
    try:
        import pandas as pd

        if isinstance(table, pd.DataFrame):
            return table.to_csv(index=False)
    except ImportError:  # pragma: no cover
        pass
    if hasattr(table, "to_pydict"):
        table = table.to_pydict()
    cols = dict(table)
    names = list(cols)
    n = len(cols[names[0]])
    rows = [",".join(names)]
    for i in range(n):
        rows.append(",".join(str(cols[c][i]) for c in names))
    return "\n".join(rows) + "\n"


class EstimateResult(_Result):
    """The result of ``estimate``: ``summary`` (summary.json as a dict), ``profile``,
    ``field`` and ``sensors`` (profile.csv, field.csv, sensors.csv as DataFrames), ``files``
    (every output file's bytes, report.html and the SVG plots included), ``exit_status`` (the
    command line's: 3 for an alarm, else 0) and ``save(out)``."""

    _command = "estimate"

    def __init__(self, native, inputs):
        super().__init__(native, inputs)
        self.summary: dict = json.loads(self.files["summary.json"])

    @functools.cached_property
    def profile(self):
        """profile.csv: each hidden edge finely sampled, with its bands."""
        return _table(self.files["profile.csv"])

    @functools.cached_property
    def field(self):
        """field.csv: the field on the grid, with its band."""
        return _table(self.files["field.csv"])

    @functools.cached_property
    def sensors(self):
        """sensors.csv: per sensor reading, fit, residuals, flags."""
        return _table(self.files["sensors.csv"])

    @property
    def alarm(self) -> bool:
        """Whether the run is an alarm (the command line's exit status 3)."""
        return self.exit_status == 3

    def __repr__(self) -> str:
        h = self.summary.get("hottest") or {}
        return f"<EstimateResult hottest {h.get('temperature')} in {h.get('temperature_interval')}>"


class TrackResult(_Result):
    """The result of ``track``: ``summary`` (summary.json as a dict), ``rows`` (track.csv, the
    per-row table, as a DataFrame; ``None`` with ``rows=False``), ``alarms`` (alarm
    episodes, alarms.csv), ``health`` (failing sensors, sensors-health.csv), ``files``,
    ``exit_status`` (3 when ``limit`` was given and an alarm episode occurred),
    ``absent_sensors`` and ``ignored_columns``."""

    _command = "track"

    def __init__(self, native, inputs):
        super().__init__(native, inputs)
        self.summary: dict = json.loads(self.files["summary.json"])
        self.absent_sensors = list(native["absent_sensors"])
        self.ignored_columns = list(native["ignored_columns"])

    @functools.cached_property
    def rows(self):
        """track.csv: one row per log row (None with rows=False)."""
        return _table(self.files["track.csv"]) if "track.csv" in self.files else None

    @functools.cached_property
    def alarms(self):
        """alarms.csv: the alarm episodes."""
        return _table(self.files["alarms.csv"])

    @functools.cached_property
    def health(self):
        """sensors-health.csv: the failing sensors."""
        return _table(self.files["sensors-health.csv"])

    @property
    def alarm(self) -> bool:
        """Whether an alarm episode occurred (with a ``limit``)."""
        return self.exit_status == 3

    def __repr__(self) -> str:
        episodes = (self.summary.get("alarm") or {}).get("episode_count", 0)
        return f"<TrackResult {self.summary.get('rows')} rows, {episodes} alarm episodes>"


class DesignResult(_Result):
    """The result of ``design``: ``summary`` (design.json as a dict), ``layout`` (layout.csv
    as a DataFrame), ``files`` and ``save(out)``."""

    _command = "design"

    def __init__(self, native, inputs):
        super().__init__(native, inputs)
        self.summary: dict = json.loads(self.files["design.json"])

    @functools.cached_property
    def layout(self):
        """layout.csv: the chosen positions."""
        return _table(self.files["layout.csv"])


def _case(case: Union[Case, PathLike]) -> Case:
    return case if isinstance(case, Case) else Case.from_dir(case)


def _readings_array(case: Case, readings: Any) -> Optional[np.ndarray]:
    """Readings as one float64 value per sensor in sensors.csv order (NaN: no reading)."""
    if readings is None:
        return None
    ids = case.sensor_ids
    try:
        import pandas as pd
    except ImportError:  # pragma: no cover
        pd = None
    if pd is not None and isinstance(readings, pd.DataFrame):
        cols = {c.lower(): c for c in readings.columns}
        if "sensor" not in cols or not ({"temperature", "emf_mv"} & set(cols)):
            raise InputError(
                "readings: a DataFrame of readings has the columns sensor and temperature "
                "(or emf_mv), as readings.csv"
            )
        value = cols.get("temperature", cols.get("emf_mv"))
        readings = dict(zip(readings[cols["sensor"]].astype(str), readings[value]))
    if pd is not None and isinstance(readings, pd.Series):
        readings = readings.to_dict()
    if isinstance(readings, Mapping):
        unknown = [k for k in readings if str(k) not in ids]
        if unknown:
            raise InputError(
                f"readings: a reading for {unknown[0]!r}, which is not a sensor of the case "
                f"(sensors: {', '.join(ids)})"
            )
        return np.array(
            [np.nan if readings.get(i) is None else float(readings[i]) for i in ids],
            dtype=np.float64,
        )
    arr = np.ascontiguousarray(np.asarray(readings, dtype=np.float64))
    if arr.ndim != 1:
        raise InputError("readings: one value per sensor, in sensors.csv order")
    return arr


def estimate(case: Union[Case, PathLike], readings: Any = None, **options: Any) -> EstimateResult:
    """Reconstruct the hidden edge(s) and the field, with uncertainty, as
    ``edgetherm estimate`` does.

    ``readings``: ``None`` (the case's readings.csv), a dict or pandas Series ``{sensor:
    temperature}``, a DataFrame with ``sensor`` and ``temperature`` columns, or one value per
    sensor in sensors.csv order (NaN: no reading); in the case's temperature unit.

    ``options`` (keyword arguments, the command line's flags with ``_`` for ``-``):
    ``limit``, ``probability`` (0.05), ``keep_all``, ``exclude`` (list of ids),
    ``bootstrap`` ("parametric"/"residual"), ``replicates``, ``seed``, ``strength``,
    ``grid`` ((nx, ny)), ``max_gradient``, ``no_bounds``.
    """
    case = _case(case)
    native = _edgetherm.estimate(case._native, _readings_array(case, readings), **options)
    return EstimateResult(native, case._inputs())


def _time_arguments(time) -> Dict[str, Any]:
    """The time column for the native call: seconds, nanoseconds (datetime64) or text."""
    import pandas as pd

    if pd.api.types.is_datetime64_any_dtype(time.dtype):
        zoned = getattr(time.dt, "tz", None) is not None
        if zoned:
            time = time.dt.tz_convert("UTC").dt.tz_localize(None)
        nanos = np.ascontiguousarray(time.to_numpy(dtype="datetime64[ns]").view(np.int64))
        return {"time_nanos": nanos, "zoned": zoned}
    if pd.api.types.is_numeric_dtype(time.dtype):
        return {"time_seconds": np.ascontiguousarray(time.to_numpy(dtype=np.float64, na_value=np.nan))}
    return {"time_text": [str(v) for v in time.tolist()]}


def _float_column(col) -> np.ndarray:
    """A column as a contiguous float64 array (NaN: no reading): the column's own memory when
    it is a NumPy float64 column (no copy), else one converted copy."""
    if col.dtype == np.float64:
        values = col.to_numpy(copy=False)
        if values.flags.c_contiguous:
            return values
    return np.ascontiguousarray(col.to_numpy(dtype=np.float64, na_value=np.nan))


def track(case: Union[Case, PathLike], log: Any, **options: Any) -> TrackResult:
    """Track a logger table row by row, as ``edgetherm track CASE --log LOG`` does: per-row
    estimate, hottest point through time, alarm episodes, failing sensors.

    ``log``: a file path (CSV in any dialect the command line reads, or Parquet), a pandas
    DataFrame or a pyarrow Table with a ``time`` column (datetime, seconds or text) and one
    float column per sensor id (NaN or null: no reading). The sensor columns of a DataFrame
    cross into Rust without copies when they are float64.

    ``options``: ``limit``, ``probability`` (0.05), ``clear`` (10), ``calibrate``,
    ``strength``, ``bootstrap``, ``replicates``, ``draws``, ``seed``, ``keep_all``,
    ``max_gradient``, ``bounds_every``, ``ignore_extra``, and ``rows`` (True: return the
    per-row table; False keeps memory constant on long logs).
    """
    case = _case(case)
    if isinstance(log, (str, os.PathLike)):
        native = _edgetherm.track_file(case._native, os.fspath(log), **options)
        return TrackResult(native, case._inputs() + [os.fspath(log)])
    import pandas as pd

    if hasattr(log, "to_pandas") and not isinstance(log, pd.DataFrame):
        log = log.to_pandas()
    if not isinstance(log, pd.DataFrame):
        raise TypeError("log: a file path, a pandas DataFrame or a pyarrow Table")
    time_names = [c for c in log.columns if str(c).lower() == "time"]
    others = [c for c in log.columns if not (str(c).lower() == "time")]
    time_col = time_names[0] if time_names else None
    columns = []
    sensors = set(case.sensor_ids) | {"cold_junction"}
    for c in others:
        col = log[c]
        if str(c) not in sensors:
            # not a sensor: the library refuses it, or ignores it with ignore_extra=True,
            # whatever it holds
            columns.append(np.full(len(log), np.nan))
            continue
        if not pd.api.types.is_numeric_dtype(col.dtype):
            raise InputError(
                f"DataFrame, field `{c}`: the column holds {col.dtype} values; it must hold "
                "numbers (float; a missing reading is NaN)"
            )
        columns.append(_float_column(col))
    if time_col is None:
        # no time column: the library's message says so (a placeholder name that is none)
        time_kw = {"time_seconds": np.zeros(len(log))}
        ordered = ["(no time column)"] + [str(c) for c in others]
    else:
        time_kw = _time_arguments(log[time_col])
        ordered = [str(time_col)] + [str(c) for c in others]
    source = options.pop("source", "DataFrame")
    native = _edgetherm.track_columns(
        case._native, ordered, columns, source=source, **time_kw, **options
    )
    return TrackResult(native, case._inputs())


def design(case: Union[Case, PathLike], count: int, **options: Any) -> DesignResult:
    """Choose ``count`` sensor positions before drilling, as ``edgetherm design CASE --count
    K`` does (``add=True``: add them to those of sensors.csv). ``options``: ``criterion``
    ("information", "edge", "worst"), ``variation``."""
    case = _case(case)
    native = _edgetherm.design(case._native, int(count), **options)
    return DesignResult(native, case._inputs())
