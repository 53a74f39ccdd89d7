"""Reading the zoning of one profile: every detector in turn, one result.

Order of work: noise → steps in wide windows → residuals (those steps and
per-zone smooth trends removed) → oscillatory bands → steps in short and wide
windows, of which inside a band only those larger than 1.5 × the band's full swing
are kept (a band holding two such steps is a staircase and is dropped) → a
second look for a thin rim zone (:mod:`zoneprofile.zoning.rim`) → zones → species and mantles → other columns across each
step (evidence) → melt equivalents and recharge fingerprint → resorption
surfaces → mixing fractions.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from zoneprofile._validation import InputError, require_in_range, require_positive
from zoneprofile.zoning._local import median_spacing, side_change, side_points
from zoneprofile.zoning.melt import melt_equivalents, mixing_fraction, recharge_fingerprint
from zoneprofile.zoning.noise import estimate_noise_sd
from zoneprofile.zoning.oscillatory import detect_bands
from zoneprofile.zoning.resorption import find_resorption_surfaces
from zoneprofile.zoning.rim import find_rim_step
from zoneprofile.zoning.species import dominant_species, feldspar_species, species_change
from zoneprofile.zoning.steps import detect_steps
from zoneprofile.zoning.stratigraphy import build_zones, zones_table
from zoneprofile._api import ZoningVocabulary  # summary / to_dict / to_frame / _repr_html_

__all__ = ["analyse_zoning", "ZoningResult", "MIN_POINTS", "RANGES"]

#: fewest points a profile needs: two per zone on each side of a step and a noise estimate
MIN_POINTS = 10
#: physical range of composition columns (mol%)
RANGES = {c: (0.0, 100.0) for c in ("An", "Ab", "Or", "Fo", "Wo", "En", "Fs", "Mg_number")}


@dataclass
class ZoningResult(ZoningVocabulary):
    """Everything read from one profile (distances from the rim, µm)."""

    column: str
    noise_sd: float
    noise_source: str
    distance_um: np.ndarray
    value: np.ndarray
    steps: list
    resorption_surfaces: list
    oscillatory_bands: list
    zones: list
    mantles: list
    melt: pd.DataFrame | None = None
    mixing: dict | None = None
    temperature_c: float | None = None
    warnings: list = field(default_factory=list)
    settings: dict = field(default_factory=dict)

    def to_dict(self) -> dict:
        """Plain dict with the ZONES.json keys."""
        zones = [{k: v for k, v in z.items() if k != "indices"} for z in self.zones]
        out = {
            "column": self.column,
            "n_points": int(self.distance_um.size),
            "noise_sd": self.noise_sd,
            "noise_source": self.noise_source,
            "steps": [s.to_dict() for s in self.steps],
            "resorption_surfaces": self.resorption_surfaces,
            "oscillatory_bands": [b.to_dict() for b in self.oscillatory_bands],
            "zones": zones,
            "mantles": self.mantles,
            "temperature_c": self.temperature_c,
            "warnings": list(self.warnings),
            "settings": dict(self.settings),
            "conventions": {
                "distance": "µm from the rim (0) toward the core",
                "step change": "rim-side value minus core-side value; normal < 0 (falls toward the rim)",
                "trend_per_um": "change per µm moving toward the rim; normal zoning < 0",
                "zones": "listed core to rim; start_um < end_um (end_um is the core side)",
                "amplitude": "semi-amplitude of the oscillation (half the swing)",
            },
        }
        if self.mixing is not None:
            out["mixing"] = self.mixing
        return out

    def zones_table(self) -> pd.DataFrame:
        """Paste-ready zone table (core first)."""
        return zones_table(self.zones)

    def points_table(self) -> pd.DataFrame:
        """Per-point table: distance, value, zone, melt equivalents, mixing fraction."""
        t = pd.DataFrame({"distance_um": self.distance_um, self.column: self.value})
        zone_of = np.zeros(self.distance_um.size, dtype=int)
        for z in self.zones:
            zone_of[z["indices"]] = z["zone"]
        t["zone"] = zone_of
        if self.melt is not None:
            for c in self.melt.columns:
                t[c] = self.melt[c].to_numpy()
        return t

    def summary(self) -> str:
        """A few readable lines."""
        lines = [f"{self.column}: {self.distance_um.size} points, noise sd {self.noise_sd:.3g} ({self.noise_source})"]
        for s in self.steps:
            tag = f", {s.extra['recharge']}" if s.extra.get("recharge") else ""
            lines.append(f"  step at {s.position_um:.1f} ± {s.position_sd_um:.1f} µm: {s.before:.1f} → {s.after:.1f} "
                         f"({s.change:+.1f}, {s.kind}, {s.sharpness}{tag})")
        for r in self.resorption_surfaces:
            lines.append(f"  resorption surface at {r['position_um']:.1f} µm: {'; '.join(r['evidence'])}")
        for b in self.oscillatory_bands:
            lines.append(f"  oscillatory band {b.start_um:.1f}–{b.end_um:.1f} µm: wavelength {b.wavelength_um:.2f} µm, "
                         f"amplitude {b.amplitude:.2f}, p = {b.p_value:.2g}")
        lines.append(f"  {len(self.zones)} zone(s) core → rim: "
                     + ", ".join(f"{z['mean']:.1f} ({z['kind']})" for z in self.zones))
        return "\n".join(lines)


def _check_inputs(x, y, column):
    if x.ndim != 1 or y.ndim != 1 or x.size != y.size:
        message = f"distance_um and value must be 1-D and of equal length, got {x.shape} and {y.shape}"
        raise InputError(message)
    if x.size < MIN_POINTS:
        message = f"the profile has {x.size} points; reading zoning needs at least {MIN_POINTS}"
        raise InputError(message, column=column)
    for name, a in (("distance_um", x), (column, y)):
        bad = np.flatnonzero(~np.isfinite(a))
        if bad.size:
            message = f"{name} holds a non-finite value at point {bad[0] + 1}"
            raise InputError(message, column=name)
    d = np.diff(x)
    if np.any(d == 0):
        k = int(np.flatnonzero(d == 0)[0]) + 1
        raise InputError(f"duplicated distance {x[k]:g} µm at point {k + 1}", column="distance_um")
    if np.any(d < 0):
        k = int(np.flatnonzero(d < 0)[0]) + 1
        raise InputError(f"distances must increase from the rim; point {k + 1} ({x[k]:g} µm) follows "
                         f"{x[k - 1]:g} µm", column="distance_um")
    if column in RANGES:
        lo, hi = RANGES[column]
        bad = np.flatnonzero((y < lo) | (y > hi))
        if bad.size:
            message = f"{column} must lie between {lo:g} and {hi:g} mol%; point {bad[0] + 1} has {y[bad[0]]:g}"
            raise InputError(message, column=column)


def _residuals(x, y, steps):
    """Profile minus steps and per-zone smooth trends (NaN on step slopes).

    The trend is a polynomial of degree 3 (≥ 24 points), 2 (≥ 12), 1 (≥ 4) or 0:
    smooth enough to leave oscillations of a few µm untouched.
    """
    edges = [-np.inf] + [s.position_um for s in steps] + [np.inf]
    r = np.full_like(y, np.nan)
    spacing = median_spacing(x)
    slope = np.zeros(x.size, dtype=bool)
    for s in steps:
        slope |= np.abs(x - s.position_um) < 0.5 * s.width_um + 0.5 * spacing
    for lo, hi in zip(edges[:-1], edges[1:]):
        m = (x > lo) & (x < hi) & ~slope
        n = int(m.sum())
        if n < 3:
            continue
        deg = 3 if n >= 24 else (2 if n >= 12 else (1 if n >= 4 else 0))
        t = x[m] - x[m].mean()
        coef = np.polyfit(t, y[m], deg)
        r[m] = y[m] - np.polyval(coef, t)
    return r


def _extra_noise(values):
    v = np.asarray(values, dtype=float)
    ok = np.isfinite(v)
    if ok.sum() >= 5:
        # distances do not matter much for a scale; use the index as position
        return estimate_noise_sd(np.flatnonzero(ok).astype(float), v[ok])
    return float("nan")


def analyse_zoning(
    distance_um,
    value,
    *,
    column="An",
    noise_sd=None,
    value_sd=None,
    extra=None,
    temperature_c=None,
    species=None,
    melt_endmembers=None,
    boundary_evidence=None,
    min_change=None,
    window_um=None,
    max_step_width_um=12.0,
    resorption_min_change=None,
    alpha=0.01,
    partition_model="bindeman1998",
) -> ZoningResult:
    """Read the zoning architecture of one profile.

    Parameters
    ----------
    distance_um, value : array_like
        Distances from the rim (µm, strictly increasing) and the profiled
        quantity (An mol% by default).
    column : str
        Name of the profiled quantity (``An``, ``Fo``, ``Mg_ppm`` ...).
    noise_sd : float, optional
        1-sigma analytical noise; estimated from the profile when absent.
    value_sd : array_like, optional
        Per-point 1-sigma precision; its root-mean-square is the noise when
        ``noise_sd`` is not given.
    extra : DataFrame, optional
        Other columns aligned with the points (FeO, MgO, Mg_ppm, Sr_ppm, Or, ...):
        evidence across steps, melt equivalents, species.
    temperature_c : float, optional
        Temperature for melt equivalents (needed for the recharge fingerprint).
    species : sequence of str, optional
        Species name per point; derived from An (and Or) when absent.
    melt_endmembers : dict, optional
        ``{'Sr_ppm': (first, second), ...}`` end-member melt concentrations for
        lever-rule mixing fractions.
    boundary_evidence : list of dict, optional
        ``[{position_um, evidence: [str]}]`` from maps, merged into resorption
        surfaces.
    min_change, window_um, max_step_width_um, alpha
        Step detector settings (see :func:`zoneprofile.zoning.detect_steps`).
    resorption_min_change : float, optional
        Smallest rise toward the rim of a resorption surface (default An 6,
        Fo 3 mol%).
    partition_model : str
        Plagioclase–melt partition model id.

    Returns
    -------
    ZoningResult
    """
    x = np.asarray(distance_um, dtype=float)
    y = np.asarray(value, dtype=float)
    _check_inputs(x, y, column)
    warnings: list[str] = []
    if extra is not None:
        extra = pd.DataFrame(extra).reset_index(drop=True)
        if len(extra) != x.size:
            message = f"extra has {len(extra)} rows, the profile {x.size} points"
            raise InputError(message)
    if noise_sd is not None:
        sigma = require_positive(noise_sd, "noise_sd")
        source = "given"
    elif value_sd is not None:
        sd = np.asarray(value_sd, dtype=float)
        if sd.shape != x.shape or not np.all(np.isfinite(sd)) or np.any(sd <= 0):
            message = "value_sd must hold one finite, positive precision per point"
            raise InputError(message, column=f"{column}_sd")
        sigma = float(np.sqrt(np.mean(sd**2)))
        source = "per-point precision"
    else:
        sigma = estimate_noise_sd(x, y)
        source = "estimated from the profile"
        if sigma <= 0:
            sigma = max(1e-6 * max(float(np.max(np.abs(y))), 1.0), 1e-12)
            warnings.append("the profile shows no scatter; noise set to a tiny value")
    if temperature_c is not None:
        temperature_c = require_in_range(temperature_c, "temperature_c", 500.0, 1500.0, unit="°C")

    settings_steps = dict(min_change=min_change, window_um=window_um, max_width_um=max_step_width_um, alpha=alpha)
    # bands are sought after removing only the steps seen in wide windows, which
    # average over several swings and so do not cut an oscillation into steps
    # (the two passes share their candidate search and erf fits)
    reuse: dict = {}
    wide = detect_steps(x, y, sigma, windows="wide", reuse=reuse, **settings_steps)
    bands = detect_bands(x, _residuals(x, y, wide), sigma, alpha=alpha)
    steps = detect_steps(x, y, sigma, reuse=reuse, **settings_steps)
    if bands:
        def inside(s):
            return [b for b in bands if b.start_um <= s.position_um <= b.end_um]

        # inside a band only steps clearly larger than its full swing count:
        # 3 × the semi-amplitude, 1.5 swings (a half-cycle seen in a short window can
        # approach one full swing)
        steps = [s for s in steps if not inside(s) or abs(s.change) >= 3.0 * max(b.amplitude for b in inside(s))]
        # a "band" holding two or more such steps is a staircase of close steps
        # (its periodicity came from steps the wide windows missed), not an oscillation
        bands = [b for b in bands if sum(b.start_um <= s.position_um <= b.end_um for s in steps) < 2]

    # a second look for a thin rim zone with zoning of its own (steps.py shares one slope across a jump)
    rim_step = find_rim_step(x, y, sigma, steps, alpha=alpha, min_change=min_change, notes=warnings)
    if rim_step is not None:
        steps = sorted(steps + [rim_step], key=lambda s: s.position_um)

    spacing = median_spacing(x)
    slopes = [(s.position_um - 0.5 * s.width_um - 0.5 * spacing, s.position_um + 0.5 * s.width_um + 0.5 * spacing)
              for s in steps]
    zones = build_zones(x, y, sigma, [s.position_um for s in steps], exclude_um=slopes)

    # species per point
    names = None
    if species is not None:
        names = [None if (v is None or (isinstance(v, float) and np.isnan(v))) else str(v) for v in species]
        if len(names) != x.size:
            raise InputError(f"species has {len(names)} entries, the profile {x.size} points")
    elif column == "An" or (extra is not None and "An" in extra):
        an = y if column == "An" else np.asarray(extra["An"], dtype=float)
        or_ = np.asarray(extra["Or"], dtype=float) if extra is not None and "Or" in extra else None
        names = feldspar_species(an, or_)
    for z in zones:
        z["species"] = None
        if names is not None:
            z["species"] = dominant_species([names[i] for i in z["indices"]])

    # melt equivalents
    melt = None
    an_values = y if column == "An" else (np.asarray(extra["An"], dtype=float)
                                          if extra is not None and "An" in extra else None)
    if temperature_c is not None and an_values is not None and extra is not None:
        melt, notes = melt_equivalents(an_values, extra, temperature_c, model=partition_model)
        warnings.extend(notes)
        if melt.shape[1] == 0:
            melt = None
    elif temperature_c is None and extra is not None and any(
            c in extra for c in ("Mg_ppm", "Sr_ppm", "Ba_ppm", "MgO", "SrO", "BaO")) and an_values is not None:
        warnings.append("no temperature given: melt equivalents and recharge fingerprints were not computed")

    # across each step: other columns, melt, species
    columns = {}
    if extra is not None:
        for c in extra.columns:
            if c != column and pd.api.types.is_numeric_dtype(extra[c]):
                columns[c] = np.asarray(extra[c], dtype=float)
    if melt is not None:
        for c in melt.columns:
            columns[c] = melt[c].to_numpy()
    noise_of = {c: _extra_noise(v) for c, v in columns.items()}
    column_changes = []
    gaps = []
    mantles = []
    ordered = sorted(steps, key=lambda s: s.position_um)
    for i, s in enumerate(ordered):
        lo = ordered[i - 1].position_um + 0.5 * ordered[i - 1].width_um if i > 0 else -np.inf
        hi = ordered[i + 1].position_um - 0.5 * ordered[i + 1].width_um if i + 1 < len(ordered) else np.inf
        rim, core = side_points(x, s.position_um, 0.5 * s.width_um + 0.25 * spacing, lo_um=lo, hi_um=hi)
        j = min(max(int(np.searchsorted(x, s.position_um)), 1), x.size - 1)
        gaps.append(float(x[j] - x[j - 1]))
        changes = {c: side_change(v, rim, core, noise_of[c])[:2] for c, v in columns.items()}
        column_changes.append(changes)
        s.extra["columns"] = {c: {"change": ch, "se": se} for c, (ch, se) in changes.items()}
        melt_changes = {c: changes[c] for c in changes if c.startswith("melt_") or c in ("FeO", "Fe_ppm")}
        has_melt = melt is not None
        s.extra["recharge"] = recharge_fingerprint(s.change if column == "An" else np.nan,
                                                   melt_changes if has_melt else {})
        if names is not None:
            inner_zone = next(z for z in zones if z["start_um"] == s.position_um)
            outer_zone = next(z for z in zones if z["end_um"] == s.position_um)
            ch = species_change([names[k] for k in inner_zone["indices"]], [names[k] for k in outer_zone["indices"]])
            s.extra["species_change"] = ch
            if ch and ch["mantle"]:
                mantles.append({"position_um": s.position_um, **ch})
        else:
            s.extra["species_change"] = None
    for z in zones:
        inner_b = [s.position_um for s in steps if s.position_um == z["end_um"]]
        outer_b = [s.position_um for s in steps if s.position_um == z["start_um"]]
        z["boundary_inner"] = inner_b[0] if inner_b else None
        z["boundary_outer"] = outer_b[0] if outer_b else None
        if melt is not None:
            for c in melt.columns:
                vals = melt[c].to_numpy()[z["indices"]]
                z[f"{c}_mean"] = float(np.nanmean(vals)) if np.any(np.isfinite(vals)) else float("nan")

    surfaces = find_resorption_surfaces(ordered, column, sigma, gaps, min_change=resorption_min_change,
                                        column_changes=column_changes, boundary_evidence=boundary_evidence)
    for surf in surfaces:
        if surf["step_index"] is not None:
            ordered[surf["step_index"]].extra["resorption"] = True
    for s in ordered:
        s.extra.setdefault("resorption", False)

    mixing = None
    if melt_endmembers:
        source_cols = melt if melt is not None else (extra if extra is not None else pd.DataFrame())
        f, misfit = mixing_fraction(source_cols, melt_endmembers)
        mixing = {"endmembers": {k: list(v) for k, v in melt_endmembers.items()},
                  "fraction_of_second": f, "misfit": misfit,
                  "note": "0 = first end-member melt, 1 = second (lever rule along the tie line)"}
        for z in zones:
            vals = f[z["indices"]]
            z["mixing_fraction"] = float(np.nanmean(vals)) if np.any(np.isfinite(vals)) else float("nan")

    settings = {"min_change": min_change if min_change is not None else 3.0 * sigma, "window_um": window_um,
                "max_step_width_um": max_step_width_um, "alpha": alpha, "partition_model": partition_model,
                "resorption_min_change": resorption_min_change}
    return ZoningResult(column=column, noise_sd=sigma, noise_source=source, distance_um=x, value=y,
                        steps=ordered, resorption_surfaces=surfaces, oscillatory_bands=bands, zones=zones,
                        mantles=mantles, melt=melt, mixing=mixing, temperature_c=temperature_c,
                        warnings=warnings, settings=settings)
