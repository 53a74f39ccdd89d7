r"""Orientation of a traverse in an anisotropic crystal (olivine Fe–Mg): an axis, EBSD angles, or unknown.

Fe–Mg diffusion in olivine is about six times faster along [001] than along
[100] and [010] (Costa & Chakraborty 2004; the factor as recorded in
``laws/olivine.py``). Along a traverse whose angles to [100], [010], [001] are
α, β, γ the diffusivity is the tensor projection (Crank 1975 §2.6 for an
anisotropic medium):

    D = D[100]·cos²α + D[010]·cos²β + D[001]·cos²γ = D[001]·f,
    f = (cos²α + cos²β)/6 + cos²γ.

How it enters a fit: a constant factor on D changes no profile shape in units
of D[001]·t, only the conversion to time, ``t = (D[001]·t) / (f·D[001])``; so
the fit runs with the [001] law and the time draws are divided by ``f``.

When no orientation is given for olivine the orientation is **unknown**, not
[001]: the traverse direction is taken as uniform over the sphere (cos γ
uniform on [0, 1] for a direction drawn at random, so cos²γ = u², u ~ U(0, 1);
the [100]/[010] split does not matter because their D are equal), f is drawn
per Monte Carlo draw and the spread enters the budget as its own term
(``orientation``); the output warns in plain words and says how to remove the
term (``--direction`` / campaign key ``direction``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from zoneprofile._validation import InputError

__all__ = ["Orientation", "parse_direction", "UNKNOWN_WARNING"]

UNKNOWN_WARNING = (
    "ORIENTATION UNKNOWN: Fe–Mg diffusion in olivine is about 6x faster along [001] than along [100] or [010], "
    "and no direction was given for this traverse, so the traverse was taken as pointing anywhere (uniform "
    "over the sphere) and the time interval carries that spread (term 'orientation', up to 6x); give the "
    "crystal axis or EBSD angles (fit --direction [100] or --direction 'α,β,γ'; campaign key direction) to "
    "remove it"
)

_AXES = {"001": (90.0, 90.0, 0.0), "100": (0.0, 90.0, 90.0), "010": (90.0, 0.0, 90.0)}


@dataclass(frozen=True)
class Orientation:
    """An axis, three EBSD angles (degrees to [100], [010], [001]) or unknown (``angles`` None)."""

    angles: tuple | None
    text: str

    @property
    def known(self) -> bool:
        return self.angles is not None

    def factor(self, anisotropy: float) -> float:
        """f = D_traverse / D[001] for a known orientation."""
        a, b, g = (math.radians(v) for v in self.angles)
        ca, cb, cg = math.cos(a) ** 2, math.cos(b) ** 2, math.cos(g) ** 2
        total = ca + cb + cg
        return ((ca + cb) / anisotropy + cg) / total

    def factor_draws(self, anisotropy: float, n: int, rng) -> np.ndarray:
        """f per draw: the known value, or uniform-over-the-sphere draws when unknown."""
        if self.known:
            return np.full(n, self.factor(anisotropy))
        u2 = rng.uniform(0.0, 1.0, n) ** 2
        return (1.0 - u2) / anisotropy + u2

    def to_dict(self, anisotropy: float) -> dict:
        if self.known:
            return {"given": self.text, "angles_deg": list(self.angles), "d_over_d001": self.factor(anisotropy),
                    "rule": "D = D[001]·((cos²α + cos²β)/6 + cos²γ)"}
        return {"given": None, "angles_deg": None, "d_over_d001": None,
                "rule": "unknown: traverse direction uniform over the sphere, cos²γ = u², u ~ U(0, 1)"}


def parse_direction(value) -> Orientation:
    """An axis ('[001]', '100', ...), three angles ('α,β,γ' or a sequence), or None/'unknown'."""
    if value is None or (isinstance(value, str) and value.strip().lower() in ("", "unknown")):
        return Orientation(None, "unknown")
    if isinstance(value, str) and "," not in value:
        key = value.strip().strip("[]").replace(" ", "")
        if key not in _AXES:
            raise InputError(f"unknown direction {value!r}: give a crystal axis ([100], [010] or [001]) or "
                             "three EBSD angles 'α,β,γ' in degrees to [100], [010] and [001]")
        return Orientation(_AXES[key], f"[{key}]")
    parts = value.split(",") if isinstance(value, str) else list(value)
    try:
        angles = tuple(float(p) for p in parts)
    except (TypeError, ValueError):
        raise InputError(f"direction {value!r}: the EBSD angles must be three numbers in degrees") from None
    if len(angles) != 3 or not all(math.isfinite(a) and 0.0 <= a <= 180.0 for a in angles):
        raise InputError(f"direction {value!r}: give three angles between 0 and 180° (to [100], [010], [001])")
    total = sum(math.cos(math.radians(a)) ** 2 for a in angles)
    if abs(total - 1.0) > 0.05:
        raise InputError(f"direction {value!r}: the angles to [100], [010] and [001] do not describe one "
                         f"direction (cos²α + cos²β + cos²γ = {total:.3f}, must be 1); check the EBSD angles")
    return Orientation(angles, ",".join(f"{a:g}" for a in angles))


#: seed of the orientation draws: one fixed stream, so draw i has the same orientation in every boundary
#: of a traverse (one crystal has one orientation) and intervals between its boundaries stay paired
ORIENTATION_STREAM = 0x01BE7


def apply(result, orientation: Orientation, anisotropy: float) -> None:
    """Divide the time draws and statements of an [001] fit by f (drawn when unknown); budget term 'orientation'."""
    from zoneprofile.diffusion.uncertainty import PERCENTILES

    draws = np.asarray(result.time_draws_days, float)
    rng = np.random.default_rng(ORIENTATION_STREAM)
    f = orientation.factor_draws(anisotropy, max(draws.size, 1), rng)
    td = result.time_days
    f_mid = float(np.median(f))
    if draws.size:
        scaled = draws / f[: draws.size]
        result.time_draws_days = scaled
        finite = scaled[np.isfinite(scaled)]
        if finite.size:
            for key, q in PERCENTILES.items():
                if td.get(key) is not None:
                    td[key] = float(np.percentile(finite, q))
    if td.get("best") is not None:
        td["best"] = float(td["best"]) / f_mid
    if td.get("upper_bound") is not None:
        # a bound must hold for every orientation allowed: the 97.5th percentile over the drawn ones
        td["upper_bound"] = float(np.percentile(td["upper_bound"] / f, 97.5))
    if td.get("lower_bound") is not None:
        td["lower_bound"] = float(np.percentile(td["lower_bound"] / f, 2.5))
    budget = result.uncertainty_budget
    budget["orientation"] = 0.0 if orientation.known else float(np.std(np.log10(f)))
    finite = result.time_draws_days[np.isfinite(result.time_draws_days) & (result.time_draws_days > 0)] \
        if np.size(result.time_draws_days) else np.empty(0)
    if finite.size > 1:
        budget["total"] = float(np.std(np.log10(finite)))
