#!/usr/bin/env python3
"""Independent finite-element reference for the edgetherm forward model.

Regenerates the test fixtures under ``tests/fixtures/fem/``: one directory per
case holding ``plate.toml``, ``sensors.csv``, ``truth.csv`` (cases with unknown
edges), ``expected.csv`` (the reference temperature at every sensor), any fixed
edge profile CSV, and a ``README.md``. The formats are those of docs/case-files.md. The Rust series model is checked against ``expected.csv``.

How to run (from the repository root; about 1.5 minutes and 2.6 GB of memory
on 2 cores):

    python3 -m pip install -r scripts/requirements-fixtures.txt
    python3 scripts/fem_fixtures.py                 # (re)writes tests/fixtures/fem/
    python3 scripts/fem_fixtures.py --out /tmp/fem  # writes somewhere else
    python3 scripts/fem_fixtures.py --case si-units # one case only

Exit status 0 when every check passed; 1 when a verification or an error bound
failed, in which case nothing is written.

Problem. Steady conduction with constant conductivity on the rectangle
0 < x < W, 0 < y < H (origin at the bottom-left corner): Laplace's equation
    -div grad T = 0,
with T = g on fixed edges (a constant or a piecewise-linear profile) and on
unknown edges (held at their truth profile, piecewise linear through the rows
of truth.csv, exactly as the Rust `simulate` command treats them), and
dT/dn = 0 on insulated edges (the natural boundary condition of the weak form
    find T in g + V0:  integral grad T . grad v dA = 0  for all v in V0).

Discretisation. Continuous Lagrange triangles (scikit-fem; Gustafsson &
McBain, "scikit-fem: A Python package for finite element assembly", JOSS 5(52)
2369, 2020) of degree 4, with degree 3 on the same mesh as the companion
solution. The base mesh is a tensor grid whose lines pass through every
profile knot, so each boundary facet carries linear data and the nodal
interpolant of the piecewise-linear Dirichlet data is exact. The mesh is then
refined (red-green-blue) toward the points where the solution is singular: the
four corners (a jump between two fixed edges, or a fixed edge meeting an
insulated one) and every profile knot (a kink in the data). An element is
refined while its distance to such a point is below ALPHA times its size, so
the element size grows in proportion to the distance (graded meshes of this
kind restore the optimal rate near corner singularities: Babuska, Kellogg &
Pitkaranta, Numer. Math. 33 (1979) 447-471, recalled from memory).

Corner values. Where two Dirichlet edges meet with different limits (a
temperature jump), the corner node takes the mean of the two limits; where
they agree, that common value. A Dirichlet edge meeting an insulated edge gives
the corner its Dirichlet value. The corner value affects only the first ring
of elements and has no effect on interior points in the limit.

Error estimate. At every evaluation point the reported value is the degree-4
solution and its estimated error is |T_P4 - T_P3| (the error of the degree-3
solution, an upper estimate for degree 4 on the same mesh; common practice for
p-hierarchical estimates). The script fails if any estimate exceeds
TOLERANCE x (boundary temperature range). The estimator itself is checked
first on two verification problems with series solutions (separation of
variables; the constant-edge series is Incropera et al., Fundamentals of Heat
and Mass Transfer, eq. 4.19; the sine/cosine coefficients of piecewise-linear
data are derived below by integration by parts): the true error of the
degree-4 values must stay below the tolerance and below the largest estimate.
One fixture case (insulated-sides) has the same series solution and is checked
against it too.

Sensors. A 12 x 8 grid spanning [m, W - m] x [m, H - m] with m = 2 % of the
width W (so it includes points exactly 2 % from an edge and from two edges near
each corner), plus six deep points.

Everything is deterministic: no random numbers; profiles are sampled from
fixed smooth functions and rounded, and the rounded values written to the
files are the ones the finite-element model uses.
"""

from __future__ import annotations

import argparse
import math
import os
import platform
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np
import scipy
import scipy.sparse.linalg as sla
import skfem
from scipy.spatial import cKDTree
from skfem import Basis, ElementTriP3, ElementTriP4, MeshTri, asm, condense
from skfem.models.poisson import laplace

# ---------------------------------------------------------------------------
# Accuracy and mesh parameters
# ---------------------------------------------------------------------------

#: Largest allowed estimated error, as a fraction of the boundary temperature
#: range (the Rust tests compare to 1e-4 of the range; the reference must be
#: two orders of magnitude better).
TOLERANCE = 1e-6
#: Sensor margin from every edge, as a fraction of the plate width.
MARGIN = 0.02
#: Base tensor-grid spacing, as a fraction of min(width, height).
BASE_SPACING = 1.0 / 6.0
#: Grading toward corners: refine while distance < ALPHA_CORNER * element size
#: (element size = longest edge) ...
ALPHA_CORNER = 8.0
#: ... down to this element size (fraction of the width). The nearest sensor
#: is 0.028 W from a corner, 280 times farther; 1e-3 was measurably too coarse
#: on the series check with corner jumps, 1e-6 gave the same results as 1e-4.
HSTOP_CORNER = 1e-4
#: Grading toward profile knots (kinks of the boundary data). ALPHA_KNOT also
#: sets the element size over most of the plate near a profiled edge; 3 left
#: only a factor 1 of margin on the estimate, 4 leaves about 3.
ALPHA_KNOT = 4.0
HSTOP_KNOT = 1e-3
#: Series terms for the verification problems (the tail is below 1e-16 of the
#: data at 2 % of the width from the edge: exp(-pi * 4000 * 0.02) ~ 1e-109).
SERIES_TERMS = 4000

SIDES = ("bottom", "top", "left", "right")


# ---------------------------------------------------------------------------
# Case description
# ---------------------------------------------------------------------------


@dataclass
class Edge:
    """One edge: condition and, for fixed/unknown edges, its data.

    ``knots``/``values`` give a piecewise-linear profile (positions measured
    from the edge's lower coordinate: x on bottom/top, y on left/right);
    ``constant`` a uniform temperature. An unknown edge carries its truth
    profile in ``knots``/``values``.
    """

    condition: str  # "fixed" | "insulated" | "unknown"
    constant: float | None = None
    knots: np.ndarray | None = None
    values: np.ndarray | None = None
    profile_file: str | None = None  # fixed profile: CSV file name

    @property
    def dirichlet(self) -> bool:
        return self.condition in ("fixed", "unknown")

    def at(self, pos: np.ndarray) -> np.ndarray:
        """Boundary temperature at positions along the edge."""
        if self.constant is not None:
            return np.full(np.shape(pos), self.constant, dtype=float)
        return np.interp(pos, self.knots, self.values)

    def data_values(self) -> np.ndarray:
        if self.constant is not None:
            return np.array([self.constant])
        return np.asarray(self.values)


@dataclass
class Case:
    name: str
    description: str
    width: float
    height: float
    length_unit: str
    temperature_unit: str
    edges: dict[str, Edge]
    pos_decimals: int  # decimals for sensor coordinates
    deep_points: list[tuple[float, float]] = field(default_factory=list)
    exact: Callable[[np.ndarray, np.ndarray], np.ndarray] | None = None  # verification only

    def edge_length(self, side: str) -> float:
        return self.width if side in ("bottom", "top") else self.height

    def temperature_range(self) -> float:
        vals = np.concatenate([e.data_values() for e in self.edges.values() if e.dirichlet])
        return float(vals.max() - vals.min())

    def data_bounds(self) -> tuple[float, float]:
        vals = np.concatenate([e.data_values() for e in self.edges.values() if e.dirichlet])
        return float(vals.min()), float(vals.max())


def sampled_profile(length: float, n_knots: int, func: Callable[[np.ndarray], np.ndarray],
                    pos_decimals: int, temp_decimals: int = 3) -> tuple[np.ndarray, np.ndarray]:
    """Knots equally spaced over [0, length], values of ``func(position / length)``.

    Both are rounded to the decimals written to file, so the model uses exactly
    the numbers in the fixture.
    """
    pos = np.round(length * np.arange(n_knots) / (n_knots - 1), pos_decimals)
    pos[0], pos[-1] = 0.0, length
    vals = np.round(func(pos / length), temp_decimals)
    return pos, vals


def gauss(xi: np.ndarray, centre: float, width: float) -> np.ndarray:
    return np.exp(-(((xi - centre) / width) ** 2))


def sensor_points(case: Case) -> tuple[list[str], np.ndarray, np.ndarray]:
    """12 x 8 grid from 2 % of the width off every edge, plus the deep points."""
    d = case.pos_decimals
    m = round(MARGIN * case.width, d)
    xs = np.round(np.linspace(m, case.width - m, 12), d)
    ys = np.round(np.linspace(m, case.height - m, 8), d)
    xs[0], xs[-1], ys[0], ys[-1] = m, round(case.width - m, d), m, round(case.height - m, d)
    gx, gy = np.meshgrid(xs, ys)
    px, py = list(gx.ravel()), list(gy.ravel())
    for fx, fy in case.deep_points:
        px.append(round(fx * case.width, d))
        py.append(round(fy * case.height, d))
    px, py = np.array(px), np.array(py)
    # Every point must be at least the margin away from every edge.
    gap = np.minimum.reduce([px, case.width - px, py, case.height - py])
    assert gap.min() >= m - 1e-12 * case.width, f"{case.name}: sensor closer than 2 % to an edge"
    ids = [f"P{i + 1:03d}" for i in range(len(px))]
    return ids, px, py


# ---------------------------------------------------------------------------
# The fixture cases (dimensions, temperatures and scenarios invented)
# ---------------------------------------------------------------------------


def build_cases() -> list[Case]:
    cases = []

    # a. Rib of a battery cold plate: the bottom face rests on a cell row
    #    (hidden, with a warm cell), the top face on the coolant channel.
    w, h = 143.0, 52.5
    k, v = sampled_profile(
        w, 41,
        lambda s: (35.8 + 4.3 * s + 15.6 * gauss(s, 0.615, 0.085)
                   + 0.9 * np.sin(2 * np.pi * 1.3 * s + 0.4)),
        pos_decimals=4)
    cases.append(Case(
        name="insulated-sides",
        description=("An aluminium rib of a battery cold plate, 143.0 x 52.5 mm (lengths in mm, "
                     "temperatures in degC): "
                     "the bottom edge (unknown; truth with a warm bump near x = 88 mm, 41 knots) "
                     "rests on a cell row, the top edge is held at 24.35 degC by the coolant "
                     "channel, both ends are insulated"),
        width=w, height=h, length_unit="mm", temperature_unit="C",
        edges={"bottom": Edge("unknown", knots=k, values=v),
               "top": Edge("fixed", constant=24.35),
               "left": Edge("insulated"),
               "right": Edge("insulated")},
        pos_decimals=4,
        deep_points=[(0.5, 0.5), (0.615, 0.3), (0.25, 0.4), (0.8, 0.65), (0.4, 0.75), (0.615, 0.55)],
        # This case also has a series solution: checked against it as well.
        exact=lambda x, y, w=w, h=h, k=k, v=v: series_insulated_sides(w, h, k, v, 24.35, x, y)))

    # b. Busbar clamp: bottom face on the busbar, left end bolted to a bracket,
    #    right end free, top face against a cooling pad with a measured profile.
    w, h = 118.4, 46.0
    k, v = sampled_profile(
        w, 33,
        lambda s: 31.8 + 2.2 * s - 4.6 * gauss(s, 0.35, 0.14) + 0.6 * np.cos(3 * np.pi * s),
        pos_decimals=4)
    cases.append(Case(
        name="fixed-profile",
        description=("A copper busbar clamp, 118.4 x 46.0 mm (lengths in mm, temperatures in "
                     "degC): the top edge is fixed at the profile in top-profile.csv (a cooling "
                     "pad, 33 knots), the bottom edge at 58.7 degC (the busbar), the left edge at "
                     "44.15 degC (a bolted bracket), the right edge is insulated"),
        width=w, height=h, length_unit="mm", temperature_unit="C",
        edges={"bottom": Edge("fixed", constant=58.7),
               "top": Edge("fixed", knots=k, values=v, profile_file="top-profile.csv"),
               "left": Edge("fixed", constant=44.15),
               "right": Edge("insulated")},
        pos_decimals=4,
        deep_points=[(0.5, 0.5), (0.35, 0.7), (0.2, 0.3), (0.75, 0.45), (0.6, 0.2), (0.9, 0.8)]))

    # c. Corner of a mould insert: heater channels behind the bottom and left
    #    faces (both hidden), coolant on top, a clamp on the right.
    w, h = 87.5, 62.5
    kb, vb = sampled_profile(
        w, 36, lambda s: 47.9 + 12.4 * gauss(s, 0.42, 0.12) - 7.5 * s + 1.1 * np.sin(np.pi * s),
        pos_decimals=4)
    kl, vl = sampled_profile(
        h, 26, lambda s: 47.9 - 9.1 * s + 6.2 * gauss(s, 0.55, 0.16), pos_decimals=4)
    assert vb[0] == vl[0], "two-unknown: the truths should meet at the bottom-left corner"
    cases.append(Case(
        name="two-unknown",
        description=("The corner of a mould insert, 87.5 x 62.5 mm (lengths in mm, temperatures "
                     "in degC), with two hidden edges: the bottom (truth with a hot zone near "
                     "x = 37 mm, 36 knots) and the left (truth with a bump near y = 33 mm, 26 "
                     "knots), both meeting at 47.9 degC in their shared corner; the top edge is "
                     "fixed at 26.45 degC and the right edge at 33.8 degC"),
        width=w, height=h, length_unit="mm", temperature_unit="C",
        edges={"bottom": Edge("unknown", knots=kb, values=vb),
               "top": Edge("fixed", constant=26.45),
               "left": Edge("unknown", knots=kl, values=vl),
               "right": Edge("fixed", constant=33.8)},
        pos_decimals=4,
        deep_points=[(0.5, 0.5), (0.42, 0.25), (0.25, 0.55), (0.7, 0.7), (0.3, 0.85), (0.85, 0.3)]))

    # d. Root of a cooling fin in SI units: the root edge (bottom) is hidden.
    w, h = 0.184, 0.046
    k, v = sampled_profile(
        w, 41,
        lambda s: 331.4 + 9.7 * gauss(s, 0.27, 0.1) + 4.2 * gauss(s, 0.71, 0.07) - 3.0 * s,
        pos_decimals=7)
    cases.append(Case(
        name="si-units",
        description=("A steel fin root, 0.184 x 0.046 m (lengths in m, temperatures in K): the "
                     "bottom edge is unknown (truth with two warm spots near x = 0.050 m and "
                     "0.131 m, 41 knots), the top edge is fixed at 298.85 K, the left edge at "
                     "322.6 K, the right edge is insulated"),
        width=w, height=h, length_unit="m", temperature_unit="K",
        edges={"bottom": Edge("unknown", knots=k, values=v),
               "top": Edge("fixed", constant=298.85),
               "left": Edge("fixed", constant=322.6),
               "right": Edge("insulated")},
        pos_decimals=7,
        deep_points=[(0.5, 0.5), (0.27, 0.3), (0.71, 0.3), (0.15, 0.6), (0.9, 0.5), (0.5, 0.8)]))

    # e. Platen of a heat-sealing bar in inches and degF: the heater side (top)
    #    is hidden, the base is water-cooled, the right end clamped, the left
    #    end free.
    w, h = 5.5, 2.125
    k, v = sampled_profile(
        w, 45,
        lambda s: 171.5 + 18.4 * gauss(s, 0.47, 0.16) - 6.3 * s + 2.1 * np.sin(5.2 * s),
        pos_decimals=5)
    cases.append(Case(
        name="inch-fahrenheit",
        description=("The platen of a heat-sealing bar, 5.5 x 2.125 in (lengths in inches, "
                     "temperatures in degF): the top edge is unknown (it faces the heater; truth "
                     "peaking near x = 2.5 in, 45 knots), the bottom edge is fixed at 78.8 degF "
                     "(water-cooled base), the right edge at 95.3 degF (a clamp), the left edge "
                     "is insulated"),
        width=w, height=h, length_unit="in", temperature_unit="F",
        edges={"bottom": Edge("fixed", constant=78.8),
               "top": Edge("unknown", knots=k, values=v),
               "left": Edge("insulated"),
               "right": Edge("fixed", constant=95.3)},
        pos_decimals=5,
        deep_points=[(0.5, 0.5), (0.47, 0.7), (0.2, 0.4), (0.8, 0.6), (0.35, 0.2), (0.65, 0.85)]))
    return cases


# ---------------------------------------------------------------------------
# Verification problems with series solutions
# ---------------------------------------------------------------------------


def sinh_ratio(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """sinh(a) / sinh(b) for 0 <= a <= b, in overflow-safe exponential form."""
    return np.exp(a - b) * (-np.expm1(-2.0 * a)) / (-np.expm1(-2.0 * b))


def series_dirichlet(W, H, knots, vals, top, x, y):
    """All edges Dirichlet: bottom piecewise linear f, top constant, sides 0.

    T = sum_n [b_n sinh(k(H-y))/sinh(kH) + c_n sinh(ky)/sinh(kH)] sin(kx),
    k = n pi / W (separation of variables). For the constant top,
    c_n = 2 top (1 - (-1)^n)/(n pi) (Incropera et al., eq. 4.19). For f,
    integrating by parts twice (derived here):
        int_0^W f sin(kx) dx = (f(0) - (-1)^n f(W))/k - (1/k^2) sum_j ds_j sin(k x_j)
    with ds_j the slope increase at interior knot x_j; b_n = (2/W) * that.
    Jumps at all four corners (f(0), f(W), top differ from 0) are included.
    """
    n = np.arange(1, SERIES_TERMS + 1, dtype=float)
    k = n * np.pi / W
    slopes = np.diff(vals) / np.diff(knots)
    ds = np.diff(slopes)
    integ = (vals[0] - (-1.0) ** n * vals[-1]) / k - (np.sin(np.outer(k, knots[1:-1])) @ ds) / k**2
    b = 2.0 / W * integ
    c = 2.0 * top * (1.0 - (-1.0) ** n) / (n * np.pi)
    kx = np.outer(k, x)
    s = np.sin(kx)
    rb = sinh_ratio(np.outer(k, H - y), np.outer(k, np.full_like(y, H)))
    rt = sinh_ratio(np.outer(k, y), np.outer(k, np.full_like(y, H)))
    return (b[:, None] * s * rb + c[:, None] * s * rt).sum(axis=0)


def series_insulated_sides(W, H, knots, vals, top, x, y):
    """Bottom piecewise linear f, top constant, both sides insulated.

    T = A_0 (1 - y/H) + top y/H + sum_n A_n cos(kx) sinh(k(H-y))/sinh(kH),
    A_0 = mean of f, A_n = (2/W) int f cos(kx) dx with (derived here)
        int_0^W f cos(kx) dx = -(1/k^2) sum_i s_i (cos(k x_i) - cos(k x_{i+1}))
    over the pieces [x_i, x_{i+1}] of slope s_i.
    """
    n = np.arange(1, SERIES_TERMS + 1, dtype=float)
    k = n * np.pi / W
    slopes = np.diff(vals) / np.diff(knots)
    a0 = np.sum(np.diff(knots) * 0.5 * (vals[:-1] + vals[1:])) / W
    ck = np.cos(np.outer(k, knots))
    integ = -((ck[:, :-1] - ck[:, 1:]) @ slopes) / k**2
    a = 2.0 / W * integ
    r = sinh_ratio(np.outer(k, H - y), np.outer(k, np.full_like(y, H)))
    return a0 * (1 - y / H) + top * y / H + (a[:, None] * np.cos(np.outer(k, x)) * r).sum(axis=0)


def build_verifications() -> list[Case]:
    out = []
    w, h = 2.6, 1.1
    k, v = sampled_profile(w, 41, lambda s: 0.55 + 0.3 * np.sin(7.0 * s) + 0.25 * gauss(s, 0.6, 0.08)
                           - 0.2 * s, pos_decimals=6)
    top = 0.8
    out.append(Case(
        name="verify-dirichlet", description="series check, jumps at all four corners",
        width=w, height=h, length_unit="-", temperature_unit="-",
        edges={"bottom": Edge("fixed", knots=k, values=v), "top": Edge("fixed", constant=top),
               "left": Edge("fixed", constant=0.0), "right": Edge("fixed", constant=0.0)},
        pos_decimals=6, deep_points=[(0.5, 0.5), (0.6, 0.3)],
        exact=lambda x, y, k=k, v=v: series_dirichlet(w, h, k, v, top, x, y)))
    w2, h2 = 2.2, 0.9
    k2, v2 = sampled_profile(w2, 41, lambda s: 0.3 + 0.5 * gauss(s, 0.35, 0.1) + 0.15 * np.cos(9.0 * s)
                             + 0.3 * s, pos_decimals=6)
    top2 = -0.4
    out.append(Case(
        name="verify-insulated", description="series check, insulated sides",
        width=w2, height=h2, length_unit="-", temperature_unit="-",
        edges={"bottom": Edge("fixed", knots=k2, values=v2), "top": Edge("fixed", constant=top2),
               "left": Edge("insulated"), "right": Edge("insulated")},
        pos_decimals=6, deep_points=[(0.5, 0.5), (0.35, 0.3)],
        exact=lambda x, y, k=k2, v=v2: series_insulated_sides(w2, h2, k, v, top2, x, y)))
    return out


# ---------------------------------------------------------------------------
# Finite elements
# ---------------------------------------------------------------------------


def grid_lines(length: float, breaks: list[float], spacing: float) -> np.ndarray:
    """Coordinates from 0 to length through every break, no gap above spacing."""
    bs = np.unique(np.concatenate([[0.0, length], np.asarray(breaks, dtype=float)]))
    out = [0.0]
    for a, b in zip(bs[:-1], bs[1:]):
        n = max(1, math.ceil((b - a) / spacing - 1e-9))
        out.extend(a + (b - a) * np.arange(1, n + 1) / n)
        out[-1] = b
    return np.array(out)


def build_mesh(case: Case) -> MeshTri:
    """Tensor grid through all knots, then graded refinement toward singular points."""
    W, H = case.width, case.height
    xbreaks, ybreaks, knot_pts = [], [], []
    for side, e in case.edges.items():
        if e.knots is None:
            continue
        interior = e.knots[1:-1]
        if side in ("bottom", "top"):
            xbreaks.extend(interior)
            yy = 0.0 if side == "bottom" else H
            knot_pts.extend((p, yy) for p in interior)
        else:
            ybreaks.extend(interior)
            xx = 0.0 if side == "left" else W
            knot_pts.extend((xx, p) for p in interior)
    spacing = BASE_SPACING * min(W, H)
    m = MeshTri.init_tensor(grid_lines(W, xbreaks, spacing), grid_lines(H, ybreaks, spacing))
    corners = cKDTree(np.array([[0.0, 0.0], [W, 0.0], [0.0, H], [W, H]]))
    knots = cKDTree(np.array(knot_pts)) if knot_pts else None
    hstop_c, hstop_k = HSTOP_CORNER * W, HSTOP_KNOT * W
    while True:
        pts = m.p[:, m.t]  # (2, 3, nelems)
        size = np.max(np.linalg.norm(pts - np.roll(pts, 1, axis=1), axis=0), axis=0)
        centre = pts.mean(axis=1).T
        dc, _ = corners.query(centre)
        mark = (dc < ALPHA_CORNER * size) & (size > hstop_c)
        if knots is not None:
            dk, _ = knots.query(centre)
            mark |= (dk < ALPHA_KNOT * size) & (size > hstop_k)
        idx = np.nonzero(mark)[0]
        if idx.size == 0:
            return m
        m = m.refined(idx)


def dirichlet_values(case: Case, xy: np.ndarray) -> np.ndarray:
    """Boundary data at boundary nodes; the mean of the two limits at a corner
    shared by two Dirichlet edges (see the module doc)."""
    W, H = case.width, case.height
    tol = 1e-9 * max(W, H)
    x, y = xy
    total = np.zeros(xy.shape[1])
    count = np.zeros(xy.shape[1])
    for side, e in case.edges.items():
        if not e.dirichlet:
            continue
        on = {"bottom": np.abs(y) < tol, "top": np.abs(y - H) < tol,
              "left": np.abs(x) < tol, "right": np.abs(x - W) < tol}[side]
        pos = x[on] if side in ("bottom", "top") else y[on]
        total[on] += e.at(pos)
        count[on] += 1
    assert count.min() >= 1, "a Dirichlet node lies on no Dirichlet edge"
    return total / count


def solve_fem(case: Case, mesh: MeshTri, element, px: np.ndarray, py: np.ndarray):
    """Galerkin solution of the Laplace problem; values at (px, py) and DOF count."""
    W, H = case.width, case.height
    tol = 1e-9 * max(W, H)
    basis = Basis(mesh, element)
    A = asm(laplace, basis)
    tests = {"bottom": lambda p: np.abs(p[1]) < tol, "top": lambda p: np.abs(p[1] - H) < tol,
             "left": lambda p: np.abs(p[0]) < tol, "right": lambda p: np.abs(p[0] - W) < tol}
    facets = np.concatenate([mesh.facets_satisfying(tests[s], boundaries_only=True)
                             for s, e in case.edges.items() if e.dirichlet])
    D = np.unique(basis.get_dofs(facets).all())
    u = np.zeros(basis.N)
    u[D] = dirichlet_values(case, basis.doflocs[:, D])
    Ac, bc, _, I = condense(A, x=u, D=D)
    # Symmetric positive definite system: symmetric-mode sparse LU with a
    # minimum-degree ordering on A + A^T (SuperLU).
    lu = sla.splu(Ac.tocsc(), permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0,
                  options={"SymmetricMode": True})
    u[I] = lu.solve(bc)
    residual = np.abs(Ac @ u[I] - bc).max() / max(np.abs(bc).max(), 1e-300)
    assert residual < 1e-10, f"{case.name}: linear solve residual {residual:.1e}"
    values = basis.probes(np.vstack([px, py])) @ u
    return values, basis.N


@dataclass
class Result:
    ids: list[str]
    px: np.ndarray
    py: np.ndarray
    values: np.ndarray  # degree 4
    estimate: np.ndarray  # |P4 - P3|
    ndofs: int
    nelements: int
    seconds: float


def run_case(case: Case) -> Result:
    t0 = time.perf_counter()
    ids, px, py = sensor_points(case)
    mesh = build_mesh(case)
    u3, _ = solve_fem(case, mesh, ElementTriP3(), px, py)
    u4, n4 = solve_fem(case, mesh, ElementTriP4(), px, py)
    return Result(ids, px, py, u4, np.abs(u4 - u3), n4, mesh.nelements, time.perf_counter() - t0)


# ---------------------------------------------------------------------------
# Output
# ---------------------------------------------------------------------------


def num(x: float) -> str:
    """Shortest decimal that round-trips (values are pre-rounded), e.g. 2.86."""
    return repr(float(x))


def write_atomic(path: Path, text: str) -> None:
    tmp = path.with_name(path.name + ".tmp")
    tmp.write_text(text, encoding="utf-8", newline="\n")
    os.replace(tmp, path)


def versions() -> str:
    return (f"scikit-fem {skfem.__version__}, numpy {np.__version__}, scipy {scipy.__version__}, "
            f"Python {platform.python_version()}")


def corner_jumps(case: Case) -> list[tuple[str, float, float]]:
    """Corners where two Dirichlet edges meet with different limits."""
    out = []
    for vert, horiz in (("bottom", "left"), ("bottom", "right"), ("top", "left"), ("top", "right")):
        ev, eh = case.edges[vert], case.edges[horiz]
        if not (ev.dirichlet and eh.dirichlet):
            continue
        a = float(ev.at(0.0 if horiz == "left" else case.width))
        b = float(eh.at(0.0 if vert == "bottom" else case.height))
        if a != b:
            out.append((f"{vert}-{horiz}", a, b))
    return out


def write_case(case: Case, res: Result, root: Path) -> list[Path]:
    d = root / case.name
    d.mkdir(parents=True, exist_ok=True)
    written = []

    toml = ["[plate]",
            f"width = {num(case.width)}",
            f"height = {num(case.height)}",
            f'length_unit = "{case.length_unit}"',
            f'temperature_unit = "{case.temperature_unit}"']
    for side in SIDES:
        e = case.edges[side]
        toml += ["", f"[edges.{side}]", f'condition = "{e.condition}"']
        if e.condition == "fixed" and e.constant is not None:
            toml.append(f"temperature = {num(e.constant)}")
        elif e.condition == "fixed":
            toml.append(f'profile = "{e.profile_file}"')
    write_atomic(d / "plate.toml", "\n".join(toml) + "\n")
    written.append(d / "plate.toml")

    for side in SIDES:
        e = case.edges[side]
        if e.condition == "fixed" and e.profile_file:
            rows = ["position,temperature"] + [f"{num(p)},{num(t)}" for p, t in zip(e.knots, e.values)]
            write_atomic(d / e.profile_file, "\n".join(rows) + "\n")
            written.append(d / e.profile_file)

    unknown = [s for s in SIDES if case.edges[s].condition == "unknown"]
    if unknown:
        rows = ["edge,position,temperature"]
        for s in unknown:
            e = case.edges[s]
            rows += [f"{s},{num(p)},{num(t)}" for p, t in zip(e.knots, e.values)]
        write_atomic(d / "truth.csv", "\n".join(rows) + "\n")
        written.append(d / "truth.csv")

    rows = ["sensor,x,y"] + [f"{i},{num(x)},{num(y)}" for i, x, y in zip(res.ids, res.px, res.py)]
    write_atomic(d / "sensors.csv", "\n".join(rows) + "\n")
    written.append(d / "sensors.csv")

    rows = ["sensor,temperature"] + [f"{i},{t:.12g}" for i, t in zip(res.ids, res.values)]
    write_atomic(d / "expected.csv", "\n".join(rows) + "\n")
    written.append(d / "expected.csv")

    rng = case.temperature_range()
    unit = {"C": "degC", "K": "K", "F": "degF"}[case.temperature_unit]
    jumps = corner_jumps(case)
    if jumps:
        listed = [f"{name} ({a:.6g} vs {b:.6g} {unit})" for name, a, b in jumps]
        listed = listed[0] if len(listed) == 1 else ", ".join(listed[:-1]) + " and " + listed[-1]
        corner_note = (f" The corner node takes the mean of the two limits at the temperature "
                       f"jump{'s' if len(jumps) > 1 else ''} at the {listed} "
                       f"corner{'s' if len(jumps) > 1 else ''}.")
    else:
        corner_note = " No corner has a temperature jump."
    truth_note = ""
    if unknown:
        truth_note = (f" The unknown edge{'s are' if len(unknown) > 1 else ' is'} held at "
                      f"truth.csv (piecewise linear through its rows) for the reference.")
    readme = (
        f"# {case.name}\n\n"
        f"{case.description}.{truth_note} `expected.csv` is the steady (Laplace) temperature at "
        f"the {len(res.ids)} points of `sensors.csv` (a 12 x 8 grid from 2 % of the width off every "
        f"edge, plus deep points), from `scripts/fem_fixtures.py` ({versions()}): degree-4 "
        f"Lagrange triangles on a mesh graded toward the corners and profile knots "
        f"({res.nelements} elements, {res.ndofs} unknowns).{corner_note} Estimated "
        f"discretisation error (|P4 - P3| on the same mesh): at most {res.estimate.max():.1e} "
        f"{unit}, {res.estimate.max() / rng:.1e} of the boundary temperature range "
        f"({rng:.4g} {unit}). Regenerate with `python3 scripts/fem_fixtures.py`; do not edit.\n")
    write_atomic(d / "README.md", readme)
    written.append(d / "README.md")
    return written


# ---------------------------------------------------------------------------
# Main
# ---------------------------------------------------------------------------


def main() -> int:
    repo = Path(__file__).resolve().parent.parent
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--out", type=Path, default=repo / "tests" / "fixtures" / "fem",
                    help="output directory (default: tests/fixtures/fem in the repository)")
    ap.add_argument("--case", action="append", help="only this case (repeatable)")
    args = ap.parse_args()

    t_start = time.perf_counter()
    ok = True
    print(f"edgetherm FEM reference: {versions()}")
    print(f"tolerance: estimated error <= {TOLERANCE:g} x boundary temperature range")

    print("verification against series solutions:")
    for case in build_verifications():
        res = run_case(case)
        exact = case.exact(res.px, res.py)
        true_err = np.abs(res.values - exact)
        rng = case.temperature_range()
        est_max = res.estimate.max()
        passed = true_err.max() <= TOLERANCE * rng and true_err.max() <= est_max \
            and est_max <= TOLERANCE * rng
        ok &= passed
        covered = int(np.sum(true_err <= res.estimate))
        print(f"  {case.name:18s} true error of P4 {true_err.max() / rng:.1e}, "
              f"estimate |P4-P3| {est_max / rng:.1e} (fractions of range; pointwise "
              f"true <= estimate at {covered}/{len(true_err)} points), "
              f"{res.ndofs} dofs, {res.seconds:.1f} s  {'ok' if passed else 'FAIL'}")

    cases = build_cases()
    if args.case:
        unknown = set(args.case) - {c.name for c in cases}
        if unknown:
            print(f"unknown case(s): {', '.join(sorted(unknown))}", file=sys.stderr)
            return 2
        cases = [c for c in cases if c.name in args.case]

    print("fixture cases:")
    results = []
    for case in cases:
        res = run_case(case)
        rng = case.temperature_range()
        lo, hi = case.data_bounds()
        est_max = res.estimate.max()
        worst = int(np.argmax(res.estimate))
        passed = bool(np.all(res.estimate <= TOLERANCE * rng))
        # Maximum principle for harmonic functions (common practice): interior
        # values lie within the range of the Dirichlet data.
        slack = TOLERANCE * rng
        in_range = bool(np.all((res.values >= lo - slack) & (res.values <= hi + slack)))
        passed &= in_range
        series_note = ""
        if case.exact is not None:
            true_err = np.abs(res.values - case.exact(res.px, res.py)).max()
            passed &= bool(true_err <= TOLERANCE * rng)
            series_note = f", series check {true_err / rng:.1e} of range"
        ok &= passed
        unit = case.temperature_unit
        print(f"  {case.name:18s} max estimated error {est_max:.2e} {unit} = {est_max / rng:.1e} of "
              f"range {rng:.4g} {unit} (worst at {res.ids[worst]}), {res.nelements} elements, "
              f"{res.ndofs} dofs{series_note}, {res.seconds:.1f} s  "
              f"{'ok' if passed else 'FAIL' + ('' if in_range else ' (outside data range)')}")
        results.append((case, res))

    elapsed = time.perf_counter() - t_start
    if not ok:
        print(f"FAILED after {elapsed:.0f} s: nothing written", file=sys.stderr)
        return 1
    for case, res in results:
        write_case(case, res, args.out)
    print(f"wrote {len(results)} case(s) to {args.out} in {elapsed:.0f} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
