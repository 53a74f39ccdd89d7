"""What was seen of each built-in law and partition model, and where (docs/laws/ for the detail).

``VERIFICATION[id] = (word, text)`` where ``word`` is one of

- ``"seen"``: the numbers the project uses were read in the public page named;
- ``"seen in part"``: some of them were (the text says which);
- ``"seen in a general library"``: read in a general library's documentation, not the paper;
- ``"could not be verified"``: searched for and not found in the public material at hand; the
  numbers are recalled (the law's status says FROM MEMORY).

Nothing here changes a number; ``zoneprofile laws`` prints it beside each status.
"""

from __future__ import annotations

__all__ = ["VERIFICATION", "verification"]

_CW1992 = ("https://science.landoffree.com/paper/a-study-of-strontium-diffusion-in-k-feldspar-na-k-feldspar-"
           "and-anorthite-using-rutherford-backscattering-spectroscopy (abstract)")
_NOT_FOUND = ("searched the stored public pages for the title, the authors and the formula; no page giving "
              "the numbers was found. The numbers are recalled")

VERIFICATION: dict[str, tuple[str, str]] = {
    "costa2003-mg-plag": ("could not be verified", _NOT_FOUND + "."),
    "vanorman2014-mg-plag": ("could not be verified", _NOT_FOUND + "."),
    "zellmer1999-sr-plag": ("could not be verified", _NOT_FOUND + " (nor the data of Giletti & Casserly 1994)."),
    "cherniak-watson1992-sr-anorthite": (
        "seen", "anorthite ⊥(010): D = 3.85×10⁻² cm²/s · exp(−78 800 ± 5400 cal/mol / RT), 725–1075 °C, dry, "
        "1 atm = 3.85×10⁻⁶ m²/s, 329.7 kJ/mol; " + _CW1992),
    "cherniak-watson1992-sr-anorthoclase-001": (
        "seen", "anorthoclase ⊥(001): D = 2.25×10² cm²/s · exp(−89 300 ± 4600 cal/mol / RT) = 2.25×10⁻² m²/s, "
        "373.6 kJ/mol; " + _CW1992),
    "cherniak-watson1992-sr-anorthoclase-010": (
        "seen", "anorthoclase ⊥(010): D = 4.51×10¹ cm²/s · exp(−89 100 ± 4800 cal/mol / RT) = 4.51×10⁻³ m²/s, "
        "372.8 kJ/mol; " + _CW1992),
    "cherniak1996-sr-alkali-feldspar": (
        "seen in part", "D = 2.9×10⁻⁹ m²/s · exp(−224 kJ/mol / RT), 675–1025 °C, ⊥(001), 1 atm "
        "(https://www.scientific.net/Abstract/Preview?AbstractId=50686, an abstract digest); which feldspar "
        "was measured was not seen"),
    "cherniak2002-ba-sanidine": ("could not be verified", _NOT_FOUND + "."),
    "dohmen2007-femg-olivine": (
        "seen in a general library", "calibrated 700–1200 °C, fO2 10⁻¹²–10⁻⁵ Pa, ∥[001], DOI "
        "10.1007/s00269-007-0158-6 (GeoParams.jl documentation, "
        "https://juliageodynamics.github.io/GeoParams.jl/dev/man/Olivine); the formula's numbers were not "
        "re-read this time (status SECONDARY from an earlier reading of the same library)"),
    "dohmen2007-femg-olivine-tamed": (
        "seen in a general library", "TaMED: 900–1200 °C, fO2 10⁻¹⁰–10⁻⁵ Pa (GeoParams.jl documentation, "
        "page above); formula numbers SECONDARY as before"),
    "dohmen2007-femg-olivine-ped": (
        "seen in a general library", "PED: 700–900 °C, fO2 10⁻¹²–10⁻¹⁰ Pa (GeoParams.jl documentation, "
        "page above); formula numbers SECONDARY as before"),
    "cherniak2007-ti-quartz": (
        "seen", "D = 7×10⁻⁸ m²/s · exp(−273 ± 12 kJ/mol / RT), 700–1150 °C, dry, 1 atm; Ti slightly slower "
        "normal to c (abstract, https://search.isc.ac/inventory/10/2258220.htm)"),
    "muller2013-femg-cpx": ("could not be verified", _NOT_FOUND + "."),
    "bindeman1998": (
        "seen in part", "the form RT ln D = a·X_An + b and its range 0.4 < X_An < 0.8, and the DOI, seen in the "
        "abstract (https://earthref.org/ERR/n:276,b:/); the values of A and B were not seen"),
    "blundy-wood1991": ("could not be verified", _NOT_FOUND + "."),
}


def verification(law_id: str) -> tuple[str, str]:
    """(word, text) for a built-in law or partition model; user laws: ("user", "")."""
    return VERIFICATION.get(law_id, ("user", ""))
