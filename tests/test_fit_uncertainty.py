"""Fit uncertainties: the bootstrap over whole curves, uncertainty weights, and the Johnson–Cook m with heating.

Building blocks against textbook results (Box & Jenkins's autocorrelation of a
moving average, Bessel's n/(n−1), the NIST StRD certified values, scipy's
weighted least squares); the whole bootstrap on virtual campaigns with a
known truth (tests/fit_campaigns.py: the fictional HR-A61 alloy, synthetic),
where the intervals must be of the size of the actual errors and must not
depend on the grid step. The full coverage count is
benchmarks/bench_fit_coverage.py.
"""

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from shpb import fit as F
from shpb import fit_uncertainty as U
from shpb.errors import InputError

from fit_campaigns import REFERENCE_RATE, TRUTH, campaign
from test_fit import CU, TR, jc, make_campaign, write_shot


# --------------------------------------------------------------------------- building blocks
def test_correlation_length_of_a_moving_average_and_its_grid_invariance():
    # An MA(q) process, the sum of q+1 consecutive white-noise terms, has autocorrelation (q+1-k)/(q+1) for
    # k <= q and exactly 0 beyond (Box & Jenkins 1976, ch. 3, MA processes; from memory): its correlation length
    # is q+1 steps. Sampled 5x finer with a 5x longer average, the same process in strain has the same length.
    # Within 30 %: the last lags' small correlations ((q+1-k)/(q+1) -> 0) drown in the estimate's noise.
    rng = np.random.default_rng(3)
    for step, q in ((0.005, 5), (0.001, 29)):
        groups = [np.convolve(rng.standard_normal(int(0.3 / step) + q), np.ones(q + 1), "valid") for _ in range(8)]
        ell = U.correlation_length(groups, step)
        assert 0.7 * 0.03 <= ell <= 1.3 * 0.03, (step, ell)
    # white noise: one step
    assert U.correlation_length([rng.standard_normal(400) for _ in range(4)], 0.005) <= 0.01


def test_circular_blocks_wrap_and_keep_runs():
    # Politis & Romano (1992): blocks of consecutive indices taken circularly; one block as long as the
    # sequence is a rotation of it
    rng = np.random.default_rng(0)
    idx = U.circular_block_indices(10, 10, 50, rng)
    assert idx.shape == (50, 10)
    assert all(np.array_equal(np.sort(r), np.arange(10)) and np.all(np.diff(r) % 10 == 1) for r in idx)
    idx = U.circular_block_indices(23, 5, 200, rng)
    steps = np.diff(idx, axis=1) % 23
    assert np.all(steps[:, [0, 1, 2, 3, 5, 6, 7, 8]] == 1)  # within a block of 5: consecutive (mod 23)
    assert np.any(steps[:, 4] != 1)  # between blocks: new starts


def test_grid_cells_tile_each_curve_on_any_grid():
    # The nodes' quadrature weights are the lengths of the cells they stand for: on any grid they add up to the
    # curve's plastic-strain range from half the window (0.0025) to its last sample, so a curve weighs by the range
    # it spans (the weights of a composite midpoint rule, Press et al. 2007, Numerical Recipes, 3rd ed., sect. 4.1;
    # from memory). A power law's integral over the range comes out within the midpoint rule's O(step^2).
    ep = np.arange(0.0012, 0.1437, 1e-4)
    exact = (ep[-1] ** 1.3 - 0.0025 ** 1.3) / 1.3 * 1e9  # integral of 1e9 eps^0.3
    for step in (0.01, 0.005, 0.001, 0.0005):
        c = F.resample_curves([F.Curve("c", ep, 1e9 * ep**0.3, 1e3, TR)], step)[0]
        assert c.node_weight.sum() * step == pytest.approx(ep[-1] - 0.0025, rel=1e-9)
        assert c.plastic_strain.min() >= 0.0025 and c.plastic_strain.max() <= ep[-1]
        assert np.all(np.diff(c.plastic_strain) > 0)
        assert np.sum(c.node_weight * c.stress) * step == pytest.approx(exact, rel=2e-3), step


def test_offset_inflation_is_bessels_correction_for_a_scale_parameter():
    # One free scale (model A g(x)) absorbs the mean offset of n equal curves: the fitted offsets are the true
    # ones less their mean, so their spread is short by (n-1)/n and s^2 = n/(n-1) (Bessel's correction).
    for n in (2, 5, 12):
        g = np.tile(np.linspace(1.0, 2.0, 30), n)
        s = U.offset_inflation(g[:, None], g, [30] * n)
        assert s == pytest.approx(math.sqrt(n / (n - 1)), rel=1e-9)


def test_batch_least_squares_on_nist_roszman1():
    # NIST StRD Roszman1 (certified values in tests/data/fit/nist_strd_roszman1.dat) from NIST's Start 1, three
    # copies solved together (one of them with the data scaled by 1, the others the same): all reach the
    # certified values to 6 digits.
    data = pd.read_csv(Path(__file__).parent / "data" / "fit" / "nist_strd_roszman1.dat", comment="#")
    x, y = data["x"].to_numpy(), data["y"].to_numpy()

    def fun(t):
        return t[:, :1] - t[:, 1:2] * x - np.arctan(t[:, 2:3] / (x - t[:, 3:4])) / np.pi

    start = np.array([0.1, -1e-5, 1000.0, -100.0])
    theta, ok = U.batch_least_squares(fun, start, np.tile(y, (3, 1)), np.ones(x.size),
                                      np.full(4, -np.inf), np.full(4, np.inf), max_iter=200, tol=1e-12)
    cert = [2.0196866396e-01, -6.1953516256e-06, 1.2044556708e03, -1.8134269537e02]
    assert ok.all()
    np.testing.assert_allclose(theta, np.tile(cert, (3, 1)), rtol=1e-6)


# --------------------------------------------------------------------------- the bootstrap on virtual campaigns
@pytest.fixture(scope="module")
def virtual_fits():
    """Three virtual campaigns fitted on the default grid, and the first again on a grid 10x finer (300 draws)."""
    fits = [F.fit_curves(F.resample_curves(campaign(seed), 0.005), "johnson-cook", reference_rate=REFERENCE_RATE,
                         draws=300) for seed in range(3)]
    fine = F.fit_curves(F.resample_curves(campaign(0), 0.0005), "johnson-cook", reference_rate=REFERENCE_RATE,
                        draws=300)
    return fits, fine


def test_bootstrap_uncertainties_match_the_actual_errors(virtual_fits):
    # Against the truth of the virtual campaigns (Johnson & Cook 1983 law, per-shot scale errors of 1 %):
    # |error| / u over 3 campaigns x 4 parameters has an RMS near 1 for honest uncertainties (a factor 2 either
    # way allowed for 12 values); the least-squares standard errors, which treat 60 neighbouring points of a
    # curve as independent, come out several times too small (the fault this replaces).
    fits, _ = virtual_fits
    z = [(r.parameters[k].value - v) / r.parameters[k].u for r in fits for k, v in TRUTH.items()]
    z_ls = [(r.parameters[k].value - v) / r.parameters[k].stderr for r in fits for k, v in TRUTH.items()]
    rms, rms_ls = math.sqrt(np.mean(np.square(z))), math.sqrt(np.mean(np.square(z_ls)))
    assert 0.5 < rms < 2.0, z
    assert rms_ls > 2.5 * rms, (rms_ls, rms)
    inside = sum(r.parameters[k].low <= v <= r.parameters[k].high for r in fits for k, v in TRUTH.items())
    assert inside >= 10  # of 12 (95 % intervals: 11.4 expected)


def test_bootstrap_intervals_do_not_depend_on_the_grid_step(virtual_fits):
    # The same curves on a grid 10x finer: no 95 % interval changes its width by more than 10 %, while the
    # least-squares standard errors shrink by about sqrt(10) = 3.2 (the fault described in the issue).
    fits, fine = virtual_fits
    coarse = fits[0]
    for k in TRUTH:
        a, b = coarse.parameters[k], fine.parameters[k]
        assert abs((b.high - b.low) / (a.high - a.low) - 1.0) <= 0.10, k
        assert 2.0 < a.stderr / b.stderr < 4.5, k
    assert coarse.bootstrap.block_length == pytest.approx(fine.bootstrap.block_length, rel=0.35)


def test_correlation_matrix_and_outputs(virtual_fits, tmp_path):
    res = virtual_fits[0][0]
    b = res.bootstrap
    assert b.names == ("A", "B", "n", "C") and b.correlation.shape == (4, 4) and b.failed == 0
    # Pearson coefficients of the draws (numpy's corrcoef as the reference)
    np.testing.assert_allclose(b.correlation, np.corrcoef(b.samples, rowvar=False))
    # A and n trade off in a hardening fit (common practice); the matrix is what the files and the console show
    assert res.correlations[("A", "n")] > 0.5
    text = F.fit_report(res)
    assert "A_MPa" in text and f"{b.correlation[0, 2]:.3f}" in text
    js = F.fit_to_dict(res)
    assert js["uncertainty"]["correlation_matrix"]["parameters"] == ["A_MPa", "B_MPa", "n", "C"]
    assert js["uncertainty"]["block_length_plastic_strain"] == pytest.approx(b.block_length)
    assert "bootstrap over whole curves" in " ".join(res.notes)


def test_no_draws_keeps_only_labelled_least_squares_errors(tmp_path):
    stress = lambda ep, r, T: jc(ep, r, T, **CU, Tm=1356.0)  # noqa: E731
    curves = F.load_curves(make_campaign(tmp_path / "c", stress, [1.0, 1e3, 3e3], [TR], noise=1e6))
    res = F.fit_curves(curves, "johnson-cook", draws=0)
    assert res.bootstrap is None and res.parameters["A"].u is None and res.parameters["A"].stderr > 0
    assert "not an uncertainty" in F.fit_report(res)


# --------------------------------------------------------------------------- weights from the curves' uncertainty
def test_uncertainty_weights_are_weighted_least_squares(tmp_path):
    # curves.csv with the reduction's u_true_stress_MPa column: one curve's u twice the others'. The fit with
    # weighting="uncertainty" is the weighted least-squares fit with weights 1/u^2, as scipy's curve_fit computes
    # it (sigma = u); points on the grid nodes, so the grid leaves the data as they are, and each node weighs by
    # the length of curve it stands for: the trapezoidal rule's weights, 1/2 at the two ends (Press et al. 2007,
    # Numerical Recipes, 3rd ed., eq. 4.1.11; from memory), i.e. sigma = u / sqrt(weight).
    from scipy.optimize import curve_fit

    rng = np.random.default_rng(5)
    ep = np.arange(1, 61) * 0.005
    data = []
    for i, (r, u) in enumerate(((1.0, 1.0), (1e3, 2.0), (3e3, 1.0))):
        sig = jc(ep, r, TR, **CU, Tm=1356.0) + rng.normal(0.0, u * 1e6, ep.size)
        folder = write_shot(tmp_path / "c" / "shots" / f"S{i}", f"S{i}", ep, sig, r, T=TR, E_summary=120e9)
        df = pd.read_csv(folder / "curves.csv")
        df["u_true_stress_MPa"] = u
        df.to_csv(folder / "curves.csv", index=False)
        trapezoid = np.ones(ep.size)
        trapezoid[[0, -1]] = 0.5
        data.append((np.full(ep.size, r), sig, u * 1e6 / np.sqrt(trapezoid)))
    res = F.fit_curves(F.load_curves(tmp_path / "c"), "johnson-cook", weighting="uncertainty", draws=0)
    rate, sig, u = (np.concatenate(a) for a in zip(*data))
    x = np.vstack([np.tile(ep, 3), rate])
    p, _ = curve_fit(lambda x, A, B, n, C: jc(x[0], x[1], TR, A, B, n, C, 1.0, Tm=1356.0), x, sig,
                     p0=[100e6, 300e6, 0.3, 0.02], sigma=u)
    for k, v in zip("ABnC", p):
        assert res.parameters[k].value == pytest.approx(v, rel=1e-5), k
    pts = F.fit_curves(F.load_curves(tmp_path / "c"), "johnson-cook", draws=0)
    assert abs(pts.parameters["C"].value - res.parameters["C"].value) > 1e-6  # the weights do change the fit


def test_uncertainty_weights_without_the_column_fail_in_one_line(tmp_path, capsys):
    from shpb.cli import main

    stress = lambda ep, r, T: jc(ep, r, T, **CU, Tm=1356.0)  # noqa: E731
    make_campaign(tmp_path / "c", stress, [1.0, 1e3], [TR])
    with pytest.raises(InputError, match=r"no column 'u_true_stress_MPa'") as e:
        F.fit_curves(F.load_curves(tmp_path / "c"), "johnson-cook", weighting="uncertainty")
    assert e.value.source.endswith("curves.csv")
    rc = main(["fit", str(tmp_path / "c"), "--weighting", "uncertainty", "--out", str(tmp_path / "f")])
    err = capsys.readouterr().err
    assert rc == 2 and len(err.strip().splitlines()) == 1 and "u_true_stress_MPa" in err and "curves.csv" in err


# --------------------------------------------------------------------------- Johnson-Cook m with heating
def test_m_is_not_identifiable_from_heating_at_one_temperature_and_the_note_says_so(tmp_path):
    # Shots all at room temperature with adiabatic heating (Taylor & Quinney 1934, beta 0.9; about 20 K rise):
    # the heating along a curve is the only handle on m. Data made with m = 1 (Johnson & Cook 1983 OFHC copper)
    # and per-shot stress scale errors of 1 %: fits at m = 1, 2 and 4 describe them within 3 % RMS of each other
    # while n moves by more than 10 %, so the data do not identify m; the fit fixes it and its note gives A, B, n,
    # C at m = 0.5, 1, 2, each equal to a fit with that m held.
    from shpb.fit import Curve, CurveList

    rho, cp, beta = 8960.0, 385.0, 0.9
    ep = np.linspace(0.002, 0.3, 300)

    def heated(r):  # dT/deps = beta sigma / (rho cp), explicit midpoint steps of 0.001 (converged to 0.1 %)
        T, out = TR, []
        for a, b in zip(np.r_[0.0, ep[:-1]], ep):
            s_mid = jc(max(0.5 * (a + b), 1e-9), r, T + 0.5 * beta * jc(max(a, 1e-9), r, T, **CU, Tm=1356.0)
                       / (rho * cp) * (b - a), **CU, Tm=1356.0)
            T += beta * s_mid / (rho * cp) * (b - a)
            out.append(jc(b, r, T, **CU, Tm=1356.0))
        return np.array(out)

    base = {r: heated(r) for r in (1e-3, 1e3, 3e3, 5e3)}
    for seed in (1, 3):
        rng = np.random.default_rng(seed)
        curves = CurveList([Curve(f"H{i}", ep, s * (1 + 0.01 * rng.standard_normal()) + rng.normal(0, 1e6, ep.size),
                                  r, TR, density=rho) for i, (r, s) in enumerate(base.items())])
        curves = F.with_adiabatic_heating(F.resample_curves(curves, 0.005), cp, beta=beta)
        fits = {m: F.fit_curves(curves, "johnson-cook", melt_temperature=1356.0, fixed={"m": m}, draws=0)
                for m in (1.0, 2.0, 4.0)}
        rms = [f.rms for f in fits.values()]
        assert max(rms) / min(rms) < 1.03, rms
        assert abs(fits[4.0].parameters["n"].value / fits[1.0].parameters["n"].value - 1) > 0.10
    res = F.fit_curves(curves, "johnson-cook", melt_temperature=1356.0, draws=0)
    assert not res.parameters["m"].varied and res.parameters["m"].value == 1.0
    text = " ".join(res.notes)
    assert "thermal term is 1" not in text and "m = 1 is an assumption" in text and "Taylor-Quinney" in text
    half = F.fit_curves(curves, "johnson-cook", melt_temperature=1356.0, fixed={"m": 0.5}, draws=0)
    p = half.parameters
    assert (f"m = 0.5: A {p['A'].value / 1e6:.4g} MPa, B {p['B'].value / 1e6:.4g} MPa, n {p['n'].value:.3g}, "
            f"C {p['C'].value:.3g}") in text
    assert "lowest at" not in text  # RMS within 3 %: no m is favoured
    # Isothermal curves fitted as if heated: a large m (little softening at T* ~ 0.02) fits clearly better, and
    # the note says so as a hint while m stays fixed
    stress = lambda ep, r, T: jc(ep, r, T, **CU, Tm=1356.0)  # noqa: E731
    iso = F.load_curves(make_campaign(tmp_path / "iso", stress, [1e-3, 1e3, 3e3, 5e3], [TR], noise=0.5e6))
    res = F.fit_curves(F.with_adiabatic_heating(iso, cp, density=rho, beta=beta), "johnson-cook",
                       melt_temperature=1356.0, draws=0)
    assert "the RMS is lowest at m = 2 here" in " ".join(res.notes) and res.parameters["m"].value == 1.0


# --------------------------------------------------------------------------- errors shared by the shots of a bar set
def _shared_rig_curves(stress_u, strain_u, K=800e6, n=0.3):
    """Three exact power-law curves (Hollomon 1945; one rate) of one bar set with the given shared budget."""
    rng = np.random.default_rng(11)
    out = F.CurveList()
    for i, (lo, hi) in enumerate(((0.01, 0.15), (0.012, 0.18), (0.015, 0.2))):
        ep = np.arange(lo, hi, 1e-4)
        sig = K * ep**n + rng.normal(0.0, 1e4, ep.size)  # 0.01 MPa of noise: the scatter is all but nil
        out.append(F.Curve(name=f"S{i}", plastic_strain=ep, stress=sig, strain_rate=1000.0, temperature=TR,
                           shared_group="rig.toml | bars", shared_stress_u=stress_u, shared_strain_u=strain_u))
    return F.resample_curves(out)


def test_shared_bar_set_errors_reach_the_parameters_by_the_gum_law():
    # sigma = K eps_p^n from one bar set whose stress scale is off by d_s and strain scale by d_e (the same on
    # every shot): the data are K (1 + d_s) (eps_m / (1 + d_e))^n, so the fit finds K (1 + d_s)(1 + d_e)^-n and the
    # same n. By the GUM law of propagation (JCGM 100:2008, eq. 10) u(K)/K = sqrt(u_s^2 + (n u_e)^2) and u(n) = 0;
    # the bootstrap's shared terms (Monte Carlo, JCGM 101:2008) must give that within their sampling error
    # (2000 draws: about 1.6 % on a standard deviation, so 6 % allowed).
    n, us, ue = 0.3, 0.01, 0.02
    res = F.fit_curves(_shared_rig_curves(us, ue, n=n), "power-law", fixed={"C": 0.0}, draws=2000)
    K = res.parameters["K"]
    assert K.u / K.value == pytest.approx(math.hypot(us, n * ue), rel=0.06)
    assert res.parameters["n"].u < 1e-3 * n
    assert len(res.bootstrap.shared) == 2 and "bar set bars" in res.bootstrap.shared[0]
    # without the shared terms (or with no budget) only the scatter is left: a hundred times smaller here
    off = F.fit_curves(_shared_rig_curves(us, ue, n=n), "power-law", fixed={"C": 0.0}, draws=300,
                       shared_errors=False)
    assert off.parameters["K"].u / off.parameters["K"].value < 0.1 * us and off.bootstrap.shared == ()
    bare = F.fit_curves(_shared_rig_curves(None, None, n=n), "power-law", fixed={"C": 0.0}, draws=300)
    assert bare.bootstrap.shared == () and "carry no uncertainty budget" in " ".join(bare.notes)


def test_shared_errors_are_read_from_the_shots_summaries_and_can_be_left_out(tmp_path):
    # The wiring from the reduction's summary (uncertainty.relative_by_group, inputs.barset) through shpb fit to its
    # files: with the terms a stress scale of 1 % shared by every shot must widen A well beyond the scatter-only u
    # (the GUM law above gives u(A)/A of about 1 % for a scale common to all curves; common practice that shots of
    # one bar set share its calibration), and --no-shared-errors must leave them out.
    import json

    from shpb.cli import main

    stress = lambda ep, r, T: jc(ep, r, T, **CU, Tm=1356.0)  # noqa: E731
    root = make_campaign(tmp_path / "c", stress, [1.0, 1e3, 3e3], [TR], noise=2e5)
    for summary in (root / "shots").glob("*/summary.json"):
        data = json.loads(summary.read_text())
        data["inputs"]["barset"] = {"name": "CU-X bars (fictional)", "source": "bars.toml"}
        data["uncertainty"] = {"relative_by_group": {"stress": {"bar set": 0.01, "specimen": 0.002},
                                                     "strain": {"bar set": 0.0, "specimen": 0.002}}}
        summary.write_text(json.dumps(data))
    runs = {}
    for flag in ("--shared-errors", "--no-shared-errors"):
        out = tmp_path / flag.strip("-")
        assert main(["fit", str(root), "--model", "johnson-cook", "--draws", "300", flag, "--no-figure",
                     "--out", str(out)]) == 0
        runs[flag] = json.loads((out / "fit_parameters.json").read_text())
    on, off = runs["--shared-errors"], runs["--no-shared-errors"]
    assert on["uncertainty"]["shared_terms"] == ["stress scale of bar set CU-X bars (fictional) (1 %, 3 shots)"]
    assert off["uncertainty"]["shared_terms"] == []
    assert any("left out on request" in n for n in off["notes"])
    a_on, a_off = on["parameters"]["A_MPa"], off["parameters"]["A_MPa"]
    assert a_on["u"] > 3 * a_off["u"] and a_on["u"] == pytest.approx(0.01 * a_on["value"], rel=0.25)
