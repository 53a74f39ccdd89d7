"""Element maps that used to give a silent wrong profile or an internal error.

Each case runs ``zoneprofile map`` in-process and checks either the right
result (an invariant: the same pixels in another byte order or compression
give the same profile) or a refusal: exit 2, one line, nothing written.
"""

import numpy as np
import pytest
import tifffile

from zoneprofile._validation import InputError
from zoneprofile.cli import main
from zoneprofile.maps import synthetic_zoned_map
from zoneprofile.maps.readers import read_map


@pytest.fixture(scope="module")
def grain(tmp_path_factory):
    d = tmp_path_factory.mktemp("hostile_maps")
    img, spots, truth = synthetic_zoned_map(seed=3, shape=(240, 240), obliquity_deg=35.0, return_maps=False)
    spots.to_csv(d / "spots.csv", index=False)
    line = ",".join(f"{v:.3f}" for v in truth["line"])
    return d, img, line


@pytest.mark.parametrize("dtype", [np.uint16, np.float32])
def test_byte_order_and_compression_give_the_same_pixels(tmp_path, dtype):
    """Big-endian TIFFs were memory-mapped as little-endian (r² 0.07 instead of 0.99)."""
    a = (np.arange(30 * 40).reshape(30, 40) % 1000).astype(dtype)
    for order in "<>":
        for compression in (None, "zlib"):
            p = tmp_path / f"m{'le' if order == '<' else 'be'}{compression}_Ca.tif"
            tifffile.imwrite(p, a, byteorder=order, compression=compression)
            got = np.asarray(read_map(p).data)
            np.testing.assert_array_equal(got, a)  # exact: the same integers or float32 bits


def test_big_endian_map_gives_the_little_endian_profile(grain, capsys):
    d, img, line = grain
    tifffile.imwrite(d / "le_Ca.tif", img, byteorder="<")
    tifffile.imwrite(d / "be_Ca.tif", img, byteorder=">")
    tifffile.imwrite(d / "bez_Ca.tif", img, byteorder=">", compression="zlib")
    base = ["--pixel-um", "1", "--spots", str(d / "spots.csv"), "--line", line]
    for name in ("le", "be", "bez"):
        assert main(["map", str(d / f"{name}_Ca.tif"), *base, "-o", str(d / f"{name}.csv")]) == 0
    le = (d / "le.csv").read_text()
    assert (d / "be.csv").read_text() == le
    assert (d / "bez.csv").read_text() == le


def test_rgb_map_needs_a_channel(grain, capsys):
    d, img, line = grain
    rgb = np.stack([img.astype(np.uint8)] * 3, -1)
    rgb[..., 1] //= 2
    tifffile.imwrite(d / "rgb_Ca.tif", rgb, photometric="rgb")
    base = ["--pixel-um", "1", "--spots", str(d / "spots.csv"), "--line", line]
    capsys.readouterr()
    assert main(["map", str(d / "rgb_Ca.tif"), *base, "-o", str(d / "rgb.csv")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "--channel" in err and "red, green, blue" in err
    assert not (d / "rgb.csv").exists()
    assert main(["map", str(d / "rgb_Ca.tif"), *base, "--channel", "green", "-o", str(d / "rgb.csv")]) == 0


def test_nan_and_inf_pixels_are_masked_and_counted(grain, capsys):
    d, img, line = grain
    f = img.astype(np.float32)
    x0, y0, x1, y1 = (float(v) for v in line.split(","))
    r, c = int(round((y0 + y1) / 2)), int(round((x0 + x1) / 2))
    f[r, c] = np.nan  # on the line: the sample there must be flagged, not averaged in
    f[2, 2] = np.inf
    tifffile.imwrite(d / "nan_Ca.tif", f)
    capsys.readouterr()
    base = ["--pixel-um", "1", "--spots", str(d / "spots.csv"), "--line", line]
    assert main(["map", str(d / "nan_Ca.tif"), *base, "-o", str(d / "nan.csv")]) == 0
    out = capsys.readouterr().out
    assert "2 of 57600 pixels are NaN or infinite" in out
    import pandas as pd

    prof = pd.read_csv(d / "nan.csv")
    flagged = prof["qc"].str.contains("masked").to_numpy()
    assert 1 <= flagged.sum() <= 6  # the samples within a pixel of the NaN, no more
    assert np.all(np.isfinite(prof["An"]))


@pytest.mark.parametrize("case", ["all_nan", "huge"])
def test_unusable_float_maps_refused(grain, capsys, case):
    d, img, line = grain
    if case == "all_nan":
        arr = np.full((50, 50), np.nan, np.float32)
        want = "every pixel of the map is NaN"
    else:
        arr = img.astype(np.float64) * 1e300
        want = "mis-scaled"
    tifffile.imwrite(d / f"{case}_Ca.tif", arr)
    capsys.readouterr()
    base = ["--pixel-um", "1", "--spots", str(d / "spots.csv"), "--line", line]
    assert main(["map", str(d / f"{case}_Ca.tif"), *base, "-o", str(d / f"{case}.csv")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and want in err and "internal error" not in err
    assert not (d / f"{case}.csv").exists()


def test_big_endian_npy_and_text_matrix_agree(tmp_path):
    a = (np.arange(12 * 9).reshape(12, 9) % 97).astype(np.uint16)
    np.save(tmp_path / "le_Ca.npy", a.astype("<u2"))
    np.save(tmp_path / "be_Ca.npy", a.astype(">u2"))
    np.savetxt(tmp_path / "tx_Ca.csv", a, fmt="%d", delimiter=",")
    ref = np.asarray(read_map(tmp_path / "le_Ca.npy").data)
    np.testing.assert_array_equal(np.asarray(read_map(tmp_path / "be_Ca.npy").data), ref)
    np.testing.assert_array_equal(np.asarray(read_map(tmp_path / "tx_Ca.csv").data), ref)


def test_multi_page_tiff_needs_a_channel(tmp_path):
    pages = np.stack([np.full((8, 8), v, np.uint16) for v in (10, 20)])
    tifffile.imwrite(tmp_path / "two.tif", pages)
    with pytest.raises(InputError, match="2 channels .*--channel"):
        read_map(tmp_path / "two.tif")
    assert float(np.asarray(read_map(tmp_path / "two.tif", channel="2").data).mean()) == 20.0


def test_underscore_in_a_text_matrix_is_refused(tmp_path):
    (tmp_path / "u_Ca.csv").write_text("1,2,3\n4,5_0,6\n7,8,9\n")
    with pytest.raises(InputError, match="row 2.*not a number"):
        read_map(tmp_path / "u_Ca.csv")
