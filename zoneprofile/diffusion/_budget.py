r"""The complete uncertainty budget of a diffusion time: options, stated defaults, and the terms.

:func:`~zoneprofile.diffusion.uncertainty.propagate` draws the time; this module
supplies every term that is not the analytical noise of the fitted profile
(see ``docs/fitting-and-uncertainty.md``, "The complete budget"):

- **temperature**: the normal deviates come from
  :func:`~zoneprofile.diffusion.draws.shared_normals` keyed by the *sample*
  (``shared_seed``), never from the generator the bootstrap used, so draw ``k``
  has the same temperature for every boundary, element and crystal of a sample
  and intervals between boundaries are paired draw by draw. With no stated
  uncertainty a stated default of :data:`DEFAULT_TEMPERATURE_SD_C` is used and
  the output says so.
- **fO2 on its buffer** (olivine): when a buffer is named, fO2 follows it with
  each drawn temperature, so D carries the buffer's temperature dependence too.
- **law parameters**: per-parameter sd where the paper gives one (shared per
  sample: one law for the whole sample).
- **between-law spread** (systematic): the sample sd of log10 D over the
  built-in laws for the same element and mineral at the fit's temperature and
  composition. It is shown as its own term and as a wider interval
  (``law_spread``) but is *not* in ``time_days``: one law is used for every
  boundary of a study, so this part moves every age together and cancels in
  intervals and in comparisons between crystals.
- **partition coefficients** (plagioclase trace elements): the fit is repeated
  with A ± its sd and the slope of log10 D·t on A carries a deviate shared per
  sample.
- **An noise**: the An level either side of the boundary is uncertain by its
  point scatter over the points averaged into it; two refits give the slopes.
- **beam size** and **growth width of the initial step**: variances add for a
  step relaxed by linear diffusion and seen through a Gaussian spot (Crank 1975,
  erf of a Gaussian-blurred step), so the fitted apparent D·t is corrected draw
  by draw: ``D·t = cos²θ · (D·t_fit + (σ_b,assumed² − σ_b²)/2) − σ_g²/2``.
- **section obliquity**: the given angle, or a stated default distribution of
  the unknown angle (:func:`~zoneprofile.diffusion.draws.section_obliquity_deg`,
  one angle per draw shared by the boundaries of one traverse), switchable off.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from zoneprofile._validation import InputError
from zoneprofile.diffusion.draws import (
    DEFAULT_OBLIQUITY_SD_DEG,
    MAX_OBLIQUITY_DEG,
    sample_seed,
    section_obliquity_deg,
    shared_normals,
)

if TYPE_CHECKING:  # annotations only
    from zoneprofile.diffusion._problem import Problem

__all__ = [
    "BudgetOptions",
    "DEFAULT_TEMPERATURE_SD_C",
    "DEFAULT_BEAM_SD_FRACTION",
    "DEFAULT_GROWTH_WIDTH_SD_UM",
    "DEFAULT_PARTITION_A_SD_FRACTION",
    "AN_LEVEL_POINTS",
    "cli_shared_seed",
    "law_spread",
]

#: Stated default 1σ of the storage temperature when none is given (°C): the
#: typical standard error of mineral–melt thermometers (common practice).
DEFAULT_TEMPERATURE_SD_C = 20.0
#: Stated default 1σ of the effective spot size, as a fraction of the stated
#: diameter (common practice: the analysed volume differs from the nominal spot
#: by tens of percent).
DEFAULT_BEAM_SD_FRACTION = 0.2
#: Stated default for the width (1σ of a Gaussian-blurred step, µm) the boundary
#: had when it grew: half-normal with this sd (the project's stated default).
DEFAULT_GROWTH_WIDTH_SD_UM = 0.5
#: Stated default 1σ of the partition parameter A, as a fraction of |A|, where
#: the partition model gives none (the project's stated default).
DEFAULT_PARTITION_A_SD_FRACTION = 0.1
#: An points averaged into each side's frozen An level (the running mean of the An model).
AN_LEVEL_POINTS = 5


def cli_shared_seed(seed: int) -> int:
    """Seed of the shared deviates of a single ``fit`` run: every fit made with one ``--seed`` is paired."""
    return sample_seed(int(seed), "")


@dataclass(frozen=True)
class BudgetOptions:
    """What the user said about the sources of uncertainty beyond the profile (None: stated default).

    Attributes
    ----------
    shared_seed : int or None
        Seed of the sample's shared deviates (temperature, law, partition); None:
        derived from the fit's seed (still independent of the bootstrap).
    traverse_seed : int or None
        Seed of the traverse's shared deviates (section obliquity, beam size);
        None: ``shared_seed``.
    beam_sd_um : float or None
        1σ of the spot diameter; None: :data:`DEFAULT_BEAM_SD_FRACTION` of it.
    growth_width_sd_um : float or None
        Half-normal sd of the initial step's width; None: the default; 0: off.
    section_obliquity : bool
        Draw the unknown section obliquity from the stated default when no
        angle is given.
    obliquity_default_sd_deg : float
        sd of that default half-normal.
    fo2_buffer, fo2_delta_log : str or None, float
        fO2 follows this buffer (plus ``fo2_delta_log``) with temperature.
    partition_a_sd_j_mol : float or None
        1σ of the partition parameter A; None: the stated default.
    law_spread, an_noise : bool
        Compute the between-law term and the An-noise term.
    """

    shared_seed: int | None = None
    traverse_seed: int | None = None
    beam_sd_um: float | None = None
    growth_width_sd_um: float | None = None
    section_obliquity: bool = True
    obliquity_default_sd_deg: float = DEFAULT_OBLIQUITY_SD_DEG
    fo2_buffer: str | None = None
    fo2_delta_log: float = 0.0
    partition_a_sd_j_mol: float | None = None
    law_spread: bool = True
    an_noise: bool = True

    def checked(self) -> BudgetOptions:
        for name in ("beam_sd_um", "growth_width_sd_um", "partition_a_sd_j_mol"):
            v = getattr(self, name)
            if v is not None and (not math.isfinite(float(v)) or float(v) < 0):
                raise InputError(f"{name} must be >= 0, got {v}")
        if not 0.0 <= float(self.obliquity_default_sd_deg) <= 90.0:
            raise InputError("obliquity_default_sd_deg must lie between 0 and 90°")
        if self.fo2_buffer is not None:
            from zoneprofile.diffusion.laws.buffers import log10_fo2_buffer_pa

            log10_fo2_buffer_pa(self.fo2_buffer, 1000.0)  # unknown buffer: a plain message
        return self


def seeds(options: BudgetOptions, fit_seed: int) -> tuple[int, int]:
    """(sample seed, traverse seed) for the shared deviates."""
    shared = options.shared_seed if options.shared_seed is not None else sample_seed(int(fit_seed), "fit")
    traverse = options.traverse_seed if options.traverse_seed is not None else shared
    return int(shared), int(traverse)


def law_spread(law, temperature_c, composition) -> dict | None:
    """sd (ddof = 1) of log10 D over the built-in laws for the law's element and mineral.

    Laws that cannot be evaluated with the composition at hand are left out
    (and named). None when fewer than two laws are left.
    """
    from zoneprofile.diffusion.laws.registry import _BUILT_IN

    values, left_out = {}, []
    by_paper = {}
    for other in (law, *_BUILT_IN):
        if other.element != law.element or other.mineral != law.mineral:
            continue
        paper = other.doi or other.citation
        if paper in by_paper:  # one value per publication (mechanisms of one paper are one law)
            continue
        lo_hi = (other.composition_range or {}).get("x_an")
        x_an = composition.get("x_an")
        if lo_hi is not None and x_an is not None and not lo_hi[0] - 0.02 <= float(np.mean(x_an)) <= lo_hi[1] + 0.02:
            left_out.append(f"{other.id} (calibrated for X_An {lo_hi[0]:g}–{lo_hi[1]:g})")
            continue
        try:
            comp = {k: v for k, v in composition.items() if k in other.needs or k in ("fo2_pa", "pressure_pa")}
            values[other.id] = float(np.log10(other.d_m2_s(temperature_c, **comp)))
            by_paper[paper] = other.id
        except Exception:  # noqa: BLE001 - a law that needs what we lack is named, not used
            left_out.append(f"{other.id} (cannot be evaluated with the inputs at hand)")
    if len(values) < 2:
        return None
    v = np.array(list(values.values()))
    return {"laws_log10_d_m2_s": values, "left_out": left_out, "sd_log10": float(np.std(v, ddof=1))}


def half_normal(seed: int, n: int, sd: float, quantity: str) -> np.ndarray:
    return np.abs(shared_normals(seed, n, quantity)) * float(sd)


def refit_log10_dt(state, problem: Problem) -> float:
    """log10 D·t of the best fit refitted with a changed ``problem`` (values refitted).

    ``state``: the fit's :class:`~zoneprofile.diffusion._state.FitState` (which names this
    module's BudgetOptions, so it is not imported here: no circle of imports).
    """
    from zoneprofile.diffusion._optimise import _least_squares, _refit_projected

    best, lower, upper, vary = state.best, state.lower, state.upper, np.array(state.vary)
    model = problem.model(state.temperature_c, evaluator="rational")
    if hasattr(model, "basis_predictions"):
        theta = _refit_projected(model, problem.y, state.weights, np.array(best, float), lower, upper, vary)
    else:
        lo = np.where(vary, lower, best - 1e-9)
        hi = np.where(vary, upper, best + 1e-9)
        theta, _ = _least_squares(model, problem.y, state.weights, best, lo, hi, max_nfev=200)
    return float(theta[0])


def _changed(problem, **changes):
    from zoneprofile.diffusion._problem import Problem

    fields = {k: v for k, v in problem.__dict__.items() if k == "_B" or not k.startswith("_")}
    fields.update(changes)
    return Problem(**fields)


def partition_term(state, a_sd_j_mol: float) -> tuple[float, float]:
    """(d log10 D·t / dA per J/mol, sd of A used): two refits at A ± sd (``state``: the fit's FitState)."""
    problem = state.problem
    if problem.coupling != "an" or problem.partition_ab is None or a_sd_j_mol <= 0:
        return 0.0, 0.0
    a, b = problem.partition_ab
    up = refit_log10_dt(state, _changed(problem, partition_ab=(a + a_sd_j_mol, b)))
    dn = refit_log10_dt(state, _changed(problem, partition_ab=(a - a_sd_j_mol, b)))
    return (up - dn) / (2.0 * a_sd_j_mol), float(a_sd_j_mol)


def an_noise_sd(state) -> float:
    """sd of log10 D·t from the noise of the An levels either side of the boundary (``state``: the fit's FitState).

    The An the model holds frozen is a running mean of 5 points on each side
    (or the mean of a flat profile), so each side's level is uncertain by
    σ_An/√5 (σ_An the point-to-point scatter of the An points). Two refits, with
    the rimward and then the coreward An raised by that amount, give the two
    sensitivities; the sides are independent, so their effects add in
    quadrature. Deterministic: no draws.
    """
    an = state.an_values
    problem = state.problem
    if an is None or problem.coupling != "an" or problem.x_an_cells is None:
        return 0.0
    from zoneprofile.diffusion._steps import _noise_sd

    se = _noise_sd(np.asarray(an, float) / 100.0) / math.sqrt(AN_LEVEL_POINTS)
    if not se > 0:
        return 0.0
    cells = np.asarray(problem.x_an_cells, float)
    rimward = problem.grid.centres_um < float(state.best[1])
    best = float(state.best[0])
    shifts = []
    for side in (rimward, ~rimward):
        raised = np.clip(cells + se * side, 0.0, 1.0)
        shifts.append(refit_log10_dt(state, _changed(problem, x_an_cells=raised)) - best)
    return float(math.hypot(*shifts))
