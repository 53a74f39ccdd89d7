"""supplement.xlsx: opens with openpyxl and pandas, units in headers, same content as the CSVs, safe cells.

The rounding rule (docs/report.md, "Rounding") is checked on worked values
written by hand: the uncertainty to two significant digits, the value to the
same decimal place (the convention of the GUM, JCGM 100:2008 §7.2.6, and of
most journals' author guidelines: "the numerical value should not be given
with an excessive number of digits", two significant digits of the
uncertainty at most).
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from zoneprofile.chronology import population_summary
from zoneprofile.report import write_outputs
from zoneprofile.report._sample import sample_provenance, sample_records
from zoneprofile.report.supplement import column_unit, round_bound, round_sig, round_table, round_to_sd
from zoneprofile.report.tables import fits_table

CSV_SHEETS = ("zones", "fits", "intervals", "crystals", "events", "event_members", "gaps")


@pytest.mark.parametrize(("value", "sd", "expected"), [
    (20.064479, 7.3, 20.1),       # sd 7.3 -> tenths
    (186.8308, 62.0, 187.0),      # sd 62 -> units
    (0.412345, 0.034, 0.412),     # sd 0.034 -> thousandths
    (1000.0, 15.0, 1000.0),       # temperature ± 15 °C
    (-10.279443, 0.1035, -10.28),  # log10 D·t ± 0.10
    (12345.6, 1500.0, 12300.0),   # sd 1500 -> hundreds
])
def test_round_to_sd_worked_values(value, sd, expected):
    assert round_to_sd(value, sd) == pytest.approx(expected, abs=1e-12)


def test_round_without_sd_and_bounds_outward():
    assert round_to_sd(3.14159265, None) == pytest.approx(3.142)  # four significant digits
    assert round_to_sd(3.14159265, 0.0) == pytest.approx(3.142)
    assert math.isnan(round_to_sd(float("nan"), 1.0))
    assert round_sig(0.000123456, 2) == pytest.approx(0.00012)
    # an upper bound is rounded up, a lower bound down: the bound must still hold
    assert round_bound(2.41, "upper") == pytest.approx(2.5)
    assert round_bound(2.4, "upper") == pytest.approx(2.4)  # already on the grid: unchanged
    assert round_bound(317.0, "lower") == pytest.approx(310.0)
    assert round_bound(0.0123, "lower") == pytest.approx(0.012)


def test_round_table_uses_the_row_interval():
    frame = pd.DataFrame([{"median_days": 20.064479, "p2_5_days": 9.05, "p16_days": 13.98, "p84_days": 28.63,
                           "p97_5_days": 41.41, "upper_bound_days": 2.41, "lower_bound_days": None,
                           "position_um": 31.9442, "n_draws": 1000, "fraction_negative": 0.01234}])
    row = round_table(frame).iloc[0]
    assert row["median_days"] == pytest.approx(20.1)  # half-width (28.63-13.98)/2 = 7.3 -> tenths
    assert row["p97_5_days"] == pytest.approx(41.4)
    assert row["upper_bound_days"] == pytest.approx(2.5)
    assert row["position_um"] == pytest.approx(31.9)
    assert row["n_draws"] == 1000
    assert row["fraction_negative"] == pytest.approx(0.012)


def test_units_of_columns():
    assert column_unit("time_median_days") == "d"
    assert column_unit("position_um") == "µm"
    assert column_unit("temperature_c") == "°C" and column_unit("temperature_sd_c") == "°C"
    assert column_unit("log10_dt_m2_p16") == "log10 m²"
    assert column_unit("An_sd") == "mol%"
    assert column_unit("trend_per_um") != "µm"
    assert column_unit("sample") == ""


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    out = tmp_path_factory.mktemp("supplement")
    recs = sample_records(seed=5, samples=("=HYPERLINK(\"x\")", "South flank"), crystals_per_sample=2, n_draws=200)
    recs[1]["crystal"] = "+cmd"
    # an unresolved boundary with only an upper bound, as the fitting stage writes it
    b = recs[0]["boundaries"][0]
    b["resolved"] = False
    b["time_days"] = {"best": None, "median": None, "p2_5": None, "p16": None, "p84": None, "p97_5": None,
                      "upper_bound": 2.4137, "lower_bound": None, "statement": "upper bound"}
    pop = population_summary(recs, n_bootstrap=20)
    result = write_outputs(recs, pop, sample_provenance(recs), out, formats=("png",))
    return out, recs, result


def _strip_unit(header: str) -> str:
    return header.split(" (")[0]


def test_workbook_written_and_listed(built):
    out, _, result = built
    assert (out / "supplement.xlsx").is_file()
    assert "supplement.xlsx" in result["files"]


def test_workbook_opens_with_openpyxl_and_pandas_units_in_headers(built):
    from openpyxl import load_workbook

    out, _, _ = built
    wb = load_workbook(out / "supplement.xlsx")
    assert set(wb.sheetnames) >= {*CSV_SHEETS, "analyses", "event_samples", "event_probabilities", "laws", "law_parameters", "settings", "provenance",
                                  "inputs", "about"}
    sheets = pd.read_excel(out / "supplement.xlsx", sheet_name=None)
    fits = sheets["fits"]
    headers = list(fits.columns)
    for name, unit in (("time_median_days", "d"), ("temperature_c", "°C"), ("temperature_sd_c", "°C"),
                       ("position_um", "µm"), ("time_upper_bound_days", "d"), ("beam_um", "µm"),
                       ("log10_dt_m2_median", "log10 m²")):
        assert f"{name} ({unit})" in headers
    # every numeric column carries a unit unless it is a count (n_...)
    for sheet in ("fits", "intervals", "zones", "analyses"):
        for col in sheets[sheet].columns:
            values = sheets[sheet][col]
            if pd.api.types.is_float_dtype(values) and values.notna().any() and not col.startswith("n_"):
                assert "(" in col, (sheet, col)
    for col in ("law_status", "partition_model", "beam_shape", "obliquity_deg (°)", "statement"):
        assert col in headers


def test_workbook_matches_the_csvs(built):
    out, _, _ = built
    sheets = pd.read_excel(out / "supplement.xlsx", sheet_name=None)
    for name in CSV_SHEETS:
        csv = pd.read_csv(out / "tables" / f"{name}.csv", keep_default_na=False, na_values=[""])
        sheet = sheets[name].rename(columns=_strip_unit)
        assert list(sheet.columns) == list(csv.columns), name
        assert len(sheet) == len(csv), name
        for col in csv.columns:
            a, b = csv[col], sheet[col]
            if pd.api.types.is_numeric_dtype(a) and pd.api.types.is_numeric_dtype(b):
                np.testing.assert_allclose(a.to_numpy(float), b.to_numpy(float), rtol=0, atol=0, equal_nan=True,
                                           err_msg=f"{name}.{col}")
            else:
                norm = lambda s: ["" if (v is None or (isinstance(v, float) and math.isnan(v))) else str(v)  # noqa: E731
                                  for v in s]
                assert norm(a) == norm(b), f"{name}.{col}"


def test_fits_have_plain_columns_bounds_and_rounded_numbers(built):
    out, recs, _ = built
    csv = pd.read_csv(out / "tables" / "fits.csv")
    assert not csv.astype(str).apply(lambda s: s.str.startswith("{")).any().any()  # no dict as text
    first = csv.iloc[0]
    assert first["statement"] == "upper bound"
    assert first["time_upper_bound_days"] == pytest.approx(2.5)  # 2.4137 rounded outward
    assert math.isnan(first["time_median_days"])
    assert first["temperature_sd_c"] == pytest.approx(15.0)
    text = (out / "tables" / "fits.csv").read_text()
    # no 17-digit numbers: the longest number has at most 8 significant characters
    longest = max((len(tok.strip("-").replace(".", "")) for line in text.splitlines()[1:]
                   for tok in line.split(",") if tok.replace(".", "").replace("-", "").isdigit()), default=0)
    assert longest <= 8
    # a dated row: the median is given to the decimal of 2 significant digits of its half-width
    frame = fits_table(recs)
    row = frame.iloc[1]
    sd = (row["time_p84_days"] - row["time_p16_days"]) / 2
    expected = round(row["time_median_days"], 1 - math.floor(math.log10(sd)))
    assert csv.iloc[1]["time_median_days"] == pytest.approx(expected, abs=1e-9)


def test_workbook_cells_are_not_formulas(built):
    from openpyxl import load_workbook

    out, _, _ = built
    wb = load_workbook(out / "supplement.xlsx")
    texts = []
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                assert cell.data_type != "f", (ws.title, cell.coordinate, cell.value)
                if isinstance(cell.value, str):
                    texts.append(cell.value)
                    assert not cell.value.startswith(("=", "+", "@")), (ws.title, cell.coordinate)
    assert "'=HYPERLINK(\"x\")" in texts and "'+cmd" in texts  # common practice (OWASP CSV injection)


def test_joined_event_columns_become_plain_rows(built):
    out, _, _ = built
    sheets = pd.read_excel(out / "supplement.xlsx", sheet_name=None)
    events = pd.read_csv(out / "tables" / "events.csv")
    by_sample = sheets["event_samples"].rename(columns=_strip_unit)
    for _, e in events.iterrows():  # "S1:3; S2:2" in the CSV, one row per sample in the workbook
        rows = by_sample[by_sample["event"] == e["event"]]
        assert rows["n_crystals"].sum() == e["n_crystals"]
    probs = sheets["event_probabilities"].rename(columns=_strip_unit)
    assert len(probs)
    totals = probs.groupby(["sample", "crystal", "boundary"])["probability"].sum()
    np.testing.assert_allclose(totals, 1.0, atol=0.003)  # each boundary's memberships sum to 1 (3 decimals)
