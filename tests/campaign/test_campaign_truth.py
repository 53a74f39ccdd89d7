"""Campaigns that tell the truth about themselves.

A campaign in which every crystal failed exits non-zero with a summary line; a failed
crystal's figure still shows what was read and zoned; ``elements = []`` runs a
zoning-only campaign (read and zone, date nothing).
"""

from __future__ import annotations

import json
import textwrap

import pytest

from zoneprofile.cli import main
from zoneprofile.demo import make_demo

HEAD = textwrap.dedent("""\
    draws = 200
    [defaults]
    temperature_c = 1000
    beam_um = 3
    {extra}
    [samples.A]
    """)

CRYSTAL = textwrap.dedent("""\
    [[crystals]]
    sample = "A"
    id = "{id}"
    traverse = "microprobe/EF-A_p04.csv"
    {extra}
    """)


@pytest.fixture(scope="module")
def source(tmp_path_factory):
    root = tmp_path_factory.mktemp("src")
    made = make_demo(root, only=("p04",))
    return root, made["truth_data"]["crystals"][0]


def _campaign(root, name, crystals, extra=""):
    text = HEAD.format(extra=extra) + "".join(CRYSTAL.format(id=i, extra=e) for i, e in crystals)
    path = root / name
    path.write_text(text)
    return path


@pytest.mark.slow
def test_every_crystal_failing_exits_2_and_draws_what_was_read(source, tmp_path, capsys):
    root, truth = source
    # a boundary listed far beyond the traverse: reading and zoning work, dating cannot
    toml = _campaign(root, "allfail.toml", [("beyond", "boundaries = [5000]")])
    out = tmp_path / "out"
    code = main(["run", str(toml), "--out", str(out), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and "every crystal failed (1 of 1)" in err and "report.html" in err
    res = json.loads((out / "results.json").read_text())
    bad = res["crystals"][0]
    assert bad["error"].startswith("fitting: no boundary could be dated")
    # what was read and zoned is kept and drawn: the planted step is found (truth from the generator)
    steps = [s["position_um"] for s in bad["zones"]["steps"]]
    assert any(abs(p - truth["boundaries"][0]["position_um"]) < 5 for p in steps)
    assert len(list((out / "figures").glob("crystal-*beyond.png"))) == 1
    page = (out / "report.html").read_text()
    assert "What was read and zoned of A / beyond" in page and "nothing was dated" in page


def test_zoning_only_campaign(source, tmp_path, capsys):
    root, truth = source
    toml = _campaign(root, "zonly.toml", [("z", "")], extra="elements = []")
    out = tmp_path / "out"
    code = main(["run", str(toml), "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 0, err
    assert "0 failed" in err and "zoning only (elements = [])" in err
    crystal = json.loads((out / "results.json").read_text())["crystals"][0]
    assert crystal["error"] is None and crystal["boundaries"] == []
    steps = [s["position_um"] for s in crystal["zones"]["steps"]]
    assert any(abs(p - truth["boundaries"][0]["position_um"]) < 5 for p in steps)
    assert (out / "report.html").is_file()


def test_elements_must_still_be_a_list(source, tmp_path, capsys):
    root, _ = source
    toml = _campaign(root, "bad.toml", [("z", "")], extra="elements = 3")
    code = main(["run", str(toml), "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2 and "or [] to date nothing" in err and err.count("\n") == 1
