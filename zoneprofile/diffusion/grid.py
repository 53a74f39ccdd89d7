"""Finite-volume grids for the 1-D diffusion solver.

Distances are in µm and measured from the rim (0 at the rim, increasing toward
the core), as everywhere in zoneprofile. A grid is a sorted array of cell faces;
cells may have different widths (fine near a boundary, coarse in the padding).

Geometry: ``planar`` (a slab), ``cylinder`` or ``sphere``. For the curved
geometries the crystal is a cylinder/sphere of radius ``radius_um`` whose
surface is the rim, so the radial coordinate is ``r = radius_um - distance``;
cell volumes and face areas follow (per unit length / per steradian, constant
factors dropped because they cancel).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from zoneprofile._validation import InputError

__all__ = ["Grid", "uniform_grid", "refined_grid", "GEOMETRIES"]

GEOMETRIES = ("planar", "cylinder", "sphere")


@dataclass(frozen=True, eq=False)
class Grid:
    """Cell faces (µm from the rim) and the geometry they live in.

    Attributes
    ----------
    faces_um : ndarray, shape (N + 1,)
        Increasing face positions.
    geometry : {'planar', 'cylinder', 'sphere'}
    radius_um : float or None
        Distance from the rim to the centre (curved geometries only).
    """

    faces_um: np.ndarray
    geometry: str = "planar"
    radius_um: float | None = None

    def __post_init__(self):
        faces = np.asarray(self.faces_um, dtype=float)
        if faces.ndim != 1 or faces.size < 3 or np.any(np.diff(faces) <= 0):
            raise InputError("grid faces must be an increasing sequence of at least 3 positions")
        if self.geometry not in GEOMETRIES:
            message = f"unknown geometry '{self.geometry}'; choose one of: {', '.join(GEOMETRIES)}"
            raise InputError(message)
        if self.geometry != "planar":
            if self.radius_um is None or not self.radius_um > 0:
                raise InputError(f"a {self.geometry} geometry needs radius_um > 0")
            if faces[0] < 0 or faces[-1] > self.radius_um * (1 + 1e-12):
                raise InputError("grid must lie between the rim (0) and the centre (radius_um)")
        object.__setattr__(self, "faces_um", faces)

    @property
    def n(self) -> int:
        return self.faces_um.size - 1

    @property
    def centres_um(self) -> np.ndarray:
        f = self.faces_um
        return 0.5 * (f[1:] + f[:-1])

    @property
    def widths_um(self) -> np.ndarray:
        return np.diff(self.faces_um)

    def _radius(self, x):
        return self.radius_um - x

    @property
    def volumes(self) -> np.ndarray:
        """Cell volumes (planar: widths; curved: shells, constant factors dropped)."""
        f = self.faces_um
        if self.geometry == "planar":
            return np.diff(f)
        r = self._radius(f)  # decreasing
        if self.geometry == "cylinder":
            return 0.5 * (r[:-1] ** 2 - r[1:] ** 2)
        return (r[:-1] ** 3 - r[1:] ** 3) / 3.0

    @property
    def face_areas(self) -> np.ndarray:
        """Face areas (planar 1, cylinder r, sphere r^2)."""
        f = self.faces_um
        if self.geometry == "planar":
            return np.ones_like(f)
        r = np.maximum(self._radius(f), 0.0)
        return r if self.geometry == "cylinder" else r**2

    def cell_average(self, func_or_steps) -> np.ndarray:
        """Volume-weighted cell averages of a piecewise-constant profile.

        ``func_or_steps`` is ``(positions_um, values)``: value ``values[0]`` left
        of ``positions_um[0]``, ``values[k]`` between ``positions_um[k-1]`` and
        ``positions_um[k]``, ``values[-1]`` beyond the last position. Cells cut
        by a step get the exact volume-weighted mix, which keeps a model smooth
        in the step position.
        """
        positions, values = func_or_steps
        positions = np.atleast_1d(np.asarray(positions, dtype=float))
        values = np.asarray(values, dtype=float)
        frac = self.fraction_beyond(positions)  # (n_steps, N)
        out = np.full(self.n, values[0], dtype=float)
        for k in range(positions.size):
            out = out + frac[k] * (values[k + 1] - values[k])
        return out

    def fraction_beyond(self, positions_um) -> np.ndarray:
        """Volume fraction of each cell lying beyond (coreward of) each position."""
        positions = np.atleast_1d(np.asarray(positions_um, dtype=float))
        f = self.faces_um
        lo, hi = f[:-1], f[1:]
        cut = np.clip(positions[:, None], lo[None, :], hi[None, :])
        if self.geometry == "planar":
            return (hi[None, :] - cut) / (hi - lo)[None, :]
        r_hi = self._radius(lo)[None, :]
        r_lo = self._radius(hi)[None, :]
        r_cut = self._radius(cut)
        p = 2 if self.geometry == "cylinder" else 3
        return (r_cut**p - r_lo**p) / (r_hi**p - r_lo**p)

    def fraction_beyond_derivative(self, position_um) -> np.ndarray:
        """d/d(position) of :meth:`fraction_beyond` for one position, shape (N,).

        Nonzero only in the cell the position cuts (the fraction is linear in the
        position there for a planar grid); at a face, the derivative of the cell
        on the core side is taken (one-sided).
        """
        x = float(position_um)
        f = self.faces_um
        out = np.zeros(self.n)
        j = int(np.searchsorted(f, x, side="right")) - 1
        if j < 0 or j >= self.n:
            return out
        lo, hi = f[j], f[j + 1]
        if self.geometry == "planar":
            out[j] = -1.0 / (hi - lo)
            return out
        p = 2 if self.geometry == "cylinder" else 3
        r_hi, r_lo, r_cut = self._radius(lo), self._radius(hi), self._radius(x)
        out[j] = -p * r_cut ** (p - 1) / (r_hi**p - r_lo**p)
        return out


def uniform_grid(length_um, n, *, start_um=0.0, geometry="planar", radius_um=None) -> Grid:
    """``n`` equal cells from ``start_um`` to ``start_um + length_um``."""
    faces = np.linspace(start_um, start_um + length_um, int(n) + 1)
    return Grid(faces, geometry=geometry, radius_um=radius_um)


def refined_grid(lo_um, hi_um, fine_lo_um, fine_hi_um, n_fine, *, growth=1.08,
                 geometry="planar", radius_um=None) -> Grid:
    """Uniform fine cells over ``[fine_lo_um, fine_hi_um]``, geometrically coarser outside.

    The cells grow by ``growth`` per cell away from the fine zone until they reach
    ``lo_um`` and ``hi_um`` (the last cell is stretched to land exactly).
    """
    if not lo_um <= fine_lo_um < fine_hi_um <= hi_um:
        raise InputError("refined grid needs lo <= fine_lo < fine_hi <= hi")
    h = (fine_hi_um - fine_lo_um) / int(n_fine)
    core = np.linspace(fine_lo_um, fine_hi_um, int(n_fine) + 1)

    def pad(length):
        if length <= 0:
            return np.array([])
        steps, w, total = [], h, 0.0
        while total < length:
            w *= growth
            steps.append(w)
            total += w
        cum = np.cumsum(steps)
        if len(cum) > 1 and (length - cum[-2]) < 0.5 * steps[-1]:
            cum = cum[:-1]  # merge a sliver into the previous cell
        cum[-1] = length
        return cum

    left = fine_lo_um - pad(fine_lo_um - lo_um)[::-1]
    right = fine_hi_um + pad(hi_um - fine_hi_um)
    faces = np.concatenate([left, core, right])
    return Grid(faces, geometry=geometry, radius_um=radius_um)
