"""Running a campaign: tasks, cache, execution, population, provenance, outputs."""

from __future__ import annotations

import base64
import hashlib
import platform
import re
import sys
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

from zoneprofile import __version__
from zoneprofile._outdir import OutputFolder
from zoneprofile._output import to_jsonable
from zoneprofile._validation import InputError
from zoneprofile.campaign._cache import ResultCache, task_key
from zoneprofile.campaign._executors import Progress, execute
from zoneprofile.campaign._pipeline import process_crystal
from zoneprofile.campaign._schema import Campaign, load_campaign
from zoneprofile._api import RunVocabulary  # summary / to_dict / to_frame / _repr_html_

__all__ = ["run_campaign", "execute_campaign", "write_campaign_outputs", "RunSummary", "build_tasks"]


@dataclass
class RunSummary(RunVocabulary):
    """What a campaign run did."""

    out_dir: Path
    records: list
    computed: list = field(default_factory=list)
    from_cache: list = field(default_factory=list)
    failed: list = field(default_factory=list)  # (label, error)
    seconds: float = 0.0
    population: dict | None = None
    provenance: dict | None = None
    figures: list = field(default_factory=list)  # per record: {format: bytes} drawn with the crystal, or None
    notes: list = field(default_factory=list)  # things the user should know about the run itself
    formats: tuple = ("png", "svg")
    figure_width: str = "double"  # print width of the figures (campaign key figure_width)

    def to_frame(self):
        """One row per crystal (the report's crystals table)."""
        from zoneprofile.report.tables import crystals_table

        return crystals_table(self.records)

    @property
    def n_crystals(self) -> int:
        return len(self.records)

    @property
    def all_failed(self) -> bool:
        """Every crystal failed (nothing was read to the end): the run is not a success."""
        return self.n_crystals > 0 and len(self.failed) == self.n_crystals

    def line(self) -> str:
        """One-line summary for the terminal."""
        text = (f"{self.n_crystals} crystals: {len(self.computed)} computed, {len(self.from_cache)} from cache, "
                f"{len(self.failed)} failed; {self.seconds:.1f} s; report in {self.out_dir / 'report.html'}")
        return text


def _sha256_file(path: str, memo: dict) -> tuple[str, bytes]:
    if path not in memo:
        data = Path(path).read_bytes()
        memo[path] = (hashlib.sha256(data).hexdigest(), data)
    return memo[path]


def _figure_formats(formats) -> tuple:
    out = []
    for f in ("png", *formats):
        f = str(f).lower().lstrip(".")
        if f not in out:
            out.append(f)
    return tuple(out)


def build_tasks(campaign: Campaign, *, ship_bytes: bool = False, formats=None) -> list[dict]:
    """One plain task dict per crystal, with its inputs' sha256 and cache key."""
    memo: dict = {}
    tasks = []
    for spec in campaign.crystals:
        inputs = []
        payload = {}
        for item in spec.inputs:
            digest, data = _sha256_file(item["path"], memo)
            inputs.append({"role": item["role"], "path": item["path"], "rel": item["rel"], "sha256": digest})
            if ship_bytes:
                payload[item["rel"]] = data
        task = {
            "sample": spec.sample,
            "crystal": spec.crystal,
            "mineral": spec.parameters["mineral"],
            "inputs": inputs,
            "parameters": to_jsonable(spec.parameters),
            "payload": payload or None,
            "figure_formats": list(formats) if formats else None,
            "figure_width": getattr(campaign, "figure_width", "double"),
        }
        task["key"] = task_key(task, __version__)
        tasks.append(task)
    return tasks


def _check_out_dir(campaign: Campaign, out: Path, force: bool) -> None:
    from zoneprofile._paths import resolve_path

    resolved = resolve_path(out, what="output folder")
    if resolved == campaign.folder or campaign.folder.is_relative_to(resolved):
        message = ("the output folder would replace the campaign's own folder and its inputs; "
                   "choose another --out")
        raise InputError(message, path=out)
    if campaign.cache_dir is not None and campaign.cache_dir.is_relative_to(resolved):
        message = "the output folder would hold the campaign's cache; choose another --out"
        raise InputError(message, path=out)


def _safe_name(text: str) -> str:
    return re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("._") or "x"


def _laws_used(records) -> list:
    ids = sorted({b["law"] for r in records for b in r["boundaries"] if b["law"]})
    out = []
    try:
        from zoneprofile.diffusion import get_law
    except ImportError:  # pragma: no cover
        return [{"id": i} for i in ids]
    for law_id in ids:
        try:
            law = get_law(law_id)
        except Exception:  # noqa: BLE001 - a law id the registry no longer knows
            out.append({"id": law_id, "citation": None, "status": "unknown"})
            continue
        out.append(law.to_dict() if hasattr(law, "to_dict") else {"id": law_id, "citation": law.citation,
                                                                     "status": law.status})
    return out


def _partition_models(records) -> dict:
    """Partition model used per element (plagioclase trace elements), from the fits' set-up."""
    found = {}
    for r in records:
        for b in r["boundaries"]:
            setup = b["model_setup"]
            name = setup.get("partition_model")  # model_setup: the fit's own settings, free-form
            if not name:
                continue
            entry = {"model": name, "mineral": r["mineral"],
                     "a_j_mol": setup.get("partition_a_j_mol"), "b_j_mol": setup.get("partition_b_j_mol"),
                     "initial_condition": setup.get("initial_condition")}
            found.setdefault(str(b["element"]), entry)
    return found


def _provenance(campaign: Campaign, tasks, records, summary, *, workers, scheduler) -> dict:
    inputs = []
    for task in tasks:
        for item in task["inputs"]:
            inputs.append({"path": item["rel"], "sha256": item["sha256"], "role": item["role"],
                           "sample": task["sample"], "crystal": task["crystal"]})
    crystals = {f"{t['sample']}/{t['crystal']}": t["parameters"] for t in tasks}
    return {
        "software": {"name": "zoneprofile", "version": __version__},
        "python": sys.version.split()[0],
        "platform": platform.platform(),
        "created_utc": datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "campaign_file": {"path": str(campaign.path), "sha256": campaign.sha256},
        "inputs": inputs,
        "parameters": {**campaign.settings(), "crystals": crystals},
        "laws": _laws_used(records),
        "partition_model": _partition_models(records),
        "seed": campaign.seed,
        "run": {
            "workers": workers,
            "scheduler": scheduler,
            "computed": list(summary.computed),
            "from_cache": list(summary.from_cache),
            "failed": [{"crystal": label, "error": err} for label, err in summary.failed],
        },
    }


def _extract_map_images(records, folder: Path) -> None:
    """Write map PNGs carried in records to ``folder/figures/maps`` and point the records at them."""
    for r in records:
        m = r["map"]
        if not m or not m.get("image_png_base64"):
            continue
        name = f"map_{_safe_name(r['sample'])}_{_safe_name(r['crystal'])}.png"
        target = folder / "figures" / "maps" / name
        target.parent.mkdir(parents=True, exist_ok=True)
        target.write_bytes(base64.b64decode(m["image_png_base64"]))
        m["picture_png"] = f"figures/maps/{name}"
        del m["image_png_base64"]


def run_campaign(campaign, out_dir, *, workers: int = 1, scheduler: str | None = None, force: bool = False,
                 progress: bool = True, cache: bool = True, allow_outside: bool = False,
                 formats=("png", "svg"), process=None) -> RunSummary:
    """Run every crystal of a campaign and write the report folder.

    Parameters
    ----------
    campaign : Campaign or path-like
        A loaded campaign, or the path of its TOML file.
    out_dir : path-like
        Output folder (``report.html``, ``results.json``, ``tables/``,
        ``figures/``); built under a temporary name and moved into place, so
        an interrupted run leaves no half-written folder.
    workers : int
        Local worker processes (1: run in this process).
    scheduler : str, optional
        Dask scheduler address, or ``"local-cluster"`` to start one on this
        machine with ``workers`` workers. Needs the ``distributed`` extra.
    force : bool
        Replace an existing ``out_dir``.
    progress : bool
        Draw a progress bar on stderr (only when stderr is a terminal).
    cache : bool
        Reuse and store per-crystal records in the campaign's cache folder.
    allow_outside : bool
        Accept input paths outside the campaign folder (when ``campaign`` is a path).
    formats : tuple of str
        Figure formats written under ``figures/`` (PNG always).
    process : callable, optional
        The per-crystal function (default :func:`process_crystal`); for tests.

    Returns
    -------
    RunSummary
    """
    t0 = time.monotonic()
    if not isinstance(campaign, Campaign):
        campaign = load_campaign(campaign, allow_outside=allow_outside)
    out = Path(out_dir)
    _check_out_dir(campaign, out, force)
    # checked (exists, kind, writable) and locked before anything is computed; leftovers of killed runs removed
    target = OutputFolder(out, force=force, command="run")
    try:
        summary = execute_campaign(campaign, workers=workers, scheduler=scheduler, progress=progress, cache=cache,
                                   process=process, formats=formats)
    except BaseException:
        target.release()
        raise
    summary.out_dir = out
    summary.notes[:0] = target.notes
    with target as tmp:
        write_campaign_outputs(summary, tmp)
    summary.seconds = time.monotonic() - t0
    return summary


def execute_campaign(campaign: Campaign, *, workers: int = 1, scheduler: str | None = None,
                     progress: bool = True, cache: bool = True, process=None, formats=("png", "svg"),
                     campaign_path_shown: str | None = None) -> RunSummary:
    """Compute (or fetch from the cache) every crystal's record; write nothing but the cache.

    Returns a :class:`RunSummary` with ``records``, ``population`` and
    ``provenance`` filled in; :func:`write_campaign_outputs` writes them.
    """
    t0 = time.monotonic()
    workers = int(workers)
    if workers < 1:
        raise InputError(f"--workers must be at least 1, got {workers}")
    from zoneprofile.chronology import population_summary

    ship = bool(scheduler) and scheduler != "local-cluster"
    fmts = _figure_formats(formats)
    n = len(campaign.crystals)
    # a line at once, before hashing inputs and reading the cache (seconds for 10,000 crystals)
    bar = Progress(n, enabled=progress, workers=workers)
    bar.phase(f"checking the input files of {n} crystals")
    tasks = build_tasks(campaign, ship_bytes=ship, formats=fmts)
    store = ResultCache(campaign.cache_dir) if (cache and campaign.cache_dir is not None) else None
    records: list = [None] * len(tasks)
    width = getattr(campaign, "figure_width", "double")
    summary = RunSummary(out_dir=Path("."), records=records, formats=fmts, figure_width=width)
    summary.figures = [None] * len(tasks)
    pending = []
    shown = time.monotonic()
    for i, task in enumerate(tasks):
        if store is not None and time.monotonic() - shown > 0.25:
            shown = time.monotonic()
            bar.phase(f"looking up crystals in the cache: {i}/{n}, {len(summary.from_cache)} found")
        hit = store.get(task["key"]) if store is not None else None
        # cached figures are double-column ones: another width is drawn again (the record is reused)
        figures = store.get_figures(task["key"], fmts) if hit is not None and width == "double" else None
        # a mapped crystal cached without the figure formats asked for is drawn again with its map
        # (the map image is not kept in the record); other figures are drawn at the end if missing
        if hit is not None and (figures is not None or not hit["map"]):
            records[i] = hit
            summary.figures[i] = figures
            summary.from_cache.append(f"{task['sample']}/{task['crystal']}")
        else:
            pending.append(i)

    cache_broken: list = []
    done = [len(tasks) - len(pending)]
    bar.update(done[0], cached=len(summary.from_cache), force=True)

    def on_done(k, record):
        i = pending[k]
        task = tasks[i]
        drawn = record.pop("_figures", None)
        figures = {f: base64.b64decode(b) for f, b in drawn.items()} if drawn else None
        if figures is not None and not all(f in figures for f in fmts):
            figures = None
        records[i] = record
        summary.figures[i] = figures
        label = f"{task['sample']}/{task['crystal']}"
        summary.computed.append(label)
        if record["error"]:
            summary.failed.append((label, record["error"]))
        elif store is not None and not cache_broken:
            try:
                store.put(task["key"], record, figures if width == "double" else None)
            except OSError as exc:
                cache_broken.append(True)
                summary.notes.append(f"cache folder {store.folder} is not writable ({exc.strerror or exc}); "
                                     "results were not cached")
        done[0] += 1
        bar.update(done[0], cached=len(summary.from_cache), failed=len(summary.failed))

    try:
        execute([tasks[i] for i in pending], process or process_crystal, on_done, workers=workers,
                scheduler=scheduler)
    finally:
        bar.close()

    records = [to_jsonable(r) for r in records]
    summary.records = records
    summary.population = population_summary(records)
    if tasks and all(not t["parameters"].get("elements") for t in tasks):
        summary.notes.append("zoning only (elements = []): profiles read and zoned, nothing dated")
    summary.provenance = _provenance(campaign, tasks, records, summary, workers=workers, scheduler=scheduler)
    if campaign_path_shown is not None:
        summary.provenance["campaign_file"]["path"] = campaign_path_shown
    summary.seconds = time.monotonic() - t0
    return summary


def write_campaign_outputs(summary: RunSummary, folder, *, formats=None) -> None:
    """Write report.html, results.json, tables/ and figures/ of a computed campaign into ``folder``.

    Crystal figures drawn with their crystals (or taken from the cache) are
    written as they are; the others are drawn here.
    """
    from zoneprofile.report import crystal_figure_name, write_outputs

    folder = Path(folder).absolute()  # figure paths below are handed on as absolute paths
    fmts = summary.formats if formats is None else _figure_formats(formats)
    records = [dict(r) for r in summary.records]
    for r in records:
        if isinstance(r["map"], dict):
            r["map"] = dict(r["map"])
    _extract_map_images(records, folder)
    given = {}
    fig_dir = folder / "figures"
    for i, (record, figures) in enumerate(zip(records, summary.figures or [None] * len(records))):
        if not figures or not all(f in figures for f in fmts):
            continue
        name = crystal_figure_name(record, i)
        fig_dir.mkdir(parents=True, exist_ok=True)
        for fmt in fmts:
            (fig_dir / f"{name}.{fmt}").write_bytes(figures[fmt])
        given[i] = fig_dir / f"{name}.png"
    title = summary.provenance.get("parameters", {}).get("title") or None
    write_outputs(records, summary.population, summary.provenance, folder, formats=tuple(fmts), title=title,
                  crystal_figures=given, figure_width=summary.figure_width)
