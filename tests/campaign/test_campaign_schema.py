"""The campaign file: validation messages name the file, the line and the key."""

from __future__ import annotations

import textwrap

import pytest

from zoneprofile.campaign import crystal_seed, load_campaign
from zoneprofile.campaign._toml_lines import KeyLines

from _campaign_files import GOOD, error_of, write  # noqa: F401 - shared with other tests


def line_of(text, fragment):
    """1-based line of the first line containing ``fragment`` (independent of the code under test)."""
    for k, ln in enumerate(text.splitlines(), start=1):
        if fragment in ln:
            return k
    raise AssertionError(fragment)


def test_good_campaign_merges_settings_crystal_over_sample_over_defaults(tmp_path):
    c = load_campaign(write(tmp_path, GOOD))
    assert [x.label for x in c.crystals] == ["S1/c1", "S 2/c2"]
    p1, p2 = c.crystals[0].parameters, c.crystals[1].parameters
    assert p1["temperature_c"] == 990.0  # sample over defaults
    assert p2["temperature_c"] == 1010.0  # crystal over defaults
    assert p1["temperature_sd_c"] == 10.0 and p1["beam_um"] == 3.0
    assert p1["elements"] == ["Mg"] and p2["elements"] == ["Mg", "Sr"]
    assert p1["boundaries"] == "recharge" and p1["column"] == "An"
    assert c.draws == 200 and p1["draws"] == 200
    assert c.crystals[0].inputs[0]["rel"] == "data/c1.csv"
    assert c.cache_dir == (tmp_path / ".zoneprofile-cache").resolve()


def test_crystal_seed_depends_on_campaign_seed_and_id_only(tmp_path):
    c = load_campaign(write(tmp_path, GOOD))
    assert c.crystals[0].parameters["seed"] == crystal_seed(3, "S1", "c1")
    # the same crystal listed later in another file keeps its seed
    swapped = GOOD.split("[[crystals]]")
    text = swapped[0] + "[[crystals]]" + swapped[2] + "[[crystals]]" + swapped[1]
    c2 = load_campaign(write(tmp_path, text, name="other.toml"))
    seeds = {x.label: x.parameters["seed"] for x in c2.crystals}
    assert seeds["S1/c1"] == c.crystals[0].parameters["seed"]
    assert crystal_seed(3, "S1", "c1") != crystal_seed(4, "S1", "c1")
    assert crystal_seed(3, "S1", "c1") != crystal_seed(3, "S1", "c2")


def test_typo_key_suggests_the_right_one_with_line(tmp_path):
    text = GOOD.replace("temperature_c = 1010", "temperture_c = 1010")
    p = write(tmp_path, text)
    err = error_of(p)
    msg = str(err)
    assert str(p) in msg
    assert f"line {line_of(text, 'temperture_c')}" in msg
    assert "temperture_c" in msg and "did you mean 'temperature_c'" in msg
    assert "crystal #2" in msg
    assert len(msg.splitlines()) == 1


def test_typo_in_top_level_and_defaults(tmp_path):
    text = GOOD.replace("draws = 200", "drawz = 200")
    msg = str(error_of(write(tmp_path, text)))
    assert f"line {line_of(text, 'drawz')}" in msg and "did you mean 'draws'" in msg
    text = GOOD.replace("beam_um = 3", "beam_size = 3")
    msg = str(error_of(write(tmp_path, text)))
    assert f"line {line_of(text, 'beam_size')}" in msg and "beam_size" in msg


def test_missing_input_names_key_line_and_path(tmp_path):
    p = write(tmp_path, GOOD)
    (tmp_path / "data" / "c2.csv").unlink()
    msg = str(error_of(p))
    assert f"line {line_of(GOOD, 'data/c2.csv')}" in msg
    assert "key 'traverse' of crystal #2" in msg and "data/c2.csv" in msg and "not found" in msg


def test_path_escaping_the_folder_is_refused_unless_allowed(tmp_path):
    inner = tmp_path / "camp"
    inner.mkdir()
    (tmp_path / "outside.csv").write_text("x\n1\n")
    text = GOOD.replace('"data/c1.csv"', '"../outside.csv"')
    p = write(inner, text)
    msg = str(error_of(p))
    assert "outside the campaign folder" in msg and "--allow-outside" in msg
    assert f"line {line_of(text, 'outside.csv')}" in msg
    c = load_campaign(p, allow_outside=True)
    assert c.crystals[0].inputs[0]["path"] == str((tmp_path / "outside.csv").resolve())
    p2 = write(inner, "allow_outside_paths = true\n" + text, name="b.toml")
    assert load_campaign(p2).allow_outside
    # an absolute path outside is refused too
    text3 = GOOD.replace('"data/c1.csv"', f'"{(tmp_path / "outside.csv").as_posix()}"')
    assert "outside the campaign folder" in str(error_of(write(inner, text3, name="c.toml")))


@pytest.mark.parametrize(
    "old, new, fragment, expect",
    [
        ("temperature_c = 1010", 'temperature_c = "hot"', "temperature_c = \"hot\"", "expected a number"),
        ("temperature_c = 1010", "temperature_c = 3000", "temperature_c = 3000", "at most 1500"),
        ("seed = 3", "seed = 3.5", "seed = 3.5", "whole number"),
        ("seed = 3", "seed = -1", "seed = -1", "at least 0"),
        ('elements = ["Mg", "Sr"]', 'elements = "Mg, Sr"', 'elements = "Mg, Sr"', "cannot be dated"),
        ('elements = ["Mg", "Sr"]', 'elements = ["Mg", "Fe"]', 'elements = ["Mg", "Fe"]', "cannot be dated"),
        ('elements = ["Mg", "Sr"]', "elements = 5", "elements = 5", "list of element names"),
        ('mineral = "plagioclase"', 'mineral = "plagiolcase"', "mineral =", "did you mean 'plagioclase'"),
        ('mineral = "plagioclase"', 'mineral = "garnet"', "mineral =", "unknown value 'garnet'"),
        ("beam_um = 3", "beam_um = true", "beam_um", "expected a number"),
        ("laws = {}", 'laws = { Mg = "no-such-law" }', "laws =", "unknown law 'no-such-law'"),
        ('sample = "S1"', 'sample = "S3"', 'sample = "S3"', "has no [samples"),
        ('id = "c2"', 'id = "c1"\nsample = "S1"', None, "TOML"),
    ],
)
def test_bad_values_name_line_and_key(tmp_path, old, new, fragment, expect):
    text = GOOD.replace(old, new, 1) if old != 'sample = "S1"' else GOOD.replace(old, new)
    p = write(tmp_path, text)
    msg = str(error_of(p))
    assert expect in msg, msg
    assert str(p) in msg
    if fragment is not None:
        assert f"line {line_of(text, fragment)}" in msg, msg
    assert len(msg.splitlines()) == 1


def test_duplicate_crystal_and_missing_temperature(tmp_path):
    text = GOOD.replace('id = "c2"', 'id = "c1"').replace('sample = "S 2"\n', 'sample = "S1"\n', 1)
    msg = str(error_of(write(tmp_path, text)))
    assert "listed twice" in msg and "crystal #1" in msg
    text = GOOD.replace("temperature_c = 1000\n", "").replace("temperature_c = 990\n", "")
    msg = str(error_of(write(tmp_path, text)))
    assert "no temperature_c" in msg and "'c1'" in msg
    assert f"line {line_of(text, '[[crystals]]')}" in msg


def test_toml_syntax_error_names_line(tmp_path):
    text = GOOD.replace("draws = 200", "draws = = 200")
    msg = str(error_of(write(tmp_path, text)))
    assert "not a valid TOML file" in msg and f"line {line_of(text, 'draws = =')}" in msg


def test_map_needs_spots_and_line(tmp_path):
    (tmp_path / "data" ).mkdir(exist_ok=True)
    (tmp_path / "data" / "m.tif").write_bytes(b"II*\x00")
    text = GOOD + '\n[[crystals]]\nsample = "S1"\nid = "m1"\nmap = "data/m.tif"\n'
    msg = str(error_of(write(tmp_path, text)))
    assert "needs spots" in msg and "crystal #3" in msg
    (tmp_path / "data" / "s.csv").write_text("x_px,y_px,An\n1,1,50\n")
    text2 = text + 'spots = "data/s.csv"\nline = [1, 2, 3]\n'
    msg = str(error_of(write(tmp_path, text2)))
    assert "[x0, y0, x1, y1]" in msg and f"line {line_of(text2, 'line = [1, 2, 3]')}" in msg
    text3 = text + 'spots = "data/s.csv"\nline = [1, 2, 30, 40]\npixel_um = 0.5\n'
    c = load_campaign(write(tmp_path, text3))
    assert c.crystals[2].parameters["line"] == [1.0, 2.0, 30.0, 40.0]
    assert {i["role"] for i in c.crystals[2].inputs} == {"map", "spots"}


def test_no_crystals_and_missing_file(tmp_path):
    p = tmp_path / "a.toml"
    p.write_text('title = "x"\n')
    assert "no [[crystals]]" in str(error_of(p))
    assert "not found" in str(error_of(tmp_path / "nope.toml"))


def test_key_lines_of_nested_tables():
    text = textwrap.dedent("""\
        a = 1
        [samples."B.1"]
        x = 2  # comment = not a key
        [[crystals]]
        id = "c"
        laws = { Mg = "q" }
        [[crystals]]
        s = '''
        fake = 1
        '''
        id = "d"
        """)
    lines = KeyLines(text)
    assert lines.line_of(("a",)) == 1
    assert lines.line_of(("samples", "B.1", "x")) == 3
    assert lines.line_of(("crystals", 0, "id")) == 5
    assert lines.line_of(("crystals", 0, "laws", "Mg")) == 6
    assert lines.line_of(("crystals", 1, "id")) == 11
    assert lines.line_of(("crystals", 1, "fake")) == 7  # inside a string: falls back to the block


def test_element_without_default_law_needs_one(tmp_path):
    # Ba in plagioclase: the diffusion stage has no verified default law (docs/references.md §3 lists none)
    text = GOOD.replace('elements = ["Mg", "Sr"]', 'elements = ["Mg", "Ba"]')
    msg = str(error_of(write(tmp_path, text)))
    where = line_of(text, 'elements = ["Mg", "Ba"]')
    assert "Ba" in msg and "laws = { Ba" in msg and f"line {where}" in msg
    from zoneprofile.diffusion import LAWS

    ba = next(k for k in LAWS if "ba" in k)
    ok = text.replace("laws = {}", f'laws = {{ Ba = "{ba}" }}')
    assert load_campaign(write(tmp_path, ok, name="ok.toml")).crystals[1].parameters["laws"] == {"Ba": ba}


def test_olivine_needs_oxygen_fugacity(tmp_path):
    # Fe-Mg in olivine depends on fO2 (Dohmen & Chakraborty 2007, docs/references.md §3)
    text = GOOD.replace('mineral = "plagioclase"', 'mineral = "olivine"').replace(
        'elements = ["Mg"]', 'elements = ["FeMg"]').replace('elements = ["Mg", "Sr"]\n', "")
    msg = str(error_of(write(tmp_path, text)))
    assert "fo2_pa" in msg and "crystal #1" in msg
    ok = text.replace("beam_um = 3", "beam_um = 3\nfo2_pa = 1e-7\npressure_mpa = 100")
    c = load_campaign(write(tmp_path, ok, name="ok.toml"))
    assert c.crystals[0].parameters["fo2_pa"] == 1e-7 and c.crystals[0].parameters["column"] == "Fo"
