"""Diffusion laws for quartz (Ti)."""

from __future__ import annotations

from zoneprofile.diffusion.laws.arrhenius import ArrheniusLaw, arrhenius_parameters

__all__ = ["CHERNIAK2007_TI"]

# Cherniak, Watson & Wark (2007): D = 7e-8 · exp(−273 kJ/mol / RT), 700–1150 °C, dry,
# near-isotropic. CONFIRMED.
_form, _params, _needs = arrhenius_parameters(d0_m2_s=7e-8, ea_kj_mol=273.0)
CHERNIAK2007_TI = ArrheniusLaw(
    id="cherniak2007-ti-quartz",
    element="Ti",
    mineral="quartz",
    citation=(
        "Cherniak D.J., Watson E.B., Wark D.A. (2007) Ti diffusion in quartz. "
        "Chemical Geology 236:65–74"
    ),
    doi="10.1016/j.chemgeo.2006.09.001",
    status="CONFIRMED",
    formula="D = 7×10⁻⁸ · exp(−273 kJ/mol / RT)  [m²/s]",
    parameters=_params,
    # "273 ± 12 kJ mol⁻¹" in the abstract (docs/laws/ names the page); taken as 1σ (the abstract
    # does not say which)
    parameter_sd={"ea_kj_mol": 12.0},
    t_range_c=(700.0, 1150.0),
    needs=_needs,
    anisotropy="near-isotropic",
    phase="quartz",
    notes=(
        "A later study (Jollands et al. 2020, Geology) finds much slower Ti diffusion in "
        "quartz; timescales from this law may be minima. No slower law is offered until "
        "its numbers are verified."
    ),
    form=_form,
)
