"""Campaigns: many crystals, one reproducible run.

A campaign file (TOML) lists samples, crystals and their inputs with the
settings to use; :func:`load_campaign` validates it (messages name the file,
line and key) and :func:`run_campaign` runs every crystal through read ->
recalc -> (map) -> zones -> fit -> intervals as an independent task, caches
each crystal's record by the sha256 of its inputs and parameters, and writes
the report folder. Tasks run in this process, in local worker processes
(``workers``) or on a Dask cluster (``scheduler``) with identical results.
"""

from zoneprofile.campaign._cache import ResultCache, task_key
from zoneprofile.campaign._pipeline import process_crystal
from zoneprofile.campaign._run import (
    RunSummary,
    build_tasks,
    execute_campaign,
    run_campaign,
    write_campaign_outputs,
)
from zoneprofile.campaign._schema import Campaign, CrystalSpec, crystal_seed, load_campaign

__all__ = [
    "load_campaign",
    "run_campaign",
    "execute_campaign",
    "write_campaign_outputs",
    "Campaign",
    "CrystalSpec",
    "RunSummary",
    "process_crystal",
    "build_tasks",
    "crystal_seed",
    "task_key",
    "ResultCache",
]
