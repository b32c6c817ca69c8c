#!/usr/bin/env python3
"""Independent finite-element reference for the edgetherm forward model.

Regenerates the test fixtures under ``tests/fixtures/fem/``: one directory per
case holding ``plate.toml``, ``sensors.csv``, ``truth.csv`` (cases with unknown
edges), ``expected.csv`` (the reference temperature at every sensor), any fixed
edge profile CSV, ``heat-flow.csv`` (cases with convective edges) and a
``README.md``. The formats are those of docs/case-files.md (the convective keys
``conductivity``, ``h`` and ``ambient`` as issue 10 fixes them). The Rust series model is checked against ``expected.csv``.

How to run (from the repository root; about 4 minutes and 3.8 GB of memory
on 2 cores, 4.6 minutes with the cores shared with a build; the five cases
without convective edges alone took 1.5 minutes and 2.6 GB):

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
    find T in g + V0:  integral grad T . grad v dA = 0  for all v in V0),
and, on convective (Robin) edges Gc, -k dT/dn = h (T - T_inf) with n the
outward normal, k the conductivity (W/(m K)), h the heat transfer coefficient
(W/(m^2 K)) and T_inf the ambient (heat leaves to the fluid when the edge is
hotter). Integrating by parts, the boundary term -integral dT/dn v ds becomes
integral beta (T - T_inf) v ds with beta = h / k, so the weak form gains
    integral_Gc beta T v ds        on the left (a FacetBasis over the
                                   convective facets, BilinearForm u v), and
    integral_Gc beta T_inf v ds    on the right (LinearForm v),
with beta converted to the case's length unit (h/k is per metre; x 1e-3 per
mm, x 0.0254 per inch). The Robin condition is linear in temperature
differences, so the temperature unit needs no conversion (degF included).
Where a convective edge meets a fixed or unknown edge, the corner node takes
the Dirichlet value; where two convective edges meet, nothing is imposed at
the corner (each Robin term acts on its own facets). The heat flow into the
plate through a convective edge, h times the integral of (T_inf - T) along it
(W per metre of depth, lengths in metres and temperature differences in
kelvin), is computed from the same boundary load vector and written to
heat-flow.csv with its own |P4 - P3| estimate.

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

Robin verification problems (conductivity 1, h = beta, dimensionless), checked
the same way (true error of the degree-4 values and of the heat flows below the
tolerance and below the estimate):
- verify-robin-slab: bottom fixed at T0, sides insulated, top convective:
  T(y) = T0 + (T_inf - T0) (beta y) / (1 + beta H), the plane wall with one
  convective face (Incropera et al., Fundamentals of Heat and Mass Transfer,
  sections 3.1 and 3.4, section numbers recalled from memory: conduction and
  convection resistances in series). T is
  linear, so it lies in both element spaces and both errors are round-off:
  "below the estimate" is then judged against a ROUNDOFF floor; the check is
  that the true error is round-off (a wrong sign or factor in the Robin term
  gives an error of order 1).
- verify-robin-separable: bottom fixed at sin(pi x/W) + 0.35 sin(3 pi x/W),
  sides fixed at 0, top convective with ambient 0:
  T = sum_j A_j sin(k_j x) [k_j cosh(k_j (H-y)) + beta sinh(k_j (H-y))]
                         / [k_j cosh(k_j H) + beta sinh(k_j H)],  k_j = j pi/W
  (derived in robin_decay). Its estimate, 9.2e-7 of the range, is the closest
  to the tolerance of all problems (the true error is 9e-9): the degree-3
  companion resolves the 3 pi/W mode less well on a mesh whose size is set by
  the corner grading.
- verify-robin-corner: left insulated, right and top convective with
  different beta (3.0 and 0.8) and a common ambient Ta, bottom fixed at
  Ta + cos(mu_1 x) - 0.3 cos(mu_2 x), mu_n W the n-th root of xi tan xi =
  beta_right W (brentq): T = Ta + sum_n A_n cos(mu_n x) Y_n(y) with Y_n as
  above with beta_top; it satisfies both Robin conditions up to the corner
  where they meet (derived in build_robin_verifications).

Sensors. A 12 x 8 grid spanning [m, W - m] x [m, H - m] with m = 2 % of the
width W (so it includes points exactly 2 % from an edge and from two edges near
each corner), plus six deep points (eight to ten in the convective cases, with
extra points close to the convective edges and their corners).

Units. convective-corner (mm, K) and convective-side (in, degF) are solved a
second time in metres and kelvin (degree 3, 30 to 50 s together): the values
must agree to UNIT_TOL = 1e-9 of the range (round-off: measured 5e-11), which
checks the conversion of h/k to the case's length unit and the handling of the
ambient in the case's temperature unit (the dimensionless verification
problems cannot).

Maximum principle. Interior values must lie within the range of the Dirichlet
data and the ambients of convective edges (at a boundary maximum on a
convective edge, dT/dn >= 0, so T <= T_inf there), checked for every case.

Everything is deterministic: no random numbers; profiles are sampled from
fixed smooth functions and rounded, and the rounded values written to the
files are the ones the finite-element model uses.
"""

from __future__ import annotations

import argparse
import copy
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
from scipy.optimize import brentq
from scipy.spatial import cKDTree
from skfem import (Basis, BilinearForm, ElementTriP3, ElementTriP4, FacetBasis, LinearForm,
                   MeshTri, asm, condense)
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
#: Metres per case length unit (h is always W/(m^2 K) and conductivity W/(m K),
#: so beta = h / conductivity is per metre and is converted to per length unit).
#: "-" marks the dimensionless verification problems (h and conductivity given
#: directly as beta and 1).
METRES_PER_UNIT = {"m": 1.0, "mm": 1e-3, "in": 0.0254, "-": 1.0}
#: Round-off floor for the verification check "true error <= estimate" when the
#: exact solution lies in both finite-element spaces (the 1-D slab is linear in
#: y): both errors are then round-off, and the check is the size of the true
#: error alone (a wrong sign or factor in the Robin term gives an O(1) error).
ROUNDOFF = 1e-11


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

    condition: str  # "fixed" | "insulated" | "unknown" | "convective"
    constant: float | None = None
    knots: np.ndarray | None = None
    values: np.ndarray | None = None
    profile_file: str | None = None  # fixed profile: CSV file name
    # Convective (Robin) edge: -conductivity dT/dn_out = h (T - ambient).
    h: float | None = None  # W/(m^2 K), always SI
    ambient: float | None = None  # fluid temperature, case temperature unit
    # Verification problems only: a smooth fixed profile T = func(position),
    # with its values on a fine sampling (for the temperature range).
    func: Callable[[np.ndarray], np.ndarray] | None = None
    func_samples: np.ndarray | None = None

    @property
    def dirichlet(self) -> bool:
        return self.condition in ("fixed", "unknown")

    def at(self, pos: np.ndarray) -> np.ndarray:
        """Boundary temperature at positions along the edge."""
        if self.constant is not None:
            return np.full(np.shape(pos), self.constant, dtype=float)
        if self.func is not None:
            return self.func(np.asarray(pos, dtype=float))
        return np.interp(pos, self.knots, self.values)

    def data_values(self) -> np.ndarray:
        if self.condition == "convective":
            return np.array([self.ambient])
        if self.constant is not None:
            return np.array([self.constant])
        if self.func is not None:
            return np.asarray(self.func_samples)
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
    conductivity: float | None = None  # W/(m K); required with a convective edge
    exact_flow: dict[str, float] | None = None  # verification only: heat flows in

    def edge_length(self, side: str) -> float:
        return self.width if side in ("bottom", "top") else self.height

    def beta(self, side: str) -> float:
        """h / conductivity of a convective edge, per case length unit."""
        e = self.edges[side]
        assert e.condition == "convective" and self.conductivity, f"{self.name}: {side}"
        return e.h / self.conductivity * METRES_PER_UNIT[self.length_unit]

    def convective(self) -> list[str]:
        return [s for s in SIDES if self.edges[s].condition == "convective"]

    def temperature_range(self) -> float:
        """Range of the boundary data: Dirichlet values and the ambients of
        convective edges (the bounds of the maximum principle)."""
        lo, hi = self.data_bounds()
        return hi - lo

    def data_bounds(self) -> tuple[float, float]:
        vals = np.concatenate([e.data_values() for e in self.edges.values()
                               if e.dirichlet or e.condition == "convective"])
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

    # Convective (Robin) edges: -conductivity dT/dn_out = h (T - ambient). The
    # deep points add sensors close to the convective edges and their corners.

    # f. Stainless die plate in m and degC: a hidden heater face (bottom), an
    #    air-jet-cooled top face, a heated clamp on the left, a free right end.
    #    Biot number of the top across the plate: h H / k = 780 x 0.042 / 16.2 = 2.02.
    w, h = 0.126, 0.042
    k, v = sampled_profile(
        w, 43,
        lambda s: 148.6 + 31.2 * gauss(s, 0.38, 0.11) - 12.5 * s + 1.4 * np.sin(2 * np.pi * 1.1 * s + 0.3),
        pos_decimals=7)
    cases.append(Case(
        name="convective-top",
        description=("A stainless-steel die plate (conductivity 16.2 W/(m K)), 0.126 x 0.042 m "
                     "(lengths in m, temperatures in degC): the bottom edge is unknown (it faces a "
                     "heater; truth with a hot zone near x = 0.048 m, 43 knots), the top edge is "
                     "convective (an air jet, h = 780 W/(m^2 K), ambient 21.5 degC; Biot number "
                     "h H / k = 2.02), the left edge is fixed at 139.25 degC (a heated clamp), the "
                     "right edge is insulated"),
        width=w, height=h, length_unit="m", temperature_unit="C",
        edges={"bottom": Edge("unknown", knots=k, values=v),
               "top": Edge("convective", h=780.0, ambient=21.5),
               "left": Edge("fixed", constant=139.25),
               "right": Edge("insulated")},
        pos_decimals=7, conductivity=16.2,
        deep_points=[(0.5, 0.5), (0.38, 0.3), (0.38, 0.93), (0.7, 0.93), (0.05, 0.93),
                     (0.97, 0.93), (0.2, 0.6), (0.85, 0.4)]))

    # g. Carbon-steel bracket in mm and K: a hidden weld seam (bottom), a clamp
    #    on the left, and two convective faces meeting at the top-right corner
    #    with different coolants. Biot numbers: top h H / k = 1250 x 0.0575 / 48.5
    #    = 1.48; right h W / k = 340 x 0.074 / 48.5 = 0.52.
    w, h = 74.0, 57.5
    k, v = sampled_profile(
        w, 37,
        lambda s: 402.3 + 27.8 * gauss(s, 0.58, 0.13) + 6.0 * s - 2.2 * np.cos(2.7 * s),
        pos_decimals=4)
    cases.append(Case(
        name="convective-corner",
        description=("A carbon-steel bracket (conductivity 48.5 W/(m K)), 74.0 x 57.5 mm (lengths "
                     "in mm, temperatures in K): the bottom edge is unknown (a weld seam; truth "
                     "with a hot zone near x = 43 mm, 37 knots), the left edge is fixed at 371.65 K "
                     "(a clamp), and two convective edges meet at the top-right corner: the top "
                     "(a water spray, h = 1250 W/(m^2 K), ambient 291.4 K; h H / k = 1.48) and the "
                     "right (an air stream, h = 340 W/(m^2 K), ambient 305.9 K; h W / k = 0.52)"),
        width=w, height=h, length_unit="mm", temperature_unit="K",
        edges={"bottom": Edge("unknown", knots=k, values=v),
               "top": Edge("convective", h=1250.0, ambient=291.4),
               "left": Edge("fixed", constant=371.65),
               "right": Edge("convective", h=340.0, ambient=305.9)},
        pos_decimals=4, conductivity=48.5,
        deep_points=[(0.5, 0.5), (0.58, 0.25), (0.96, 0.96), (0.9, 0.96), (0.96, 0.88),
                     (0.93, 0.93), (0.96, 0.5), (0.96, 0.06), (0.5, 0.96), (0.3, 0.7)]))

    # h. Brass manifold block in inches and degF: a hidden hot face (bottom),
    #    a water channel along the left side (convective, next to the hidden
    #    edge), a free right side and a top held by a chilled plate. Biot number
    #    along the hidden edge: h W / k = 2900 x 0.09525 / 121 = 2.28.
    w, h = 3.75, 2.6
    k, v = sampled_profile(
        w, 39,
        lambda s: 266.0 + 41.5 * gauss(s, 0.3, 0.12) + 14.2 * gauss(s, 0.74, 0.08) - 18.0 * s,
        pos_decimals=5)
    cases.append(Case(
        name="convective-side",
        description=("A brass manifold block (conductivity 121 W/(m K)), 3.75 x 2.6 in (lengths in "
                     "inches, temperatures in degF): the bottom edge is unknown (truth with warm "
                     "zones near x = 1.1 in and 2.8 in, 39 knots), the left edge is convective (a "
                     "water channel, h = 2900 W/(m^2 K), ambient 59.0 degF; h W / k = 2.28 along "
                     "the unknown edge), the right edge is insulated, the top edge is fixed at "
                     "131.8 degF (a chilled plate)"),
        width=w, height=h, length_unit="in", temperature_unit="F",
        edges={"bottom": Edge("unknown", knots=k, values=v),
               "top": Edge("fixed", constant=131.8),
               "left": Edge("convective", h=2900.0, ambient=59.0),
               "right": Edge("insulated")},
        pos_decimals=5, conductivity=121.0,
        deep_points=[(0.5, 0.5), (0.3, 0.25), (0.74, 0.25), (0.03, 0.05), (0.03, 0.5),
                     (0.03, 0.95), (0.06, 0.2), (0.1, 0.75), (0.97, 0.5)]))
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
    out.extend(build_robin_verifications())
    return out


# ---------------------------------------------------------------------------
# Verification problems with convective (Robin) edges and closed forms
# ---------------------------------------------------------------------------


def robin_decay(mu: float, beta: float, H: float, y: np.ndarray) -> np.ndarray:
    """Y(y) with Y'' = mu^2 Y, Y(0) = 1 and the Robin condition -Y'(H) = beta Y(H)
    at the top (derived here):
        Y(y) = [mu cosh(mu (H - y)) + beta sinh(mu (H - y))]
               / [mu cosh(mu H) + beta sinh(mu H)].
    Y(0) = 1 by construction; Y'(y) = -mu [mu sinh(mu (H-y)) + beta cosh(mu (H-y))] / D,
    so -Y'(H) = mu beta / D = beta Y(H). (mu H stays below 5 here: no overflow.)
    """
    d = mu * np.cosh(mu * H) + beta * np.sinh(mu * H)
    return (mu * np.cosh(mu * (H - y)) + beta * np.sinh(mu * (H - y))) / d


def robin_decay_integral(mu: float, beta: float, H: float) -> float:
    """Integral of robin_decay over 0 <= y <= H:
    [sinh(mu H) + beta (cosh(mu H) - 1) / mu] / [mu cosh(mu H) + beta sinh(mu H)]."""
    d = mu * np.cosh(mu * H) + beta * np.sinh(mu * H)
    return float((np.sinh(mu * H) + beta * (np.cosh(mu * H) - 1.0) / mu) / d)


def xi_tan_xi_root(bi: float, n: int) -> float:
    """n-th positive root (n = 1, 2, ...) of xi tan xi = Bi, in ((n-1) pi, (n-1) pi + pi/2),
    by brentq on xi sin xi - Bi cos xi (continuous, opposite signs at the ends)."""
    f = lambda xi: xi * math.sin(xi) - bi * math.cos(xi)
    a, b = (n - 1) * math.pi, (n - 1) * math.pi + math.pi / 2
    return brentq(f, a, b, xtol=1e-15, rtol=4 * np.finfo(float).eps, maxiter=200)


def build_robin_verifications() -> list[Case]:
    """Three problems with closed forms that exercise the Robin terms; in all
    of them the conductivity is 1 and h is the Robin coefficient beta itself
    (dimensionless lengths and temperatures)."""
    out = []

    # 1. One-dimensional slab: bottom fixed at T0, sides insulated, top
    #    convective. T(y) = T0 + (T_inf - T0) (beta y) / (1 + beta H): the plane
    #    wall with one convective face (Incropera et al., Fundamentals of Heat
    #    and Mass Transfer, sections 3.1 and 3.4 (numbers recalled from memory):
    #    a conduction resistance H/k in
    #    series with the convection resistance 1/h). Heat flow into the plate
    #    through the top: beta (T_inf - T0) / (1 + beta H) per unit length of
    #    edge, times W. T is linear in y, so it lies in both finite-element
    #    spaces: the errors are round-off (see ROUNDOFF).
    w, h, t0, tinf, beta = 1.7, 0.8, 0.9, -0.35, 2.5
    out.append(Case(
        name="verify-robin-slab",
        description="1-D slab, top convective (Incropera et al. sections 3.1/3.4)",
        width=w, height=h, length_unit="-", temperature_unit="-",
        edges={"bottom": Edge("fixed", constant=t0), "top": Edge("convective", h=beta, ambient=tinf),
               "left": Edge("insulated"), "right": Edge("insulated")},
        pos_decimals=6, deep_points=[(0.5, 0.5), (0.3, 0.95)], conductivity=1.0,
        exact=lambda x, y, t0=t0, tinf=tinf, beta=beta, h=h: t0 + (tinf - t0) * beta * y / (1.0 + beta * h),
        exact_flow={"top": beta * (tinf - t0) / (1.0 + beta * h) * w}))

    # 2. Separable, two modes: bottom fixed at sum_j A_j sin(k_j x), k_j = j pi / W
    #    (j = 1, 3), sides fixed at 0, top convective with ambient 0. Separation
    #    of variables (derived here):
    #        T = sum_j A_j sin(k_j x) Y_j(y),  Y_j = robin_decay(k_j, beta, H, y).
    #    Heat flow in through the top: -beta sum_j A_j Y_j(H) int_0^W sin(k_j x) dx
    #    = -beta sum_j A_j Y_j(H) 2 / k_j (j odd).
    w, h, beta = 2.4, 1.3, 1.6
    modes = [(1, 1.0), (3, 0.35)]
    kk = [(j * math.pi / w, a) for j, a in modes]
    f_bottom = lambda s, kk=kk: sum(a * np.sin(k * s) for k, a in kk)
    out.append(Case(
        name="verify-robin-separable",
        description="separable, sides 0, top convective (derived closed form)",
        width=w, height=h, length_unit="-", temperature_unit="-",
        edges={"bottom": Edge("fixed", func=f_bottom, func_samples=f_bottom(np.linspace(0, w, 4001))),
               "top": Edge("convective", h=beta, ambient=0.0),
               "left": Edge("fixed", constant=0.0), "right": Edge("fixed", constant=0.0)},
        pos_decimals=6, deep_points=[(0.5, 0.5), (0.5, 0.96), (0.03, 0.96)], conductivity=1.0,
        exact=lambda x, y, kk=kk, beta=beta, h=h: sum(a * np.sin(k * x) * robin_decay(k, beta, h, y)
                                                      for k, a in kk),
        exact_flow={"top": -beta * sum(a * robin_decay(k, beta, h, np.array(h)) * 2.0 / k
                                       for k, a in kk)}))

    # 3. Two convective edges meeting at a corner (different beta, common
    #    ambient Ta): left insulated, right convective (beta_r), top convective
    #    (beta_t), bottom fixed at Ta + sum_n A_n cos(mu_n x), where mu_n W is
    #    the n-th root of xi tan xi = beta_r W (so cos(mu_n x) has zero slope at
    #    x = 0 and -phi'(W) = beta_r phi(W) at x = W). Separation of variables
    #    (derived here):
    #        T = Ta + sum_n A_n cos(mu_n x) Y_n(y),  Y_n = robin_decay(mu_n, beta_t, H, y),
    #    satisfies both Robin conditions, including at the top-right corner
    #    where they meet. Heat flows in: top -beta_t sum A_n Y_n(H) sin(mu_n W) / mu_n;
    #    right -beta_r sum A_n cos(mu_n W) int_0^H Y_n dy.
    w, h, beta_r, beta_t, ta = 1.5, 1.1, 3.0, 0.8, 0.2
    mus = [(xi_tan_xi_root(beta_r * w, n) / w, a) for n, a in ((1, 1.0), (2, -0.3))]
    for mu, _ in mus:
        assert abs(mu * math.tan(mu * w) - beta_r) < 1e-12 * beta_r
    g_bottom = lambda s, mus=mus, ta=ta: ta + sum(a * np.cos(mu * s) for mu, a in mus)
    out.append(Case(
        name="verify-robin-corner",
        description="two convective edges at a corner (derived closed form)",
        width=w, height=h, length_unit="-", temperature_unit="-",
        edges={"bottom": Edge("fixed", func=g_bottom, func_samples=g_bottom(np.linspace(0, w, 4001))),
               "top": Edge("convective", h=beta_t, ambient=ta),
               "left": Edge("insulated"), "right": Edge("convective", h=beta_r, ambient=ta)},
        pos_decimals=6, deep_points=[(0.5, 0.5), (0.97, 0.96), (0.9, 0.9), (0.97, 0.5)],
        conductivity=1.0,
        exact=lambda x, y, mus=mus, ta=ta, beta_t=beta_t, h=h: ta + sum(
            a * np.cos(mu * x) * robin_decay(mu, beta_t, h, y) for mu, a in mus),
        exact_flow={
            "top": -beta_t * sum(a * robin_decay(mu, beta_t, h, np.array(h)) * math.sin(mu * w) / mu
                                 for mu, a in mus),
            "right": -beta_r * sum(a * math.cos(mu * w) * robin_decay_integral(mu, beta_t, h)
                                   for mu, a in mus)}))
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


@BilinearForm
def robin_mass(u, v, _):
    """Boundary mass form: integral over the convective facets of u v ds."""
    return u * v


@LinearForm
def robin_load(v, _):
    """Boundary load form: integral over the convective facets of v ds."""
    return v


def solve_fem(case: Case, mesh: MeshTri, element, px: np.ndarray, py: np.ndarray):
    """Galerkin solution of the Laplace problem.

    Returns the values at (px, py), the DOF count and, per convective edge, the
    integral of T along it (length unit x temperature unit).

    A convective edge adds the Robin terms of the weak form (see the module
    doc): integral (h/k) T v ds to the left side and integral (h/k) T_inf v ds
    to the right side, assembled on a FacetBasis over that edge's facets.
    """
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
    convective = case.convective()
    edge_load = {}
    if convective:
        b = np.zeros(basis.N)
        for side in convective:
            fb = FacetBasis(mesh, element,
                            facets=mesh.facets_satisfying(tests[side], boundaries_only=True))
            beta, ambient = case.beta(side), case.edges[side].ambient
            A = A + beta * asm(robin_mass, fb)
            edge_load[side] = asm(robin_load, fb)
            b += beta * ambient * edge_load[side]
        Ac, bc, _, I = condense(A, b, x=u, D=D)
    else:
        Ac, bc, _, I = condense(A, x=u, D=D)
    # Symmetric positive definite system: symmetric-mode sparse LU with a
    # minimum-degree ordering on A + A^T (SuperLU).
    lu = sla.splu(Ac.tocsc(), permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0,
                  options={"SymmetricMode": True})
    u[I] = lu.solve(bc)
    residual = np.abs(Ac @ u[I] - bc).max() / max(np.abs(bc).max(), 1e-300)
    assert residual < 1e-10, f"{case.name}: linear solve residual {residual:.1e}"
    values = basis.probes(np.vstack([px, py])) @ u
    edge_integrals = {side: float(load @ u) for side, load in edge_load.items()}
    return values, basis.N, edge_integrals


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
    # Per convective edge: heat flow into the plate through it, W per metre of
    # plate depth, and its estimate |P4 - P3|.
    heat_flow: dict[str, tuple[float, float]] = field(default_factory=dict)


#: Kelvin per case temperature unit, for temperature differences.
KELVIN_PER_UNIT = {"C": 1.0, "K": 1.0, "F": 5.0 / 9.0, "-": 1.0}


def heat_flow_into(case: Case, side: str, integral: float) -> float:
    """Heat flow into the plate through a convective edge, W/m of depth:
    h * integral (T_inf - T) ds, with ds in metres and T in kelvin differences
    (the edge's length times T_inf minus the integral of T)."""
    e = case.edges[side]
    length = case.edge_length(side)
    return (e.h * (e.ambient * length - integral) * METRES_PER_UNIT[case.length_unit]
            * KELVIN_PER_UNIT[case.temperature_unit])


def heat_flow_scale(case: Case, side: str) -> float:
    """h x (temperature range) x (edge length), W/m: the size against which a
    convective heat flow's error is judged."""
    return (case.edges[side].h * case.temperature_range() * KELVIN_PER_UNIT[case.temperature_unit]
            * case.edge_length(side) * METRES_PER_UNIT[case.length_unit])


def run_case(case: Case) -> Result:
    t0 = time.perf_counter()
    ids, px, py = sensor_points(case)
    mesh = build_mesh(case)
    u3, _, i3 = solve_fem(case, mesh, ElementTriP3(), px, py)
    u4, n4, i4 = solve_fem(case, mesh, ElementTriP4(), px, py)
    flows = {}
    for side in i4:
        q4, q3 = heat_flow_into(case, side, i4[side]), heat_flow_into(case, side, i3[side])
        flows[side] = (q4, abs(q4 - q3))
    return Result(ids, px, py, u4, np.abs(u4 - u3), n4, mesh.nelements,
                  time.perf_counter() - t0, flows)


def to_kelvin(t: np.ndarray | float, unit: str):
    return {"C": lambda v: v + 273.15, "K": lambda v: v,
            "F": lambda v: (v - 32.0) * 5.0 / 9.0 + 273.15}[unit](t)


#: Convective cases re-solved in metres and kelvin (see unit_check).
UNIT_CHECK_CASES = ("convective-corner", "convective-side")
#: Largest allowed difference between the two, as a fraction of the range. The
#: difference is round-off of two large linear solves on meshes that are equal
#: only up to rounding (measured 4.8e-11 and 8.5e-12; ROUNDOFF = 1e-11 was too
#: tight for the 1.4 million unknowns of convective-corner). A wrong conversion
#: gives far more: h/k off by 1 % changes the temperatures by about 1e-3 of the
#: range, a missing mm -> m factor or degF offset by order 1.
UNIT_TOL = 1e-9


def unit_check(case: Case) -> float:
    """Re-solve a case in metres and kelvin and compare (degree 3, same mesh up
    to scale): the largest difference at the sensors, as a fraction of the
    range. The Robin coefficient h/k is per metre and must be converted to the
    case's length unit; the verification problems (dimensionless) cannot catch
    a wrong conversion, this check can. The meshes are similar, so the two
    solutions agree to round-off when the conversion is right."""
    f = METRES_PER_UNIT[case.length_unit]
    ids, px, py = sensor_points(case)
    u, _, _ = solve_fem(case, build_mesh(case), ElementTriP3(), px, py)
    si = copy.deepcopy(case)
    si.width, si.height, si.length_unit, si.temperature_unit = case.width * f, case.height * f, "m", "K"
    for e in si.edges.values():
        if e.constant is not None:
            e.constant = to_kelvin(e.constant, case.temperature_unit)
        if e.ambient is not None:
            e.ambient = to_kelvin(e.ambient, case.temperature_unit)
        if e.knots is not None:
            e.knots, e.values = e.knots * f, to_kelvin(e.values, case.temperature_unit)
    u_si, _, _ = solve_fem(si, build_mesh(si), ElementTriP3(), px * f, py * f)
    diff = np.abs(to_kelvin(u, case.temperature_unit) - u_si).max()
    return float(diff / (case.temperature_range() * KELVIN_PER_UNIT[case.temperature_unit]))


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
    if case.conductivity is not None:
        toml.append(f"conductivity = {num(case.conductivity)}")
    for side in SIDES:
        e = case.edges[side]
        toml += ["", f"[edges.{side}]", f'condition = "{e.condition}"']
        if e.condition == "fixed" and e.constant is not None:
            toml.append(f"temperature = {num(e.constant)}")
        elif e.condition == "fixed":
            toml.append(f'profile = "{e.profile_file}"')
        elif e.condition == "convective":
            toml += [f"h = {num(e.h)}", f"ambient = {num(e.ambient)}"]
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

    if res.heat_flow:
        rows = ["edge,heat_flow_w_per_m,estimated_error_w_per_m"]
        rows += [f"{side},{q:.12g},{e:.2g}" for side, (q, e) in res.heat_flow.items()]
        write_atomic(d / "heat-flow.csv", "\n".join(rows) + "\n")
        written.append(d / "heat-flow.csv")

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
    convective = case.convective()
    if convective:
        parts = []
        for side in convective:
            e = case.edges[side]
            q, q_est = res.heat_flow[side]
            parts.append(f"the {side} edge (h = {e.h:g} W/(m^2 K), ambient {e.ambient:g} {unit}, "
                         f"h/k = {case.beta(side):.6g} per {case.length_unit}) takes in "
                         f"{q:.6g} W/m (estimated error {q_est:.1e} W/m)")
        parts = parts[0] if len(parts) == 1 else ", ".join(parts[:-1]) + " and " + parts[-1]
        pairs = [(a, b) for a, b in (("bottom", "left"), ("bottom", "right"), ("top", "left"),
                                     ("top", "right"))
                 if case.edges[a].condition == "convective" and case.edges[b].condition == "convective"]
        robin_corner = ""
        if pairs:
            robin_corner = (" Where two convective edges meet (the "
                            + " and ".join(f"{a}-{b}" for a, b in pairs)
                            + " corner), nothing is imposed at the corner: each Robin term acts on "
                              "its own edge's facets.")
        corner_note += (
            f" Convective (Robin) edges, -k dT/dn = h (T - ambient) with k = {case.conductivity:g} "
            f"W/(m K), enter the weak form as the boundary bilinear term integral (h/k) T v ds and "
            f"the boundary load integral (h/k) ambient v ds over the convective edges; a corner "
            f"shared with a fixed or unknown edge takes that edge's value.{robin_corner} `heat-flow.csv` gives the heat flow into "
            f"the plate through each convective edge, h times the integral of (ambient - T) along "
            f"it, in W per metre of plate depth (temperature differences in kelvin): {parts}. "
            f"The interior values lie within the range of the fixed values, truth and ambients "
            f"(maximum principle, checked).")
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
        passed = true_err.max() <= TOLERANCE * rng \
            and true_err.max() <= max(est_max, ROUNDOFF * rng) and est_max <= TOLERANCE * rng
        flow_note = ""
        for side, exact_q in (case.exact_flow or {}).items():
            # Heat flows: scale h x range x edge length (metres, kelvin).
            q, q_est = res.heat_flow[side]
            scale = heat_flow_scale(case, side)
            q_err = abs(q - exact_q)
            passed &= q_err <= TOLERANCE * scale and q_err <= max(q_est, ROUNDOFF * scale) \
                and q_est <= TOLERANCE * scale
            flow_note += (f"; {side} heat flow true error {q_err / scale:.1e}, "
                          f"estimate {q_est / scale:.1e} of h x range x length")
        ok &= passed
        covered = int(np.sum(true_err <= res.estimate))
        print(f"  {case.name:18s} true error of P4 {true_err.max() / rng:.1e}, "
              f"estimate |P4-P3| {est_max / rng:.1e} (fractions of range; pointwise "
              f"true <= estimate at {covered}/{len(true_err)} points){flow_note}, "
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
        if case.name in UNIT_CHECK_CASES:
            t0 = time.perf_counter()
            d = unit_check(case)
            good = d <= UNIT_TOL
            ok &= good
            print(f"  {'':18s} same case in m and K (degree 3): largest difference {d:.1e} of "
                  f"range, {time.perf_counter() - t0:.1f} s  {'ok' if good else 'FAIL'}")

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
