"""Mineral recalculation: oxide wt% -> cations per formula unit, indices, QC.

Atomic weights live in one table (:mod:`zoneprofile.minerals.atomic`, CIAAW
2021). Each mineral family is one module; :data:`MINERALS` is the explicit
registry the command line and :func:`recalculate` use.
"""

from zoneprofile.minerals._registry import MINERALS, Mineral, get_mineral, recalculate
from zoneprofile.minerals.atomic import ATOMIC_WEIGHTS, FEO_TO_FE2O3, OXIDES, oxide_molar_mass
from zoneprofile.minerals.feldspar import feldspar_oxides, feldspar_species
from zoneprofile.minerals.olivine import olivine_oxides
from zoneprofile.minerals.pyroxene import droop_fe3, pyroxene_oxides

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
