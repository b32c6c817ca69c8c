#!/usr/bin/env python3
"""Reference values for the strict-bound programs (tests/integration/bounds_reference.rs).

An invented small problem -- one hidden edge of 0.12 m with 25 nodes, five sensors whose
sensitivities are trapezoid weights of the half-plane Poisson kernel d / (pi ((x - s)^2 + d^2)),
readings from an invented bump plus fixed noise -- and the programs of the strict bounds on it:

    variables  v (node temperatures, K), u (per-sensor model-error allowance, K)
    subject to |v[j+1] - v[j]| <= G h,  |u_i| <= G rho_i,
               || (H v + o + u - d) / sigma ||_2 <= sqrt(q),   q = chi2_m(confidence)
               (optionally T_min <= v <= T_max)
    objective  max v_j, min v_j, min max_j v_j, or min G (G a variable).

The programs are stated with cvxpy and solved with ECOS (Domahidi, Chu & Boyd 2013), an
interior-point solver independent of the Clarabel solver the Rust code uses; q comes from
scipy.stats.chi2.ppf. The script checks itself (each optimum is feasible and attained by the
solution it reports) and writes nothing if a check fails.

    python3 -m venv /tmp/bounds-ref && . /tmp/bounds-ref/bin/activate
    python3 -m pip install -r scripts/requirements-bounds.txt
    python3 scripts/bounds_reference.py            # rewrites tests/fixtures/bounds/reference.json
    python3 scripts/bounds_reference.py --out /tmp/ref.json
"""

import argparse
import json
import os
import sys

import cvxpy as cp
import ecos
import numpy as np
import scipy
from scipy.stats import chi2

LENGTH = 0.12
NODES = 25
SENSOR_X = [0.015, 0.04, 0.06, 0.08, 0.105]
SENSOR_D = [0.006, 0.008, 0.006, 0.010, 0.007]
SIGMA = 0.1
NOISE = [0.05, -0.08, 0.03, 0.10, -0.04]
RHO = 2e-6
AMBIENT = 293.15
CONFIDENCE = 0.95
GRADIENT = 800.0
STEEP_LIMIT_INFEASIBLE = 50.0
NODES_TO_BOUND = [0, 6, 12, 14, 24]
T_MIN, T_MAX = 297.0, 306.0


def problem():
    s = np.linspace(0.0, LENGTH, NODES)
    h = LENGTH / (NODES - 1)
    w = np.full(NODES, h)
    w[0] = w[-1] = h / 2
    H = np.array(
        [[wj * d / (np.pi * ((x - sj) ** 2 + d ** 2)) for sj, wj in zip(s, w)]
         for x, d in zip(SENSOR_X, SENSOR_D)]
    )
    offset = AMBIENT * (1.0 - H.sum(axis=1))
    truth = 300.0 + 8.0 * np.exp(-(((s - 0.07) / 0.01) ** 2))
    readings = H @ truth + offset + np.array(NOISE)
    return s, h, H, offset, readings, truth


def solve(H, offset, readings, h, q, objective, gradient=None, t_min=None, t_max=None):
    m, n = H.shape
    v = cp.Variable(n)
    u = cp.Variable(m)
    g = cp.Variable(nonneg=True) if gradient is None else gradient
    cons = [
        cp.abs(v[1:] - v[:-1]) <= g * h,
        cp.abs(u) <= g * RHO,
        cp.norm(cp.multiply(1.0 / SIGMA, H @ v + offset + u - readings), 2) <= np.sqrt(q),
    ]
    if t_min is not None:
        cons.append(v >= t_min)
    if t_max is not None:
        cons.append(v <= t_max)
    kind, j = objective
    if kind == "max_node":
        obj = cp.Maximize(v[j])
    elif kind == "min_node":
        obj = cp.Minimize(v[j])
    elif kind == "min_peak":
        obj = cp.Minimize(cp.max(v))
    else:
        obj = cp.Minimize(g)
    prob = cp.Problem(obj, cons)
    prob.solve(solver=cp.ECOS, abstol=1e-10, reltol=1e-10, feastol=1e-10, max_iters=500)
    if prob.status == cp.INFEASIBLE:
        return None
    if prob.status != cp.OPTIMAL:
        raise RuntimeError(f"ECOS stopped with {prob.status} on {objective}")
    # self-check: the reported solution is feasible to 1e-7 and attains the optimum
    gv = float(g.value) if gradient is None else gradient
    resid = (H @ v.value + offset + u.value - readings) / SIGMA
    assert np.linalg.norm(resid) <= np.sqrt(q) + 1e-7, "misfit constraint violated"
    assert np.all(np.abs(np.diff(v.value)) <= gv * h + 1e-7), "slope constraint violated"
    return float(prob.value)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    here = os.path.dirname(os.path.abspath(__file__))
    ap.add_argument("--out", default=os.path.join(here, "..", "tests", "fixtures", "bounds",
                                                  "reference.json"))
    args = ap.parse_args()
    s, h, H, offset, readings, truth = problem()
    m = len(readings)
    q = float(chi2.ppf(CONFIDENCE, m))
    programs = []

    def add(name, objective, **kw):
        value = solve(H, offset, readings, h, q, objective, **kw)
        programs.append({
            "name": name,
            "objective": objective[0],
            "node": objective[1],
            "gradient": kw.get("gradient"),
            "t_min": kw.get("t_min"),
            "t_max": kw.get("t_max"),
            "value": value,
        })

    for j in NODES_TO_BOUND:
        add(f"max node {j}", ("max_node", j), gradient=GRADIENT)
        add(f"min node {j}", ("min_node", j), gradient=GRADIENT)
    add("min peak", ("min_peak", 0), gradient=GRADIENT)
    add("max node 14 within limits", ("max_node", 14), gradient=GRADIENT, t_min=T_MIN,
        t_max=T_MAX)
    add("min node 14 within limits", ("min_node", 14), gradient=GRADIENT, t_min=T_MIN,
        t_max=T_MAX)
    add("min gradient", ("min_gradient", 0))
    add("max node 14 under a too small gradient", ("max_node", 14),
        gradient=STEEP_LIMIT_INFEASIBLE)

    # self-checks of the reference itself
    by = {p["name"]: p["value"] for p in programs}
    for j in NODES_TO_BOUND:
        assert by[f"min node {j}"] <= by[f"max node {j}"], "lower above upper"
    assert by["max node 14 under a too small gradient"] is None, "expected an empty set"
    assert by["max node 14 within limits"] is not None, "the limits should leave a set"
    assert 0.0 < by["min gradient"] < GRADIENT, "the stated gradient should be admissible"
    assert by["min peak"] <= max(by[f"max node {j}"] for j in NODES_TO_BOUND)

    out = {
        "source": "scripts/bounds_reference.py (cvxpy + ECOS, scipy chi2.ppf); invented problem",
        "versions": {"cvxpy": cp.__version__, "ecos": ecos.__version__,
                     "numpy": np.__version__, "scipy": scipy.__version__,
                     "python": sys.version.split()[0]},
        "length_m": LENGTH,
        "nodes": NODES,
        "h": H.flatten().tolist(),
        "offset": offset.tolist(),
        "readings": readings.tolist(),
        "sigma": [SIGMA] * m,
        "rho_m": [RHO] * m,
        "confidence": CONFIDENCE,
        "chi2_quantile": q,
        "truth": truth.tolist(),
        "programs": programs,
    }
    os.makedirs(os.path.dirname(os.path.abspath(args.out)), exist_ok=True)
    with open(args.out, "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")
    print(f"wrote {args.out}: {len(programs)} programs")


if __name__ == "__main__":
    main()
