"""Boundary orientation (obliquity), invariance under rotation and flips, truncation evidence."""

import math

import numpy as np
import pytest
import tifffile
from scipy.special import erf

from zoneprofile.maps import apparent_width_factor, boundary_orientation, extract_profile, synthetic_zoned_map


@pytest.mark.parametrize("theta_deg", [0.0, 17.0, 35.0, 61.0, 90.0, 133.0])
def test_structure_tensor_recovers_a_straight_edge(theta_deg):
    # analytic geometry: an erf step across the line n . x = c has normal n = (cos θ, sin θ)
    th = math.radians(theta_deg)
    yy, xx = np.mgrid[0:81, 0:81].astype(float)
    s = (xx - 40) * math.cos(th) + (yy - 40) * math.sin(th)
    img = 500 + 300 * (1 + erf(s / (math.sqrt(2) * 2.0))) / 2
    res = boundary_orientation(img, 40.0, 40.0, (1.0, 0.0), before_signal=500, after_signal=800)
    nx, ny = res["normal_xy"]
    angle = math.degrees(math.acos(min(1.0, abs(nx * math.cos(th) + ny * math.sin(th)))))
    assert angle < 0.2
    # the line runs along x, so ψ = angle between x and n (folded into 0-90°)
    expect = math.degrees(math.acos(abs(math.cos(th))))
    assert res["obliquity_deg"] == pytest.approx(expect, abs=0.2)
    assert res["coherence"] > 0.95


def test_width_factor_is_sin_phi_cos_psi():
    # REFERENCES §7: w_true = w_apparent · sin φ · cos ψ
    assert apparent_width_factor(0.0) == pytest.approx(1.0)
    assert apparent_width_factor(60.0) == pytest.approx(0.5)
    assert apparent_width_factor(35.0, 50.0) == pytest.approx(math.sin(math.radians(50)) * math.cos(math.radians(35)))


def _run(tmp_path, img, spots, line, name="m_Ca.tif", width=5):
    p = tmp_path / name
    tifffile.imwrite(p, img)
    s = tmp_path / (name + ".csv")
    spots.to_csv(s, index=False)
    return extract_profile(p, pixel_um=1.0, spots_path=s, line=line, width_px=width, with_sha256=False)


@pytest.mark.parametrize("psi", [0.0, 15.0, 35.0, 50.0, 65.0])
def test_obliquity_over_a_range_of_angles(tmp_path, psi):
    # self-consistency on seeded maps: the growth boundary crossed at ψ (generator truth)
    for seed in (21 + int(psi),):
        img, sp, truth = synthetic_zoned_map(seed=seed, shape=(360, 360), obliquity_deg=psi, return_maps=False)
        _, info = _run(tmp_path, img, sp, truth["line"])
        target = next(b for b in truth["boundaries"] if b["kind"] == "growth")
        found = min(info["boundaries"], key=lambda b: abs(b["position_um"] - target["position_um"]))
        assert abs(found["position_um"] - target["position_um"]) < 2.0
        assert found["obliquity_deg"] == pytest.approx(target["obliquity_deg"], abs=3.0)
        assert not found["truncation"]["truncated"]


def _transform(img, sp, line, how):
    """Rotate/flip the map and carry the spots and the line with it (x = col, y = row)."""
    rows, cols = img.shape
    xs, ys = sp["x_px"].to_numpy(float), sp["y_px"].to_numpy(float)
    lx, ly = np.array([line[0], line[2]]), np.array([line[1], line[3]])
    if how == "rot90":  # np.rot90 (counter-clockwise): new[r, c] = old[c, cols-1-r]
        out = np.rot90(img)
        f = lambda X, Y: (Y, cols - 1 - X)  # noqa: E731
    elif how == "rot180":
        out = np.rot90(img, 2)
        f = lambda X, Y: (cols - 1 - X, rows - 1 - Y)  # noqa: E731
    elif how == "fliplr":
        out = np.fliplr(img)
        f = lambda X, Y: (cols - 1 - X, Y)  # noqa: E731
    else:  # flipud
        out = np.flipud(img)
        f = lambda X, Y: (X, rows - 1 - Y)  # noqa: E731
    sx, sy = f(xs, ys)
    nx, ny = f(lx, ly)
    sp2 = sp.copy()
    sp2["x_px"], sp2["y_px"] = sx, sy
    return np.ascontiguousarray(out), sp2, (nx[0], ny[0], nx[1], ny[1])


def test_invariant_under_rotation_and_flips(tmp_path):
    img, sp, truth = synthetic_zoned_map(seed=31, shape=(300, 300), obliquity_deg=35.0, return_maps=False)
    ref_prof, ref = _run(tmp_path, img, sp, truth["line"], name="ref_Ca.tif")
    for how in ("rot90", "rot180", "fliplr", "flipud"):
        img2, sp2, line2 = _transform(img, sp, truth["line"], how)
        prof, info = _run(tmp_path, img2, sp2, line2, name=f"{how}_Ca.tif")
        np.testing.assert_allclose(prof["An"], ref_prof["An"], atol=1e-6)
        np.testing.assert_allclose(prof["distance_um"], ref_prof["distance_um"], atol=1e-9)
        assert info["calibration"]["slope"] == pytest.approx(ref["calibration"]["slope"], rel=1e-9)
        assert len(info["boundaries"]) == len(ref["boundaries"])
        for a, b in zip(info["boundaries"], ref["boundaries"]):
            assert a["position_um"] == pytest.approx(b["position_um"], abs=1e-6)
            assert a["obliquity_deg"] == pytest.approx(b["obliquity_deg"], abs=0.5)
            assert a["truncation"]["truncated"] == b["truncation"]["truncated"]


def test_truncation_found_at_resorption_surface_only(tmp_path):
    # generator truth: the core's zones follow an older, tilted outline cut at core_depth_um
    hits = []
    for seed in (41, 42, 43):
        img, sp, truth = synthetic_zoned_map(seed=seed, shape=(300, 300), obliquity_deg=20.0, return_maps=False)
        _, info = _run(tmp_path, img, sp, truth["line"])
        for tb in truth["boundaries"]:
            found = min(info["boundaries"], key=lambda b: abs(b["position_um"] - tb["position_um"]))
            if abs(found["position_um"] - tb["position_um"]) > 4:
                continue
            hits.append((tb["kind"], found["truncation"]["truncated"]))
            if found["truncation"]["truncated"]:
                assert any(e["position_um"] == found["position_um"] for e in info["resorption_evidence"])
    assert ("growth", True) not in hits
    assert sum(1 for k, t in hits if k == "resorption" and t) >= 2


def test_no_truncation_when_core_parallels_the_rim(tmp_path):
    img, sp, truth = synthetic_zoned_map(seed=44, shape=(300, 300), obliquity_deg=20.0, truncation=False,
                                         return_maps=False)
    _, info = _run(tmp_path, img, sp, truth["line"])
    assert info["resorption_evidence"] == []
