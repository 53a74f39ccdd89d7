"""The state of a finished boundary fit, handed from the fit to its uncertainty.

:func:`~zoneprofile.diffusion.fitting.fit_boundary` builds one
:class:`FitState` after the optimisers have found the best fit;
:func:`~zoneprofile.diffusion.uncertainty.propagate` and the budget terms of
:mod:`~zoneprofile.diffusion._budget` read it and never change it. Fitted
parameter vectors are ``[log10_dt_m2, boundary_um, value_outer, value_inner]``
(:mod:`~zoneprofile.diffusion._problem`).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:  # for the annotations only: no import at run time
    from zoneprofile.diffusion._budget import BudgetOptions
    from zoneprofile.diffusion._optimise import BestFit
    from zoneprofile.diffusion._problem import Problem
    from zoneprofile.diffusion.paths import LinearCooling, TablePath

__all__ = ["FitState"]


@dataclass(frozen=True, eq=False)
class FitState:
    """A best fit and everything its Monte Carlo uncertainty needs (read-only).

    The arrays are the fit's own (not copies): no reader writes to them.
    """

    # ---- the fitted problem and its optimum
    problem: Problem
    """Data, grid, law and coupling of the fit (the problem the model was built from)."""
    model: Any
    """The model at the nominal temperature (``LinearModel`` or ``NonlinearModel``)."""
    best: np.ndarray
    """Best-fit parameter vector."""
    lower: np.ndarray
    """Lower bounds of the parameters."""
    upper: np.ndarray
    """Upper bounds of the parameters."""
    vary: tuple[bool, ...]
    """Which parameters were fitted (the boundary position is fixed when given without a window)."""
    param_names: tuple[str, ...]
    """Names of the parameters, in the order of ``best``."""
    best_fit: BestFit
    """The last least-squares step: covariance and standard errors."""
    weights: np.ndarray
    """1/σ of each point (ones when no precision was given)."""
    residuals: np.ndarray
    """Model minus data at the best fit (unweighted)."""
    pred: np.ndarray
    """The model at the data points, best fit."""
    log_bounds: tuple[float, float]
    """Range of log10 D·t (m²) the fit searched."""
    floor_delta_chi2: float | None
    """Δχ² of an undiffused step seen through the spot against the best fit (None: not computed)."""
    profile_upper_log10_dt: Callable[[], float | None] | None
    """The 95 % profile-likelihood upper bound of log10 D·t, computed when called (unresolved fits only)."""
    position_candidates: tuple[Mapping[str, float], ...]
    """Positions tried inside the gap of a tied An step, with their log10 D·t and weight (empty: none)."""
    resolution_var_um2: float
    """Variance of the resolution: the spot's σ² plus spacing²/12 (µm²)."""
    an_values: np.ndarray | None
    """An (mol%) of the points the frozen An profile was built from (An-coupled fits), else None."""
    # ---- conditions and Monte Carlo settings
    temperature_c: float
    """Nominal temperature (°C) at which the best fit was made."""
    temperature_sd_c: float
    """1-sigma of the temperature (°C)."""
    path: LinearCooling | TablePath | None
    """Temperature–time path, or None (isothermal)."""
    obliquity_deg: float | None
    """Angle ψ between the traverse and the normal of the boundary trace, when given."""
    obliquity_sd_deg: float
    """1-sigma of ψ."""
    dip_deg: float | None
    """Angle φ between the boundary plane's normal and the section normal, when given."""
    draws: int
    """Number of Monte Carlo draws."""
    seed: int
    """Seed of the draws (the noise refits are seeded by the data instead)."""
    noise_refits: int
    """Residual-bootstrap refits of the first round."""
    budget_options: BudgetOptions
    """The other terms of the uncertainty budget."""
    defaults_used: Mapping[str, str]
    """Stated defaults already taken by the fit (name -> what was used); the budget adds its own to a copy."""
