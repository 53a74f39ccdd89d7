"""Property-based fuzz of table cells and command-line numbers.

Whatever a cell or an option holds, a command ends with exit 0 or 2 (never 1,
an internal error), and with exit 0 every input row is either in the output
or counted as skipped: no row is ever lost without a count. The default run
keeps to a few seconds; more examples run under ``-m slow``.
"""

import csv
import io
import json
import re

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from hostile_corpus import _HEADER, plag_rows
from zoneprofile.cli import main

N_ROWS = 12
COLUMNS = _HEADER.split(",")

# cells: any text (control characters, quotes, separators, decimal commas,
# underscores, formulas, huge and tiny numbers), or numbers written oddly
CELL = st.one_of(
    st.text(max_size=12),
    st.text(alphabet=st.sampled_from(list('0123456789.,;_-+eE<>"\' \t\r\n\x00\x0b\x1c\u2028=@#')), max_size=10),
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.sampled_from(["N", "max", "Average", "bdl", "n.a.", "-", "<0,03", "52,2", "7_0.5", "1e308", "=1+1"]),
)


def _write_table(folder, edits):
    """The base table with some cells replaced, written by the csv module (quoted where needed)."""
    rows = [r.split(",") for r in plag_rows(N_ROWS)]
    for (r, c), text in edits.items():
        rows[r % N_ROWS][c % len(COLUMNS)] = text
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(COLUMNS)
    w.writerows(rows)
    p = folder / "t.csv"
    p.write_text(buf.getvalue(), encoding="utf-8", errors="surrogatepass")
    return p


def _check_recalc(tmp_path, capsys, edits):
    out = tmp_path / "out.csv"
    out.unlink(missing_ok=True)
    table = _write_table(tmp_path, edits)
    capsys.readouterr()
    code = main(["recalc", str(table), "-o", str(out)])
    err = capsys.readouterr().err
    assert code in (0, 2), err
    if code == 2:
        assert err.count("\n") == 1 and not out.exists(), err
        return
    read = int(re.search(r"read (\d+) analyses", err).group(1))
    skipped = re.search(r"skipped (\d+) of (\d+) rows", err)
    below = N_ROWS if skipped is None else int(skipped.group(2))
    n_skipped = 0 if skipped is None else int(skipped.group(1))
    # every row below the header is read or counted as skipped; a bare CR left unquoted by the writer
    # (the csv module quotes only its own line terminator, here LF) ends a line, as in files saved with
    # CR line ends, so such a table has more rows than it was written with, never fewer
    assert read + n_skipped == below >= N_ROWS, err
    with open(out, newline="", encoding="utf-8") as fh:
        assert len(list(csv.reader(fh))) == 1 + read


FAST = settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
SLOW = settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
EDITS = st.dictionaries(st.tuples(st.integers(0, N_ROWS - 1), st.integers(0, len(COLUMNS) - 1)), CELL,
                        min_size=1, max_size=3)


@FAST
@given(edits=EDITS)
def test_any_cell_exit_0_or_2_and_no_silent_row_loss(tmp_path, capsys, edits):
    _check_recalc(tmp_path, capsys, edits)


@pytest.mark.slow
@SLOW
@given(edits=EDITS)
def test_any_cell_many_examples(tmp_path, capsys, edits):
    _check_recalc(tmp_path, capsys, edits)


NUMBER_TEXT = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-10**30, 10**30).map(str),
    st.text(alphabet=st.sampled_from(list("0123456789.-+eE_ ,")), min_size=1, max_size=8),
)


def _check_options(tmp_path, capsys, beam, step, total):
    table = _write_table(tmp_path, {})
    out = tmp_path / "o.csv"
    out.unlink(missing_ok=True)
    capsys.readouterr()
    argv = ["recalc", str(table), "-o", str(out), "--beam-um", beam, "--total-range", f"{total},101"]
    if step is not None:
        argv += ["--step-um", step]
    try:
        code = main(argv)
    except SystemExit as exc:  # argparse usage error
        code = exc.code
    err = capsys.readouterr().err
    assert code in (0, 2), err
    if code == 2:
        assert err.count("\n") == 1 and not out.exists(), err


@FAST
@given(beam=NUMBER_TEXT, step=st.none() | NUMBER_TEXT, total=NUMBER_TEXT)
def test_cli_numbers_exit_0_or_2(tmp_path, capsys, beam, step, total):
    _check_options(tmp_path, capsys, beam, step, total)


@pytest.mark.slow
@SLOW
@given(beam=NUMBER_TEXT, step=st.none() | NUMBER_TEXT, total=NUMBER_TEXT)
def test_cli_numbers_many_examples(tmp_path, capsys, beam, step, total):
    _check_options(tmp_path, capsys, beam, step, total)


# ------------------------------------------------------------------ campaign values

TOML_VALUE = st.recursive(
    st.one_of(
        st.integers(-2**70, 2**70).map(str),
        st.floats(allow_nan=True, allow_infinity=True).map(lambda x: {"nan": "nan", "inf": "inf", "-inf": "-inf"}.get(
            repr(x), repr(x))),
        st.booleans().map(lambda b: "true" if b else "false"),
        st.text(max_size=8).map(json.dumps),  # a JSON string is a TOML basic string
    ),
    lambda inner: st.lists(inner, max_size=3).map(lambda xs: "[" + ", ".join(xs) + "]"),
    max_leaves=6,
)
SETTINGS = ["seed", "draws", "temperature_c", "temperature_sd_c", "beam_um", "mineral", "elements"]


def _check_campaign(tmp_path, key, value):
    from _campaign_files import GOOD, write

    from zoneprofile._validation import InputError
    from zoneprofile.campaign import load_campaign

    text = re.sub(rf"(?m)^{key} = .*$", lambda m: f"{key} = {value}", GOOD, count=1)
    p = write(tmp_path, text)
    try:
        load_campaign(p)
    except InputError as exc:
        assert "\n" not in str(exc)


@FAST
@given(key=st.sampled_from(SETTINGS), value=TOML_VALUE)
def test_campaign_values_refused_or_read(tmp_path, key, value):
    _check_campaign(tmp_path, key, value)


@pytest.mark.slow
@SLOW
@given(key=st.sampled_from(SETTINGS), value=TOML_VALUE)
def test_campaign_values_many_examples(tmp_path, key, value):
    _check_campaign(tmp_path, key, value)
