"""Fits: round trips, a published case, crossings, the Jacobian through links and bounds."""

import numpy as np
import pytest

from finefit import Model
from finefit.fitting.fit import FitProblem
from finefit.fitting.settings import FitOptions, ParameterSetting
from finefit.fitting.synthetic import INVENTED_IRON_GROUP, synthetic_levels
from finefit.session import Session

TRUE_3D = {
    "3d2: Eav": 0.0, "3d2: F2(3d)": 62000.0, "3d2: F4(3d)": 39000.0, "3d2: zeta(3d)": 320.0,
    "3d 4s: Eav": 15000.0, "3d 4s: G2(3d,4s)": 11000.0, "3d 4s: zeta(3d)": 300.0,
    "3d2 | 3d 4s: R2(3d3d,3d4s)": -3500.0,
}


def test_round_trip_recovers_parameters_and_noise():
    # invented test data: levels from known parameters plus Gaussian noise of known size
    model = Model(["3d2", "3d 4s"])
    noise = 3.0
    levels = synthetic_levels(model, TRUE_3D, noise=noise, seed=7)
    rng = np.random.default_rng(1)
    settings = {}
    for n, v in TRUE_3D.items():
        start = v + 400.0 if "Eav" in n else v * (1 + 0.04 * rng.standard_normal())
        settings[n] = ParameterSetting(value=start, vary=True)
    r = FitProblem({"even": model}, settings, levels, FitOptions()).fit()
    assert r.converged
    assert r.n_levels == len(levels)
    assert r.n_free == len(TRUE_3D)
    for n, v in TRUE_3D.items():
        assert abs(r.values[n] - v) < 4 * r.errors[n], n
    # 14 levels, 8 free: sigma scatters around the injected noise (chi2 with 6 dof)
    assert 0.3 * noise < r.sigma < 2.0 * noise
    assert r.strong_correlations is not None
    names, corr = r.correlation
    assert corr.shape == (8, 8)
    assert np.allclose(np.diag(corr), 1.0)


def test_carbon_2p2_three_parameters(carbon_session):
    # published case: C I 2p2 (Moore 1971) with E_av, F2(2p), zeta(2p). A single 2p2
    # configuration cannot give the observed (1S-1D)/(1D-3P) ratio of about 1.13 against
    # 3/2 in pure Slater theory (Condon & Shortley 1935), so sigma stays at hundreds of cm-1.
    r = carbon_session.fit()
    assert r.converged
    assert r.n_levels == 5 and r.n_free == 3
    assert 200 < r.sigma < 2000
    assert 30000 < r.values["2p2: F2(2p)"] < 50000  # F^2 of C I about 0.8 x HF  # common practice
    for row in r.levels:
        assert row.purity > 0.99  # near-LS coupling in the light atom


def test_carbon_2p2_with_trees_correction(carbon_session):
    carbon_session.set_parameter("2p2: alpha(2p)", 0.0, vary=True)
    r = carbon_session.fit()
    assert r.converged
    assert r.sigma < 5.0
    # 3P intervals 16.4 and 27.0 cm-1 give zeta about 29 cm-1 (Landé interval rule)
    assert 20 < r.values["2p2: zeta(2p)"] < 40
    assert 30000 < r.values["2p2: F2(2p)"] < 50000
    assert all(row.purity > 0.999 for row in r.levels)
    assert all(abs(row.residual) < 10 for row in r.levels)


def _crossing_problem(follow: bool):
    model = Model(["3d2", "3d 4s"])
    true = dict(TRUE_3D)
    true["3d2 | 3d 4s: R2(3d3d,3d4s)"] = 0.0  # no mixing: the J=2 levels cross exactly
    levels = synthetic_levels(model, true, noise=0.0)
    settings = {n: ParameterSetting(value=v, vary=False) for n, v in true.items()}
    # start with 3d 4s far below: its J = 2 levels start below the 3d2 ones and must
    # cross them on the way to the solution
    settings["3d 4s: Eav"] = ParameterSetting(value=-30000.0, vary=True)
    opts = FitOptions(follow_eigenvectors=follow)
    return FitProblem({"even": model}, settings, levels, opts), true


def test_eigenvalue_crossing_keeps_attachments():
    prob, true = _crossing_problem(follow=True)
    r = prob.fit()
    assert r.converged
    assert r.sigma < 1e-4
    assert r.values["3d 4s: Eav"] == pytest.approx(true["3d 4s: Eav"], abs=1e-3)
    assert all(row.calc_label == row.label for row in r.levels)


def test_crossing_without_following_goes_wrong():
    # the same fit with attachments frozen to eigenvalue order must fail to recover
    prob, true = _crossing_problem(follow=False)
    r = prob.fit()
    assert r.sigma > 1.0 or any(row.calc_label != row.label for row in r.levels)


def test_jacobian_through_links_and_bounds_matches_finite_differences():
    model = Model(["3d2", "3d 4s"])
    levels = synthetic_levels(model, TRUE_3D, noise=5.0, seed=3)
    settings = {n: ParameterSetting(value=v, vary=True) for n, v in TRUE_3D.items()}
    for n in ("3d2: F2(3d)", "3d2: F4(3d)"):
        settings[n].link = "Fk"
    settings["3d2: zeta(3d)"].link = "zeta"
    settings["3d 4s: zeta(3d)"].link = "zeta"
    settings["3d 4s: G2(3d,4s)"].min = 10000.0
    settings["3d 4s: G2(3d,4s)"].max = 12000.0
    prob = FitProblem({"even": model}, settings, levels, FitOptions())
    assert len(prob.variables) == 6  # Eav x2, the Fk group, the zeta group, G2 and R2
    v0 = prob.v_start * 1.01
    _, J = prob.evaluate(v0, jacobian=True, commit=False)
    for j in range(v0.size):
        h = 1e-4 * max(1.0, abs(v0[j]))
        vp, vm = v0.copy(), v0.copy()
        vp[j] += h
        vm[j] -= h
        ep, _ = prob.evaluate(vp, jacobian=False, commit=False)
        em, _ = prob.evaluate(vm, jacobian=False, commit=False)
        assert J[:, j] == pytest.approx((ep - em) / (2 * h), rel=1e-6, abs=1e-6)
    r = prob.fit()
    assert r.converged
    # linked parameters keep their ratio
    assert r.values["3d2: F4(3d)"] / r.values["3d2: F2(3d)"] == pytest.approx(39000 / 62000)
    assert r.values["3d2: zeta(3d)"] == pytest.approx(
        r.values["3d 4s: zeta(3d)"] * 320.0 / 300.0
    )
    assert 10000.0 <= r.values["3d 4s: G2(3d,4s)"] <= 12000.0


def test_parameter_at_bound_is_reported():
    model = Model(["3d2", "3d 4s"])
    levels = synthetic_levels(model, TRUE_3D, noise=1.0, seed=3)
    settings = {n: ParameterSetting(value=v, vary=True) for n, v in TRUE_3D.items()}
    settings["3d 4s: G2(3d,4s)"] = ParameterSetting(value=8000.0, vary=True, max=9000.0)
    r = FitProblem({"even": model}, settings, levels, FitOptions()).fit()
    assert r.status["3d 4s: G2(3d,4s)"] == "at bound"
    assert r.values["3d 4s: G2(3d,4s)"] == pytest.approx(9000.0)
    assert any("at a bound" in w for w in r.warnings)


def test_undetermined_parameter_is_named_not_nan():
    model = Model(["3d2", "3d 4s"])
    levels = [lv for lv in synthetic_levels(model, TRUE_3D, noise=1.0, seed=3)
              if lv.configuration == "3d2"]
    settings = {n: ParameterSetting(value=v, vary=True) for n, v in TRUE_3D.items()}
    settings["3d2 | 3d 4s: R2(3d3d,3d4s)"].value = 0.0
    settings["3d2 | 3d 4s: R2(3d3d,3d4s)"].vary = False
    r = FitProblem({"even": model}, settings, levels, FitOptions()).fit()
    assert "3d 4s: G2(3d,4s)" in r.undetermined
    assert r.status["3d 4s: G2(3d,4s)"] == "undetermined"
    assert np.isinf(r.errors["3d 4s: G2(3d,4s)"])
    assert all(np.isfinite(r.errors[n]) for n in ("3d2: F2(3d)", "3d2: F4(3d)"))
    import json

    json.dumps(r.to_dict(), allow_nan=False)  # no NaN or inf leaks into JSON


def test_not_converged_is_reported():
    model = Model(["3d2", "3d 4s"])
    levels = synthetic_levels(model, TRUE_3D, noise=1.0, seed=3)
    settings = {n: ParameterSetting(value=v * 1.3, vary=True) for n, v in TRUE_3D.items()}
    r = FitProblem({"even": model}, settings, levels, FitOptions(max_iterations=2)).fit()
    assert not r.converged
    assert any("did not converge" in w for w in r.warnings)


def test_misassigned_level_is_exposed():
    # invented data: a three-configuration even set; swap the labels of two J = 5/2
    # levels a few hundred cm-1 apart. The pair stands out with the largest |O-C|.
    model = Model(["3d6 4s", "3d7", "3d5 4s2"])
    true = FE_LIKE
    levels = synthetic_levels(model, true, noise=2.0, seed=5, max_levels=80)
    j52 = sorted((lv for lv in levels if lv.J == 2.5), key=lambda lv: lv.energy)
    gaps = [(j52[i + 1].energy - j52[i].energy, i) for i in range(len(j52) - 1)
            if j52[i].label != j52[i + 1].label]
    gap, i = min(g for g in gaps if g[0] > 300)
    a, b = j52[i], j52[i + 1]
    a.label, b.label = b.label, a.label
    settings = {n: ParameterSetting(value=v, vary="R2" not in n and "alpha" not in n)
                for n, v in true.items()}
    r = FitProblem({"even": model}, settings, levels, FitOptions()).fit()
    worst = sorted(r.levels, key=lambda row: -abs(row.residual))[:3]
    assert {a.id, b.id} & {row.id for row in worst}
    assert abs(worst[0].residual) > 3 * r.sigma
    a.label, b.label = b.label, a.label  # with the right labels the fit is at the noise
    good = FitProblem({"even": model}, settings, levels, FitOptions()).fit()
    assert good.sigma < 4.0 < r.sigma / 10


FE_LIKE = INVENTED_IRON_GROUP  # invented values (finefit.fitting.synthetic)


def test_predictions_have_uncertainties():
    model = Model(["3d2", "3d 4s"])
    levels = synthetic_levels(model, TRUE_3D, noise=2.0, seed=4)
    kept = levels[:-3]
    settings = {n: ParameterSetting(value=v, vary=True) for n, v in TRUE_3D.items()}
    r = FitProblem({"even": model}, settings, kept, FitOptions()).fit()
    assert len(r.predictions) == 3
    for p, lv in zip(sorted(r.predictions, key=lambda p: p.energy), levels[-3:], strict=True):
        assert p.uncertainty > 0
        assert abs(p.energy - lv.energy) < 5 * p.uncertainty + 10


def test_session_api_minimal_contract():
    # CONVENTIONS.md "Minimal session API"
    s = Session.new(["2p2"], Z=6, charge=0)
    s.set_parameter("2p2: F2(2p)", 45000.0, vary=True)
    s.add_level(energy=43.4, J=2, parity="even", configuration="2p2", label="2p2 3P",
                uncertainty=0.1)
    s.add_level(energy=10192.63, J=2, parity="even", configuration="2p2", label="2p2 1D")
    s.add_level(energy=21648.01, J=0, parity="even", configuration="2p2", label="2p2 1S")
    r = s.fit()
    assert r.converged in (True, False)
    assert r.n_levels == 3
    row = r.levels[0]
    assert {row.energy_obs, row.label} == {43.4, "2p2 3P"}
    assert isinstance(r.values["2p2: F2(2p)"], float)
    assert isinstance(r.errors["2p2: F2(2p)"], float)
    names, matrix = r.correlation
    assert matrix.shape == (len(names), len(names))
