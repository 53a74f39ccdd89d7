"""Two-dimensional evidence of resorption: a boundary that cuts older zones.

Growth zones are laid down parallel to the crystal faces, so a growth boundary
has zones parallel to it on both sides. A resorption (dissolution) surface
cuts the older zones inside it; the zones grown afterwards drape it. Along a
path parallel to the boundary just inside it, the composition is therefore
constant for a growth boundary and varies (it crosses the cut zones) for a
truncating one; a matching path just outside serves as the control.

The test, for a boundary with normal **n** and tangent **t** at the crossing X:

* sample the smoothed map along X + δ n + s t (inner side) and X − δ n + s t
  (outer side), s in [−L, L], as far as the boundary itself stays on the
  straight trace (the step is still there at each s) and inside the crystal;
* inner range R_in and outer range R_out: 5th-95th percentile spread;
* evidence when R_in > max(6 σ, 0.1 |ΔC|, ``min_range``) and
  R_in > 2 R_out + 3 σ, with σ the noise of the smoothed map;
* the angle at which the inner zones meet the boundary: the normals of the
  inner zone boundaries crossed by the inner path (structure tensor, see
  ``orientation``) against **n**.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import ndimage as ndi

from zoneprofile.maps._steps import find_steps
from zoneprofile.maps.orientation import boundary_orientation

__all__ = ["truncation_evidence"]


def truncation_evidence(data, x_px, y_px, normal_xy, *, before, after, width_px, calibration, pixel_um,
                        mask=None, reach_px=None, offset_px=None, sigma_px=1.5, min_range=1.0, column="An"):
    """Whether the boundary at (x_px, y_px) cuts older zones on its inner side.

    Parameters
    ----------
    data : 2-D array-like, map signal
    x_px, y_px : crossing point
    normal_xy : (nx, ny) boundary normal pointing to the inner (core) side
    before, after : composition on the rim side and the core side
    width_px : apparent 1-sigma width of the boundary, pixels
    calibration : Calibration
    reach_px : half-length of the paths along the boundary (default max(30, 10 width))
    offset_px : distance of the paths from the boundary (default 2.5 width + 2 sigma + 1)
    min_range : smallest variation (composition units) that counts as evidence

    Returns
    -------
    dict with ``assessed, truncated, inner_range, outer_range, noise_sd,
    length_um, truncation_angle_deg, evidence`` (list of plain sentences).
    """
    nx, ny = normal_xy
    nn = math.hypot(nx, ny)
    nx, ny = nx / nn, ny / nn
    tx, ty = -ny, nx
    reach = reach_px if reach_px is not None else max(30.0, 10.0 * width_px)
    delta = offset_px if offset_px is not None else 2.5 * width_px + 2 * sigma_px + 1.0
    half = int(math.ceil(reach + 2 * delta + 4 * sigma_px)) + 3
    rows, cols = data.shape
    r0, r1 = max(0, int(round(y_px)) - half), min(rows, int(round(y_px)) + half + 1)
    c0, c1 = max(0, int(round(x_px)) - half), min(cols, int(round(x_px)) + half + 1)
    raw = np.asarray(data[r0:r1, c0:c1], dtype=np.float64)
    smooth = ndi.gaussian_filter(raw, sigma_px, mode="nearest")
    comp = calibration.to_composition(smooth)
    diffs = np.diff(raw, axis=1).ravel()
    pixel_noise = 1.4826 * np.median(np.abs(diffs - np.median(diffs))) / math.sqrt(2) / abs(calibration.slope)
    noise = pixel_noise / (2 * math.sqrt(math.pi) * sigma_px)
    s = np.arange(-reach, reach + 0.5, 1.0)

    def sample(off):
        px = x_px + off * nx + s * tx - c0
        py = y_px + off * ny + s * ty - r0
        ok = (px >= 0) & (px <= comp.shape[1] - 1) & (py >= 0) & (py <= comp.shape[0] - 1)
        vals = ndi.map_coordinates(comp, [np.clip(py, 0, comp.shape[0] - 1), np.clip(px, 0, comp.shape[1] - 1)],
                                   order=1, mode="nearest")
        if mask is not None and mask.found:
            ok &= mask.contains(py + r0, px + c0)
        return vals, ok

    v_in, ok_in = sample(delta)
    v_out, ok_out = sample(-delta)
    near_in, _ = sample(0.6 * delta)
    near_out, _ = sample(-0.6 * delta)
    change = after - before
    step_there = (near_in - near_out) * np.sign(change) >= 0.5 * abs(change)
    valid = ok_in & ok_out & step_there
    centre = int(np.argmin(np.abs(s)))
    result = {"assessed": False, "truncated": False, "inner_range": None, "outer_range": None,
              "noise_sd": float(noise), "length_um": 0.0, "truncation_angle_deg": None, "evidence": []}
    if not valid[centre]:
        return result
    lo = centre
    while lo > 0 and valid[lo - 1]:
        lo -= 1
    hi = centre
    while hi < s.size - 1 and valid[hi + 1]:
        hi += 1
    if hi - lo < 10:
        return result
    vin, vout = v_in[lo:hi + 1], v_out[lo:hi + 1]
    r_in = float(np.percentile(vin, 95) - np.percentile(vin, 5))
    r_out = float(np.percentile(vout, 95) - np.percentile(vout, 5))
    length_um = float((s[hi] - s[lo]) * pixel_um)
    result.update({"assessed": True, "inner_range": r_in, "outer_range": r_out, "length_um": length_um})
    threshold = max(6 * noise, 0.1 * abs(change), min_range)
    if not (r_in > threshold and r_in > 2 * r_out + 3 * noise):
        return result
    result["truncated"] = True
    result["evidence"].append(
        f"2-D map: along the inner side of the boundary {column} varies by {r_in:.1f} over {length_um:.0f} µm "
        f"(outer side {r_out:.1f}): older zones are cut by it"
    )
    # angle at which the inner zones meet the boundary
    angles = []
    inner_steps = find_steps(s[lo:hi + 1], vin, sigma_samples=1.5, min_t=4.0, plateau=5)
    for st in inner_steps:
        qx = x_px + delta * nx + st["position"] * tx
        qy = y_px + delta * ny + st["position"] * ty
        b_sig = calibration.slope * st["before"] + calibration.intercept
        a_sig = calibration.slope * st["after"] + calibration.intercept
        res = boundary_orientation(data, qx, qy, (tx, ty), before_signal=b_sig, after_signal=a_sig,
                                   radius_px=max(4.0, 0.6 * delta), sigma_px=sigma_px, mask=mask)
        if res["normal_xy"] is not None:
            cosang = min(1.0, abs(res["normal_xy"][0] * nx + res["normal_xy"][1] * ny))
            angles.append(math.degrees(math.acos(cosang)))
    if angles:
        result["truncation_angle_deg"] = float(np.median(angles))
        result["evidence"].append(
            f"2-D map: {len(angles)} inner zone boundar{'y meets' if len(angles) == 1 else 'ies meet'} it at about "
            f"{np.median(angles):.0f}° instead of running parallel to it"
        )
    return result
