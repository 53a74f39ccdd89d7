"""The invented demo campaign, made by a seeded forward model.

:func:`make_demo` writes an invented volcano's campaign into a folder: two
samples, seven plagioclase crystals (microprobe traverses with Mg and Sr, laser
traverses, one mapped crystal), two recharge events with known times, the
campaign file with comments, and ``truth.json`` holding what the generator
planted. ``zoneprofile demo`` writes it and runs it.
"""

from zoneprofile.demo._make import CAMPAIGN_NAME, DEMO_SEED, make_demo
from zoneprofile.demo._story import EVENTS, SAMPLES, VOLCANO

__all__ = ["make_demo", "DEMO_SEED", "CAMPAIGN_NAME", "EVENTS", "SAMPLES", "VOLCANO"]
