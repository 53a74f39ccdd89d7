"""Seeded generator of zoned-crystal element maps with known truth.

The crystal is a convex polygon (a plagioclase section: a rectangle with cut
corners, at a random rotation). Its zoning is a function of depth below the
crystal outline, ``d(x) = min_k n_k . (x - p_k)`` over the facets k (exact for
the inward offsets of a convex polygon), so every zone boundary runs parallel to
the facets. The core holds zones of an older, differently oriented outline,
cut off by a resorption surface: the truncation the 2-D evidence must find.

The map signal is ``counts = slope * An + intercept`` with Poisson counting
noise; spot analyses are the noise-free An averaged over the spot footprint
plus analytical noise. Everything is drawn from ``numpy.random.default_rng(seed)``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.special import ndtr

__all__ = ["synthetic_zoned_map", "crystal_depth_um"]


def _polygon(center, half_long, half_short, cut, angle_rad):
    """Vertices (x, y) of a rectangle with cut corners, rotated by ``angle_rad``."""
    a, b, c = half_long, half_short, cut
    pts = np.array(
        [(a - c, -b), (a, -b + c), (a, b - c), (a - c, b), (-a + c, b), (-a, b - c), (-a, -b + c), (-a + c, -b)],
        dtype=float,
    )
    rot = np.array([[np.cos(angle_rad), -np.sin(angle_rad)], [np.sin(angle_rad), np.cos(angle_rad)]])
    return pts @ rot.T + np.asarray(center, dtype=float)


def _facets(vertices):
    """Facet points and inward unit normals of a convex polygon."""
    v = np.asarray(vertices, dtype=float)
    nxt = np.roll(v, -1, axis=0)
    edge = nxt - v
    centroid = v.mean(axis=0)
    normals = np.stack([-edge[:, 1], edge[:, 0]], axis=1)
    normals /= np.linalg.norm(normals, axis=1)[:, None]
    flip = np.einsum("ij,ij->i", centroid - v, normals) < 0
    normals[flip] *= -1
    return v, normals, np.linalg.norm(edge, axis=1)


def crystal_depth_um(x_um, y_um, vertices_um):
    """Depth below the outline of a convex polygon (positive inside), and the nearest facet."""
    pts, normals, _ = _facets(vertices_um)
    d = np.full(np.shape(x_um), np.inf)
    owner = np.zeros(np.shape(x_um), dtype=int)
    for k in range(len(pts)):
        dk = (x_um - pts[k, 0]) * normals[k, 0] + (y_um - pts[k, 1]) * normals[k, 1]
        closer = dk < d
        d = np.where(closer, dk, d)
        owner = np.where(closer, k, owner)
    return d, owner


def _an_field(x_um, y_um, geom):
    """Noise-free An (mol%) and depth at positions in µm."""
    d, _ = crystal_depth_um(x_um, y_um, geom["outline"])
    an = np.full(np.shape(d), float(geom["layers"][0][1]))
    for (depth, value), (_, prev) in zip(geom["layers"][1:], geom["layers"][:-1]):
        an += (value - prev) * ndtr((d - depth) / geom["sigma_um"])
    if geom["core"] is not None:
        core = geom["core"]
        d_old, _ = crystal_depth_um(x_um, y_um, core["outline"])
        phase = np.sin(2 * np.pi * d_old / core["band_um"])
        core_an = core["mean"] + core["amplitude"] * np.tanh(phase / 0.3) / np.tanh(1 / 0.3)
        w = ndtr((d - core["depth_um"]) / geom["sigma_um"])
        an = an * (1 - w) + core_an * w
    return an, d


def synthetic_zoned_map(
    *,
    seed=0,
    shape=(400, 400),
    pixel_um=1.0,
    obliquity_deg=35.0,
    layers=((0.0, 58.0), (22.0, 76.0)),
    core_depth_um=48.0,
    core_mean=64.0,
    core_amplitude=4.0,
    core_band_um=14.0,
    truncation=True,
    sigma_um=1.5,
    slope=12.0,
    intercept=150.0,
    groundmass_an=12.0,
    n_spots=12,
    spot_um=5.0,
    spot_sd=0.4,
    noise=True,
    dtype=np.uint16,
    crossing_layer=1,
    return_maps=True,
    strip_rows=512,
):
    """Make a seeded element map of a zoned plagioclase with known truth.

    Parameters
    ----------
    seed : int
    shape : (rows, cols)
    pixel_um : float
    obliquity_deg : float
        Angle between the returned line and the normal of the boundary
        ``layers[crossing_layer]`` where it crosses it (ψ).
    layers : sequence of (depth_um, An)
        Concentric zones: An from each depth below the rim inward.
    core_depth_um : float or None
        Depth of the resorption surface below which the older core lies.
    core_mean, core_amplitude, core_band_um : float
        Banded core zoning (An) following an older outline.
    truncation : bool
        Orient the core's outline obliquely to the present one (True) or
        parallel to it (False, no truncation).
    sigma_um : float
        Width (standard deviation) of every zone boundary.
    slope, intercept : float
        True calibration: counts = slope * An + intercept.
    groundmass_an : float
        An-equivalent signal of the groundmass around the crystal.
    n_spots, spot_um, spot_sd : int, float, float
        Number, diameter and analytical 1-sigma (mol%) of spot analyses.
    noise : bool
        Poisson counting noise on the map.
    dtype : numpy dtype
        Type of the returned map (uint16 counts by default).
    return_maps : bool
        Return the noise-free An map and the mask in ``truth`` (memory-heavy
        for large maps).

    Returns
    -------
    image : ndarray (rows, cols)
    spots : DataFrame with ``spot, x_px, y_px, An, spot_um``
    truth : dict
        ``slope, intercept, pixel_um, line (x0, y0, x1, y1) px,
        line_distance_um, line_An, boundaries [{position_um, obliquity_deg,
        depth_um, kind}], outline_px, an_map, mask, truncated_depth_um``.
    """
    rng = np.random.default_rng(seed)
    rows, cols = int(shape[0]), int(shape[1])
    size_um = min(rows, cols) * pixel_um
    angle = rng.uniform(0, np.pi)
    center = np.array([cols, rows]) * pixel_um / 2 + rng.uniform(-0.03, 0.03, 2) * size_um
    half_long, half_short = 0.40 * size_um, 0.30 * size_um
    outline = _polygon(center, half_long, half_short, 0.10 * size_um, angle)
    layers = [(float(a), float(b)) for a, b in layers]
    core = None
    if core_depth_um is not None:
        tilt = np.deg2rad(rng.uniform(18, 30) * rng.choice([-1, 1])) if truncation else 0.0
        shift = rng.uniform(-0.05, 0.05, 2) * size_um if truncation else np.zeros(2)
        core_outline = _polygon(center + shift, half_long, half_short * 1.05, 0.1 * size_um, angle + tilt)
        core = {"outline": core_outline, "depth_um": float(core_depth_um), "mean": core_mean,
                "amplitude": core_amplitude, "band_um": core_band_um}
    geom = {"outline": outline, "layers": layers, "sigma_um": float(sigma_um), "core": core}

    # -- image, computed in strips of rows to bound memory
    image = np.empty((rows, cols), dtype=dtype)
    an_map = np.empty((rows, cols), dtype=np.float32) if return_maps else None
    mask = np.empty((rows, cols), dtype=bool) if return_maps else None
    x_um = (np.arange(cols) + 0.0) * pixel_um
    for r0 in range(0, rows, strip_rows):
        r1 = min(rows, r0 + strip_rows)
        yy = (np.arange(r0, r1, dtype=float) * pixel_um)[:, None]
        xx = np.broadcast_to(x_um[None, :], (r1 - r0, cols))
        an, d = _an_field(xx, np.broadcast_to(yy, xx.shape), geom)
        inside = ndtr(d / (0.5 * pixel_um))  # partial pixels at the outline
        an_eff = an * inside + groundmass_an * (1 - inside)
        lam = slope * an_eff + intercept
        counts = rng.poisson(np.clip(lam, 0, None)).astype(float) if noise else lam
        if np.dtype(dtype).kind in "ui":
            info = np.iinfo(dtype)
            counts = np.clip(np.rint(counts), info.min, info.max)
        image[r0:r1] = counts
        if return_maps:
            an_map[r0:r1] = an
            mask[r0:r1] = d > 0

    # -- the line: from just inside the rim, across layer `crossing_layer` at ψ
    pts, normals, lengths = _facets(outline)
    k = int(np.argmax(lengths))
    t_hat = (np.roll(pts, -1, axis=0)[k] - pts[k]) / lengths[k]
    n_in = normals[k]
    psi = np.deg2rad(obliquity_deg)
    sign = rng.choice([-1.0, 1.0])
    u = np.cos(psi) * n_in + sign * np.sin(psi) * t_hat
    d_cross = layers[crossing_layer][0] if crossing_layer < len(layers) else layers[-1][0]
    end_depth = (core_depth_um + 15.0) if core_depth_um is not None else d_cross + 30.0
    start_depth = 1.5 * pixel_um
    # centre the line on the facet's middle so it stays on facet k's side
    lateral = sign * np.tan(psi)
    foot = pts[k] + t_hat * (lengths[k] / 2 + lateral * (d_cross - (end_depth + start_depth) / 2))
    cross = foot + n_in * d_cross
    s_start = -(d_cross - start_depth) / np.cos(psi)
    s_end = (end_depth - d_cross) / np.cos(psi)
    p0, p1 = cross + s_start * u, cross + s_end * u
    line = (p0[0] / pixel_um, p0[1] / pixel_um, p1[0] / pixel_um, p1[1] / pixel_um)
    length_um = s_end - s_start
    dist = np.arange(0, length_um, 0.25 * pixel_um)
    lx = p0[0] + dist * u[0]
    ly = p0[1] + dist * u[1]
    line_an, line_d = _an_field(lx, ly, geom)
    _, owner = crystal_depth_um(lx, ly, outline)

    boundaries = []
    depths = [(depth, "growth") for depth, _ in layers[1:]]
    if core is not None:
        depths.append((core["depth_um"], "resorption"))
    for depth, kind in depths:
        above = line_d >= depth
        crossing = np.flatnonzero(above[:-1] != above[1:])
        for j in crossing:
            f = (depth - line_d[j]) / (line_d[j + 1] - line_d[j]) if line_d[j + 1] != line_d[j] else 0.0
            pos = dist[j] + f * (dist[j + 1] - dist[j])
            nrm = normals[owner[j]]
            psi_true = np.degrees(np.arccos(min(1.0, abs(float(nrm @ u)))))
            boundaries.append({"position_um": float(pos), "obliquity_deg": float(psi_true),
                               "depth_um": float(depth), "kind": kind})
    boundaries.sort(key=lambda b: b["position_um"])

    # -- spot analyses, stratified by depth so every zone is sampled
    spots = _spots(rng, geom, rows, cols, pixel_um, n_spots, spot_um, spot_sd)

    truth = {
        "slope": float(slope), "intercept": float(intercept), "pixel_um": float(pixel_um),
        "line": tuple(float(v) for v in line), "obliquity_deg": float(obliquity_deg),
        "line_distance_um": dist, "line_An": line_an, "line_depth_um": line_d,
        "boundaries": boundaries, "outline_px": outline / pixel_um,
        "an_map": an_map, "mask": mask, "sigma_um": float(sigma_um),
        "truncated_depth_um": float(core_depth_um) if (core is not None and truncation) else None,
        "groundmass_an": float(groundmass_an),
    }
    return image, spots, truth


def _spots(rng, geom, rows, cols, pixel_um, n_spots, spot_um, spot_sd):
    depths = [layer[0] for layer in geom["layers"][1:]]
    if geom["core"] is not None:
        depths.append(geom["core"]["depth_um"])
    keep_off = spot_um / 2 + 3 * geom["sigma_um"]
    edges = [0.0] + depths + [(depths[-1] if depths else 20.0) + 40.0]
    bands = list(zip(edges[:-1], edges[1:]))
    chosen = []
    for _ in range(50):
        if len(chosen) >= n_spots:
            break
        xs = rng.uniform(0, cols, 4096) * pixel_um
        ys = rng.uniform(0, rows, 4096) * pixel_um
        ds, _ = crystal_depth_um(xs, ys, geom["outline"])
        for x, y, d in zip(xs, ys, ds):
            lo, hi = bands[len(chosen) % len(bands)]
            keep = min(keep_off, 0.45 * (hi - lo))
            if lo + keep <= d <= hi - keep:
                chosen.append((x, y))
                if len(chosen) >= n_spots:
                    break
    r = spot_um / 2
    out = []
    for i, (x, y) in enumerate(chosen, start=1):
        # average the noise-free An over the spot footprint (a disc)
        g = np.linspace(-r, r, 9)
        gx, gy = np.meshgrid(g, g)
        inside = gx**2 + gy**2 <= r**2
        an, _ = _an_field(x + gx[inside], y + gy[inside], geom)
        out.append({"spot": f"S{i:02d}", "x_px": round(x / pixel_um, 2), "y_px": round(y / pixel_um, 2),
                    "An": round(float(an.mean() + rng.normal(0, spot_sd)), 2), "spot_um": spot_um})
    return pd.DataFrame(out, columns=["spot", "x_px", "y_px", "An", "spot_um"])
