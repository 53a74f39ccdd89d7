"""The one table of atomic weights, and the oxides built from it.

Standard atomic weights are those of CIAAW/IUPAC 2021 (Prohaska et al. 2022,
Pure Appl. Chem. 94:573, doi:10.1515/pac-2019-0603). For elements whose
standard weight is an interval (H, Li, B, C, O, Mg, Si, S, Cl) the CIAAW
*conventional* value is used. Oxide molar masses are derived from this table
and nowhere else.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["ATOMIC_WEIGHTS", "OXIDES", "Oxide", "oxide_molar_mass", "FEO_TO_FE2O3"]

#: g/mol, CIAAW 2021 (conventional values for interval elements).
ATOMIC_WEIGHTS: dict[str, float] = {
    "H": 1.008,
    "Li": 6.94,
    "B": 10.81,
    "C": 12.011,
    "O": 15.999,
    "F": 18.998403162,
    "Na": 22.98976928,
    "Mg": 24.305,
    "Al": 26.9815384,
    "Si": 28.085,
    "P": 30.973761998,
    "S": 32.06,
    "Cl": 35.45,
    "K": 39.0983,
    "Ca": 40.078,
    "Ti": 47.867,
    "V": 50.9415,
    "Cr": 51.9961,
    "Mn": 54.938043,
    "Fe": 55.845,
    "Ni": 58.6934,
    "Zn": 65.38,
    "Sr": 87.62,
    "Ba": 137.327,
}


@dataclass(frozen=True)
class Oxide:
    """An oxide component: ``cations`` atoms of ``element`` with ``oxygens`` O.

    ``cation`` is the name of the cation column in recalculated output
    (``Fe2`` for ferrous iron, ``Fe3`` for ferric iron, else the element).
    """

    name: str
    element: str
    cations: int
    oxygens: int
    cation: str

    @property
    def molar_mass(self) -> float:
        """g/mol from :data:`ATOMIC_WEIGHTS`."""
        return self.cations * ATOMIC_WEIGHTS[self.element] + self.oxygens * ATOMIC_WEIGHTS["O"]


def _ox(name, element, cations, oxygens, cation=None):
    return Oxide(name, element, cations, oxygens, cation or element)


#: Canonical oxides, in the order they appear in output tables.
OXIDES: dict[str, Oxide] = {
    o.name: o
    for o in (
        _ox("SiO2", "Si", 1, 2),
        _ox("TiO2", "Ti", 1, 2),
        _ox("Al2O3", "Al", 2, 3),
        _ox("Cr2O3", "Cr", 2, 3),
        _ox("V2O3", "V", 2, 3),
        _ox("Fe2O3", "Fe", 2, 3, "Fe3"),
        _ox("FeO", "Fe", 1, 1, "Fe2"),
        _ox("MnO", "Mn", 1, 1),
        _ox("MgO", "Mg", 1, 1),
        _ox("NiO", "Ni", 1, 1),
        _ox("ZnO", "Zn", 1, 1),
        _ox("CaO", "Ca", 1, 1),
        _ox("SrO", "Sr", 1, 1),
        _ox("BaO", "Ba", 1, 1),
        _ox("Na2O", "Na", 2, 1),
        _ox("K2O", "K", 2, 1),
        _ox("P2O5", "P", 2, 5),
    )
}


def oxide_molar_mass(name: str) -> float:
    """Molar mass (g/mol) of a canonical oxide, e.g. ``oxide_molar_mass("CaO")``."""
    return OXIDES[name].molar_mass


#: wt% FeO -> wt% Fe2O3 for the same iron: M(Fe2O3) / (2 M(FeO)).
FEO_TO_FE2O3: float = OXIDES["Fe2O3"].molar_mass / (2.0 * OXIDES["FeO"].molar_mass)
