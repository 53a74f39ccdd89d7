"""The explicit registry of diffusion laws and the default law per element and mineral.

Adding a law: write it as data in its family module (or a new module), import
it here and add it to ``_BUILT_IN``. Nothing is discovered by import side effects.
"""

from __future__ import annotations

from zoneprofile._validation import InputError
from zoneprofile.minerals.registry import REGISTRY as _MINERAL_TABLE
from zoneprofile.minerals.registry import datable_elements, law_minerals, mineral_aliases
from zoneprofile.diffusion.laws._base import DiffusionLaw
from zoneprofile.diffusion.laws.feldspar import (
    CHERNIAK1996_SR,
    CHERNIAK2002_BA,
    CHERNIAK_WATSON1992_SR_ANORTHOCLASE_001,
    CHERNIAK_WATSON1992_SR_ANORTHOCLASE_010,
)
from zoneprofile.diffusion.laws.olivine import (
    DOHMEN2007_FEMG,
    DOHMEN2007_FEMG_PED,
    DOHMEN2007_FEMG_TAMED,
)
from zoneprofile.diffusion.laws.plagioclase import (
    CHERNIAK_WATSON1992_SR_AN,
    COSTA2003_MG,
    VANORMAN2014_MG,
    ZELLMER1999_SR,
)
from zoneprofile.diffusion.laws.pyroxene import MULLER2013_FEMG_CPX
from zoneprofile.diffusion.laws.quartz import CHERNIAK2007_TI

__all__ = [
    "LAWS",
    "DEFAULTS",
    "ELEMENTS",
    "MINERALS",
    "get_law",
    "default_law",
    "register_law",
    "normalise_element",
    "normalise_mineral",
    "laws_for",
    "unregister_law",
]

_BUILT_IN = (
    COSTA2003_MG,
    VANORMAN2014_MG,
    ZELLMER1999_SR,
    CHERNIAK_WATSON1992_SR_AN,
    CHERNIAK_WATSON1992_SR_ANORTHOCLASE_001,
    CHERNIAK_WATSON1992_SR_ANORTHOCLASE_010,
    CHERNIAK1996_SR,
    CHERNIAK2002_BA,
    DOHMEN2007_FEMG,
    DOHMEN2007_FEMG_TAMED,
    DOHMEN2007_FEMG_PED,
    CHERNIAK2007_TI,
    MULLER2013_FEMG_CPX,
)

#: id -> law. User laws join through :func:`register_law`.
LAWS: dict[str, DiffusionLaw] = {law.id: law for law in _BUILT_IN}

#: (element, mineral) -> default law id, from the mineral table (zoneprofile/minerals/registry.py).
DEFAULTS: dict[tuple[str, str], str] = {
    (d.element, m.law_mineral): d.default_law for m in _MINERAL_TABLE for d in m.elements if d.default_law
}

#: pairs that are known but deliberately have no default, with the reason.
NO_DEFAULT: dict[tuple[str, str], str] = {
    (d.element, m.law_mineral): d.no_default for m in _MINERAL_TABLE for d in m.elements if d.no_default
}

ELEMENTS = datable_elements()
MINERALS = law_minerals()

_ELEMENT_ALIASES = {"fe-mg": "FeMg", "fe–mg": "FeMg", "femg": "FeMg", "fe_mg": "FeMg", "mg-fe": "FeMg"}
_MINERAL_ALIASES = mineral_aliases()


def normalise_element(element: str) -> str:
    """Canonical element name ('Mg', 'Sr', 'Ba', 'FeMg', 'Ti' or a user law's element)."""
    text = str(element).strip()
    key = text.lower()
    if key in _ELEMENT_ALIASES:
        return _ELEMENT_ALIASES[key]
    known = set(ELEMENTS) | {law.element for law in LAWS.values()}
    for name in known:
        if name.lower() == key:
            return name
    return text


def normalise_mineral(mineral: str) -> str:
    """Canonical mineral name (accepts 'pyroxene', 'cpx', 'sanidine', ...)."""
    key = " ".join(str(mineral).strip().lower().split())
    return _MINERAL_ALIASES.get(key, key)


def get_law(law_id) -> DiffusionLaw:
    """The law registered under ``law_id`` (a law object passes through)."""
    if isinstance(law_id, DiffusionLaw):
        return law_id
    key = str(law_id).strip().lower()
    if key not in LAWS:
        message = f"unknown diffusion law '{law_id}'; known laws: {', '.join(LAWS)}"
        raise InputError(message)
    return LAWS[key]


def _pairs_text() -> str:
    pairs = sorted(DEFAULTS) + sorted(p for p in _user_pairs() if p not in DEFAULTS)
    return ", ".join(f"{e} in {m}" for e, m in pairs)


def _user_pairs():
    return {(law.element, law.mineral) for law in LAWS.values()}


def default_law(element, mineral) -> DiffusionLaw:
    """The default law for ``element`` in ``mineral``.

    Pairs without a built-in default but with exactly one registered (e.g. user)
    law use that law. Ba in plagioclase is refused on purpose: no verified law.
    """
    el = normalise_element(element)
    mi = normalise_mineral(mineral)
    if (el, mi) in DEFAULTS:
        return LAWS[DEFAULTS[(el, mi)]]
    if (el, mi) in NO_DEFAULT:
        candidates = laws_for(el, mi)
        if len(candidates) == 1:
            return candidates[0]
        message = f"{el} in {mi}: {NO_DEFAULT[(el, mi)]}"
        raise InputError(message)
    candidates = laws_for(el, mi)
    if len(candidates) == 1:
        return candidates[0]
    if candidates:
        ids = ", ".join(law.id for law in candidates)
        message = f"several laws for {el} in {mi} and no default; choose one with --law: {ids}"
        raise InputError(message)
    message = f"no diffusion law for {element} in {mineral}; known pairs: {_pairs_text()}"
    raise InputError(message)


def laws_for(element=None, mineral=None) -> list[DiffusionLaw]:
    """Registered laws, optionally only those for ``element`` and/or ``mineral``."""
    el = None if element is None else normalise_element(element)
    mi = None if mineral is None else normalise_mineral(mineral)
    return [
        law
        for law in LAWS.values()
        if (el is None or law.element == el) and (mi is None or law.mineral == mi)
    ]


def register_law(law: DiffusionLaw, *, replace: bool = False) -> DiffusionLaw:
    """Add ``law`` to :data:`LAWS`.

    Built-in ids are never replaced; another registered id only with ``replace``.
    """
    if not isinstance(law, DiffusionLaw):
        message = f"register_law needs a DiffusionLaw, got {type(law).__name__}"
        raise InputError(message)
    if law.id in {b.id for b in _BUILT_IN}:
        message = f"law id '{law.id}' is a built-in law; give your law another id"
        raise InputError(message)
    if law.id in LAWS and not replace:
        message = f"law id '{law.id}' is already registered; give your law another id"
        raise InputError(message)
    LAWS[law.id] = law
    return law


def unregister_law(law_id: str) -> None:
    """Remove a user law from :data:`LAWS` (built-in laws stay)."""
    if law_id in {b.id for b in _BUILT_IN}:
        message = f"law id '{law_id}' is a built-in law and cannot be removed"
        raise InputError(message)
    LAWS.pop(law_id, None)
