#!/usr/bin/env python3
"""Independent reference for the eigenvalues of an edge with convective (Robin) ends.

Regenerates ``tests/fixtures/robin/roots.json``, which the Rust tests of the convective
series model (issue 10) check against.

How to run (from the repository root; a few seconds on one core):

    python3 -m pip install -r scripts/requirements-robin.txt
    python3 scripts/robin_roots.py                      # (re)writes the fixture
    python3 scripts/robin_roots.py --out /tmp/roots.json

Exit status 0 when every check passed; 1 otherwise (nothing is written then).

Problem. On an edge 0 <= s <= L the eigenfunctions are phi(s) = sin(k s + theta0) with one
of three conditions at each end:
  held        phi = 0,
  insulated   phi' = 0,
  convective  with beta = h / conductivity (per unit length): phi'(0) = beta phi(0) at the
              start, -phi'(L) = beta phi(L) at the end (heat leaves to the fluid through
              the outward normal at both ends).
Writing phi = sin(k s + theta0), the start condition fixes theta0: 0 (held), pi/2
(insulated), atan(k / beta) (convective: k cos theta0 = beta sin theta0). By the mirror
symmetry s -> L - s the end condition is the same with thetaL in place of theta0 and
sin(k L + theta0) = sin(pi - thetaL) up to sign, so the eigenvalues are the roots of
    F(k) = k L + theta0(k) + thetaL(k) - (n + 1) pi = 0,   n = 0, 1, 2, ...
(derived here; the classical form for insulated-convective is xi tan xi = Bi with xi = k L
and Bi = beta L, Carslaw & Jaeger, Conduction of Heat in Solids, 2nd ed., chapter III, the
slab with radiation (convective) boundary conditions; section numbers recalled from memory,
not checked against the book).
F is strictly increasing in k (theta = atan(k / beta) is increasing) and the n-th root lies
in its own branch: k L in [n pi, (n + 1) pi] (F <= 0 at the left end since each theta is
at most pi/2, F >= 0 at the right end since each theta is at least 0), with the strict
exceptions handled below. Each root is found by scipy.optimize.brentq on that branch to
xtol 1e-14 (in k L). Held-held (k L = (n+1) pi) and the insulated-insulated constant mode are
not convective and are not written.

Branch ends. For held-convective and convective-convective the first branch starts at
k L = 0 where F < 0 (k = 0 is not an eigenvalue: phi would vanish or the convective end
would force phi = 0); brentq is given [tiny, pi] there. For insulated-convective the roots
are also those of xi tan xi = Bi, with xi_n in (n pi, n pi + pi/2).

Checks (all must pass; each names its source):
1. Every root satisfies its end conditions: the residuals of phi'(0) - beta phi(0) (or
   phi(0), phi'(0)) and of phi'(L) + beta phi(L) are below 1e-12 of (k + beta) -- derived.
2. Insulated-convective: each xi is within 1e-13 of a root of the classical equation
   xi tan xi = Bi (the Newton step |g / g'| of g = xi tan xi - Bi, which measures the
   distance to the root whatever the conditioning; a relative residual of g alone is
   4e-11 at Bi = 0.01 for the 20th root, since g' ~ xi there) with xi in (n pi, n pi +
   pi/2) -- the classical equation (Carslaw & Jaeger, chapter III, as above).
3. Insulated-convective against printed tables of the roots of xi tan xi = C, to the
   printed 4 decimals (|difference| <= 5e-5 plus 1e-9):
   - Essentials of Applied Mathematics for Scientists and Engineers (2007; the author, R. G.
     Watts, and the publisher, Morgan & Claypool, are recalled from memory: the page shows
     only the title, the table and the date), Appendix A, Table A.1 (first six roots; read at
     https://digilib.universitaspertamina.ac.id/ebook/Essentials%20of%20applied%20mathematics%20for%20scientists%20and%20engineers/files/basic-html/page169.html
     and page170.html) for C = 0.01, 0.1, 1, 10. The page heads the table "alpha tan
     alpha + C = 0" but its values are roots of alpha tan alpha = C (0.8603 tan 0.8603 =
     1.000; checked below through the comparison itself).
   - Carslaw & Jaeger, Conduction of Heat in Solids, 2nd ed., Appendix IV, Table II, the
     same roots: NOT checked against the book here; the values for Bi = 1 (0.8603, 3.4256,
     6.4373, 9.5293), Bi = 0.1 (0.3111, 3.1731, 6.2991) and Bi = 10 (1.4289, 4.3058,
     7.2281) are recalled from memory and agree with Watts's table.
   - Bi = 100 (1.5552, 4.6658, 7.7764, 10.8871, 13.9981, 17.1093): recalled from memory
     (neither table was read for this value); a mismatch fails the run and would mean the
     recollection is wrong, to be said in the commit that changes it.
4. Norms and orthogonality by adaptive quadrature (scipy.integrate.quad, independent of
   the closed form): for each combination the fixture records int_0^L phi_n^2 ds for the
   20 roots, the closed form of the norm (derived here: L/2 - [sin(2(kL + theta0)) -
   sin(2 theta0)] / (4 k)) and max |int phi_m phi_n| over m != n. The script requires the
   quadrature norm to match the closed form to 1e-10 relative and the largest off-diagonal
   integral to stay below 1e-9 of L (orthogonality of Sturm-Liouville eigenfunctions,
   common practice).
5. Mirror symmetry: convective-insulated (Bi = 1, on L = 2) has the same k L as
   insulated-convective (Bi = 1, on L = 0.25) to 1e-12 (derived: s -> L - s).

Everything is deterministic. Nothing in this script comes from edgetherm.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import platform
import sys
from pathlib import Path

import numpy as np
import scipy
from scipy.integrate import quad
from scipy.optimize import brentq

ROOTS = 20
XTOL = 1e-14
BIOTS = (0.01, 0.1, 1.0, 10.0, 100.0)

#: Printed tables of the roots of xi tan xi = Bi (see the module doc for the status of each).
TABLE_WATTS = {  # Watts (2007), Appendix A, Table A.1, read at the address in the module doc
    0.01: [0.0998, 3.1448, 6.2848, 9.4258, 12.5672, 15.7086],
    0.1: [0.3111, 3.1731, 6.2991, 9.4354, 12.5743, 15.7143],
    1.0: [0.8603, 3.4256, 6.4373, 9.5293, 12.6453, 15.7713],
    10.0: [1.4289, 4.3058, 7.2281, 10.2003, 13.2142, 16.2594],
}
TABLE_CJ_RECALLED = {  # Carslaw & Jaeger, App. IV, Table II -- recalled from memory, not read
    0.1: [0.3111, 3.1731, 6.2991],
    1.0: [0.8603, 3.4256, 6.4373, 9.5293],
    10.0: [1.4289, 4.3058, 7.2281],
}
TABLE_RECALLED_BI100 = [1.5552, 4.6658, 7.7764, 10.8871, 13.9981, 17.1093]  # from memory
TABLE_TOL = 5e-5 + 1e-9


def theta(cond: str, k: float, beta: float | None) -> float:
    if cond == "held":
        return 0.0
    if cond == "insulated":
        return math.pi / 2
    return math.atan2(k, beta)  # atan(k / beta), beta > 0


def roots(L: float, start: tuple[str, float | None], end: tuple[str, float | None]) -> list[float]:
    """First ROOTS values of k L, one per branch [n pi, (n + 1) pi]."""
    (c0, b0), (c1, b1) = start, end
    out = []
    for n in range(ROOTS):
        f = lambda xi: xi + theta(c0, xi / L, b0) + theta(c1, xi / L, b1) - (n + 1) * math.pi
        lo, hi = n * math.pi, (n + 1) * math.pi
        if n == 0:
            lo = 1e-300  # F(0+) < 0 unless both ends are insulated (not a case here)
        flo, fhi = f(lo), f(hi)
        assert flo < 0 < fhi or (flo < 0 and fhi == 0), (start, end, n, flo, fhi)
        if fhi == 0:
            out.append(hi)
            continue
        out.append(brentq(f, lo, hi, xtol=XTOL, rtol=4 * np.finfo(float).eps, maxiter=500))
    return out


def phi(xi: float, L: float, start, s):
    k = xi / L
    return np.sin(k * s + theta(start[0], k, start[1]))


def end_residuals(xi: float, L: float, start, end) -> float:
    """Largest residual of the two end conditions, relative to k + beta + 1/L."""
    k = xi / L
    t0 = theta(start[0], k, start[1])
    p0, d0 = math.sin(t0), k * math.cos(t0)
    pL, dL = math.sin(xi + t0), k * math.cos(xi + t0)
    res = []
    for (cond, beta), (p, d, sign) in ((start, (p0, d0, 1.0)), (end, (pL, dL, -1.0))):
        if cond == "held":
            res.append(abs(p) * k)
        elif cond == "insulated":
            res.append(abs(d))
        else:  # start: phi' = beta phi; end: -phi' = beta phi
            res.append(abs(sign * d - beta * p) / (k + beta))
    return max(res) / max(k, 1.0 / L)


def norm_closed(xi: float, L: float, start) -> float:
    k = xi / L
    t0 = theta(start[0], k, start[1])
    return L / 2 - (math.sin(2 * (xi + t0)) - math.sin(2 * t0)) / (4 * k)


def quad_inner(a: float, b: float, L: float, start) -> float:
    val, _ = quad(lambda s: phi(a, L, start, s) * phi(b, L, start, s), 0.0, L,
                  limit=400, epsabs=1e-14 * L, epsrel=1e-13)
    return val


def combinations() -> list[dict]:
    """Edge lengths and coefficients are invented; beta = Bi / L."""
    out = []
    L = 0.25
    for bi in BIOTS:
        out.append({"name": f"insulated-convective Bi={bi:g}", "L": L,
                    "start": ("insulated", None), "end": ("convective", bi / L), "biot": bi})
    for bi in (0.3, 4.0):
        L = 1.6
        out.append({"name": f"held-convective Bi={bi:g}", "L": L,
                    "start": ("held", None), "end": ("convective", bi / L), "biot": bi})
    L = 0.074
    out.append({"name": "convective-convective Bi=0.52,2.7", "L": L,
                "start": ("convective", 0.52 / L), "end": ("convective", 2.7 / L)})
    L = 3.75
    out.append({"name": "convective-held Bi=2.28", "L": L,
                "start": ("convective", 2.28 / L), "end": ("held", None)})
    L = 2.0
    out.append({"name": "convective-insulated Bi=1", "L": L,
                "start": ("convective", 1.0 / L), "end": ("insulated", None)})
    return out


def main() -> int:
    repo = Path(__file__).resolve().parent.parent
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--out", type=Path, default=repo / "tests" / "fixtures" / "robin" / "roots.json")
    args = ap.parse_args()

    ok = True
    entries = []
    for c in combinations():
        L, start, end = c["L"], c["start"], c["end"]
        xis = roots(L, start, end)
        # 1. end conditions
        worst_res = max(end_residuals(x, L, start, end) for x in xis)
        ok_c = worst_res < 1e-12
        # branches strictly increasing, one root per branch
        ok_c &= all(n * math.pi <= x <= (n + 1) * math.pi for n, x in enumerate(xis))
        note = f"end-condition residual {worst_res:.1e}"
        # 2./3. insulated-convective
        if start[0] == "insulated" and end[0] == "convective":
            bi = c["biot"]
            # Newton step of g(xi) = xi tan xi - Bi: the distance to g's root, to first order.
            eq = max(abs((x * math.tan(x) - bi) / (math.tan(x) + x / math.cos(x) ** 2))
                     for x in xis)
            ok_c &= eq < 1e-13 and all(n * math.pi < x < n * math.pi + math.pi / 2
                                       for n, x in enumerate(xis))
            note += f", xi tan xi = Bi (Newton step {eq:.1e})"
            for label, table in (("Watts Table A.1", TABLE_WATTS.get(bi)),
                                 ("Carslaw & Jaeger (recalled)", TABLE_CJ_RECALLED.get(bi)),
                                 ("recalled", TABLE_RECALLED_BI100 if bi == 100.0 else None)):
                if table is None:
                    continue
                diff = max(abs(a - b) for a, b in zip(xis, table))
                ok_c &= diff <= TABLE_TOL
                note += f", {label} {len(table)} roots within {diff:.1e}"
        # 4. norms and orthogonality
        norms_q = [quad_inner(x, x, L, start) for x in xis]
        norms_c = [norm_closed(x, L, start) for x in xis]
        norm_err = max(abs(a - b) / b for a, b in zip(norms_q, norms_c))
        off = max(abs(quad_inner(xis[m], xis[n], L, start))
                  for m in range(ROOTS) for n in range(m + 1, ROOTS))
        ok_c &= norm_err < 1e-10 and off < 1e-9 * L
        note += f", norm quad vs closed {norm_err:.1e}, max |<phi_m, phi_n>| {off / L:.1e} L"
        print(f"  {c['name']:36s} {note}  {'ok' if ok_c else 'FAIL'}")
        ok &= ok_c

        def end_json(e):
            return {"condition": e[0], "beta": e[1]}
        entry = {"name": c["name"], "length": L, "start": end_json(start), "end": end_json(end),
                 "kL": xis, "k": [x / L for x in xis],
                 "norm_quad": norms_q, "norm_closed_form": norms_c,
                 "max_offdiagonal_abs": off}
        if "biot" in c:
            entry["biot"] = c["biot"]
        entries.append(entry)

    # 5. Mirror symmetry s -> L - s: convective-insulated with Bi = 1 has the roots of
    #    insulated-convective with Bi = 1 (the two are computed on different lengths).
    by_name = {e["name"]: e for e in entries}
    mirror = max(abs(a - b) for a, b in zip(by_name["convective-insulated Bi=1"]["kL"],
                                            by_name["insulated-convective Bi=1"]["kL"]))
    ok_m = mirror < 1e-12
    print(f"  mirror: convective-insulated vs insulated-convective (Bi = 1) k L within "
          f"{mirror:.1e}  {'ok' if ok_m else 'FAIL'}")
    ok &= ok_m

    if not ok:
        print("FAILED: nothing written", file=sys.stderr)
        return 1
    doc = {
        "description": ("Eigenvalues k_n of phi = sin(k s + theta0) on an edge 0 <= s <= L with "
                        "held (phi = 0), insulated (phi' = 0) or convective ends (start: "
                        "phi'(0) = beta phi(0); end: -phi'(L) = beta phi(L); beta = h / "
                        "conductivity per unit length): the roots of k L + theta0 + thetaL = "
                        "(n + 1) pi, theta = atan(k / beta) convective, 0 held, pi/2 insulated, "
                        "one per branch [n pi, (n + 1) pi], by scipy.optimize.brentq to xtol "
                        "1e-14 in k L. theta0 of each root is atan(k / beta) / 0 / pi/2 at the "
                        "start. norm_quad: int_0^L phi_n^2 ds by scipy.integrate.quad; "
                        "norm_closed_form: L/2 - (sin(2 (k L + theta0)) - sin(2 theta0)) / (4 k); "
                        "max_offdiagonal_abs: max over m != n of |int_0^L phi_m phi_n ds| by quad. "
                        "Made by scripts/robin_roots.py; do not edit."),
        "generator": (f"scripts/robin_roots.py (numpy {np.__version__}, scipy {scipy.__version__}, "
                      f"Python {platform.python_version()})"),
        "xtol": XTOL,
        "roots_per_combination": ROOTS,
        "combinations": entries,
    }
    args.out.parent.mkdir(parents=True, exist_ok=True)
    tmp = args.out.with_name(args.out.name + ".tmp")
    tmp.write_text(json.dumps(doc, indent=1) + "\n", encoding="utf-8")
    os.replace(tmp, args.out)
    print(f"wrote {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
