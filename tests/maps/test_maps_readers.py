"""Map readers: formats, channels, pixel size, memory mapping, refusals."""

from pathlib import Path

import numpy as np
import pytest
import tifffile

from zoneprofile import InputError
from zoneprofile.maps import read_map

FIX = Path(__file__).resolve().parents[2] / "fixtures" / "maps"


@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.int32, np.float32, np.float64])
def test_tiff_single_page_round_trip(tmp_path, dtype):
    rng = np.random.default_rng(1)
    a = (rng.random((20, 30)) * 200).astype(dtype)
    p = tmp_path / "grain4_Ca.tif"
    tifffile.imwrite(p, a)
    img = read_map(p)
    assert img.channel == "Ca" and img.channels == ["Ca"]
    np.testing.assert_array_equal(np.asarray(img.data), a)
    assert img.integer_counts == (np.dtype(dtype).kind in "ui")


def test_uncompressed_tiff_is_memory_mapped_compressed_is_decoded(tmp_path):
    a = np.arange(64 * 48, dtype=np.uint16).reshape(64, 48)
    tifffile.imwrite(tmp_path / "m_Ca.tif", a)
    tifffile.imwrite(tmp_path / "z_Ca.tif", a, compression="zlib")
    assert isinstance(read_map(tmp_path / "m_Ca.tif").data, np.memmap)
    z = read_map(tmp_path / "z_Ca.tif").data
    assert not isinstance(z, np.memmap)
    np.testing.assert_array_equal(z, a)


def test_multipage_tiff_channels_by_page_name(tmp_path):
    p = tmp_path / "grain.tif"
    with tifffile.TiffWriter(p) as tw:
        for k, name in enumerate(["Ca", "Na", "K"]):
            tw.write(np.full((10, 12), k + 1, np.uint16), extratags=[(285, "s", 0, name, True)])
    img = read_map(p, channel="na")
    assert img.channel == "Na" and img.channels == ["Ca", "Na", "K"]
    assert np.all(np.asarray(img.data) == 2)
    assert read_map(p, channel="3").channel == "K"  # 1-based page number
    with pytest.raises(InputError, match="channel 'Sr' does not exist.*Ca, Na, K"):
        read_map(p, channel="Sr")


def test_single_channel_file_refuses_other_channel(tmp_path):
    p = tmp_path / "grain4_Ca.tif"
    tifffile.imwrite(p, np.ones((5, 5), np.uint16))
    assert read_map(p, channel="ca").channel == "ca"
    with pytest.raises(InputError, match="channel 'Na' does not exist"):
        read_map(p, channel="Na")


def test_pixel_size_from_resolution_tags(tmp_path):
    # TIFF 6.0 spec: XResolution = pixels per ResolutionUnit (3 = centimetre)
    p = tmp_path / "r_Ca.tif"
    tifffile.imwrite(p, np.ones((5, 5), np.uint16), resolution=(1e4 / 0.25, 1e4 / 0.25), resolutionunit="CENTIMETER")
    img = read_map(p)
    assert img.pixel_um == pytest.approx(0.25)
    # ImageJ convention: pixels per 'unit' given in the description
    q = tmp_path / "ij_Ca.tif"
    tifffile.imwrite(q, np.ones((5, 5), np.uint16), imagej=True, resolution=(2.0, 2.0), metadata={"unit": "um"})
    assert read_map(q).pixel_um == pytest.approx(0.5)
    # a default 72 dpi tag says nothing about the sample
    d = tmp_path / "d_Ca.tif"
    tifffile.imwrite(d, np.ones((5, 5), np.uint16), resolution=(72, 72), resolutionunit="INCH")
    assert read_map(d).pixel_um is None


def test_png_8_and_16_bit(tmp_path):
    from PIL import Image

    a8 = np.arange(100, dtype=np.uint8).reshape(10, 10)
    Image.fromarray(a8).save(tmp_path / "bse_BSE.png")
    np.testing.assert_array_equal(read_map(tmp_path / "bse_BSE.png").data, a8)
    a16 = (np.arange(100, dtype=np.uint16) * 600).reshape(10, 10)
    Image.fromarray(a16).save(tmp_path / "ca16_Ca.png")
    np.testing.assert_array_equal(read_map(tmp_path / "ca16_Ca.png").data, a16)


def test_npy_memory_mapped_and_stacked(tmp_path):
    a = np.arange(200, dtype=np.float32).reshape(10, 20)
    np.save(tmp_path / "x_Ca.npy", a)
    img = read_map(tmp_path / "x_Ca.npy")
    assert isinstance(img.data, np.memmap)
    np.testing.assert_array_equal(img.data, a)
    np.save(tmp_path / "stack.npy", np.stack([a, a + 1]))
    assert float(read_map(tmp_path / "stack.npy", channel="band2").data[0, 0]) == 1.0


@pytest.mark.parametrize("name", ["tiny_Ca.csv", "tiny_Ca.txt"])
def test_text_matrix(name):
    img = read_map(FIX / name)
    assert img.data.shape == (8, 6)
    assert img.data[3, 2] == 132  # value = 100 + 10 * row + col (fixture README)
    assert img.channel == "Ca" and img.integer_counts


def test_text_matrix_bad_cell_names_row_and_column():
    with pytest.raises(InputError) as exc:
        read_map(FIX / "bad_cell_Ca.csv")
    assert "row 5" in str(exc.value) and "column '4'" in str(exc.value) and "1x3" in str(exc.value)


def test_truncated_tiff_refused():
    with pytest.raises(InputError, match="truncated|damaged"):
        read_map(FIX / "truncated_Ca.tif")


def test_not_an_image_refused():
    with pytest.raises(InputError, match="not a TIFF image"):
        read_map(FIX / "not_an_image_Ca.tif")


def test_absurd_dimensions_refused_before_reading(tmp_path):
    # a .npy header announcing 100000 x 100000 float64 (80 GB) over a few bytes of data
    p = tmp_path / "bomb.npy"
    with open(p, "wb") as fh:
        np.lib.format.write_array_header_1_0(fh, {"descr": "<f8", "fortran_order": False, "shape": (100000, 100000)})
        fh.write(b"\x00" * 64)
    with pytest.raises(InputError, match="larger than"):
        read_map(p)


def test_unknown_extension_refused(tmp_path):
    p = tmp_path / "map.xyz"
    p.write_text("hello")
    with pytest.raises(InputError, match="not an image"):
        read_map(p)


def test_truncated_png_refused_and_pillow_limit_restored(tmp_path):
    from PIL import Image

    a = (np.arange(64 * 64) % 251).astype(np.uint8).reshape(64, 64)
    Image.fromarray(a).save(tmp_path / "full_BSE.png")
    raw = (tmp_path / "full_BSE.png").read_bytes()
    (tmp_path / "cut_BSE.png").write_bytes(raw[: len(raw) // 2])
    before = Image.MAX_IMAGE_PIXELS
    with pytest.raises(InputError, match="not a readable PNG"):
        read_map(tmp_path / "cut_BSE.png")
    assert Image.MAX_IMAGE_PIXELS == before
