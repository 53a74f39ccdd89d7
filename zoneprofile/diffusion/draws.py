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

__all__ = ["sample_seed", "shared_normals"]


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
