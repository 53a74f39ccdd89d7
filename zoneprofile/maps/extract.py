"""From a map and spot analyses to a calibrated profile with its boundary geometry.

:func:`extract_profile` chains the map stage: read the map, locate the spots,
segment the crystal, calibrate, take the profile (along a line or normal to
the rim), find the boundaries the profile crosses, measure their obliquity ψ
and look for 2-D resorption evidence at each.
"""

from __future__ import annotations

import math
import numpy as np

from zoneprofile._validation import InputError, require_positive
from zoneprofile.maps._steps import find_steps
from zoneprofile.maps.calibration import calibrate_map, estimate_counts_per_unit, read_spots, spot_signals
from zoneprofile.maps.mask import crystal_mask
from zoneprofile.maps.orientation import apparent_width_factor, boundary_orientations
from zoneprofile.maps.profiles import check_line, line_profile, rim_normal_profile
from zoneprofile.maps.readers import file_sha256, read_map
from zoneprofile.maps.truncation import truncation_evidence

__all__ = ["extract_profile", "SECTION_NOTE"]

SECTION_NOTE = (
    "Only the obliquity ψ within the section is measured from the map; the angle φ between the boundary "
    "plane and the section is not measurable from one section and is assumed to be 90° (boundary cut "
    "perpendicular to the section). True width = apparent width · sin φ · cos ψ; an apparent diffusion "
    "time is too long by 1 / (sin φ · cos ψ)²."
)


def _ratio_signal(image, other, path):
    if other.data.shape != image.data.shape:
        message = (f"channels '{image.channel}' and '{other.channel}' differ in size "
                   f"({image.data.shape} vs {other.data.shape})")
        raise InputError(message, path=path)
    a = np.asarray(image.data, dtype=np.float32)
    total = a + np.asarray(other.data, dtype=np.float32)
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(total > 0, a / total, 0.0).astype(np.float32)
    return ratio, total


#: Largest pixel magnitude read as a signal: counts, counts per second, grey levels
#: and ratios stay far below it; beyond it the map is mis-scaled or damaged.
MAX_PIXEL_VALUE = 1.0e12


def _mask_nonfinite(data, path, notes):
    """Masked pixels (NaN, ±inf) of a floating-point map: counted, replaced for the
    thresholding only, and returned as a float map (1 = masked) so that spots and
    profile samples touching them are left out or flagged, never averaged in.

    Refuses a map with no finite pixel, and one whose finite pixels exceed
    :data:`MAX_PIXEL_VALUE` (mis-scaled: squares of such values overflow).
    """
    if np.asarray(data[:1, :1]).dtype.kind != "f":
        return data, None
    bad = np.zeros(data.shape, dtype=bool)
    peak = 0.0
    for r0 in range(0, data.shape[0], 512):
        strip = np.asarray(data[r0:r0 + 512])
        finite = np.isfinite(strip)
        bad[r0:r0 + 512] = ~finite
        if finite.any():
            peak = max(peak, float(np.max(np.abs(strip[finite]))))
    n_bad = int(np.count_nonzero(bad))
    if n_bad == bad.size:
        raise InputError("every pixel of the map is NaN or infinite; nothing to calibrate", path=path)
    if peak > MAX_PIXEL_VALUE:
        message = (f"pixel values reach {peak:.3g}; element-map counts, count rates and grey levels stay below "
                   f"{MAX_PIXEL_VALUE:.0e}: the map is mis-scaled or damaged (rescale it)")
        raise InputError(message, path=path)
    if n_bad == 0:
        return data, None
    filled = np.array(data, dtype=np.float32)
    filled[bad] = np.float32(np.median(filled[~bad]))
    notes.append(f"{n_bad} of {bad.size} pixels are NaN or infinite: masked (spots and profile samples touching "
                 "them are left out or flagged)")
    return filled, bad.astype(np.float32)


def _flag_masked_samples(frame, bad_pixels, line, width_px, pixel_um):
    """Flag profile samples whose footprint across the line touches a masked pixel."""
    from zoneprofile.maps.profiles import sample_line

    dist_px, touched = sample_line(bad_pixels, line, width_px=width_px)
    hit = np.interp(frame["distance_um"].to_numpy() / pixel_um, dist_px, touched) > 0
    if hit.any():
        frame = frame.copy()
        q = frame["qc"].to_numpy(dtype=object)
        flag = "masked (NaN/inf) pixels"
        frame["qc"] = [(flag if qq == "ok" else f"{qq}; {flag}") if h else qq for qq, h in zip(q, hit)]
    return frame


def _user_steps(frame, column, positions, pixel_um):
    out = []
    d = frame["distance_um"].to_numpy()
    v = frame[column].to_numpy()
    for p in positions:
        if not (d[0] <= p <= d[-1]):
            message = f"--boundary-um {p:g} lies outside the profile ({d[0]:.1f} to {d[-1]:.1f} µm)"
            raise InputError(message)
        near, far = 3 * pixel_um, 12 * pixel_um
        b = v[(d >= p - far) & (d <= p - near)]
        a = v[(d >= p + near) & (d <= p + far)]
        if b.size == 0 or a.size == 0:
            message = f"--boundary-um {p:g} is too close to the end of the profile to measure it"
            raise InputError(message)
        out.append({"position": float(p), "before": float(np.median(b)), "after": float(np.median(a)),
                    "width": 0.0, "t": float("nan")})
    return out


def extract_profile(
    image_path,
    *,
    pixel_um=None,
    spots_path,
    line=None,
    rim_normal=False,
    width_px=1,
    channel=None,
    column="An",
    spot_um=None,
    seed_xy=None,
    ratio_with=None,
    counts_per_unit=None,
    boundary_um=None,
    bin_um=None,
    max_side=2048,
    with_sha256=True,
    return_objects=True,
):
    """Calibrated composition profile from an element map.

    Parameters
    ----------
    image_path : path-like
        TIFF, PNG, NPY or text matrix (see :func:`read_map`).
    pixel_um : float, optional
        Pixel size in µm; default from the TIFF's resolution tags.
    spots_path : path-like
        Spot analyses on the map: ``x_px, y_px`` or ``x_um, y_um``, the
        ``column``, optional ``spot_um``, ``phase``, ``spot``.
    line : (x0, y0, x1, y1), pixels, x = column, y = row; runs from the rim inward.
    rim_normal : bool
        Profile binned by distance from the crystal edge instead of a line.
    width_px : int
        Samples averaged across the line.
    channel : str, optional
    column : str
        Calibrated quantity (``An``).
    spot_um : float, optional
        Spot diameter (overrides the table's ``spot_um``).
    seed_xy : (x, y), optional
        A point on the crystal (rim-normal mode, or several crystals).
    ratio_with : str, optional
        Calibrate the ratio channel / (channel + ratio_with).
    counts_per_unit : float, optional
        Counts per unit of the map values (default: raw counts for integer maps).
    boundary_um : sequence of float, optional
        Measure the boundaries at these positions instead of finding them.
    bin_um : float, optional
        Bin width of the rim-normal profile.
    max_side : int
        Largest side of the block-averaged grid the crystal is segmented on.
    with_sha256 : bool
        Record the inputs' SHA-256 (reads each file once more).
    return_objects : bool
        Also put the ``Calibration`` (``_calibration``), ``CrystalMask``
        (``_mask``) and the signal array (``_signal``) in ``info`` (default),
        for plotting; keys starting with ``_`` are Python objects, drop them
        before writing JSON.

    Returns
    -------
    profile : DataFrame
        ``distance_um, <column>, <column>_sd, n_pixels, qc`` (and ``spread``
        for the rim-normal profile); ``distance_um`` strictly increasing.
    info : dict
        ``image, spots, calibration, calibrations, mode, line, mask,
        boundaries, resorption_evidence, geometry, warnings``.
    """
    if line is None and not rim_normal:
        raise InputError("give a line (--line X0,Y0,X1,Y1) or ask for the rim-normal profile (--rim-normal)")
    if line is not None and rim_normal:
        raise InputError("give either a line or --rim-normal, not both")
    try:
        width_px = int(width_px)
    except (TypeError, ValueError):
        raise InputError("--width-px must be a whole number of pixels", text=width_px) from None
    if width_px < 1:
        raise InputError(f"--width-px must be at least 1, got {width_px}")
    if pixel_um is not None:
        pixel_um = require_positive(pixel_um, "--pixel-um")
    if spot_um is not None:
        spot_um = require_positive(spot_um, "--spot-um")
    image = read_map(image_path, channel=channel)
    warnings_out = list(image.notes)
    if pixel_um is None:
        if image.pixel_um is None:
            message = "pixel size unknown (no resolution tags in the file); give --pixel-um"
            raise InputError(message, path=image_path)
        pixel_um, pixel_source = image.pixel_um, image.pixel_um_source
    else:
        pixel_source = "--pixel-um"
        if image.pixel_um is not None and abs(image.pixel_um - pixel_um) > 0.01 * pixel_um:
            warnings_out.append(
                f"--pixel-um {pixel_um:g} differs from the file's {image.pixel_um:g} µm ({image.pixel_um_source}); "
                "--pixel-um used"
            )
    data = image.data
    ratio_total = None
    if ratio_with is not None:
        other = read_map(image_path, channel=ratio_with)
        data, total = _ratio_signal(image, other, image_path)
    data, bad_pixels = _mask_nonfinite(data, image_path, warnings_out)
    shape = data.shape
    if line is not None:
        line = check_line(line, shape)
    if seed_xy is not None:
        sx, sy = (float(v) for v in seed_xy)
        if not (-0.5 <= sx <= shape[1] - 0.5 and -0.5 <= sy <= shape[0] - 0.5):
            raise InputError(f"--seed ({sx:g}, {sy:g}) lies outside the image")
        seed_xy = (sx, sy)
    spots = read_spots(spots_path, column=column, pixel_um=pixel_um, shape=shape, spot_um=spot_um)
    if len(spots) < 3:
        message = f"calibration needs at least 3 spot analyses on the map, found {len(spots)}"
        raise InputError(message, path=spots_path)
    sizes = spots["spot_um"].to_numpy(float) if spot_um is None else np.full(len(spots), spot_um)
    sizes = np.where(np.isfinite(sizes), sizes, pixel_um)
    if bad_pixels is not None:
        touched = spot_signals(bad_pixels, spots["x_px"], spots["y_px"], sizes / 2 / pixel_um)[0] > 0
        if touched.any():
            warnings_out.append(
                f"{int(touched.sum())} spot(s) left out of the calibration: their footprint holds masked "
                f"(NaN/inf) pixels (rows {', '.join(str(r) for r in spots['row'][touched])})")
            spots = spots[~touched].reset_index(drop=True)
            sizes = sizes[~touched]
            if len(spots) < 3:
                message = (f"calibration needs at least 3 spot analyses on finite pixels of the map, "
                           f"found {len(spots)}")
                raise InputError(message, path=spots_path)
    raw_signal, _, _ = spot_signals(data, spots["x_px"], spots["y_px"], sizes / 2 / pixel_um)
    phases = sorted({p for p in spots["phase"] if p})
    mask = crystal_mask(data, line=line, seed_xy=seed_xy,
                        crystal_signal=None if phases else raw_signal, max_side=max_side)
    warnings_out += mask.notes
    if ratio_with is not None:
        idx = mask.contains(spots["y_px"], spots["x_px"]) if mask.found else np.ones(len(spots), bool)
        if not idx.any():
            idx = np.ones(len(spots), bool)
        tot_mean, _, _ = spot_signals(total, spots["x_px"][idx], spots["y_px"][idx], (sizes / 2 / pixel_um)[idx])
        ratio_total = float(np.mean(tot_mean))
        del total
    chosen_phase = None
    if phases:
        inside = mask.contains(spots["y_px"], spots["x_px"]) if mask.found else np.zeros(len(spots), bool)
        counts = {p: int(np.sum(inside & (spots["phase"] == p).to_numpy())) for p in phases}
        if max(counts.values()) > 0:
            chosen_phase = max(counts, key=counts.get)
        else:
            chosen_phase = max(phases, key=lambda p: int(np.sum(spots["phase"] == p)))
            warnings_out.append(f"no spot lies on the crystal; phase '{chosen_phase}' (most spots) used")
    region = mask.bbox() if mask.found else None
    if ratio_with is not None and counts_per_unit is None and not image.integer_counts:
        # the counting model of a ratio needs the gain of the raw channel, not of the ratio
        counts_per_unit = estimate_counts_per_unit(image.data, region)
    common = dict(pixel_um=pixel_um, column=column, spot_um=spot_um, counts_per_unit=counts_per_unit,
                  integer_counts=image.integer_counts, noise_region=region,
                  ratio_total=ratio_total, path=spots_path)
    calibration = calibrate_map(data, spots, phase=chosen_phase, **common)
    calibrations = {}
    for p in phases:
        if p == chosen_phase:
            continue
        try:
            calibrations[p] = calibrate_map(data, spots, phase=p, **common).to_dict()
        except InputError as exc:
            warnings_out.append(f"phase '{p}' not calibrated: {exc.message}")
    if calibration.r2 < 0.9:
        warnings_out.append(f"calibration r² is only {calibration.r2:.3f}; check the spots and the channel")
    if ratio_with is None and calibration.counts_per_unit_source.startswith("raw counts assumed (integer"):
        g_est = estimate_counts_per_unit(data, region)
        if np.isfinite(g_est) and not (0.5 <= g_est <= 2.0):
            warnings_out.append(
                f"the pixel noise suggests {g_est:.2g} counts per map unit, not 1: if the map is not raw counts, "
                "give --counts-per-unit"
            )

    if line is not None:
        frame = line_profile(data, line, pixel_um=pixel_um, calibration=calibration, width_px=width_px,
                             mask=mask, column=column)
        if not mask.found:
            warnings_out.append("profile not trimmed to the crystal (no crystal found under the line)")
        if bad_pixels is not None:
            frame = _flag_masked_samples(frame, bad_pixels, line, width_px, pixel_um)
    else:
        if bad_pixels is not None and mask.found:
            inside_bad = int(np.count_nonzero(mask.contains(*np.nonzero(bad_pixels))))
            if inside_bad:
                message = (f"{inside_bad} masked (NaN/inf) pixel(s) lie on the crystal; a rim-normal profile "
                           "would average over them: draw a --line that avoids them")
                raise InputError(message, path=image_path)
        frame = rim_normal_profile(mask, pixel_um=pixel_um, calibration=calibration, bin_um=bin_um, column=column)
    if len(frame) < 2:
        raise InputError("the profile holds fewer than 2 points inside the crystal; check the line")

    good = frame[frame["qc"] == "ok"]
    if boundary_um:
        steps = _user_steps(good, column, [float(b) for b in boundary_um], pixel_um)
    else:
        steps = find_steps(good["distance_um"].to_numpy(), good[column].to_numpy())
    boundaries, evidence = [], []
    if line is not None:
        length_px = math.hypot(line[2] - line[0], line[3] - line[1])
        for_orient = [{"position_um": s["position"], "before": s["before"], "after": s["after"],
                       "width_um": s["width"]} for s in steps]
        orient = boundary_orientations(data, line, for_orient, calibration=calibration, pixel_um=pixel_um, mask=mask)
        for s, o in zip(steps, orient):
            entry = _boundary_entry(s, pixel_um)
            psi = o["obliquity_deg"]
            entry.update({
                "obliquity_deg": psi, "obliquity_method": "structure tensor of the map gradient at the crossing",
                "obliquity_sd_deg": o.get("obliquity_sd_deg"),
                "coherence": o["coherence"], "normal_xy": o["normal_xy"], "x_px": o["x_px"], "y_px": o["y_px"],
                "window_px": o["window_px"], "section_angle_deg": 90.0, "section_angle_source": "assumed",
            })
            if psi is not None:
                factor = apparent_width_factor(psi)
                entry["width_factor"] = factor
                entry["width_um_true"] = entry["width_um_apparent"] * factor
                entry["time_factor"] = factor**2
                tr = truncation_evidence(
                    data, o["x_px"], o["y_px"], o["normal_xy"], before=s["before"], after=s["after"],
                    width_px=max(s["width"], pixel_um) / pixel_um, calibration=calibration, pixel_um=pixel_um,
                    mask=mask, column=column)
            else:
                entry.update({"width_factor": None, "width_um_true": None, "time_factor": None})
                tr = {"assessed": False, "truncated": False, "evidence": []}
                warnings_out.append(f"orientation not measurable at {entry['position_um']:.1f} µm")
            entry["truncation"] = tr
            boundaries.append(entry)
            if tr.get("truncated"):
                evidence.append({"position_um": entry["position_um"], "evidence": list(tr["evidence"])})
        line_info = {"x0": line[0], "y0": line[1], "x1": line[2], "y1": line[3], "width_px": width_px,
                     "length_um": length_px * pixel_um,
                     "angle_deg": math.degrees(math.atan2(line[3] - line[1], line[2] - line[0]))}
    else:
        spread = frame["spread"].to_numpy()
        dist = frame["distance_um"].to_numpy()
        for s in steps:
            entry = _boundary_entry(s, pixel_um)
            entry.update({"obliquity_deg": 0.0, "obliquity_sd_deg": 0.0,
                          "obliquity_method": "rim-normal profile: along the zoning normal by construction", "section_angle_deg": 90.0, "section_angle_source": "assumed",
                          "width_factor": 1.0, "width_um_true": entry["width_um_apparent"], "time_factor": 1.0})
            gap = 3 * max(s["width"], pixel_um * mask.factor) + 2 * pixel_um * mask.factor
            inner = spread[(dist > s["position"] + gap) & (dist <= s["position"] + gap + 10 * pixel_um * mask.factor)]
            outer = spread[(dist < s["position"] - gap) & (dist >= s["position"] - gap - 10 * pixel_um * mask.factor)]
            tr = {"assessed": bool(inner.size and outer.size), "truncated": False, "evidence": []}
            if inner.size and outer.size:
                # spread beyond counting noise of one grid pixel
                sig = frame["signal"].to_numpy()
                noise2 = calibration.counting_var(sig) / (calibration.slope**2 * mask.factor**2)
                excess = np.sqrt(np.clip(spread**2 - noise2, 0, None))
                sel_in = (dist > s["position"] + gap) & (dist <= s["position"] + gap + 10 * pixel_um * mask.factor)
                sel_out = (dist < s["position"] - gap) & (dist >= s["position"] - gap - 10 * pixel_um * mask.factor)
                si, so = float(np.median(excess[sel_in])), float(np.median(excess[sel_out]))
                tr.update({"inner_spread": si, "outer_spread": so})
                if si > 2 * so and si - so > max(1.0, 0.1 * abs(s["change"])):
                    tr["truncated"] = True
                    tr["evidence"].append(
                        f"2-D map: at equal depth inside the boundary {column} scatters by {si:.1f} (sd beyond counting "
                        f"noise) against {so:.1f} outside: inner zones do not parallel it"
                    )
                    evidence.append({"position_um": entry["position_um"], "evidence": list(tr["evidence"])})
            entry["truncation"] = tr
            boundaries.append(entry)
        line_info = None

    out_cols = ["distance_um", column, f"{column}_sd", "n_pixels"] + (["spread"] if rim_normal else []) + ["qc"]
    profile = frame[out_cols].reset_index(drop=True)
    info = {
        "image": {"path": str(image_path), "sha256": file_sha256(image_path) if with_sha256 else None,
                  "shape_rows_cols": list(shape), "dtype": str(image.data.dtype), "channel": image.channel,
                  "channels": list(image.channels), "ratio_with": ratio_with, "pixel_um": pixel_um,
                  "pixel_um_source": pixel_source, "pixel_centres": "integer coordinates; x = column, y = row"},
        "spots": {"path": str(spots_path), "sha256": file_sha256(spots_path) if with_sha256 else None,
                  "n": int(len(spots)), "column": column, "spot_um": spot_um, "phases": phases},
        "calibration": calibration.to_dict(),
        "calibrations": calibrations,
        "mode": "line" if line is not None else "rim-normal",
        "line": line_info,
        "seed_xy": list(seed_xy) if seed_xy is not None else None,
        "mask": mask.to_dict(),
        "boundaries": boundaries,
        "resorption_evidence": evidence,
        "geometry": {"section_angle_deg": 90.0, "section_angle_source": "assumed", "note": SECTION_NOTE},
        "distance_origin": "line start (the rim end of the line)" if line is not None else "crystal edge",
        "warnings": warnings_out,
    }
    if return_objects:
        info["_calibration"] = calibration
        info["_mask"] = mask
        info["_signal"] = data
    return profile, info


def _boundary_entry(step, pixel_um):
    return {
        "position_um": float(step["position"]),
        "before": float(step["before"]),
        "after": float(step["after"]),
        "change": float(step["after"] - step["before"]),
        "width_um_apparent": float(step["width"]),
        "t_statistic": step.get("t"),
    }

