"""The supplement workbook (``supplement.xlsx``) and the rounding rule shared with the CSV tables.

Rounding rule (``docs/report.md``): a value is given to the digits its own
uncertainty supports. The uncertainty is rounded to two significant digits and
the value to the same decimal place: a time whose 68 % interval half-width is
7.3 d is written 20.1 → 20, one with half-width 0.034 d is written 0.412.
Where the row carries no uncertainty for a value:

* positions and lengths (µm) are given to 0.1 µm (a tenth of the usual
  1–2 µm analysis step, one guard digit; common practice);
* an upper or lower bound keeps two significant digits and is rounded outward
  (an upper bound up, a lower bound down), so the bound still holds;
* an uncertainty (sd, spread) keeps two significant digits;
* a fraction or probability keeps three decimals;
* any other measured number keeps four significant digits, which is more than
  a microprobe or LA-ICP-MS analysis supports.

Counts, flags and text are written as they are. The workbook holds the same
rows and columns as the CSV tables (``tables/``) plus the analyses, laws and
their parameters, the settings of every crystal and the provenance; its header
row gives each column's unit.
"""

from __future__ import annotations

import io
import math
import re
from pathlib import Path

import numpy as np
import pandas as pd

from zoneprofile._output import neutralise_cell, write_bytes

__all__ = ["round_to_sd", "round_sig", "round_bound", "round_table", "column_unit", "supplement_sheets",
           "write_supplement", "SIG_DIGITS_OF_SD"]

from zoneprofile.report.rounding import (  # noqa: F401  (re-exported: the rule lives in rounding.py)
    SIG_DIGITS_OF_SD, SIG_DIGITS_PLAIN, UM_DECIMALS, _finite, round_bound, round_sig, round_table, round_to_sd,
)


#: Unit of a column by its name (suffix rules first, then whole names); "" for text or counts.
_UNIT_SUFFIX = [("_um", "µm"), ("_days", "d"), ("_deg", "°"), ("_sd_c", "°C"), ("_j_mol", "J/mol"),
                ("_m2_s", "m²/s"), ("_ppm", "µg/g"), ("_mpa", "MPa"), ("_pa", "Pa"), ("_s", "s")]
_UNIT_NAME = {"temperature_c": "°C", "An": "mol%", "Fo": "mol%", "Ab": "mol%", "Or": "mol%", "Wo": "mol%",
              "En": "mol%", "Fs": "mol%", "spread_log10": "log10 units", "p_value": "1",
              "fraction_negative": "1", "fraction_of_crystals": "1", "probability": "1",
              "trend_per_um": "column unit/µm", "mean": "column unit", "before": "column unit",
              "after": "column unit", "change": "column unit", "amplitude": "column unit",
              "reduced_chi2": "1", "chi2": "1"}


def column_unit(name: str) -> str:
    """The unit of a table column ("" for text, counts and flags)."""
    if name.endswith("_sd") and len(name) > 3:
        return column_unit(name[:-3])
    if name.startswith("log10_dt_m2"):
        return "log10 m²"
    if name in _UNIT_NAME:
        return _UNIT_NAME[name]
    if name.endswith("_wt"):
        return "wt%"
    for suffix, unit in _UNIT_SUFFIX:
        if name.endswith(suffix):
            return unit
    return ""


def _header(name: str) -> str:
    unit = column_unit(name)
    return f"{name} ({unit})" if unit else name


def analyses_table(records) -> pd.DataFrame:
    """One row per analysis point of every crystal as read (distance, QC flag, compositions)."""
    frames = []
    for r in records:
        prof = r.get("profile") or {}
        if not prof.get("distance_um"):
            continue
        n = len(prof["distance_um"])
        cols = {"sample": [r["sample"]] * n, "crystal": [r["crystal"]] * n,
                "mineral": [r.get("mineral")] * n}
        for k, v in prof.items():
            if isinstance(v, list) and len(v) == n:
                cols[k] = v
        frames.append(pd.DataFrame(cols))
    if not frames:
        return pd.DataFrame(columns=["sample", "crystal", "mineral", "point", "distance_um", "qc"])
    frame = pd.concat(frames, ignore_index=True)
    lead = [c for c in ("sample", "crystal", "mineral", "point", "distance_um", "qc") if c in frame.columns]
    return frame[lead + [c for c in frame.columns if c not in lead]]


def laws_tables(laws) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The laws (one row each, status and validity range in plain columns) and their parameters."""
    entries = list(laws.values()) if isinstance(laws, dict) else list(laws or [])
    rows, params = [], []
    for law in entries:
        t_range = law.get("t_range_c") or [None, None]
        rows.append({"law": law.get("id"), "element": law.get("element"), "mineral": law.get("mineral"),
                     "family": law.get("family"), "status": law.get("status"), "formula": law.get("formula"),
                     "t_min_c": t_range[0], "t_max_c": t_range[1], "citation": law.get("citation"),
                     "doi": law.get("doi")})
        sds = law.get("parameter_sd") or {}
        for name, p in (law.get("parameters") or {}).items():
            value = p.get("value") if isinstance(p, dict) else p
            sd = sds.get(name)
            sd = sd.get("value") if isinstance(sd, dict) else sd
            params.append({"law": law.get("id"), "parameter": name, "value": value, "sd": sd,
                           "unit": p.get("unit") if isinstance(p, dict) else ""})
    return (pd.DataFrame(rows, columns=["law", "element", "mineral", "family", "status", "formula", "t_min_c",
                                        "t_max_c", "citation", "doi"]),
            pd.DataFrame(params, columns=["law", "parameter", "value", "sd", "unit"]))


def _plain(v):
    if isinstance(v, (list, tuple)):
        return "; ".join(str(x) for x in v)
    return v


def settings_table(provenance) -> pd.DataFrame:
    """Every crystal's settings as used (long form: sample/crystal, setting, value)."""
    rows = []
    crystals = ((provenance or {}).get("parameters") or {}).get("crystals") or {}
    for cid, settings in crystals.items():
        for key, value in (settings or {}).items():
            if isinstance(value, dict):
                for sub, v in value.items():
                    rows.append({"crystal": cid, "setting": f"{key}.{sub}", "value": _plain(v)})
            else:
                rows.append({"crystal": cid, "setting": key, "value": _plain(value)})
    return pd.DataFrame(rows, columns=["crystal", "setting", "value"])


def provenance_tables(provenance) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Key/value provenance (software, run, seed, partition models) and the input files with checksums."""
    p = provenance or {}
    rows = []
    soft = p.get("software") or {}
    rows += [{"item": "software", "value": soft.get("name")}, {"item": "version", "value": soft.get("version")}]
    for key in ("python", "platform", "created_utc", "campaign_file", "seed", "command", "title"):
        if p.get(key) is not None:
            rows.append({"item": key, "value": _plain(p.get(key))})
    for el, pm in (p.get("partition_model") or {}).items():
        for key, value in (pm or {}).items():
            rows.append({"item": f"partition_model.{el}.{key}", "value": _plain(value)})
    run = p.get("run") or {}
    for key, value in run.items():
        rows.append({"item": f"run.{key}", "value": _plain(value)})
    if p.get("caution"):
        rows.append({"item": "caution", "value": p.get("caution")})
    inputs = pd.DataFrame([{k: i.get(k) for k in ("sample", "crystal", "role", "path", "sha256")}
                           for i in p.get("inputs") or []], columns=["sample", "crystal", "role", "path", "sha256"])
    return pd.DataFrame(rows, columns=["item", "value"]), inputs


def event_long_tables(population) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The joined-text columns of the event tables as plain rows.

    ``by_sample`` of ``events.csv`` (``S1:3; S2:2``) becomes one row per event
    and sample; ``probabilities`` of ``event_members.csv`` one row per boundary
    and event.
    """
    samples, probs = [], []
    block = (population or {}).get("events") or {}
    for e in block.get("events") or []:  # PopulationEvent (zoneprofile/_records.py): by_sample {sample: n}
        for sample, n in e["by_sample"].items():
            samples.append({"scope": "population", "element": "", "event": e["id"], "sample": sample,
                            "n_crystals": n})
    for el, eb in ((population or {}).get("elements") or {}).items():
        for e in eb["events"]:  # ElementEvent: by_sample {sample: {n_crystals, n_analysed, fraction}}
            for sample, n in e["by_sample"].items():
                samples.append({"scope": "element", "element": e["element"] or el, "event": e["id"],
                                "sample": sample, "n_crystals": n["n_crystals"]})
    for m in block.get("members") or []:  # EventMember
        for event, p in m["probabilities"].items():
            probs.append({"sample": m["sample"], "crystal": m["crystal"], "boundary": m["boundary"],
                          "element": m["element"], "event": event, "probability": p})
    return (pd.DataFrame(samples, columns=["scope", "element", "event", "sample", "n_crystals"]),
            pd.DataFrame(probs, columns=["sample", "crystal", "boundary", "element", "event", "probability"]))


def _about(sheets) -> pd.DataFrame:
    rows = [{"sheet": "about", "content": "This workbook; one plain value per cell, units in the header row."},
            {"sheet": "rounding", "content": (
                "Each value is rounded to the digits its uncertainty supports: the uncertainty (half the 68 % "
                "interval, or the stated sd) to two significant digits, the value to the same decimal place. "
                "Without an uncertainty: positions to 0.1 µm, bounds to two significant digits rounded outward, "
                "fractions to three decimals, other numbers to four significant digits.")}]
    rows += [{"sheet": name, "content": text} for name, (_, text) in sheets.items()]
    return pd.DataFrame(rows, columns=["sheet", "content"])


def supplement_sheets(records, population, provenance) -> dict[str, pd.DataFrame]:
    """The workbook's sheets, in order, as rounded DataFrames (column names as in the CSV tables)."""
    from zoneprofile.report.ladders import gaps_table, members_table
    from zoneprofile.report.tables import crystals_table, events_table, fits_table, intervals_table, zones_table

    laws, law_params = laws_tables((provenance or {}).get("laws") or [])
    prov, inputs = provenance_tables(provenance)
    event_samples, event_probabilities = event_long_tables(population)
    sheets = {
        "crystals": (crystals_table(records), "one row per crystal: status, reason, counts (= tables/crystals.csv)"),
        "analyses": (analyses_table(records), "every analysis point as read, with its QC flag"),
        "zones": (zones_table(records), "zoning features (= tables/zones.csv)"),
        "fits": (fits_table(records), "one row per dated boundary (= tables/fits.csv)"),
        "intervals": (intervals_table(records), "recharge intervals (= tables/intervals.csv)"),
        "events": (events_table(population), "recharge events (= tables/events.csv)"),
        "event_members": (members_table(population), "boundaries in the event model (= tables/event_members.csv)"),
        "gaps": (gaps_table(records, population), "gaps between boundaries (= tables/gaps.csv)"),
        "event_samples": (event_samples, "crystals of each event by sample (the by_sample column, one row each)"),
        "event_probabilities": (event_probabilities,
                                "each boundary's probability of belonging to each event (the probabilities "
                                "column, one row each)"),
        "laws": (laws, "diffusion laws used: status, validity range, citation"),
        "law_parameters": (law_params, "each law's parameters with their unit and sd"),
        "settings": (settings_table(provenance), "every crystal's settings as used"),
        "provenance": (prov, "software, run, seed, partition models"),
        "inputs": (inputs, "input files with their SHA-256 checksums"),
    }
    out = {"about": _about(sheets)}
    for name, (frame, _) in sheets.items():
        out[name] = round_table(frame) if name not in ("law_parameters", "settings", "provenance") else frame
    return out


def _cell(v):
    if v is None:
        return None
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        return float(v) if math.isfinite(v) else None
    if isinstance(v, (list, tuple, dict)):
        v = _plain(v) if not isinstance(v, dict) else "; ".join(f"{k}: {x}" for k, x in v.items())
    if not isinstance(v, (int, str)):
        v = str(v)
    if isinstance(v, str):
        if not v:
            return None
        return neutralise_cell(v)
    return v


def workbook_bytes(sheets: dict[str, pd.DataFrame]) -> bytes:
    """The sheets as an XLSX file (bytes): bold header row with units, frozen, text cells neutralised."""
    from openpyxl import Workbook
    from openpyxl.cell import WriteOnlyCell
    from openpyxl.styles import Font
    from openpyxl.utils import get_column_letter

    bold = Font(bold=True)
    wb = Workbook(write_only=True)  # streamed: about half the time and memory of an ordinary workbook
    for name, frame in sheets.items():
        ws = wb.create_sheet(title=name[:31])
        ws.freeze_panes = "A2"
        for k, col in enumerate(frame.columns, start=1):
            width = max([len(_header(str(col)))] + [len(str(v)) for v in frame[col].head(200)]) + 2
            ws.column_dimensions[get_column_letter(k)].width = min(width, 60)
        header = []
        for c in frame.columns:
            cell = WriteOnlyCell(ws, value=neutralise_cell(_header(str(c))))
            cell.font = bold
            header.append(cell)
        ws.append(header)
        for row in frame.itertuples(index=False, name=None):
            ws.append([_cell(v) for v in row])
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def write_supplement(records, population, provenance, path) -> Path:
    """Write ``supplement.xlsx`` (atomically) and return its path."""
    return write_bytes(Path(path), workbook_bytes(supplement_sheets(records, population, provenance)))
