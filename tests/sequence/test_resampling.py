"""Monte-Carlo and bootstrap refits: agreement with the covariance where the problem is
nearly linear, a flag where strong mixing makes it nonlinear, and the dask path."""

import numpy as np
import pytest

from finefit.errors import FinefitError
from finefit.fitting.resampling import bootstrap_counts, monte_carlo_draws, summarise
from finefit.fitting.synthetic import synthetic_levels
from finefit.refits import resample
from finefit.sequence import fit_sequence
from finefit.session import Session, model_for

# INVENTED 3d2 ion (levels from these values plus noise; not a real spectrum)
LINEAR = {"3d2: Eav": 10000.0, "3d2: F2(3d)": 60000.0, "3d2: F4(3d)": 38000.0,
          "3d2: zeta(3d)": 200.0}


def linear_case() -> Session:
    s = Session.new(["3d2"], Z=22, charge=2)
    for lv in synthetic_levels(model_for(("3d2",)), LINEAR, noise=2.0, seed=3):
        s.add_level(energy=lv.energy, J=lv.J, parity="even", label=lv.label, uncertainty=2.0)
    s.options.weighting = "uncertainty"
    s.options.scale_covariance = False  # the covariance of the stated uncertainties
    for n in s.parameters:  # the invented model has no effective operators
        if n not in LINEAR:
            s.set_parameter(n, 0.0, vary=False)
    for n, v in LINEAR.items():
        s.set_parameter(n, v * 1.02, vary=True)
    return s


def mixed_case() -> Session:
    """INVENTED 3d2 + 4s2: the 4s2 1S placed on the 3d2 1S and coupled by R2, so the two
    J = 0 states are strongly mixed (about 64/36); level uncertainties 40 cm-1."""
    vals = dict(LINEAR)
    e1s = next(lev.energy for lev in model_for(("3d2",)).solve(LINEAR).levels
               if lev.label == "3d2 1S")
    vals["4s2: Eav"] = e1s
    vals["3d2 | 4s2: R2(3d3d,4s4s)"] = 150.0
    s = Session.new(["3d2", "4s2"], Z=22, charge=2)
    for lv in synthetic_levels(model_for(("3d2", "4s2")), vals, noise=40.0, seed=5):
        s.add_level(energy=lv.energy, J=lv.J, parity="even", uncertainty=40.0)
    s.options.weighting = "uncertainty"
    s.options.scale_covariance = False
    for n in s.parameters:  # the invented model has no effective operators
        if n not in vals:
            s.set_parameter(n, 0.0, vary=False)
    for n, v in vals.items():
        s.set_parameter(n, v, vary=True)
    return s


def test_draws_are_reproducible_and_have_the_stated_spread():
    a = monte_carlo_draws([0.0, 10.0], [1.0, 3.0], 4000, seed=7)
    assert np.array_equal(a, monte_carlo_draws([0.0, 10.0], [1.0, 3.0], 4000, seed=7))
    # sample standard deviations within 5 sigma of their sampling error 1/sqrt(2N)
    assert np.std(a, axis=0, ddof=1) == pytest.approx([1.0, 3.0], rel=5 / np.sqrt(8000))
    c = bootstrap_counts(9, 100, seed=1)
    assert c.shape == (100, 9) and np.all(c.sum(axis=1) == 9)


def test_summary_flags_a_spread_beyond_a_factor_one_and_a_half():
    rng = np.random.default_rng(0)
    x = rng.standard_normal((400, 3)) * [1.0, 2.0, 0.5]
    s = summarise(["a", "b", "c"], [0.0, 0.0, 0.0], x, [1.0, 1.0, 1.0])
    assert [p.flagged for p in s] == [False, True, True]
    assert s[0].percentiles[2] == pytest.approx(np.median(x[:, 0]))


def test_monte_carlo_agrees_with_the_covariance_on_a_nearly_linear_case():
    res = resample(linear_case(), runs=100, method="montecarlo", seed=1)
    assert res.n_ok == 100 and not res.failures
    for p in res.parameters:
        # 100 refits estimate a spread to about 7 % (1/sqrt(2N)); 20 % is the target
        assert 0.8 < p.ratio < 1.2, (p.name, p.ratio)
        assert not p.flagged
    assert not res.flagged
    assert abs(res.parameters[1].mean - res.fit.values["3d2: F2(3d)"]) < 3 * (
        res.parameters[1].spread / np.sqrt(100))


def test_monte_carlo_flags_the_strongly_mixed_case():
    s = mixed_case()
    res = resample(s, runs=100, method="montecarlo", seed=1)
    j0 = [r for r in res.fit.levels if r.J == 0 and r.calc_label.endswith("1S")]
    assert len(j0) == 2 and all(r.purity < 0.75 for r in j0)  # strongly mixed
    flagged = {p.name: p for p in res.parameters if p.flagged}
    assert "4s2: Eav" in flagged, [(p.name, p.ratio) for p in res.parameters]
    assert flagged["4s2: Eav"].ratio < 1 / 1.5
    assert any("differ by more than a factor 1.5" in w for w in res.warnings)
    # the unmixed part stays linear: zeta from the 3F and 3P fine structure agrees
    zeta = next(p for p in res.parameters if p.name == "3d2: zeta(3d)")
    assert not zeta.flagged


def test_bootstrap_resamples_levels():
    res = resample(linear_case(), runs=40, method="bootstrap", seed=2)
    assert res.method == "bootstrap" and res.n_ok + len(res.failures) == 40
    assert res.n_ok >= 10
    again = resample(linear_case(), runs=40, method="bootstrap", seed=2)
    assert np.array_equal(res.parameter_samples, again.parameter_samples)
    for p in res.parameters:
        assert np.isfinite(p.spread) and p.spread > 0
    d = res.to_dict()
    assert d["method"] == "bootstrap" and len(d["parameters"]) == 4


def test_bad_requests_are_refused():
    with pytest.raises(FinefitError, match="method"):
        resample(linear_case(), runs=10, method="jackknife")
    with pytest.raises(FinefitError, match="at least 2"):
        resample(linear_case(), runs=1)


def test_dask_path_gives_the_serial_numbers():
    from distributed import LocalCluster

    s = linear_case()
    serial = resample(s, runs=12, seed=4)
    members = []
    for Z in (21, 22, 23):
        m = Session.new(["3d2"], Z=Z, charge=Z - 20)
        vals = dict(LINEAR, **{"3d2: F2(3d)": 50000.0 + 5000.0 * (Z - 21)})
        for lv in synthetic_levels(model_for(("3d2",)), vals, noise=2.0, seed=Z):
            m.add_level(energy=lv.energy, J=lv.J, parity="even", label=lv.label)
        for n, v in vals.items():
            m.set_parameter(n, v * 1.01, vary=True, ab_initio=v / 0.8 if "Eav" not in n
                            else "keep")
        members.append(m)
    seq_serial = fit_sequence(members)
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                      dashboard_address=None) as cluster:
        seen = []
        remote = resample(s, runs=12, seed=4, scheduler=cluster.scheduler_address,
                          progress=lambda d, n: seen.append((d, n)))
        seq_remote = fit_sequence(members, scheduler=cluster.scheduler_address)
    assert np.array_equal(serial.parameter_samples, remote.parameter_samples)
    assert np.array_equal(serial.level_samples, remote.level_samples)
    assert seen and seen[-1] == (12, 12)
    for a, b in zip(seq_serial.members, seq_remote.members, strict=True):
        assert a["values"] == b["values"] and a["covariance"] == b["covariance"]
