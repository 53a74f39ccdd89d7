"""Forward model and seeded generators of diffused boundaries (data + ground truth).

:func:`simulate_boundary` is the forward model the demo and the tests use: the
same physics as the fit (laws, partitioning, An coupling, beam), run on a fine
grid. The generators add seeded analytical noise and return the truth beside
the data, so tests, docs and the demo share them.
"""

from __future__ import annotations

import numpy as np

from zoneprofile._validation import InputError
from zoneprofile.minerals.registry import needs_an as an_needed

__all__ = ["simulate_boundary", "synthetic_boundary_profile"]

from zoneprofile._units import SECONDS_PER_DAY  # noqa: E402


def _an_function(an, distance_um):
    """An (mol%) as a function of position: callable, scalar, or values at ``distance_um``."""
    if callable(an):
        return an
    a = np.asarray(an, float)
    if a.ndim == 0:
        return lambda x: np.full(np.shape(x), float(a))
    if a.shape != np.shape(distance_um):
        raise InputError("an must be a number, a callable, or one value per distance")
    return lambda x: np.interp(x, distance_um, a)


def simulate_boundary(
    distance_um,
    *,
    element,
    mineral,
    temperature_c,
    time_days,
    boundary_um,
    inner,
    outer,
    an=None,
    law=None,
    partition="bindeman1998",
    beam_um=None,
    beam_shape="gaussian",
    rim="open",
    fo2_pa=None,
    pressure_mpa=None,
    direction=None,
    n_cells=800,
    pad_um=None,
):
    """Values a traverse would measure across a boundary diffused for ``time_days``.

    Parameters
    ----------
    distance_um : array_like
        Spot positions (µm from the rim).
    element, mineral : str
    temperature_c, time_days : float
    boundary_um : float
        Where the step was when it formed.
    inner, outer : float
        Plateau values (Fo mol%, ppm...) or, for trace elements in plagioclase,
        the melt concentrations (ppm) each zone grew from (each zone starts in
        equilibrium with its melt, Bindeman et al. 1998 partitioning).
    an : float, array or callable, optional
        An (mol%): a constant, one value per ``distance_um`` (interpolated), or a
        function of position (use this for a sharp An step).
    beam_um, beam_shape : optional
        Spot diameter (Gaussian FWHM / square width) applied to the result.
    rim : {'open', 'closed'}
        Boundary condition at the rim (distance 0): held in equilibrium with the
        outer melt (open, default, as in the fit) or zero flux.

    Returns
    -------
    ndarray
    """
    from zoneprofile.diffusion._problem import LinearModel, NonlinearModel, Problem
    from zoneprofile.diffusion.grid import refined_grid
    from zoneprofile.diffusion.laws import default_law, get_law, normalise_element, normalise_mineral

    x = np.asarray(distance_um, float)
    el, mi = normalise_element(element), normalise_mineral(mineral)
    law_obj = default_law(el, mi) if law is None else get_law(law)
    t = float(time_days)
    if t < 0:
        raise InputError("time_days must be >= 0")
    lo_x = float(min(x.min(), boundary_um, 0.0))
    hi_x = float(max(x.max(), boundary_um))
    length = hi_x - lo_x
    pad = 2.0 * length if pad_um is None else float(pad_um)
    grid = refined_grid(0.0, hi_x + pad, 0.0, hi_x + 0.05 * length, int(n_cells), growth=1.05)
    needs_an = "x_an" in law_obj.needs or an_needed(el, mi)
    coupling, x_an_cells, ab, reference = None, None, None, {}
    if needs_an:
        if an is None:
            raise InputError(f"{el} in {mi} needs An")
        f = _an_function(an, x)
        # cell averages of An by sub-sampling (a sharp step lands exactly)
        sub = np.linspace(0, 1, 21)[None, :]
        xs = grid.faces_um[:-1, None] + sub * grid.widths_um[:, None]
        from scipy.integrate import trapezoid  # here: scipy.integrate costs 0.2 s to import

        x_an_cells = trapezoid(f(xs), axis=1) / 20.0 / 100.0  # scipy's: np.trapezoid needs numpy 2
        reference["x_an"] = 0.5 * (f(np.array([boundary_um - 1e-9]))[0] + f(np.array([boundary_um + 1e-9]))[0]) / 100
        if an_needed(el, mi):  # An-coupled partitioning
            from zoneprofile.diffusion.partition import partition_parameters

            coupling = "an"
            ab = tuple(float(v) for v in partition_parameters(el, model=partition))
    law_kwargs = {"fo2_pa": fo2_pa, "pressure_pa": None if pressure_mpa is None else pressure_mpa * 1e6,
                  "direction": direction}
    nonlinear = el == "FeMg" and mi == "olivine" and "x_fe" in law_obj.needs
    if nonlinear:
        reference["x_fe"] = 1.0 - 0.5 * (inner + outer) / 100.0
    problem = Problem(
        element=el, mineral=mi, law=law_obj, grid=grid, x_um=x, y=np.zeros_like(x), sigma=None,
        beam_um=beam_um, beam_shape=beam_shape, rim=rim, value_names=("outer", "inner"), coupling=coupling,
        x_an_cells=x_an_cells, partition_ab=ab, nonlinear=nonlinear, law_kwargs=law_kwargs, reference=reference,
    )
    from zoneprofile.diffusion._blas import single_thread

    with single_thread():
        model = NonlinearModel(problem, temperature_c) if nonlinear else LinearModel(problem, temperature_c)
    dt_m2 = float(problem.d_ref(temperature_c)) * t * SECONDS_PER_DAY
    if dt_m2 <= 0:
        log_dt = -40.0
    else:
        log_dt = float(np.log10(dt_m2))
    from zoneprofile.diffusion._blas import single_thread

    with single_thread():
        return model.predict([log_dt, float(boundary_um), float(outer), float(inner)])


def synthetic_boundary_profile(
    *,
    seed=0,
    element="Sr",
    mineral="plagioclase",
    temperature_c=1000.0,
    time_days=100.0,
    boundary_um=40.0,
    outer=500.0,
    inner=800.0,
    an_outer=60.0,
    an_inner=60.0,
    length_um=100.0,
    spacing_um=2.0,
    beam_um=None,
    noise_fraction=0.01,
    noise_sd=None,
    **kwargs,
):
    """A seeded noisy profile across one diffused boundary, and its truth.

    An (plagioclase) is a sharp step from ``an_outer`` to ``an_inner`` at the
    boundary. Noise is Gaussian with ``noise_sd`` (default ``noise_fraction`` of
    the mean value).

    Returns
    -------
    data : dict of arrays
        ``distance_um``, ``value``, ``An`` (plagioclase), ``value_sd``.
    truth : dict
        Every input, plus ``log10_dt_m2`` and ``d_ref_m2_s`` at the truth.
    """
    from zoneprofile.diffusion.laws import default_law, get_law

    rng = np.random.default_rng(seed)
    x = np.arange(spacing_um / 2.0, length_um, spacing_um)
    an = None
    if mineral == "plagioclase":
        def an(xx, a=an_outer, b=an_inner, x0=boundary_um):
            return np.where(np.asarray(xx) < x0, a, b).astype(float)
    clean = simulate_boundary(
        x, element=element, mineral=mineral, temperature_c=temperature_c, time_days=time_days,
        boundary_um=boundary_um, inner=inner, outer=outer, an=an, beam_um=beam_um, **kwargs,
    )
    sd = noise_sd if noise_sd is not None else noise_fraction * float(np.mean(np.abs(clean)))
    data = {"distance_um": x, "value": clean + rng.normal(0.0, sd, x.size), "value_sd": np.full(x.size, sd)}
    if an is not None:
        data["An"] = an(x)
    law = kwargs.get("law")
    law_obj = default_law(element, mineral) if law is None else get_law(law)
    comp = {}
    if mineral == "plagioclase":
        comp["x_an"] = 0.5 * (an_outer + an_inner) / 100.0
    if element == "FeMg" and mineral == "olivine":
        comp["x_fe"] = 1.0 - 0.5 * (inner + outer) / 100.0
        if kwargs.get("fo2_pa") is not None:
            comp["fo2_pa"] = kwargs["fo2_pa"]
    comp = {k: v for k, v in comp.items() if k in law_obj.needs or k == "x_an" and "x_an" in law_obj.needs}
    d_ref = float(law_obj.d_m2_s(temperature_c, **comp))
    truth = {
        "element": element, "mineral": mineral, "temperature_c": temperature_c, "time_days": time_days,
        "boundary_um": boundary_um, "outer": outer, "inner": inner, "an_outer": an_outer,
        "an_inner": an_inner, "beam_um": beam_um, "noise_sd": sd, "seed": seed, "law": law_obj.id,
        "d_ref_m2_s": d_ref, "log10_dt_m2": float(np.log10(d_ref * time_days * SECONDS_PER_DAY)),
    }
    return data, truth
