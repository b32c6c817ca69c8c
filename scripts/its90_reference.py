#!/usr/bin/env python3
"""Independent reference for edgetherm's ITS-90 thermocouple functions (src/its90.rs).

Regenerates ``tests/fixtures/its90/reference.csv``, which
``tests/integration/its90_reference.rs`` checks the Rust code against.

How to run (from the repository root, about a second):

    python3 -m pip install -r scripts/requirements-its90.txt
    python3 scripts/its90_reference.py                  # (re)writes the fixture
    python3 scripts/its90_reference.py --out /tmp/x.csv

The reference is the PyPI package ``thermocouples_reference`` (public domain), a
general-purpose implementation of the NIST ITS-90 reference functions (NIST Monograph 175,
NIST SRD 60) for types B, E, J, K, N, R, S and T, with its own transcription of the
coefficients and its own piecewise evaluation (numpy.polyval, type K's exponential term).
Nothing in this script comes from edgetherm.

For each type the fixture holds 241 temperatures spread evenly over the type's whole range
(both ends included) plus every range boundary, with the reference emf E(t) (mV) and its
derivative dE/dt (mV/degC) from the package, and the inverse t(E) from the package's own
inverse lookup (scipy brentq). Columns: ``type,t_c,emf_mv,slope_mv_per_c,inverse_t_c``.
The inverse column is left empty where the emf is not single-valued (type B below 50 degC).

Exit status 0 when the internal checks passed (inverse of E(t) returns t to 1e-6 degC), 1
otherwise (nothing is written then).
"""

import argparse
import csv
import io
import sys
from importlib import metadata

import numpy as np
import thermocouples_reference
from thermocouples_reference import thermocouples
import scipy.optimize

POINTS = 241
TYPES = "BEJKNRST"
TYPE_B_INVERSE_FROM_C = 50.0


def rows():
    out = []
    ok = True
    for letter in TYPES:
        func = thermocouples[letter].func
        lo, hi = func.minT, func.maxT
        ts = set(np.linspace(lo, hi, POINTS).tolist())
        for tmin, tmax, _, _ in func.table:
            ts.add(float(tmin))
            ts.add(float(tmax))
        for t in sorted(ts):
            e = float(func(t))
            s = float(func(t, derivative=1))
            inv = ""
            if letter != "B" or t >= TYPE_B_INVERSE_FROM_C:
                # the package's inverse, bracketed on the single-valued part of the range
                a = TYPE_B_INVERSE_FROM_C if letter == "B" else lo
                ti = scipy.optimize.brentq(lambda x: float(func(x)) - e, a, hi, xtol=1e-12, rtol=1e-15)
                if abs(ti - t) > 1e-6:
                    print(f"type {letter}: inverse of E({t}) is {ti}", file=sys.stderr)
                    ok = False
                inv = repr(ti)
            out.append((letter, repr(float(t)), repr(e), repr(s), inv))
    return out, ok


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", default="tests/fixtures/its90/reference.csv")
    args = ap.parse_args()
    data, ok = rows()
    if not ok:
        return 1
    buf = io.StringIO()
    buf.write(
        f"# thermocouples_reference {thermocouples_reference.__version__}, numpy {np.__version__}, "
        f"scipy {metadata.version('scipy')}; written by scripts/its90_reference.py\n"
    )
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["type", "t_c", "emf_mv", "slope_mv_per_c", "inverse_t_c"])
    w.writerows(data)
    with open(args.out, "w", encoding="utf-8") as f:
        f.write(buf.getvalue())
    print(f"wrote {len(data)} rows to {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
