"""Shared random deviates, so that quantities drawn per sample are paired.

Every boundary of one sample is dated at the same magmatic temperature, so the
temperature deviate of Monte Carlo draw ``i`` must be the same for all of them
(and for every element and every crystal of the sample). Otherwise the
difference of two ages (the time between two recharges) carries the
temperature scatter twice instead of cancelling most of it.

Deviates come from a generator of their own, keyed by the sample's seed and
the name of the quantity, never from the generator a fit uses for its
bootstrap, so the same draw index means the same temperature whatever else a
fit did before.
"""

from __future__ import annotations

import hashlib

import numpy as np

__all__ = ["sample_seed", "shared_normals", "section_obliquity_deg", "DEFAULT_OBLIQUITY_SD_DEG", "MAX_OBLIQUITY_DEG"]

#: Default spread of the unknown angle between a traverse and the normal of the
#: boundary plane when no map measures it: the analyst aims each traverse
#: normal to the zoning seen in the section, but the boundary plane is cut at
#: an angle it cannot see. Half-normal with this sd, cut at MAX_OBLIQUITY_DEG
#: (common practice: aim for sections normal to zoning; the figures are the
#: project's stated default, switchable off, not a published distribution).
DEFAULT_OBLIQUITY_SD_DEG = 20.0
MAX_OBLIQUITY_DEG = 60.0


def sample_seed(campaign_seed: int, sample: str) -> int:
    """Seed of one sample's shared deviates, from the campaign seed and the sample name only."""
    text = f"{int(campaign_seed)}\x1fsample\x1f{sample}".encode("utf-8")
    return int.from_bytes(hashlib.sha256(text).digest()[:8], "big") >> 1


def shared_normals(seed: int, n: int, quantity: str = "temperature") -> np.ndarray:
    """``n`` standard normal deviates for ``quantity``, the same for every caller with ``seed``.

    The first ``m`` deviates do not depend on ``n``, so fits with different
    numbers of draws still share their common draws.
    """
    if n < 0:
        raise ValueError("n must be >= 0")
    key = int.from_bytes(hashlib.sha256(quantity.encode("utf-8")).digest()[:4], "big")
    rng = np.random.default_rng([int(seed) & (2**63 - 1), key])
    return rng.standard_normal(int(n))


def section_obliquity_deg(seed: int, n: int, *, sd_deg: float = DEFAULT_OBLIQUITY_SD_DEG,
                          max_deg: float = MAX_OBLIQUITY_DEG) -> np.ndarray:
    """``n`` draws of the unknown obliquity (degrees) of one traverse, shared by all its boundaries.

    A boundary cut at angle θ to its normal looks wider by 1/cos θ, so a time
    from the apparent profile is too long by 1/cos² θ; multiply a drawn time
    by ``cos(radians(θ))**2`` to correct it. ``seed`` is the crystal's (one
    traverse, one angle per draw index, whatever the element or boundary).
    """
    z = np.abs(shared_normals(seed, n, "section obliquity"))
    return np.minimum(z * float(sd_deg), float(max_deg))
