"""`zoneprofile run`: bad campaigns stop with one line (file, key, line), exit 2, nothing written.

Plus one real run of a small invented campaign with hostile user text and a
crystal whose fit fails: the failure is reported while the other crystal
completes, and the text is escaped in the HTML and neutralised in the CSV.
"""

from __future__ import annotations

import json
import sys
import textwrap

import pytest

from zoneprofile.cli import main

BASE = textwrap.dedent("""\
    seed = 1
    [defaults]
    temperature_c = 1000
    mineral = "plagioclase"
    [samples.A]
    [[crystals]]
    sample = "A"
    id = "c1"
    traverse = "t.csv"
    """)


def line_of(text, fragment):
    for k, ln in enumerate(text.splitlines(), start=1):
        if fragment in ln:
            return k
    raise AssertionError(fragment)


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "t.csv").write_text("Point,distance_um,SiO2,Al2O3,CaO,Na2O,K2O\n1,0,50,31,14,3.2,0.1\n")
    return tmp_path


def run_main(capsys, *args):
    code = main(["run", *map(str, args)])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.mark.parametrize(
    "old, new, fragment, expected",
    [
        ("temperature_c = 1000", "temprature_c = 1000", "temprature_c", "did you mean 'temperature_c'"),
        ('traverse = "t.csv"', 'traverse = "missing.csv"', "missing.csv", "not found"),
        ('traverse = "t.csv"', 'traverse = "../t.csv"', "../t.csv", "outside the campaign folder"),
        ("temperature_c = 1000", 'temperature_c = "1000 C"', "temperature_c", "expected a number"),
        ('mineral = "plagioclase"', 'mineral = "garnet"', "mineral", "unknown value 'garnet'"),
        ('id = "c1"', "id = 7", "id = 7", "expected text"),
    ],
)
def test_bad_campaign_exits_2_with_one_line(capsys, folder, old, new, fragment, expected):
    text = BASE.replace(old, new)
    toml = folder / "c.toml"
    toml.write_text(text)
    out = folder / "out"
    code, _, err = run_main(capsys, toml, "--out", out)
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert str(toml) in lines[0] and f"line {line_of(text, fragment)}" in lines[0] and expected in lines[0]
    assert "Traceback" not in err
    assert not out.exists() and not (folder / ".zoneprofile-cache").exists()


def test_outside_path_accepted_with_flag_then_fails_only_on_content(capsys, tmp_path):
    inner = tmp_path / "c"
    inner.mkdir()
    (tmp_path / "t.csv").write_text("not a table\n")
    (inner / "c.toml").write_text(BASE.replace('"t.csv"', '"../t.csv"'))
    code, _, err = run_main(capsys, inner / "c.toml", "--out", tmp_path / "o1")
    assert code == 2 and "--allow-outside" in err
    code, _, err = run_main(capsys, inner / "c.toml", "--out", tmp_path / "o2", "--allow-outside", "--quiet")
    # the only crystal failed: exit 2 with one summary line (report still written)
    assert code == 2 and "every crystal failed (1 of 1)" in err and err.count("\n") == 1, err
    res = json.loads((tmp_path / "o2" / "results.json").read_text())
    assert res["crystals"][0]["error"].startswith("reading traverse:")


def test_existing_output_needs_force_and_is_kept(capsys, folder):
    toml = folder / "c.toml"
    toml.write_text(BASE)
    out = folder / "out"
    out.mkdir()
    (out / "keep.txt").write_text("mine")
    code, _, err = run_main(capsys, toml, "--out", out)
    assert code == 2 and "--force" in err and len(err.strip().splitlines()) == 1
    assert (out / "keep.txt").read_text() == "mine"


def test_output_may_not_swallow_the_campaign_folder(capsys, folder):
    toml = folder / "c.toml"
    toml.write_text(BASE)
    code, _, err = run_main(capsys, toml, "--out", folder, "--force")
    assert code == 2 and "campaign's own folder" in err
    assert toml.exists() and (folder / "t.csv").exists()


def test_bad_options(capsys, folder):
    toml = folder / "c.toml"
    toml.write_text(BASE)
    code, _, err = run_main(capsys, toml, "--out", folder / "o", "--workers", "0")
    assert code == 2 and "--workers" in err
    code, _, err = run_main(capsys, toml, "--out", folder / "o", "--figures", "png,gif")
    assert code == 2 and "gif" in err
    code, _, err = run_main(capsys, folder / "nope.toml", "--out", folder / "o")
    assert code == 2 and "not found" in err


def test_scheduler_without_dask_installed_is_one_line(capsys, folder, monkeypatch):
    toml = folder / "c.toml"
    toml.write_text(BASE)
    monkeypatch.setitem(sys.modules, "distributed", None)  # as if the optional extra were missing
    code, _, err = run_main(capsys, toml, "--out", folder / "o", "--scheduler", "tcp://127.0.0.1:8786")
    assert code == 2 and "pip install 'zoneprofile[distributed]'" in err
    assert len(err.strip().splitlines()) == 1 and not (folder / "o").exists()


def test_unreachable_scheduler_is_one_line(capsys, folder, monkeypatch):
    from zoneprofile.campaign import _executors

    monkeypatch.setattr(_executors, "CONNECT_TIMEOUT", "1s")
    toml = folder / "c.toml"
    toml.write_text(BASE)
    code, _, err = run_main(capsys, toml, "--out", folder / "o", "--scheduler", "tcp://127.0.0.1:9")
    assert code == 2 and "cannot reach the Dask scheduler" in err
    assert not (folder / "o").exists()


HOSTILE = '<script>alert(1)</script>'
FORMULA = '=HYPERLINK("http://example.invalid","x")'


def test_hostile_text_is_escaped_and_a_failing_fit_is_reported(tmp_path):
    from conftest import run_cli
    from zoneprofile.demo import make_demo

    made = make_demo(tmp_path / "src", only=("p04",))
    truth = made["truth_data"]["crystals"][0]
    traverse = "microprobe/EF-A_p04.csv"
    text = textwrap.dedent(f"""\
        title = {json.dumps(HOSTILE)}
        draws = 300
        [defaults]
        temperature_c = 1000
        temperature_sd_c = 15
        beam_um = 3
        [samples.{json.dumps(HOSTILE)}]
        comment = {json.dumps(FORMULA)}
        [[crystals]]
        sample = {json.dumps(HOSTILE)}
        id = {json.dumps(FORMULA)}
        traverse = "{traverse}"
        [[crystals]]
        sample = {json.dumps(HOSTILE)}
        id = "beyond"
        traverse = "{traverse}"
        boundaries = [5000]
        """)
    toml = tmp_path / "src" / "hostile.toml"
    toml.write_text(text)
    out = tmp_path / "out"
    code, _, err = run_cli("run", toml, "--out", out)
    assert code == 0, err
    assert "1 failed" in err and "beyond" in err
    res = json.loads((out / "results.json").read_text())
    good, bad = res["crystals"]
    assert good["error"] is None and good["sample"] == HOSTILE and good["crystal"] == FORMULA
    assert abs(good["boundaries"][0]["position_um"] - truth["boundaries"][0]["position_um"]) < 5
    assert bad["error"].startswith("fitting: no boundary could be dated")
    page = (out / "report.html").read_text()
    assert HOSTILE not in page and "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    assert "no boundary could be dated" in page  # the failure is in the report
    import csv

    cells = [cell for p in sorted((out / "tables").glob("*.csv"))
             for row in csv.reader(p.read_text().splitlines()) for cell in row]
    assert FORMULA not in cells and "'" + FORMULA in cells
    assert not [c for c in cells if c.startswith(("=", "+", "@"))]  # OWASP CSV-injection rule (common practice)


def test_relative_output_folder(tmp_path):
    # the README's commands name the output folder relative to where they are run
    from conftest import run_cli
    from zoneprofile.demo import make_demo

    make_demo(tmp_path / "src", only=("p04",))
    (tmp_path / "src" / "one.toml").write_text(textwrap.dedent("""\
        draws = 200
        [defaults]
        temperature_c = 1000
        temperature_sd_c = 15
        beam_um = 3
        [samples.A]
        [[crystals]]
        sample = "A"
        id = "p04"
        traverse = "microprobe/EF-A_p04.csv"
        """))
    code, _, err = run_cli("run", "src/one.toml", "--out", "out", "--quiet", cwd=tmp_path)
    assert code == 0, err
    assert (tmp_path / "out" / "report.html").is_file()
    assert sorted(p.name for p in (tmp_path / "out" / "figures").glob("crystal-*.png")) == ["crystal-001-A-p04.png"]
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".out")]  # no temporary folder left behind
