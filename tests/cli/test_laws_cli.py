"""`zoneprofile laws`: lists every law with its citation; filters; JSON; bad input."""

import json

from zoneprofile.cli import main
from zoneprofile.diffusion.laws import LAWS
from zoneprofile.diffusion.partition import PARTITION_MODELS


def test_lists_every_law_and_citation(capsys):
    assert main(["laws"]) == 0
    out = capsys.readouterr().out
    for law in LAWS.values():
        assert law.id in out
        assert law.citation in out
        assert law.status in out
    for model in PARTITION_MODELS.values():
        assert model.id in out and model.citation in out
    assert "[default for Mg in plagioclase]" in out
    assert "No default for Ba in plagioclase" in out
    assert "800–1200 °C" in out


def test_json_and_filters(capsys):
    assert main(["laws", "--element", "Sr", "--mineral", "plagioclase", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    ids = [law["id"] for law in doc["laws"]]
    assert ids == ["zellmer1999-sr-plag", "cherniak-watson1992-sr-anorthite"]
    assert doc["laws"][0]["default_for"] == {"element": "Sr", "mineral": "plagioclase"}
    assert {m["id"] for m in doc["partition_models"]} == {"bindeman1998", "blundy-wood1991"}
    assert main(["laws", "--mineral", "olivine", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert {law["id"] for law in doc["laws"]} == {
        "dohmen2007-femg-olivine",
        "dohmen2007-femg-olivine-tamed",
        "dohmen2007-femg-olivine-ped",
    }
    assert doc["partition_models"] == []


def test_user_law_file_is_listed(tmp_path, capsys):
    p = tmp_path / "mine.toml"
    p.write_text(
        '[[law]]\nid = "my-ti"\nelement = "Ti"\nmineral = "quartz"\n'
        'citation = "Invented (2030)"\nd0_m2_s = 1e-9\nea_kj_mol = 250\n',
        encoding="utf-8",
    )
    assert main(["laws", "--law-file", str(p), "--element", "Ti"]) == 0
    out = capsys.readouterr().out
    assert "my-ti" in out and "Invented (2030)" in out and "cherniak2007-ti-quartz" in out
    assert "my-ti" not in LAWS  # listing does not register


def test_bad_input_exit_2_one_line(tmp_path, cli):
    code, out, err = cli("laws", "--element", "Xx")
    assert code == 2 and out == ""
    assert len(err.strip().splitlines()) == 1 and "no diffusion law for Xx" in err
    bad = tmp_path / "bad.toml"
    bad.write_text('[[law]]\nid = "x"\nelement = "Ti"\nmineral = "quartz"\ncitation = "c"\nd0_m2_s = 1e-9\n')
    code, out, err = cli("laws", "--law-file", bad)
    assert code == 2 and "key 'ea_kj_mol' is missing" in err and str(bad) in err
    assert len(err.strip().splitlines()) == 1 and "Traceback" not in err


def test_one_law_in_full(capsys):
    assert main(["laws", "dohmen2007-femg-olivine-tamed"]) == 0
    out = capsys.readouterr().out
    # Dohmen & Chakraborty 2007 TaMED parameters (SECONDARY, docs/references.md §3)
    assert "log10_d0_m2_s = -9.21" in out and "ea_kj_mol = 201" in out
    assert "900–1200 °C" in out and "1e-10" in out
    assert main(["laws", "costa2003-mg-plag", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["parameters"]["ea_kj_mol"] == {"value": 266.0, "unit": "kJ/mol"}
    assert main(["laws", "no-such-law"]) == 2
    err = capsys.readouterr().err
    assert "unknown diffusion law 'no-such-law'" in err and "costa2003-mg-plag" in err
