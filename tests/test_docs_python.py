"""The docs' "From Python" code blocks run, and ``import zoneprofile as zp`` gives the entry points lazily.

Every task page in docs/ has a "From Python" section; its ``python`` code
blocks are run in order, in one namespace per page, in an empty folder. They
use small invented data and few draws, so the whole file stays fast.
"""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
DOCS = ROOT / "docs"
TASK_PAGES = ("read-a-traverse.md", "recalculation.md", "read-the-zoning.md", "date-a-boundary.md",
              "calibrate-a-map.md", "run-a-campaign.md", "whole-crystal-model.md", "chronology.md", "report.md")


def python_blocks(page: Path) -> list[str]:
    """The ```python blocks under a "From Python" heading of ``page``."""
    text = page.read_text(encoding="utf-8")
    blocks = []
    for section in re.split(r"^## ", text, flags=re.M)[1:]:
        heading = section.splitlines()[0]
        if "From Python" in heading:
            blocks += re.findall(r"^```python\n(.*?)^```", section, flags=re.M | re.S)
    return blocks


@pytest.mark.parametrize("name", TASK_PAGES)
def test_task_page_python_runs(name, tmp_path, monkeypatch):
    import matplotlib

    matplotlib.use("Agg")
    blocks = python_blocks(DOCS / name)
    assert blocks, f"{name} has no 'From Python' section with a python block"
    assert any("import zoneprofile as zp" in b for b in blocks)
    monkeypatch.chdir(tmp_path)
    namespace = {"__name__": f"docs_{name}"}
    for k, code in enumerate(blocks):
        exec(compile(code, f"{name}[block {k}]", "exec"), namespace)  # noqa: S102 - our own docs


def test_readme_python_section_runs(tmp_path, monkeypatch):
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"^```python\n(.*?)^```", text, flags=re.M | re.S)
    assert blocks
    monkeypatch.chdir(tmp_path)
    namespace = {}
    for code in blocks:
        exec(compile(code, "README.md", "exec"), namespace)  # noqa: S102


def test_import_is_lazy_and_entry_points_resolve():
    code = ("import sys, zoneprofile as zp\n"
            "heavy = [m for m in ('numpy', 'pandas', 'scipy', 'matplotlib', 'lmfit', 'openpyxl', 'skimage') "
            "if m in sys.modules]\n"
            "assert not heavy, heavy\n"
            "zp.InputError\n"
            "assert 'numpy' in sys.modules  # the first use imports what the entry point needs\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT)
    assert done.returncode == 0, done.stderr

    import zoneprofile as zp

    names = [n for n in zp.__all__ if not n.startswith("_")]
    assert {"read_traverse", "recalculate", "analyse_zoning", "fit_boundary", "fit_crystal", "load_campaign",
            "run_campaign", "plot_zoning", "write_supplement", "InputError"} <= set(names)
    for n in names:
        assert callable(getattr(zp, n)), n
    assert set(names) <= set(dir(zp))
    with pytest.raises(AttributeError):
        zp.no_such_thing  # noqa: B018


def test_result_objects_share_one_vocabulary():
    import zoneprofile as zp

    for cls in (zp.Traverse, zp.ZoningResult, zp.FitResult, zp.CrystalResult, zp.RunSummary):
        for method in ("summary", "to_dict", "to_frame", "_repr_html_"):
            assert callable(getattr(cls, method, None)), (cls.__name__, method)
    assert callable(zp.FitResult.report)  # the older name stays


def test_repr_html_escapes_and_shows_the_table():
    from zoneprofile.zoning import synthetic_case

    import zoneprofile as zp

    x, an, _ = synthetic_case("steps+band", seed=1)
    result = zp.analyse_zoning(x, an, column="<An>")
    page = result._repr_html_()
    assert "&lt;An&gt;" in page and "<An>" not in page
    assert "<table" in page and "more rows" in page  # the first rows of to_frame(), then a count
    assert len(result.to_frame()) == len(x)
