"""``zoneprofile laws``: list the diffusion laws and partition models."""

from __future__ import annotations

import json
import sys

DESCRIPTION = """\
List the diffusion laws zoneprofile knows, with their citation, how sure the
numbers are (CONFIRMED, SECONDARY, FROM MEMORY, USER), the calibrated ranges and
the default law for each element and mineral; then the plagioclase-melt
partition models.

Examples:
  zoneprofile laws
  zoneprofile laws costa2003-mg-plag        (one law in full, with its parameters)
  zoneprofile laws --element Sr --mineral plagioclase
  zoneprofile laws --law-file my_laws.toml --json
"""


def configure(parser):
    parser.add_argument("law", nargs="?", metavar="LAW", help="show only this law, with its parameters")
    parser.add_argument("--element", help="only laws for this element (Mg, Sr, Ba, FeMg, Ti)")
    parser.add_argument(
        "--mineral",
        help="only laws for this mineral (plagioclase, alkali-feldspar, olivine, clinopyroxene, quartz)",
    )
    parser.add_argument(
        "--law-file",
        metavar="TOML",
        help="also read user laws from this TOML file (checks the file and lists its laws)",
    )
    parser.add_argument("--json", action="store_true", help="print JSON instead of text")


def _range_text(law) -> str:
    parts = []
    if law.t_range_c is not None:
        lo, hi = law.t_range_c
        parts.append(f"{lo:g}–{hi:g} °C")
    labels = {"x_an": "X_An", "x_fe": "X_Fe"}
    for name, (lo, hi) in law.composition_range.items():
        parts.append(f"{labels.get(name, name)} {lo:g}–{hi:g}")
    if law.fo2_range_pa is not None:
        lo, hi = law.fo2_range_pa
        parts.append(f"fO2 {lo:g}–{hi:g} Pa" if lo else f"fO2 < {hi:g} Pa")
    return "; ".join(parts) if parts else "not verified (no range warnings)"


def _anisotropy_text(law) -> str:
    a = law.anisotropy
    if isinstance(a, dict):
        return (
            f"law along {a.get('law_direction')}; D[001]/D[100] = D[001]/D[010] = "
            f"{a.get('d001_over_d100'):g} ({a.get('source')})"
        )
    return a or "not known"


def run(args) -> int:
    from zoneprofile._validation import InputError
    from zoneprofile.diffusion.laws import DEFAULTS, LAWS, get_law, laws_for, load_user_laws
    from zoneprofile.diffusion.laws.registry import NO_DEFAULT, normalise_element, normalise_mineral
    from zoneprofile.diffusion.partition import PARTITION_MODELS

    user = []
    if args.law_file:
        user = load_user_laws(args.law_file)
        clash = [law.id for law in user if law.id in LAWS]
        if clash:
            message = f"law id '{clash[0]}' is already a known law; give your law another id"
            raise InputError(message, path=args.law_file)

    if args.law is not None:
        wanted = [law for law in user if law.id == args.law.strip().lower()]
        law = wanted[0] if wanted else get_law(args.law)
        if args.json:
            sys.stdout.write(json.dumps(law.to_dict(), indent=2, ensure_ascii=False) + "\n")
            return 0
        sys.stdout.write("\n".join(_law_lines(law, DEFAULTS, detail=True)) + "\n")
        return 0

    element = None if args.element is None else normalise_element(args.element)
    mineral = None if args.mineral is None else normalise_mineral(args.mineral)
    laws = laws_for(element, mineral) + [
        law
        for law in user
        if (element is None or law.element == element) and (mineral is None or law.mineral == mineral)
    ]
    if not laws:
        pairs = sorted({(law.element, law.mineral) for law in list(LAWS.values()) + user})
        what = " in ".join(x for x in (args.element, args.mineral) if x)
        message = f"no diffusion law for {what}; known pairs: " + ", ".join(f"{e} in {m}" for e, m in pairs)
        raise InputError(message)

    defaults = {law_id: pair for pair, law_id in DEFAULTS.items()}
    from zoneprofile.minerals.registry import REGISTRY as MINERAL_TABLE

    coupled = {(d.element, m.law_mineral) for m in MINERAL_TABLE for d in m.elements if d.needs_an}
    show_partition = any(element in (None, e) and mineral in (None, mi) for e, mi in coupled)
    models = list(PARTITION_MODELS.values()) if show_partition else []
    if element is not None:
        models = [m for m in models if element in m.elements]

    if args.json:
        doc = {
            "laws": [dict(law.to_dict(), default_for=_pair(defaults.get(law.id))) for law in laws],
            "defaults": [{"element": e, "mineral": m, "law": i} for (e, m), i in DEFAULTS.items()],
            "no_default": [{"element": e, "mineral": m, "reason": r} for (e, m), r in NO_DEFAULT.items()],
            "partition_models": [m.to_dict() for m in models],
        }
        sys.stdout.write(json.dumps(doc, indent=2, ensure_ascii=False) + "\n")
        return 0

    lines = [f"Diffusion laws ({len(laws)})", ""]
    for law in laws:
        lines.extend(_law_lines(law, DEFAULTS))
        lines.append("")
    for (e, m), reason in NO_DEFAULT.items():
        if (element in (None, e)) and (mineral in (None, m)):
            lines.append(f"No default for {e} in {m}: {reason}.")
            lines.append("")
    if models:
        lines.append(f"Plagioclase–melt partition models ({len(models)})")
        lines.append("")
        for model in models:
            lines.append(model.id + ("  [default]" if model.id == "bindeman1998" else ""))
            lines.append(f"  {model.formula}; status {model.status}")
            lines.append(_verified_line(model.id))
            for el in model.elements if hasattr(model, "parameters") else ():
                a, b = model.parameters(el)
                lines.append(f"  {el}: A = {a / 1e3:g} kJ/mol, B = {b / 1e3:g} kJ/mol")
            if model.x_an_range is not None:
                lines.append(f"  calibrated: X_An {model.x_an_range[0]:g}–{model.x_an_range[1]:g}")
            lines.append(f"  {model.citation}" + (f". doi:{model.doi}" if model.doi else ""))
            if model.notes:
                lines.append(f"  note: {model.notes}")
            lines.append("")
    sys.stdout.write("\n".join(lines).rstrip("\n") + "\n")
    return 0


def _verified_line(law_id) -> str:
    from zoneprofile.diffusion.laws.sources import verification

    word, text = verification(law_id)
    return f"  source seen: {word}" + (f" — {text}" if text else "")


def _law_lines(law, defaults, *, detail=False) -> list[str]:
    head = law.id
    for (e, m), law_id in defaults.items():
        if law_id == law.id:
            head += f"  [default for {e} in {m}]"
    lines = [head]
    lines.append(f"  {law.element} in {law.mineral} (measured on {law.phase or law.mineral}); status {law.status}")
    lines.append(_verified_line(law.id))
    lines.append(f"  {law.formula}")
    lines.append(f"  calibrated: {_range_text(law)}")
    if law.needs:
        lines.append(f"  needs: {', '.join(law.needs)}")
    lines.append(f"  anisotropy: {_anisotropy_text(law)}")
    if detail:
        lines.append("  parameters:")
        for name, (value, unit) in law.parameters.items():
            sd = law.parameter_sd.get(name)
            extra = f" ± {sd:g} (1σ)" if sd is not None else ""
            lines.append(f"    {name} = {value:.6g}{extra} {unit}")
        lines.append(f"  temperature-separable: {'yes' if law.temperature_separable else 'no'}")
    cite = law.citation + (f". doi:{law.doi}" if law.doi else "")
    lines.append(f"  {cite}")
    if law.notes:
        lines.append(f"  note: {law.notes}")
    return lines


def _pair(pair):
    if pair is None:
        return None
    return {"element": pair[0], "mineral": pair[1]}
