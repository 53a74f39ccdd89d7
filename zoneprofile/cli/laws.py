"""`zoneprofile laws` (being built)."""

from zoneprofile._validation import InputError

DESCRIPTION = "not available yet"


def configure(parser):
    pass


def run(args):
    raise InputError("'laws' is not available in this version yet")
