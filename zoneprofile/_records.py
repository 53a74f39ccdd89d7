"""The crystal record and its parts, declared once, and the one check of a record read back.

A crystal record is the JSON object the campaign makes for each crystal (kept
in the result cache, listed in ``results.json``) and the report reads. Each of
its parts is declared here as a :class:`typing.TypedDict`: the keys, their
types and which keys may be absent (``NotRequired``). The written description
of the same layout, with units, is ``docs/report.md`` ("The crystal record").

:func:`valid_record` checks a record against these declarations once, when the
cache reads it back: every required key of every part present, every value of
its declared type. A damaged or hand-edited cache file is then computed again,
never reported. Code that holds a checked record (or one the campaign just
made) indexes required keys directly; a ``.get`` on a record part means the key
is optional by its type.

Numbers that a computation may leave undefined (NaN and infinities are written
as JSON ``null``) are declared ``float | None``; positions that locate a
boundary are declared ``float``.
"""
# no "from __future__ import annotations": TypedDict must see NotRequired at class creation

import types
import typing
from typing import Literal, NotRequired, TypedDict

__all__ = [
    "TimeSummary", "FitTime", "Curve", "BoundaryRecord", "Interval", "ZoneStep", "Zone", "ZonesPart",
    "ProfilePart", "TraceProfilePart", "MapBoundary", "MapPart", "ModelChoice", "CrystalModelBoundary",
    "CrystalModelGap", "CrystalModelPart", "InputFile", "CrystalRecord", "PopulationSummary", "PopulationEvent",
    "ElementEvent", "EventMember",
    "valid_record", "STATEMENTS",
]

#: What a time says: a date with its interval, only an upper or a lower bound, or nothing.
STATEMENTS = ("date", "upper_bound", "lower_bound", "none")
Statement = Literal["date", "upper_bound", "lower_bound", "none"]

Number = float | None  # NaN and infinities are stored as null
Values = list[float | None]  # one value per point, null where not finite


# --------------------------------------------------------------------------- times
class TimeSummary(TypedDict):
    """A time of the whole-crystal model (days): an age, a gap, one element's age."""

    median: Number  # null unless statement == "date"
    p2_5: Number
    p97_5: Number
    statement: Statement
    upper_bound: Number  # set when statement == "upper_bound"
    lower_bound: Number  # set when statement == "lower_bound"
    interval_from: NotRequired[str]  # on an age dated from bounds: what bounded it


class FitTime(TypedDict):
    """The time since one boundary formed, from one single-boundary fit (days)."""

    best: Number  # at the best-fitting parameters and nominal temperature
    median: Number
    p2_5: Number
    p16: Number
    p84: Number
    p97_5: Number
    upper_bound: Number
    lower_bound: Number
    statement: Statement


# --------------------------------------------------------------------------- boundaries
class Curve(TypedDict):
    """Model and data of one fit on one axis (``distance_um`` from the rim, µm; values in the
    element's unit); the data are null between the measured points."""

    distance_um: Values
    data: Values
    model: NotRequired[Values]
    initial: NotRequired[Values]
    band_low: NotRequired[Values]  # 95 % band of the model
    band_high: NotRequired[Values]


class BoundaryRecord(TypedDict):
    """One dated boundary and element: one entry of ``record["boundaries"]``."""

    position_um: float  # µm from the rim: the zoning's (or the given) position that was dated
    fitted_position_um: float | None  # µm: where the fit placed it
    kind: str | None  # the zoning step's kind (normal, reverse) or "given"
    recharge: str | None  # the zoning's fingerprint ("recharge-like", ...)
    element: str
    obliquity_deg: float | None  # the angle used (map or setting), None = section default
    mineral: str | None
    law: str  # diffusion law id
    law_citation: str | None
    law_status: str | None
    temperature_c: float  # °C
    temperature_sd_c: Number  # °C, 1σ
    log10_dt_m2: dict[str, Number]  # best, median, p2_5, p16, p84, p97_5, sd_noise (log10 m²)
    time_days: FitTime
    resolved: bool  # the profile is wider than the resolution (a date, not a bound)
    warnings: list[str]
    d_ref_m2_s: Number  # D at the reference composition and temperature, m²/s
    parameters: dict  # fitted parameters: {name: {value, stderr, vary, start, min, max, at_bound}}
    chi2: Number
    reduced_chi2: Number
    n_points: int
    boundary_fixed: bool
    uncertainty_budget_log10_time_sd: dict[str, Number]  # sd of log10 time by source
    uncertainty_budget_settings: dict
    obliquity: dict | None
    temperature_nodes: dict | None
    an_profile: dict
    draws: int  # Monte Carlo draws
    noise_method: str
    model_setup: dict  # the fit's set-up (grid, window, law, ...)
    curve: Curve
    points: dict  # the measured points: distance_um, value, model, residual (lists)
    time_draws_days: Values  # the Monte Carlo draws of the time (days); empty in results.json


class Interval(TypedDict):
    """Time between two successive dated boundaries of one element (days), draw by draw:
    one entry of ``record["recharge_intervals_days"]`` (``chronology.crystal_intervals``)."""

    element: str | None  # None when every element forms one chain
    outer_um: float  # the boundary nearer the rim (µm)
    inner_um: float
    median: Number
    p2_5: Number
    p16: Number
    p84: Number
    p97_5: Number
    mean: Number
    sd: Number
    n_draws: int
    fraction_negative: Number  # share of draws with the inner boundary younger
    resolved: bool  # both boundaries dated (not bounds)
    warnings: list[str]


# --------------------------------------------------------------------------- zoning
class ZoneStep(TypedDict):
    """One step between two zones found by the zoning analysis (µm from the rim)."""

    position_um: float
    position_sd_um: Number
    before: Number  # value on the core side
    after: Number  # value on the rim side
    change: Number  # after - before
    change_se: Number
    kind: str  # "normal" or "reverse"
    width_um: Number  # 10–90 % width of the fitted erf step
    width_resolved: bool
    sharpness: str  # "sharp" or "gradational"
    z_score: Number
    gap_index: int
    window_um: list[float | None]
    columns: dict  # change of each other column across the step: {name: {change, se}}
    recharge: str | None  # the melt fingerprint ("recharge-like", ...), None when not computed
    species_change: dict | None  # {inner_species, outer_species, mantle}, None without species
    resorption: bool  # the step is a resorption surface


class Zone(TypedDict):
    """One zone, listed core to rim (``start_um`` < ``end_um``; the end is the core side)."""

    zone: int
    start_um: float
    end_um: float
    n_points: int
    mean: Number
    sd: Number
    trend_per_um: Number  # change per µm toward the rim
    trend_se: Number
    kind: str
    species: str | None  # the dominant mineral species, None when not known
    boundary_inner: float | None  # the step on the core side (µm), None at the core end
    boundary_outer: float | None  # the step on the rim side (µm), None at the rim


class ZonesPart(TypedDict):
    """``record["zones"]``: the zoning analysis of the profile (``ZoningResult.to_dict``)."""

    column: str  # the zoning column (An, Fo, ...)
    n_points: int
    noise_sd: Number
    noise_source: str
    steps: list[ZoneStep]
    resorption_surfaces: list[dict]
    oscillatory_bands: list[dict]
    zones: list[Zone]
    mantles: list[dict]
    temperature_c: Number
    warnings: list[str]
    settings: dict
    conventions: dict[str, str]
    mixing: NotRequired[dict | None]


# --------------------------------------------------------------------------- profiles and map
class ProfilePart(TypedDict):
    """``record["profile"]``: every point of the traverse (flagged ones too) or of the map
    profile, plus one list per value column read (the zoning column, ``Mg_ppm``, ...)."""

    distance_um: Values  # µm from the rim
    point: list[str]
    qc: list[str]  # "ok" or the reason the point was flagged


class TraceProfilePart(TypedDict):
    """``record["trace_profile"]``: a separate laser table, plus one list per column read."""

    distance_um: Values


class MapBoundary(TypedDict):
    """A boundary the map crosses, with its measured orientation."""

    position_um: float
    obliquity_deg: float | None  # angle between the traverse and the boundary normal
    obliquity_sd_deg: float | None
    truncation: dict  # {assessed, truncated, evidence}: does the boundary cut older zones


class MapPart(TypedDict):
    """``record["map"]``: the calibrated map behind the profile."""

    line: list[float]  # x0, y0, x1, y1 in pixels, rim first
    calibration: dict | None
    boundaries: list[MapBoundary]
    resorption_evidence: list[dict]
    image_png: NotRequired[str | None]
    image_png_base64: NotRequired[str]  # the picture, in the cache; written to figures/maps/
    picture_png: NotRequired[str]  # in results.json: the picture's path under the output folder


# --------------------------------------------------------------------------- whole-crystal model
class ModelChoice(TypedDict):
    """``record["model"]``: which model dated the crystal (``model = "crystal"``)."""

    requested: str
    used: Literal["crystal", "boundary"]
    note: str


class CrystalModelBoundary(TypedDict):
    id: str  # B1, B2, ... oldest first
    position_um: float  # µm from the rim: the zoning's (or the given) position, as in BoundaryRecord
    fitted_position_um: float  # µm: where the model placed it (within the position window)
    age_days: TimeSummary  # the joint age of all elements
    by_element: dict[str, TimeSummary]
    concordance: dict  # {status, reasons}
    shared_sd_log10: NotRequired[Number]


class CrystalModelGap(TypedDict):
    older: str  # boundary id
    younger: str
    days: TimeSummary


class CrystalModelCurve(TypedDict):
    """One element's best joint fit, for the figures (``crystal_model["curves"][element]``)."""

    distance_um: Values  # µm from the rim, first to last analysis
    model: Values  # the fitted profile as the spot sees it (the element's unit)
    grown: Values  # every zone as it grew, before any diffusion (the model's initial condition)


class CrystalModelPart(TypedDict):
    """``record["crystal_model"]`` (docs/whole-crystal-model.md)."""

    boundaries: list[CrystalModelBoundary]
    gaps: list[CrystalModelGap]  # one fewer than boundaries, each between two successive ids
    elements: list[str]
    temperature_c: float
    temperature_sd_c: Number
    n_draws: int
    warnings: list[str]
    method: str
    rim: str
    obliquity: dict | None
    position_window_um: Number
    cell_um: Number
    grid_cells: int
    chi2: Number
    n_points: int
    best_ages_days_at_nominal_temperature: Values
    curves: NotRequired[dict[str, CrystalModelCurve]]  # records cached before the curves were stored lack it
    laws: dict[str, str]
    uncertainty: str
    timing_s: Number  # seconds (None inside the worker until it is measured)


# --------------------------------------------------------------------------- the record
class InputFile(TypedDict):
    path: str
    sha256: str
    role: str  # traverse, trace, map, spots


class CrystalRecord(TypedDict):
    """One crystal's result."""

    sample: str
    crystal: str
    mineral: str
    error: str | None  # "stage: reason" when a stage failed
    inputs: list[InputFile]
    parameters: dict  # the merged settings of the crystal
    boundaries: list[BoundaryRecord]  # one entry per dated boundary and element
    warnings: list[str]
    profile: ProfilePart | None  # None until the profile is read
    trace_profile: TraceProfilePart | None  # None without a laser table
    zones: ZonesPart | None  # None until the zoning ran
    recharge_intervals_days: list[Interval]
    map: MapPart | None  # None without a map
    timing_s: dict[str, float]  # seconds per stage
    crystal_model: NotRequired[CrystalModelPart | None]  # only with model = "crystal"
    model: ModelChoice | None  # None with model = "boundary"


class EventCrystal(TypedDict):
    sample: str
    crystal: str


class PopulationEvent(TypedDict):
    """One recharge event of the population (``population["events"]["events"]``,
    ``event_model.population_events``), oldest first."""

    id: str  # E1, E2, ...
    age_days: TimeSummary  # the event's age and 95 % interval (days)
    log10_days: dict  # mean, se, shared_sd, spread, t_quantile (log10 days)
    weight: float
    n_boundaries: int
    n_dated: int
    n_bounds: int
    n_crystals: int
    fraction_of_crystals: float | None  # of the crystals analysed without error
    by_sample: dict[str, int]  # crystals recording the event, per sample
    n_analysed_by_sample: dict[str, int]
    crystals: list[EventCrystal]
    warnings: list[str]


class EventMember(TypedDict):
    """One boundary placed in the population's events (``population["events"]["members"]``)."""

    sample: str
    crystal: str
    boundary: str  # crystal-model id (B1, ...) or "<position> um"
    position_um: float | None
    element: str | None
    source: str  # "crystal model" or "single fit"
    statement: str  # date, upper_bound, lower_bound, interval
    time_days: dict
    probabilities: dict[str, float]  # {event id: probability}
    event: str | None
    flags: list[str]


class SampleShare(TypedDict):
    n_crystals: int
    n_analysed: int
    fraction: float | None


class ElementEvent(TypedDict):
    """One event of one element's single fits (``population["elements"][el]["events"]``)."""

    id: str  # "<element>-E1", ...
    element: str | None
    median_days: float
    p2_5_days: float
    p97_5_days: float
    age_days: TimeSummary
    basis: str
    spread_log10: float
    member_median_range_days: list[float] | None
    n_boundaries: int
    n_bounds: int
    crystals: list[EventCrystal]
    n_crystals: int
    fraction_of_crystals: float | None
    by_sample: dict[str, SampleShare]
    warnings: list[str]


class PopulationSummary(TypedDict):
    """What ``chronology.population_summary`` returns (computed from the records on every run,
    never cached, so not checked by :func:`valid_record`)."""

    settings: dict
    n_crystals: int
    n_failed: int
    boundaries: list[dict]  # one row per dated boundary: sample, crystal, position_um, element, ...
    unresolved: list[dict]  # boundaries left out of the statistics, with the reason
    elements: dict[str, dict]  # per element: element, campaign, samples, events (ElementEvent), event_model, ...
    events: dict  # population_events: criterion, k, events (PopulationEvent), members (EventMember), excluded


# --------------------------------------------------------------------------- the check
_HINTS: dict = {}


def _hints(td) -> tuple[dict, frozenset]:
    got = _HINTS.get(td)
    if got is None:
        got = _HINTS[td] = (typing.get_type_hints(td), frozenset(td.__required_keys__))
    return got


_NUMBER_OR_NONE = frozenset({float, int, type(None)})


def _conforms(value, hint) -> bool:
    """Whether a JSON value has the declared type (keys not declared are allowed)."""
    if hint is typing.Any:
        return True
    if hint is None or hint is type(None):
        return value is None
    origin = typing.get_origin(hint)
    if isinstance(hint, types.UnionType) or origin is typing.Union:
        args = typing.get_args(hint)
        if set(args) <= _NUMBER_OR_NONE:
            return value is None or _conforms(value, float)
        return any(_conforms(value, a) for a in args)
    if origin is Literal:
        return value in typing.get_args(hint)
    if typing.is_typeddict(hint):
        if not isinstance(value, dict):
            return False
        fields, required = _hints(hint)
        if not required <= value.keys():
            return False
        return all(_conforms(value[k], h) for k, h in fields.items() if k in value)
    if origin is list:
        if not isinstance(value, list):
            return False
        (item,) = typing.get_args(hint)
        if item == (float | None):  # long lists of values: one pass over the types
            return all(type(v) in _NUMBER_OR_NONE for v in value)
        return all(_conforms(v, item) for v in value)
    if origin is dict:
        if not isinstance(value, dict):
            return False
        _, item = typing.get_args(hint)
        return all(_conforms(v, item) for v in value.values())
    if hint is float:
        return type(value) in (float, int)
    if hint is int:
        return type(value) is int
    return isinstance(value, hint)  # str, bool, dict, list


def _crystal_model_ok(cm) -> bool:
    """One gap fewer than boundaries, each between two successive ids (docs/whole-crystal-model.md)."""
    if cm is None:
        return True
    bs, gaps = cm["boundaries"], cm["gaps"]
    if not bs or len(gaps) != len(bs) - 1:
        return False
    return all((g["older"], g["younger"]) == (older["id"], younger["id"])
               for g, older, younger in zip(gaps, bs[:-1], bs[1:]))


def valid_record(record) -> bool:
    """Whether ``record`` has the layout of :class:`CrystalRecord`, parts included (a damaged
    or emptied cache file must be recomputed, never reported as a crystal without a name)."""
    if not _conforms(record, CrystalRecord):
        return False
    if not _crystal_model_ok(record.get("crystal_model")):
        return False
    if record["model"] is not None and record["model"]["used"] == "crystal" and not record.get("crystal_model"):
        return False  # dated by the whole-crystal model, but its result is missing
    return all(record[k].strip() for k in ("sample", "crystal", "mineral"))
