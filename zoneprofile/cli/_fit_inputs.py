"""Probe data as it comes, for ``zoneprofile fit``: oxide wt% for trace elements, blank (censored) cells.

- **Oxide wt% to ppm.** Mg, Sr and Ba in plagioclase are read from ``Mg_ppm``
  etc.; a microprobe table often has ``MgO``/``SrO``/``BaO`` in wt% instead.
  Then ``ppm = wt% × 10⁴ × M(element) / M(oxide)`` with the molar masses from
  :mod:`zoneprofile.minerals.atomic` (the project's atomic weights), and the
  ``_sd`` column, when present, is converted by the same factor. The fit's
  output names the conversion.
- **Blank cells** in the value column (an analysis below detection, left
  empty, as ``recalc`` passes it) are left out of the fit and counted in a
  warning, never read as zero.
- **Censored analyses** (``<0.01``, ``bdl``, ``b.d.l.``, ``n.d.``, ``<LOD``,
  read as :func:`zoneprofile.io.cells.parse_cell` reads them for ``recalc``)
  are left out the same way and counted in their own warning: a limit is not
  a measured value, and setting it to zero or to the limit would bend the
  diffusion profile. A negative number is left as it is (and refused where
  the column cannot be negative).
"""

from __future__ import annotations

__all__ = ["OXIDE_SOURCES", "blank_note", "censored_note", "oxide_to_ppm_factor", "value_source"]

#: element -> oxide column read (wt%) when the ppm column is absent
OXIDE_SOURCES = {"Mg": "MgO", "Sr": "SrO", "Ba": "BaO"}


def oxide_to_ppm_factor(element: str) -> float:
    """ppm of the element per wt% of its oxide: 10⁴ · M(element) / M(oxide)."""
    from zoneprofile.minerals.atomic import ATOMIC_WEIGHTS, OXIDES

    oxide = OXIDES[OXIDE_SOURCES[element]]
    return 1e4 * oxide.cations * ATOMIC_WEIGHTS[element] / oxide.molar_mass


def value_source(header, element: str, col: str):
    """(column to read, factor or None, note or None): the ppm column, else the oxide in wt%."""
    if col in header or element not in OXIDE_SOURCES or col != f"{element}_ppm":
        return col, None, None
    oxide = OXIDE_SOURCES[element]
    if oxide not in header:
        return col, None, None
    factor = oxide_to_ppm_factor(element)
    note = (f"{col} from {oxide} (wt%): ppm = wt% × 10⁴ × M({element})/M({oxide}) = wt% × {factor:.5g} "
            "(atomic weights of zoneprofile.minerals.atomic)")
    return oxide, factor, note


def blank_note(n_blank: int, col: str) -> str | None:
    if not n_blank:
        return None
    return (f"{n_blank} point(s) with an empty {col} cell (below detection or not analysed) were left out of "
            "the fit, not read as zero")


def censored_note(n_censored: int, col: str) -> str | None:
    if not n_censored:
        return None
    return (f"{n_censored} censored analyses left out: {col} below detection ('<0.01', 'bdl', 'n.d.', ...) "
            "is not a measured value; the fit uses the other points (give the value if it was measured)")
