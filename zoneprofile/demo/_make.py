"""Write the invented demo campaign: inputs, campaign file, truth."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from zoneprofile._output import to_jsonable, write_bytes, write_text
from zoneprofile.demo._forward import FINE_UM, boundary_events, measure, true_an, true_trace
from zoneprofile.demo._story import EVENTS, MELTS, SAMPLES, VOLCANO, plan_crystals

__all__ = ["make_demo", "DEMO_SEED", "CAMPAIGN_NAME"]

DEMO_SEED = 20261
CAMPAIGN_NAME = "emberfell.toml"

EPMA_BEAM_UM = 3.0     # focused-ish electron beam, FWHM
LA_SPOT_UM = 5.0       # laser slit along the traverse, full width
LA_STEP_UM = 4.0
AN_SD = 0.35           # EPMA precision on An, mol% 1σ
MAP_PIXEL_UM = 2.0
MAP_PSI_DEG = 35.0     # angle between the map line and the boundaries' normal
ELEMENTS = ("Mg", "Sr")
# relative and absolute 1σ noise of trace analyses
NOISE = {
    "epma": {"Mg": (0.02, 5.0), "Sr": (0.015, 10.0)},
    "la": {"Mg": (0.025, 3.0), "Sr": (0.015, 5.0)},
}
_TIMES = {e["name"]: e["time_days"] for e in EVENTS}


def _noisy(rng, values, rel, absolute):
    v = np.asarray(values, dtype=float)
    return v + rng.normal(0.0, 1.0, v.shape) * np.hypot(rel * v, absolute)


def _profiles(plan, temperature_c, elements, *, psi_deg=0.0, start_depth_um=0.0, extra_um=0.0):
    """Fine-grid truth in the traverse's own frame (s along the traverse)."""
    cos = np.cos(np.deg2rad(psi_deg))
    length = float(plan["length_um"]) + extra_um
    depth = np.arange(0.0, length + start_depth_um + 10.0, FINE_UM)
    an = true_an(depth, plan)
    events = boundary_events(plan)
    times = [_TIMES[e] for e in events]
    trace = {el: true_trace(depth, plan, element=el, temperature_c=temperature_c, times_days=times)
             for el in elements}
    s = (depth - start_depth_um) / cos
    return s, depth, an, trace, events, times


def _epma_table(rng, plan, s_fine, an_fine, trace_fine, *, with_trace, elements):
    """Microprobe table (stage coordinates in mm) and the truth of its points."""
    import pandas as pd

    from zoneprofile.minerals import feldspar_oxides

    step = plan["spacing_um"]
    dist = np.arange(0.0, plan["length_um"] + 1e-9, step)
    an_meas = measure(s_fine, an_fine, dist, beam_um=EPMA_BEAM_UM, shape="gaussian")
    an_meas = an_meas + rng.normal(0.0, AN_SD, an_meas.shape)
    or_ = np.clip(0.4 + 0.03 * (80.0 - an_meas), 0.2, 3.0)
    ox = feldspar_oxides(np.clip(an_meas, 0.5, 99.0), or_=or_)
    feo = rng.uniform(0.38, 0.52) + rng.normal(0.0, 0.03, len(dist))
    scale = rng.normal(0.996, 0.003, len(dist)) * (100.0 - feo) / 100.0
    table = pd.DataFrame({"Point": [f"{plan['crystal']}-{k + 1:03d}" for k in range(len(dist))]})
    theta = rng.uniform(0.0, 2.0 * np.pi)
    x0, y0 = rng.uniform(5.0, 35.0), rng.uniform(5.0, 25.0)
    order = np.arange(len(dist)) if plan["rim"] == "start" else np.arange(len(dist))[::-1]
    along = dist[order]
    jitter = rng.normal(0.0, 0.25, len(dist))
    table["X (mm)"] = np.round(x0 + (along * np.cos(theta) - jitter * np.sin(theta)) / 1000.0, 5)
    table["Y (mm)"] = np.round(y0 + (along * np.sin(theta) + jitter * np.cos(theta)) / 1000.0, 5)
    comments = [""] * len(dist)
    oxides = {}
    for name in ("SiO2", "Al2O3", "FeO", "CaO", "Na2O", "K2O"):
        if name == "FeO":
            oxides[name] = feo
        else:
            oxides[name] = ox[name].to_numpy() * scale
    if plan.get("bad_point"):
        k = len(dist) // 3
        for name in oxides:
            oxides[name][k] *= 0.962
        comments[k] = "pit in the surface?"
    for name, values in oxides.items():
        table[name] = np.round(values[order], 3)
    table["Total"] = np.round(sum(oxides[n] for n in oxides)[order], 2)
    if with_trace:
        for el in elements:
            rel, absolute = NOISE["epma"][el]
            v = measure(s_fine, trace_fine[el], dist, beam_um=EPMA_BEAM_UM, shape="gaussian")
            table[f"{el} (ppm)"] = np.round(_noisy(rng, v, rel, absolute)[order], 1)
    table["Comment"] = [comments[k] for k in order]
    return table


def _la_table(rng, plan_id, s_fine, trace_fine, length_um, elements):
    import pandas as pd

    dist = np.arange(2.0, length_um + 1e-9, LA_STEP_UM)
    table = pd.DataFrame({"point": [f"{plan_id}-L{k + 1:03d}" for k in range(len(dist))], "distance_um": dist})
    for el in elements:
        rel, absolute = NOISE["la"][el]
        v = measure(s_fine, trace_fine[el], dist, beam_um=LA_SPOT_UM, shape="square")
        table[f"{el}_ppm"] = np.round(_noisy(rng, v, rel, absolute), 1)
    return table


def _map_inputs(rng, plan, temperature_c, elements):
    """A mapped crystal: Ca Kα map (TIFF counts), calibration spots, the line, an LA table along it."""
    import pandas as pd
    from scipy.ndimage import gaussian_filter

    pix = MAP_PIXEL_UM
    psi = np.deg2rad(MAP_PSI_DEG)
    line_len = float(np.ceil(plan["length_um"] / np.cos(psi)))
    b_um = np.ceil(line_len * np.cos(psi) + 40.0)           # half-lengths of the (rectangular) section
    a_um = b_um + 150.0
    alpha = np.deg2rad(rng.uniform(12.0, 28.0))
    cols = int(np.ceil((2 * a_um * np.cos(alpha) + 2 * b_um * np.sin(alpha)) / pix)) + 24
    rows = int(np.ceil((2 * a_um * np.sin(alpha) + 2 * b_um * np.cos(alpha)) / pix)) + 24
    cx, cy = cols * pix / 2.0, rows * pix / 2.0
    rot = np.array([[np.cos(alpha), -np.sin(alpha)], [np.sin(alpha), np.cos(alpha)]])

    def depth_at(x_um, y_um):
        u = rot.T @ np.vstack([np.ravel(x_um) - cx, np.ravel(y_um) - cy])
        d = np.minimum(a_um - np.abs(u[0]), b_um - np.abs(u[1]))
        return d.reshape(np.shape(x_um))

    yy, xx = np.mgrid[0:rows, 0:cols].astype(float) * pix
    depth = depth_at(xx, yy)
    an_map = np.where(depth > 0, true_an(np.clip(depth, 0, None), plan), 8.0)
    an_map = gaussian_filter(an_map, sigma=0.6)          # the electron beam on each pixel
    slope, intercept = 40.0, 500.0                         # counts per mol% An, background
    counts = rng.poisson(slope * an_map + intercept).astype(np.uint16)

    # the line: from just inside the long facet at u_y = -b, tilted by ψ
    start_depth = 1.0
    u0 = np.array([-60.0, -b_um + start_depth])
    direction = np.array([np.sin(psi), np.cos(psi)])
    p0 = rot @ u0 + [cx, cy]
    p1 = rot @ (u0 + line_len * direction) + [cx, cy]
    line = [round(float(p0[0] / pix), 2), round(float(p0[1] / pix), 2),
            round(float(p1[0] / pix), 2), round(float(p1[1] / pix), 2)]

    # spot analyses that calibrate the map: true An at random points inside
    spots = []
    while len(spots) < 14:
        x, y = rng.uniform(0, cols * pix), rng.uniform(0, rows * pix)
        d = float(depth_at(np.array([x]), np.array([y]))[0])
        if 6.0 < d < b_um - 10.0:
            an = float(true_an(np.array([d]), plan)[0]) + rng.normal(0.0, AN_SD)
            spots.append({"spot": f"S{len(spots) + 1:02d}", "x_px": round(x / pix, 2), "y_px": round(y / pix, 2),
                          "An": round(an, 2), "spot_um": 3.0})
    spots = pd.DataFrame(spots)

    # trace elements along the line (LA-ICP-MS), in the line's frame
    s_fine, depth_fine, an_fine, trace_fine, events, times = _profiles(
        plan, temperature_c, elements, psi_deg=MAP_PSI_DEG, start_depth_um=start_depth)
    la = _la_table(rng, plan["crystal"], s_fine, trace_fine, line_len - 4.0, elements)
    boundaries = [{"position_um": (d - start_depth) / np.cos(psi), "depth_um": d, "event": e, "time_days": t,
                   "obliquity_deg": MAP_PSI_DEG}
                  for d, e, t in zip(plan["depths_um"], events, times)]
    return counts, spots, line, la, boundaries, {"slope": slope, "intercept": intercept}


def _toml_str(text: str) -> str:
    return json.dumps(text, ensure_ascii=False)


def _campaign_text(entries, *, seed, draws, title, elements) -> str:
    lines = [
        "# zoneprofile campaign file: the invented demo.",
        "# Copy it and change the paths and numbers for your own crystals.",
        "# Every key is described in docs/run-a-campaign.md. Paths are relative to this file.",
        "# Run it with:  zoneprofile run " + CAMPAIGN_NAME + " --out results",
        "",
        f"title = {_toml_str(title)}",
        "comment = \"Invented data made by a seeded forward model; no real volcano, sample or person.\"",
        f"seed = {seed}            # campaign seed: each crystal's draws derive from it and the crystal id",
        f"draws = {draws}           # Monte Carlo draws per dated boundary",
        "",
        "[defaults]               # applies to every crystal unless its sample or its block says otherwise",
        "mineral = \"plagioclase\"",
        "model = \"crystal\"        # date all the boundaries of a crystal together (whole-crystal model);",
        "#                           \"boundary\" dates each boundary on its own",
        f"elements = [{_toml_str(elements[0])}]           # element(s) to date each boundary with",
        f"beam_um = {EPMA_BEAM_UM:g}              # microprobe beam diameter (µm, FWHM of a Gaussian)",
        f"trace_beam_um = {LA_SPOT_UM:g}        # laser spot width along the traverse (µm)",
        "trace_beam_shape = \"square\"",
        "boundaries = \"recharge\"  # date the recharge-like boundaries the zoning analysis finds",
        "section_obliquity = false  # these sections were cut normal to the zoning; leave it out (true) when",
        "#                           the angle is unknown and a stated default distribution is drawn",
        "# The tables also hold Sr. Sr diffuses about 20 times slower than Mg: add it with",
        "# elements = [\"Mg\", \"Sr\"] only where its profiles are wider than the beam (older boundaries).",
        "# laws = { Mg = \"...\" }  # override the default law per element ('zoneprofile laws' lists them)",
        "",
    ]
    for name, info in SAMPLES.items():
        if not any(e["sample"] == name for e in entries):
            continue
        lines += [
            f"[samples.{_toml_str(name)}]",
            f"temperature_c = {info['temperature_c']:g}      # storage temperature (°C)",
            f"temperature_sd_c = {info['temperature_sd_c']:g}     # its 1-sigma uncertainty (°C), propagated into the times",
            f"comment = {_toml_str(info['comment'])}",
            "",
        ]
    for e in entries:
        lines.append("[[crystals]]")
        lines.append(f"sample = {_toml_str(e['sample'])}")
        lines.append(f"id = {_toml_str(e['crystal'])}")
        for key in ("traverse", "trace", "map", "spots"):
            if key in e:
                lines.append(f"{key} = {_toml_str(e[key])}")
        if "line" in e:
            lines.append("line = [" + ", ".join(f"{v:g}" for v in e["line"]) + "]   # x0, y0, x1, y1 in pixels, rim first")
            lines.append(f"pixel_um = {MAP_PIXEL_UM:g}")
            lines.append("width_px = 5             # average 5 pixels across the line")
        if e.get("elements") and list(e["elements"]) != [elements[0]]:
            lines.append("elements = [" + ", ".join(_toml_str(x) for x in e["elements"])
                         + "]   # also date with Sr: slower diffusion, a check on the Mg times")
        if e.get("rim") == "end":
            lines.append("rim = \"end\"              # this traverse was measured from the core to the rim")
        lines.append("")
    return "\n".join(lines)


def make_demo(folder, *, seed: int = DEMO_SEED, n_crystals: int | None = None, draws: int = 1000,
              elements=ELEMENTS, only=None) -> dict:
    """Write the invented demo campaign into ``folder``.

    Parameters
    ----------
    folder : path-like
        Created if missing; files inside are overwritten.
    seed : int
        Seed of the forward model (and of the campaign).
    n_crystals : int, optional
        Default: the 7-crystal demo (2 samples, one mapped crystal). A number
        makes a larger campaign of that many crystals (benchmarks).
    draws : int
        Monte Carlo draws per boundary written into the campaign file.
    elements : sequence of str
        Elements to model (the first is dated by default).
    only : sequence of str, optional
        Crystal ids to keep (e.g. ``("p04",)``), for small test campaigns.

    Returns
    -------
    dict
        ``campaign`` (path of the TOML file), ``truth`` (path of truth.json),
        ``truth_data`` (the truth as a dict).
    """
    import tifffile

    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    plans = plan_crystals(rng, n_crystals)
    if only is not None:
        plans = [p for p in plans if p["crystal"] in set(only)]
    entries, truth_crystals = [], []
    for plan in plans:
        sample = plan["sample"]
        temperature = SAMPLES[sample]["temperature_c"]
        stem = f"{sample}_{plan['crystal']}"
        entry = {"sample": sample, "crystal": plan["crystal"], "rim": plan["rim"],
                 "elements": [e for e in plan.get("elements", elements[:1]) if e in elements]}
        if plan["kind"] == "map":
            counts, spots, line, la, boundaries, calib = _map_inputs(rng, plan, temperature, elements)
            buf = _tiff_bytes(tifffile, counts)
            write_bytes(folder / "maps" / f"{stem}_CaKa.tif", buf)
            write_text(folder / "maps" / f"{stem}_spots.csv", spots.to_csv(index=False, lineterminator="\n"))
            write_text(folder / "laser" / f"{stem}_line.csv", la.to_csv(index=False, lineterminator="\n"))
            entry.update({"map": f"maps/{stem}_CaKa.tif", "spots": f"maps/{stem}_spots.csv",
                          "trace": f"laser/{stem}_line.csv", "line": line})
            kind = {"kind": "map", "line": line, "map_calibration": calib, "pixel_um": MAP_PIXEL_UM}
        else:
            s, depth, an, trace, events, times = _profiles(plan, temperature, elements)
            combined = plan["kind"] == "combined"
            table = _epma_table(rng, plan, s, an, trace, with_trace=combined, elements=elements)
            write_text(folder / "microprobe" / f"{stem}.csv", table.to_csv(index=False, lineterminator="\n"))
            entry["traverse"] = f"microprobe/{stem}.csv"
            if not combined:
                la = _la_table(rng, plan["crystal"], s, trace, plan["length_um"] - 2.0, elements)
                write_text(folder / "laser" / f"{stem}.csv", la.to_csv(index=False, lineterminator="\n"))
                entry["trace"] = f"laser/{stem}.csv"
            boundaries = [{"position_um": d, "depth_um": d, "event": e, "time_days": t, "obliquity_deg": None}
                          for d, e, t in zip(plan["depths_um"], events, times)]
            kind = {"kind": plan["kind"]}
        entries.append(entry)
        truth_crystals.append({
            "sample": sample, "crystal": plan["crystal"], **kind, "rim": plan["rim"], "elements": entry["elements"],
            "temperature_c": temperature,
            "zones_core_first": plan["zones"],
            "boundaries": boundaries,
            "core_step_um": plan.get("core_step_um"),
            "bad_point": bool(plan.get("bad_point")),
        })
    title = f"{VOLCANO}: plagioclase recharge chronology (demo)"
    text = _campaign_text(entries, seed=seed, draws=draws, title=title, elements=elements)
    campaign = write_text(folder / CAMPAIGN_NAME, text)
    truth = {
        "note": "Invented data: the forward model's truth for the demo campaign.",
        "volcano": VOLCANO,
        "seed": seed,
        "events": list(EVENTS),
        "samples": SAMPLES,
        "melts_ppm": MELTS,
        "instruments": {"epma_beam_um": EPMA_BEAM_UM, "la_spot_um": LA_SPOT_UM, "an_sd": AN_SD,
                        "map_pixel_um": MAP_PIXEL_UM, "map_obliquity_deg": MAP_PSI_DEG},
        "crystals": truth_crystals,
    }
    truth_path = write_text(folder / "truth.json",
                            json.dumps(to_jsonable(truth), indent=2, ensure_ascii=False) + "\n")
    return {"campaign": campaign, "truth": truth_path, "truth_data": to_jsonable(truth)}


def _tiff_bytes(tifffile, image) -> bytes:
    import io

    buf = io.BytesIO()
    tifffile.imwrite(buf, image)
    return buf.getvalue()
