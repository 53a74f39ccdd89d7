"""Reading the zoning architecture of a crystal from a composition profile.

Steps (growth boundaries), continuous zoning, oscillatory bands, resorption
surfaces, mantles and species changes, melt equivalents with recharge
fingerprints and mixing fractions, and the zone stratigraphy, from a profile
measured from the rim (0) toward the core. One method per module:

========================  ==============================================
``noise``                 analytical noise from the profile itself
``steps``                 penalised segmentation + local jump tests
``trends``                continuous zoning within a zone
``oscillatory``           sliding sine scan + Lomb–Scargle bands
``resorption``            resorption surfaces and their evidence
``species``               feldspar species, mantles
``melt``                  melt equivalents, recharge fingerprint, mixing
``stratigraphy``          zones core → rim
``synthetic``             seeded profiles with their ground truth
``analyse``               everything in turn: :func:`analyse_zoning`
``plot``                  the zoning figure
========================  ==============================================
"""

from zoneprofile.zoning.analyse import ZoningResult, analyse_zoning
from zoneprofile.zoning.melt import melt_equivalents, mixing_fraction, recharge_fingerprint
from zoneprofile.zoning.noise import estimate_noise_sd
from zoneprofile.zoning.oscillatory import Band, detect_bands
from zoneprofile.zoning.resorption import find_resorption_surfaces
from zoneprofile.zoning.species import feldspar_species, species_change
from zoneprofile.zoning.steps import Step, detect_steps
from zoneprofile.zoning.stratigraphy import build_zones
from zoneprofile.zoning.synthetic import CASES, synthetic_case, synthetic_zoned_profile
from zoneprofile.zoning.trends import zone_trend

__all__ = [
    "analyse_zoning",
    "ZoningResult",
    "estimate_noise_sd",
    "detect_steps",
    "Step",
    "detect_bands",
    "Band",
    "zone_trend",
    "build_zones",
    "find_resorption_surfaces",
    "feldspar_species",
    "species_change",
    "melt_equivalents",
    "mixing_fraction",
    "recharge_fingerprint",
    "synthetic_zoned_profile",
    "synthetic_case",
    "CASES",
    "plot_zoning",
]


def plot_zoning(result, path=None, **kwargs):
    """Draw the zoning figure (see :func:`zoneprofile.zoning.plot.plot_zoning`)."""
    from zoneprofile.zoning.plot import plot_zoning as _plot

    return _plot(result, path, **kwargs)
