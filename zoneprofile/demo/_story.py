"""The invented demo volcano: its samples, crystals and two recharge events.

Everything here is made up. "Emberfell" is an invented stratovolcano; its
samples and crystals are labels, not real specimens. The numbers are chosen to
look like a basaltic-andesite system with plagioclase that records two
recharges of hotter, Mg-richer magma before an eruption.
"""

from __future__ import annotations

import numpy as np

__all__ = ["VOLCANO", "EVENTS", "SAMPLES", "MELTS", "plan_crystals"]

VOLCANO = "Emberfell (an invented volcano)"

#: The two recharge events, as days before the eruption (true times).
EVENTS = (
    {"name": "recharge 1", "time_days": 180.0},
    {"name": "recharge 2", "time_days": 15.0},
)

#: Sample -> true storage temperature (°C), the ±1σ the campaign states, a note.
SAMPLES = {
    "EF-A": {"temperature_c": 1000.0, "temperature_sd_c": 15.0,
             "comment": "scoria from the first phase of the invented eruption"},
    "EF-B": {"temperature_c": 985.0, "temperature_sd_c": 15.0,
             "comment": "dense lava clast from the second phase"},
}

#: Melt concentrations (ppm) the zones grew from: the resident magma, then each recharge.
MELTS = {
    "resident": {"Mg": 12000.0, "Sr": 420.0},
    "recharge 1": {"Mg": 30000.0, "Sr": 520.0},
    "recharge 2": {"Mg": 45000.0, "Sr": 560.0},
}

# The hand-made demo: 7 crystals over 2 samples, one of them mapped.
# events: which recharges the crystal recorded; kind: how it was analysed.
_DEMO = (
    {"sample": "EF-A", "crystal": "p01", "events": (1, 2), "kind": "combined", "rim": "start"},
    {"sample": "EF-A", "crystal": "p02", "events": (1, 2), "kind": "combined", "rim": "end",
     "core_step": True},
    {"sample": "EF-A", "crystal": "p03", "events": (1, 2), "kind": "separate", "rim": "start"},
    {"sample": "EF-A", "crystal": "p04", "events": (2,), "kind": "combined", "rim": "start", "bad_point": True},
    {"sample": "EF-B", "crystal": "p05", "events": (1, 2), "kind": "separate", "rim": "start"},
    {"sample": "EF-B", "crystal": "p06", "events": (1,), "kind": "combined", "rim": "start"},
    {"sample": "EF-B", "crystal": "m07", "events": (1, 2), "kind": "map", "rim": "start"},
)


def _levels(rng, events):
    """True An (mol%) of each zone, core first, and the depths (µm) of the boundaries."""
    core = rng.uniform(52.0, 57.0)
    zones = [{"melt": "resident", "an_inner": core, "an_outer": core - rng.uniform(0.0, 2.0)}]
    depths = []
    if 1 in events:
        top = rng.uniform(71.0, 74.0)
        zones.append({"melt": "recharge 1", "an_inner": top, "an_outer": top - rng.uniform(4.0, 6.0)})
    if 2 in events:
        top = rng.uniform(75.5, 78.0)
        zones.append({"melt": "recharge 2", "an_inner": top, "an_outer": top - rng.uniform(2.0, 3.0)})
    # boundary depths below the rim, outermost first; far enough apart that the
    # Mg profiles of the two boundaries do not touch
    if len(zones) == 3:
        outer = rng.uniform(28.0, 36.0)
        depths = [outer, outer + rng.uniform(110.0, 125.0)]
    else:
        depths = [rng.uniform(40.0, 70.0)]
    return zones, depths


def plan_crystals(rng: np.random.Generator, n_crystals: int | None = None) -> list[dict]:
    """Plans of the crystals to generate.

    ``n_crystals=None`` gives the 7-crystal demo; a number gives that many
    crystals (for benchmarks), cycling through the demo's kinds and samples.
    """
    base = list(_DEMO)
    if n_crystals is None:
        chosen = base
    else:
        chosen = []
        for k in range(int(n_crystals)):
            proto = dict(base[k % len(base)])
            proto["crystal"] = f"x{k + 1:03d}"
            chosen.append(proto)
    plans = []
    for proto in chosen:
        plan = dict(proto)
        zones, depths = _levels(rng, plan["events"])
        plan["zones"] = zones
        plan["depths_um"] = depths
        plan["spacing_um"] = 2.0
        deepest = depths[-1]
        # Mg diffuses fast in the An-poor core: the traverse reaches 140 µm past the deepest boundary
        plan["length_um"] = float(np.ceil((deepest + 140.0) / 2.0) * 2.0)
        if plan.get("core_step"):
            # an older normal step in the core (not a recharge): not dated by default
            plan["core_step_um"] = deepest + 140.0
            plan["length_um"] += 60.0
        plans.append(plan)
    return plans
