"""Notes that hold for every fit of one ``fit`` run, said once.

Run-level notes (how the table was read, censored analyses left out, stated
defaults of the uncertainty budget, the steps found) are the same for every
boundary and element of one run. With several fits they move from each fit's
``warnings`` to FIT.json's top-level ``warnings`` and are printed once, before
the fits; a note that concerns one fit only stays with that fit.
"""

from __future__ import annotations

__all__ = ["take_shared", "print_shared"]


def take_shared(fits) -> list[str]:
    """Remove the warnings every fit carries from each fit and return them once, in order."""
    if len(fits) < 2:
        return []
    shared = [w for w in dict.fromkeys(fits[0].warnings) if all(w in f.warnings for f in fits[1:])]
    if shared:
        common = set(shared)
        for f in fits:
            f.warnings = [w for w in f.warnings if w not in common]
    return shared


def print_shared(shared) -> None:
    """Print the run's shared notes once (nothing when there are none)."""
    if shared:
        print("Notes for every fit of this run:")
        for w in shared:
            print(f"  warning: {w}")
