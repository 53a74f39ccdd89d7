"""The options of a boundary fit grouped in small frozen dataclasses (``diffusion/options.py``).

Invariants of the code's structure: every keyword option of ``fit_boundary``
belongs to exactly one group, with the same default; an unknown keyword is
refused as by a call; the public signature is annotated throughout.
"""

import dataclasses
import inspect

import pytest

from zoneprofile.diffusion import fit_boundary
from zoneprofile.diffusion.fitting import _DATA_KEYWORDS
from zoneprofile.diffusion.options import FitOptions, MonteCarlo, Spot

SIG = inspect.signature(fit_boundary)
OPTIONS = {n: p for n, p in SIG.parameters.items() if not n.startswith("_") and n not in _DATA_KEYWORDS}


def _group_fields():
    out = {}
    opts = FitOptions.from_keywords(temperature_c=900.0)
    for group in dataclasses.fields(opts):
        for f in dataclasses.fields(getattr(opts, group.name)):
            out.setdefault(f.name, []).append((group.name, f))
    return out


def test_every_option_is_in_exactly_one_group_with_the_same_default():
    fields = _group_fields()
    assert set(fields) == set(OPTIONS), set(fields) ^ set(OPTIONS)
    for name, owners in fields.items():
        assert len(owners) == 1, (name, owners)
        _, f = owners[0]
        default = OPTIONS[name].default
        if default is inspect.Parameter.empty:
            assert f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING, name
        else:
            assert f.default == default, (name, f.default, default)


def test_keywords_map_into_their_groups():
    opts = FitOptions.from_keywords(temperature_c=950.0, temperature_sd_c=15.0, beam_um=4.0, draws=2000, seed=7,
                                    boundary_um=40.0, rim="auto", obliquity_deg=20.0)
    assert (opts.conditions.temperature_c, opts.conditions.temperature_sd_c) == (950.0, 15.0)
    assert opts.spot == Spot(beam_um=4.0)
    assert opts.monte_carlo == MonteCarlo(draws=2000, seed=7)
    assert opts.placement.boundary_um == 40.0 and opts.placement.boundary_window_um is None
    assert opts.model.rim == "auto" and opts.section.obliquity_deg == 20.0
    with pytest.raises(dataclasses.FrozenInstanceError):
        opts.spot.beam_um = 3.0


def test_unknown_keyword_is_refused():
    with pytest.raises(TypeError, match="beam_size"):
        FitOptions.from_keywords(temperature_c=900.0, beam_size=4.0)
    with pytest.raises(TypeError):
        fit_boundary([1.0, 2.0], [1.0, 2.0], element="Ti", mineral="quartz", temperature_c=800.0, beam_size=4.0)


def test_public_signature_is_annotated():
    missing = [n for n, p in SIG.parameters.items() if p.annotation is inspect.Parameter.empty]
    assert missing == []
    assert SIG.return_annotation is not inspect.Signature.empty
