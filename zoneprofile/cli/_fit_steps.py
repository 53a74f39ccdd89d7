"""Which steps ``zoneprofile fit`` dates when no ``--boundary-um`` is given.

As a campaign does (:func:`zoneprofile.campaign._boundaries.select_boundaries`
with ``boundaries = "recharge"``): the zoning analysis
(:func:`zoneprofile.zoning.analyse_zoning`) reads the profile's steps, every
recharge-like step is dated (its position refined within the window a
campaign gives it, :func:`~zoneprofile.campaign._boundaries.position_window`),
and every other step keeps its neighbours out of each fit's window and is
listed as left undated. When the zoning finds no recharge-like step the fit
dates the largest step as before and says so, naming the other steps.

The zoning is read on An (with the element's column as evidence for the
recharge fingerprint) when An is in the same table, else on the fitted column
itself (Fo, Mg#, Ti: a reverse step there is recharge-like, as in campaigns).
"""

from __future__ import annotations

import numpy as np

__all__ = ["StepPlan", "left_after", "plan_steps", "run_several", "undated_note"]


class StepPlan:
    """Boundaries to date ``[(position or None, window or None)]``, all step positions, notes."""

    def __init__(self, dated, positions, notes, steps):
        self.dated = dated
        self.positions = positions
        self.notes = notes
        self.steps = steps  # every step the zoning found: [{position_um, kind, recharge, ...}]


def _describe(step) -> str:
    kind = step.get("kind") or "step"
    rech = step.get("recharge")
    extra = f", {rech}" if rech and rech != "recharge-like" else ""
    return f"{float(step['position_um']):.1f} µm ({kind}{extra})"


def plan_steps(distance, values, *, mineral, value_name, an=None, an_aligned=False, temperature_c=None,
               window_um=None) -> StepPlan:
    """Plan the fits of a profile without ``--boundary-um`` (see the module text)."""
    import pandas as pd

    from zoneprofile.campaign._boundaries import match_position, position_window, select_boundaries
    from zoneprofile.zoning.analyse import MIN_POINTS, analyse_zoning

    x = np.asarray(distance, float)
    if x.size < MIN_POINTS:
        return StepPlan([(None, window_um)], [], [
            f"{x.size} points are too few for the zoning analysis ({MIN_POINTS} needed): the largest step is "
            "dated; give --boundary-um to choose"], [])
    if an is not None and an_aligned and mineral in ("plagioclase", "alkali-feldspar"):
        zres = analyse_zoning(x, np.asarray(an, float), column="An",
                              extra=pd.DataFrame({value_name: np.asarray(values, float)}),
                              temperature_c=temperature_c)
    else:
        zres = analyse_zoning(x, np.asarray(values, float), column=value_name, temperature_c=temperature_c)
    zones = zres.to_dict()
    steps = list(zones.get("steps") or [])
    chosen, _ = select_boundaries(zones, "recharge", mineral)
    positions = sorted(float(s["position_um"]) for s in steps)
    if not chosen:
        note = None
        if steps:
            note = ("the zoning analysis found no recharge-like step: the largest step was dated; "
                    "give --boundary-um X [X ...] to choose")
        return StepPlan([(None, window_um)], positions, [note] if note else [], steps)
    dated = [(b["position_um"], position_window(b, window_um)) for b in chosen]
    chosen_x = [b["position_um"] for b in chosen]
    left = [s for s in steps if match_position(float(s["position_um"]), chosen_x) is None]
    notes = [f"without --boundary-um the recharge-like step(s) found by the zoning analysis were dated: "
             + ", ".join(f"{p:.1f} µm" for p in chosen_x)]
    if left:
        notes.append(undated_note(left))
    return StepPlan(dated, positions, notes, steps)


def undated_note(steps) -> str:
    """Warning listing the steps left undated, with the remedy."""
    return ("step(s) left undated: " + ", ".join(_describe(s) for s in steps)
            + "; give --boundary-um X [X ...] to date them")


def left_after(plan: StepPlan, dated_um) -> str | None:
    """For a plan that let the fit choose its step: the steps other than the one dated, as a note."""
    from zoneprofile.campaign._boundaries import match_position

    left = [s for s in plan.steps if match_position(float(s["position_um"]), list(dated_um),
                                                    sd=s.get("position_sd_um")) is None]
    return undated_note(left) if left else None


def run_several(args, names, run_single) -> int:
    """``fit --element Mg,Sr`` without ``--crystal``: each element fitted on its own, then compared.

    Where two elements date the same boundary and their 95 % intervals are
    apart, a growth-vs-diffusion warning (:func:`zoneprofile.diffusion._checks.element_disagreement`)
    is added once, to the first of the two fits, and to FIT.json ``warnings``.
    """
    import copy

    from zoneprofile._output import write_json
    from zoneprofile._validation import InputError
    from zoneprofile.campaign._boundaries import MATCH_UM
    from zoneprofile.diffusion._checks import element_disagreement
    from zoneprofile.diffusion.laws import normalise_element

    if len({normalise_element(n) for n in names}) < len(names):
        raise InputError(f"--element lists an element twice ({args.element})")
    if args.plot is not None:
        raise InputError("--plot draws one element; give one --element for a figure (or use --crystal)")
    collected = []
    for name in names:
        one = copy.copy(args)
        one.element = name
        run_single(one, _collect=collected)
    fits = [f for group, _ in collected for f in group]
    notes = element_disagreement(fits)
    for note in notes:
        x = float(note.split(" at ", 1)[1].split(" µm", 1)[0])
        for f in fits:  # once: the first fit of the pair, in --element order
            if abs(float(f.position_um) - x) <= MATCH_UM + 0.05 and f.element in note:
                f.warnings.append(note)
                break
    from zoneprofile.cli._fit_notes import print_shared, take_shared

    shared = take_shared(fits)  # run-level notes once (cli/_fit_notes.py)
    document = collected[0][1]
    document["fits"] = [f.to_dict() for f in fits]
    document["input"]["value_column"] = [d["input"]["value_column"] for _, d in collected]
    document["input"]["options"]["element"] = args.element
    document["warnings"] = shared + [n for n in notes if n not in shared]
    write_json(args.output, document)
    print_shared(shared)
    for f in fits:
        print(f.report())
    return 0
