"""Independent forward model: plagioclase that grows zone by zone, Mg and Sr diffusing through it.

Written for the validation only, without importing zoneprofile's solver, fitting,
laws or partition code, so that agreement between the two is evidence and not a
tautology.

Physics
-------
* **Diffusivities** (m²/s, T in K, X = X_An as a fraction), re-typed from the sources:

  - Mg: Costa F., Chakraborty S., Dohmen R. (2003) Geochim. Cosmochim. Acta 67:2189–2200,
    D = 2.92 · 10^(−4.1·X − 3.1) · exp(−266 kJ mol⁻¹ / RT)  (from memory, as in docs/laws);
  - Sr: Zellmer G.F. et al. (1999) Contrib. Mineral. Petrol. 136:345–357 (fit to Giletti &
    Casserly 1994), D = 2.92 · 10^(−4.1·X − 4.08) · exp(−276 kJ mol⁻¹ / RT)  (from memory).

* **Partitioning**: Bindeman I.N., Davis A.M., Drake M.J. (1998) Geochim. Cosmochim.
  Acta 62:1175–1193, RT ln K = A·X + B with (A, B) in J/mol: Mg (−26 100, −25 700),
  Sr (−30 400, 28 500)  (A, B from memory; the form is the published one).

* **Diffusion with An coupling**: the flux of a trace element in a crystal whose
  An content is frozen is J = −D ∂C/∂x + (A/RT)·D·C·∂X/∂x (Costa et al. 2003).
  Writing C = K·v, with K = exp((A·X + B)/RT) and v the *melt-equivalent*
  concentration (the melt a spot would be in equilibrium with), this is exactly
  J = −D·K·∂v/∂x: equilibrium inside the crystal is v uniform, a zone grown in
  equilibrium with a melt of concentration c has v = c, and a rim in equilibrium
  with the current melt has v = c_melt.

Numerics
--------
Finite volumes in depth below the final rim (uniform cells of width h), planar
geometry, closed (no-flux) at the crystal's centre. Face conductances are the
series (harmonic) combination of the two half cells, G = 2/(h·(1/(DK)_i + 1/(DK)_j)),
so a step in An and D is represented exactly at a cell face. The rim face sees
the melt at half a cell: G = 2·(DK)_0/h. The semi-discrete system is

    M dv/dt = −S v + g,   M = diag(K·h),  S symmetric tridiagonal,

integrated stage by stage (one stage between successive recharges, each with
its own active cells and rim value) by Crank–Nicolson on geometrically growing
steps started with four backward-Euler steps (Rannacher start-up, which damps the
oscillation Crank–Nicolson gives on a sharp initial step). :func:`evolve_expm`
integrates the same semi-discrete system exactly in time with
``scipy.sparse.linalg.expm_multiply`` (the tests compare the two).
"""

from __future__ import annotations

import numpy as np
from scipy.linalg.lapack import dgtsv

R_J_MOL_K = 8.314462618          # CODATA 2018 molar gas constant
SECONDS_PER_DAY = 86400.0

# element -> (prefactor m²/s, log10 slope per X_An, log10 offset, Ea J/mol); Costa 2003, Zellmer 1999
DIFFUSION = {
    "Mg": (2.92, -4.1, -3.1, 266e3),
    "Sr": (2.92, -4.1, -4.08, 276e3),
}
# element -> (A, B) in J/mol for RT ln K = A·X_An + B; Bindeman et al. 1998
PARTITION = {
    "Mg": (-26100.0, -25700.0),
    "Sr": (-30400.0, 28500.0),
}


def diffusivity(element: str, x_an, temperature_c: float) -> np.ndarray:
    """D (m²/s) of ``element`` in plagioclase of An fraction ``x_an`` at ``temperature_c``."""
    pre, slope, offset, ea = DIFFUSION[element]
    t_k = temperature_c + 273.15
    return pre * 10.0 ** (slope * np.asarray(x_an, dtype=float) + offset) * np.exp(-ea / (R_J_MOL_K * t_k))


def partition(element: str, x_an, temperature_c: float) -> np.ndarray:
    """Plagioclase/melt partition coefficient K of ``element``."""
    a, b = PARTITION[element]
    t_k = temperature_c + 273.15
    return np.exp((a * np.asarray(x_an, dtype=float) + b) / (R_J_MOL_K * t_k))


# --------------------------------------------------------------------------- the operator
def _conductances(dk: np.ndarray, h: float) -> np.ndarray:
    """Face conductances between neighbouring cells (series combination of half cells)."""
    return 2.0 / (h * (1.0 / dk[:-1] + 1.0 / dk[1:]))


def _operator(d: np.ndarray, k: np.ndarray, h: float, rim_open: bool):
    """(mass diagonal, S as (diag, offdiag), rim conductance) for cells 0..n-1 (0 at the rim)."""
    dk = d * k
    g = _conductances(dk, h)
    diag = np.zeros(dk.size)
    diag[:-1] += g
    diag[1:] += g
    g_rim = 2.0 * dk[0] / h if rim_open else 0.0
    diag[0] += g_rim
    return k * h, diag, -g, g_rim


def _cn_stage(v, mass, diag, off, g_rim, v_rim, duration_s, n_steps, ratio):
    """Crank–Nicolson over ``duration_s`` with geometric steps (first two backward Euler)."""
    if duration_s <= 0:
        return v
    # geometric steps dt_j = dt0 * ratio**j summing to duration
    if ratio == 1.0:
        steps = np.full(n_steps, duration_s / n_steps)
    else:
        dt0 = duration_s * (ratio - 1.0) / (ratio ** n_steps - 1.0)
        steps = dt0 * ratio ** np.arange(n_steps)
    n = v.size
    rhs_src = np.zeros(n)
    rhs_src[0] = g_rim * v_rim
    for j, dt in enumerate(steps):
        theta = 1.0 if j < 4 else 0.5
        sv = diag * v
        sv[:-1] += off * v[1:]
        sv[1:] += off * v[:-1]
        rhs = mass * v - (1.0 - theta) * dt * sv + dt * rhs_src
        band = theta * dt * off
        # LAPACK tridiagonal solve (Gaussian elimination with partial pivoting)
        _, _, _, v, info = dgtsv(band, mass + theta * dt * diag, band, rhs)
        if info != 0:
            raise RuntimeError(f"tridiagonal solve failed (LAPACK info {info})")
    return v


def evolve_cn(v0, d, k, h, *, duration_s, v_rim=None, n_steps=400, ratio=1.02):
    """Evolve melt-equivalent ``v0`` for ``duration_s``; rim at ``v_rim`` (None: closed)."""
    mass, diag, off, g_rim = _operator(np.asarray(d, float), np.asarray(k, float), h, v_rim is not None)
    return _cn_stage(np.asarray(v0, float).copy(), mass, diag, off, g_rim, 0.0 if v_rim is None else v_rim,
                     duration_s, n_steps, ratio)


def evolve_expm(v0, d, k, h, *, duration_s, v_rim=None):
    """The same semi-discrete system integrated exactly in time (scipy expm_multiply)."""
    from scipy.sparse import diags
    from scipy.sparse.linalg import expm_multiply

    mass, diag, off, g_rim = _operator(np.asarray(d, float), np.asarray(k, float), h, v_rim is not None)
    n = mass.size
    # augmented state [v, 1]: dv/dt = M⁻¹(−S v + g·1)
    main = np.append(-diag / mass, 0.0)
    upper = np.append(-off / mass[:-1], 0.0)
    lower = np.append(-off / mass[1:], 0.0)
    a = diags([lower, main, upper], [-1, 0, 1], shape=(n + 1, n + 1), format="lil")
    if v_rim is not None:
        a[0, n] = g_rim * v_rim / mass[0]
    y = expm_multiply(a.tocsr() * duration_s, np.append(np.asarray(v0, float), 1.0))
    return y[:n]


# --------------------------------------------------------------------------- the growing crystal
def grow_and_diffuse(depth_edges_um, an_cells, boundary_cells, stage_melts, stage_durations_days, *,
                     element: str, temperature_c: float, n_steps: int = 300, ratio: float = 1.02):
    """Concentration (ppm) in every cell of a crystal grown zone by zone.

    Parameters
    ----------
    depth_edges_um : array (n+1,)
        Cell faces, depth below the final rim, 0 first, uniform spacing.
    an_cells : array (n,)
        Frozen An (mol%) of each cell.
    boundary_cells : list of int
        Index of the first cell *inside* each zone boundary, oldest (deepest) first:
        cells ``>= boundary_cells[0]`` are the pre-recharge core, cells
        ``boundary_cells[k+1] <= i < boundary_cells[k]`` grew at recharge k (instantly).
    stage_melts : list of float
        Melt concentration (ppm): the resident melt the core grew from, then one per recharge.
    stage_durations_days : list of float
        Time from each recharge to the next, the last one to the eruption.
    """
    edges = np.asarray(depth_edges_um, dtype=float)
    h_um = float(edges[1] - edges[0])
    h = h_um * 1e-6
    x = np.asarray(an_cells, dtype=float) / 100.0
    d = diffusivity(element, x, temperature_c)
    k = partition(element, x, temperature_c)
    n = x.size
    starts = list(boundary_cells) + [0]
    if len(stage_melts) != len(boundary_cells) + 1 or len(stage_durations_days) != len(boundary_cells):
        raise ValueError("one melt per stage (resident + each recharge) and one duration per recharge")
    v = np.full(n, float(stage_melts[0]))          # the core, in equilibrium with the resident melt
    for j, duration in enumerate(stage_durations_days):
        first = starts[j + 1]                      # outermost cell of the crystal during stage j
        v[first:starts[j]] = stage_melts[j + 1]     # the new zone, in equilibrium with its melt
        v[first:] = evolve_cn(v[first:], d[first:], k[first:], h, duration_s=duration * SECONDS_PER_DAY,
                              v_rim=float(stage_melts[j + 1]), n_steps=n_steps, ratio=ratio)
    return k * v


def measure(s_fine_um, values, at_um, *, width_um: float, shape: str) -> np.ndarray:
    """Average ``values`` over each analysis footprint centred at ``at_um`` (traverse frame).

    ``gaussian``: width is the FWHM; ``square``: the full width. The footprint is
    cut at the rim (s < 0 is outside the crystal) and renormalised.
    """
    s = np.asarray(s_fine_um, dtype=float)
    v = np.asarray(values, dtype=float)
    c = np.asarray(at_um, dtype=float)[:, None]
    if shape == "gaussian":
        sigma = width_um / (2.0 * np.sqrt(2.0 * np.log(2.0)))
        w = np.exp(-0.5 * ((s[None, :] - c) / sigma) ** 2)
    elif shape == "square":
        w = (np.abs(s[None, :] - c) <= width_um / 2.0).astype(float)
    else:
        raise ValueError(f"unknown footprint shape {shape!r}")
    w = w * (s[None, :] >= 0.0)
    total = w.sum(axis=1)
    out = (w @ v) / np.where(total > 0, total, 1.0)
    return np.where(total > 0, out, np.interp(c[:, 0], s, v))
