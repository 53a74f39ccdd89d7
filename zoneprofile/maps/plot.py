"""Figure of a map profile: the calibrated map with the line, crystal outline and
boundaries, and the profile beside it.

Colour map: cividis (perceptually uniform, readable with colour-vision
deficiency). Line and markers in black and white so they read on any colour.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["plot_map_profile"]


def plot_map_profile(profile, info, path=None, *, column="An", max_side=1024):
    """Draw the figure; save it to ``path`` (PNG, SVG or PDF by extension) if given.

    ``info`` must come from ``extract_profile(..., return_objects=True)``.
    Returns the matplotlib ``Figure``.
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from zoneprofile.maps.mask import block_mean

    calibration = info["_calibration"]
    mask = info["_mask"]
    pixel_um = info["image"]["pixel_um"]
    reduced = mask.reduced
    step = max(1, math.ceil(max(reduced.shape) / max_side))
    shown = block_mean(reduced, step) if step > 1 else reduced
    f = mask.factor * step
    comp = calibration.to_composition(shown.astype(np.float32))
    inside = mask.mask[::step, ::step] if step > 1 else mask.mask
    rows, cols = info["image"]["shape_rows_cols"]
    extent = (-0.5 * pixel_um, (cols - 0.5) * pixel_um, (rows - 0.5) * pixel_um, -0.5 * pixel_um)
    if inside.any():
        lo, hi = np.percentile(comp[inside[: comp.shape[0], : comp.shape[1]]], [1, 99])
    else:
        lo, hi = np.percentile(comp, [1, 99])

    fig = Figure(figsize=(11.5, 5.0), layout="constrained")
    FigureCanvasAgg(fig)
    ax_map, ax_prof = fig.subplots(1, 2, gridspec_kw={"width_ratios": [1.0, 1.25]})
    im = ax_map.imshow(comp, cmap="cividis", vmin=lo, vmax=hi, extent=extent, interpolation="nearest")
    cb = fig.colorbar(im, ax=ax_map, shrink=0.85)
    cb.set_label(f"{column} (calibrated)")
    if mask.found:
        yy = (np.arange(inside.shape[0]) * f + (f - 1) / 2) * pixel_um
        xx = (np.arange(inside.shape[1]) * f + (f - 1) / 2) * pixel_um
        ax_map.contour(xx, yy, inside.astype(float), levels=[0.5], colors="white", linewidths=0.8)
    line = info.get("line")
    if line:
        xs = np.array([line["x0"], line["x1"]]) * pixel_um
        ys = np.array([line["y0"], line["y1"]]) * pixel_um
        ax_map.plot(xs, ys, color="black", lw=2.6)
        ax_map.plot(xs, ys, color="white", lw=1.0)
        ax_map.plot(xs[0], ys[0], marker="o", ms=6, mfc="white", mec="black")
        ax_map.annotate("rim end", (xs[0], ys[0]), xytext=(4, 4), textcoords="offset points", color="white",
                        fontsize=8)
        for b in info["boundaries"]:
            if b.get("x_px") is None:
                continue
            ax_map.plot(b["x_px"] * pixel_um, b["y_px"] * pixel_um, marker="D", ms=6, mfc="white", mec="black")
            if b.get("normal_xy") is not None:
                nx, ny = b["normal_xy"]
                span = 12 * pixel_um * max(1.0, mask.factor)
                tx, ty = -ny * span, nx * span
                cx, cy = b["x_px"] * pixel_um, b["y_px"] * pixel_um
                ax_map.plot([cx - tx, cx + tx], [cy - ty, cy + ty], color="white", lw=1.2, ls="--")
    ax_map.set_xlabel("x (µm)")
    ax_map.set_ylabel("y (µm)")
    title = info["image"]["channel"] + (f"/({info['image']['channel']}+{info['image']['ratio_with']})"
                                        if info["image"].get("ratio_with") else "")
    ax_map.set_title(f"{title} map calibrated to {column}", fontsize=10)

    d = profile["distance_um"].to_numpy()
    v = profile[column].to_numpy()
    sd = profile[f"{column}_sd"].to_numpy()
    ok = (profile["qc"] == "ok").to_numpy()
    ax_prof.fill_between(d, v - sd, v + sd, color="#9e9ac8", alpha=0.45, lw=0, label="±1 sd")
    ax_prof.plot(d[ok], v[ok], color="#252525", lw=1.0, label=column)
    if (~ok).any():
        ax_prof.plot(d[~ok], v[~ok], ls="none", marker="x", color="#636363", ms=4, label="flagged")
    for b in info["boundaries"]:
        ax_prof.axvline(b["position_um"], color="#525252", ls=":", lw=1)
        label = f"ψ {b['obliquity_deg']:.0f}°" if b.get("obliquity_deg") is not None else "ψ ?"
        if b.get("truncation", {}).get("truncated"):
            label += "\ncuts zones"
        ax_prof.annotate(label, (b["position_um"], 1.0), xycoords=("data", "axes fraction"),
                         xytext=(3, -4), textcoords="offset points", va="top", fontsize=8)
    ax_prof.set_xlabel("distance from rim (µm)" if info["mode"] == "rim-normal" else "distance from line start (µm)")
    ax_prof.set_ylabel(f"{column} (mol%)" if column in ("An", "Ab", "Or", "Fo") else column)
    cal = info["calibration"]
    ax_prof.set_title(
        f"{info['mode']} profile; calibration n = {cal['n']}, r² = {cal['r2']:.3f}, LOO rmse = {cal['loo_rmse']:.2f}",
        fontsize=10,
    )
    ax_prof.legend(loc="lower right", fontsize=8, frameon=False)
    if path is not None:
        import io

        from zoneprofile._output import write_bytes

        buf = io.BytesIO()
        ext = str(path).rsplit(".", 1)[-1].lower()
        fig.savefig(buf, format=ext if ext in ("png", "svg", "pdf") else "png", dpi=150)
        write_bytes(path, buf.getvalue())
    return fig
