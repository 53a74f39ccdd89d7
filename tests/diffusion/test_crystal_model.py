"""The whole-crystal model: the Crank limit, recovery of a three-event crystal made by an
independent solver written here, and bad input.

The reference forward model below is written in this file and shares no code with the
solver under test: node-centred finite differences with the Scharfetter–Gummel
(exponentially fitted) flux for the An-coupled drift term (exact steady state
C ∝ exp(A·X_An/RT); Scharfetter & Gummel 1969, IEEE Trans. Electron Devices 16, 64),
harmonic-mean D at faces (flux continuity at a material interface; Patankar 1980,
Numerical Heat Transfer and Fluid Flow, §4.2), and scipy's ``expm_multiply`` in time.
The spot is a Gaussian kernel summed over the fine nodes.
"""

import functools
import math

import numpy as np
import pytest
from scipy.sparse import diags
from scipy.sparse.linalg import expm_multiply
from scipy.special import erf

from zoneprofile._validation import InputError
from zoneprofile.diffusion._crystal_model import ZoneGrid, forward_basis
from zoneprofile.diffusion.crystal import fit_crystal
from zoneprofile.diffusion.laws import R_J_MOL_K, default_law
from zoneprofile.diffusion.partition import partition_parameters

DAY = 86400.0


# --------------------------------------------------------------------------- Crank limit
def test_one_boundary_constant_d_reduces_to_erf():
    """One boundary, constant D, closed rim far away: C = v1 + (v0 − v1)·½·erfc((b − x)/(2√(Dt))).

    Crank (1975) eq. 2.14 (semi-infinite initial step). The model's cell values are
    compared with cell averages of the erf solution (exact integrals), so only the
    spatial truncation error of the second-order finite volumes remains, of order
    h²/(12·4Dt) of the step (h = 0.25 µm, 4Dt = 36 µm² → 1.4e-4); tolerance 5e-4.
    """
    b, end, h = 100.0, 200.0, 0.25
    grid = ZoneGrid([b], end, h)
    faces = grid.faces([b])
    d = 1e-18  # m²/s
    dt_um2 = 9.0  # D·t in µm²
    age_days = dt_um2 / (d * 1e12) / DAY
    n = grid.n
    basis = forward_basis(grid, faces, [age_days], d, np.ones(n), np.ones(n), rim="closed")
    v0, v1 = 700.0, 300.0  # core, rim zone
    cells = v0 * basis[0] + v1 * basis[1]

    def integral(x):  # ∫ ½ erfc((b − x)/(2√Dt)) dx
        s = 2.0 * math.sqrt(dt_um2)
        z = (x - b) / s
        return 0.5 * (x + s * (z * erf(z) + np.exp(-z * z) / math.sqrt(math.pi)))

    frac = (integral(faces[1:]) - integral(faces[:-1])) / np.diff(faces)
    exact = v1 + (v0 - v1) * frac
    assert np.max(np.abs(cells - exact)) < 5e-4 * (v0 - v1)
    # mass is conserved with a closed rim
    initial = np.where(0.5 * (faces[1:] + faces[:-1]) > b, v0, v1)
    assert abs(np.sum(cells * np.diff(faces)) - np.sum(initial * np.diff(faces))) < 1e-8 * v0 * end


def test_fit_one_boundary_erf_profile_recovers_time():
    """Fitting an erf profile (Crank 1975 eq. 2.14, spot-free points) returns its time within the interval."""
    law = default_law("Ti", "quartz")
    d = float(law.d_m2_s(850.0))
    t_true = 300.0  # days
    dt_um2 = d * t_true * DAY * 1e12
    x = np.arange(0.5, 60.0, 0.5)
    b = 30.0
    rng = np.random.default_rng(5)
    y = 40.0 + 60.0 * 0.5 * (1 + erf((x - b) / (2 * math.sqrt(dt_um2)))) + rng.normal(0, 0.5, x.size)
    res = fit_crystal({"Ti": {"distance_um": x, "value": y, "sd": np.full(x.size, 0.5)}}, mineral="quartz",
                      positions_um=[b], temperature_c=850.0, rim="closed", obliquity=None, draws=400, seed=1)
    rec = res.to_record()
    age = rec["boundaries"][0]["age_days"]
    assert age["statement"] == "date"
    assert age["p2_5"] <= t_true <= age["p97_5"]
    assert 0.7 < age["median"] / t_true < 1.4  # noise 0.5 % of the step; √(Dt) ≈ 2 µm over 0.5 µm spacing
    assert any("reduces to a single-boundary fit" in w for w in rec["warnings"])
    assert rec["gaps"] == []


# --------------------------------------------------------------------------- reference solver
def _reference_crystal(positions, ages, an_zones, melts, element, temperature_c, end=170.0, h=0.2):
    """Final concentration on fine nodes for zones grown at ``ages`` (oldest first), open rim."""
    law = default_law(element, "plagioclase")
    a_j, b_j = partition_parameters(element)
    rt = R_J_MOL_K * (temperature_c + 273.15)
    n = int(round(end / h))
    x = (np.arange(n) + 0.5) * h
    zone = np.zeros(n, int)
    for k, p in enumerate(positions):
        zone[x < p] = k + 1
    xan = np.array(an_zones)[zone] / 100.0
    k_part = np.exp((a_j * xan + b_j) / rt)
    d = np.asarray(law.d_m2_s(temperature_c, x_an=xan), float) * 1e12  # µm²/s
    phi = a_j * xan / rt
    c = np.zeros(n)
    c[zone == 0] = k_part[zone == 0] * melts[0]
    for k in range(len(positions)):
        grown = zone <= k + 1
        c[zone == k + 1] = k_part[zone == k + 1] * melts[k + 1]
        start = int(np.flatnonzero(grown)[0])
        duration = (ages[k] - (ages[k + 1] if k + 1 < len(ages) else 0.0)) * DAY
        idx = np.arange(start, n)
        m = idx.size
        ss = k_part[idx] * melts[k + 1]  # equilibrium with the stage's melt (uniform potential)
        dev = c[idx] - ss
        dl, dr = d[idx][:-1], d[idx][1:]
        d_face = 2 * dl * dr / (dl + dr)
        dphi = np.diff(phi[idx])
        el, er = np.exp(-phi[idx][:-1]), np.exp(-phi[idx][1:])
        with np.errstate(invalid="ignore", divide="ignore"):
            g = np.where(np.abs(dphi) > 1e-12, dphi / (el - er), 1.0 / np.exp(-phi[idx][:-1]))
        # F_{i+1/2} = -(D/h)·g·(C_{i+1} e^{-φ_{i+1}} − C_i e^{-φ_i})
        cl = d_face / h * g * el  # coefficient of C_i
        cr = d_face / h * g * er  # coefficient of C_{i+1}
        main = np.zeros(m)
        upper = np.zeros(m - 1)
        lower = np.zeros(m - 1)
        # dC_i/dt = (F_{i-1/2} − F_{i+1/2})/h
        main[:-1] -= cl / h
        upper += cr / h
        main[1:] -= cr / h
        lower += cl / h
        main[0] -= d[idx][0] / (0.5 * h) / h  # rim held at the deviation 0 (open)
        op = diags([lower, main, upper], [-1, 0, 1], format="csr")
        c[idx] = ss + expm_multiply(op * duration, dev)
    return x, c


def _spots(x_fine, c_fine, x_pts, fwhm):
    sigma = fwhm / (2 * math.sqrt(2 * math.log(2)))
    w = np.exp(-0.5 * ((x_fine[None, :] - x_pts[:, None]) / sigma) ** 2)
    return (w @ c_fine) / w.sum(axis=1)


@functools.lru_cache(maxsize=None)
def _three_event_case(seed, ages=(400.0, 80.0, 7.0)):
    positions = [110.0, 60.0, 15.0]
    an_zones = [60.0, 78.0, 55.0, 72.0]  # core ... rim zone
    t = 850.0
    rng = np.random.default_rng(seed)
    x = np.arange(1.0, 150.0, 2.0)
    profiles = {}
    for el, melts in (("Mg", [600, 900, 500, 800]), ("Sr", [500, 700, 450, 650])):
        xf, cf = _reference_crystal(positions, ages, an_zones, melts, el, t)
        y = _spots(xf, cf, x, 4.0)
        y = y * (1 + 0.02 * rng.standard_normal(y.size))
        profiles[el] = {"distance_um": x, "value": y, "beam_um": 4.0}
    xf = (np.arange(850) + 0.5) * 0.2
    zone = np.zeros(xf.size, int)
    for k, p in enumerate(positions):
        zone[xf < p] = k + 1
    an = _spots(xf, np.array(an_zones)[zone], x, 4.0) + rng.normal(0, 0.5, x.size)
    shifted = [p + s for p, s in zip(positions, rng.uniform(-1.5, 1.5, 3))]
    return profiles, x, an, shifted, t


def _consistent(summary, truth):
    st = summary["statement"]
    if st == "date":
        return summary["p2_5"] <= truth <= summary["p97_5"]
    if st == "upper_bound":
        return truth <= summary["upper_bound"]
    if st == "lower_bound":
        return truth >= summary["lower_bound"]
    return True


def _check_recovery(seed):
    ages = (400.0, 80.0, 7.0)
    profiles, x, an, shifted, t = _three_event_case(seed, ages)
    res = fit_crystal(profiles, mineral="plagioclase", positions_um=shifted, temperature_c=t,
                      temperature_sd_c=0.0, an_distance_um=x, an=an, an_beam_um=4.0, seed=seed, obliquity=None,
                      draws=1000)
    rec = res.to_record()
    out = {"ages": [], "gaps": [], "dated": 0}
    for b, truth in zip(rec["boundaries"], ages):
        out["ages"].append(_consistent(b["age_days"], truth))
        out["dated"] += b["age_days"]["statement"] == "date"
        for s in b["by_element"].values():
            assert s["statement"] in ("date", "upper_bound", "lower_bound", "none")
    for g, truth in zip(rec["gaps"], (ages[0] - ages[1], ages[1] - ages[2])):
        out["gaps"].append(_consistent(g["days"], truth))
        if g["days"]["statement"] == "date":
            assert g["days"]["p2_5"] > 0  # no negative draws
    # positions come back within a spot of the truth
    for b, p in zip(rec["boundaries"], (110.0, 60.0, 15.0)):
        assert abs(b["position_um"] - p) < 2.0
    return out, rec


def test_three_event_crystal_recovered_by_reference_solver():
    """Truth inside the 95 % intervals (or consistent with the bounds) for a crystal made by the reference solver."""
    out, rec = _check_recovery(11)
    # five statements (3 ages, 2 gaps) with honest 95 % intervals all hold the truth with probability
    # 0.95^5 = 0.77 only; at most one miss has probability 0.977 (binomial), so one miss is allowed here
    # (the six-seed test below checks the coverage). On seed 11 the oldest age's interval ends 1 % short
    # of the truth since the zone lines of An reach their boundaries (docs/whole-crystal-model.md).
    assert out["ages"].count(False) + out["gaps"].count(False) <= 1, (rec["boundaries"], rec["gaps"])
    assert out["dated"] >= 2  # the 400- and 80-day events are dated by Mg (√(D t) ≫ spot)


@pytest.mark.slow
def test_three_event_recovery_several_seeds():
    """Over six seeds (18 ages, 12 gaps), at most two statements inconsistent with the truth.

    With 95 % intervals the number of misses among 18 is binomial (18, 0.05): P(≤ 2) = 0.94
    (and among 12 gaps P(≤ 2) = 0.98), so the test fails if the intervals are too narrow.
    """
    miss_ages = miss_gaps = 0
    for seed in (1, 2, 3, 4, 5, 6):
        out, _ = _check_recovery(seed)
        miss_ages += out["ages"].count(False)
        miss_gaps += out["gaps"].count(False)
    assert miss_ages <= 2 and miss_gaps <= 2, (miss_ages, miss_gaps)


# --------------------------------------------------------------------------- bad input
def _simple_profiles():
    x = np.arange(1.0, 100.0, 2.0)
    y = np.where(x > 50, 80.0, 40.0) + 0.1 * np.sin(x)
    return {"Ti": {"distance_um": x, "value": y}}


def test_inconsistent_event_order_refused():
    with pytest.raises(InputError, match="inconsistent event order"):
        fit_crystal(_simple_profiles(), mineral="quartz", positions_um=[30.0, 60.0], temperature_c=800.0)


def test_boundaries_closer_than_resolution_refused():
    prof = _simple_profiles()
    prof["Ti"]["beam_um"] = 5.0
    with pytest.raises(InputError, match="closer than twice the resolution"):
        fit_crystal(prof, mineral="quartz", positions_um=[52.0, 50.0], temperature_c=800.0)


def test_element_without_law_refused():
    x = np.arange(1.0, 100.0, 2.0)
    prof = {"Ba": {"distance_um": x, "value": np.where(x > 50, 80.0, 40.0)}}
    with pytest.raises(InputError, match="Ba in plagioclase"):
        fit_crystal(prof, mineral="plagioclase", positions_um=[50.0], temperature_c=800.0,
                    an=np.full(x.size, 60.0), an_distance_um=x)


def test_olivine_composition_dependent_law_refused():
    x = np.arange(1.0, 100.0, 2.0)
    prof = {"FeMg": {"distance_um": x, "value": np.where(x > 50, 85.0, 80.0)}}
    with pytest.raises(InputError, match="not in the whole-crystal model"):
        fit_crystal(prof, mineral="olivine", positions_um=[50.0], temperature_c=1150.0, fo2_pa=1e-3)


def test_plagioclase_trace_element_needs_an():
    x = np.arange(1.0, 100.0, 2.0)
    prof = {"Mg": {"distance_um": x, "value": np.where(x > 50, 80.0, 40.0)}}
    with pytest.raises(InputError, match="need An"):
        fit_crystal(prof, mineral="plagioclase", positions_um=[50.0], temperature_c=850.0)


# --------------------------------------------------------------------------- command line
@pytest.fixture(scope="module")
def crystal_csv(tmp_path_factory):
    import pandas as pd

    profiles, x, an, _, _ = _three_event_case(11)
    path = tmp_path_factory.mktemp("crystal") / "crystal.csv"
    pd.DataFrame({"distance_um": x, "Mg_ppm": profiles["Mg"]["value"], "Sr_ppm": profiles["Sr"]["value"],
                  "An": an}).to_csv(path, index=False)
    return path


def _run(capsys, *argv):
    """The command in this process (the subprocess route is tested for ``fit`` elsewhere)."""
    from zoneprofile.cli import main

    code = main([str(a) for a in argv])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def _cli(capsys, path, out, *extra):
    return _run(capsys, "fit", path, "--crystal", "--element", "Mg,Sr", "--mineral", "plagioclase",
                "--temperature-c", "850", "--temperature-sd-c", "10", "--beam-um", "4", "-o", out, *extra)


def test_cli_crystal_writes_record(crystal_csv, tmp_path, capsys):
    import json

    out = tmp_path / "C.json"
    code, stdout, err = _cli(capsys, crystal_csv, out, "--boundary-um", "15", "110", "60")
    assert code == 0, err
    rec = json.loads(out.read_text())["crystal_model"]
    assert [b["id"] for b in rec["boundaries"]] == ["B1", "B2", "B3"]
    assert rec["boundaries"][0]["position_um"] > rec["boundaries"][1]["position_um"]  # oldest (innermost) first
    assert rec["elements"] == ["Mg", "Sr"] and rec["method"] == "whole-crystal" and len(rec["gaps"]) == 2
    for b in rec["boundaries"]:
        assert set(b["age_days"]) == {"median", "p2_5", "p97_5", "statement", "upper_bound", "lower_bound"}
        assert set(b["by_element"]) == {"Mg", "Sr"}
    assert "Whole-crystal model" in stdout and "hazard" in stdout


@pytest.mark.parametrize("extra, words", [
    ((), "--boundary-um"),
    (("--boundary-um", "60", "61"), "closer than twice the resolution"),
    (("--boundary-um", "60", "--path", "p.csv"), "--path is not available with --crystal"),
    (("--boundary-um", "60", "60"), "given twice"),
    (("--boundary-um", "500"), "outside the profile"),
    (("--boundary-um", "60", "--law", "cherniak2007-ti-quartz"), "not among --element"),
])
def test_cli_crystal_bad_input(crystal_csv, tmp_path, capsys, extra, words):
    out = tmp_path / "C.json"
    code, _, err = _cli(capsys, crystal_csv, out, *extra)
    assert code == 2 and words in err and len(err.strip().splitlines()) == 1, err
    assert not out.exists()


def test_cli_crystal_element_without_law(crystal_csv, tmp_path, capsys):
    out = tmp_path / "C.json"
    code, _, err = _run(capsys, "fit", crystal_csv, "--crystal", "--element", "Mg,Ba", "--mineral", "plagioclase",
                           "--temperature-c", "850", "--boundary-um", "60", "-o", out)
    assert code == 2 and len(err.strip().splitlines()) == 1 and not out.exists(), err


def test_equilibrated_element_gives_lower_bound():
    """An element in equilibrium everywhere (no melt contrast left) gives a lower bound, not 'no time'.

    Data: the t → ∞ limit with an open rim, every zone in equilibrium with the last melt,
    C = K(X_An)·C_melt (Bindeman et al. 1998 form, RT ln K = A·X_An + B), seen through a 4 µm
    spot with 2 % noise. A contrast at a boundary 60 µm from the rim cannot be erased before
    diffusion has reached the rim, x²/(4D) (Crank 1975, eq. 2.45: erfc(x/2√(Dt)) ≈ 0.16 at
    x = 2√(Dt)), so the lower bound must exceed that.
    """
    t = 850.0
    x = np.arange(1.0, 150.0, 2.0)
    rng = np.random.default_rng(2)
    xf = (np.arange(850) + 0.5) * 0.2
    anf = np.where(xf < 60.0, 78.0, 60.0)
    a_j, b_j = partition_parameters("Mg")
    cf = 900.0 * np.exp((a_j * anf / 100.0 + b_j) / (R_J_MOL_K * (t + 273.15)))
    y = _spots(xf, cf, x, 4.0) * (1 + 0.02 * rng.standard_normal(x.size))
    an = _spots(xf, anf, x, 4.0) + rng.normal(0, 0.5, x.size)
    res = fit_crystal({"Mg": {"distance_um": x, "value": y, "beam_um": 4.0}}, mineral="plagioclase",
                      positions_um=[61.0], temperature_c=t, an_distance_um=x, an=an, an_beam_um=4.0, seed=2,
                      obliquity=None, draws=300)
    s = res.to_record()["boundaries"][0]["by_element"]["Mg"]
    assert s["statement"] == "lower_bound"
    d_um2_day = float(default_law("Mg", "plagioclase").d_m2_s(t, x_an=0.69)) * 1e12 * DAY
    assert s["lower_bound"] > 60.0 ** 2 / (4.0 * d_um2_day)


def test_concordance_of_two_clocks():
    """Paired draws: ages agreeing within their combined scatter are concordant; a 3× offset with
    0.1 (natural-log) sd each is 3.1 combined sd away (ln 3 / √0.02) and is flagged, with reasons."""
    from zoneprofile.diffusion.crystal import _concordance, time_summary

    rng = np.random.default_rng(0)
    z = rng.standard_normal((2, 4000))
    a = 100.0 * np.exp(0.1 * z[0])
    b_same = 100.0 * np.exp(0.1 * z[1])
    b_far = 300.0 * np.exp(0.1 * z[1])
    assert _concordance({"Mg": (time_summary(a), a), "Sr": (time_summary(b_same), b_same)})["status"] == "concordant"
    out = _concordance({"Mg": (time_summary(a), a), "Sr": (time_summary(b_far), b_far)})
    assert out["status"] == "discordant"
    text = " ".join(out["reasons"])
    for word in ("temperature", "non-instant growth", "law", "partitioning"):
        assert word in text
    # a date wholly above the other element's upper bound disagrees; below it, it agrees
    ub = time_summary(statement="upper_bound", upper=50.0)
    assert _concordance({"Mg": (time_summary(a), a), "Sr": (ub, None)})["status"] == "discordant"
    ub = time_summary(statement="upper_bound", upper=500.0)
    assert _concordance({"Mg": (time_summary(a), a), "Sr": (ub, None)})["status"] == "concordant"
    assert _concordance({"Mg": (time_summary(a), a)})["status"] == "one element"


def test_cli_crystal_leaves_out_censored_values_element_by_element(crystal_csv, tmp_path, capsys):
    """Below-detection marks stop no ``fit --crystal`` (they stopped it with 'not a number'): each element
    leaves out its own censored analyses, counted in the warnings; the precision beside a censored value
    is not read."""
    import json

    import pandas as pd

    frame = pd.read_csv(crystal_csv, dtype=str, keep_default_na=False)
    frame["Sr_ppm_sd"] = [f"{0.02 * float(v):.3f}" for v in frame["Sr_ppm"]]
    frame.loc[10, "Sr_ppm"], frame.loc[10, "Sr_ppm_sd"] = "<0.5", "bdl"
    frame.loc[20, "Sr_ppm"], frame.loc[20, "Sr_ppm_sd"] = "n.d.", ""
    frame.loc[30, "Mg_ppm"] = "bdl"
    path = tmp_path / "censored.csv"
    frame.to_csv(path, index=False)
    out = tmp_path / "crystal.json"
    code, _, err = _cli(capsys, path, out, "--boundary-um", "110", "60", "15", "--draws", "200")
    assert code == 0, err
    doc = json.loads(out.read_text())
    warnings = " ".join(doc["crystal_model"]["warnings"])
    assert "2 censored analyses left out: Sr_ppm" in warnings
    assert "1 censored analyses left out: Mg_ppm" in warnings
    assert "Sr_ppm_sd is blank" not in warnings  # every Sr analysis fitted has its precision
    n = len(frame)
    # Mg and Sr points fitted, each without its own censored ones, plus the An of every row
    assert doc["crystal_model"]["n_points"] == (n - 1) + (n - 2) + n
