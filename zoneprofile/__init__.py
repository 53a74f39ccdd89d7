"""zoneprofile: composition profiles, zoning and diffusion timescales of zoned crystals.

``import zoneprofile as zp`` gives the main entry points, each imported on
first use (so ``import zoneprofile`` stays fast)::

    tr = zp.read_traverse("spots.csv", mineral="plagioclase", rim="start")
    zoning = zp.analyse_zoning(tr.good()["distance_um"], tr.good()["An"])
    fit = zp.fit_boundary(x, mg, element="Mg", mineral="plagioclase", temperature_c=1000, ...)
    summary = zp.run_campaign(zp.load_campaign("campaign.toml"), "results")

Result objects answer ``.summary()``, ``.to_dict()``, ``.to_frame()`` and show
themselves in a notebook. The stages live in sub-packages (``io``,
``minerals``, ``maps``, ``zoning``, ``diffusion``, ``campaign``, ``report``);
import from those for everything else. Task pages with Python examples:
``docs/index.md``.
"""

from importlib.metadata import PackageNotFoundError, version as _version

try:
    __version__ = _version("zoneprofile")
except PackageNotFoundError:  # running from a source tree without install
    __version__ = "0.0.0+unknown"

#: name -> (module, attribute): the entry points, imported on first use
_LAZY = {
    "InputError": ("zoneprofile._validation", "InputError"),
    # reading tables and maps
    "read_traverse": ("zoneprofile.traverse", "read_traverse"),
    "read_profile": ("zoneprofile.io", "read_profile"),
    "read_analyses": ("zoneprofile.io", "read_analyses"),
    "read_map": ("zoneprofile.maps", "read_map"),
    "calibrate_map": ("zoneprofile.maps", "calibrate_map"),
    "extract_profile": ("zoneprofile.maps", "extract_profile"),
    # recalculation
    "recalculate": ("zoneprofile.minerals", "recalculate"),
    "get_mineral": ("zoneprofile.minerals", "get_mineral"),
    # zoning
    "analyse_zoning": ("zoneprofile.zoning", "analyse_zoning"),
    # fitting and the whole-crystal model
    "fit_boundary": ("zoneprofile.diffusion.fitting", "fit_boundary"),
    "find_boundaries": ("zoneprofile.diffusion.fitting", "find_boundaries"),
    "fit_crystal": ("zoneprofile.diffusion.crystal", "fit_crystal"),
    "get_law": ("zoneprofile.diffusion", "get_law"),
    "default_law": ("zoneprofile.diffusion", "default_law"),
    # campaigns and the population
    "load_campaign": ("zoneprofile.campaign", "load_campaign"),
    "run_campaign": ("zoneprofile.campaign", "run_campaign"),
    "execute_campaign": ("zoneprofile.campaign", "execute_campaign"),
    "population_summary": ("zoneprofile.chronology", "population_summary"),
    # figures and the report
    "plot_zoning": ("zoneprofile.zoning.plot", "plot_zoning"),
    "plot_map_profile": ("zoneprofile.maps.plot", "plot_map_profile"),
    "render_crystal_figure": ("zoneprofile.report", "render_crystal_figure"),
    "write_outputs": ("zoneprofile.report", "write_outputs"),
    "write_supplement": ("zoneprofile.report.supplement", "write_supplement"),
    # result types (for isinstance and help())
    "Traverse": ("zoneprofile.traverse", "Traverse"),
    "ZoningResult": ("zoneprofile.zoning", "ZoningResult"),
    "FitResult": ("zoneprofile.diffusion", "FitResult"),
    "CrystalResult": ("zoneprofile.diffusion.crystal", "CrystalResult"),
    "RunSummary": ("zoneprofile.campaign", "RunSummary"),
}

__all__ = ["__version__", *_LAZY]


def __getattr__(name):
    target = _LAZY.get(name)
    if target is None:
        raise AttributeError(f"module 'zoneprofile' has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(target[0]), target[1])
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__():
    return sorted(set(globals()) | set(_LAZY))
