"""Diffusion laws for alkali feldspar (Sr, Ba)."""

from __future__ import annotations

from zoneprofile.diffusion.laws.arrhenius import ArrheniusLaw, arrhenius_parameters
from zoneprofile.diffusion.laws.plagioclase import CHERNIAK_WATSON1992_SR_AN

__all__ = [
    "CHERNIAK_WATSON1992_SR_ANORTHOCLASE_001",
    "CHERNIAK_WATSON1992_SR_ANORTHOCLASE_010",
    "CHERNIAK1996_SR",
    "CHERNIAK2002_BA",
]


def _anorthoclase(direction: str, d0: float, ea: float, ea_sd: float) -> ArrheniusLaw:
    form, params, needs = arrhenius_parameters(d0_m2_s=d0, ea_kj_mol=ea)
    return ArrheniusLaw(
        id=f"cherniak-watson1992-sr-anorthoclase-{direction}",
        element="Sr",
        mineral="alkali-feldspar",
        citation=CHERNIAK_WATSON1992_SR_AN.citation,
        doi=CHERNIAK_WATSON1992_SR_AN.doi,
        status="CONFIRMED",
        formula=f"D = {d0:.3g} · exp(−{ea:g} kJ/mol / RT)  [m²/s], ⊥({direction})",
        parameters=params,
        parameter_sd={"ea_kj_mol": ea_sd},
        t_range_c=(725.0, 1075.0),
        needs=needs,
        anisotropy=(
            "⊥(001): 2.25e-2 · exp(−373.6 kJ/mol/RT); ⊥(010): 4.51e-3 · exp(−372.8 kJ/mol/RT); "
            "this law is the ⊥(" + direction + ") one"
        ),
        phase="anorthoclase",
        notes="Measured on anorthoclase, dry, 1 atm.",
        form=form,
    )


# Cherniak & Watson (1992), Sr in anorthoclase. CONFIRMED.
# The abstract gives ± 4600 cal/mol (⊥(001)) and ± 4800 cal/mol (⊥(010)) on the activation
# energies: 19.2 and 20.1 kJ/mol, taken as 1σ (the abstract does not say which).
CHERNIAK_WATSON1992_SR_ANORTHOCLASE_001 = _anorthoclase("001", 2.25e-2, 373.6, 19.2)
CHERNIAK_WATSON1992_SR_ANORTHOCLASE_010 = _anorthoclase("010", 4.51e-3, 372.8, 20.1)

# Cherniak (1996): Sr in alkali feldspar ⊥(001), D = 2.9e-9 · exp(−224 kJ/mol / RT),
# 675–1025 °C. Numbers CONFIRMED; which feldspar (albite or sanidine) FROM MEMORY.
_form, _params, _needs = arrhenius_parameters(d0_m2_s=2.9e-9, ea_kj_mol=224.0)
CHERNIAK1996_SR = ArrheniusLaw(
    id="cherniak1996-sr-alkali-feldspar",
    element="Sr",
    mineral="alkali-feldspar",
    citation=(
        "Cherniak D.J. (1996) Strontium diffusion in sanidine and albite, and general "
        "comparisons of strontium diffusion data in feldspars. "
        "Geochimica et Cosmochimica Acta 60:5037–5043"
    ),
    doi="10.1016/S0016-7037(96)00295-5",
    status="CONFIRMED",
    formula="D = 2.9×10⁻⁹ · exp(−224 kJ/mol / RT)  [m²/s], ⊥(001)",
    parameters=_params,
    t_range_c=(675.0, 1025.0),
    needs=_needs,
    anisotropy="measured normal to (001)",
    phase="alkali feldspar (sanidine or albite: which one is recalled, not verified)",
    notes="The numbers are confirmed; which feldspar they belong to is recalled, not verified.",
    form=_form,
)

# Cherniak (2002): Ba in sanidine ⊥(001), D ≈ 0.29 · exp(−455 kJ/mol / RT). FROM MEMORY,
# low confidence; calibrated range not verified.
_form, _params, _needs = arrhenius_parameters(d0_m2_s=0.29, ea_kj_mol=455.0)
CHERNIAK2002_BA = ArrheniusLaw(
    id="cherniak2002-ba-sanidine",
    element="Ba",
    mineral="alkali-feldspar",
    citation=(
        "Cherniak D.J. (2002) Ba diffusion in feldspar. "
        "Geochimica et Cosmochimica Acta 66:1641–1650"
    ),
    doi="10.1016/S0016-7037(01)00866-3",
    status="FROM MEMORY",
    formula="D ≈ 0.29 · exp(−455 kJ/mol / RT)  [m²/s], ⊥(001)",
    parameters=_params,
    t_range_c=None,
    needs=_needs,
    anisotropy="measured normal to (001)",
    phase="sanidine",
    notes=(
        "Recalled with low confidence and no verified calibrated range: "
        "treat Ba timescales from this law as indicative only."
    ),
    form=_form,
)
