"""Melt equivalents, recharge fingerprints and lever-rule mixing."""

import numpy as np
import pandas as pd
import pytest

from zoneprofile import InputError
from zoneprofile.zoning import analyse_zoning, melt_equivalents, mixing_fraction, recharge_fingerprint, \
    synthetic_zoned_profile

# Bindeman, Davis & Drake (1998), RT ln K = A X_An + B; check values at An60 from docs/references.md §4
K_CHECK = {
    "Mg": {900: 0.0144, 1000: 0.0201, 1100: 0.0267},
    "Sr": {900: 2.863, 1000: 2.636, 1100: 2.456},
    "Ba": {900: 0.2405, 1000: 0.2690, 1100: 0.2960},
}


@pytest.mark.parametrize("element", ["Mg", "Sr", "Ba"])
@pytest.mark.parametrize("temperature_c", [900, 1000, 1100])
def test_melt_equivalent_uses_bindeman_k(element, temperature_c):
    # source: docs/references.md §4 check values (Bindeman et al. 1998 form, A and B from memory)
    k = K_CHECK[element][temperature_c]
    melt, _ = melt_equivalents([60.0], pd.DataFrame({f"{element}_ppm": [100.0]}), temperature_c)
    assert melt[f"melt_{element}_ppm"].iloc[0] == pytest.approx(100.0 / k, rel=2e-3)


def test_oxide_converted_to_element_ppm():
    # MgO 0.1 wt% = 1000 ppm MgO = 603.0 ppm Mg (24.305/40.304, CIAAW 2021 via docs/references.md §1)
    melt, notes = melt_equivalents([60.0], pd.DataFrame({"MgO": [0.1]}), 1000)
    assert melt["melt_Mg_ppm"].iloc[0] == pytest.approx(1000 * 24.305 / 40.304 / 0.0201, rel=2e-3)
    assert any("MgO" in n for n in notes)


def test_lever_rule_single_and_two_elements():
    melt = pd.DataFrame({"melt_Sr_ppm": [400.0, 500.0, 800.0], "melt_Mg_ppm": [1000.0, 1500.0, 3000.0]})
    f, misfit = mixing_fraction(melt, {"Sr_ppm": (400.0, 800.0)})
    # hand-computed lever rule: (c - c1)/(c2 - c1)
    assert f == pytest.approx([0.0, 0.25, 1.0])
    f2, misfit2 = mixing_fraction(melt, {"Sr_ppm": (400.0, 800.0), "Mg_ppm": (1000.0, 3000.0)})
    assert f2 == pytest.approx([0.0, 0.25, 1.0])
    assert misfit2 == pytest.approx([0.0, 0.0, 0.0])
    with pytest.raises(InputError, match="different"):
        mixing_fraction(melt, {"Sr_ppm": (400.0, 400.0)})


def test_fingerprint_rules():
    assert recharge_fingerprint(10.0, {"melt_Mg_ppm": (400.0, 50.0)}) == "recharge-like"
    assert recharge_fingerprint(10.0, {"melt_Mg_ppm": (20.0, 50.0)}) == "heating-like"
    assert recharge_fingerprint(10.0, {"melt_Mg_ppm": (-400.0, 50.0)}) == "unclear"
    assert recharge_fingerprint(-10.0, {"melt_Mg_ppm": (400.0, 50.0)}) is None
    assert recharge_fingerprint(10.0, {}) is None


def _trace_profile(seed, melt_core, melt_rim, temperature_c=1000.0):
    # forward model: plagioclase Mg = melt Mg x K(An, T) (shared partition function), 3 % noise
    from zoneprofile.diffusion.partition import partition_coefficient

    x, an, truth = synthetic_zoned_profile(seed=seed, length_um=120, spacing_um=(1, 2), noise_sd=0.5,
                                           core_value=50.0, steps=[(60.0, 12.0)])
    melt = np.where(x < 60.0, melt_rim, melt_core)
    rng = np.random.default_rng(seed + 100)
    mg = melt * partition_coefficient("Mg", an / 100, temperature_c) * rng.normal(1, 0.03, x.size)
    return x, an, pd.DataFrame({"Mg_ppm": mg})


def test_recharge_like_when_melt_mg_rises():
    x, an, extra = _trace_profile(1, 3000.0, 6000.0)
    res = analyse_zoning(x, an, extra=extra, temperature_c=1000.0)
    assert len(res.steps) == 1
    assert res.steps[0].extra["recharge"] == "recharge-like"


def test_heating_like_when_only_an_rises():
    # plagioclase Mg falls with rising An (A < 0) although the melt is unchanged
    x, an, extra = _trace_profile(2, 3000.0, 3000.0)
    res = analyse_zoning(x, an, extra=extra, temperature_c=1000.0)
    assert len(res.steps) == 1
    assert res.steps[0].extra["columns"]["Mg_ppm"]["change"] < 0
    assert res.steps[0].extra["recharge"] == "heating-like"


def test_no_temperature_no_fingerprint_and_a_warning():
    x, an, extra = _trace_profile(1, 3000.0, 6000.0)
    res = analyse_zoning(x, an, extra=extra)
    assert res.steps[0].extra["recharge"] is None
    assert any("temperature" in w for w in res.warnings)


def test_mixing_fraction_per_zone():
    x, an, extra = _trace_profile(3, 3000.0, 6000.0)
    res = analyse_zoning(x, an, extra=extra, temperature_c=1000.0, melt_endmembers={"Mg_ppm": (3000.0, 6000.0)})
    core, rim = res.zones[0], res.zones[-1]
    assert core["mixing_fraction"] == pytest.approx(0.0, abs=0.05)
    assert rim["mixing_fraction"] == pytest.approx(1.0, abs=0.05)
