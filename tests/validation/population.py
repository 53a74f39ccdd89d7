"""Write an invented plagioclase population with a known recharge history, as a campaign.

    python -m tests.validation.population --seed N --out DIR [--draws 1000] [--model boundary]

Writes ``DIR/validation.toml`` (a campaign the project's runner reads), the
microprobe and laser tables it names, and ``DIR/truth.json`` (true event ages,
per-crystal boundary positions and ages, the gaps between them, temperatures,
obliquities). Everything is invented: an invented volcano, seeded draws.

The story (per seed): a resident magma and three recharges, about 400, 80 and 7
days before the eruption (each age jittered by a log-normal factor, σ = 0.15 in
ln). About 18 crystals in 2–3 samples; each records two or three of the
recharges as reverse (An-up) steps, successive boundaries 30–110 µm apart, and
the crystals that saw the last recharge carry a young boundary 10–16 µm below
the rim. Mg and Sr are measured by laser (square spot, its width convolved),
An by microprobe (Gaussian beam), with analytical noise; each traverse crosses
the boundaries at an angle drawn as in a real session and written into the
campaign as a measured obliquity (with a measurement error).
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

import numpy as np

from . import physics

VOLCANO = "Velmorra Rise (an invented volcano)"
CAMPAIGN_NAME = "validation.toml"
ELEMENTS = ("Mg", "Sr")
EVENT_AGES_DAYS = (400.0, 80.0, 7.0)       # nominal, oldest first
FINE_UM = 0.25                              # cell width of the forward model
EPMA_BEAM_UM = 3.0                          # stated FWHM of the electron beam
EPMA_STEP_UM = 2.0
LA_SPOT_UM = 5.0                            # stated full width of the laser spot along the traverse
LA_STEP_UM = 2.5
AN_SD = 0.35                                # microprobe An, mol% 1σ
# relative and absolute 1σ of laser analyses (common practice for LA-ICP-MS at ppm levels)
LA_NOISE = {"Mg": (0.025, 3.0), "Sr": (0.015, 5.0)}
# patterns of recharges recorded (1 = oldest); most crystals record all three
PATTERNS = ((1, 2, 3), (1, 2, 3), (1, 2), (1, 2, 3), (2, 3), (1, 2), (1, 2, 3), (1, 3), (1, 2, 3))


# --------------------------------------------------------------------------- the story
def _story(rng):
    ages = [a * float(np.exp(rng.normal(0.0, 0.15))) for a in EVENT_AGES_DAYS]
    melts = {"Mg": [rng.uniform(11000, 14000)], "Sr": [rng.uniform(390, 430)]}
    for _ in ages:
        melts["Mg"].append(melts["Mg"][-1] * rng.uniform(1.35, 1.7))
        melts["Sr"].append(melts["Sr"][-1] * rng.uniform(1.08, 1.18))
    n_samples = int(rng.integers(2, 4))
    names = [f"AR-{chr(ord('A') + j)}" for j in range(n_samples)]
    samples = {}
    for name in names:
        stated = float(np.round(rng.uniform(975.0, 1015.0)))
        true = float(stated + np.clip(rng.normal(0.0, 8.0), -15.0, 15.0))
        samples[name] = {"temperature_c": stated, "temperature_sd_c": 15.0, "true_temperature_c": true}
    return ages, melts, samples


def _plan_crystal(rng, events):
    """Zones (core first) and boundary depths (µm below the rim, oldest first)."""
    n = len(events)
    depths = []
    if events[-1] == 3:
        young = rng.uniform(10.0, 16.0)
    else:
        young = rng.uniform(30.0, 60.0)
    depths = [young]
    for _ in range(n - 1):
        depths.append(depths[-1] + rng.uniform(30.0, 110.0))
    depths = [float(np.round(d / FINE_UM) * FINE_UM) for d in depths[::-1]]   # oldest (deepest) first
    core = rng.uniform(50.0, 58.0)
    zones = [{"an_inner": core + rng.uniform(1.0, 3.0), "an_outer": core}]  # inner = deeper side
    for j in range(n):
        # each recharge is a reverse step of 7–11 mol% An above the zone it grew on (An at most 90);
        # inside a zone, normal zoning outward at 0.05–0.6 mol% per µm (log-uniform), at most 5–9 mol%:
        # a thin young rim zone may fall back steeply after its step, or hardly at all
        top = min(zones[-1]["an_outer"] + rng.uniform(7.0, 11.0), 90.0) if j else rng.uniform(68.0, 74.0)
        if top - zones[-1]["an_outer"] < 7.0:
            zones[-1]["an_outer"] = top - rng.uniform(7.0, 9.0)
        width = depths[j] - (depths[j + 1] if j + 1 < n else 0.0)
        rate = float(np.exp(rng.uniform(np.log(0.05), np.log(0.6))))
        zones.append({"an_inner": top, "an_outer": top - min(rate * width, rng.uniform(5.0, 9.0))})
    return zones, depths


def _an_profile(z, zones, depths, centre_um):
    edges = [centre_um, *depths, 0.0]            # deepest first
    an = np.empty_like(z)
    for j, zone in enumerate(zones):
        lo, hi = edges[j + 1], edges[j]          # zone j spans depths [lo, hi)
        inside = (z >= lo) & (z < hi) if j else z >= lo
        frac = np.clip((z[inside] - lo) / (hi - lo), 0.0, 1.0)
        an[inside] = zone["an_outer"] + (zone["an_inner"] - zone["an_outer"]) * frac
    return an


# --------------------------------------------------------------------------- analyses
_MOLAR = None


def _oxides_from_an(an, or_):
    """wt% oxides of a plagioclase An–Ab–Or (mol%) mixture, by stoichiometry (periodictable masses)."""
    global _MOLAR
    if _MOLAR is None:
        import periodictable

        _MOLAR = {ox: float(periodictable.formula(ox).mass) for ox in ("SiO2", "Al2O3", "CaO", "Na2O", "K2O")}
    an, or_ = np.asarray(an, float) / 100.0, np.asarray(or_, float) / 100.0
    ab = 1.0 - an - or_
    # moles of oxide per mole of feldspar: An CaAl2Si2O8, Ab NaAlSi3O8, Or KAlSi3O8
    mol = {"SiO2": 2 * an + 3 * ab + 3 * or_, "Al2O3": an + 0.5 * ab + 0.5 * or_,
           "CaO": an, "Na2O": 0.5 * ab, "K2O": 0.5 * or_}
    mass = {ox: mol[ox] * _MOLAR[ox] for ox in mol}
    total = sum(mass.values())
    return {ox: 100.0 * m / total for ox, m in mass.items()}


def _noisy(rng, v, rel, absolute):
    return v + rng.normal(0.0, 1.0, v.shape) * np.hypot(rel * v, absolute)


def _obliquity(rng):
    """True angle between the traverse and the boundary normal, and the one the analyst writes down."""
    true = float(min(abs(rng.normal(0.0, 15.0)), 40.0))
    measured = float(np.clip(np.round(true + rng.normal(0.0, 2.0)), 0.0, 85.0))
    return true, measured


def make_population(folder, *, seed: int, draws: int = 1000, model: str | None = None,
                    n_crystals: int = 18) -> dict:
    """Write the campaign and truth.json into ``folder``; return the truth as a dict."""
    import pandas as pd

    folder = Path(folder)
    rng = np.random.default_rng(seed)
    ages, melts, samples = _story(rng)
    names = list(samples)
    patterns = [PATTERNS[k % len(PATTERNS)] for k in rng.permutation(n_crystals)]
    entries, truth_crystals = [], []
    for c, events in enumerate(patterns):
        sample = names[c % len(names)]
        crystal = f"c{c + 1:02d}"
        temperature = samples[sample]["true_temperature_c"]
        zones, depths = _plan_crystal(rng, events)
        psi_true, psi_meas = _obliquity(rng)
        cos = np.cos(np.deg2rad(psi_true))
        reach_um = depths[0] + 140.0                      # the traverse goes 140 µm past the oldest boundary
        centre_um = reach_um + rng.uniform(40.0, 120.0)   # the crystal's centre (closed end of the model)
        n_cells = int(round(centre_um / FINE_UM))
        edges = np.arange(n_cells + 1) * FINE_UM
        z = 0.5 * (edges[:-1] + edges[1:])
        an = _an_profile(z, zones, depths, centre_um)
        boundary_cells = [int(round(d / FINE_UM)) for d in depths]
        stage_ages = [ages[e - 1] for e in events]
        durations = [a - b for a, b in zip(stage_ages, stage_ages[1:] + [0.0])]
        conc = {}
        for el in ELEMENTS:
            stage_melts = [melts[el][0]] + [melts[el][e] for e in events]
            conc[el] = physics.grow_and_diffuse(edges, an, boundary_cells, stage_melts, durations,
                                                element=el, temperature_c=temperature)
        s = z / cos                                         # position along the traverse
        length = reach_um / cos
        # microprobe: An (oxides) on a Gaussian beam
        beam = EPMA_BEAM_UM * rng.uniform(0.9, 1.1)
        dist = np.arange(0.0, length + 1e-9, EPMA_STEP_UM)
        an_meas = physics.measure(s, an, dist, width_um=beam, shape="gaussian") + rng.normal(0.0, AN_SD, dist.size)
        or_ = np.clip(0.4 + 0.03 * (80.0 - an_meas), 0.2, 3.0)
        ox = _oxides_from_an(np.clip(an_meas, 0.5, 99.0), or_)
        feo = rng.uniform(0.35, 0.55) + rng.normal(0.0, 0.03, dist.size)
        scale = rng.normal(0.997, 0.004, dist.size) * (100.0 - feo) / 100.0
        rim = "start" if rng.random() < 0.7 else "end"
        order = np.arange(dist.size) if rim == "start" else np.arange(dist.size)[::-1]
        theta = rng.uniform(0.0, 2.0 * np.pi)
        x0, y0 = rng.uniform(5.0, 35.0), rng.uniform(5.0, 25.0)
        along = dist[order]
        jitter = rng.normal(0.0, 0.25, dist.size)
        table = pd.DataFrame({"Point": [f"{crystal}-{k + 1:03d}" for k in range(dist.size)]})
        table["X (mm)"] = np.round(x0 + (along * np.cos(theta) - jitter * np.sin(theta)) / 1000.0, 5)
        table["Y (mm)"] = np.round(y0 + (along * np.sin(theta) + jitter * np.cos(theta)) / 1000.0, 5)
        columns = {"SiO2": ox["SiO2"] * scale, "Al2O3": ox["Al2O3"] * scale, "FeO": feo,
                   "CaO": ox["CaO"] * scale, "Na2O": ox["Na2O"] * scale, "K2O": ox["K2O"] * scale}
        for name, values in columns.items():
            table[name] = np.round(values[order], 3)
        table["Total"] = np.round(sum(columns.values())[order], 2)
        # laser: Mg and Sr on a square spot
        spot = LA_SPOT_UM * rng.uniform(0.95, 1.05)
        la_at = np.arange(LA_STEP_UM, length - 2.0 + 1e-9, LA_STEP_UM)
        la = pd.DataFrame({"point": [f"{crystal}-L{k + 1:03d}" for k in range(la_at.size)],
                           "distance_um": np.round(la_at, 2)})
        for el in ELEMENTS:
            v = physics.measure(s, conc[el], la_at, width_um=spot, shape="square")
            la[f"{el}_ppm"] = np.round(_noisy(rng, v, *LA_NOISE[el]), 1)
        stem = f"{sample}_{crystal}"
        (folder / "microprobe").mkdir(parents=True, exist_ok=True)
        (folder / "laser").mkdir(parents=True, exist_ok=True)
        table.to_csv(folder / "microprobe" / f"{stem}.csv", index=False, lineterminator="\n")
        la.to_csv(folder / "laser" / f"{stem}.csv", index=False, lineterminator="\n")
        entries.append({"sample": sample, "crystal": crystal, "traverse": f"microprobe/{stem}.csv",
                        "trace": f"laser/{stem}.csv", "rim": rim, "obliquity_deg": psi_meas})
        bounds = [{"id": f"B{j + 1}", "event": f"E{e}", "age_days": ages[e - 1], "depth_um": d,
                   "position_um": d / cos,
                   "an_step": zones[j + 1]["an_inner"] - zones[j]["an_outer"]}
                  for j, (e, d) in enumerate(zip(events, depths))]
        gaps = [{"older": bounds[j]["id"], "younger": bounds[j + 1]["id"],
                 "days": bounds[j]["age_days"] - bounds[j + 1]["age_days"]} for j in range(len(bounds) - 1)]
        truth_crystals.append({
            "sample": sample, "crystal": crystal, "rim": rim, "temperature_c": temperature,
            "obliquity_deg": psi_true, "obliquity_written_deg": psi_meas,
            "epma_beam_um": beam, "la_spot_um": spot, "boundaries": bounds, "gaps": gaps,
        })
    (folder / CAMPAIGN_NAME).write_text(_campaign_text(entries, samples, seed=seed, draws=draws, model=model),
                                        encoding="utf-8")
    truth = {
        "note": "Invented population: the truth of the validation forward model (tests/validation).",
        "volcano": VOLCANO, "seed": seed,
        "events": [{"id": f"E{j + 1}", "age_days": a} for j, a in enumerate(ages)],
        "melts_ppm": melts, "samples": samples,
        "instruments": {"epma_beam_um": EPMA_BEAM_UM, "la_spot_um": LA_SPOT_UM, "an_sd": AN_SD,
                        "la_noise": LA_NOISE},
        "crystals": truth_crystals,
    }
    (folder / "truth.json").write_text(json.dumps(truth, indent=2) + "\n", encoding="utf-8")
    return truth


def _campaign_text(entries, samples, *, seed, draws, model) -> str:
    q = json.dumps
    lines = [
        "# Validation population: invented data from tests/validation (see docs/validation.md).",
        f"title = {q('Validation population, seed ' + str(seed))}",
        "comment = \"Invented data made by an independent seeded forward model.\"",
        f"seed = {seed}",
        f"draws = {draws}",
        "",
        "[defaults]",
    ]
    if model is not None:
        lines.append(f"model = {q(model)}")
    lines += [
        "mineral = \"plagioclase\"",
        "elements = [\"Mg\", \"Sr\"]",
        f"beam_um = {EPMA_BEAM_UM:g}",
        f"trace_beam_um = {LA_SPOT_UM:g}",
        "trace_beam_shape = \"square\"",
        "boundaries = \"recharge\"",
        "",
    ]
    for name, info in samples.items():
        lines += [f"[samples.{q(name)}]", f"temperature_c = {info['temperature_c']:g}",
                  f"temperature_sd_c = {info['temperature_sd_c']:g}", ""]
    for e in entries:
        lines += ["[[crystals]]", f"sample = {q(e['sample'])}", f"id = {q(e['crystal'])}",
                  f"traverse = {q(e['traverse'])}", f"trace = {q(e['trace'])}"]
        if e["rim"] == "end":
            lines.append("rim = \"end\"")
        lines.append(f"obliquity_deg = {e['obliquity_deg']:g}")
        lines.append("")
    return "\n".join(lines)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(prog="python -m tests.validation.population",
                                     description="Write an invented population with a known recharge history.")
    parser.add_argument("--seed", type=int, required=True)
    parser.add_argument("--out", required=True)
    parser.add_argument("--draws", type=int, default=1000)
    parser.add_argument("--crystals", type=int, default=18)
    parser.add_argument("--model", choices=("boundary", "crystal"), default=None,
                        help="the campaign setting 'model', written into [defaults] (omitted: the runner's default)")
    parser.add_argument("--force", action="store_true", help="write into a folder that is not empty")
    args = parser.parse_args(argv)
    out = Path(args.out)
    if out.exists() and any(out.iterdir()) and not args.force:
        print(f"population: {out} exists and is not empty (use --force)", file=sys.stderr)
        return 2
    out.mkdir(parents=True, exist_ok=True)
    truth = make_population(out, seed=args.seed, draws=args.draws, model=args.model, n_crystals=args.crystals)
    n_b = sum(len(c["boundaries"]) for c in truth["crystals"])
    print(f"wrote {out / CAMPAIGN_NAME}: {len(truth['crystals'])} crystals, {n_b} boundaries, events "
          + ", ".join(f"{e['id']} {e['age_days']:.1f} d" for e in truth["events"]))
    return 0


if __name__ == "__main__":
    sys.exit(main())
