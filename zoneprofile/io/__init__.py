"""Reading tables into canonical forms (no chemistry here)."""

from zoneprofile.io.cells import Cell, parse_cell
from zoneprofile.io.columns import Column, classify, classify_header
from zoneprofile.io.microprobe import Analyses, read_analyses
from zoneprofile.io.profile import read_profile, read_text_table
from zoneprofile.io.synthetic import BAD_KINDS, DIALECTS, synthetic_traverse_table
from zoneprofile.io.tables import RawTable, read_raw_table, read_sheet_as_text

__all__ = [
    "read_profile",
    "read_text_table",
    "read_sheet_as_text",
    "read_raw_table",
    "RawTable",
    "read_analyses",
    "Analyses",
    "parse_cell",
    "Cell",
    "classify",
    "classify_header",
    "Column",
    "synthetic_traverse_table",
    "DIALECTS",
    "BAD_KINDS",
]
