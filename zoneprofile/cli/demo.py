"""`zoneprofile demo` (being built)."""

from zoneprofile._validation import InputError

DESCRIPTION = "not available yet"


def configure(parser):
    pass


def run(args):
    raise InputError("'demo' is not available in this version yet")
