"""Mineral recalculation: oxide wt% -> cations per formula unit, indices, QC.

Atomic weights live in one table (:mod:`zoneprofile.minerals.atomic`, CIAAW
2021). Each mineral family is one module; :data:`MINERALS` is the explicit
registry the command line and :func:`recalculate` use. The facts about each
mineral (names, zoning column, datable elements, formula basis) live in one
table, :mod:`zoneprofile.minerals.registry`.

The names below are loaded on first use, so that importing the light
:mod:`zoneprofile.minerals.registry` (the command line does) does not import
pandas.
"""

from importlib import import_module

_WHERE = {
    "MINERALS": "_registry",
    "Mineral": "_registry",
    "get_mineral": "_registry",
    "recalculate": "_registry",
    "ATOMIC_WEIGHTS": "atomic",
    "OXIDES": "atomic",
    "FEO_TO_FE2O3": "atomic",
    "oxide_molar_mass": "atomic",
    "feldspar_oxides": "feldspar",
    "feldspar_species": "feldspar",
    "olivine_oxides": "olivine",
    "pyroxene_oxides": "pyroxene",
    "droop_fe3": "pyroxene",
}

__all__ = [
    "ATOMIC_WEIGHTS",
    "OXIDES",
    "FEO_TO_FE2O3",
    "oxide_molar_mass",
    "MINERALS",
    "Mineral",
    "get_mineral",
    "recalculate",
    "feldspar_oxides",
    "feldspar_species",
    "olivine_oxides",
    "pyroxene_oxides",
    "droop_fe3",
]


def __getattr__(name):
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(import_module(f"{__name__}.{module}"), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(__all__))
