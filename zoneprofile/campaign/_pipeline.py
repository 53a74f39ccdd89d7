"""One crystal, start to finish: read -> recalc -> (map) -> zones -> fit -> intervals.

:func:`process_crystal` takes a plain, picklable task dict and returns the
crystal record (a JSON-able dict, see ``docs/run-a-campaign.md``). It never
raises for a problem of the crystal's own data: the record's ``error`` says
what went wrong, so the other crystals of a campaign complete. Interrupts
(``KeyboardInterrupt``, ``SystemExit``) pass through.

Everything the task needs travels in the task, so it runs the same in this
process, in a local worker process or on a Dask worker. Its random draws come
from ``parameters["seed"]`` (derived from the campaign seed and the crystal's
id), never from execution order.
"""

from __future__ import annotations

import base64
import hashlib
import os
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np

from zoneprofile._output import to_jsonable
from zoneprofile._records import BoundaryRecord, CrystalRecord  # the layouts made here, declared once
from zoneprofile._validation import InputError
from zoneprofile.campaign._boundaries import (
    match_position,
    position_window,
    select_boundaries,
)
from zoneprofile.campaign._frames import _column
from zoneprofile.campaign._pictures import calibrated_image, render_figures, render_map

__all__ = ["process_crystal", "boundary_seed", "STAGES"]

#: Stages in the order they run; a failing crystal's error names its stage.
STAGES = ("reading traverse", "reading trace table", "map", "zoning", "fitting", "intervals")

class _Plain(Exception):
    """A crystal-level problem whose message is shown as is."""


class _StageError(Exception):
    def __init__(self, stage, exc):
        self.stage = stage
        self.exc = exc
        super().__init__(stage)


def boundary_seed(crystal_seed: int, position_index: int, element: str) -> int:
    """Seed of one fit: from the crystal's seed, the boundary's rank and the element."""
    text = f"{int(crystal_seed)}\x1f{int(position_index)}\x1f{element}".encode("utf-8")
    return int.from_bytes(hashlib.sha256(text).digest()[:4], "big")


def _one_line(exc: BaseException) -> str:
    if isinstance(exc, (InputError, _Plain)):
        return " ".join(str(exc).split())
    text = " ".join(str(exc).split()) or "no message"
    return f"internal error ({type(exc).__name__}): {text}"


def _finite_list(a) -> list:
    out = []
    for v in np.asarray(a, dtype=float).tolist():
        out.append(v if np.isfinite(v) else None)
    return out


def _run_stage(stage, func, *args, timing=None, **kwargs):
    t0 = time.perf_counter()
    try:
        return func(*args, **kwargs)
    except (KeyboardInterrupt, SystemExit, MemoryError):
        raise
    except Exception as exc:  # noqa: BLE001 - reported in the record, others go on
        raise _StageError(stage, exc) from exc
    finally:
        if timing is not None:
            timing[stage] = timing.get(stage, 0.0) + time.perf_counter() - t0


def _input(task, role):
    for item in task["inputs"]:
        if item["role"] == role:
            return item
    return None


def _read_traverse(task, params):
    from zoneprofile.traverse import read_traverse

    item = _input(task, "traverse")
    tr = read_traverse(
        item["path"],
        mineral=task["mineral"],
        rim=params["rim"],
        stage_units=params.get("stage_units"),
        sheet=params.get("sheet"),
        sample=task["sample"],
        crystal=task["crystal"],
        beam_um=params.get("beam_um"),
    )
    table = tr.table
    if not params.get("include_flagged"):
        table = table[table["qc"].astype(str) == "ok"].reset_index(drop=True)
    return tr, table


def _read_trace(task, params, wanted):
    from zoneprofile.io import read_profile

    item = _input(task, "trace")
    return read_profile(item["path"], columns=(), optional=tuple(wanted),
                        include_flagged=bool(params.get("include_flagged")))


def _read_map(task, params, column):
    from zoneprofile.maps import extract_profile

    item = _input(task, "map")
    spots = _input(task, "spots")
    return extract_profile(
        item["path"],
        pixel_um=params.get("pixel_um"),
        spots_path=spots["path"],
        line=tuple(params["line"]),
        rim_normal=bool(params.get("rim_normal", False)),
        width_px=int(params.get("width_px", 1)),
        channel=params.get("channel"),
        column=column,
    )


def _fit_one(x, v, *, element, task, params, an, an_x, an_beam, position, window, neighbours, beam, shape,
             obliquity, obliquity_sd, seed):
    from zoneprofile.diffusion import fit_boundary

    law = params.get("laws", {}).get(element)
    keep = np.isfinite(v)
    x_keep = x[keep]
    return fit_boundary(
        x_keep,
        v[keep],
        element=element,
        mineral=task["mineral"],
        temperature_c=params["temperature_c"],
        temperature_sd_c=params.get("temperature_sd_c"),
        an=an,
        an_distance_um=an_x,
        an_beam_um=an_beam,
        boundary_um=position,
        boundary_window_um=window,
        neighbours_um=neighbours,
        beam_um=beam,
        beam_shape=shape,
        law=law,
        draws=int(params["draws"]),
        seed=seed,
        obliquity_deg=obliquity,
        obliquity_sd_deg=obliquity_sd,
        fo2_pa=params.get("fo2_pa"),
        pressure_mpa=params.get("pressure_mpa"),
        direction=params.get("direction"),
        **({"n_cells": int(params["solver_cells"])} if params.get("solver_cells") else {}),
        budget=_budget_options(params),
    )


def _budget_options(params):
    """The budget settings of one crystal: temperature and law deviates shared per sample, the
    section obliquity and spot deviates per traverse (docs/fitting-and-uncertainty.md)."""
    from zoneprofile.diffusion._budget import BudgetOptions

    return BudgetOptions(
        shared_seed=params.get("sample_seed"), traverse_seed=params.get("seed"),
        beam_sd_um=params.get("beam_sd_um"), growth_width_sd_um=params.get("growth_width_sd_um"),
        section_obliquity=bool(params.get("section_obliquity", True)), fo2_buffer=params.get("fo2_buffer"),
        fo2_delta_log=float(params.get("fo2_delta_log") or 0.0),
        partition_a_sd_j_mol=params.get("partition_a_sd_j_mol"),
    )


def _boundary_entry(result, boundary, element, obliquity) -> BoundaryRecord:
    d = dict(result.to_dict())
    entry = dict(d)
    entry["position_um"] = boundary["position_um"]
    entry["fitted_position_um"] = d.get("position_um")
    entry["kind"] = boundary["kind"]
    entry["recharge"] = boundary["recharge"]
    entry["element"] = element
    entry["obliquity_deg"] = obliquity
    entry.setdefault("warnings", [])
    from zoneprofile.report._curves import merged_curve  # the figures' own merge (fit --plot uses it too)

    entry["curve"] = merged_curve(d["curve"], d["points"])
    draws = getattr(result, "time_draws_days", None)
    entry["time_draws_days"] = _finite_list(draws) if draws is not None else []
    return entry


def _materialise(task):
    """For tasks shipped with their files' bytes: write them to a private folder."""
    payload = task.get("payload")
    if not payload:
        return task, None
    folder = Path(tempfile.mkdtemp(prefix="zoneprofile-task-"))
    inputs = []
    for item in task["inputs"]:
        local = folder / Path(item["rel"]).name if item["rel"].startswith("/") else folder / item["rel"]
        local.parent.mkdir(parents=True, exist_ok=True)
        local.write_bytes(payload[item["rel"]])
        inputs.append({**item, "path": str(local)})
    return {**task, "inputs": inputs, "payload": None}, folder


def process_crystal(task: dict) -> CrystalRecord:
    """Run one crystal through every stage and return its record.

    Parameters
    ----------
    task : dict
        ``sample``, ``crystal``, ``mineral``, ``inputs`` (list of ``{role, path,
        rel, sha256}``), ``parameters`` (merged settings, with ``seed`` and
        ``draws``) and optional ``payload`` (input bytes by ``rel`` for
        workers that do not share the file system).

    Returns
    -------
    dict
        The crystal record; ``error`` is None or one line naming the failing
        stage and the reason.
    """
    from zoneprofile.diffusion._blas import single_thread

    local_task, scratch = _materialise(task)
    try:
        # one BLAS thread per crystal: the matrices are small, crystals run in parallel
        # processes, and a threaded BLAS beside another worker only spins and waits
        with single_thread():
            record, transient = _process(local_task)
    finally:
        if scratch is not None:
            shutil.rmtree(scratch, ignore_errors=True)
    if scratch is not None and record["error"]:
        record["error"] = record["error"].replace(str(scratch) + os.sep, "")
    formats = task.get("figure_formats")
    # a failed crystal is drawn too when its profile was read: the figure shows what was read and zoned
    if formats and (not record["error"] or record["profile"]):
        t0 = time.perf_counter()
        try:
            record["_figures"] = render_figures(record, formats, map_image=transient.get("map_image"),
                                                width=task.get("figure_width") or "double")
            record["timing_s"]["figure"] = time.perf_counter() - t0
        except (KeyboardInterrupt, SystemExit, MemoryError):
            raise
        except Exception as exc:  # noqa: BLE001 - the report draws it again if this fails
            record["warnings"].append(f"crystal figure not drawn with the crystal: {_one_line(exc)}")
    # plain JSON types here, in the worker: the main process only stores and assembles
    return to_jsonable(record)


def _base_record(task) -> CrystalRecord:
    return {
        "sample": task["sample"],
        "crystal": task["crystal"],
        "mineral": task["mineral"],
        "error": None,
        "inputs": [{"path": i["rel"], "sha256": i["sha256"], "role": i["role"]} for i in task["inputs"]],
        "parameters": dict(task["parameters"]),
        "profile": None,
        "trace_profile": None,
        "zones": None,
        "boundaries": [],
        "recharge_intervals_days": [],
        "map": None,
        "model": None,
        "warnings": [],
        "timing_s": {},
    }


def _process(task):
    record = _base_record(task)
    transient = {}
    try:
        _stages(task, record, transient)
    except _StageError as exc:
        record["error"] = f"{exc.stage}: {_one_line(exc.exc)}"
    return record, transient


def _stages(task, record, transient):
    timing = record["timing_s"]
    params = task["parameters"]
    mineral = task["mineral"]
    column = params["column"]
    from zoneprofile.minerals.registry import value_column

    value_columns = {e: value_column(e, mineral) for e in params["elements"]}
    warnings = record["warnings"]

    # 1. read (and recalculate) the traverse
    table = None
    if _input(task, "traverse"):
        tr, table = _run_stage("reading traverse", _read_traverse, task, params, timing=timing)
        if len(table) < 3:
            raise _StageError("reading traverse", InputError(
                f"only {len(table)} points passed QC; at least 3 are needed", path=_input(task, "traverse")["rel"]))
        n_flagged = int(np.count_nonzero(tr.table["qc"].astype(str) != "ok"))
        if n_flagged:
            warnings.append(f"{n_flagged} point(s) flagged by QC "
                            + ("kept (include_flagged = true)" if params.get("include_flagged") else "left out"))
        if getattr(tr, "max_offset_um", None) is not None and tr.max_offset_um > 5.0:
            warnings.append(f"traverse points lie up to {tr.max_offset_um:.1f} µm off a straight line")
        full = tr.table
        profile = {"distance_um": _finite_list(full["distance_um"]), "point": [str(p) for p in full["point"]],
                   "qc": [str(q) for q in full["qc"]]}
        for name in [column, *value_columns.values()]:
            if name in full.columns and name not in profile:
                profile[name] = _finite_list(full[name])
        record["profile"] = profile

    # 2. a separate trace-element table (LA-ICP-MS)
    trace = None
    if _input(task, "trace"):
        from zoneprofile.io.columns import TRACE_ELEMENTS

        wanted = sorted(set(value_columns.values()) | {column} | {f"{e}_ppm" for e in TRACE_ELEMENTS})
        trace = _run_stage("reading trace table", _read_trace, task, params, wanted, timing=timing)
        block = {"distance_um": _finite_list(trace["distance_um"])}
        for name in wanted:
            if name in trace.columns:
                block[name] = _finite_list(trace[name])
        record["trace_profile"] = block

    # 3. a map: calibrated profile along the line, boundary orientations
    map_profile, map_info = None, None
    if _input(task, "map"):
        map_profile, map_info = _run_stage("map", _read_map, task, params, column, timing=timing)
        info = {k: v for k, v in dict(map_info).items() if not str(k).startswith("_")}
        image, stride = calibrated_image(map_info)
        if image is not None:
            transient["map_image"] = (image, stride)
        entry = {
            "line": list(params["line"]),
            "calibration": info["calibration"],
            "boundaries": info["boundaries"],
            "resorption_evidence": info["resorption_evidence"],
            "image_png": None,
        }
        if image is not None:
            line_px = [v / stride for v in params["line"]]
            pixel = params.get("pixel_um")
            try:
                png = render_map(image, line_px, pixel * stride if pixel else None, f"{column} (calibrated)")
                entry["image_png_base64"] = base64.b64encode(png).decode("ascii")
            except (KeyboardInterrupt, SystemExit, MemoryError):
                raise
            except Exception as exc:  # noqa: BLE001 - a picture is not worth failing the crystal
                warnings.append(f"map picture not drawn: {_one_line(exc)}")
        for note in info["warnings"]:
            warnings.append(f"map: {note}")
        record["map"] = entry
        if record["profile"] is None:
            record["profile"] = {"distance_um": _finite_list(map_profile["distance_um"]),
                                 column: _finite_list(map_profile[column]),
                                 "point": [f"map-{k + 1}" for k in range(len(map_profile))],
                                 "qc": ["ok"] * len(map_profile)}
            sd_name = f"{column}_sd"
            if sd_name in map_profile.columns:
                record["profile"][sd_name] = _finite_list(map_profile[sd_name])

    # the zoning profile: traverse, else map, else trace table
    value_sd = None
    extra = None
    species = None
    if table is not None and column in table.columns:
        zx = np.asarray(table["distance_um"], float)
        zv = np.asarray(table[column], float)
        extra_cols = [c for c in table.columns if c.endswith("_ppm") or c in (
            "FeO", "MgO", "SrO", "BaO", "TiO2", "K2O", "Or")]
        extra_cols = [c for c in extra_cols if c != column]
        extra = table[extra_cols].reset_index(drop=True) if extra_cols else None
        if "species" in table.columns:
            species = table["species"].astype(str).to_numpy()
    elif map_profile is not None and column in map_profile.columns:
        zx = np.asarray(map_profile["distance_um"], float)
        zv = np.asarray(map_profile[column], float)
        if f"{column}_sd" in map_profile.columns:
            value_sd = np.asarray(map_profile[f"{column}_sd"], float)
    elif trace is not None and column in trace.columns:
        zx = np.asarray(trace["distance_um"], float)
        zv = np.asarray(trace[column], float)
    else:
        raise _StageError("zoning", InputError(f"no '{column}' values in this crystal's inputs "
                                               f"(set column = \"...\" or add the data)"))
    ok = np.isfinite(zv)
    zx, zv = zx[ok], zv[ok]
    if value_sd is not None:
        value_sd = value_sd[ok]
    if extra is not None:
        extra = extra[ok].reset_index(drop=True)
    # trace elements measured at other positions (laser table) join the zoning evidence,
    # interpolated onto the zoning points (no value beyond the measured range)
    if trace is not None:
        import pandas as pd

        add = {}
        tx = np.asarray(trace["distance_um"], float)
        for name in trace.columns:
            if not str(name).endswith("_ppm"):
                continue
            if (extra is None or name not in extra.columns) and name != column:
                tv = np.asarray(trace[name], float)
                good = np.isfinite(tv)
                if np.count_nonzero(good) >= 3:
                    y = np.interp(zx, tx[good], tv[good])
                    add[name] = np.where((zx >= tx[good].min()) & (zx <= tx[good].max()), y, np.nan)
        if add:
            more = pd.DataFrame(add)
            extra = more if extra is None else pd.concat([extra, more], axis=1)
    if species is not None:
        species = species[ok]

    # 4. zoning
    evidence = None
    if map_info is not None and map_info["resorption_evidence"]:
        evidence = list(map_info["resorption_evidence"])

    def zoning():
        from zoneprofile.zoning import analyse_zoning

        return analyse_zoning(zx, zv, column=column, noise_sd=params.get("noise_sd"), value_sd=value_sd,
                              extra=extra, temperature_c=params["temperature_c"], species=species,
                              boundary_evidence=evidence)

    zres = _run_stage("zoning", zoning, timing=timing)
    zones = zres.to_dict()
    record["zones"] = zones
    boundaries, notes = select_boundaries(zones, params["boundaries"], mineral)
    warnings.extend(notes)
    # neighbours that bound each fit's points: the dated boundaries and every other step
    # (a step that a dated boundary stands for is not its own neighbour)
    chosen = [b["position_um"] for b in boundaries]
    others = [float(st["position_um"]) for st in zones["steps"]
              if match_position(float(st["position_um"]), chosen, sd=st["position_sd_um"]) is None]
    all_positions = sorted(set(others) | set(chosen))

    # 5. fit each boundary with each element
    an = an_x = an_beam = None
    if mineral in ("plagioclase", "alkali-feldspar"):
        if table is not None and _column(table, "An") is not None:
            keep = np.isfinite(np.asarray(table["An"], float))
            an, an_x = np.asarray(table["An"], float)[keep], np.asarray(table["distance_um"], float)[keep]
            an_beam = params.get("beam_um")
        elif map_profile is not None and _column(map_profile, "An") is not None:
            keep = np.isfinite(np.asarray(map_profile["An"], float))
            an = np.asarray(map_profile["An"], float)[keep]
            an_x = np.asarray(map_profile["distance_um"], float)[keep]
        elif trace is not None and _column(trace, "An") is not None:
            keep = np.isfinite(np.asarray(trace["An"], float))
            an, an_x = np.asarray(trace["An"], float)[keep], np.asarray(trace["distance_um"], float)[keep]
    map_bounds = map_info["boundaries"] if map_info is not None else []
    map_positions = [float(b["position_um"]) for b in map_bounds if b["position_um"] is not None]

    # model = "crystal": the whole-crystal model dates a crystal of two or more boundaries from
    # the zoning's positions, instead of (not after) the Monte Carlo per-boundary fits; a
    # one-boundary crystal, or one the model cannot take, is dated boundary by boundary
    if params.get("model") == "crystal" and params["elements"]:
        from zoneprofile.campaign._crystal_stage import crystal_first

        if crystal_first(record, boundaries, params, task, table=table, trace=trace, map_profile=map_profile,
                         an=an, an_x=an_x, an_beam=an_beam, timing=timing, run_stage=_run_stage,
                         map_obliquity=[b["obliquity_deg"] for b in map_bounds]):
            return

    fitted = []
    failures = []
    for rank, boundary in enumerate(boundaries):
        obliquity = params.get("obliquity_deg")
        k = match_position(boundary["position_um"], map_positions, sd=boundary["position_sd_um"])
        if k is not None and map_bounds[k]["obliquity_deg"] is not None:
            obliquity = float(map_bounds[k]["obliquity_deg"])
        obliquity_sd = 0.0
        if k is not None and map_bounds[k]["obliquity_sd_deg"] is not None:
            obliquity_sd = float(map_bounds[k]["obliquity_sd_deg"])
        window = position_window(boundary, params.get("boundary_window_um"))
        # the window is drawn by the fit: outside each neighbour's diffused zone (diffusion._window)
        neighbours = [p for p in all_positions if abs(p - boundary["position_um"]) > 1e-9]
        for element in params["elements"]:
            name = value_columns[element]
            x = v = None
            beam, shape = params.get("beam_um"), params.get("beam_shape", "gaussian")
            if table is not None and _column(table, name) is not None:
                x, v = np.asarray(table["distance_um"], float), _column(table, name)
            elif trace is not None and _column(trace, name) is not None:
                x, v = np.asarray(trace["distance_um"], float), _column(trace, name)
                beam, shape = params.get("trace_beam_um"), params.get("trace_beam_shape", "square")
                if beam is None:
                    note = ("trace_beam_um not given: the LA-ICP-MS spot size is not convolved into the model, "
                            "times may be overestimated")
                    if note not in warnings:
                        warnings.append(note)
            elif map_profile is not None and _column(map_profile, name) is not None:
                x, v = np.asarray(map_profile["distance_um"], float), _column(map_profile, name)
                beam = None
            if x is None:
                failures.append(f"{element} at {boundary['position_um']:.1f} µm: no '{name}' values in the inputs")
                continue
            seed = boundary_seed(params["seed"], rank, element)
            t_fit = time.perf_counter()
            try:
                result = _fit_one(x, v, element=element, task=task, params=params, an=an, an_x=an_x,
                                  an_beam=an_beam, position=boundary["position_um"], window=window,
                                  neighbours=neighbours, beam=beam, shape=shape, obliquity=obliquity,
                                  obliquity_sd=obliquity_sd, seed=seed)
                fitted.append(_boundary_entry(result, boundary, element, obliquity))
            except (KeyboardInterrupt, SystemExit, MemoryError):
                raise
            except Exception as exc:  # noqa: BLE001 - one boundary failing does not sink the crystal
                failures.append(f"{element} at {boundary['position_um']:.1f} µm: {_one_line(exc)}")
            finally:
                timing["fitting"] = timing.get("fitting", 0.0) + time.perf_counter() - t_fit
    for text in failures:
        warnings.append(f"fit failed: {text}")
    if boundaries and not fitted and params["elements"]:  # elements = []: a zoning-only campaign
        raise _StageError("fitting", _Plain("no boundary could be dated: " + failures[0]))
    record["boundaries"] = fitted

    # 6. intervals between successive dated boundaries, draw by draw
    if fitted:
        def intervals():
            from zoneprofile.chronology import crystal_intervals

            return crystal_intervals(fitted)

        record["recharge_intervals_days"] = _run_stage("intervals", intervals, timing=timing)

