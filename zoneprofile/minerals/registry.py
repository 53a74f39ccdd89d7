"""The one table of what the project knows about each mineral.

Every other module reads these facts from here: the diffusion-law registry
(mineral names, aliases, elements, default laws), the campaign file (which
elements a mineral can date, the value column of each), the command line and
the fitting (value columns, whether An is needed), and the recalculation
(main index). A test fails if a second table of minerals
reappears elsewhere (``tests/minerals/test_mineral_registry.py``).

This module imports nothing heavy, so that ``zoneprofile --help`` stays fast.

Names
-----
An entry's ``name`` is the name used by the campaign file and the
recalculation (``"pyroxene"``); ``law_mineral`` is the mineral the diffusion
laws are calibrated on (``"clinopyroxene"``: the pyroxene recalculation covers
ortho- and clinopyroxene, the only built-in Fe-Mg law is for clinopyroxene).
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = [
    "Datable",
    "MineralFacts",
    "REGISTRY",
    "BY_NAME",
    "lookup",
    "law_minerals",
    "recalculated_minerals",
    "datable_elements",
    "value_column",
    "needs_an",
    "mineral_aliases",
]


@dataclass(frozen=True)
class Datable:
    """An element whose diffusion profile can be dated in a mineral.

    ``column`` is the profile column its values are read from; ``needs_an`` is
    True when its diffusivity or its partitioning depends on the plagioclase
    An content along the profile (Costa et al. 2003; Bindeman et al. 1998), so
    An must be given with it. ``default_law`` is the id of the default
    diffusion law, or None with ``no_default`` saying why there is none.
    """

    element: str
    column: str
    needs_an: bool = False
    default_law: str | None = None
    no_default: str = ""


@dataclass(frozen=True)
class MineralFacts:
    """One mineral: its names, zoning column and datable elements.

    The oxygen basis of the recalculation lives beside the formula code that
    uses it (``OXYGENS`` in :mod:`zoneprofile.minerals.feldspar`, ...).
    """

    name: str
    aliases: tuple[str, ...]
    zoning_column: str  # the main compositional index of its zoning (An, Or, Fo, ...)
    elements: tuple[Datable, ...]
    default_elements: tuple[str, ...]
    law_mineral: str  # the mineral name the diffusion laws use
    recalculated: bool = True  # has an oxide -> formula recalculation (zoneprofile.minerals.MINERALS)
    #: no melt-equivalent fingerprint: a reverse step (Fo or Mg# rising toward the rim, a more mafic
    #: melt; Ti in quartz rising toward the rim, a hotter melt) is taken as recharge-like
    reverse_is_recharge: bool = False

    def element(self, name: str) -> Datable | None:
        for d in self.elements:
            if d.element == name:
                return d
        return None

    @property
    def element_names(self) -> tuple[str, ...]:
        return tuple(d.element for d in self.elements)


_BA_PLAG = (
    "no verified law for Ba in plagioclase is available; choose one explicitly with "
    "--law (e.g. cherniak2002-ba-sanidine, measured on sanidine, with a warning) or add "
    "your own from a TOML file"
)

#: The minerals, in the order every listing shows them.
REGISTRY: tuple[MineralFacts, ...] = (
    MineralFacts(
        "plagioclase", ("plag",), "An",
        (
            Datable("Mg", "Mg_ppm", needs_an=True, default_law="costa2003-mg-plag"),
            Datable("Sr", "Sr_ppm", needs_an=True, default_law="zellmer1999-sr-plag"),
            Datable("Ba", "Ba_ppm", needs_an=True, default_law=None, no_default=_BA_PLAG),
        ),
        ("Mg",), "plagioclase",
    ),
    MineralFacts(
        "alkali-feldspar", ("alkali feldspar", "alkali_feldspar", "sanidine", "anorthoclase"), "Or",
        (
            Datable("Sr", "Sr_ppm", default_law="cherniak1996-sr-alkali-feldspar"),
            Datable("Ba", "Ba_ppm", default_law="cherniak2002-ba-sanidine"),
        ),
        ("Ba",), "alkali-feldspar",
    ),
    MineralFacts(
        "olivine", ("ol",), "Fo",
        (Datable("FeMg", "Fo", default_law="dohmen2007-femg-olivine"),),
        ("FeMg",), "olivine", reverse_is_recharge=True,
    ),
    MineralFacts(
        "pyroxene", ("cpx",), "Mg_number",
        (Datable("FeMg", "Mg_number", default_law="muller2013-femg-cpx"),),
        ("FeMg",), "clinopyroxene", reverse_is_recharge=True,
    ),
    # quartz has no major-element zoning to recalculate: its Ti (ppm) comes from a trace table
    MineralFacts(
        "quartz", ("qz", "qtz"), "Ti_ppm",
        (Datable("Ti", "Ti_ppm", default_law="cherniak2007-ti-quartz"),),
        ("Ti",), "quartz", recalculated=False, reverse_is_recharge=True,
    ),
)

#: name -> entry
BY_NAME: dict[str, MineralFacts] = {m.name: m for m in REGISTRY}


def _by_law_mineral(mineral: str) -> MineralFacts | None:
    for m in REGISTRY:
        if m.law_mineral == mineral or m.name == mineral:
            return m
    return None


def lookup(mineral: str) -> MineralFacts | None:
    """The entry for a registry name, a law mineral name or an alias (None if unknown)."""
    key = " ".join(str(mineral).strip().lower().split())
    found = _by_law_mineral(key)
    if found is not None:
        return found
    for m in REGISTRY:
        if key in m.aliases:
            return m
    return None


def law_minerals() -> tuple[str, ...]:
    """The mineral names the diffusion laws use, in registry order."""
    return tuple(m.law_mineral for m in REGISTRY)


def recalculated_minerals() -> tuple[str, ...]:
    """The minerals with an oxide recalculation, in registry order."""
    return tuple(m.name for m in REGISTRY if m.recalculated)


def datable_elements() -> tuple[str, ...]:
    """Every datable element once, in order of first appearance."""
    return tuple(dict.fromkeys(d.element for m in REGISTRY for d in m.elements))


def mineral_aliases() -> dict[str, str]:
    """alias (lower case) -> law mineral name, for every name that is not already a law mineral."""
    out: dict[str, str] = {}
    for m in REGISTRY:
        for alias in (m.name, *m.aliases):
            if alias != m.law_mineral:
                out[alias] = m.law_mineral
    return out


def value_column(element: str, mineral: str) -> str | None:
    """The profile column an element is read from in a mineral (None if it cannot be dated there)."""
    m = lookup(mineral)
    d = m.element(element) if m is not None else None
    return d.column if d is not None else None


def needs_an(element: str, mineral: str) -> bool:
    """True when the element's profile in the mineral needs An along it."""
    m = lookup(mineral)
    d = m.element(element) if m is not None else None
    return bool(d is not None and d.needs_an)
