#!/usr/bin/env python3
"""A straightforward numpy implementation of `edgetherm estimate`'s core, for timing.

Issue 9 measures the estimate "whole process, in alternation with a straightforward
numpy/scipy implementation of the same estimate". This is one, written for this benchmark
from docs/method.md §1–3 (not from edgetherm's code), the way a careful numpy user would
write it: every replicate's strength search and solution as array operations over all
replicates at once (a first version that called scipy's bounded Brent per replicate took
about three times as long), so the ratio it gives is not flattered by a slow reference.

What it computes, for a rectangle whose bottom edge is unknown, top edge held at a constant
temperature and sides insulated (the cold-plate and busbar-clamp samples; anything else is
refused):
  * the sensor map of the cosine series (`[fit] terms` modes, sinh decay toward the top);
  * Tikhonov regularisation with the slope and the curvature penalty, the constant mode
    unpenalised and eliminated by QR, one SVD of the standard form per order;
  * the strength by the marginal likelihood (evidence, known sigma) on a 200-point grid in
    log lambda refined by a golden-section search, the order (`auto`) by the evidence;
  * the error bootstrap: `[uncertainty] replicates` draws of a truth from the smoothness
    prior, noisy readings, the strength re-chosen, the error recorded;
  * pointwise 95 % bands (numpy's percentiles) of the edge profile at 513 points and of the
    field on a 41 x 41 grid, the hottest point and its interval [max L, max U];
  * standardised leave-one-out residuals; the outputs as CSV and JSON.

What it leaves out of edgetherm's estimate (so it does less work than the binary it is
timed against): the fault model and the sensor decisions, the simultaneous and linear
bands, the strict bounds and their gradient study, resolution lengths, heat flows, plots
and the report.

Usage:
  python3 benches/estimate_reference.py CASE_DIR OUT_DIR
  python3 benches/estimate_reference.py --compare BIN CASE_DIR [RUNS]
The second form runs the reference and `BIN estimate CASE_DIR --quiet` alternately RUNS
times (default 9), whole process each, and prints the wall-time medians, their ratio, and
both hottest-temperature intervals (which should agree to Monte Carlo error).
"""

import csv
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time

import numpy as np

REPLICATE_SEED = 20261203  # the reference's own stream; it cannot reproduce edgetherm's draws


def load_case(case_dir):
    import tomllib

    with open(os.path.join(case_dir, "plate.toml"), "rb") as f:
        plate = tomllib.load(f)
    edges = plate.get("edges", {})

    def condition(name):
        return edges.get(name, {}).get("condition")

    if not (
        condition("bottom") == "unknown"
        and condition("top") == "fixed"
        and condition("left") == "insulated"
        and condition("right") == "insulated"
        and isinstance(edges["top"].get("temperature"), (int, float))
    ):
        sys.exit(
            "the reference handles only: bottom unknown, top fixed at a constant, sides insulated"
        )
    sigma = plate.get("noise", {}).get("sigma")
    if sigma is None:
        sys.exit("the reference needs [noise] sigma")
    with open(os.path.join(case_dir, "sensors.csv"), newline="") as f:
        sensors = {r["sensor"]: (float(r["x"]), float(r["y"])) for r in csv.DictReader(f)}
    with open(os.path.join(case_dir, "readings.csv"), newline="") as f:
        readings = [(r["sensor"], r["temperature"]) for r in csv.DictReader(f)]
    ids, xy, t = [], [], []
    for sid, value in readings:
        if value.strip() == "" or sid not in sensors:
            continue
        ids.append(sid)
        xy.append(sensors[sid])
        t.append(float(value))
    return {
        "width": float(plate["plate"]["width"]),
        "height": float(plate["plate"]["height"]),
        "top": float(edges["top"]["temperature"]),
        "terms": int(plate.get("fit", {}).get("terms", 64)),
        "sigma": float(sigma),
        "replicates": int(plate.get("uncertainty", {}).get("replicates", 2000)),
        "ids": ids,
        "xy": xy,
        "t": t,
    }


def series_map(x, y, width, height, terms):
    """Rows: points; columns: cos(k_n x) psi_n(y), psi_n(y) = sinh(k_n (H - y))/sinh(k_n H)."""
    k = np.arange(terms) * np.pi / width
    x = np.asarray(x, float)[:, None]
    y = np.asarray(y, float)[:, None]
    with np.errstate(over="ignore", invalid="ignore"):
        # the overflow-free form exp(-k y)(1 - exp(-2k(H - y)))/(1 - exp(-2kH)); k = 0: (H - y)/H
        psi = np.exp(-k * y) * -np.expm1(-2 * k * (height - y)) / -np.expm1(-2 * k * height)
    psi[:, 0] = (height - y[:, 0]) / height
    return np.cos(k * x) * psi


def penalty(width, terms, order):
    """l_j for the squared derivative of `order` of the profile (docs/method.md §2)."""
    n = np.arange(terms)
    norm2 = np.where(n == 0, width, width / 2)
    return np.sqrt(n.astype(float) ** (2 * order) * norm2 / width)


class Order:
    """One smoothing order: the standard form's SVD after eliminating the constant mode."""

    def __init__(self, a, width, terms, order):
        l = penalty(width, terms, order)
        self.l = l
        free = l > 0
        x0 = a[:, ~free]  # unpenalised columns
        q, _ = np.linalg.qr(x0, mode="complete")
        self.q0 = q[:, : x0.shape[1]]
        self.q1 = q[:, x0.shape[1] :]  # the complement, m - q columns
        self.x0 = x0
        self.free = free
        b = self.q1.T @ (a[:, free] / l[free])
        u, g, vt = np.linalg.svd(b, full_matrices=False)
        self.u, self.g, self.vt = u, g, vt
        self.a = a
        g2max = (g**2).max()
        self.grid = np.logspace(np.log10(g2max) - 12, np.log10(g2max) + 2, 200)

    def criterion(self, lam, beta, delta0):
        """-2 log evidence (known sigma, whitened data) up to a constant, for data vectors
        (beta: B x r, delta0: B) at strengths lam (B, one per vector, or B x G)."""
        lam = np.asarray(lam, float)
        one = lam.ndim == 1
        lam = lam[:, None] if one else lam
        w = lam[..., None] / (self.g**2 + lam[..., None])  # B x G x r
        value = -np.log(w).sum(-1) + (w * beta[:, None, :] ** 2).sum(-1) + delta0[:, None]
        return value[:, 0] if one else value

    def project(self, dw):
        """beta and the part of the data outside the SVD's range, for whitened data (B x m)."""
        y1 = dw @ self.q1
        beta = y1 @ self.u
        delta0 = (y1**2).sum(-1) - (beta**2).sum(-1)
        return beta, delta0

    def choose(self, beta, delta0):
        """For each data vector, the strength minimising the criterion: the grid, then a
        golden-section search in log lambda between the best point's neighbours (all vectors
        at once), to 1e-6 of log lambda."""
        grid = np.broadcast_to(self.grid, (len(delta0), len(self.grid)))
        values = self.criterion(grid, beta, delta0)
        i = np.argmin(values, axis=1)
        lo = np.log(self.grid[np.maximum(i - 1, 0)])
        hi = np.log(self.grid[np.minimum(i + 1, len(self.grid) - 1)])
        r = (np.sqrt(5.0) - 1.0) / 2.0
        x1, x2 = hi - r * (hi - lo), lo + r * (hi - lo)
        f1 = self.criterion(np.exp(x1), beta, delta0)
        f2 = self.criterion(np.exp(x2), beta, delta0)
        while (hi - lo).max() > 1e-6:
            left = f1 < f2  # the minimum lies in [lo, x2]
            hi = np.where(left, x2, hi)
            lo = np.where(left, lo, x1)
            x2n = np.where(left, x1, lo + r * (hi - lo))
            x1n = np.where(left, hi - r * (hi - lo), x2)
            f2n = np.where(left, f1, np.nan)
            f1n = np.where(left, np.nan, f2)
            new_x = np.where(left, x1n, x2n)
            f_new = self.criterion(np.exp(new_x), beta, delta0)
            f1 = np.where(left, f_new, f1n)
            f2 = np.where(left, f2n, f_new)
            x1, x2 = x1n, x2n
        lam = np.exp((lo + hi) / 2)
        return lam, self.criterion(lam, beta, delta0)

    def coefficients(self, dw, lam):
        """The Tikhonov solutions for whitened data vectors dw (B x m) at strengths lam (B)."""
        beta = (dw @ self.q1) @ self.u
        z = (self.g * beta / (self.g**2 + lam[:, None])) @ self.vt
        c = np.zeros((dw.shape[0], len(self.l)))
        c[:, self.free] = z / self.l[self.free]
        # the unpenalised coefficients from the rest of the data
        rest = dw - c[:, self.free] @ self.a[:, self.free].T
        c[:, ~self.free] = np.linalg.lstsq(self.x0, rest.T, rcond=None)[0].T
        return c


def estimate(case):
    w, h, terms, sigma = case["width"], case["height"], case["terms"], case["sigma"]
    xy = np.array(case["xy"])
    t = np.array(case["t"])
    a = series_map(xy[:, 0], xy[:, 1], w, h, terms)
    known = case["top"] * xy[:, 1] / h
    dw = (t - known) / sigma
    aw = a / sigma

    # smoothing order by the evidence (slope or curvature), the strength within it
    best = None
    for order in (1, 2):
        o = Order(aw, w, terms, order)
        beta, delta0 = o.project(dw[None, :])
        lam, value = (float(v[0]) for v in o.choose(beta, delta0))
        # both orders share the null space (the constant mode), so the criteria compare as
        # they are: each is -2 log p(data) of the projected data under its own prior
        if best is None or value < best[2]:
            best = (o, lam, value, order)
    o, lam, _, order = best
    c = o.coefficients(dw[None, :], np.array([lam]))[0]

    # the error bootstrap
    rng = np.random.default_rng(REPLICATE_SEED)
    n_rep = case["replicates"]
    free = o.free
    truths = np.zeros((n_rep, terms))
    truths[:, free] = rng.standard_normal((n_rep, free.sum())) / (np.sqrt(lam) * o.l[free])
    data = truths @ aw.T + rng.standard_normal((n_rep, len(t)))
    beta, delta0 = o.project(data)
    lam_b, _ = o.choose(beta, delta0)
    errors = o.coefficients(data, lam_b) - truths

    # edge profile and field, their draws and pointwise bands
    s = np.linspace(0.0, w, 513)
    p_map = series_map(s, np.zeros_like(s), w, h, terms)
    profile = p_map @ c
    draws = profile - errors @ p_map.T
    lo, hi = np.percentile(draws, [2.5, 97.5], axis=0)
    gx, gy = np.meshgrid(np.linspace(0.0, w, 41), np.linspace(0.0, h, 41))
    f_map = series_map(gx.ravel(), gy.ravel(), w, h, terms)
    f_known = case["top"] * gy.ravel() / h
    field = f_map @ c + f_known
    f_draws = field - errors @ f_map.T
    f_lo, f_hi = np.percentile(f_draws, [2.5, 97.5], axis=0)

    # standardised leave-one-out residuals at the chosen strength
    z = o.vt.T @ np.diag(o.g / (o.g**2 + lam)) @ o.u.T @ o.q1.T  # free coefficients per datum
    hat = aw[:, free] @ (z / o.l[free][:, None]) + o.q0 @ o.q0.T
    hat -= o.q0 @ o.q0.T @ aw[:, free] @ (z / o.l[free][:, None])
    resid = dw - aw @ c
    loo = resid / np.sqrt(np.clip(1.0 - np.diag(hat), 1e-12, None))

    k = int(np.argmax(profile))
    return {
        "order": "slope" if order == 1 else "curvature",
        "lambda": lam,
        "hottest": float(profile[k]),
        "hottest_x": float(s[k]),
        "hottest_interval": [float(lo.max()), float(hi.max())],
        "profile": (s, profile, lo, hi),
        "field": (gx.ravel(), gy.ravel(), field, f_lo, f_hi),
        "loo": loo,
    }


def write_outputs(case, result, out_dir):
    os.makedirs(out_dir, exist_ok=True)
    s, profile, lo, hi = result["profile"]
    np.savetxt(
        os.path.join(out_dir, "profile.csv"),
        np.column_stack([s, profile, lo, hi]),
        delimiter=",",
        header="position,temperature,lower,upper",
        comments="",
        fmt="%.4f",
    )
    np.savetxt(
        os.path.join(out_dir, "field.csv"),
        np.column_stack(result["field"]),
        delimiter=",",
        header="x,y,temperature,lower,upper",
        comments="",
        fmt="%.4f",
    )
    with open(os.path.join(out_dir, "sensors.csv"), "w", newline="") as f:
        wr = csv.writer(f)
        wr.writerow(["sensor", "loo_z"])
        for sid, zv in zip(case["ids"], result["loo"]):
            wr.writerow([sid, f"{zv:.3f}"])
    summary = {
        k: result[k] for k in ("order", "lambda", "hottest", "hottest_x", "hottest_interval")
    }
    with open(os.path.join(out_dir, "summary.json"), "w") as f:
        json.dump(summary, f, indent=2)
    return summary


def compare(binary, case_dir, runs):
    ref_times, bin_times = [], []
    ref_summary = bin_summary = None
    for _ in range(runs):
        with tempfile.TemporaryDirectory() as tmp:
            t0 = time.perf_counter()
            subprocess.run(
                [sys.executable, __file__, case_dir, os.path.join(tmp, "ref")],
                check=True,
                stdout=subprocess.DEVNULL,
            )
            ref_times.append(time.perf_counter() - t0)
            t0 = time.perf_counter()
            rc = subprocess.run(
                [binary, "estimate", case_dir, "--out", os.path.join(tmp, "bin"), "--quiet"],
                stdout=subprocess.DEVNULL,
            ).returncode
            bin_times.append(time.perf_counter() - t0)
            if rc not in (0, 3):
                sys.exit(f"{binary} estimate exited with {rc}")
            with open(os.path.join(tmp, "ref", "summary.json")) as f:
                ref_summary = json.load(f)
            with open(os.path.join(tmp, "bin", "summary.json")) as f:
                bin_summary = json.load(f)
    rm, bm = statistics.median(ref_times), statistics.median(bin_times)
    print(f"case {case_dir}, {runs} alternated runs, whole process, wall:")
    print(
        f"  reference (numpy):       median {1e3 * rm:.1f} ms ({1e3 * min(ref_times):.1f}-{1e3 * max(ref_times):.1f})"
    )
    print(
        f"  edgetherm estimate:      median {1e3 * bm:.1f} ms ({1e3 * min(bin_times):.1f}-{1e3 * max(bin_times):.1f})"
    )
    print(f"  ratio reference/edgetherm: {rm / bm:.1f} (issue 9's bar: at least 10)")
    print(
        "  hottest interval: reference [{:.2f}, {:.2f}] at {:.1f} ({}), edgetherm {}".format(
            *ref_summary["hottest_interval"],
            ref_summary["hottest_x"],
            ref_summary["order"],
            hottest_of(bin_summary),
        )
    )


def hottest_of(summary):
    """edgetherm's hottest temperature, its interval and position from its summary.json."""
    hot = summary["hottest"]
    return "[{:.2f}, {:.2f}] at {:.1f} ({})".format(
        *hot["temperature_interval"], hot["position"], summary["strength"]["smoothing"]
    )


def main():
    args = sys.argv[1:]
    if args and args[0] == "--compare":
        if len(args) < 3:
            sys.exit(__doc__)
        compare(args[1], args[2], int(args[3]) if len(args) > 3 else 9)
        return
    if len(args) != 2:
        sys.exit(__doc__)
    case = load_case(args[0])
    summary = write_outputs(case, estimate(case), args[1])
    print(json.dumps(summary))


if __name__ == "__main__":
    main()
