"""One table of option ranges, shared by the command line and the campaign file.

Absurd values used to run (a temperature sd of 10,000 °C gave a 97.5th
percentile of 10^41 days marked resolved) or fail every crystal later
(``beam_um = 0``). Each is now refused at once with its valid range.
"""

import pytest

from _campaign_files import GOOD, error_of, write
from zoneprofile._limits import CLI_OPTIONS, LIMITS
from zoneprofile.campaign import load_campaign
from zoneprofile.cli import build_parser


def _cli_error(capsys, argv):
    parser = build_parser()
    with pytest.raises(SystemExit) as exc:
        parser.parse_args(argv)
    err = capsys.readouterr().err
    assert exc.value.code == 2 and err.count("\n") == 1
    return err


FIT = ["fit", "p.csv", "--element", "Sr", "--mineral", "plagioclase", "--temperature-c", "1000", "-o", "f.json"]


@pytest.mark.parametrize("option, value, expect", [
    ("--seed", "-1", "valid: from 0 to"),
    ("--beam-um", "1e6", "valid: above 0 to 200 µm"),
    ("--beam-um", "0", "must be above 0"),
    ("--temperature-sd-c", "10000", "valid: from 0 to 300 °C"),
    ("--temperature-sd-c", "nan", "finite number"),
    ("--temperature-sd-c", "1_0", "finite number"),
    ("--draws", "3", "valid: from 50 to 100000"),
    ("--radius-um", "1e300", "valid: above 0 to 100000 µm"),
])
def test_fit_options_out_of_range(capsys, option, value, expect):
    err = _cli_error(capsys, [*FIT, option, value])
    assert option in err and expect in err


def test_other_commands(capsys):
    err = _cli_error(capsys, ["zones", "p.csv", "-o", "z.json", "--noise-sd", "1e-300"])
    assert "--noise-sd" in err and "valid: from 1e-06 to 1e+06" in err
    err = _cli_error(capsys, ["map", "m.npy", "--spots", "s.csv", "--line", "1,1,5,5", "-o", "m.csv",
                              "--width-px", "1000000"])
    assert "--width-px" in err and "valid: from 1 to 501 px" in err


def test_values_inside_the_range_parse_to_numbers():
    args = build_parser().parse_args([*FIT, "--seed", "7", "--beam-um", "4", "--temperature-sd-c", "15"])
    assert (args.seed, args.beam_um, args.temperature_sd_c) == (7, 4.0, 15.0)
    assert isinstance(args.seed, int)


@pytest.mark.parametrize("old, new, expect", [
    ("beam_um = 3", "beam_um = 0", "must be above 0 µm"),
    ("temperature_sd_c = 10", "temperature_sd_c = 10000", "at most 300 °C (valid: 0 to 300 °C)"),
    ("draws = 200", "draws = 10", "at least 50"),
])
def test_campaign_uses_the_same_ranges(tmp_path, old, new, expect):
    msg = str(error_of(write(tmp_path, GOOD.replace(old, new, 1))))
    assert expect in msg, msg


def test_every_cli_option_has_a_range():
    for keys in CLI_OPTIONS.values():
        for key in keys:
            lim = LIMITS[key]
            assert lim.low < lim.high and lim.kind in (int, float)


def test_campaign_with_a_byte_order_mark_is_read(tmp_path):
    p = write(tmp_path, GOOD)
    p.write_bytes(b"\xef\xbb\xbf" + p.read_bytes())
    assert load_campaign(p).draws == 200


def test_deeply_nested_campaign_is_refused(tmp_path):
    # 40 levels parse; a campaign needs four (nesting thousands deep, which stops the
    # TOML parser itself, is refused where the campaign file is read)
    p = write(tmp_path, GOOD + "\nx = " + "[" * 40 + "]" * 40 + "\n")
    assert "nested too deep" in str(error_of(p))
