"""zoneprofile: composition profiles, zoning and diffusion timescales of zoned crystals.

The stages live in sub-packages (``io``, ``minerals``, ``maps``, ``zoning``,
``diffusion``, ``report``); import from those or from here.
"""

from importlib.metadata import PackageNotFoundError, version as _version

try:
    __version__ = _version("zoneprofile")
except PackageNotFoundError:  # running from a source tree without install
    __version__ = "0.0.0+unknown"

from zoneprofile._validation import InputError

__all__ = ["InputError", "__version__"]
