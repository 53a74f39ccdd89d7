"""The options of a boundary fit, grouped: conditions, spot, section, placement, model, Monte Carlo.

:func:`~zoneprofile.diffusion.fitting.fit_boundary` takes them as keyword
arguments (``temperature_c=..., beam_um=..., draws=...``) and maps them into
these groups in one place, :meth:`FitOptions.from_keywords`; the stages of the
fit read the groups. Every group is a small frozen dataclass with its
defaults, so a group can also be built, checked and passed around on its own::

    from zoneprofile.diffusion.options import FitOptions

    opts = FitOptions.from_keywords(temperature_c=900.0, beam_um=4.0, draws=2000)
    opts.conditions.temperature_c, opts.spot.beam_um, opts.monte_carlo.draws

Importing this module imports nothing beyond the standard library.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, fields
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # annotations only
    from zoneprofile.diffusion._budget import BudgetOptions
    from zoneprofile.diffusion.laws._base import DiffusionLaw
    from zoneprofile.diffusion.paths import LinearCooling, TablePath

__all__ = ["Conditions", "Spot", "Section", "Placement", "ModelChoice", "MonteCarlo", "FitOptions"]


@dataclass(frozen=True)
class Conditions:
    """Where the crystal sat: temperature and its 1σ (°C), a T–t path, fO2 (Pa), pressure (MPa), X_Fe.

    ``temperature_sd_c`` None: the stated default
    (:data:`~zoneprofile.diffusion._budget.DEFAULT_TEMPERATURE_SD_C`, with a
    warning). ``path``: the time is then the duration along the path. An fO2
    buffer is a budget setting (:class:`MonteCarlo`, ``budget``).
    """

    temperature_c: float
    temperature_sd_c: float | None = None
    path: LinearCooling | TablePath | None = None
    fo2_pa: float | None = None
    pressure_mpa: float | None = None
    x_fe: float | None = None


@dataclass(frozen=True)
class Spot:
    """The analytical spot: diameter (Gaussian FWHM or square full width, µm), shape, and that of the An analyses."""

    beam_um: float | None = None
    beam_shape: str = "gaussian"
    an_beam_um: float | None = None


@dataclass(frozen=True)
class Section:
    """How the traverse cuts the crystal: obliquity ψ (° and 1σ), dip φ of the boundary plane, crystal direction.

    ``direction``: an axis or EBSD angles (olivine; see
    :mod:`~zoneprofile.diffusion.orientation`).
    """

    obliquity_deg: float | None = None
    obliquity_sd_deg: float = 0.0
    dip_deg: float | None = None
    direction: str | Sequence[float] | None = None


@dataclass(frozen=True)
class Placement:
    """Which boundary: its position (µm; held unless a window is given), the window, a segment, the neighbours."""

    boundary_um: float | None = None
    boundary_window_um: float | None = None
    segment_um: tuple[float, float] | None = None
    neighbours_um: Sequence[float] | None = None


@dataclass(frozen=True)
class ModelChoice:
    """The model: law, partition model, rim, geometry and radius, grid cells, the value column's name."""

    law: str | DiffusionLaw | None = None
    partition: str = "bindeman1998"
    rim: str = "open"
    geometry: str = "planar"
    radius_um: float | None = None
    n_cells: int = 400
    value_name: str | None = None


@dataclass(frozen=True)
class MonteCarlo:
    """The uncertainty: draws, seed, the first round of noise refits, and the other budget terms."""

    draws: int = 1000
    seed: int = 0
    noise_refits: int = 40
    budget: BudgetOptions | Mapping[str, Any] | None = None


_GROUPS = {"conditions": Conditions, "spot": Spot, "section": Section, "placement": Placement,
           "model": ModelChoice, "monte_carlo": MonteCarlo}


@dataclass(frozen=True)
class FitOptions:
    """Every option of one boundary fit, by group."""

    conditions: Conditions
    spot: Spot = field(default_factory=Spot)
    section: Section = field(default_factory=Section)
    placement: Placement = field(default_factory=Placement)
    model: ModelChoice = field(default_factory=ModelChoice)
    monte_carlo: MonteCarlo = field(default_factory=MonteCarlo)

    @classmethod
    def from_keywords(cls, **keywords: Any) -> FitOptions:
        """The groups from ``fit_boundary``'s keyword arguments (each name belongs to exactly one group).

        Raises :class:`TypeError` for a name no group has, as a call with an
        unknown keyword would.
        """
        owner = {f.name: group for group, kind in _GROUPS.items() for f in fields(kind)}
        parts: dict[str, dict[str, Any]] = {group: {} for group in _GROUPS}
        for name, value in keywords.items():
            if name not in owner:
                raise TypeError(f"unexpected keyword argument '{name}'")
            parts[owner[name]][name] = value
        return cls(**{group: _GROUPS[group](**parts[group]) for group in _GROUPS})
