"""Column names of microprobe and LA-ICP-MS exports -> canonical roles.

Every header cell gets a :class:`Column`: an oxide (canonical name such as
``SiO2``; ``FeO*``/``FeOt``/``FeOT`` mean total iron as FeO), a trace element
in ppm (``Sr``, ``Sr_ppm``, ``Sr88``, ``88Sr`` -> ``Sr_ppm``), stage ``x``/``y``,
``distance``, ``total``, ``point`` label, ``comment``, ``sample``,
``crystal``, a detection limit or uncertainty column, or ``ignored``. Units
written in the name (``(wt%)``, ``_um``, ``[mm]``) are kept in ``unit``.
"""

from __future__ import annotations

import functools
import re
from dataclasses import dataclass

from zoneprofile.minerals.atomic import OXIDES

__all__ = [
    "Column", "classify", "classify_header", "header_score", "element_to_oxide_factor", "TRACE_ELEMENTS", "UNIT_TOKENS",
]

_OXIDE_KEYS = {name.lower(): name for name in OXIDES}

#: Elements read as trace columns (ppm) when named alone or with a mass number.
TRACE_ELEMENTS = (
    "Li Be B Na Mg Al Si P K Ca Sc Ti V Cr Mn Fe Co Ni Cu Zn Ga Ge As Rb Sr Y Zr Nb Mo Sn Sb Cs Ba "
    "La Ce Pr Nd Sm Eu Gd Tb Dy Ho Er Tm Yb Lu Hf Ta W Pb Th U"
).split()
_TRACE_KEYS = {e.lower(): e for e in TRACE_ELEMENTS}

_MICRO = ("um", "µm", "μm", "micron", "microns", "micrometre", "micrometer", "micrometres", "micrometers")
UNIT_TOKENS = {
    **{u: "um" for u in _MICRO},
    "mm": "mm",
    "wt%": "wt%", "wt.%": "wt%", "wt": "wt%", "%": "wt%", "wt.": "wt%", "oxide%": "wt%", "wt%oxide": "wt%",
    "mass%": "wt%", "mass.%": "wt%", "weight%": "wt%", "wtpercent": "wt%", "wt.percent": "wt%",
    "ppm": "ppm", "µg/g": "ppm", "μg/g": "ppm", "ug/g": "ppm", "ppmw": "ppm",
}
_DL_TOKENS = {
    "dl", "d.l.", "lod", "mdl", "lld", "detlim", "det.lim.", "det.lim", "detection", "limit", "det.", "lim.", "det",
    "lim", "cdl", "cdl99", "dl99",
}
_ERR_TOKENS = {
    "err", "error", "sd", "1s", "2s", "sigma", "σ", "1σ", "2σ", "±", "+-", "stdev", "std", "se", "%err",
    "relerr", "unc", "uncertainty", "precision", "%rsd", "rsd",
}
_X = {"x", "stagex", "xstage", "xpos", "posx", "xposition", "positionx", "xcoord", "xcoordinate", "stagexpos"}
_Y = {"y", "stagey", "ystage", "ypos", "posy", "yposition", "positiony", "ycoord", "ycoordinate", "stageypos"}
_Z = {"z", "stagez", "zstage", "zpos", "posz", "zposition", "focus"}
_DIST = {
    "distance", "dist", "distancefromrim", "distfromrim", "distancefromstart", "traversedistance",
    "relativedistance", "reldistance", "distanceum", "distancemm", "distum", "distmm", "rimdistance",
}
_LOOSE_DIST = {"d", "position", "pos", "length", "along", "traverse"}  # with a length unit only
_TOTAL = {"total", "totals", "sum", "oxidetotal", "totalwt", "analyticaltotal", "oxidesum"}
_POINT = {
    "point", "pt", "pts", "no", "no.", "nr", "nr.", "number", "#", "spot", "spotno", "analysis", "analysisno",
    "label", "name", "id", "pointno", "pointname", "pointid", "spotname", "spotid", "datasetpoint", "pointnr",
    "analysisid", "shot", "spotnumber", "pointnumber",
}
_COMMENT = {"comment", "comments", "description", "remark", "remarks", "notes", "note", "info"}
_SAMPLE = {"sample", "samplename", "sampleid", "thinsection", "section"}
_CRYSTAL = {"crystal", "grain", "crystalid", "grainid", "xl", "phenocryst"}


@dataclass(frozen=True)
class Column:
    """Role of one header cell."""

    name: str  # as written in the file
    kind: str  # oxide, trace, x, y, distance, total, point, comment, sample, crystal, limit, error, ignored
    canonical: str = ""  # oxide name, element symbol, or ''
    unit: str | None = None  # um, mm, wt%, ppm or None
    mass: int | None = None  # mass number of an isotope column


_SUBSCRIPTS = str.maketrans("₀₁₂₃₄₅₆₇₈₉", "0123456789")


def _tokens(name: str) -> tuple[list[str], str | None]:
    s = name.strip().replace("\u00a0", " ").translate(_SUBSCRIPTS)
    unit = None
    for m in re.finditer(r"[\(\[\{]([^\)\]\}]*)[\)\]\}]", s):
        inner = m.group(1).strip().lower().replace(" ", "")
        if inner in UNIT_TOKENS:
            unit = UNIT_TOKENS[inner]
        elif inner in _DL_TOKENS:
            unit = "limit"
        elif inner in ("t", "tot", "total"):
            pass  # FeO (t): total iron, same as FeO
    s = re.sub(r"[\(\[\{][^\)\]\}]*[\)\]\}]", " ", s)
    s = s.replace("*", " * ")
    parts = [p for p in re.split(r"[\s_/|]+", s) if p]
    # split glued unit suffixes such as 'distance-um' or 'SiO2wt%'
    out = []
    for p in parts:
        low = p.lower()
        m = re.match(r"^(.*?)[-.]?(wt\.?%|ppm|µm|μm|um|mm)$", low)
        if m and m.group(1) and low not in _OXIDE_KEYS:
            out.append(p[: len(m.group(1))])
            out.append(m.group(2))
        else:
            out.append(p)
    return out, unit


def classify(name: str, *, has_x: bool = False) -> Column:
    """Role of one column name; ``has_x`` says whether the table has a stage X."""
    raw = str(name)
    tokens, unit = _tokens(raw)
    core, flags = [], set()
    if unit == "limit":
        flags.add("limit")
        unit = None
    for t in tokens:
        low = t.lower()
        if low in UNIT_TOKENS and low not in _TRACE_KEYS:
            unit = UNIT_TOKENS[low]
        elif low in _DL_TOKENS:
            flags.add("limit")
        elif low in _ERR_TOKENS:
            flags.add("error")
        elif t == "*" or low in ("tot", "total") and core and core[-1].lower() in ("feo", "fe2o3"):
            flags.add("total-iron")
        else:
            core.append(t)
    if "limit" in flags:
        return _limit_column(raw, core, unit)
    if "error" in flags:
        return Column(raw, "error", unit=unit)
    key = "".join(core).lower().replace("-", "").replace(".", "") if core else ""
    key_dot = "".join(core).lower()
    if not key:
        return Column(raw, "ignored")
    # oxides, including FeOt / FeOT / FeO* / FeOtot
    if key in _OXIDE_KEYS:
        return Column(raw, "oxide", _OXIDE_KEYS[key], unit or "wt%")
    for suffix in ("total", "tot", "t"):
        if key.endswith(suffix) and key[: -len(suffix)] in ("feo", "fe2o3"):
            return Column(raw, "oxide", _OXIDE_KEYS[key[: -len(suffix)]], unit or "wt%")
    if key in _X:
        return Column(raw, "x", unit=unit)
    if key in _Y and (key != "y" or has_x) and unit != "ppm":
        return Column(raw, "y", unit=unit)
    if key in _Z:
        return Column(raw, "ignored", unit=unit)
    if key in _DIST:
        if key.endswith("um"):
            unit = "um"
        elif key.endswith("mm"):
            unit = "mm"
        return Column(raw, "distance", unit=unit)
    if key in _LOOSE_DIST and unit in ("um", "mm"):
        return Column(raw, "distance", unit=unit)
    if key in _TOTAL:
        return Column(raw, "total", unit=unit)
    if key in _POINT or key_dot in _POINT:
        return Column(raw, "point")
    if key in _COMMENT:
        return Column(raw, "comment")
    if key in _SAMPLE:
        return Column(raw, "sample")
    if key in _CRYSTAL:
        return Column(raw, "crystal")
    m = re.match(r"^([a-z]{1,2})(\d{1,3})$", key) or re.match(r"^(\d{1,3})([a-z]{1,2})$", key)
    if m:
        a, b = m.groups()
        el, mass = (a, int(b)) if a.isalpha() else (b, int(a))
        if el in _TRACE_KEYS:
            return Column(raw, "trace", _TRACE_KEYS[el], unit or "ppm", mass)
    if key in _TRACE_KEYS:
        return Column(raw, "trace", _TRACE_KEYS[key], unit or "ppm")
    return Column(raw, "ignored", unit=unit)


_MAJOR_OF = {ox.element: name for name, ox in OXIDES.items() if name != "Fe2O3"}  # Fe -> FeO


def _limit_column(raw: str, core: list[str], unit) -> Column:
    """A detection-limit column: ``canonical`` is the oxide it applies to.

    ``unit`` is ``oxide`` when the name gives the oxide (``Na2O DL``), else the
    element's unit (``wt%`` or ``ppm``) when it gives the element (``DL Na``).
    """
    key = "".join(core).lower().replace("-", "").replace(".", "")
    if key in _OXIDE_KEYS:
        return Column(raw, "limit", _OXIDE_KEYS[key], "oxide")
    element = _TRACE_KEYS.get(key)
    if element in _MAJOR_OF:
        return Column(raw, "limit", _MAJOR_OF[element], unit if unit == "ppm" else "wt%")
    return Column(raw, "limit", "", unit)


def element_to_oxide_factor(oxide: str) -> float:
    """wt% oxide per wt% element: M(oxide) / (cations x M(element)), e.g. Na -> Na2O 1.3480."""
    from zoneprofile.minerals.atomic import ATOMIC_WEIGHTS

    ox = OXIDES[oxide]
    return ox.molar_mass / (ox.cations * ATOMIC_WEIGHTS[ox.element])


def classify_header(names) -> list[Column]:
    """Roles of all header cells.

    A bare ``Y`` is stage Y only beside an X column. A bare element name
    (``Si``, ``Sr``) without a ppm unit or mass number, in a table that also
    has that element's oxide, is the element-wt% twin of the oxide that some
    microprobe software exports: it is not read as ppm (kind ``element``).
    """
    first = [classify(n) for n in names]
    has_x = any(c.kind == "x" for c in first)
    cols = [classify(n, has_x=has_x) for n in names]
    oxide_elements = {OXIDES[c.canonical].element for c in cols if c.kind == "oxide"}
    out = []
    for c in cols:
        bare = c.kind == "trace" and c.mass is None and "ppm" not in c.name.lower() and c.unit in (None, "ppm", "wt%")
        if bare and (c.canonical in oxide_elements or c.unit == "wt%" and c.canonical in _MAJOR_OF):
            explicit_ppm = any(u in c.name.lower() for u in ("ppm", "µg/g", "ug/g"))
            if not explicit_ppm:
                c = Column(c.name, "element", c.canonical, "wt%")
        out.append(c)
    return out


def header_score(cells) -> int:
    """How many cells of a row name canonical oxides (0 for a data or title row)."""
    n = 0
    for c in cells:
        c = str(c).strip()
        if not c or len(c) > 40 or _looks_numeric(c):
            continue
        if _classify_cached(c).kind == "oxide":
            n += 1
    return n


def _looks_numeric(cell: str) -> bool:
    """A number (decimal point or comma): never a column name, and the bulk of a table's cells."""
    try:
        float(cell.replace(",", "."))
    except ValueError:
        return False
    return True


@functools.lru_cache(maxsize=4096)
def _classify_cached(cell: str) -> Column:
    return classify(cell)
