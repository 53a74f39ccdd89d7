"""Seeded synthetic traverse tables with known truth, in any supported dialect.

Used by the tests and the demo: a forward model writes what an instrument
session would export (title lines, unit rows, stage coordinates in mm or µm,
below-detection marks, planted bad analyses) and returns the truth.
"""

from __future__ import annotations

import io as _io
from pathlib import Path

import numpy as np
import pandas as pd

from zoneprofile._output import check_outputs, write_bytes
from zoneprofile._validation import InputError, require_choice
from zoneprofile.minerals import feldspar_oxides, olivine_oxides, pyroxene_oxides
from zoneprofile.minerals.registry import BY_NAME, recalculated_minerals

__all__ = ["synthetic_traverse_table", "DIALECTS", "BAD_KINDS"]

DIALECTS = ("csv", "tsv", "semicolon", "xlsx", "whitespace")
BAD_KINDS = ("crack", "epoxy", "olivine-inclusion", "glass-inclusion", "na-loss", "high-total", "pyroxene-inclusion")
_SPELLINGS = ("plain", "wt%", "lower", "suffix", "feo-star")

# an invented rhyolitic glass (wt%), total below 100 as for a hydrous glass
_GLASS = {"SiO2": 74.0, "TiO2": 0.2, "Al2O3": 12.8, "FeO": 1.6, "MgO": 0.2, "CaO": 1.1, "Na2O": 3.9, "K2O": 3.6}


def _default_profile(mineral: str, n: int, rng) -> dict:
    x = np.linspace(0, 1, n)
    if mineral == "plagioclase":
        an = 48 + 24 / (1 + np.exp(-(x - 0.45) / 0.03)) + 3 * np.sin(2 * np.pi * x * 5) * (x > 0.5)
        return {"an": an, "or_": np.full(n, 1.2)}
    if mineral == "alkali-feldspar":
        return {"an": np.full(n, 2.0), "or_": 40 + 20 * x}
    if mineral == "olivine":
        return {"fo": 78 + 8 / (1 + np.exp(-(x - 0.3) / 0.05))}
    return {"wo": np.full(n, 40.0), "en": 42 + 6 * x, "fs": 18 - 6 * x}


def _oxides_for(mineral: str, comp: dict) -> tuple[pd.DataFrame, np.ndarray, str]:
    if mineral in ("plagioclase", "alkali-feldspar"):
        an, or_ = np.broadcast_arrays(np.asarray(comp["an"], float), np.asarray(comp.get("or_", 0.0), float))
        ox = feldspar_oxides(an, or_)
        ox["FeO"] = 0.35
        return ox, (an if mineral == "plagioclase" else or_), BY_NAME[mineral].zoning_column
    if mineral == "olivine":
        fo = np.asarray(comp["fo"], float)
        ox = olivine_oxides(fo)
        return ox, fo, BY_NAME[mineral].zoning_column
    wo, en, fs = (np.asarray(comp[k], float) for k in ("wo", "en", "fs"))
    ox = pyroxene_oxides(wo, en, fs)
    mg = 100 * en / (en + fs)
    return ox, mg, BY_NAME[mineral].zoning_column


def _bad_oxides(kind: str, row: pd.Series, rng) -> dict:
    r = row.to_dict()
    scale = {"crack": (0.92, 0.96), "epoxy": (0.3, 0.6), "high-total": (1.025, 1.04)}
    if kind in scale:
        f = rng.uniform(*scale[kind])
        return {k: v * f for k, v in r.items()}
    if kind == "na-loss":
        r["Na2O"] = r.get("Na2O", 0.0) * rng.uniform(0.7, 0.8)
        return r
    if kind == "olivine-inclusion":
        ol = olivine_oxides([rng.uniform(70, 85)]).iloc[0].to_dict()
        ol["CaO"] = 0.2
        return ol
    if kind == "pyroxene-inclusion":
        px = pyroxene_oxides([40.0], [45.0], [15.0]).iloc[0].to_dict()
        px["Al2O3"], px["Na2O"] = 3.0, 0.4
        return {k: v * 0.97 for k, v in px.items()}
    if kind == "glass-inclusion":
        return dict(_GLASS)
    raise InputError(f"unknown bad-point kind '{kind}'; choose one of: {', '.join(BAD_KINDS)}")


def _header(name: str, spelling: str) -> str:
    if spelling == "wt%":
        return f"{name} (wt%)"
    if spelling == "lower":
        return name.lower()
    if spelling == "suffix":
        return f"{name}_wt%"
    if spelling == "feo-star" and name == "FeO":
        return "FeO*"
    return name


def synthetic_traverse_table(
    path,
    *,
    mineral: str = "plagioclase",
    composition: dict | None = None,
    n_points: int = 40,
    step_um: float = 2.5,
    seed: int = 0,
    dialect: str = "csv",
    rim: str = "start",
    stage_units: str = "mm",
    distance_column: bool = False,
    jitter_um: float = 0.0,
    noise_rel: float = 0.0,
    decimals: int = 3,
    bad=(),
    censored_marks: bool = True,
    title_lines: int = 2,
    unit_row: bool = False,
    spelling: str = "plain",
    total_column: bool = True,
    trace: dict | None = None,
    sheet: str = "traverse",
    sample: str = "sample A",
    crystal: str = "crystal 1",
    force: bool = False,
) -> pd.DataFrame:
    """Write a seeded synthetic traverse table and return the truth.

    Parameters
    ----------
    path : path-like
        Output file (refused if it exists, unless ``force``).
    mineral : str
        ``plagioclase``, ``alkali-feldspar``, ``olivine`` or ``pyroxene``.
    composition : dict of arrays, optional
        Rim-to-core composition: ``an`` (and ``or_``) for feldspar, ``fo`` for
        olivine, ``wo``, ``en``, ``fs`` for pyroxene (mol%). Default: a zoned
        profile with a step.
    n_points, step_um : int, float
        Number of spots and their spacing along the traverse.
    dialect : {"csv", "tsv", "semicolon", "xlsx", "whitespace"}
        ``semicolon`` writes decimal commas.
    rim : {"start", "end"}
        Where the rim is in the written table.
    stage_units : {"mm", "um"}
        Units of the written stage X/Y (mm with 4 decimals, µm with 2).
    distance_column : bool
        Write ``Distance (µm)`` (from the first row) instead of stage X/Y.
    jitter_um, noise_rel : float
        Perpendicular scatter of the spots; relative 1-sigma noise on oxides.
    decimals : int
        Oxide wt% decimals.
    bad : sequence of str or (index, str)
        Planted bad analyses (kinds in :data:`BAD_KINDS`); a bare kind goes to
        a random point. Indices count from the rim.
    censored_marks : bool
        Write minor oxides (MgO, MnO) with below-detection marks.
    title_lines : int
        Title lines above the header.
    unit_row : bool
        A row of units below the header.
    spelling : {"plain", "wt%", "lower", "suffix", "feo-star"}
        How oxide column names are written.
    total_column : bool
        Write a ``Total`` column (the instrument's sum).
    trace : dict, optional
        Element -> ppm values (rim to core), written as ``<El>_ppm``.

    Returns
    -------
    DataFrame
        Truth in rim-to-core order: ``point``, ``distance_um``, the main
        index (``An``, ``Or``, ``Fo`` or ``Mg_number``), ``bad`` (kind or '').
    """
    mineral = require_choice(mineral, "mineral", recalculated_minerals())
    dialect = require_choice(dialect, "dialect", DIALECTS)
    rim = require_choice(rim, "rim", ("start", "end"))
    stage_units = require_choice(stage_units, "stage units", ("mm", "um"))
    spelling = require_choice(spelling, "spelling", _SPELLINGS)
    (out,) = check_outputs(path, force=force)
    rng = np.random.default_rng(seed)
    n = int(n_points)
    if n < 2:
        raise InputError("n_points must be at least 2")
    comp = composition or _default_profile(mineral, n, rng)
    ox, truth_value, index_name = _oxides_for(mineral, comp)
    n = len(ox)
    kinds = [""] * n
    free = list(rng.permutation(np.arange(1, n)))
    for item in bad:
        if isinstance(item, str):
            k, kind = int(free.pop()), item
        else:
            k, kind = int(item[0]), str(item[1])
        if kind not in BAD_KINDS:
            raise InputError(f"unknown bad-point kind '{kind}'; choose one of: {', '.join(BAD_KINDS)}")
        kinds[k] = kind
    rows = []
    for k in range(n):
        base = ox.iloc[k]
        r = _bad_oxides(kinds[k], base, rng) if kinds[k] else base.to_dict()
        if noise_rel > 0:
            r = {o: v * (1 + noise_rel * rng.standard_normal()) for o, v in r.items()}
        rows.append(r)
    order = ["SiO2", "TiO2", "Al2O3", "FeO", "MnO", "MgO", "CaO", "Na2O", "K2O"]
    table = pd.DataFrame(rows).reindex(columns=[o for o in order if o in set().union(*rows)]).fillna(0.0)

    distance = np.arange(n) * float(step_um)
    angle = rng.uniform(0, 2 * np.pi)
    u = np.array([np.cos(angle), np.sin(angle)])
    v = np.array([-u[1], u[0]])
    origin_um = rng.uniform(5000, 30000, size=2)
    jitter = rng.normal(0, jitter_um, n) if jitter_um > 0 else np.zeros(n)
    xy_um = origin_um + distance[:, None] * u + jitter[:, None] * v

    labels = [f"{crystal.replace(' ', '')}-{k + 1:03d}" for k in range(n)]
    written = pd.DataFrame({"Point": labels})
    if distance_column:
        written["Distance (µm)"] = np.round(distance, 2)
    elif stage_units == "mm":
        written["X"] = np.round(xy_um[:, 0] / 1000, 4)
        written["Y"] = np.round(xy_um[:, 1] / 1000, 4)
    else:
        written["X"] = np.round(xy_um[:, 0], 2)
        written["Y"] = np.round(xy_um[:, 1], 2)
    for o in table.columns:
        vals = np.round(table[o].to_numpy(), decimals)
        written[_header(o, spelling)] = vals.astype(object)
    if censored_marks and mineral in ("plagioclase", "alkali-feldspar"):
        marks = ["<0.02", "bdl", "-", "-0.01", "b.d.l.", "<LOD", "n.d."]
        col = _header("MgO", spelling)
        mgo = table["MgO"].to_numpy() if "MgO" in table else np.zeros(n)
        picks = rng.integers(0, len(marks), n)
        written[col] = [marks[int(i)] if m < 0.05 else v for i, m, v in zip(picks, mgo, np.round(mgo, decimals))]
    if total_column:
        written["Total"] = np.round(table.sum(axis=1).to_numpy(), 2)
    for el, values in (trace or {}).items():
        written[f"{el}_ppm"] = np.round(np.asarray(values, float), 2)
    written["Comment"] = [f"traverse {crystal}" for _ in range(n)]
    truth = pd.DataFrame({"point": labels, "distance_um": distance, index_name: truth_value, "bad": kinds})
    if rim == "end":
        written = written.iloc[::-1].reset_index(drop=True)
        if distance_column:
            written["Distance (µm)"] = np.round(distance, 2)  # measured from the first (core) row
    _write(out, written, dialect=dialect, title_lines=title_lines, unit_row=unit_row, sheet=sheet, sample=sample)
    return truth


def _units_for(columns) -> list[str]:
    out = []
    for c in columns:
        if c in ("X", "Y"):
            out.append("")
        elif c.endswith("_ppm"):
            out.append("ppm")
        elif c in ("Point", "Comment", "Distance (µm)"):
            out.append("")
        else:
            out.append("wt%")
    return out


def _write(path: Path, frame: pd.DataFrame, *, dialect, title_lines, unit_row, sheet, sample):
    titles = [f"Invented session for {sample}", "15 kV, 10 nA, 5 um beam", "generated by zoneprofile"][: max(0, title_lines)]
    titles += [f"note {k}" for k in range(3, title_lines)]
    header = list(frame.columns)
    body = [[_fmt(v, dialect) for v in row] for row in frame.itertuples(index=False)]
    lines = [header] + ([_units_for(header)] if unit_row else []) + body
    if dialect == "xlsx":
        import openpyxl

        wb = openpyxl.Workbook()
        ws0 = wb.active
        ws0.title = "notes"
        ws0.append(["this sheet holds no analyses"])
        ws = wb.create_sheet(sheet)
        for t in titles:
            ws.append([t])
        ws.append(header)
        if unit_row:
            ws.append(_units_for(header))
        for row in frame.itertuples(index=False):
            ws.append([v.item() if hasattr(v, "item") else v for v in row])
        buf = _io.BytesIO()
        wb.save(buf)
        write_bytes(path, buf.getvalue())
        return
    if dialect == "whitespace":
        width = max(12, max(len(str(c)) for r in lines for c in r) + 2)
        text = "\n".join(titles + ["".join(str(c).replace(" ", "_").ljust(width) for c in r) for r in lines])
    else:
        import csv

        sep = {"csv": ",", "tsv": "\t", "semicolon": ";"}[dialect]
        buf = _io.StringIO()
        w = csv.writer(buf, delimiter=sep, lineterminator="\n")
        for t in titles:
            w.writerow([t])
        for r in lines:
            w.writerow(r)
        text = buf.getvalue()
    write_bytes(path, (text.rstrip("\n") + "\n").encode("utf-8"))


def _fmt(v, dialect) -> str:
    if isinstance(v, (float, np.floating)):
        s = repr(float(v))
        if dialect == "semicolon":
            s = s.replace(".", ",")
        return s
    return str(v)
