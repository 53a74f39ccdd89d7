"""Diffusion laws for plagioclase (Mg, Sr).

Each law is data: the Arrhenius family evaluates it. Numbers marked FROM MEMORY
were recalled, not read from the paper; their pages in ``docs/laws/`` say so.
"""

from __future__ import annotations

import math

from zoneprofile.diffusion.laws.arrhenius import ArrheniusLaw, arrhenius_parameters

__all__ = ["COSTA2003_MG", "VANORMAN2014_MG", "ZELLMER1999_SR", "CHERNIAK_WATSON1992_SR_AN"]

_WARN_WINDOW = (
    "The calibrated range is not verified; warnings use 800–1200 °C and X_An 0.4–0.9 "
    "(common practice for An-dependent plagioclase laws)."
)

# Costa, Chakraborty & Dohmen (2003): D = 2.92 · 10^(−4.1·X_An − 3.1) · exp(−266 kJ/mol / RT).
# FROM MEMORY. The prefactor is 2.92 m²/s (not 2.92e-4, which is 4 orders too slow).
_form, _params, _needs = arrhenius_parameters(
    log10_d0_m2_s=math.log10(2.92) - 3.1, ea_kj_mol=266.0, log10_per_x_an=-4.1
)
COSTA2003_MG = ArrheniusLaw(
    id="costa2003-mg-plag",
    element="Mg",
    mineral="plagioclase",
    citation=(
        "Costa F., Chakraborty S., Dohmen R. (2003) Diffusion coupling between trace and "
        "major elements and a model for calculation of magma residence times using "
        "plagioclase. Geochimica et Cosmochimica Acta 67:2189–2200"
    ),
    doi="10.1016/S0016-7037(02)01345-5",
    status="FROM MEMORY",
    formula="D = 2.92 · 10^(−4.1·X_An − 3.1) · exp(−266 kJ/mol / RT)  [m²/s]",
    parameters=_params,
    t_range_c=(800.0, 1200.0),
    composition_range={"x_an": (0.4, 0.9)},
    needs=_needs,
    anisotropy="not resolved; treated as isotropic",
    phase="plagioclase",
    notes=_WARN_WINDOW,
    form=_form,
)

# Van Orman, Cherniak & Kita (2014): D = exp(−6.06 − 7.96·X_An − 287 kJ/mol / RT). FROM MEMORY.
_form, _params, _needs = arrhenius_parameters(ln_d0_m2_s=-6.06, ea_kj_mol=287.0, ln_per_x_an=-7.96)
VANORMAN2014_MG = ArrheniusLaw(
    id="vanorman2014-mg-plag",
    element="Mg",
    mineral="plagioclase",
    citation=(
        "Van Orman J.A., Cherniak D.J., Kita N.T. (2014) Magnesium diffusion in plagioclase: "
        "dependence on composition, and implications for thermal resetting of the 26Al–26Mg "
        "early solar system chronometer. Earth and Planetary Science Letters 385:79–88"
    ),
    doi="10.1016/j.epsl.2013.10.026",
    status="FROM MEMORY",
    formula="D = exp(−6.06 − 7.96·X_An − 287 kJ/mol / RT)  [m²/s]",
    parameters=_params,
    t_range_c=(800.0, 1200.0),
    composition_range={"x_an": (0.4, 0.9)},
    needs=_needs,
    anisotropy="not resolved; treated as isotropic",
    phase="plagioclase",
    notes=_WARN_WINDOW,
    form=_form,
)

# Zellmer et al. (1999) An-dependent fit to the Sr data of Giletti & Casserly (1994):
# D = 2.92 · 10^(−4.1·X_An − 4.08) · exp(−276 kJ/mol / RT). FROM MEMORY, cross-checked at
# An95 and 1000 °C against the confirmed anorthite law of Cherniak & Watson (1992).
_form, _params, _needs = arrhenius_parameters(
    log10_d0_m2_s=math.log10(2.92) - 4.08, ea_kj_mol=276.0, log10_per_x_an=-4.1
)
ZELLMER1999_SR = ArrheniusLaw(
    id="zellmer1999-sr-plag",
    element="Sr",
    mineral="plagioclase",
    citation=(
        "Zellmer G.F., Blake S., Vance D., Hawkesworth C., Turner S. (1999) Plagioclase "
        "residence times at two island arc volcanoes (Kameni Islands, Santorini, and Soufriere, "
        "St. Vincent) determined by Sr diffusion systematics. Contributions to Mineralogy and "
        "Petrology 136:345–357; fit to the data of Giletti B.J., Casserly J.E.D. (1994) "
        "Geochimica et Cosmochimica Acta 58:3785–3793"
    ),
    doi="10.1007/s004100050543",
    status="FROM MEMORY",
    formula="D = 2.92 · 10^(−4.1·X_An − 4.08) · exp(−276 kJ/mol / RT)  [m²/s]",
    parameters=_params,
    t_range_c=(800.0, 1200.0),
    composition_range={"x_an": (0.4, 0.9)},
    needs=_needs,
    anisotropy="not resolved; treated as isotropic",
    phase="plagioclase",
    notes=_WARN_WINDOW,
    form=_form,
)

# Cherniak & Watson (1992): Sr in anorthite ⊥(010), D = 3.85e-6 · exp(−329.7 kJ/mol / RT),
# 725–1075 °C, dry, 1 atm. CONFIRMED.
_form, _params, _needs = arrhenius_parameters(d0_m2_s=3.85e-6, ea_kj_mol=329.7)
CHERNIAK_WATSON1992_SR_AN = ArrheniusLaw(
    id="cherniak-watson1992-sr-anorthite",
    element="Sr",
    mineral="plagioclase",
    citation=(
        "Cherniak D.J., Watson E.B. (1992) A study of strontium diffusion in K-feldspar, "
        "Na-K feldspar and anorthite using Rutherford Backscattering Spectroscopy. "
        "Earth and Planetary Science Letters 113:411–425"
    ),
    doi="10.1016/0012-821X(92)90142-I",
    status="CONFIRMED",
    formula="D = 3.85×10⁻⁶ · exp(−329.7 kJ/mol / RT)  [m²/s], ⊥(010)",
    parameters=_params,
    # ± 5400 cal/mol in the abstract = 22.6 kJ/mol, taken as 1σ (the abstract does not say which)
    parameter_sd={"ea_kj_mol": 22.6},
    t_range_c=(725.0, 1075.0),
    composition_range={"x_an": (0.9, 1.0)},
    needs=_needs,
    anisotropy="measured normal to (010) only",
    phase="anorthite",
    notes="Measured on anorthite, dry, 1 atm; no An dependence (use it for An > 90 only).",
    form=_form,
)
