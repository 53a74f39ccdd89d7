"""Reading tables into canonical forms (no chemistry here)."""

from zoneprofile.io.profile import read_profile, read_text_table

__all__ = ["read_profile", "read_text_table"]
