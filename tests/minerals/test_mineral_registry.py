"""One table of mineral facts (zoneprofile/minerals/registry.py) and one temperature range.

Every consumer (diffusion laws, fitting, campaign file, command line, recalculation,
synthetic traverses) must agree with the table, and no second table of minerals may
reappear in the package (an AST walk over the source).
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

import zoneprofile
from zoneprofile import InputError
from zoneprofile.minerals.registry import BY_NAME, REGISTRY, lookup, needs_an, recalculated_minerals, value_column

PACKAGE = Path(zoneprofile.__file__).parent
NAMES = {m.name for m in REGISTRY} | {m.law_mineral for m in REGISTRY}


# --------------------------------------------------------------------------- laws
def test_law_registry_reads_the_mineral_table():
    from zoneprofile.diffusion.laws import DEFAULTS, ELEMENTS, MINERALS, default_law, normalise_mineral
    from zoneprofile.diffusion.laws.registry import NO_DEFAULT

    assert MINERALS == tuple(m.law_mineral for m in REGISTRY)
    assert set(ELEMENTS) == {d.element for m in REGISTRY for d in m.elements}
    for m in REGISTRY:
        for alias in (m.name, *m.aliases):
            assert normalise_mineral(alias) == m.law_mineral
        for d in m.elements:
            if d.default_law is None:
                assert (d.element, m.law_mineral) in NO_DEFAULT
                with pytest.raises(InputError, match="no verified law"):
                    default_law(d.element, m.name)
                continue
            assert DEFAULTS[(d.element, m.law_mineral)] == d.default_law
            law = default_law(d.element, m.name)
            # the law's own data (its family module) names the same element and mineral
            assert (law.element, law.mineral) == (d.element, m.law_mineral)
            # the An rule agrees with the law: a law with an An term needs An
            if "x_an" in law.needs:
                assert d.needs_an


def test_needs_an_is_plagioclase_trace_elements_only():
    # An-dependent partitioning of trace elements is a plagioclase property (Blundy & Wood 1991;
    # Bindeman et al. 1998): Mg, Sr and Ba in plagioclase, nothing else
    coupled = {(d.element, m.name) for m in REGISTRY for d in m.elements if d.needs_an}
    assert coupled == {("Mg", "plagioclase"), ("Sr", "plagioclase"), ("Ba", "plagioclase")}
    from zoneprofile.diffusion.partition import partition_parameters

    for element, _ in coupled:  # every An-coupled element has partition parameters
        a, b = partition_parameters(element)
        assert a < 0 or a > 0


# --------------------------------------------------------------------------- fitting and command line
def test_fitting_and_cli_value_columns_agree(tmp_path):
    from zoneprofile.cli.fit import _value_column
    from zoneprofile.diffusion.fitting import ELEMENT_COLUMNS

    assert ELEMENT_COLUMNS == {(d.element, m.law_mineral): d.column for m in REGISTRY for d in m.elements}
    for m in REGISTRY:
        for d in m.elements:
            assert value_column(d.element, m.name) == value_column(d.element, m.law_mineral) == d.column
            assert _value_column(("distance_um", d.column), d.element, m.law_mineral, tmp_path) == d.column
    with pytest.raises(InputError, match="no diffusion model"):
        _value_column(("distance_um", "Ti_ppm"), "Ti", "plagioclase", tmp_path)


def test_recalculation_reads_the_mineral_table():
    from zoneprofile.cli.recalc import MINERAL_NAMES
    from zoneprofile.minerals import MINERALS
    from zoneprofile.minerals import feldspar, olivine, pyroxene

    assert tuple(MINERALS) == recalculated_minerals() == MINERAL_NAMES
    for name, recipe in MINERALS.items():
        assert recipe.main_index == BY_NAME[name].zoning_column
        assert recipe.main_index in recipe.indices
    # formula basis: 8 O feldspar, 4 O olivine, 6 O pyroxene (Deer, Howie & Zussman)
    assert (feldspar.OXYGENS, olivine.OXYGENS, pyroxene.OXYGENS) == (8, 4, 6)
    assert [MINERALS[n].oxygens for n in MINERAL_NAMES] == [8, 8, 4, 6]


@pytest.mark.parametrize("mineral", recalculated_minerals())
def test_synthetic_traverse_writes_the_zoning_column(tmp_path, mineral):
    from zoneprofile.io.synthetic import synthetic_traverse_table

    truth = synthetic_traverse_table(tmp_path / "t.csv", mineral=mineral, n_points=12, seed=1)
    assert BY_NAME[mineral].zoning_column in truth.columns


# --------------------------------------------------------------------------- campaign
def _campaign(tmp_path, mineral, extra="", temperature_c=900):
    from zoneprofile.campaign import load_campaign

    (tmp_path / "t.csv").write_text("distance_um,x\n0,1\n")
    key = "trace" if mineral == "quartz" else "traverse"
    (tmp_path / "c.toml").write_text(
        f'[defaults]\nmineral = "{mineral}"\ntemperature_c = {temperature_c:g}\n{extra}\n[samples.S]\n'
        f'[[crystals]]\nsample = "S"\nid = "c1"\n{key} = "t.csv"\n')
    return load_campaign(tmp_path / "c.toml")


@pytest.mark.parametrize("mineral", [m.name for m in REGISTRY])
def test_campaign_defaults_come_from_the_table(tmp_path, mineral):
    m = BY_NAME[mineral]
    params = _campaign(tmp_path, mineral, "fo2_pa = 1e-7").crystals[0].parameters
    assert params["column"] == m.zoning_column
    assert params["elements"] == list(m.default_elements)


def test_campaign_refuses_an_element_the_table_does_not_list(tmp_path):
    with pytest.raises(InputError, match="cannot be dated in olivine; choose from FeMg"):
        _campaign(tmp_path, "olivine", 'elements = ["Mg"]')


def test_campaign_refuses_an_unknown_mineral_with_the_table_names(tmp_path):
    with pytest.raises(InputError) as error:
        _campaign(tmp_path, "garnet")
    for m in REGISTRY:
        assert m.name in str(error.value)


def test_lookup_accepts_names_law_names_and_aliases():
    assert lookup("pyroxene") is lookup("clinopyroxene") is lookup("CPX") is BY_NAME["pyroxene"]
    assert lookup("Alkali  Feldspar") is BY_NAME["alkali-feldspar"]
    assert lookup("garnet") is None
    assert needs_an("Sr", "plag") and not needs_an("Sr", "sanidine") and not needs_an("Zn", "garnet")


# --------------------------------------------------------------------------- one temperature range
@pytest.mark.parametrize("t, ok", [(399.0, False), (400.0, True), (1500.0, True), (1501.0, False)])
def test_one_temperature_range_everywhere(tmp_path, t, ok):
    """The campaign file, the fit option and fit_boundary accept and refuse the same temperatures."""
    import argparse

    from zoneprofile._limits import LIMITS, apply_limits
    from zoneprofile.cli import fit as fit_cli
    from zoneprofile.diffusion.fitting import _check_inputs

    assert (LIMITS["temperature_c"].low, LIMITS["temperature_c"].high) == (400, 1500)
    verdicts = []
    try:
        _campaign(tmp_path, "plagioclase", temperature_c=t)
        verdicts.append(True)
    except InputError:
        verdicts.append(False)
    parser = argparse.ArgumentParser(exit_on_error=False)
    fit_cli.configure(parser)
    apply_limits("fit", parser)
    try:
        parser.parse_args(["p.csv", "--element", "Sr", "--mineral", "plagioclase", "--temperature-c", f"{t:g}", "-o", "o.json"])
        verdicts.append(True)
    except argparse.ArgumentError:
        verdicts.append(False)
    x = [float(i) for i in range(10)]
    try:
        _check_inputs(x, [1.0] * 5 + [2.0] * 5, "Sr", "plagioclase", t)
        verdicts.append(True)
    except InputError:
        verdicts.append(False)
    assert verdicts == [ok, ok, ok]


# --------------------------------------------------------------------------- no second table
_TABLE_NAMES = {"MINERALS", "MINERAL_NAMES", "ELEMENT_COLUMNS", "DEFAULTS", "NO_DEFAULT"}


def _literal_strings(node) -> set[str]:
    """String constants directly inside a tuple/list/set/dict literal (keys included)."""
    items = []
    if isinstance(node, (ast.Tuple, ast.List, ast.Set)):
        items = node.elts
    elif isinstance(node, ast.Dict):
        items = [k for k in node.keys if k is not None]
    return {i.value for i in items if isinstance(i, ast.Constant) and isinstance(i.value, str)}


def _offences(path: Path) -> list[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    out = []
    for node in tree.body:  # module level: a table named like the registry's
        targets = []
        if isinstance(node, ast.Assign):
            targets, value = node.targets, node.value
        elif isinstance(node, ast.AnnAssign) and node.value is not None:
            targets, value = [node.target], node.value
        for t in targets:
            if isinstance(t, ast.Name) and t.id in _TABLE_NAMES and isinstance(
                    value, (ast.Dict, ast.Tuple, ast.List, ast.Set)):
                out.append(f"{path}:{node.lineno} defines {t.id} as a literal table")
    for node in ast.walk(tree):  # anywhere: a literal listing three or more minerals
        names = _literal_strings(node) & NAMES
        if len(names) >= 3:
            out.append(f"{path}:{node.lineno} lists the minerals {sorted(names)}")
    return out


def test_no_second_mineral_table_in_the_package():
    registry_dir = PACKAGE / "minerals"
    offences = []
    for path in sorted(PACKAGE.rglob("*.py")):
        if path.parent == registry_dir:
            continue
        offences += _offences(path)
    assert offences == []


def test_the_table_check_sees_a_table(tmp_path):
    bad = tmp_path / "bad.py"
    bad.write_text('MINERALS = {"plagioclase": "An"}\n\n\ndef f(m):\n'
                   '    return m in ("plagioclase", "olivine", "quartz")\n')
    assert len(_offences(bad)) == 2


def test_one_home_for_time_units():
    """Seconds per day and days per year are written once, in zoneprofile/_units.py."""
    found = []
    for path in sorted(PACKAGE.rglob("*.py")):
        if path.name == "_units.py" and path.parent == PACKAGE:
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Constant) and type(node.value) in (int, float) and node.value in (86400, 365.25):
                found.append(f"{path}:{node.lineno} writes {node.value}")
    assert found == []
