"""Generic Arrhenius law with optional composition, fO2 and pressure terms.

Notes
-----
In log10 form (``form="log10"``)::

    log10 D = log10_d0_m2_s + Σ_k log10_per_<k> · x_k + fo2_exponent · log10(fO2 / fo2_ref_pa)
              − (Ea + ΔV · (P − 10⁵ Pa)) / (ln 10 · R · T)

In natural-log form (``form="ln"``) the prefactor and composition terms are
natural logarithms (``ln_d0_m2_s``, ``ln_per_<k>``) and are divided by ln 10
internally. Ea is ``ea_kj_mol`` (kJ/mol), ΔV is ``activation_volume_cm3_mol``
(cm³/mol), T in K, R = 8.314462618 J mol⁻¹ K⁻¹. Every term but the prefactor and
Ea is optional.

This form covers most published tracer-diffusion laws; a law that is a product
f(x)·g(T) is temperature-separable.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from zoneprofile.diffusion.laws._base import LN10, R_J_MOL_K, DiffusionLaw

__all__ = ["ArrheniusLaw", "arrhenius_parameters", "COMPOSITION_TERMS"]

#: composition variable -> parameter stem ("log10_per_x_an" / "ln_per_x_an")
COMPOSITION_TERMS = ("x_an", "x_fe")

P_REF_PA = 1e5


@dataclass(frozen=True)
class ArrheniusLaw(DiffusionLaw):
    """Arrhenius law, log10 or ln form, with optional linear composition terms.

    See the module docstring for the equation. ``parameters`` holds
    ``log10_d0_m2_s`` (or ``ln_d0_m2_s``), ``ea_kj_mol`` and any of
    ``log10_per_x_an``, ``log10_per_x_fe`` (``ln_per_...``), ``fo2_exponent``
    with ``fo2_ref_pa``, ``activation_volume_cm3_mol``.
    """

    form: str = "log10"
    family = "arrhenius"

    def _log10_d(self, t_k, comp, params, direction):
        scale = 1.0 if self.form == "log10" else 1.0 / LN10
        stem = "log10" if self.form == "log10" else "ln"
        out = params[f"{stem}_d0_m2_s"] * scale
        for name in COMPOSITION_TERMS:
            coef = params.get(f"{stem}_per_{name}")
            if coef is not None:
                out = out + coef * scale * comp[name]
        if "fo2_exponent" in params:
            out = out + params["fo2_exponent"] * np.log10(comp["fo2_pa"] / params["fo2_ref_pa"])
        energy = params["ea_kj_mol"] * 1e3
        if "activation_volume_cm3_mol" in params:
            p = comp.get("pressure_pa", P_REF_PA)
            energy = energy + params["activation_volume_cm3_mol"] * 1e-6 * (p - P_REF_PA)
        return out - energy / (LN10 * R_J_MOL_K * t_k)


def arrhenius_parameters(
    *,
    d0_m2_s=None,
    log10_d0_m2_s=None,
    ln_d0_m2_s=None,
    ea_kj_mol,
    log10_per_x_an=None,
    ln_per_x_an=None,
    log10_per_x_fe=None,
    ln_per_x_fe=None,
    activation_volume_cm3_mol=None,
    fo2_exponent=None,
    fo2_ref_pa=None,
) -> tuple[str, dict, tuple]:
    """Build ``(form, parameters, needs)`` for an :class:`ArrheniusLaw`.

    A plain prefactor ``d0_m2_s`` is stored as ``log10_d0_m2_s``. Mixing log10
    and ln terms is refused (say the whole law in one form).
    """
    uses_ln = any(v is not None for v in (ln_d0_m2_s, ln_per_x_an, ln_per_x_fe))
    uses_log10 = any(v is not None for v in (log10_d0_m2_s, log10_per_x_an, log10_per_x_fe))
    if uses_ln and uses_log10:
        raise ValueError("give the prefactor and composition terms all in log10 or all in ln form")
    form = "ln" if uses_ln else "log10"
    params: dict = {}
    if form == "ln":
        if ln_d0_m2_s is None:
            ln_d0_m2_s = float(np.log(d0_m2_s))
        params["ln_d0_m2_s"] = (float(ln_d0_m2_s), "ln(m2/s)")
    else:
        if log10_d0_m2_s is None:
            log10_d0_m2_s = float(np.log10(d0_m2_s))
        params["log10_d0_m2_s"] = (float(log10_d0_m2_s), "log10(m2/s)")
    params["ea_kj_mol"] = (float(ea_kj_mol), "kJ/mol")
    needs = []
    for name, lg, ln in (("x_an", log10_per_x_an, ln_per_x_an), ("x_fe", log10_per_x_fe, ln_per_x_fe)):
        coef = lg if form == "log10" else ln
        if coef is not None:
            params[f"{form}_per_{name}"] = (float(coef), f"{form} units per unit {name}")
            needs.append(name)
    if fo2_exponent is not None:
        params["fo2_exponent"] = (float(fo2_exponent), "log10 D per log10 fO2")
        params["fo2_ref_pa"] = (float(fo2_ref_pa if fo2_ref_pa is not None else 1.0), "Pa")
        needs.append("fo2_pa")
    if activation_volume_cm3_mol is not None:
        params["activation_volume_cm3_mol"] = (float(activation_volume_cm3_mol), "cm3/mol")
    return form, params, tuple(needs)
