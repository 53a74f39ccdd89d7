"""A small valid campaign file and its writer, shared by the campaign-file tests
(tests/campaign/test_campaign_schema.py, tests/test_limits.py, tests/cli/test_fuzz_inputs.py)."""

from __future__ import annotations

import textwrap

import pytest

from zoneprofile._validation import InputError
from zoneprofile.campaign import load_campaign

GOOD = """\
title = "test campaign"
seed = 3
draws = 200

[defaults]
mineral = "plagioclase"
elements = ["Mg"]
temperature_c = 1000
temperature_sd_c = 10
beam_um = 3

[samples.S1]
temperature_c = 990

[samples."S 2"]
comment = "second sample"

[[crystals]]
sample = "S1"
id = "c1"
traverse = "data/c1.csv"

[[crystals]]
sample = "S 2"
id = "c2"
traverse = "data/c2.csv"
temperature_c = 1010
elements = ["Mg", "Sr"]
laws = {}
"""


def write(folder, text, name="camp.toml"):
    (folder / "data").mkdir(exist_ok=True)
    for f in ("c1.csv", "c2.csv"):
        (folder / "data" / f).write_text("x\n1\n")
    p = folder / name
    p.write_text(textwrap.dedent(text))
    return p


def error_of(path, **kw) -> InputError:
    with pytest.raises(InputError) as exc:
        load_campaign(path, **kw)
    return exc.value
