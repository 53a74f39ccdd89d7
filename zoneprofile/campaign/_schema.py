"""The campaign file: reading, validating and resolving a TOML campaign.

Layout of a campaign file (see ``docs/run-a-campaign.md`` for every key)::

    title = "..."                 # free text
    seed = 7                      # campaign seed; each crystal's seed derives from it and its id
    draws = 1000                  # Monte Carlo draws per fitted boundary

    [defaults]                    # settings for every crystal
    mineral = "plagioclase"
    elements = ["Mg", "Sr"]
    temperature_c = 1000
    temperature_sd_c = 20

    [samples.NAME]                # one table per sample; may override any setting
    temperature_c = 1010

    [[crystals]]                  # one block per crystal; may override any setting
    sample = "NAME"
    id = "p01"
    traverse = "data/p01.csv"     # paths relative to this file

Settings are merged crystal over sample over ``[defaults]`` over built-in
defaults. Every problem raises :class:`~zoneprofile.InputError` naming the
campaign file, the line and the key.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from zoneprofile._validation import InputError
from zoneprofile.campaign._toml_lines import KeyLines
from zoneprofile.minerals.registry import BY_NAME as MINERAL_FACTS  # zoning column, elements, value columns

__all__ = ["Campaign", "CrystalSpec", "load_campaign", "crystal_seed"]

# Built-in defaults (documented in docs/run-a-campaign.md).
BUILTIN = {
    "mineral": "plagioclase",
    "temperature_sd_c": None,  # None: the fit's stated default, named in the output
    "beam_um": None,
    "beam_shape": "gaussian",
    "trace_beam_um": None,
    "trace_beam_shape": "square",
    "rim": "start",
    "stage_units": None,
    "boundaries": "recharge",
    "boundary_window_um": None,
    "laws": {},
    "noise_sd": None,
    "include_flagged": False,
    "obliquity_deg": None,
    "fo2_pa": None,
    "pressure_mpa": None,
    "direction": None,
    "solver_cells": None,
    "section_obliquity": True,
    "beam_sd_um": None,
    "growth_width_sd_um": None,
    "fo2_buffer": None,
    "fo2_delta_log": 0.0,
    "partition_a_sd_j_mol": None,
    "sheet": None,
    "model": "crystal",  # the whole-crystal model (issue 10 goals met: docs/validation.md)
    "comment": "",
}

#: Largest campaign file read (a 10,000-crystal campaign is about 1 MB).
CAMPAIGN_MAX_BYTES = 64_000_000

_TOP_KEYS = ("title", "comment", "seed", "draws", "allow_outside_paths", "cache", "figure_width", "defaults", "samples",
             "crystals")
_SETTING_KEYS = (
    "mineral", "column", "elements", "temperature_c", "temperature_sd_c", "beam_um", "beam_shape",
    "trace_beam_um", "trace_beam_shape", "rim", "stage_units", "boundaries", "boundary_window_um",
    "laws", "noise_sd", "include_flagged", "obliquity_deg", "fo2_pa", "pressure_mpa", "direction", "solver_cells", "sheet",
    "model", "comment",
    "section_obliquity", "beam_sd_um", "growth_width_sd_um", "fo2_buffer", "fo2_delta_log", "partition_a_sd_j_mol",
)
_CRYSTAL_KEYS = _SETTING_KEYS + (
    "sample", "id", "traverse", "trace", "map", "spots", "line", "pixel_um", "channel", "width_px", "rim_normal",
)
_INPUT_KEYS = {"traverse": "traverse", "trace": "trace", "map": "map", "spots": "spots"}


@dataclass
class CrystalSpec:
    """One crystal of a campaign: its inputs and its merged settings."""

    sample: str
    crystal: str
    index: int
    line: int | None
    inputs: list[dict] = field(default_factory=list)  # {role, path (absolute), rel, key}
    parameters: dict = field(default_factory=dict)

    @property
    def label(self) -> str:
        return f"{self.sample}/{self.crystal}"


@dataclass
class Campaign:
    """A validated campaign, paths resolved."""

    path: Path
    folder: Path
    sha256: str
    title: str
    comment: str
    seed: int
    draws: int
    allow_outside: bool
    cache_dir: Path | None
    defaults: dict
    samples: dict
    crystals: list[CrystalSpec]
    figure_width: str = "double"  # print width of the report's figures (zoneprofile/_limits.py CHOICES)

    def settings(self) -> dict:
        """The campaign-level parameters as written into provenance."""
        return {
            "title": self.title,
            "comment": self.comment,
            "seed": self.seed,
            "draws": self.draws,
            "allow_outside_paths": self.allow_outside,
            "figure_width": self.figure_width,
            "defaults": self.defaults,
            "samples": self.samples,
        }


def _sample_seed(campaign_seed: int, sample: str) -> int:
    from zoneprofile.diffusion.draws import sample_seed

    return sample_seed(campaign_seed, sample)


def crystal_seed(campaign_seed: int, sample: str, crystal: str) -> int:
    """Seed of one crystal, from the campaign seed and the crystal's id only.

    Independent of execution order, worker count and scheduler, so a crystal
    gives the same draws wherever and whenever it runs.
    """
    text = f"{int(campaign_seed)}\x1f{sample}\x1f{crystal}".encode("utf-8")
    return int.from_bytes(hashlib.sha256(text).digest()[:4], "big")


class _Context:
    def __init__(self, path: Path, text: str):
        self.path = path
        self.lines = KeyLines(text)

    def fail(self, where: tuple, message: str, *, what: str | None = None) -> InputError:
        line = self.lines.line_of(where)
        key = what if what is not None else _describe(where)
        parts = []
        if line is not None:
            parts.append(f"line {line}")
        if key:
            parts.append(key)
        head = ", ".join(parts)
        err = InputError(f"{head}: {message}" if head else message, path=self.path)
        err.row, err.column = line, key
        return err


def _describe(where: tuple) -> str:
    """'key 'x' of crystal #3' style description of a key path."""
    where = tuple(where)
    if not where:
        return ""
    if where[0] == "crystals" and len(where) >= 2 and isinstance(where[1], int):
        rest = ".".join(str(p) for p in where[2:])
        return f"key '{rest}' of crystal #{where[1] + 1}" if rest else f"crystal #{where[1] + 1}"
    if where[0] == "samples" and len(where) >= 2:
        rest = ".".join(str(p) for p in where[2:])
        return f"key '{rest}' of sample '{where[1]}'" if rest else f"sample '{where[1]}'"
    return "key '" + ".".join(str(p) for p in where) + "'"


def _suggest(name: str, options) -> str:
    close = difflib.get_close_matches(name, list(options), n=1, cutoff=0.6)
    if close:
        return f"; did you mean '{close[0]}'?"
    return "; known keys: " + ", ".join(sorted(options))


def _check_keys(ctx, table: dict, where: tuple, allowed) -> None:
    for key in table:
        if key not in allowed:
            raise ctx.fail(where + (key,), f"unknown key{_suggest(key, allowed)}")


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def _number(ctx, value, where, *, low=None, high=None, unit="", integer=False):
    if integer:
        ok = isinstance(value, int) and not isinstance(value, bool)
        if not ok:
            raise ctx.fail(where, f"expected a whole number, found {type(value).__name__} {value!r}")
    elif not _is_number(value):
        raise ctx.fail(where, f"expected a number, found {type(value).__name__} {value!r}")
    if not math.isfinite(float(value)):
        raise ctx.fail(where, f"expected a finite number, found {value!r}")
    u = f" {unit}" if unit else ""
    valid = f" (valid: {low:g} to {high:g}{u})" if low is not None and high is not None else ""
    if low is not None and value < low:
        raise ctx.fail(where, f"must be at least {low:g}{u}{valid}, found {value:g}{u}")
    if high is not None and value > high:
        raise ctx.fail(where, f"must be at most {high:g}{u}{valid}, found {value:g}{u}")
    return int(value) if integer else float(value)


#: Deepest nesting of tables and lists accepted in a campaign file (it needs 4).
MAX_TOML_DEPTH = 16


def _depth(doc) -> int:
    """Nesting depth of tables and lists, walked without recursion."""
    deepest, stack = 0, [(doc, 1)]
    while stack:
        node, level = stack.pop()
        deepest = max(deepest, level)
        if level > MAX_TOML_DEPTH:
            break
        children = node.values() if isinstance(node, dict) else node
        stack.extend((c, level + 1) for c in children if isinstance(c, (dict, list)))
    return deepest


def _limited(ctx, value, where, key):
    """A number checked against the range shared with the command line (zoneprofile/_limits.py)."""
    from zoneprofile._limits import LIMITS

    lim = LIMITS[key]
    x = _number(ctx, value, where, low=lim.low, high=lim.high, unit=lim.unit, integer=lim.kind is int)
    if lim.low_open and x == lim.low:
        raise ctx.fail(where, f"must be above {lim.low:g} {lim.unit} (valid: {lim.describe()}); {lim.why}")
    return x


def _text(ctx, value, where, *, choices=None):
    if not isinstance(value, str):
        raise ctx.fail(where, f"expected text in quotes, found {type(value).__name__} {value!r}")
    if choices is not None and value not in choices:
        lowered = {c.lower(): c for c in choices}
        if value.strip().lower() in lowered:
            return lowered[value.strip().lower()]
        hint = difflib.get_close_matches(value, list(choices), n=1, cutoff=0.5)
        more = f"; did you mean '{hint[0]}'?" if hint else ""
        raise ctx.fail(where, f"unknown value '{value}', choose one of: {', '.join(choices)}{more}")
    return value


def _boolean(ctx, value, where):
    if not isinstance(value, bool):
        raise ctx.fail(where, f"expected true or false, found {value!r}")
    return value


def _known_laws():
    try:
        from zoneprofile.diffusion import LAWS
    except ImportError:  # pragma: no cover - the diffusion stage ships with the package
        return None
    return LAWS


def _no_default_law(element: str, mineral: str) -> str | None:
    """Why ``element`` in ``mineral`` has no default law, or None when it has one."""
    try:
        from zoneprofile.diffusion import default_law
    except ImportError:  # pragma: no cover
        return None
    try:
        default_law(element, mineral)
    except InputError as exc:
        text = exc.message.split(";")[0]
        return text
    return None


def _law_needs(law_id, element: str, mineral: str) -> tuple:
    """The composition/condition inputs the law for ``element`` needs (empty when unknown)."""
    try:
        from zoneprofile.diffusion import default_law, get_law

        law = get_law(law_id) if law_id else default_law(element, mineral)
    except (ImportError, InputError):
        return ()
    return tuple(getattr(law, "needs", ()) or ())


def _settings(ctx, table: dict, where: tuple) -> dict:
    """Validate the setting keys present in ``table``; return them normalised."""
    out = {}
    for key, value in table.items():
        if key not in _SETTING_KEYS:
            continue
        w = where + (key,)
        if key == "mineral":
            out[key] = _text(ctx, value, w, choices=tuple(MINERAL_FACTS))
        elif key == "column":
            out[key] = _text(ctx, value, w)
        elif key == "elements":
            items = [value] if isinstance(value, str) else value
            if not isinstance(items, list):  # [] is a zoning-only campaign: read and zone, date nothing
                raise ctx.fail(w, f"expected a list of element names such as [\"Mg\", \"Sr\"] (or [] to date "
                                  f"nothing), found {value!r}")
            names = []
            for item in items:
                names.append(_text(ctx, item, w))
            if len(set(names)) != len(names):
                raise ctx.fail(w, f"an element is listed twice in {names}")
            out[key] = names
        elif key == "temperature_c":
            out[key] = _limited(ctx, value, w, key)
        elif key in ("temperature_sd_c", "beam_um", "trace_beam_um"):
            out[key] = _limited(ctx, value, w, key)
        elif key in ("beam_shape", "trace_beam_shape"):
            out[key] = _text(ctx, value, w, choices=("gaussian", "square"))
        elif key == "rim":
            out[key] = _text(ctx, value, w, choices=("start", "end"))
        elif key == "model":
            out[key] = _text(ctx, value, w, choices=("boundary", "crystal"))
        elif key == "stage_units":
            out[key] = _text(ctx, value, w, choices=("um", "mm"))
        elif key == "boundaries":
            if isinstance(value, str):
                out[key] = _text(ctx, value, w, choices=("recharge", "all"))
            elif isinstance(value, list) and value:
                out[key] = [_number(ctx, v, w, low=0, unit="µm") for v in value]
            else:
                raise ctx.fail(w, f"expected \"recharge\", \"all\" or a list of positions in µm, found {value!r}")
        elif key == "boundary_window_um":
            out[key] = _number(ctx, value, w, low=1, high=10000, unit="µm")
        elif key == "laws":
            if not isinstance(value, dict):
                raise ctx.fail(w, f"expected a table such as {{ Mg = \"law id\" }}, found {value!r}")
            laws = _known_laws()
            chosen = {}
            for element, law_id in value.items():
                lw = w + (element,)
                law_id = _text(ctx, law_id, lw)
                if laws is not None and law_id.strip().lower() not in laws:
                    raise ctx.fail(lw, f"unknown law '{law_id}'{_suggest(law_id, laws)} (see 'zoneprofile laws')")
                chosen[element] = law_id
            out[key] = chosen
        elif key == "noise_sd":
            if _is_number(value) and value == 0:
                raise ctx.fail(w, "must be > 0; leave it out to estimate the noise from the profile")
            out[key] = _limited(ctx, value, w, key)
        elif key == "include_flagged":
            out[key] = _boolean(ctx, value, w)
        elif key == "obliquity_deg":
            out[key] = _number(ctx, value, w, low=0, high=85, unit="°")
        elif key == "fo2_pa":
            out[key] = _number(ctx, value, w, low=1e-20, high=1e5, unit="Pa")
        elif key == "pressure_mpa":
            out[key] = _number(ctx, value, w, low=0, high=5000, unit="MPa")
        elif key == "section_obliquity":
            out[key] = _boolean(ctx, value, w)
        elif key in ("beam_sd_um", "growth_width_sd_um"):
            out[key] = _number(ctx, value, w, low=0, high=100, unit="µm")
        elif key == "fo2_buffer":
            from zoneprofile.diffusion.laws.buffers import BUFFERS

            out[key] = _text(ctx, value, w, choices=(*BUFFERS, "FMQ"))
        elif key == "fo2_delta_log":
            out[key] = _number(ctx, value, w, low=-10, high=10)
        elif key == "partition_a_sd_j_mol":
            out[key] = _number(ctx, value, w, low=0, high=1e6, unit="J/mol")
        elif key == "direction":
            from zoneprofile.diffusion.orientation import parse_direction

            text = ",".join(str(v) for v in value) if isinstance(value, list) else _text(ctx, value, w)
            try:
                parse_direction(text)
            except InputError as exc:
                raise ctx.fail(w, exc.message) from None
            out[key] = text
        elif key == "solver_cells":
            out[key] = _number(ctx, value, w, low=50, high=5000, integer=True)
        elif key in ("sheet", "comment"):
            out[key] = _text(ctx, value, w)
    return out


def _resolve_input(ctx, folder: Path, value, where, *, allow_outside: bool) -> tuple[Path, str]:
    # plain os.path calls and one stat per input: a 10,000-crystal campaign is read in about a second
    import os
    import stat as st_mod

    from zoneprofile._paths import reason

    text = _text(ctx, value, where)
    if not text.strip():
        raise ctx.fail(where, "empty path")
    if "\x00" in text:
        raise ctx.fail(where, "the path holds a NUL character; no file can be named so")
    if len(text) > 4096 or any(len(part.encode("utf-8")) > 255 for part in Path(text).parts):
        raise ctx.fail(where, f"path '{_short(text)}' is too long, longer than the file system allows (a name "
                              "above 255 bytes or a path above 4096 characters)")
    base = str(folder)
    try:
        full_s = os.path.realpath(os.path.join(base, os.path.expanduser(text)))
    except (OSError, ValueError) as exc:
        message = reason(exc) if isinstance(exc, OSError) else str(exc)
        raise ctx.fail(where, f"input '{_short(text)}': {message}") from None
    prefix = base.rstrip(os.sep) + os.sep
    inside = full_s.startswith(prefix)
    if not inside and not allow_outside:
        raise ctx.fail(
            where,
            f"path '{_short(text)}' leads outside the campaign folder {folder}; move the file into the folder, or "
            "set allow_outside_paths = true in the campaign file or pass --allow-outside",
        )
    try:
        info = os.stat(full_s)
    except FileNotFoundError:
        raise ctx.fail(where, f"input file '{_short(text)}' not found (looked for {_short(full_s)})") from None
    except OSError as exc:  # a link loop, a name too long, no permission
        raise ctx.fail(where, f"input '{_short(text)}': {reason(exc)}") from None
    if st_mod.S_ISDIR(info.st_mode):
        raise ctx.fail(where, f"input '{_short(text)}' is a folder, expected a file")
    if not st_mod.S_ISREG(info.st_mode):  # FIFOs and devices would block or never end when read
        from zoneprofile._paths import check_regular_file

        try:
            check_regular_file(full_s, what=f"input file '{_short(text)}'")
        except InputError as exc:
            raise ctx.fail(where, exc.message) from None
    if info.st_size == 0:
        raise ctx.fail(where, f"input file '{_short(text)}' is empty")
    rel = full_s[len(prefix):].replace(os.sep, "/") if inside else full_s
    return Path(full_s), rel


def _short(text: str) -> str:
    from zoneprofile._paths import shown

    return shown(text)


def load_campaign(path, *, allow_outside: bool = False) -> Campaign:
    """Read and validate a campaign file.

    Parameters
    ----------
    path : path-like
        The campaign TOML file. Input paths inside it resolve relative to its
        folder.
    allow_outside : bool
        Accept input paths leading outside the campaign's folder (also set by
        ``allow_outside_paths = true`` in the file).

    Returns
    -------
    Campaign

    Raises
    ------
    InputError
        Naming the file, the line and the key: a syntax error, an unknown key
        (with the closest known key), a value of the wrong type or out of range,
        an unknown mineral, element, law or sample, a missing input file, a path
        leading outside the folder, a duplicated crystal.
    """
    from zoneprofile._paths import read_regular_file, shown

    p = Path(path)
    # FIFOs, devices, link loops, NUL bytes and overlong names refused here in one line (never blocks)
    raw = read_regular_file(p, what="campaign file", max_bytes=CAMPAIGN_MAX_BYTES)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError("campaign file is not UTF-8 text", path=p) from None
    text = text.removeprefix("\ufeff")  # a byte-order mark, as some editors save UTF-8
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        message = " ".join(str(exc).split())
        raise InputError(f"not a valid TOML file: {message}", path=shown(p)) from None
    except RecursionError:  # arrays or inline tables nested thousands deep
        message = f"values nested too deeply (more than {MAX_TOML_DEPTH} levels); a campaign file needs a few"
        raise InputError(message, path=shown(p)) from None
    if _depth(doc) > MAX_TOML_DEPTH:
        message = f"values nested too deeply (more than {MAX_TOML_DEPTH} levels); a campaign file needs a few"
        raise InputError(message, path=shown(p))
    ctx = _Context(p, text)
    folder = p.resolve().parent

    if _depth(doc) > MAX_TOML_DEPTH:
        message = f"values nested too deep (more than {MAX_TOML_DEPTH} levels); a campaign file needs four"
        raise InputError(message, path=p)

    _check_keys(ctx, doc, (), _TOP_KEYS)
    title = _text(ctx, doc.get("title", ""), ("title",))
    comment = _text(ctx, doc.get("comment", ""), ("comment",))
    seed = _limited(ctx, doc.get("seed", 0), ("seed",), "seed")
    draws = _limited(ctx, doc.get("draws", 1000), ("draws",), "draws")
    outside = _boolean(ctx, doc.get("allow_outside_paths", False), ("allow_outside_paths",)) or allow_outside
    from zoneprofile._limits import CHOICES

    width_choices, width_default, _ = CHOICES["figure_width"]
    figure_width = _text(ctx, doc.get("figure_width", width_default), ("figure_width",), choices=width_choices)
    cache_value = doc.get("cache", ".zoneprofile-cache")
    if cache_value is False or cache_value == "":
        cache_dir = None
    else:
        cache_text = _text(ctx, cache_value, ("cache",))
        cache_dir = (folder / Path(cache_text).expanduser()).resolve()

    defaults_table = doc.get("defaults", {})
    if not isinstance(defaults_table, dict):
        raise ctx.fail(("defaults",), "expected a table [defaults]")
    _check_keys(ctx, defaults_table, ("defaults",), _SETTING_KEYS)
    defaults = _settings(ctx, defaults_table, ("defaults",))

    samples_table = doc.get("samples", {})
    if not isinstance(samples_table, dict):
        raise ctx.fail(("samples",), "expected tables [samples.NAME], one per sample")
    samples = {}
    for name, table in samples_table.items():
        where = ("samples", name)
        if not isinstance(table, dict):
            raise ctx.fail(where, f"expected a table [samples.\"{name}\"] with the sample's settings")
        if not name.strip():
            raise ctx.fail(where, "sample name is empty")
        _check_keys(ctx, table, where, _SETTING_KEYS)
        samples[name] = _settings(ctx, table, where)

    crystals_list = doc.get("crystals")
    if crystals_list is None:
        raise InputError("no [[crystals]] blocks; list each crystal with its sample, id and inputs", path=p)
    if not isinstance(crystals_list, list) or not all(isinstance(c, dict) for c in crystals_list):
        raise ctx.fail(("crystals",), "expected [[crystals]] blocks, one per crystal")
    if not crystals_list:
        raise ctx.fail(("crystals",), "no crystals listed")

    crystals: list[CrystalSpec] = []
    seen: dict[tuple, int] = {}
    for i, table in enumerate(crystals_list):
        where = ("crystals", i)
        _check_keys(ctx, table, where, _CRYSTAL_KEYS)
        for required in ("sample", "id"):
            if required not in table:
                raise ctx.fail(where, f"missing key '{required}'")
        sample = _text(ctx, table["sample"], where + ("sample",))
        if sample not in samples:
            if samples_table:
                hint = _suggest(sample, samples)
                raise ctx.fail(where + ("sample",), f"sample '{sample}' has no [samples.\"{sample}\"] table{hint}")
            raise ctx.fail(where + ("sample",), f"sample '{sample}' has no [samples.\"{sample}\"] table; add one")
        crystal = _text(ctx, table["id"], where + ("id",))
        if not crystal.strip():
            raise ctx.fail(where + ("id",), "crystal id is empty")
        if (sample, crystal) in seen:
            raise ctx.fail(where + ("id",), f"crystal '{crystal}' of sample '{sample}' is listed twice "
                           f"(first as crystal #{seen[(sample, crystal)] + 1})")
        seen[(sample, crystal)] = i
        own = _settings(ctx, table, where)
        params = dict(BUILTIN)
        params.update(defaults)
        params.update(samples[sample])
        params.update(own)
        params["laws"] = {**defaults.get("laws", {}), **samples[sample].get("laws", {}), **own.get("laws", {})}
        mineral = params["mineral"]
        info = MINERAL_FACTS[mineral]
        params.setdefault("column", info.zoning_column)
        if "elements" not in params:
            params["elements"] = list(info.default_elements)
        for element in params["elements"]:
            if element not in info.element_names:
                source = where + ("elements",) if "elements" in own else ("defaults", "elements")
                hint = difflib.get_close_matches(element, info.element_names, n=1, cutoff=0.5)
                more = f"; did you mean '{hint[0]}'?" if hint else ""
                raise ctx.fail(source, f"element '{element}' cannot be dated in {mineral}; choose from "
                               f"{', '.join(info.element_names)}{more}", what=_describe(where + ("elements",)))
        for element in params["laws"]:
            if element not in info.element_names:
                raise ctx.fail(where + ("laws",), f"law given for '{element}', which is not an element of "
                               f"{mineral} ({', '.join(info.element_names)})")
        for element in params["elements"]:
            if element not in params["laws"]:
                problem = _no_default_law(element, mineral)
                if problem:
                    source = where + ("elements",) if "elements" in own else ("defaults", "elements")
                    raise ctx.fail(source, f"{problem}; name one with laws = {{ {element} = \"...\" }}",
                                   what=_describe(where + ("elements",)))
        for element in params["elements"]:
            if "fo2_pa" in _law_needs(params["laws"].get(element), element, mineral) and params.get("fo2_pa") is None:
                raise ctx.fail(where, f"the {element} law for {mineral} needs the oxygen fugacity: set fo2_pa "
                               "(Pa) in [defaults], the sample or the crystal's block")
        if "temperature_c" not in params:
            raise ctx.fail(where, f"no temperature_c for crystal '{crystal}'; set it in [defaults], "
                           f"[samples.\"{sample}\"] or the crystal's block")

        inputs = []
        for key, role in _INPUT_KEYS.items():
            if key in table:
                full, rel = _resolve_input(ctx, folder, table[key], where + (key,), allow_outside=outside)
                inputs.append({"role": role, "path": str(full), "rel": rel, "key": key})
        roles = {item["role"] for item in inputs}
        if mineral == "quartz" and "traverse" in roles:
            raise ctx.fail(where + ("traverse",), "quartz has no microprobe recalculation here; give its Ti "
                           "profile as trace = \"...\" (distance_um, Ti_ppm)")
        if not roles & {"traverse", "map", "trace"}:
            raise ctx.fail(where, f"crystal '{crystal}' has no input; give traverse = \"...\", map = \"...\" "
                           "or trace = \"...\"")
        if "map" in roles:
            if "spots" not in roles:
                raise ctx.fail(where + ("map",), "a map needs spots = \"...\" (spot analyses to calibrate it)")
            if "line" not in table:
                raise ctx.fail(where + ("map",), "a map needs line = [x0, y0, x1, y1] (pixels, from the rim inward)")
        elif "spots" in roles or "line" in table:
            key = "spots" if "spots" in roles else "line"
            raise ctx.fail(where + (key,), f"'{key}' is given without map = \"...\"")
        if "line" in table:
            line = table["line"]
            if not isinstance(line, list) or len(line) != 4:
                raise ctx.fail(where + ("line",), f"expected [x0, y0, x1, y1] in pixels, found {line!r}")
            params["line"] = [_number(ctx, v, where + ("line",), low=0) for v in line]
            if params["line"][:2] == params["line"][2:]:
                raise ctx.fail(where + ("line",), "the line starts and ends at the same pixel")
        if "pixel_um" in table:
            params["pixel_um"] = _number(ctx, table["pixel_um"], where + ("pixel_um",), low=1e-3, high=1000, unit="µm")
        if "channel" in table:
            params["channel"] = _text(ctx, table["channel"], where + ("channel",))
        if "width_px" in table:
            params["width_px"] = _number(ctx, table["width_px"], where + ("width_px",), low=1, high=101, integer=True)
        if "rim_normal" in table:
            params["rim_normal"] = _boolean(ctx, table["rim_normal"], where + ("rim_normal",))
        params["draws"] = draws
        params["seed"] = crystal_seed(seed, sample, crystal)
        params["sample_seed"] = _sample_seed(seed, sample)
        if params.get("model") == "crystal":
            params["campaign_seed"] = seed  # the whole-crystal model draws temperatures per sample
        crystals.append(CrystalSpec(sample, crystal, i, ctx.lines.line_of(where), inputs, params))

    return Campaign(
        path=p.resolve(),
        folder=folder,
        sha256=hashlib.sha256(raw).hexdigest(),
        title=title,
        comment=comment,
        seed=seed,
        draws=draws,
        allow_outside=outside,
        cache_dir=cache_dir,
        defaults=defaults,
        samples=samples,
        crystals=crystals,
        figure_width=figure_width,
    )
