"""The state a boundary fit hands to its uncertainty (``diffusion/_state.py``): typed, frozen, complete.

Invariants of the code's structure (no outside reference applies): ``propagate``
is given one :class:`FitState`, every field is annotated, nothing can be
reassigned after the fit built it, and every field the uncertainty step reads
exists on it.
"""

import dataclasses
import re
from pathlib import Path

import numpy as np
import pytest

from zoneprofile.diffusion import fit_boundary, synthetic_boundary_profile
from zoneprofile.diffusion._state import FitState


def test_fit_hands_a_frozen_fit_state_to_propagate(monkeypatch):
    import zoneprofile.diffusion.fitting as fitting

    seen = []
    original = fitting.propagate

    def keep(state):
        seen.append(state)
        return original(state)

    monkeypatch.setattr(fitting, "propagate", keep)
    data, _ = synthetic_boundary_profile(seed=2, element="Sr", mineral="plagioclase", temperature_c=1000.0,
                                         time_days=200.0, outer=500.0, inner=800.0, beam_um=3.0, noise_sd=8.0)
    r = fit_boundary(data["distance_um"], data["value"], element="Sr", mineral="plagioclase", temperature_c=1000.0,
                     an=data["An"], beam_um=3.0, boundary_um=40.0, value_sd=8.0, draws=100, noise_refits=20)
    state = seen[-1]
    assert isinstance(state, FitState)
    assert state.param_names == tuple(r.parameters)
    np.testing.assert_array_equal(state.best, [p["value"] for p in r.parameters.values()])
    assert state.vary == (True, False, True, True)  # boundary given without a window: fixed
    with pytest.raises(dataclasses.FrozenInstanceError):
        state.seed = 1


def test_every_field_is_typed_and_every_field_read_exists():
    names = {f.name for f in dataclasses.fields(FitState)}
    for f in dataclasses.fields(FitState):
        assert f.type and f.type != "object", f.name
    root = Path(__import__("zoneprofile").__file__).parent / "diffusion"
    for mod in ("uncertainty.py", "_budget.py"):
        text = (root / mod).read_text(encoding="utf-8")
        read = set(re.findall(r"\bstate\.(\w+)", text))
        assert read <= names, (mod, read - names)
        assert "ctx" not in re.findall(r"\b(ctx)\b", text), mod
