r"""Forward model of a whole crystal: zones grown one event at a time, every element diffusing.

Private: :mod:`zoneprofile.diffusion.crystal` fits it. See
``docs/whole-crystal-model.md`` for the model in words.

Zones and events, oldest first. ``positions[0] > positions[1] > ...`` are the
boundaries (µm from the rim), ``ages[0] > ages[1] > ... > 0`` the ages of the
events (days before the end, e.g. eruption). Zone 0 is the core (beyond
``positions[0]``); event ``k`` grows zone ``k + 1`` (from ``positions[k]`` out
to ``positions[k + 1]``, or to the rim for the last event) instantly, in
equilibrium with melt ``k + 1``. From then on every cell grown so far
diffuses; the crystal's surface during the stage after event ``k`` (the face
at ``positions[k + 1]``, the rim at the last stage) is held in equilibrium
with melt ``k + 1`` (``open``) or closed. The core starts in equilibrium with
melt 0.

Trace elements in plagioclase (An frozen): ``C = K(X_An)·C_melt`` with
``RT ln K = A·X_An + B`` gives ``K = c·w`` with ``w = exp(A(X_An − X_ref)/RT)``
and ``c = exp((A·X_ref + B)/RT)``, so "in equilibrium with melt j" is the
uniform potential ``u = C/w = c·m_j`` and the solver's An-coupled operator
(:class:`~zoneprofile.diffusion.solver.LinearDiffusion`) moves ``u`` towards it.
The model is linear in the melt values: the profile is
``Σ_j v_j·basis_j(ages, positions)`` (``v_j = c·m_j``), which the fit solves
for by linear least squares at every trial of ages and positions (variable
projection).

Each stage is one application of ``e^{-τK}`` on the part of the grid grown so
far, evaluated without a decomposition (the Carathéodory–Fejér rational
approximation of the solver, exact in time to ~1e-13), so the grid can follow
the boundary positions: its faces sit on the boundaries, with a fixed number
of cells in every zone, and the model is smooth in the positions.
"""

from __future__ import annotations

import math

import numpy as np

from zoneprofile.diffusion.grid import Grid
from zoneprofile.diffusion.laws import R_J_MOL_K
from zoneprofile.diffusion.resolution import beam_matrix

from zoneprofile._units import SECONDS_PER_DAY  # noqa: E402
UM2_PER_M2 = 1e12


class ZoneGrid:
    """Cell faces with one face on every boundary and a fixed number of cells per zone.

    Parameters
    ----------
    positions_um : sequence of float
        Boundaries, oldest (innermost, largest distance) first.
    end_um : float
        The far (core) end of the modelled crystal (closed face).
    cell_um : float
        Target cell width; each zone gets ``max(ceil(length / cell_um), 3)``
        cells at the start positions and keeps that number.
    """

    def __init__(self, positions_um, end_um, cell_um):
        pos = np.asarray(positions_um, float)
        self.n_boundaries = pos.size
        self.end_um = float(end_um)
        edges = np.concatenate([[0.0], pos[::-1], [self.end_um]])
        lengths = np.diff(edges)
        self.counts = np.maximum(np.ceil(lengths / float(cell_um)).astype(int), 3)
        # face index of each boundary, oldest first; index of the rim (0) appended
        cum = np.concatenate([[0], np.cumsum(self.counts)])
        self.face_index = np.concatenate([cum[1:-1][::-1], [0]]).astype(int)
        self.n = int(cum[-1])

    def faces(self, positions_um):
        pos = np.asarray(positions_um, float)
        edges = np.concatenate([[0.0], pos[::-1], [self.end_um]])
        parts = [np.linspace(edges[i], edges[i + 1], c + 1)[:-1] for i, c in enumerate(self.counts)]
        return np.concatenate(parts + [[self.end_um]])

    def zone_of_cells(self):
        """Zone number of every cell (0 = core, n = outermost)."""
        z = np.empty(self.n, int)
        idx = list(self.face_index)  # oldest first, then 0
        z[idx[0]:] = 0
        for k in range(self.n_boundaries):
            z[idx[k + 1]:idx[k]] = k + 1
        return z


class AnZones:
    """Frozen An on the grid: inside each zone a straight line through its An points; a sharp step at each boundary.

    The points belonging to each zone are chosen once (at the start
    positions), keeping those more than a guard from the zone's edges (a spot
    straddling a boundary sees both zones): ``guard_um`` may list several
    guards, and the widest that leaves at least four points (a line and its
    scatter) is used, else the narrowest that leaves one; the
    cell values are then interpolated at the cell centres, so they move
    smoothly with the boundaries.

    ``splits_um`` are fixed places inside zones where An steps without a
    recharge (the zoning's undated steps, e.g. a normal step): a zone is then
    one straight line per segment between them, with the same guards at each
    split, so the partitioning (K depends on An) steps there as the crystal did
    instead of being smeared along one line. A split closer to a zone's edge
    than the widest guard is ignored (it is the boundary itself).
    """

    def __init__(self, an_x, an_values, positions_um, end_um, guard_um, splits_um=()):
        ax = np.asarray(an_x, float)
        av = np.asarray(an_values, float) / 100.0
        pos = np.asarray(positions_um, float)
        # the widest guard that leaves a line's worth of points (4), else the narrowest leaving one
        guards = sorted(np.atleast_1d(np.asarray(guard_um, float)).tolist(), reverse=True)
        splits = np.sort(np.asarray([v for v in np.atleast_1d(np.asarray(splits_um, float)) if np.isfinite(v)]))
        # the rim (distance 0) is an edge too: a spot there sees partly outside the crystal
        rim = min(0.0, float(ax.min())) - 1e-9
        edges = np.concatenate([[np.inf if end_um is None else max(end_um, ax.max()) + 1.0], pos, [rim]])
        # zone z lies between edges[z + 1] (rimward) and edges[z] (coreward); zone 0 the core
        self.zones = []  # per zone: its segments, rimward first: (inner splits, [(zx, zv, line), ...])
        for z in range(pos.size + 1):
            lo, hi = edges[z + 1], edges[z]
            inner = [float(v) for v in splits if lo + guards[0] < v < hi - guards[0]]
            bounds = [lo, *inner, hi]
            segments = [self._segment(ax, av, a, b, guards) for a, b in zip(bounds[:-1], bounds[1:])]
            self.zones.append((np.asarray(inner, float), segments))
        self.x_ref = float(np.mean(av))

    @staticmethod
    def _segment(ax, av, lo, hi, guards):
        """The points of one stretch between ``lo`` and ``hi`` (guarded) and its line (or None)."""
        inside = (ax > lo) & (ax < hi)
        pick = inside
        for g in guards:
            guarded = inside & (ax > lo + g) & (ax < hi - g)
            if np.count_nonzero(guarded) >= (4 if g > guards[-1] else 1):
                pick = guarded
                break
        if not np.any(pick):
            centre = 0.5 * (max(lo, ax.min()) + min(hi, ax.max()))
            pick = np.zeros(ax.size, bool)
            pick[int(np.argmin(np.abs(ax - centre)))] = True
        zx, zv = ax[pick], av[pick]
        line = None
        if zx.size >= 4:
            # a straight line through the stretch's points: its own trend, not its noise;
            # it is carried up to the stretch's edges (the points near an edge were left out)
            # (a slope within two standard errors of zero is noise: the stretch is then flat)
            t = zx - zx.mean()
            coef = np.polyfit(t, zv, 1)
            resid = zv - np.polyval(coef, t)
            se = math.sqrt(float(resid @ resid) / (zx.size - 2) / float(t @ t))
            if abs(coef[0]) < 2.0 * se:
                coef = np.array([0.0, float(np.mean(zv))])
            line = (coef, zx.mean())
            zv = np.polyval(coef, t)
        return zx, zv, line

    def cells(self, centres_um, zone_of_cells):
        out = np.empty(centres_um.size)
        for z, (inner, segments) in enumerate(self.zones):
            sel = np.flatnonzero(zone_of_cells == z)
            seg_of = np.searchsorted(inner, centres_um[sel], side="right") if inner.size else np.zeros(sel.size, int)
            for j, (zx, zv, line) in enumerate(segments):
                cells = sel[seg_of == j]
                if line is None:
                    out[cells] = np.interp(centres_um[cells], zx, zv)
                else:
                    out[cells] = np.clip(np.polyval(line[0], centres_um[cells] - line[1]), 0.0, 1.0)
        return out

    def step_sizes(self):
        """|ΔAn| (mol%) across each boundary (means of the two zones' points nearest it), oldest first."""
        out = []
        for k in range(len(self.zones) - 1):
            inner = self.zones[k][1][0]  # the core-side zone's stretch next to the boundary
            outer = self.zones[k + 1][1][-1]  # the rim-side zone's stretch next to it
            a = inner[1][np.argsort(inner[0])][:3].mean()
            b = outer[1][np.argsort(outer[0])][-3:].mean()
            out.append(100.0 * abs(a - b))
        return out


class ElementModel:
    """One element on one crystal: law, coupling, data and the forward basis.

    ``coupling`` is ``'an'`` for plagioclase trace elements (melt-equilibrium
    zones, An-coupled flux) or ``None`` (plateau values, plain diffusion with
    D at the reference composition or D(X_An) when the law needs An).
    """

    def __init__(self, element, law, x_um, y, weights, beam_um, beam_shape, *, coupling=None,
                 partition_ab=None, law_kwargs=None):
        self.element = element
        self.law = law
        self.x_um = np.asarray(x_um, float)
        self.y = np.asarray(y, float)
        self.weights = np.asarray(weights, float)
        self.beam_um = beam_um
        self.beam_shape = beam_shape
        self.coupling = coupling
        self.partition_ab = partition_ab
        self.law_kwargs = {k: v for k, v in (law_kwargs or {}).items() if v is not None}

    def d_ref(self, temperature_c, x_ref, perturb=None):
        comp = dict(self.law_kwargs)
        if "x_an" in self.law.needs:
            comp["x_an"] = x_ref
        return self.law.d_m2_s(temperature_c, perturb=perturb, **comp)

    def setup(self, temperature_c, x_an_cells, x_ref):
        """Per-temperature, per-grid arrays: relative D, equilibrium weight w, and c = K/w."""
        t_k = float(temperature_c) + 273.15
        comp = dict(self.law_kwargs)
        d_ref = float(self.d_ref(temperature_c, x_ref))
        if "x_an" in self.law.needs and x_an_cells is not None:
            d = self.law.d_m2_s(temperature_c, x_an=x_an_cells, **comp)
            d_rel = np.asarray(d, float) / d_ref
        else:
            d_rel = np.ones(x_an_cells.size if x_an_cells is not None else 1)
        if self.coupling == "an":
            a_j, b_j = self.partition_ab
            w = np.exp(a_j * (x_an_cells - x_ref) / (R_J_MOL_K * t_k))
            c = math.exp((a_j * x_ref + b_j) / (R_J_MOL_K * t_k))
        else:
            w = np.ones_like(d_rel)
            c = 1.0
        return d_ref, d_rel, w, c


def forward_basis(grid: ZoneGrid, faces, ages_days, d_ref_m2_s, d_rel, w, rim="open"):
    """Cell values for a unit value of each melt (potential), shape (n_zones, N).

    ``ages_days`` oldest first (strictly decreasing, > 0). Row ``j`` is the
    crystal at the end for ``v_j = 1`` and every other value 0.
    """
    n = grid.n_boundaries
    n_cells = grid.n
    ages = np.asarray(ages_days, float)
    d_rel = np.broadcast_to(d_rel, (n_cells,))
    idx = grid.face_index
    basis = np.zeros((n + 1, n_cells))
    basis[0, idx[0]:] = w[idx[0]:]
    for k in range(n):
        start, stop = idx[k + 1], idx[k]
        basis[k + 1, start:stop] = w[start:stop]
        duration = ages[k] - (ages[k + 1] if k + 1 < n else 0.0)
        tau = d_ref_m2_s * duration * SECONDS_PER_DAY * UM2_PER_M2
        if tau <= 0:
            continue
        rows = k + 2  # zones grown so far
        state = basis[:rows, start:].T.copy()  # (N_sub, rows)
        if rim == "open":
            state[:, k + 1] -= w[start:]  # steady state: uniform potential of melt k + 1
        state = _decay(faces[start:], d_rel[start:], w[start:], rim, state, tau)
        if rim == "open":
            state[:, k + 1] += w[start:]
        basis[:rows, start:] = state.T
    return basis


#: degree of the rational approximation of e^{-x} used per stage: uniform error ≈ 9.28903^-10 ≈ 2e-10
#: (Trefethen, Weideman & Schmelzer 2006), far below any analytical precision
RATIONAL_DEGREE = 10


def _decay(faces, d_rel, w, rim, state, tau):
    """``e^{-τ·(operator)}`` applied to cell values ``state`` (N, k) on the grid ``faces`` (closed core).

    The operator is the solver's (:class:`~zoneprofile.diffusion.solver.LinearDiffusion`: the same
    face conductances, the same symmetric form); the time step is its rational approximation
    (five complex tridiagonal solves), without building the solver object.
    """
    from scipy.linalg.lapack import zgtsv

    from zoneprofile.diffusion.solver import _face_conductance, rational_exp_coefficients

    grid = Grid(faces)
    inner, rim_c, _ = _face_conductance(grid, d_rel, w, rim, "closed")
    diag = np.zeros(grid.n)
    diag[:-1] += inner
    diag[1:] += inner
    diag[0] += rim_c
    m = grid.volumes * w
    s = np.sqrt(m)
    diag_k = diag / m
    off_k = -inner / (s[:-1] * s[1:])
    to_sym = (s / w)[:, None]
    v = to_sym * state
    a0, poles, weights = rational_exp_coefficients(RATIONAL_DEGREE)
    rhs = np.asfortranarray(v, dtype=complex)
    out = a0 * v
    off = (tau * off_k).astype(complex)
    dk = tau * diag_k
    for p, c in zip(poles, weights):
        _, _, _, x, info = zgtsv(off, dk + p, off, rhs)
        if info != 0:  # pragma: no cover - τK + p is regular for a pole off the real axis
            raise RuntimeError(f"tridiagonal solve failed (info {info})")
        out += (c * x).real
    return out / to_sym


def beam_for(grid_faces, x_um, beam_um, beam_shape):
    return beam_matrix(Grid(grid_faces), x_um, beam_um=beam_um, shape=beam_shape)
