"""Diffusion laws: the registry, the law families and user laws from TOML.

Import from here::

    from zoneprofile.diffusion.laws import LAWS, get_law, default_law

Each law is a frozen :class:`DiffusionLaw` carrying its citation, status
(CONFIRMED / SECONDARY / FROM MEMORY / USER), parameters with units and
calibrated ranges; ``law.d_m2_s(temperature_c, x_an=...)`` evaluates it.
"""

from zoneprofile.diffusion.laws._base import COMPOSITION_NAMES, R_J_MOL_K, STATUSES, DiffusionLaw
from zoneprofile.diffusion.laws.arrhenius import ArrheniusLaw
from zoneprofile.diffusion.laws.buffers import BUFFERS, fo2_buffer_pa, log10_fo2_buffer_pa
from zoneprofile.diffusion.laws.olivine import (
    ANISOTROPY_001_OVER_100,
    MECHANISM_FO2_PA,
    OlivineFeMgLaw,
    olivine_traverse_d,
)
from zoneprofile.diffusion.laws.registry import (
    DEFAULTS,
    ELEMENTS,
    LAWS,
    MINERALS,
    default_law,
    get_law,
    laws_for,
    normalise_element,
    normalise_mineral,
    register_law,
    unregister_law,
)
from zoneprofile.diffusion.laws.user import load_user_laws

__all__ = [
    "LAWS",
    "DEFAULTS",
    "ELEMENTS",
    "MINERALS",
    "STATUSES",
    "COMPOSITION_NAMES",
    "R_J_MOL_K",
    "DiffusionLaw",
    "ArrheniusLaw",
    "OlivineFeMgLaw",
    "get_law",
    "default_law",
    "laws_for",
    "register_law",
    "unregister_law",
    "load_user_laws",
    "normalise_element",
    "normalise_mineral",
    "olivine_traverse_d",
    "ANISOTROPY_001_OVER_100",
    "MECHANISM_FO2_PA",
    "BUFFERS",
    "fo2_buffer_pa",
    "log10_fo2_buffer_pa",
]
