"""Fits replayed against numbers recorded before the optimisers moved to ``diffusion/_optimise.py``.

Self-consistency (invented data, seeded forward model): the refactor moved code
and must not change a result. The recorded optimum was produced by the same
arithmetic on the same machine; the tolerance (relative 1e-6 on the fitted
parameters and χ²) allows for BLAS/LAPACK differences between installs, which
change the last digits of an SVD but, with the optimiser's stopping rule
(steps below 1e-6·(1 + |p|), see ``_projected_fit``), not more than that.
"""

import json

import numpy as np
import pytest

from _replay_cases import PATH, cases, fit_boundary, summary

RECORDED = json.loads(PATH.read_text())


@pytest.mark.parametrize("name,data,kw", cases(), ids=[c[0] for c in cases()])
def test_replayed_fit_matches_recording(name, data, kw):
    res = fit_boundary(data["distance_um"], data["value"], **kw)
    got = summary(res)
    want = RECORDED[name]
    assert got.keys() == want.keys()
    for key, value in want.items():
        assert np.isclose(got[key], value, rtol=1e-6, atol=1e-6), (key, got[key], value)


def test_no_import_circle_between_fitting_an_uncertainty():
    """The optimisers live in ``_optimise``; it imports none of fitting, _an, uncertainty."""
    import ast
    import pathlib

    import zoneprofile.diffusion as pkg

    src = pathlib.Path(pkg.__file__).parent / "_optimise.py"
    imported = set()
    for node in ast.walk(ast.parse(src.read_text())):
        if isinstance(node, ast.ImportFrom) and node.module:
            imported.add(node.module)
        elif isinstance(node, ast.Import):
            imported.update(a.name for a in node.names)
    for mod in ("fitting", "_an", "uncertainty"):
        assert f"zoneprofile.diffusion.{mod}" not in imported
    for mod in ("_an", "uncertainty"):
        text = (src.parent / f"{mod}.py").read_text()
        assert "from zoneprofile.diffusion.fitting import" not in text
