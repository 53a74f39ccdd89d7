"""Diffusion modelling of zone boundaries: laws, partitioning, solver, fitting, uncertainty.

Import from here::

    from zoneprofile.diffusion import fit_boundary, simulate_boundary, LAWS, get_law

- Laws and partitioning: :data:`LAWS`, :func:`get_law`, :func:`default_law`,
  :func:`partition_coefficient`, :func:`partition_parameters`.
- Solver: :class:`LinearDiffusion` (spectral, An-coupled), :func:`evolve_nonlinear`
  (implicit, D depending on composition), grids :func:`uniform_grid`,
  :func:`refined_grid`, spot resolution :func:`beam_matrix`.
- Fitting: :func:`fit_boundary` -> :class:`FitResult`; :func:`find_boundaries`; its options
  grouped in :mod:`zoneprofile.diffusion.options`.
- Temperature paths: :class:`LinearCooling`, :class:`TablePath`.
- Forward model and synthetic data: :func:`simulate_boundary`,
  :func:`synthetic_boundary_profile`.
"""

from zoneprofile.diffusion.fitting import ELEMENT_COLUMNS, find_boundaries, fit_boundary
from zoneprofile.diffusion.grid import Grid, refined_grid, uniform_grid
from zoneprofile.diffusion.initial import INITIAL_CONDITIONS, MeltEquilibriumInitial, StepInitial
from zoneprofile.diffusion.laws import LAWS, default_law, get_law
from zoneprofile.diffusion.partition import partition_coefficient, partition_parameters
from zoneprofile.diffusion.paths import LinearCooling, TablePath
from zoneprofile.diffusion.resolution import beam_matrix, beam_sigma_um
from zoneprofile.diffusion.solver import LinearDiffusion, evolve_nonlinear
from zoneprofile.diffusion.synthetic import simulate_boundary, synthetic_boundary_profile
from zoneprofile.diffusion.uncertainty import FitResult

__all__ = [
    "LAWS",
    "get_law",
    "default_law",
    "partition_coefficient",
    "partition_parameters",
    "fit_boundary",
    "FitResult",
    "find_boundaries",
    "ELEMENT_COLUMNS",
    "simulate_boundary",
    "synthetic_boundary_profile",
    "LinearDiffusion",
    "evolve_nonlinear",
    "Grid",
    "uniform_grid",
    "refined_grid",
    "beam_matrix",
    "beam_sigma_um",
    "INITIAL_CONDITIONS",
    "StepInitial",
    "MeltEquilibriumInitial",
    "LinearCooling",
    "TablePath",
]
