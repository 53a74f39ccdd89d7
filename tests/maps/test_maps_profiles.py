"""Line and rim-normal profiles."""

import numpy as np
import pandas as pd
import pytest
from skimage.measure import profile_line

from zoneprofile import InputError
from zoneprofile.maps import calibrate_map, crystal_mask, rim_normal_profile, sample_line, synthetic_zoned_map
from zoneprofile.maps.profiles import check_line
from zoneprofile.maps.synthetic import crystal_depth_um


@pytest.mark.parametrize(
    "line, width",
    [((3.0, 4.0, 50.0, 37.0), 1), ((3.0, 4.0, 50.0, 37.0), 5), ((60.2, 10.7, 12.4, 55.1), 7),
     ((5.0, 30.0, 70.0, 30.0), 3), ((40.0, 5.0, 40.0, 58.0), 4), ((10.5, 50.5, 65.25, 12.75), 1)],
)
def test_line_samples_match_skimage_profile_line(line, width):
    # independent reference: scikit-image measure.profile_line (same sampling construction;
    # src/dst in (row, col), order 1, mode 'nearest', mean across the width)
    rng = np.random.default_rng(11)
    image = rng.random((64, 80)) * 1000
    _, ours = sample_line(image, line, width_px=width)
    x0, y0, x1, y1 = line
    ref = profile_line(image, (y0, x0), (y1, x1), linewidth=width, order=1, mode="nearest")
    np.testing.assert_allclose(ours, ref, rtol=1e-12, atol=1e-9)


def test_line_sampling_reads_memmap_in_crops(tmp_path):
    a = np.random.default_rng(2).integers(0, 4000, (300, 300)).astype(np.uint16)
    np.save(tmp_path / "m.npy", a)
    mm = np.load(tmp_path / "m.npy", mmap_mode="r")
    line = (5.0, 7.0, 290.0, 260.0)
    _, from_mm = sample_line(mm, line, width_px=3, chunk=37)
    ref = profile_line(a.astype(float), (7.0, 5.0), (260.0, 290.0), linewidth=3, order=1, mode="nearest")
    np.testing.assert_allclose(from_mm, ref, rtol=1e-12)


@pytest.mark.parametrize("line, match", [
    ((10, 10, 10, 10), "0 pixels long"),
    ((10, 10, 11, 10), "at least 2 pixels"),
    ((-3, 10, 20, 10), "outside the image"),
    ((10, 10, 20, 64), "outside the image"),
])
def test_bad_lines_refused(line, match):
    with pytest.raises(InputError, match=match):
        check_line(line, (64, 80))


def test_rim_normal_profile_follows_depth_zoning():
    # self-consistency: without a truncated core the zoning is a function of depth below the outline
    img, sp, truth = synthetic_zoned_map(seed=5, shape=(260, 260), core_depth_um=None,
                                         layers=((0, 56), (18, 74), (40, 63)), sigma_um=1.0)
    spots = pd.DataFrame({"row": range(2, 2 + len(sp)), "label": sp["spot"], "x_px": sp["x_px"],
                          "y_px": sp["y_px"], "value": sp["An"], "spot_um": sp["spot_um"], "phase": ""})
    cal = calibrate_map(img, spots, pixel_um=1.0)
    mask = crystal_mask(img, seed_xy=(130, 130), crystal_signal=cal.table["signal"])
    prof = rim_normal_profile(mask, pixel_um=1.0, calibration=cal)
    assert np.all(np.diff(prof["distance_um"]) > 0)
    d = prof["distance_um"].to_numpy()
    expect = np.where(d < 18, 56.0, np.where(d < 40, 74.0, 63.0))
    away = (np.abs(d - 18) > 4) & (np.abs(d - 40) > 4) & (d > 2) & (d < 70)
    err = prof["An"].to_numpy()[away] - expect[away]
    assert np.sqrt(np.mean(err**2)) < 1.0
    # the mask is the crystal: compare with the generator's polygon (truth)
    yy, xx = np.mgrid[0:260, 0:260]
    depth, _ = crystal_depth_um(xx.astype(float), yy.astype(float), truth["outline_px"])
    agree = np.mean(mask.mask == (depth > 0))
    assert agree > 0.995


def test_effective_pixels_match_noise_of_interpolated_samples():
    # independent check: numpy's normal generator, var(mean of weighted pixels) = sigma^2 * sum(w^2)
    rng = np.random.default_rng(12)
    image = rng.normal(0.0, 1.0, (400, 400))
    _, vals, n_eff = sample_line(image, (10.3, 20.6, 380.1, 301.7), width_px=5, effective=True)
    assert np.var(vals) == pytest.approx(np.mean(1 / n_eff), rel=0.12)
    # an axis-aligned line on pixel centres: each sample is worth exactly `width` pixels
    _, _, n_axis = sample_line(image, (10.0, 50.0, 200.0, 50.0), width_px=5, effective=True)
    np.testing.assert_allclose(n_axis, 5.0)


def test_strip_distance_transform_equals_scipy_edt():
    # independent reference: scipy.ndimage.distance_transform_edt
    from scipy import ndimage as ndi

    from zoneprofile.maps.profiles import _edt_inside

    rng = np.random.default_rng(13)
    m = np.pad(ndi.binary_opening(rng.random((150, 131)) > 0.3), 1)
    np.testing.assert_allclose(_edt_inside(m, strip_rows=17), ndi.distance_transform_edt(m), atol=1e-5)
