"""The :class:`DiffusionLaw` base type shared by every law family.

A law is data (identity, citation, parameters with units, calibrated ranges)
plus one private method, ``_log10_d``, that a family module implements. All
public evaluation goes through :meth:`DiffusionLaw.log10_d`, which validates
the inputs, applies Monte Carlo offsets to the parameters and broadcasts
temperature against composition arrays.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, fields
from typing import ClassVar

import numpy as np

from zoneprofile._validation import InputError

__all__ = [
    "R_J_MOL_K",
    "LN10",
    "DiffusionLaw",
    "COMPOSITION_NAMES",
    "STATUSES",
]

#: Gas constant, J mol⁻¹ K⁻¹ (CODATA 2018).
R_J_MOL_K = 8.314462618
LN10 = math.log(10.0)
ZERO_C_IN_K = 273.15

#: Composition variables a law may depend on, with the words used in messages.
COMPOSITION_NAMES = {
    "x_an": "X_An (anorthite fraction, An mol% / 100)",
    "x_fe": "X_Fe (Fe/(Fe+Mg) fraction, 1 - Fo/100 in olivine)",
    "fo2_pa": "oxygen fugacity fO2 in Pa",
    "pressure_pa": "pressure in Pa",
}

#: How sure we are of a law's numbers (see docs/laws/index.md).
STATUSES = ("CONFIRMED", "SECONDARY", "FROM MEMORY", "USER")

_FRACTIONS = ("x_an", "x_fe")
#: analytical noise can push An or Fo a little past 0 or 100 mol%; the laws are
#: smooth there, so values within this slack are evaluated as given.
_FRACTION_SLACK = 0.02


def _as_float_array(value, name: str) -> np.ndarray:
    try:
        a = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        message = f"{name} must be a number or an array of numbers"
        raise InputError(message, text=value) from None
    # fast path: the sum is finite when every value is (NaN and inf propagate)
    if not math.isfinite(a.sum()) and not np.isfinite(a).all():
        message = f"{name} must be finite (found NaN or infinity)"
        raise InputError(message)
    return a


def _fmt(x: float) -> str:
    """Short human form of a number for messages (0.4, 1e-10, 1200)."""
    x = float(x)
    if x != 0 and (abs(x) < 1e-3 or abs(x) >= 1e5):
        return f"{x:.3g}"
    return f"{x:.4g}"


@dataclass(frozen=True)
class DiffusionLaw:
    """One published (or user-supplied) diffusion law.

    Attributes
    ----------
    id : str
        Short lowercase identifier, e.g. ``"costa2003-mg-plag"``.
    element : str
        ``"Mg"``, ``"Sr"``, ``"Ba"``, ``"FeMg"``, ``"Ti"`` (or another symbol for user laws).
    mineral : str
        Mineral group the law applies to: ``"plagioclase"``, ``"alkali-feldspar"``,
        ``"olivine"``, ``"clinopyroxene"``, ``"quartz"``, ...
    citation : str
        Full citation (authors, year, journal, volume, pages).
    doi : str or None
        DOI of the paper, where known.
    status : str
        ``"CONFIRMED"``, ``"SECONDARY"``, ``"FROM MEMORY"`` or ``"USER"``.
    formula : str
        Human-readable formula as the paper writes it.
    parameters : dict
        ``name -> (value, unit)``; the names the family's ``_log10_d`` reads and
        the keys accepted by ``perturb``.
    parameter_sd : dict
        ``name -> one standard deviation`` in the parameter's unit, where known.
    t_range_c : tuple or None
        Calibrated temperature range (°C).
    composition_range : dict
        ``{"x_an": (lo, hi), ...}`` calibrated composition ranges (fractions).
    fo2_range_pa : tuple or None
        Calibrated oxygen-fugacity range (Pa).
    needs : tuple
        Composition inputs the law cannot be evaluated without.
    anisotropy : str or dict or None
        What is known about direction dependence.
    temperature_separable : bool
        True when D(T, x) = f(x)·g(T) at fixed fO2 and pressure, so the shape of
        a profile depends on D·t only and the fitted D·t does not depend on T.
    phase : str
        The crystal the experiments used (e.g. ``"anorthite"``, ``"sanidine"``).
    notes : str
        Caveats in plain words.
    pivot_temperature_c : float or None
        Temperature about which an activation-energy offset rotates the
        Arrhenius line in Monte Carlo draws (D at this temperature is unchanged).
        Defaults to the centre of ``t_range_c`` in 1/T.
    """

    id: str
    element: str
    mineral: str
    citation: str
    doi: str | None
    status: str
    formula: str
    parameters: dict
    parameter_sd: dict = field(default_factory=dict)
    t_range_c: tuple | None = None
    composition_range: dict = field(default_factory=dict)
    fo2_range_pa: tuple | None = None
    needs: tuple = ()
    anisotropy: str | dict | None = None
    temperature_separable: bool = True
    phase: str = ""
    notes: str = ""
    pivot_temperature_c: float | None = None

    family = "base"
    #: directions accepted by ``direction=`` (None is always accepted)
    directions: ClassVar[tuple] = ()

    # ------------------------------------------------------------------ public
    def log10_d(
        self,
        temperature_c,
        *,
        x_an=None,
        x_fe=None,
        fo2_pa=None,
        pressure_pa=None,
        direction=None,
        perturb=None,
    ) -> np.ndarray:
        """log10 of the diffusion coefficient (m² s⁻¹), broadcast over all array inputs.

        Parameters
        ----------
        temperature_c : float or array
            Temperature in °C.
        x_an, x_fe : float or array, optional
            Mole fractions (0–1), required when listed in ``needs``.
        fo2_pa, pressure_pa : float or array, optional
            Oxygen fugacity and pressure in Pa where the law uses them.
        direction : optional
            Crystallographic direction where the law has anisotropy data.
        perturb : dict, optional
            Offsets added to ``parameters`` (same names and units; values may be
            arrays of Monte Carlo draws). An offset of ``ea_kj_mol`` rotates the
            Arrhenius line about ``pivot_temperature_c``.
        """
        t_k = self._temperature_k(temperature_c)
        comp = self._composition(x_an=x_an, x_fe=x_fe, fo2_pa=fo2_pa, pressure_pa=pressure_pa)
        params, ea_offset = self._perturbed(perturb)
        self._check_direction(direction)
        try:
            out = self._log10_d(t_k, comp, params, direction)
            if ea_offset is not None:
                out = out - self._ea_rotation(t_k, ea_offset)
            out = np.asarray(out, dtype=float)
            # inputs the law does not use still set the shape of the result
            shapes = [t_k.shape, *(v.shape for v in comp.values())]
            if any(sh != out.shape and sh != () for sh in shapes):
                shape = np.broadcast_shapes(out.shape, *shapes)
                if shape != out.shape:
                    out = np.broadcast_to(out, shape).copy()
        except ValueError:
            given = {"temperature_c": t_k.shape, **{k: v.shape for k, v in comp.items()}}
            if perturb:
                given.update({f"perturb[{k}]": np.shape(v) for k, v in perturb.items()})
            listed = ", ".join(f"{k} {v}" for k, v in given.items())
            message = (
                f"the arrays given to {self.id} cannot be broadcast together ({listed}); "
                "use e.g. draws[:, None] against a profile"
            )
            raise InputError(message) from None
        return out

    def d_m2_s(self, temperature_c, **kwargs) -> np.ndarray:
        """Diffusion coefficient in m² s⁻¹ (see :meth:`log10_d` for the arguments)."""
        return np.power(10.0, self.log10_d(temperature_c, **kwargs))

    def range_warnings(self, temperature_c=None, *, mineral=None, **composition) -> list[str]:
        """Plain sentences for every input outside the law's calibrated ranges.

        ``mineral`` (optional) adds a sentence when the law was calibrated on
        another mineral. Composition keywords are those of :meth:`log10_d`.
        """
        unknown = set(composition) - set(COMPOSITION_NAMES)
        if unknown:
            message = (
                f"unknown composition input {sorted(unknown)[0]!r}; "
                f"use one of {', '.join(COMPOSITION_NAMES)}"
            )
            raise InputError(message)
        out = []
        if temperature_c is not None and self.t_range_c is not None:
            t = _as_float_array(temperature_c, "temperature_c")
            lo, hi = self.t_range_c
            bad = t[(t < lo) | (t > hi)]
            if bad.size:
                what = _span(bad, t.size, "°C", "temperature")
                out.append(
                    f"{what} outside the calibrated range {_fmt(lo)}–{_fmt(hi)} °C of {self.id}"
                )
        for name, (lo, hi) in self.composition_range.items():
            value = composition.get(name)
            if value is None:
                continue
            a = _as_float_array(value, name)
            bad = a[(a < lo) | (a > hi)]
            if bad.size:
                label = {"x_an": "X_An", "x_fe": "X_Fe"}.get(name, name)
                what = _span(bad, a.size, "", label)
                out.append(
                    f"{what} outside the calibrated range {_fmt(lo)}–{_fmt(hi)} of {self.id}"
                )
        fo2 = composition.get("fo2_pa")
        if fo2 is not None and self.fo2_range_pa is not None:
            a = _as_float_array(fo2, "fo2_pa")
            lo, hi = self.fo2_range_pa
            bad = a[(a < lo) | (a > hi)]
            if bad.size:
                what = _span(bad, a.size, "Pa", "fO2")
                out.append(
                    f"{what} outside the calibrated range {_fmt(lo)}–{_fmt(hi)} Pa of {self.id}"
                )
        if mineral is not None and str(mineral).strip().lower() != self.mineral:
            out.append(
                f"{self.id} was calibrated on {self.phase or self.mineral}, "
                f"not {mineral}; its timescales are only indicative for {mineral}"
            )
        return out

    def caveats(self) -> list[str]:
        """Sentences about how sure the law's numbers are (for reports)."""
        out = []
        if self.status == "FROM MEMORY":
            out.append(
                f"the parameters of {self.id} are recalled, not checked against the paper; "
                "verify them before publishing"
            )
        elif self.status == "SECONDARY":
            out.append(f"the parameters of {self.id} come from a secondary source")
        elif self.status == "USER":
            out.append(f"{self.id} is a user-supplied law")
        if self.notes:
            out.append(self.notes)
        return out

    def to_dict(self) -> dict:
        """Everything needed to cite and reproduce the law (JSON-safe)."""
        d = {"family": self.family}
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name == "parameters":
                value = {k: {"value": v, "unit": u} for k, (v, u) in value.items()}
            elif isinstance(value, tuple):
                value = list(value)
            elif isinstance(value, dict):
                value = {k: list(v) if isinstance(v, tuple) else v for k, v in value.items()}
            d[f.name] = value
        return d

    # ----------------------------------------------------------------- helpers
    def _log10_d(self, t_k, comp, params, direction):  # pragma: no cover - abstract
        raise NotImplementedError

    def _temperature_k(self, temperature_c) -> np.ndarray:
        t = _as_float_array(temperature_c, "temperature_c")
        if t.size and t.min() <= -ZERO_C_IN_K:
            message = f"temperature_c must be above absolute zero (-273.15 °C), got {_fmt(t.min())}"
            raise InputError(message)
        return t + ZERO_C_IN_K

    def _composition(self, **given) -> dict:
        comp = {}
        for name in self.needs:
            if given.get(name) is None:
                message = (
                    f"law {self.id} needs {COMPOSITION_NAMES[name]}; "
                    f"give {name}="
                )
                raise InputError(message)
        for name, value in given.items():
            if value is None:
                continue
            a = _as_float_array(value, name)
            if name in _FRACTIONS and a.size and (a.min() < -_FRACTION_SLACK or a.max() > 1 + _FRACTION_SLACK):
                bad = a[(a < -_FRACTION_SLACK) | (a > 1 + _FRACTION_SLACK)][0]
                message = (
                    f"{name} must be a mole fraction between 0 and 1 "
                    f"(An or Fo in mol% divided by 100), got {_fmt(bad)}"
                )
                raise InputError(message)
            if name in ("fo2_pa", "pressure_pa") and a.size and a.min() <= 0:
                message = f"{name} must be > 0 Pa, got {_fmt(a.min())}"
                raise InputError(message)
            comp[name] = a
        return comp

    def _perturbed(self, perturb):
        params = {k: v for k, (v, _u) in self.parameters.items()}
        if not perturb:
            return params, None
        ea_offset = None
        for name, offset in perturb.items():
            if name not in params:
                message = (
                    f"cannot perturb '{name}' of {self.id}; its parameters are "
                    f"{', '.join(params)}"
                )
                raise InputError(message)
            off = _as_float_array(offset, f"perturbation of {name}")
            if name == "ea_kj_mol" and self._pivot_k() is not None:
                ea_offset = off
            else:
                params[name] = params[name] + off
        return params, ea_offset

    def _pivot_k(self):
        if self.pivot_temperature_c is not None:
            return self.pivot_temperature_c + ZERO_C_IN_K
        if self.t_range_c is None:
            return None
        lo, hi = (t + ZERO_C_IN_K for t in self.t_range_c)
        return 2.0 / (1.0 / lo + 1.0 / hi)

    def _ea_rotation(self, t_k, ea_offset_kj):
        """Change of log10 D from an Ea offset with D fixed at the pivot temperature."""
        return ea_offset_kj * 1e3 / (R_J_MOL_K * LN10) * (1.0 / t_k - 1.0 / self._pivot_k())

    def _check_direction(self, direction):
        if direction is None:
            return
        if isinstance(direction, str) and direction.strip() in self.directions:
            return
        if self.directions:
            message = (
                f"unknown direction {direction!r} for {self.id}; "
                f"use one of {', '.join(self.directions)}"
            )
        else:
            message = (
                f"{self.id} has no direction-dependent data; leave the direction out "
                f"(it applies: {self.anisotropy or 'not known'})"
            )
        raise InputError(message)


def _span(bad: np.ndarray, total: int, unit: str, label: str) -> str:
    u = f" {unit}" if unit else ""
    lo, hi = float(bad.min()), float(bad.max())
    if total == 1:
        return f"{label} {_fmt(lo)}{u} is"
    if bad.size == 1:
        return f"1 of {total} {label} values ({_fmt(lo)}{u}) is"
    if lo == hi:
        return f"{bad.size} of {total} {label} values ({_fmt(lo)}{u}) are"
    return f"{bad.size} of {total} {label} values (from {_fmt(lo)} to {_fmt(hi)}{u}) are"
