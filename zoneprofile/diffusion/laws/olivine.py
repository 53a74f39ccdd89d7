"""Fe–Mg interdiffusion in olivine (Dohmen & Chakraborty 2007) and its anisotropy.

Notes
-----
Along [001], with T in K, P and fO2 in Pa, X_Fe the Fe/(Fe+Mg) mole fraction:

TaMED (transition-metal extended defects, fO2 > 10⁻¹⁰ Pa)::

    log10 D = −9.21 − (201000 + (P − 10⁵)·7×10⁻⁶) / (2.303·R·T)
              + (1/6)·log10(fO2 / 10⁻⁷) + 3·(X_Fe − 0.1)

PED (point-defect, fO2 < 10⁻¹⁰ Pa)::

    log10 D = −8.91 − (220000 + (P − 10⁵)·7×10⁻⁶) / (2.303·R·T) + 3·(X_Fe − 0.1)

The paper's own log form is used, with 2.303 as written; the prefactor is not
multiplied by 2.303. Status SECONDARY (transcribed by a general library).

Anisotropy (Costa & Chakraborty 2004, factor FROM MEMORY): D[100] = D[010] =
D[001]/6. Along a traverse making angles α, β, γ with [100], [010], [001]::

    D_traverse = D[100]·cos²α + D[010]·cos²β + D[001]·cos²γ
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from zoneprofile._validation import InputError
from zoneprofile.diffusion.laws._base import R_J_MOL_K, DiffusionLaw, _as_float_array

__all__ = [
    "OlivineFeMgLaw",
    "DOHMEN2007_FEMG",
    "DOHMEN2007_FEMG_TAMED",
    "DOHMEN2007_FEMG_PED",
    "olivine_traverse_d",
    "ANISOTROPY_001_OVER_100",
    "MECHANISM_FO2_PA",
]

#: D[001]/D[100] = D[001]/D[010] (Costa & Chakraborty 2004; FROM MEMORY).
ANISOTROPY_001_OVER_100 = 6.0
#: fO2 (Pa) above which the TaMED mechanism applies (Dohmen & Chakraborty 2007).
MECHANISM_FO2_PA = 1e-10
_LOG_FACTOR = 2.303  # as printed in the paper's log form
_P_REF_PA = 1e5

_CITATION = (
    "Dohmen R., Chakraborty S. (2007) Fe–Mg diffusion in olivine II: point defect chemistry, "
    "change of diffusion mechanisms and a model for calculation of diffusion coefficients in "
    "natural olivine. Physics and Chemistry of Minerals 34:409–430"
)
_DOI = "10.1007/s00269-007-0158-6"
_ANISOTROPY = {
    "law_direction": "[001]",
    "d001_over_d100": ANISOTROPY_001_OVER_100,
    "d001_over_d010": ANISOTROPY_001_OVER_100,
    "source": "Costa & Chakraborty (2004, EPSL 227:517), factor FROM MEMORY",
    "projection": "D = D[100]cos²α + D[010]cos²β + D[001]cos²γ",
}
_DIRECTIONS = ("[001]", "[100]", "[010]", "001", "100", "010")


def _mechanism_params(name: str) -> dict:
    if name == "tamed":
        return {
            "log10_d0_m2_s": (-9.21, "log10(m2/s)"),
            "ea_kj_mol": (201.0, "kJ/mol"),
            "activation_volume_cm3_mol": (7.0, "cm3/mol"),
            "fo2_exponent": (1.0 / 6.0, "log10 D per log10 fO2"),
            "fo2_ref_pa": (1e-7, "Pa"),
            "log10_per_x_fe": (3.0, "log10 units per unit x_fe"),
            "x_fe_ref": (0.1, "mole fraction"),
        }
    return {
        "log10_d0_m2_s": (-8.91, "log10(m2/s)"),
        "ea_kj_mol": (220.0, "kJ/mol"),
        "activation_volume_cm3_mol": (7.0, "cm3/mol"),
        "log10_per_x_fe": (3.0, "log10 units per unit x_fe"),
        "x_fe_ref": (0.1, "mole fraction"),
    }


def _log10_d_mechanism(t_k, comp, params):
    p = comp.get("pressure_pa", _P_REF_PA)
    energy = params["ea_kj_mol"] * 1e3 + params["activation_volume_cm3_mol"] * 1e-6 * (p - _P_REF_PA)
    out = params["log10_d0_m2_s"] - energy / (_LOG_FACTOR * R_J_MOL_K * t_k)
    out = out + params["log10_per_x_fe"] * (comp["x_fe"] - params["x_fe_ref"])
    if "fo2_exponent" in params:
        out = out + params["fo2_exponent"] * np.log10(comp["fo2_pa"] / params["fo2_ref_pa"])
    return out


def _direction_log10_factor(direction) -> float:
    if direction is None or direction.strip("[]") == "001":
        return 0.0
    return -np.log10(ANISOTROPY_001_OVER_100)


@dataclass(frozen=True)
class OlivineFeMgLaw(DiffusionLaw):
    """Dohmen & Chakraborty (2007) Fe–Mg in olivine; ``mechanism`` 'tamed', 'ped' or 'auto'.

    With ``mechanism='auto'`` each evaluation uses TaMED where fO2 > 10⁻¹⁰ Pa and
    PED elsewhere (element by element for arrays). ``direction`` may be
    ``'[001]'`` (the law's own, default), ``'[100]'`` or ``'[010]'``; for an
    arbitrary traverse use :func:`olivine_traverse_d` on the [001] value.
    """

    mechanism: str = "auto"
    family = "olivine-femg"
    directions = _DIRECTIONS

    def _log10_d(self, t_k, comp, params, direction):
        if self.mechanism == "auto":
            # parameters are stored with a "tamed_" / "ped_" prefix
            tamed = {k[6:]: v for k, v in params.items() if k.startswith("tamed_")}
            ped = {k[4:]: v for k, v in params.items() if k.startswith("ped_")}
            fo2 = comp["fo2_pa"]
            if fo2.ndim == 0:  # one fO2: evaluate only the mechanism in use
                out = _log10_d_mechanism(t_k, comp, tamed if fo2 > MECHANISM_FO2_PA else ped)
                return out + _direction_log10_factor(direction)
            out = np.where(
                fo2 > MECHANISM_FO2_PA,
                _log10_d_mechanism(t_k, comp, tamed),
                _log10_d_mechanism(t_k, comp, ped),
            )
        else:
            out = _log10_d_mechanism(t_k, comp, params)
        return out + _direction_log10_factor(direction)

    def mechanism_at(self, fo2_pa) -> np.ndarray:
        """'tamed' or 'ped' for each fO2 (Pa) given."""
        fo2 = _as_float_array(fo2_pa, "fo2_pa")
        if self.mechanism != "auto":
            return np.full(fo2.shape, self.mechanism, dtype=object)
        return np.where(fo2 > MECHANISM_FO2_PA, "tamed", "ped").astype(object)

    def range_warnings(self, temperature_c=None, *, mineral=None, **composition) -> list[str]:
        if self.mechanism != "auto":
            return super().range_warnings(temperature_c, mineral=mineral, **composition)
        fo2 = composition.get("fo2_pa")
        if fo2 is None:
            return super().range_warnings(temperature_c, mineral=mineral, **composition)
        fo2 = _as_float_array(fo2, "fo2_pa")
        out = []
        for law, mask in ((DOHMEN2007_FEMG_TAMED, fo2 > MECHANISM_FO2_PA), (DOHMEN2007_FEMG_PED, fo2 <= MECHANISM_FO2_PA)):
            if np.any(mask):
                comp = dict(composition, fo2_pa=fo2[mask])
                for line in law.range_warnings(temperature_c, mineral=mineral, **comp):
                    if line not in out:
                        out.append(line)
        return out


_COMMON = dict(
    element="FeMg",
    mineral="olivine",
    citation=_CITATION,
    doi=_DOI,
    status="SECONDARY",
    anisotropy=_ANISOTROPY,
    temperature_separable=True,
    phase="olivine",
)

DOHMEN2007_FEMG_TAMED = OlivineFeMgLaw(
    id="dohmen2007-femg-olivine-tamed",
    formula=(
        "log10 D[001] = −9.21 − (201000 + (P − 1e5)·7e-6)/(2.303·R·T) "
        "+ (1/6)·log10(fO2/1e-7) + 3·(X_Fe − 0.1)  [m²/s; P, fO2 in Pa]"
    ),
    parameters=_mechanism_params("tamed"),
    t_range_c=(900.0, 1200.0),
    fo2_range_pa=(1e-10, 1e-5),
    needs=("x_fe", "fo2_pa"),
    notes="TaMED mechanism (fO2 > 1e-10 Pa); pressure defaults to 1e5 Pa when not given.",
    mechanism="tamed",
    **_COMMON,
)

DOHMEN2007_FEMG_PED = OlivineFeMgLaw(
    id="dohmen2007-femg-olivine-ped",
    formula=(
        "log10 D[001] = −8.91 − (220000 + (P − 1e5)·7e-6)/(2.303·R·T) "
        "+ 3·(X_Fe − 0.1)  [m²/s; P in Pa]"
    ),
    parameters=_mechanism_params("ped"),
    t_range_c=(700.0, 900.0),
    fo2_range_pa=(1e-12, 1e-10),
    needs=("x_fe",),
    notes="PED mechanism (fO2 < 1e-10 Pa); pressure defaults to 1e5 Pa when not given.",
    mechanism="ped",
    **_COMMON,
)

_auto_params = {f"tamed_{k}": v for k, v in _mechanism_params("tamed").items()}
_auto_params.update({f"ped_{k}": v for k, v in _mechanism_params("ped").items()})
DOHMEN2007_FEMG = OlivineFeMgLaw(
    id="dohmen2007-femg-olivine",
    formula=(
        "TaMED where fO2 > 1e-10 Pa, PED below (see dohmen2007-femg-olivine-tamed and "
        "dohmen2007-femg-olivine-ped); value along [001]"
    ),
    parameters=_auto_params,
    t_range_c=(700.0, 1200.0),
    fo2_range_pa=None,
    needs=("x_fe", "fo2_pa"),
    notes=(
        "Mechanism chosen by fO2 (TaMED above 1e-10 Pa, PED below); pressure defaults to "
        "1e5 Pa when not given. fO2 is held fixed: if it follows a buffer with temperature, "
        "the law is no longer temperature-separable."
    ),
    mechanism="auto",
    **_COMMON,
)


def olivine_traverse_d(d001, alpha_deg, beta_deg, gamma_deg, *, tolerance=0.05):
    """Diffusion coefficient along a traverse in olivine from the [001] value.

    Parameters
    ----------
    d001 : float or array
        D along [001] (m² s⁻¹), e.g. from ``DOHMEN2007_FEMG.d_m2_s(...)``.
    alpha_deg, beta_deg, gamma_deg : float or array
        Angles (degrees) between the traverse and [100], [010], [001]
        (from EBSD; mind the Pbnm vs Pnma cell setting).
    tolerance : float
        Allowed departure of cos²α + cos²β + cos²γ from 1 (the angles of one
        direction must satisfy it); larger departures are refused.

    Returns
    -------
    ndarray
        D[100]·cos²α + D[010]·cos²β + D[001]·cos²γ with D[100] = D[010] = D[001]/6.

    Notes
    -----
    Tensor projection of a diffusivity with orthorhombic symmetry; the factor 6
    is from Costa & Chakraborty (2004, EPSL 227:517), FROM MEMORY.
    """
    d = _as_float_array(d001, "d001")
    if np.any(d <= 0):
        raise InputError("d001 must be > 0 m²/s")
    a, b, g = (np.radians(_as_float_array(v, n)) for v, n in ((alpha_deg, "alpha_deg"), (beta_deg, "beta_deg"), (gamma_deg, "gamma_deg")))
    ca, cb, cg = np.cos(a) ** 2, np.cos(b) ** 2, np.cos(g) ** 2
    total = ca + cb + cg
    if np.any(np.abs(total - 1.0) > tolerance):
        worst = float(np.max(np.abs(total - 1.0)))
        message = (
            "the angles to [100], [010] and [001] do not describe one direction: "
            f"cos²α + cos²β + cos²γ must be 1, it is off by {worst:.3f}; check the EBSD angles"
        )
        raise InputError(message)
    # renormalise small rounding of measured angles
    ca, cb, cg = ca / total, cb / total, cg / total
    return d * ((ca + cb) / ANISOTROPY_001_OVER_100 + cg)
