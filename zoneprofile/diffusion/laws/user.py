"""User diffusion laws from a small TOML file.

Format (one ``[[law]]`` table per law)::

    [[law]]
    id = "my-sr-plag"                 # lowercase letters, digits, '-', '.', '_'
    element = "Sr"
    mineral = "plagioclase"
    citation = "Author A. (2031) Journal 1:1-10"
    doi = "10.xxxx/yyyy"              # optional
    d0_m2_s = 1.2e-4                  # or log10_d0_m2_s = ..., or ln_d0_m2_s = ...
    ea_kj_mol = 270.0
    log10_per_x_an = -4.1             # optional composition terms (or ln_per_x_an,
                                      # log10_per_x_fe, ln_per_x_fe)
    fo2_exponent = 0.1667             # optional, with fo2_ref_pa (default 1 Pa)
    activation_volume_cm3_mol = 7.0   # optional
    temperature_range_c = [800, 1100] # optional calibrated ranges
    x_an_range = [0.4, 0.9]
    x_fe_range = [0.05, 0.2]
    fo2_range_pa = [1e-10, 1e-5]
    ea_sd_kj_mol = 10.0               # optional one-sigma uncertainties
    log10_d0_sd = 0.3
    anisotropy = "not measured"       # optional text
    notes = "..."                     # optional text

The law is :class:`~zoneprofile.diffusion.laws.arrhenius.ArrheniusLaw` with
status ``USER``. Every problem is reported with the file and the key.
"""

from __future__ import annotations

import math
import re
import tomllib

from zoneprofile._validation import InputError, require_file
from zoneprofile.diffusion.laws.arrhenius import ArrheniusLaw, arrhenius_parameters

__all__ = ["load_user_laws", "law_from_mapping", "KEYS"]

_TEXT = {"id", "element", "mineral", "citation", "doi", "anisotropy", "notes", "phase"}
_NUMBERS = {
    "d0_m2_s",
    "log10_d0_m2_s",
    "ln_d0_m2_s",
    "ea_kj_mol",
    "log10_per_x_an",
    "ln_per_x_an",
    "log10_per_x_fe",
    "ln_per_x_fe",
    "fo2_exponent",
    "fo2_ref_pa",
    "activation_volume_cm3_mol",
    "ea_sd_kj_mol",
    "log10_d0_sd",
    "pivot_temperature_c",
}
_RANGES = {"temperature_range_c", "x_an_range", "x_fe_range", "fo2_range_pa"}
_REQUIRED = ("id", "element", "mineral", "citation", "ea_kj_mol")
#: every key a user law may have
KEYS = tuple(sorted(_TEXT | _NUMBERS | _RANGES))
_ID = re.compile(r"^[a-z0-9][a-z0-9._-]*$")


def load_user_laws(path, *, register: bool = False) -> list:
    """Read user laws from a TOML file; optionally add them to the registry.

    Parameters
    ----------
    path : str or Path
        TOML file with one or more ``[[law]]`` tables (see the module docstring).
    register : bool
        Also add each law to ``LAWS`` (refusing ids that already exist).

    Returns
    -------
    list of ArrheniusLaw
    """
    p = require_file(path, what="law file")
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except UnicodeDecodeError:
        raise InputError("law file is not UTF-8 text", path=p) from None
    except tomllib.TOMLDecodeError as exc:
        text = str(exc)
        m = re.search(r"line (\d+)", text)
        row = int(m.group(1)) if m else None
        message = f"not valid TOML: {text.split(' (at line')[0]}"
        raise InputError(message, path=p, row=row) from None
    extra = sorted(set(data) - {"law"})
    if extra:
        message = f"unknown top-level key '{extra[0]}'; put each law in a [[law]] table"
        raise InputError(message, path=p)
    tables = data.get("law")
    if not isinstance(tables, list) or not tables:
        message = "no [[law]] table found; write each law under a [[law]] header"
        raise InputError(message, path=p)
    laws = []
    seen = set()
    for n, table in enumerate(tables, start=1):
        law = law_from_mapping(table, where=f"law {n}", path=p)
        if law.id in seen:
            message = f"law {n}: id '{law.id}' is used twice in this file"
            raise InputError(message, path=p)
        seen.add(law.id)
        laws.append(law)
    if register:
        from zoneprofile.diffusion.laws.registry import LAWS, register_law

        clash = [law.id for law in laws if law.id in LAWS]
        if clash:
            message = f"law id '{clash[0]}' is already registered; give your law another id"
            raise InputError(message, path=p)
        for law in laws:
            register_law(law)
    return laws


def _number(table, key, where, path):
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        message = f"{where}: key '{key}' must be a number, got {type(value).__name__} {value!r}"
        raise InputError(message, path=path)
    value = float(value)
    if not math.isfinite(value):
        message = f"{where}: key '{key}' must be a finite number"
        raise InputError(message, path=path)
    return value


def _range(table, key, where, path):
    value = table[key]
    ok = isinstance(value, list) and len(value) == 2 and all(
        isinstance(v, (int, float)) and not isinstance(v, bool) for v in value
    )
    if not ok:
        message = f"{where}: key '{key}' must be a list of two numbers [low, high], got {value!r}"
        raise InputError(message, path=path)
    lo, hi = (float(v) for v in value)
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo >= hi:
        message = f"{where}: key '{key}' must have low < high, got [{lo:g}, {hi:g}]"
        raise InputError(message, path=path)
    return lo, hi


def law_from_mapping(table, *, where="law", path=None) -> ArrheniusLaw:
    """Build a user :class:`ArrheniusLaw` from a mapping of the TOML keys."""
    from zoneprofile.diffusion.laws.registry import normalise_element, normalise_mineral

    if not isinstance(table, dict):
        message = f"{where} must be a table of keys, got {type(table).__name__}"
        raise InputError(message, path=path)
    unknown = sorted(set(table) - set(KEYS))
    if unknown:
        message = f"{where}: unknown key '{unknown[0]}'; allowed keys: {', '.join(KEYS)}"
        raise InputError(message, path=path)
    for key in _REQUIRED:
        if key not in table:
            message = f"{where}: key '{key}' is missing"
            raise InputError(message, path=path)
    for key in _TEXT & set(table):
        if not isinstance(table[key], str) or not table[key].strip():
            message = f"{where}: key '{key}' must be non-empty text, got {table[key]!r}"
            raise InputError(message, path=path)
    law_id = table["id"].strip()
    if not _ID.match(law_id):
        message = (
            f"{where}: key 'id' must be lowercase letters, digits, '-', '.' or '_' "
            f"(starting with a letter or digit), got {law_id!r}"
        )
        raise InputError(message, path=path)
    where = f"{where} ('{law_id}')"
    nums = {key: _number(table, key, where, path) for key in _NUMBERS & set(table)}
    ranges = {key: _range(table, key, where, path) for key in _RANGES & set(table)}

    prefactors = [k for k in ("d0_m2_s", "log10_d0_m2_s", "ln_d0_m2_s") if k in nums]
    if len(prefactors) != 1:
        message = (
            f"{where}: give exactly one of the keys 'd0_m2_s', 'log10_d0_m2_s', 'ln_d0_m2_s'"
            + (f" (found {', '.join(prefactors)})" if prefactors else " (none found)")
        )
        raise InputError(message, path=path)
    if "d0_m2_s" in nums and nums["d0_m2_s"] <= 0:
        message = f"{where}: key 'd0_m2_s' must be > 0 m²/s, got {nums['d0_m2_s']:g}"
        raise InputError(message, path=path)
    if nums["ea_kj_mol"] <= 0:
        message = f"{where}: key 'ea_kj_mol' must be > 0 kJ/mol, got {nums['ea_kj_mol']:g}"
        raise InputError(message, path=path)
    if nums["ea_kj_mol"] > 2000:
        message = f"{where}: key 'ea_kj_mol' is in kJ/mol and must be below 2000, got {nums['ea_kj_mol']:g} (J/mol given?)"
        raise InputError(message, path=path)
    for key in ("ea_sd_kj_mol", "log10_d0_sd"):
        if key in nums and nums[key] < 0:
            message = f"{where}: key '{key}' must be >= 0, got {nums[key]:g}"
            raise InputError(message, path=path)
    if "fo2_ref_pa" in nums and "fo2_exponent" not in nums:
        message = f"{where}: key 'fo2_ref_pa' needs the key 'fo2_exponent'"
        raise InputError(message, path=path)
    if "fo2_ref_pa" in nums and nums["fo2_ref_pa"] <= 0:
        message = f"{where}: key 'fo2_ref_pa' must be > 0 Pa, got {nums['fo2_ref_pa']:g}"
        raise InputError(message, path=path)
    if "temperature_range_c" in ranges and ranges["temperature_range_c"][0] <= -273.15:
        message = f"{where}: key 'temperature_range_c' must lie above -273.15 °C"
        raise InputError(message, path=path)
    for key in ("x_an_range", "x_fe_range"):
        if key in ranges and not (0 <= ranges[key][0] and ranges[key][1] <= 1):
            message = f"{where}: key '{key}' holds mole fractions and must lie within [0, 1]"
            raise InputError(message, path=path)
    if "fo2_range_pa" in ranges and ranges["fo2_range_pa"][0] < 0:
        message = f"{where}: key 'fo2_range_pa' must be >= 0 Pa"
        raise InputError(message, path=path)
    if "pivot_temperature_c" in nums and nums["pivot_temperature_c"] <= -273.15:
        message = f"{where}: key 'pivot_temperature_c' must lie above -273.15 °C"
        raise InputError(message, path=path)

    term_keys = ("log10_d0_m2_s", "ln_d0_m2_s", "log10_per_x_an", "ln_per_x_an", "log10_per_x_fe", "ln_per_x_fe")
    try:
        form, params, needs = arrhenius_parameters(
            **{k: nums[k] for k in ("d0_m2_s", "ea_kj_mol", "fo2_exponent", "fo2_ref_pa", "activation_volume_cm3_mol", *term_keys) if k in nums}
        )
    except ValueError:
        used = [k for k in term_keys if k in nums]
        message = f"{where}: mixes log10 and ln terms ({', '.join(used)}); write all of them in one form"
        raise InputError(message, path=path) from None
    sd = {}
    if "ea_sd_kj_mol" in nums:
        sd["ea_kj_mol"] = nums["ea_sd_kj_mol"]
    if "log10_d0_sd" in nums:
        sd[f"{form}_d0_m2_s"] = nums["log10_d0_sd"] * (1.0 if form == "log10" else math.log(10.0))
    comp_range = {k[: -len("_range")]: ranges[k] for k in ("x_an_range", "x_fe_range") if k in ranges}
    element = normalise_element(table["element"])
    mineral = normalise_mineral(table["mineral"])
    return ArrheniusLaw(
        id=law_id,
        element=element,
        mineral=mineral,
        citation=table["citation"].strip(),
        doi=table.get("doi"),
        status="USER",
        formula=_formula(form, params),
        parameters=params,
        parameter_sd=sd,
        t_range_c=ranges.get("temperature_range_c"),
        composition_range=comp_range,
        fo2_range_pa=ranges.get("fo2_range_pa"),
        needs=needs,
        anisotropy=table.get("anisotropy"),
        temperature_separable=True,
        phase=table.get("phase", mineral),
        notes=table.get("notes", ""),
        pivot_temperature_c=nums.get("pivot_temperature_c"),
        form=form,
    )


def _formula(form: str, params: dict) -> str:
    terms = [f"{params[f'{form}_d0_m2_s'][0]:.6g}"]
    for name, label in (("x_an", "X_An"), ("x_fe", "X_Fe")):
        key = f"{form}_per_{name}"
        if key in params:
            terms.append(f"{params[key][0]:+.6g}·{label}")
    if "fo2_exponent" in params:
        terms.append(f"{params['fo2_exponent'][0]:+.6g}·{form}(fO2/{params['fo2_ref_pa'][0]:g} Pa)")
    energy = f"{params['ea_kj_mol'][0]:g} kJ/mol"
    if "activation_volume_cm3_mol" in params:
        energy += f" + {params['activation_volume_cm3_mol'][0]:g} cm³/mol·(P − 1e5 Pa)"
    lhs = "log10 D" if form == "log10" else "ln D"
    denom = "ln10·RT" if form == "log10" else "RT"
    return f"{lhs} = {' '.join(terms)} − ({energy})/({denom})  [m²/s]"
