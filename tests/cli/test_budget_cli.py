"""The budget's options in `zoneprofile fit` and in a campaign file: stated defaults named, bad values refused."""

import json

import pandas as pd
import pytest

from conftest import run_cli
from zoneprofile.diffusion import synthetic_boundary_profile


@pytest.fixture(scope="module")
def mg_csv(tmp_path_factory):
    # invented data from the seeded forward model
    d, truth = synthetic_boundary_profile(seed=3, element="Mg", mineral="plagioclase", temperature_c=900.0,
                                          time_days=30.0, boundary_um=40.0, outer=12000.0, inner=8000.0,
                                          an_outer=72.0, an_inner=52.0, beam_um=4.0, noise_fraction=0.015)
    path = tmp_path_factory.mktemp("budget") / "mg.csv"
    pd.DataFrame({"distance_um": d["distance_um"], "Mg_ppm": d["value"], "An": d["An"]}).to_csv(path, index=False)
    return path


def _fit(path, out, *extra):
    return run_cli("fit", path, "--element", "Mg", "--mineral", "plagioclase", "--temperature-c", "900",
                   "--beam-um", "4", "--draws", "200", "-o", out, *extra)


def test_fit_without_temperature_sd_states_the_default(mg_csv, tmp_path):
    out = tmp_path / "FIT.json"
    code, stdout, err = _fit(mg_csv, out)
    assert code == 0, err
    fit = json.loads(out.read_text())["fits"][0]
    assert fit["temperature_sd_c"] == 20.0
    named = fit["uncertainty_budget_settings"]["defaults_used"]
    assert {"temperature_sd_c", "beam_sd_um", "growth_width_sd_um", "section_obliquity"} <= set(named)
    assert any("stated default used for the temperature uncertainty" in w for w in fit["warnings"])
    assert "stated default used for the temperature uncertainty" in stdout
    # the user's own values are not "defaults"
    out2 = tmp_path / "FIT2.json"
    code, _, err = _fit(mg_csv, out2, "--temperature-sd-c", "15", "--beam-sd-um", "0.5", "--growth-width-sd-um",
                        "0", "--no-section-obliquity", "--partition-a-sd", "2000")
    assert code == 0, err
    fit2 = json.loads(out2.read_text())["fits"][0]
    assert fit2["uncertainty_budget_settings"]["defaults_used"] == {}
    assert fit2["uncertainty_budget_log10_time_sd"]["obliquity"] == 0.0
    assert fit2["uncertainty_budget_log10_time_sd"]["growth_width"] == 0.0


@pytest.mark.parametrize("extra, words", [
    (("--fo2-buffer", "XYZ"), "unknown oxygen buffer 'XYZ'"),
    (("--beam-sd-um", "-1"), "--beam-sd-um"),
    (("--growth-width-sd-um", "nan"), "--growth-width-sd-um"),
    (("--fo2-buffer", "QFM", "--fo2-pa", "1e-6"), "either --fo2-pa or --fo2-buffer"),
])
def test_bad_budget_options_are_refused_in_one_line(mg_csv, tmp_path, extra, words):
    out = tmp_path / "FIT.json"
    code, _, err = _fit(mg_csv, out, *extra)
    assert code == 2, err
    assert words in err and len(err.strip().splitlines()) == 1, err
    assert not out.exists()


def test_campaign_keys_of_the_budget_are_validated(tmp_path):
    from zoneprofile._validation import InputError
    from zoneprofile.campaign import load_campaign

    (tmp_path / "p.csv").write_text("distance_um,An\n0,60\n")
    base = ('seed = 1\n[defaults]\ntemperature_c = 1000\n{extra}\n[samples.S]\n'
            '[[crystals]]\nsample = "S"\nid = "c1"\ntraverse = "p.csv"\n')
    good = tmp_path / "good.toml"
    good.write_text(base.format(extra='section_obliquity = false\nbeam_sd_um = 0.5\nfo2_buffer = "QFM"\n'
                                      'fo2_delta_log = 1\ngrowth_width_sd_um = 0\npartition_a_sd_j_mol = 3000'))
    c = load_campaign(good)
    p = c.crystals[0].parameters
    assert p["section_obliquity"] is False and p["fo2_buffer"] == "QFM" and p["beam_sd_um"] == 0.5
    assert p["temperature_sd_c"] is None  # the fit's stated default, named in the record
    assert isinstance(p["sample_seed"], int)
    for extra, words in (('fo2_buffer = "XYZ"', "fo2_buffer"), ("beam_sd_um = -1", "beam_sd_um"),
                         ('section_obliquity = "yes"', "section_obliquity")):
        bad = tmp_path / "bad.toml"
        bad.write_text(base.format(extra=extra))
        with pytest.raises(InputError) as exc:
            load_campaign(bad)
        assert words in str(exc.value)
