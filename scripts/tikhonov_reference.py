#!/usr/bin/env python3
"""Independent dense reference for the edgetherm Tikhonov inversion (src/inverse).

Regenerates ``tests/fixtures/tikhonov/reference.json``, which
``tests/integration/tikhonov_reference.rs`` checks the Rust code against.

How to run (from the repository root, a few seconds):

    python3 -m pip install -r scripts/requirements-reference.txt
    python3 scripts/tikhonov_reference.py                  # (re)writes the fixture
    python3 scripts/tikhonov_reference.py --out /tmp/x.json

Exit status 0 when every internal check passed, 1 otherwise (nothing is written then).

Problem (docs/method.md section 2): minimise ||W (A c - d)||^2 + lam ||L c||^2 with W = diag(1/sigma),
L = diag(l), some l_j = 0 (an unpenalised null space). ``lam`` here is the lambda of docs/method.md (it
multiplies ||L c||^2 directly; Hansen's texts write lam^2 for it).

The Rust code works through one SVD of the standard form. This script deliberately does not:
every quantity is computed from dense formulas with numpy/scipy (general-purpose reference
libraries), so a mistake in the standard-form algebra cannot be repeated here.

* Solution: the normal equations M c = A^T W^2 d, M = A^T W^2 A + lam L^T L, solved with
  numpy.linalg.solve (LU); cross-checked against a Householder QR (scipy.linalg.qr) of the
  stacked least-squares problem [W A; sqrt(lam) L] c = [W d; 0].
* Influence matrix H = W A M^-1 A^T W; effective parameters trace H; leverages diag H;
  chi-square ||W (A c - d)||^2; posterior covariance M^-1; resolution M^-1 A^T W^2 A.
* GCV (Golub, Heath & Wahba 1979, Technometrics 21:215-223):
  V = m ||(I - H) W d||^2 / trace(I - H)^2, from the explicit H.
* Evidence (restricted marginal likelihood; Wahba 1985, Ann. Statist. 13:1378-1402): with
  Q2 an orthonormal basis of the complement of the unpenalised columns of W A
  (scipy.linalg.null_space), z = Q2^T W d ~ N(0, s^2 S), S = I + Q2^T (W A_P) L_P^-2
  (W A_P)^T Q2 / lam. Known sigma (s = 1): -2 log p = m' log 2 pi + log det S + z^T S^-1 z.
  Profiled scale: m' (log(2 pi z^T S^-1 z / m') + 1) + log det S. Dense Cholesky.
* Discrepancy principle (Morozov 1984): chi-square(lam) = tau^2 (m - q), tau = 1, solved with
  scipy.optimize.brentq on log10 lam.
* L-curve (Hansen & O'Leary 1993, SIAM J. Sci. Comput. 14:1487-1503): curvature of
  (log ||W(Ac-d)||, log ||L c||) with derivatives from implicit differentiation of the normal
  equations (dc/dlam = -M^-1 L^T L c, d2c/dlam2 = -2 M^-1 L^T L dc/dlam), checked against
  central finite differences.
* Minimisers: a dense scan of log10 lam, then scipy.optimize.minimize_scalar (bounded Brent)
  between the neighbours of the best scan point.

The two test problems are invented (decaying cosine modes seen from interior points, the
shape of the real forward model without its physics); the noise is drawn from numpy's
default_rng with a fixed seed, and the drawn data are stored in the fixture, so the Rust test
does not depend on any random generator.
"""

import argparse
import json
import sys
from pathlib import Path

import numpy as np
import scipy
import scipy.linalg as sla
import scipy.optimize as so

ROOT = Path(__file__).resolve().parent.parent
DEFAULT_OUT = ROOT / "tests" / "fixtures" / "tikhonov" / "reference.json"

TAU = 1.0


def make_case(name, m, p, q, seed):
    """Columns: q unpenalised ones (1, x, ...), then cos(k x) exp(-k y), k = j pi, whose size
    decays geometrically with j; penalty l_j = k^2 (a curvature penalty in this basis)."""
    rng = np.random.default_rng(seed)
    x = (np.arange(m) + 0.5) / m + 0.02 * rng.standard_normal(m)
    y = 0.12 + 0.10 * rng.random(m)
    a = np.zeros((m, p))
    penalty = np.zeros(p)
    for j in range(p):
        if j < q:
            a[:, j] = x**j
        else:
            k = (j - q + 1) * np.pi
            a[:, j] = np.cos(k * x) * np.exp(-k * y)
            penalty[j] = k**2
    truth = np.zeros(p)
    truth[0] = 40.0
    if q > 1:
        truth[1] = 3.0
    for j in range(q, p):
        jj = j - q + 1
        truth[j] = 12.0 * (-1.0) ** jj / jj**2
    sigma = 0.2 * (1.0 + 0.6 * rng.random(m))
    d = a @ truth + sigma * rng.standard_normal(m)
    return dict(name=name, m=m, p=p, q=q, a=a, d=d, sigma=sigma, penalty=penalty, truth=truth)


class Dense:
    """Dense formulas for one case."""

    def __init__(self, case):
        self.a = case["a"]
        self.d = case["d"]
        self.sigma = case["sigma"]
        self.l = case["penalty"]
        self.m, self.p = self.a.shape
        self.w = 1.0 / self.sigma
        self.aw = self.a * self.w[:, None]
        self.dw = self.d * self.w
        self.null = np.flatnonzero(self.l == 0.0)
        self.pen = np.flatnonzero(self.l != 0.0)
        self.q = len(self.null)
        self.mp = self.m - self.q
        # Q2: orthonormal basis of the complement of the unpenalised columns (m x m').
        self.q2 = sla.null_space(self.aw[:, self.null].T) if self.q else np.eye(self.m)
        assert self.q2.shape == (self.m, self.mp)
        ap = self.aw[:, self.pen] / self.l[self.pen][None, :]
        self.k = self.q2.T @ ap @ ap.T @ self.q2
        self.z = self.q2.T @ self.dw

    def normal_matrix(self, lam):
        return self.aw.T @ self.aw + lam * np.diag(self.l**2)

    def solve(self, lam):
        return np.linalg.solve(self.normal_matrix(lam), self.aw.T @ self.dw)

    def solve_qr(self, lam):
        stacked = np.vstack([self.aw, np.sqrt(lam) * np.diag(self.l)])
        rhs = np.concatenate([self.dw, np.zeros(self.p)])
        qm, rm = sla.qr(stacked, mode="economic")
        return sla.solve_triangular(rm, qm.T @ rhs)

    def hat(self, lam):
        return self.aw @ np.linalg.solve(self.normal_matrix(lam), self.aw.T)

    def chi2(self, lam):
        c = self.solve(lam)
        return float(np.sum((self.aw @ c - self.dw) ** 2))

    def gcv(self, lam):
        h = self.hat(lam)
        r = (np.eye(self.m) - h) @ self.dw
        tr = np.trace(np.eye(self.m) - h)
        return float(self.m * (r @ r) / tr**2)

    def evidence(self, lam, kind):
        s = np.eye(self.mp) + self.k / lam
        cf = sla.cho_factor(s)
        logdet = 2.0 * np.sum(np.log(np.diag(cf[0])))
        quad = float(self.z @ sla.cho_solve(cf, self.z))
        if kind == "known-sigma":
            return self.mp * np.log(2 * np.pi) + logdet + quad
        return self.mp * (np.log(2 * np.pi * quad / self.mp) + 1.0) + logdet

    def lcurve_point(self, lam):
        c = self.solve(lam)
        r = self.aw @ c - self.dw
        return 0.5 * np.log(r @ r), 0.5 * np.log(np.sum((self.l * c) ** 2))

    def curvature(self, lam):
        """Curvature of (log ||r||, log ||L c||) by implicit differentiation (parameter lam)."""
        mm = self.normal_matrix(lam)
        ltl = np.diag(self.l**2)
        c = np.linalg.solve(mm, self.aw.T @ self.dw)
        c1 = -np.linalg.solve(mm, ltl @ c)
        c2 = -2.0 * np.linalg.solve(mm, ltl @ c1)
        r = self.aw @ c - self.dw
        rho = r @ r
        rho1 = 2 * r @ (self.aw @ c1)
        rho2 = 2 * ((self.aw @ c1) @ (self.aw @ c1) + r @ (self.aw @ c2))
        lc = self.l * c
        eta = lc @ lc
        eta1 = 2 * lc @ (self.l * c1)
        eta2 = 2 * ((self.l * c1) @ (self.l * c1) + lc @ (self.l * c2))
        # x = 0.5 log rho, y = 0.5 log eta
        x1, y1 = 0.5 * rho1 / rho, 0.5 * eta1 / eta
        x2 = 0.5 * (rho2 / rho - (rho1 / rho) ** 2)
        y2 = 0.5 * (eta2 / eta - (eta1 / eta) ** 2)
        return float((x1 * y2 - x2 * y1) / (x1**2 + y1**2) ** 1.5)

    def curvature_fd(self, lam, h=1e-3):
        t = np.log(lam)
        (xm, ym), (x0, y0), (xp, yp) = (self.lcurve_point(np.exp(s)) for s in (t - h, t, t + h))
        x1, y1 = (xp - xm) / (2 * h), (yp - ym) / (2 * h)
        x2, y2 = (xp - 2 * x0 + xm) / h**2, (yp - 2 * y0 + ym) / h**2
        return float((x1 * y2 - x2 * y1) / (x1**2 + y1**2) ** 1.5)


def minimise(f, lo=-10.0, hi=6.0, n=801):
    """Dense scan of log10 lam, then bounded Brent (scipy) between the best point's neighbours."""
    xs = np.linspace(lo, hi, n)
    vals = np.array([f(10.0**x) for x in xs])
    k = int(np.argmin(vals))
    if k == 0 or k == n - 1:
        raise RuntimeError(f"minimum at the scan's end (log10 lam = {xs[k]})")
    res = so.minimize_scalar(
        lambda x: f(10.0**x), bounds=(xs[k - 1], xs[k + 1]), method="bounded",
        options={"xatol": 1e-11},
    )
    # The scan must have one clear basin: no other local minimum within 1e-6 of the best.
    interior = [i for i in range(1, n - 1) if vals[i] < vals[i - 1] and vals[i] < vals[i + 1]]
    rivals = [i for i in interior if i != k and vals[i] < vals[k] + 1e-6 * abs(vals[k])]
    if rivals:
        raise RuntimeError("several competing minima: pick another test problem")
    return float(res.x)


def build(case):
    dn = Dense(case)
    failures = []

    def check(ok, what):
        if not ok:
            failures.append(what)

    out = {
        "name": case["name"],
        "m": dn.m,
        "p": dn.p,
        "q": dn.q,
        "a": case["a"].tolist(),
        "d": case["d"].tolist(),
        "sigma": case["sigma"].tolist(),
        "penalty": case["penalty"].tolist(),
        "truth_not_checked": case["truth"].tolist(),
    }

    x_gcv = minimise(dn.gcv)
    x_ks = minimise(lambda lam: dn.evidence(lam, "known-sigma"))
    x_ps = minimise(lambda lam: dn.evidence(lam, "profiled-scale"))
    x_lc = minimise(lambda lam: -dn.curvature(lam), lo=-8.0, hi=4.0)
    target = TAU**2 * dn.mp
    x_dp = so.brentq(lambda x: dn.chi2(10.0**x) - target, -10.0, 6.0, xtol=1e-14, rtol=1e-15)

    # Solutions at a few strengths around the chosen ones.
    sols = []
    for lam in sorted({10.0**x_gcv, 10.0**x_ks, 10.0**x_dp, 10.0 ** (x_gcv - 1.0), 10.0 ** (x_gcv + 1.5)}):
        mm = dn.normal_matrix(lam)
        c = dn.solve(lam)
        c_qr = dn.solve_qr(lam)
        err = np.linalg.norm(c - c_qr) / np.linalg.norm(c_qr)
        check(err < 1e-11, f"{case['name']}: normal equations vs QR at lam={lam}: {err:.2e}")
        h = dn.hat(lam)
        cov = np.linalg.inv(mm)
        res = cov @ (dn.aw.T @ dn.aw)
        fitted = case["a"] @ c
        sols.append({
            "lambda": lam,
            "coefficients": c.tolist(),
            "fitted": fitted.tolist(),
            "residuals": (case["d"] - fitted).tolist(),
            "effective_parameters": float(np.trace(h)),
            "leverages": np.diag(h).tolist(),
            "chi_square": dn.chi2(lam),
            "penalty_norm2": float(np.sum((dn.l * c) ** 2)),
            "covariance": cov.tolist(),
            "resolution": res.tolist(),
            "condition_of_normal_matrix": float(np.linalg.cond(mm)),
            "normal_vs_qr_relative_difference": float(err),
        })
    out["solutions"] = sols

    grid = [10.0**x for x in np.linspace(-7.0, 3.0, 41)]
    out["gcv"] = {"lambda": grid, "value": [dn.gcv(l) for l in grid], "argmin": 10.0**x_gcv}
    for kind, xk in (("known-sigma", x_ks), ("profiled-scale", x_ps)):
        out[f"evidence_{kind.replace('-', '_')}"] = {
            "lambda": grid, "value": [dn.evidence(l, kind) for l in grid], "argmin": 10.0**xk,
        }
    lgrid = [10.0**x for x in np.linspace(-6.0, 2.0, 17)]
    kap = [dn.curvature(l) for l in lgrid]
    kap_fd = [dn.curvature_fd(l) for l in lgrid]
    for l, k1, k2 in zip(lgrid, kap, kap_fd):
        check(abs(k1 - k2) < 1e-4 * (1 + abs(k1)), f"{case['name']}: curvature vs FD at {l}: {k1} {k2}")
    out["lcurve"] = {"lambda": lgrid, "curvature": kap, "argmax": 10.0**x_lc}
    out["discrepancy"] = {"tau": TAU, "target": target, "lambda": 10.0**x_dp}
    check(abs(dn.chi2(10.0**x_dp) - target) < 1e-10 * target, "discrepancy root")
    return out, failures


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--out", type=Path, default=DEFAULT_OUT)
    args = ap.parse_args()
    cases = [
        make_case("overdetermined-constant", m=12, p=10, q=1, seed=11),
        make_case("underdetermined-constant-and-slope", m=8, p=14, q=2, seed=23),
    ]
    doc = {
        "generator": "scripts/tikhonov_reference.py",
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "convention": "lambda multiplies ||L c||^2 (docs/method.md section 2); W = diag(1/sigma)",
        "cases": [],
    }
    failures = []
    for case in cases:
        out, f = build(case)
        doc["cases"].append(out)
        failures += f
    if failures:
        for f in failures:
            print("FAILED:", f, file=sys.stderr)
        return 1
    args.out.parent.mkdir(parents=True, exist_ok=True)
    tmp = args.out.with_suffix(".json.tmp")
    tmp.write_text(json.dumps(doc, indent=1) + "\n")
    tmp.replace(args.out)
    for c in doc["cases"]:
        print(
            f"{c['name']}: gcv {c['gcv']['argmin']:.6g}, evidence(known) "
            f"{c['evidence_known_sigma']['argmin']:.6g}, evidence(profiled) "
            f"{c['evidence_profiled_scale']['argmin']:.6g}, discrepancy {c['discrepancy']['lambda']:.6g}, "
            f"lcurve {c['lcurve']['argmax']:.6g}; cond(M) "
            + ", ".join(f"{s['condition_of_normal_matrix']:.1e}" for s in c["solutions"])
        )
    print(f"wrote {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
