"""Plagioclase–melt partitioning: published check values, ranges, registry."""

import math

import numpy as np
import pytest

from zoneprofile import InputError
from zoneprofile.diffusion.partition import (
    PARTITION_MODELS,
    LinearPartitionModel,
    get_partition_model,
    partition_coefficient,
    partition_parameters,
    partition_range_warnings,
    register_partition_model,
)

R = 8.314462618  # CODATA 2018

# docs/references.md §4 check values at An60 and 900 / 1000 / 1100 °C, computed from
# Bindeman, Davis & Drake (1998) RT ln K = A·X_An + B (form CONFIRMED, A and B FROM MEMORY).
CHECKS = {
    "Mg": (0.0144, 0.0201, 0.0267),
    "Sr": (2.863, 2.636, 2.456),
    "Ba": (0.2405, 0.2690, 0.2960),
}


@pytest.mark.parametrize("element", sorted(CHECKS))
def test_bindeman_check_values(element):
    # source: docs/references.md §4 (Bindeman et al. 1998; A, B from memory); ±0.5 % relative
    got = partition_coefficient(element, 0.6, np.array([900.0, 1000.0, 1100.0]))
    np.testing.assert_allclose(got, CHECKS[element], rtol=5e-3)


def test_bindeman_parameters_in_j_per_mol():
    # docs/references.md §4 (FROM MEMORY), kJ/mol -> J/mol
    assert partition_parameters("Mg") == (-26100.0, -25700.0)
    assert partition_parameters("sr") == (-30400.0, 28500.0)
    assert partition_parameters("Ba") == (-55000.0, 19100.0)


def test_blundy_wood_sr():
    # Blundy & Wood (1991), RT ln K_Sr = 26 800 − 26 700·X_An J/mol (FROM MEMORY), via math.exp
    for x_an, t_c in ((0.4, 900.0), (0.6, 1000.0), (0.8, 1150.0)):
        expected = math.exp((26800 - 26700 * x_an) / (R * (t_c + 273.15)))
        got = float(partition_coefficient("Sr", x_an, t_c, model="blundy-wood1991"))
        assert got == pytest.approx(expected, rel=1e-12)
    with pytest.raises(InputError, match="covers Sr"):
        partition_coefficient("Mg", 0.6, 1000, model="blundy-wood1991")


def test_equilibrium_ratio_is_exp_a_delta_x_over_rt():
    # docs/references.md §5: C_eq(An40)/C_eq(An80) = exp(A·(0.4−0.8)/RT) = 3.1542 for Sr at 1000 °C
    k = partition_coefficient("Sr", np.array([0.4, 0.8]), 1000.0)
    assert k[0] / k[1] == pytest.approx(3.1542, abs=1e-4)


def test_vectorised_broadcast():
    x = np.array([0.4, 0.5, 0.6, 0.7])
    t = np.array([900.0, 1000.0])
    grid = partition_coefficient("Mg", x[None, :], t[:, None])
    assert grid.shape == (2, 4)
    assert grid[1, 2] == pytest.approx(float(partition_coefficient("Mg", 0.6, 1000.0)), rel=1e-14)
    # A < 0: K falls as An rises (Mg, Sr and Ba go "uphill" toward low-An zones)
    assert np.all(np.diff(grid, axis=1) < 0)


def test_range_warnings_outside_and_not_inside():
    assert partition_range_warnings("Sr", 0.6) == []
    assert partition_range_warnings("Sr", [0.4, 0.8]) == []
    w = partition_range_warnings("Sr", 0.9)
    assert w == ["X_An 0.9 is outside the calibrated range 0.4–0.8 of the partition model bindeman1998"]
    w = partition_range_warnings("Mg", np.array([0.3, 0.5, 0.85]))
    assert len(w) == 1 and "2 of 3 X_An values" in w[0]


@pytest.mark.parametrize(
    "call, match",
    [
        (lambda: partition_coefficient("Ti", 0.6, 1000), "has no values for Ti"),
        (lambda: partition_coefficient("Sr", 60, 1000), "between 0 and 1"),
        (lambda: partition_coefficient("Sr", 0.6, -400), "absolute zero"),
        (lambda: partition_coefficient("Sr", float("nan"), 1000), "finite"),
        (lambda: get_partition_model("nope"), "known models: bindeman1998"),
    ],
)
def test_bad_inputs(call, match):
    with pytest.raises(InputError, match=match):
        call()


def test_another_model_plugs_in():
    model = LinearPartitionModel(
        id="test-model",
        citation="invented for a test",
        doi=None,
        status="USER",
        formula="RT ln K = A·X_An + B",
        coefficients={"Sr": (-10e3, 5e3)},
        x_an_range=(0.2, 0.9),
    )
    register_partition_model(model)
    try:
        got = float(partition_coefficient("Sr", 0.5, 1000.0, model="test-model"))
        assert got == pytest.approx(math.exp(0.0 / (R * 1273.15)), rel=1e-12)
        assert partition_parameters("Sr", model="test-model") == (-10e3, 5e3)
        with pytest.raises(InputError, match="already registered"):
            register_partition_model(model)
    finally:
        PARTITION_MODELS.pop("test-model")
    for m in PARTITION_MODELS.values():
        d = m.to_dict()
        assert d["citation"] and d["status"]
