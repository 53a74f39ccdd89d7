r"""Initial conditions: the profile a boundary started from.

Every initial condition here is *linear in its values*: the profile is
``Σ_k value_k · basis_k(x; boundary)``. Fitting exploits that (the best values
for a given D·t and boundary position are a linear least-squares problem), and
the open rim takes its held value from the same values.

``step``
    Plateau ``outer`` rimward of the boundary and ``inner`` coreward of it
    (Fo in olivine, Ti in quartz, Sr/Ba in alkali feldspar...).
``melt-equilibrium``
    For trace elements in plagioclase: each zone grew in equilibrium with its
    melt, the melt concentration stepping at the boundary,
    ``C0(x) = K(X_An(x), T) · C_melt(x)`` with ``RT ln K = A·X_An + B``
    (Bindeman et al. 1998). The fitted values are the two melt concentrations.

To add a type: subclass :class:`InitialCondition`, implement ``basis`` and
``rim_basis`` (and ``basis_derivative`` when it can be had exactly; the
default is a central difference), give ``value_names``, and register it in
``INITIAL_CONDITIONS``.
"""

from __future__ import annotations

import numpy as np

from zoneprofile.diffusion.grid import Grid

__all__ = ["InitialCondition", "StepInitial", "MeltEquilibriumInitial", "INITIAL_CONDITIONS"]


class InitialCondition:
    """Base type: a profile linear in ``len(value_names)`` values."""

    kind = "base"
    value_names: tuple = ()

    def basis(self, grid: Grid, boundary_um: float) -> np.ndarray:  # pragma: no cover - abstract
        """Cell-averaged basis profiles, shape (n_values, N)."""
        raise NotImplementedError

    def rim_basis(self, grid: Grid) -> np.ndarray:  # pragma: no cover - abstract
        """The concentration at the rim face per unit of each value, shape (n_values,)."""
        raise NotImplementedError

    def basis_derivative(self, grid: Grid, boundary_um: float) -> np.ndarray:
        """d(basis)/d(boundary_um), shape (n_values, N) (central difference unless overridden)."""
        h = 1e-6 * max(float(np.min(grid.widths_um)), 1e-12)
        return (self.basis(grid, boundary_um + h) - self.basis(grid, boundary_um - h)) / (2.0 * h)

    def profile(self, grid: Grid, boundary_um: float, values) -> np.ndarray:
        return np.asarray(values, float) @ self.basis(grid, boundary_um)

    def rim_value(self, grid: Grid, values) -> float:
        return float(np.asarray(values, float) @ self.rim_basis(grid))


class StepInitial(InitialCondition):
    """A sharp step from ``outer`` (rim side) to ``inner`` (core side)."""

    kind = "step"

    def __init__(self, value_names=("outer", "inner")):
        self.value_names = tuple(value_names)

    def basis(self, grid, boundary_um):
        beyond = grid.fraction_beyond([boundary_um])[0]
        return np.vstack([1.0 - beyond, beyond])

    def basis_derivative(self, grid, boundary_um):
        d = grid.fraction_beyond_derivative(boundary_um)
        return np.vstack([-d, d])

    def rim_basis(self, grid):
        return np.array([1.0, 0.0])


class MeltEquilibriumInitial(InitialCondition):
    """Each zone in equilibrium with its melt: ``C0 = K(x)·C_melt(x)``.

    Parameters
    ----------
    partition_k : array_like, shape (N,)
        Partition coefficient C_plag/C_melt in every cell at the model
        temperature (from the frozen X_An).
    rim_k : float
        Partition coefficient at the rim (for an open rim).
    """

    kind = "melt-equilibrium"

    def __init__(self, partition_k, rim_k, value_names=("melt_outer", "melt_inner")):
        self.partition_k = np.asarray(partition_k, float)
        self.rim_k = float(rim_k)
        self.value_names = tuple(value_names)

    def basis(self, grid, boundary_um):
        beyond = grid.fraction_beyond([boundary_um])[0]
        return np.vstack([(1.0 - beyond) * self.partition_k, beyond * self.partition_k])

    def basis_derivative(self, grid, boundary_um):
        d = grid.fraction_beyond_derivative(boundary_um)
        return np.vstack([-d * self.partition_k, d * self.partition_k])

    def rim_basis(self, grid):
        return np.array([self.rim_k, 0.0])


INITIAL_CONDITIONS = {
    StepInitial.kind: StepInitial,
    MeltEquilibriumInitial.kind: MeltEquilibriumInitial,
}
