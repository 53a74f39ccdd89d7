"""A traverse: recalculated spot analyses with their distance from the rim.

``distance_um`` is 0 at the rim and increases toward the core (docs/design.md).
Positions come from an explicit distance column or from stage X/Y projected on
the total-least-squares line through the points.
"""

from __future__ import annotations

import dataclasses
import hashlib
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from zoneprofile._validation import InputError, require_choice, require_positive
from zoneprofile.io.microprobe import Analyses, read_analyses
from zoneprofile.minerals import MINERALS, get_mineral, recalculate
from zoneprofile._api import TraverseVocabulary  # summary / to_dict / to_frame / _repr_html_

__all__ = ["Traverse", "read_traverse", "project_on_line", "infer_length_unit", "traverse_from_analyses"]

BELOW_DETECTION_POLICIES = ("zero", "flag", "raise")
#: median step (file units) below which coordinates are taken to be mm
MM_STEP_THRESHOLD = 0.25


@dataclass
class Traverse(TraverseVocabulary):
    """Recalculated analyses along one traverse, rim first.

    Attributes
    ----------
    table : DataFrame
        One row per input analysis in rim-to-core order: ``point``,
        ``distance_um``, oxides (wt%), ``total_wt``, cations (pfu), indices,
        ``species``, ``<El>_ppm``, ``censored``, ``qc``, ``_row``.
    sample, crystal, mineral : str
    source : str
        Path of the input table.
    sha256 : str
        SHA-256 of the input file's bytes.
    beam_um : float or None
    max_offset_um : float
        Largest perpendicular distance of a point from the fitted line (0 when
        distances come from a distance column).
    notes : list of str
        What the reader inferred or decided (units, skipped rows, ...).
    """

    table: pd.DataFrame
    sample: str
    crystal: str
    mineral: str
    source: str
    sha256: str
    beam_um: float | None = None
    max_offset_um: float = 0.0
    notes: list[str] = field(default_factory=list)
    position_from: str = ""

    def good(self) -> pd.DataFrame:
        """Rows whose ``qc`` is ``ok``."""
        return self.table[self.table["qc"] == "ok"].reset_index(drop=True)

    @property
    def n_flagged(self) -> int:
        return int((self.table["qc"] != "ok").sum())

    def output_table(self) -> pd.DataFrame:
        """The table as written by ``zoneprofile recalc`` (``row`` = source line)."""
        out = self.table.rename(columns={"_row": "row"})
        cols = [c for c in out.columns if c != "row"] + ["row"]
        return out[cols]


def infer_length_unit(x, y=None) -> tuple[str, float]:
    """Guess mm or µm from the median step between consecutive points.

    Steps of a spot traverse are 1-50 µm (0.001-0.05 mm); a median step
    below 0.25 file units is read as mm, otherwise as µm (common practice).
    Returns (unit, median step in file units).
    """
    x = np.asarray(x, dtype=float)
    steps = np.abs(np.diff(x)) if y is None else np.hypot(np.diff(x), np.diff(np.asarray(y, dtype=float)))
    steps = steps[steps > 0]
    if steps.size == 0:
        return "um", 0.0
    med = float(np.median(steps))
    return ("mm" if med < MM_STEP_THRESHOLD else "um"), med


def project_on_line(x, y) -> tuple[np.ndarray, np.ndarray]:
    """Signed position along, and offset across, the total-least-squares line.

    The line passes through the centroid along the first principal axis of
    the centred coordinates (the direction minimising the sum of squared
    perpendicular distances). Returns (along, across) in the input units.
    """
    pts = np.column_stack([np.asarray(x, float), np.asarray(y, float)])
    centre = pts.mean(axis=0)
    _, _, vt = np.linalg.svd(pts - centre, full_matrices=False)
    u = vt[0]
    v = np.array([-u[1], u[0]])
    return (pts - centre) @ u, (pts - centre) @ v


#: A distance column above this at the rim point is kept but noted (a first
#: spot sits a beam radius or a few µm inside the edge, common practice).
RIM_OFFSET_NOTE_UM = 20.0
#: A point is off the traverse line when its offset exceeds both this many robust
#: standard deviations of the offsets and :data:`OFF_LINE_MIN_UM` (common practice:
#: stage repeatability is about 1 µm; a mistyped digit moves a point by tens to
#: thousands of µm).
OFF_LINE_SIGMAS = 8.0
OFF_LINE_MIN_UM = 5.0


def _robust_projection(x_um, y_um) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Projection on the line through the points, fitted without the points far off it.

    A least-median start (the line through two points, of up to 200 spread-out
    pairs, with the smallest median offset: least median of squares,
    Rousseeuw 1984, J. Am. Stat. Assoc. 79, 871-880) marks points whose offset exceeds
    ``max(OFF_LINE_SIGMAS x 1.4826 MAD, OFF_LINE_MIN_UM)``; the
    total-least-squares line through the others is then refitted until the
    set is stable. A point with a mistyped coordinate would otherwise tilt the
    line and shift every distance. Returns (along, across, off_line) for all
    points on the line fitted to the others.
    """
    x_um, y_um = np.asarray(x_um, float), np.asarray(y_um, float)
    n = x_um.size
    pts_all = np.column_stack([x_um, y_um])
    off = np.zeros(n, dtype=bool)

    def threshold(res):
        mad = 1.4826 * float(np.median(np.abs(res - np.median(res))))
        return max(OFF_LINE_SIGMAS * mad, OFF_LINE_MIN_UM)

    if n >= 4:
        best, best_med = None, np.inf
        m = min(n, 200)
        for k in range(m):
            i = k * n // m
            j = (i + n // 2) % n
            d = pts_all[j] - pts_all[i]
            length = float(np.hypot(*d))
            if length == 0:
                continue
            v = np.array([-d[1], d[0]]) / length
            med = float(np.median(np.abs((pts_all - pts_all[i]) @ v)))
            if med < best_med:
                best, best_med = (pts_all[i], v), med
        if best is not None:
            res = (pts_all - best[0]) @ best[1]
            off = np.abs(res - np.median(res)) > threshold(res)
            if off.sum() > n // 4:
                off[:] = False
    for _ in range(5):
        use = ~off
        centre = pts_all[use].mean(axis=0)
        pts = pts_all - centre
        _, _, vt = np.linalg.svd(pts[use], full_matrices=False)
        u = vt[0]
        v = np.array([-u[1], u[0]])
        along, across = pts @ u, pts @ v
        if n < 4:  # too few points to call one an outlier
            break
        new_off = np.abs(across - np.median(across[use])) > threshold(across[use])
        if np.array_equal(new_off, off) or new_off.sum() > n // 4:
            break
        off = new_off
    return along, across, off


def _sha256(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _distances(a: Analyses, rim: str, stage_units, step_um, notes, off_line=None) -> tuple[np.ndarray, np.ndarray, float, str]:
    d = a.data
    n = len(d)
    rim_index = 0 if rim == "start" else n - 1
    first_row = int(d["_row"].iloc[0])
    if "distance" in d:
        col = a.columns["distance"]
        raw = d["distance"].to_numpy(dtype=float)
        unit = a.units.get("distance") or stage_units
        if unit is None:
            unit, med = infer_length_unit(raw)
            notes.append(f"distance column '{col}' read in {'mm' if unit == 'mm' else 'µm'} (median step {med:g})")
        dist = raw * (1000.0 if unit == "mm" else 1.0)
        if np.ptp(dist) == 0:
            message = "all points have the same distance; a traverse needs points at different positions"
            raise InputError(message, path=a.path, row=first_row, column=col)
        others = np.delete(dist, rim_index)
        if np.median(others) >= dist[rim_index]:
            # measured away from the rim already. A small positive value at the rim
            # point is the spot's distance from the crystal edge and is kept; a
            # negative one means another zero (stage origin, a boundary): re-zeroed.
            rim_row = int(d["_row"].iloc[rim_index])
            if dist[rim_index] < 0:
                out = dist - dist[rim_index]
                notes.append(
                    f"distance column '{col}' is {dist[rim_index]:g} µm at the rim point (row {rim_row}): "
                    "re-zeroed so the rim point is at 0 µm")
            else:
                out = dist
                if dist[rim_index] > RIM_OFFSET_NOTE_UM:
                    notes.append(
                        f"distance column '{col}' is {dist[rim_index]:g} µm at the rim point (row {rim_row}); kept "
                        "as the spot's distance from the crystal edge: if the column counts from elsewhere, re-zero it")
        else:
            out = dist[rim_index] - dist
            notes.append(f"distance column '{col}' decreases away from the rim: flipped so the rim point is at 0 µm")
        return out, np.zeros(n), 0.0, f"distance column '{col}'"
    if "x" in d and "y" in d:
        x = d["x"].to_numpy(dtype=float)
        y = d["y"].to_numpy(dtype=float)
        unit = stage_units or a.units.get("x") or a.units.get("y")
        if unit is None:
            unit, med = infer_length_unit(x, y)
            notes.append(f"stage coordinates read in {'mm' if unit == 'mm' else 'µm'} (median step {med:g}; override with --stage-units)")
        scale = 1000.0 if unit == "mm" else 1.0
        x_um, y_um = x * scale, y * scale
        if np.ptp(x_um) == 0 and np.ptp(y_um) == 0:
            message = "all points sit at the same stage position; cannot place them along a traverse"
            raise InputError(message, path=a.path, row=first_row, column=a.columns["x"])
        along, across, off = _robust_projection(x_um, y_um)
        if off[rim_index]:
            message = (
                f"the rim point lies {abs(across[rim_index]):.1f} µm off the line through the other points; "
                "check its stage coordinates (a mistyped digit?)"
            )
            raise InputError(message, path=a.path, row=int(d["_row"].iloc[rim_index]), column=a.columns["x"])
        rel = along - along[rim_index]
        sign = 1.0 if np.sum(rel[~off]) >= 0 else -1.0
        for k in np.flatnonzero(off):
            notes.append(
                f"row {int(d['_row'].iloc[k])} lies {abs(across[k]):.1f} µm off the traverse line: flagged in qc "
                "and left out of the line fit (check its stage coordinates)")
        max_offset = float(np.max(np.abs(across[~off])))
        if off_line is not None:
            off_line[:] = off
        return sign * rel, across, max_offset, "stage X/Y"
    if "x" in d or "y" in d:
        which = "x" if "x" in d else "y"
        message = "only one stage coordinate column found; give both X and Y, or a distance column"
        raise InputError(message, path=a.path, row=a.header_row, column=a.columns[which])
    if step_um is not None:
        dist = np.arange(n, dtype=float) * step_um
        if rim == "end":
            dist = dist[::-1].copy()
        return dist, np.zeros(n), 0.0, f"even steps of {step_um:g} µm"
    message = "no stage X/Y or distance column; add them, or give the point spacing with --step-um"
    raise InputError(message, path=a.path, row=a.header_row)


def _select_crystal(a: Analyses, crystal) -> Analyses:
    """Keep one crystal's rows when a Crystal column holds several crystals.

    A Crystal/Grain column with a few repeated values means several traverses
    in one table; projecting them together would be meaningless, so one must
    be chosen. Values unique to each row are labels, not groups, and are left alone.
    """
    d = a.data
    if "crystal" not in d:
        return a
    labels = [str(v).strip() for v in d["crystal"]]
    groups = sorted({v for v in labels if v}, key=labels.index)
    if len(groups) < 2 or len(groups) > len(labels) / 2:
        return a
    if crystal is None or str(crystal).strip() not in groups:
        shown = ", ".join(groups[:8]) + (", ..." if len(groups) > 8 else "")
        what = "choose one with --crystal" if crystal is None else f"no crystal '{crystal}' in it; choose one of them"
        message = f"the table holds {len(groups)} crystals ({shown}); {what}"
        raise InputError(message, path=a.path, row=a.header_row, column=a.columns["crystal"])
    keep = np.array([v == str(crystal).strip() for v in labels])
    return dataclasses.replace(
        a,
        data=d[keep].reset_index(drop=True),
        state={k: v[keep] for k, v in a.state.items()},
        limit={k: v[keep] for k, v in a.limit.items()},
        text={k: v[keep] for k, v in a.text.items()},
        notes=a.notes + [f"kept the {int(keep.sum())} rows of crystal '{crystal}'"],
    )


def traverse_from_analyses(
    a: Analyses,
    *,
    mineral="plagioclase",
    rim="start",
    stage_units=None,
    sample=None,
    crystal=None,
    beam_um=None,
    qc=None,
    below_detection="zero",
    step_um=None,
    **options,
) -> Traverse:
    """Recalculate and place already-read analyses (see :func:`read_traverse`)."""
    m = get_mineral(mineral)
    rim = require_choice(rim, "rim position", ("start", "end"))
    if stage_units is not None:
        stage_units = require_choice(str(stage_units).replace("µ", "u").replace("μ", "u"), "stage units", ("um", "mm"))
    policy = require_choice(below_detection, "below-detection policy", BELOW_DETECTION_POLICIES)
    if beam_um is not None:
        beam_um = require_positive(beam_um, "beam_um")
    if step_um is not None:
        step_um = require_positive(step_um, "step_um")
    d = a.data
    have = set(a.oxides)
    if "Fe2O3" in have:
        have.add("FeO")
    missing = [o for o in m.required if o not in have]
    if missing:
        message = (
            f"{m.name} needs the oxide columns {', '.join(m.required)}; missing: {', '.join(missing)} "
            f"(columns found: {', '.join(a.oxides) or 'none'})"
        )
        suits = [k for k, v in MINERALS.items() if all(o in have for o in v.required)]
        if suits:
            message += f"; these columns suit --mineral {' or '.join(suits)}"
        raise InputError(message, path=a.path, row=a.header_row)
    a = _select_crystal(a, crystal)
    d = a.data
    n = len(d)
    if n < 2:
        message = "only one analysis found; a traverse needs at least two points"
        raise InputError(message, path=a.path, row=int(d["_row"].iloc[0]))

    notes = list(a.notes)
    values = {o: d[o].to_numpy(dtype=float).copy() for o in a.oxides}
    censored_notes: list[list[str]] = [[] for _ in range(n)]
    extra_flags: list[list[str]] = [[] for _ in range(n)]
    for o in a.oxides:
        st = a.state[o]
        for k in np.flatnonzero(st == "censored"):
            if policy == "raise":
                message = "below-detection value (policy 'raise'); use 'zero' to count it as 0"
                raise InputError(message, path=a.path, row=int(d["_row"].iloc[k]), column=a.columns[o], text=a.text[o][k])
            lim = a.limit[o][k]
            if not np.isfinite(lim) and o in a.detection_limit:
                lim = a.detection_limit[o][k]
            censored_notes[k].append(f"{o}<{lim:.3g}" if np.isfinite(lim) else f"{o} {a.text[o][k] or 'bdl'}")
            values[o][k] = 0.0
            if policy == "flag" and o in m.required:
                extra_flags[k].append(f"{o} below detection")
        if o not in m.required:
            for k in np.flatnonzero(st == "missing"):
                censored_notes[k].append(f"{o} blank")
        if o in a.detection_limit:  # measured values under the instrument's limit: kept, but said
            dl = a.detection_limit[o]
            under = (st == "number") & np.isfinite(dl) & (values[o] < dl)
            for k in np.flatnonzero(under):
                censored_notes[k].append(f"{o} {values[o][k]:g} below DL {dl[k]:.3g} (kept)")
    for t in a.traces:
        st = a.state[t]
        for k in np.flatnonzero(st == "censored"):
            lim = a.limit[t][k]
            censored_notes[k].append(f"{t}<{lim:g}" if np.isfinite(lim) else f"{t} {a.text[t][k] or 'bdl'}")

    oxides = pd.DataFrame(values)
    rec = recalculate(oxides, m.name, qc=qc, **options)
    qc_text = rec["qc"].tolist()
    for k in range(n):
        if extra_flags[k]:
            qc_text[k] = "; ".join(([] if qc_text[k] == "ok" else [qc_text[k]]) + extra_flags[k])

    off_line = np.zeros(n, dtype=bool)
    distance, across, max_offset, source = _distances(a, rim, stage_units, step_um, notes, off_line)
    if source == "stage X/Y":
        for k in np.flatnonzero(off_line):  # the points left out of the line fit
            flag = f"off the traverse line by {abs(across[k]):.1f} µm"
            qc_text[k] = flag if qc_text[k] == "ok" else f"{qc_text[k]}; {flag}"
    table = pd.DataFrame({"point": d["point"].to_numpy(), "distance_um": distance + 0.0})
    for c in ("sample", "crystal", "comment"):
        if c in d:
            table[c] = d[c].to_numpy()
    for o in a.oxides:
        table[o] = d[o].to_numpy(dtype=float)
    table = pd.concat([table, rec.drop(columns=["qc"]).reset_index(drop=True)], axis=1)
    if "total_reported" in d:
        rep = d["total_reported"].to_numpy(dtype=float)
        table["total_reported"] = rep
        diff = np.abs(rep - table["total_wt"].to_numpy())
        big = np.isfinite(diff) & (diff > 0.1)
        if big.any():
            notes.append(
                f"the file's total differs from the sum of the oxides read by up to {np.nanmax(diff):.2f} wt% "
                f"({int(big.sum())} points); total_wt is the sum of the oxides read"
            )
    for t in a.traces:
        table[t] = d[t].to_numpy(dtype=float)
    if source == "stage X/Y":
        table["offset_um"] = across
    table["censored"] = ["; ".join(c) for c in censored_notes]
    table["qc"] = qc_text
    table["_row"] = d["_row"].to_numpy()

    idx = np.arange(n) if rim == "start" else np.arange(n)[::-1]  # ties keep the rim-first order
    order = idx[np.argsort(table["distance_um"].to_numpy()[idx], kind="mergesort")]
    table = table.iloc[order].reset_index(drop=True)
    dist_sorted = table["distance_um"].to_numpy()
    for k in range(1, n):
        if dist_sorted[k] == dist_sorted[k - 1]:
            flag = f"same position as point {table['point'].iloc[k - 1]}"
            q = table.at[k, "qc"]
            table.at[k, "qc"] = flag if q == "ok" else f"{q}; {flag}"

    first = ["point", "distance_um", *m.indices, "species", "qc", "total_wt"]
    table = table[[c for c in first if c in table] + [c for c in table.columns if c not in first]]
    convention = m.convention
    if m.name in ("plagioclase", "alkali-feldspar") and options.get("with_ba_sr"):
        convention += " (+Ba+Sr in the denominator)"
    if m.name == "olivine" and options.get("fo_with_mn"):
        convention = convention.replace("Mg/(Mg+Fe2+)", "Mg/(Mg+Fe2+ +Mn)")
    notes.insert(0, convention)
    if any(censored_notes):
        notes.append("below-detection and blank oxide cells are counted as 0 wt% in the formula; the 'censored' column lists them")
    if a.ignored:
        notes.append(f"columns not used: {', '.join(a.ignored)}")

    def _const(col):
        if col in d:
            vals = {v for v in d[col] if v}
            if len(vals) == 1:
                return vals.pop()
        return None

    sample = sample or _const("sample") or a.path.stem
    crystal = crystal or _const("crystal") or a.path.stem
    return Traverse(
        table=table,
        sample=str(sample),
        crystal=str(crystal),
        mineral=m.name,
        source=str(a.path),
        sha256=_sha256(a.path),
        beam_um=beam_um,
        max_offset_um=max_offset,
        notes=notes,
        position_from=source,
    )


def read_traverse(
    path,
    *,
    mineral="plagioclase",
    rim="start",
    stage_units=None,
    sheet=None,
    sample=None,
    crystal=None,
    beam_um=None,
    qc=None,
    below_detection="zero",
    step_um=None,
    **options,
) -> Traverse:
    """Read a table of spot analyses along a traverse and recalculate it.

    Parameters
    ----------
    path : path-like
        CSV, TSV, semicolon (decimal commas), whitespace text or .xlsx.
    mineral : str
        ``plagioclase``, ``alkali-feldspar``, ``olivine`` or ``pyroxene``.
    rim : {"start", "end"}
        Which end of the table is the rim; the output starts at the rim.
    stage_units : {"um", "mm"}, optional
        Units of stage X/Y (and of a distance column without a unit);
        default: from the header or a unit row, else inferred from the
        median step.
    sheet : str, optional
        Workbook sheet name.
    sample, crystal : str, optional
        Default: a constant ``Sample``/``Crystal`` column, else the file name.
    beam_um : float, optional
        Beam (spot) diameter, kept as metadata for later stages.
    qc : dict, optional
        QC overrides, e.g. ``{"total_wt": (98, 102), "m_site": (0.93, 1.07)}``.
    below_detection : {"zero", "flag", "raise"}
        Censored oxide cells: counted as 0 and listed in ``censored``
        (default); also flag the point when a required oxide is censored; or
        refuse the file.
    step_um : float, optional
        Point spacing when the table has neither stage X/Y nor distance.
    **options
        Mineral options: ``with_ba_sr`` (feldspar), ``fo_with_mn`` (olivine).

    Returns
    -------
    Traverse
    """
    get_mineral(mineral)  # an unknown mineral is reported before reading
    a = read_analyses(path, sheet=sheet)
    return traverse_from_analyses(
        a, mineral=mineral, rim=rim, stage_units=stage_units, sample=sample, crystal=crystal,
        beam_um=beam_um, qc=qc, below_detection=below_detection, step_um=step_um, **options,
    )
