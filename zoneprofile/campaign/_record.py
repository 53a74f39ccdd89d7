"""The crystal record's layout, as the campaign's cache uses it.

The record and its parts are declared, and checked, in :mod:`zoneprofile._records`
(one module, which the report reads too without importing the campaign); this
module names what the cache needs.
"""

from zoneprofile._records import CrystalRecord, valid_record

__all__ = ["CrystalRecord", "valid_record"]
