"""The set-up of one boundary fit: data, grid, law, coupling, and models per temperature.

Private: :mod:`zoneprofile.diffusion.fitting` builds a :class:`Problem` and asks
it for a model at a temperature; a model maps the fitted parameter vector
``[log10_dt_m2, boundary_um, value_outer, value_inner]`` to what the spots at
the data positions would report.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from zoneprofile.diffusion.grid import Grid
from zoneprofile.diffusion.initial import MeltEquilibriumInitial, StepInitial
from zoneprofile.diffusion.laws import R_J_MOL_K
from zoneprofile.diffusion.resolution import beam_matrix
from zoneprofile.diffusion.solver import LinearDiffusion, evolve_nonlinear

UM2_PER_M2 = 1e12


@dataclass
class Problem:
    """Everything fixed during a fit except the temperature (SI for D, µm for space)."""

    element: str
    mineral: str
    law: object
    grid: Grid
    x_um: np.ndarray  # data positions
    y: np.ndarray  # data values
    sigma: np.ndarray | None  # 1-sigma per point, or None
    beam_um: float | None
    beam_shape: str
    rim: str  # 'open' or 'closed' at the first face
    value_names: tuple
    coupling: str | None = None  # 'an' for plagioclase trace elements
    x_an_cells: np.ndarray | None = None
    partition_model: str | None = None
    partition_ab: tuple | None = None  # (A, B) J/mol
    nonlinear: bool = False
    law_kwargs: dict = field(default_factory=dict)  # fo2_pa, pressure_pa, direction, x_fe (const)
    reference: dict = field(default_factory=dict)  # composition at which D_ref is taken
    _B: np.ndarray | None = None

    @property
    def data_matrix(self):
        if self._B is None:
            self._B = beam_matrix(self.grid, self.x_um, beam_um=self.beam_um, shape=self.beam_shape)
        return self._B

    # ------------------------------------------------------------------ D
    def law_composition(self, **over):
        comp = dict(self.law_kwargs)
        comp.update(over)
        return {k: v for k, v in comp.items() if v is not None}

    def d_ref(self, temperature_c, perturb=None):
        """D (m²/s) at the reference composition; broadcasts over temperatures/draws."""
        comp = self.law_composition(**self.reference)
        return self.law.d_m2_s(temperature_c, perturb=perturb, **comp)

    def shape_depends_on_temperature(self) -> bool:
        if self.coupling == "an" and self.partition_ab is not None and self.partition_ab[0] != 0:
            return True
        return not bool(getattr(self.law, "temperature_separable", True))

    def model(self, temperature_c):
        if self.nonlinear:
            return NonlinearModel(self, temperature_c)
        return LinearModel(self, temperature_c)


class LinearModel:
    """The spectral model at one temperature (one eigendecomposition)."""

    def __init__(self, problem: Problem, temperature_c: float):
        p = problem
        self.problem = p
        grid = p.grid
        t_k = float(temperature_c) + 273.15
        d_ref = float(p.d_ref(temperature_c))
        comp = p.law_composition()
        if p.x_an_cells is not None and ("x_an" in getattr(p.law, "needs", ()) or p.coupling == "an"):
            d = p.law.d_m2_s(temperature_c, **p.law_composition(x_an=p.x_an_cells))
        else:
            comp = p.law_composition(**p.reference)
            d = np.full(grid.n, float(p.law.d_m2_s(temperature_c, **comp)))
        d_rel = np.broadcast_to(np.asarray(d, float) / d_ref, (grid.n,))
        if p.coupling == "an":
            a_j, b_j = p.partition_ab
            w = np.exp(a_j * (p.x_an_cells - p.x_an_cells.mean()) / (R_J_MOL_K * t_k))
            k_cells = np.exp((a_j * p.x_an_cells + b_j) / (R_J_MOL_K * t_k))
            self.initial = MeltEquilibriumInitial(k_cells, k_cells[0], value_names=p.value_names)
        else:
            w = None
            self.initial = StepInitial(value_names=p.value_names)
        self.temperature_c = float(temperature_c)
        self.d_ref_m2_s = d_ref
        self.operator = LinearDiffusion(grid, d_rel, weight=w, rim=p.rim, core="closed")
        self._sample = self.operator.sampler(p.data_matrix)
        self._rim_basis = self.initial.rim_basis(grid)

    def _rim(self, values):
        return float(np.dot(values, self._rim_basis)) if self.problem.rim == "open" else None

    def predict(self, theta):
        log10_dt, boundary, *values = theta
        values = np.asarray(values, float)
        c0 = values @ self.initial.basis(self.problem.grid, boundary)
        tau = 10.0 ** (log10_dt) * UM2_PER_M2
        return self._sample(c0, tau, rim_value=self._rim(values))

    def basis_predictions(self, log10_dt, boundary):
        """Predictions for unit values, shape (n_values, n_points) (linear in the values)."""
        basis = self.initial.basis(self.problem.grid, boundary)
        tau = 10.0 ** (log10_dt) * UM2_PER_M2
        rows = []
        for k in range(basis.shape[0]):
            rim = self._rim_basis[k] if self.problem.rim == "open" else None
            rows.append(self._sample(basis[k], tau, rim_value=rim))
        return np.vstack(rows)

    def cells(self, theta):
        log10_dt, boundary, *values = theta
        values = np.asarray(values, float)
        c0 = values @ self.initial.basis(self.problem.grid, boundary)
        tau = 10.0 ** (log10_dt) * UM2_PER_M2
        return self.operator.evolve(c0, tau, rim_value=self._rim(values)), c0


class NonlinearModel:
    """Implicit stepping for D depending on the diffusing quantity (Fo in olivine)."""

    def __init__(self, problem: Problem, temperature_c: float):
        p = problem
        self.problem = p
        self.temperature_c = float(temperature_c)
        self.d_ref_m2_s = float(p.d_ref(temperature_c))
        self.initial = StepInitial(value_names=p.value_names)
        # tabulate log10 D(Fo)/D_ref once; Fo in mol%, X_Fe = 1 - Fo/100
        fo = np.linspace(0.0, 100.0, 2001)
        comp = p.law_composition(x_fe=np.clip(1.0 - fo / 100.0, 0.0, 1.0))
        self._fo = fo
        self._log_rel = np.log10(p.law.d_m2_s(temperature_c, **comp) / self.d_ref_m2_s)
        self._B = p.data_matrix

    def d_rel(self, fo):
        return 10.0 ** np.interp(fo, self._fo, self._log_rel)

    def cells(self, theta):
        log10_dt, boundary, *values = theta
        values = np.asarray(values, float)
        c0 = values @ self.initial.basis(self.problem.grid, boundary)
        tau = 10.0 ** (log10_dt) * UM2_PER_M2
        rim = float(values[0]) if self.problem.rim == "open" else None
        return evolve_nonlinear(self.problem.grid, c0, tau, self.d_rel, rim=self.problem.rim, rim_value=rim), c0

    def predict(self, theta):
        return self._B @ self.cells(theta)[0]
