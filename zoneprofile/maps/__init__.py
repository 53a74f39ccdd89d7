"""Element maps: read, calibrate against spot analyses, segment the crystal,
extract profiles, measure boundary orientation and 2-D resorption evidence.

Images are indexed (row, col); positions are given as x = column, y = row, in
pixels, with pixel centres at integer coordinates.
"""

from zoneprofile.maps.calibration import Calibration, calibrate_map, read_spots, spot_signals
from zoneprofile.maps.extract import extract_profile
from zoneprofile.maps.mask import CrystalMask, crystal_mask
from zoneprofile.maps.orientation import apparent_width_factor, boundary_orientation, boundary_orientations
from zoneprofile.maps.profiles import line_profile, rim_normal_profile, sample_line
from zoneprofile.maps.readers import READERS, MapImage, read_map
from zoneprofile.maps.synthetic import synthetic_zoned_map
from zoneprofile.maps.truncation import truncation_evidence

__all__ = [
    "Calibration",
    "CrystalMask",
    "MapImage",
    "READERS",
    "apparent_width_factor",
    "boundary_orientation",
    "boundary_orientations",
    "calibrate_map",
    "crystal_mask",
    "extract_profile",
    "line_profile",
    "read_map",
    "read_spots",
    "rim_normal_profile",
    "sample_line",
    "spot_signals",
    "synthetic_zoned_map",
    "truncation_evidence",
]
