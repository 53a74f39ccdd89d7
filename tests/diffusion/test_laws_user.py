"""User diffusion laws from TOML: round trip and messages that name the key."""

import math

import numpy as np
import pytest

from zoneprofile import InputError
from zoneprofile.diffusion.laws import LAWS, get_law, load_user_laws, register_law, unregister_law

GOOD = """
[[law]]
id = "test-mg-plag"
element = "Mg"
mineral = "plagioclase"
citation = "Invented law for a test"
d0_m2_s = 2.92e-4
ea_kj_mol = 266.0
"""

# Same numbers as the built-in Costa et al. (2003) law (FROM MEMORY), in the
# user format: log10 D0 = log10(2.92) - 3.1, -4.1 per X_An, Ea 266 kJ/mol.
COSTA_AS_USER = f"""
[[law]]
id = "user-costa"
element = "mg"
mineral = "plag"
citation = "Costa et al. (2003) as a user law"
log10_d0_m2_s = {math.log10(2.92) - 3.1!r}
ea_kj_mol = 266
log10_per_x_an = -4.1
temperature_range_c = [800, 1200]
x_an_range = [0.4, 0.9]
ea_sd_kj_mol = 10.0

[[law]]
id = "user-vanorman"
element = "Mg"
mineral = "plagioclase"
citation = "Van Orman et al. (2014) as a user law"
ln_d0_m2_s = -6.06
ln_per_x_an = -7.96
ea_kj_mol = 287
"""


def _write(tmp_path, text, name="laws.toml"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_user_law_reproduces_built_in_laws(tmp_path):
    costa, vanorman = load_user_laws(_write(tmp_path, COSTA_AS_USER))
    assert costa.element == "Mg" and costa.mineral == "plagioclase" and costa.status == "USER"
    t = np.array([850.0, 1000.0, 1150.0])
    x = np.array([0.45, 0.6, 0.85])
    # built-in laws as the reference (docs/references.md §3, FROM MEMORY formulas)
    np.testing.assert_allclose(
        costa.log10_d(t, x_an=x), get_law("costa2003-mg-plag").log10_d(t, x_an=x), atol=1e-12
    )
    np.testing.assert_allclose(
        vanorman.log10_d(t, x_an=x), get_law("vanorman2014-mg-plag").log10_d(t, x_an=x), atol=1e-12
    )
    assert costa.parameter_sd == {"ea_kj_mol": 10.0}
    assert costa.range_warnings(1250, x_an=0.6) and not costa.range_warnings(1000, x_an=0.6)
    assert costa.to_dict()["status"] == "USER"


def test_register_and_default(tmp_path):
    path = _write(tmp_path, COSTA_AS_USER.replace('mineral = "plag"', 'mineral = "olivine"').replace('"mg"', '"Ti"'))
    laws = load_user_laws(path, register=True)
    try:
        assert get_law("user-costa") is laws[0]
        from zoneprofile.diffusion.laws import default_law

        # one registered law for Ti in olivine: it becomes the default for that pair
        assert default_law("Ti", "olivine").id == "user-costa"
        with pytest.raises(InputError, match="already registered"):
            load_user_laws(path, register=True)
        with pytest.raises(InputError, match="built-in"):
            register_law(get_law("costa2003-mg-plag"), replace=True)
    finally:
        for law in laws:
            unregister_law(law.id)
    assert "user-costa" not in LAWS


@pytest.mark.parametrize(
    "edit, match",
    [
        (lambda s: s.replace('ea_kj_mol = 266.0\n', ""), "key 'ea_kj_mol' is missing"),
        (lambda s: s.replace("ea_kj_mol = 266.0", 'ea_kj_mol = "266"'), "key 'ea_kj_mol' must be a number"),
        (lambda s: s.replace("ea_kj_mol = 266.0", "ea_kj_mol = -266.0"), "key 'ea_kj_mol' must be > 0"),
        (lambda s: s.replace("ea_kj_mol = 266.0", "ea_kj_mol = 266000.0"), "key 'ea_kj_mol' is in kJ/mol"),
        (lambda s: s.replace("d0_m2_s = 2.92e-4", "d0_m2_s = -1e-4"), "key 'd0_m2_s' must be > 0"),
        (lambda s: s.replace("d0_m2_s = 2.92e-4", ""), "exactly one of the keys 'd0_m2_s'"),
        (lambda s: s + "log10_d0_m2_s = -3.0\n", "exactly one of the keys"),
        (lambda s: s.replace('citation = "Invented law for a test"', ""), "key 'citation' is missing"),
        (lambda s: s + "temperature_rnage_c = [1, 2]\n", "unknown key 'temperature_rnage_c'"),
        (lambda s: s + "temperature_range_c = [1200, 800]\n", "key 'temperature_range_c' must have low < high"),
        (lambda s: s + "x_an_range = [40, 90]\n", "key 'x_an_range' holds mole fractions"),
        (lambda s: s + "temperature_range_c = 900\n", "key 'temperature_range_c' must be a list"),
        (lambda s: s + "log10_per_x_an = -4.1\nln_per_x_fe = 1.0\n", "mixes log10 and ln"),
        (lambda s: s.replace('id = "test-mg-plag"', 'id = "Bad Id"'), "key 'id' must be lowercase"),
        (lambda s: s.replace('id = "test-mg-plag"', 'id = "costa2003-mg-plag"') + "", None),
        (lambda s: s.replace("[[law]]", "[law]"), "no \\[\\[law\\]\\] table"),
        (lambda s: s + s, "used twice"),
        (lambda s: s.replace("ea_kj_mol = 266.0", "ea_kj_mol = "), "not valid TOML"),
        (lambda s: "title = 'x'\n" + s, "unknown top-level key 'title'"),
    ],
)
def test_bad_user_laws_name_the_key(tmp_path, edit, match):
    text = edit(GOOD)
    path = _write(tmp_path, text)
    if match is None:
        # a built-in id is fine in a file but refused on registration
        laws = load_user_laws(path)
        with pytest.raises(InputError, match="built-in"):
            register_law(laws[0])
        return
    with pytest.raises(InputError, match=match) as exc:
        load_user_laws(path)
    assert str(path) in str(exc.value)
    assert "\n" not in str(exc.value)


def test_toml_syntax_error_gives_the_row(tmp_path):
    path = _write(tmp_path, GOOD.replace("ea_kj_mol = 266.0", "ea_kj_mol = = 1"))
    with pytest.raises(InputError) as exc:
        load_user_laws(path)
    assert exc.value.row == 8  # line of the bad key in the file (1-based)


def test_missing_and_empty_files(tmp_path):
    with pytest.raises(InputError, match="not found"):
        load_user_laws(tmp_path / "nope.toml")
    with pytest.raises(InputError, match="empty"):
        load_user_laws(_write(tmp_path, ""))
