"""Diffusion laws for pyroxene (Fe–Mg)."""

from __future__ import annotations

from zoneprofile.diffusion.laws.arrhenius import ArrheniusLaw, arrhenius_parameters

__all__ = ["MULLER2013_FEMG_CPX"]

# Müller, Dohmen, Becker, ter Heege, Chakraborty (2013): Fe–Mg interdiffusion in
# clinopyroxene ∥[001], D = 2.77e-7 · exp(−320.7 kJ/mol / RT), 800–1200 °C, no resolvable
# fO2 or Fe/Mg dependence. Conditions CONFIRMED, formula FROM MEMORY.
_form, _params, _needs = arrhenius_parameters(d0_m2_s=2.77e-7, ea_kj_mol=320.7)
MULLER2013_FEMG_CPX = ArrheniusLaw(
    id="muller2013-femg-cpx",
    element="FeMg",
    mineral="clinopyroxene",
    citation=(
        "Müller T., Dohmen R., Becker H.W., ter Heege J.H., Chakraborty S. (2013) Fe–Mg "
        "interdiffusion rates in clinopyroxene: experimental data and implications for Fe–Mg "
        "exchange geothermometers. Contributions to Mineralogy and Petrology 166:1563–1576"
    ),
    doi="10.1007/s00410-013-0941-y",
    status="FROM MEMORY",
    formula="D = 2.77×10⁻⁷ · exp(−320.7 kJ/mol / RT)  [m²/s], ∥[001]",
    parameters=_params,
    t_range_c=(800.0, 1200.0),
    needs=_needs,
    anisotropy="∥[001]; no other direction given",
    phase="diopside-rich clinopyroxene",
    notes="No fO2 or Fe/Mg dependence was resolved; the law is used at any X_Fe and fO2.",
    form=_form,
)
