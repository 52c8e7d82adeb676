"""Sequences: the laws against Z, a synthetic sequence from a known law, and the real 3d2
sequence Sc II - Ti III - V IV (published levels in tests/data/levels)."""

import math

import numpy as np
import pytest

import finefit
from finefit.errors import FinefitError
from finefit.fitting.synthetic import synthetic_levels
from finefit.fitting.trends import fit_law, propagate
from finefit.sequence import fit_sequence, new_member, predict_member
from finefit.session import Session, model_for


def test_law_weights_are_those_of_linear_interpolation():
    # closed form of the straight line through two points (Lagrange interpolation):
    # at the midpoint the weights are (1/2, 1/2); at x = 3 from x = 1, 2 they are (-1, 2)
    law = fit_law("p", "value", [1.0, 2.0], [10.0, 14.0], [1.0, 2.0])
    assert np.allclose(law.weights_at(1.5), [0.5, 0.5])
    assert np.allclose(law.weights_at(3.0), [-1.0, 2.0])
    value, unc = law(3.0)
    assert value == pytest.approx(18.0)
    assert unc == pytest.approx(math.hypot(1.0, 4.0))  # sqrt((-1*1)^2 + (2*2)^2)
    assert law.dof == 0 and law.scale == 1.0


def test_law_scatter_widens_by_the_birge_ratio():
    # three points off a line: chi2/dof > 1 multiplies the variance by it (common practice)
    x, y, e = [1.0, 2.0, 3.0], [0.0, 3.0, 2.0], [1.0, 1.0, 1.0]
    law = fit_law("p", "value", x, y, e)
    A = np.vander(np.array(x), 2, increasing=True)
    c, res, *_ = np.linalg.lstsq(A, np.array(y), rcond=None)  # reference: numpy lstsq
    assert law.chi2 == pytest.approx(float(res[0]))
    assert law.scale == pytest.approx(float(res[0]) / 1)
    v, u = law(2.0)
    assert v == pytest.approx(c[0] + 2 * c[1])
    assert u == pytest.approx(math.sqrt(law.scale / 3))  # mean of 3 unit-error points


def test_propagation_keeps_the_covariance_within_a_member():
    a = fit_law("a", "value", [1.0, 2.0], [1.0, 2.0], [1.0, 1.0])
    b = fit_law("b", "value", [1.0, 2.0], [5.0, 6.0], [1.0, 1.0])
    cov_m = [np.array([[1.0, 0.8], [0.8, 1.0]])] * 2
    cov = propagate([a, b], 3.0, cov_m, 2)
    # weights (-1, 2): variance 1 + 4 = 5 for each, covariance 0.8 * 5
    assert np.allclose(cov, [[5.0, 4.0], [4.0, 5.0]])


def test_bad_laws_are_refused():
    with pytest.raises(FinefitError, match="no member"):
        fit_law("p", "value", [], [], [])
    with pytest.raises(FinefitError, match="positive"):
        fit_law("p", "value", [1.0], [1.0], [0.0])


# ----------------------------------------------------------------------------- synthetic
# INVENTED sequence: 3d2 ions (20 electrons) whose F2, F4, zeta are Hartree-Fock times a
# ratio linear in Z, and whose Trees alpha is linear in Z; levels with 3 cm-1 noise.
TRUE_RATIO = {"3d2: F2(3d)": (0.78, 0.02), "3d2: F4(3d)": (0.74, 0.025),
              "3d2: zeta(3d)": (0.90, -0.01)}
TRUE_ALPHA = (60.0, 4.0)
U = 3.0


def true_values(s: Session) -> dict[str, float]:
    dz = s.ion.Z - 22
    vals = {n: s.parameters[n].ab_initio * (a + b * dz) for n, (a, b) in TRUE_RATIO.items()}
    vals["3d2: alpha(3d)"] = TRUE_ALPHA[0] + TRUE_ALPHA[1] * dz
    vals["3d2: Eav"] = 10000.0
    return vals


def synthetic_member(Z: int, seed: int) -> tuple[Session, dict[str, float]]:
    s = Session.new(["3d2"], Z=Z, charge=Z - 20)
    s.fill_ab_initio(set_values=False)
    vals = true_values(s)
    for lv in synthetic_levels(model_for(("3d2",)), vals, noise=U, seed=seed):
        s.add_level(energy=lv.energy, J=lv.J, parity="even", label=lv.label, uncertainty=U)
    s.options.weighting = "uncertainty"
    s.options.scale_covariance = False
    for n, v in vals.items():
        s.set_parameter(n, v * 1.03, vary=True)
    return s, vals


def test_synthetic_law_and_extrapolated_member_are_recovered():
    members = [synthetic_member(Z, seed) for Z, seed in ((21, 1), (22, 2), (23, 3), (24, 4))]
    analysis = fit_sequence([s for s, _ in members])
    assert all(m["converged"] for m in analysis.members)
    # the law: each ratio at the extrapolated Z = 25 within 3 standard uncertainties, and
    # the uncertainty small enough that a wrong law would fail (common practice: 3 sigma)
    for n, (a, b) in TRUE_RATIO.items():
        law = analysis.laws[n]
        assert law.kind == "ratio" and law.degree == 1
        value, unc = law(25.0)
        assert abs(value - (a + 3 * b)) < 3 * unc, n
        assert unc < 0.02 * value, n
    alpha, ua = analysis.laws["3d2: alpha(3d)"](25.0)
    assert analysis.laws["3d2: alpha(3d)"].kind == "value"
    assert abs(alpha - (TRUE_ALPHA[0] + 3 * TRUE_ALPHA[1])) < 3 * ua
    # the extrapolated member's levels (relative to its ground level)
    new = new_member(analysis, 25, 5)
    truth, _ = synthetic_member(25, 5)
    true_sol = model_for(("3d2",)).solve(true_values(truth))
    ground = true_sol.levels[0].energy
    r = new.report()
    assert r.covariance_note == "uncertainties propagated from the sequence trends"
    assert len(r.predictions) == 9
    pred = {(p.label, p.J): p for p in r.predictions}
    for lev in true_sol.levels[1:]:
        p = pred[(lev.label, lev.J)]
        assert abs(p.energy - (lev.energy - ground)) < 3 * p.uncertainty, (lev.label, lev.J)
        assert 0 < p.uncertainty < 0.01 * max(p.energy, 1000.0)


def test_new_member_session_carries_starts_ab_initio_and_the_trend_record(tmp_path):
    members = [synthetic_member(Z, Z)[0] for Z in (21, 22, 23)]
    new = predict_member(members, Z=24, charge=4, name="invented 24")
    assert new.ion.Z == 24 and new.ion.charge == 4 and new.configurations == ["3d2"]
    hf = finefit.hartree_fock("3d2", Z=24, charge=4).parameters("3d2")
    for n in TRUE_RATIO:
        assert new.parameters[n].ab_initio == pytest.approx(hf[n], rel=1e-9)
        assert 0.6 < new.parameters[n].value / hf[n] < 1.0
        assert new.parameters[n].vary
    rec = new.parameter_set("sequence trends")
    assert rec.errors["3d2: F2(3d)"] > 0
    path = new.save(tmp_path / "new.toml")
    back = finefit.load(path)
    assert back.parameter_set("sequence trends").values == pytest.approx(rec.values)
    # once the values change the trend uncertainties no longer apply
    new.set_parameter("3d2: F2(3d)", new.parameters["3d2: F2(3d)"].value + 100.0)
    assert new.report().covariance_note != "uncertainties propagated from the sequence trends"


def test_members_of_different_sequences_are_refused():
    a = Session.new(["3d2"], Z=22, charge=2)
    b = Session.new(["3d3"], Z=23, charge=2)
    with pytest.raises(FinefitError, match="isoelectronic"):
        fit_sequence([a, b])
    c = Session.new(["3d 4s"], Z=23, charge=3)
    with pytest.raises(FinefitError, match="same ones"):
        fit_sequence([a, c])
    with pytest.raises(FinefitError, match="at least two"):
        fit_sequence([a])


# ----------------------------------------------------------------------------- real 3d2
def test_real_3d2_members_fitted(real_3d2):
    analysis = fit_sequence(real_3d2)
    assert [m["Z"] for m in analysis.members] == [21, 22, 23]
    for m in analysis.members:
        assert m["converged"] and m["n_levels"] == 9  # the nine 3d2 levels of each list
        assert m["sigma"] is not None and m["sigma"] < 400.0
    # F2 / HF rises along the sequence (0.72 -> 0.82): the usual drift towards 1 with
    # growing charge, correlation mattering less (common practice)
    ratios = [m["values"][m["names"].index("3d2: F2(3d)")]
              / m["ab_initio"][m["names"].index("3d2: F2(3d)")] for m in analysis.members]
    assert ratios[0] < ratios[1] < ratios[2]


def test_middle_member_predicted_from_its_neighbours(real_3d2):
    # Ti III (evaluated level compilation, Ti III) predicted from Sc II and V IV
    # (evaluated level compilations, Sc II and V IV)
    sc, ti, v = real_3d2
    analysis = fit_sequence([sc, v])
    hf = {n: p.ab_initio for n, p in ti.parameters.items()}
    values, errors, _ = analysis.predict(22, hf)
    fitted = ti.fit()
    for n in ("3d2: F2(3d)", "3d2: F4(3d)", "3d2: zeta(3d)"):
        diff = values[n] - fitted.values[n]
        combined = math.hypot(errors[n], fitted.errors[n])
        print(f"{n}: predicted {values[n]:.1f} +- {errors[n]:.1f}, fitted {fitted.values[n]:.1f}"
              f" +- {fitted.errors[n]:.1f}; difference {diff / combined:+.2f} combined sigma")
        # within two combined standard uncertainties (95 %); F2 is the tightest (about
        # 1.7): Sc II's 3d2 is perturbed by 3d 4s, which this one-configuration model lacks
        assert abs(diff) < 2 * combined, n
        assert errors[n] < 0.5 * abs(values[n]) or n == "3d2: zeta(3d)"


def test_next_member_cr_v_is_predicted_with_uncertainties(real_3d2, capsys):
    new = predict_member(real_3d2, Z=24, charge=4, name="Cr V")
    r = new.report()
    rec = new.parameter_set("sequence trends")
    with capsys.disabled():
        print("\nCr V 3d2 predicted from Sc II, Ti III, V IV:")
        for n in ("3d2: F2(3d)", "3d2: F4(3d)", "3d2: zeta(3d)", "3d2: alpha(3d)"):
            print(f"  {n} = {new.parameters[n].value:.1f} +- {rec.errors[n]:.1f}")
        for p in sorted(r.predictions, key=lambda p: p.energy):
            print(f"  {p.label} J={p.J:g}: {p.energy:.0f} +- {p.uncertainty:.0f} cm-1")
    # no published Cr V 3d2 levels are recalled here reliably enough to serve as check
    # values; the checks are the sequence's own: F^k keep growing with Z, the ground term
    # stays 3F2, and the uncertainties are finite and below 2 % of the level energies
    v4 = real_3d2[2].fit()
    assert new.parameters["3d2: F2(3d)"].value > v4.values["3d2: F2(3d)"]
    assert new.parameters["3d2: zeta(3d)"].value > v4.values["3d2: zeta(3d)"]
    low = min(r.predictions, key=lambda p: p.energy)
    assert (low.label, low.J) == ("3d2 3F", 2.0)
    for p in r.predictions:
        if p is not low:
            assert 0 < p.uncertainty < 0.02 * p.energy + 300.0


def test_parameters_fixed_in_every_member_stay_fixed():
    members = []
    for Z in (21, 22, 23):
        s, _ = synthetic_member(Z, Z)
        s.set_parameter("3d2: alpha(3d)", 55.0 + Z, vary=False)
        members.append(s)
    analysis = fit_sequence(members)
    assert "3d2: alpha(3d)" not in analysis.laws
    assert analysis.fixed["3d2: alpha(3d)"] == pytest.approx(77.0)  # mean of 76, 77, 78
    new = new_member(analysis, 24, 4)
    assert new.parameters["3d2: alpha(3d)"].value == pytest.approx(77.0)
    assert not new.parameters["3d2: alpha(3d)"].vary
    assert new.parameter_set("sequence trends").errors["3d2: alpha(3d)"] == 0.0


def test_linked_parameters_are_fully_correlated_in_the_member_covariance():
    from finefit.parallel import parameter_covariance

    s, vals = synthetic_member(22, 7)
    s.set_parameter("3d2: F2(3d)", link="Fk")
    s.set_parameter("3d2: F4(3d)", link="Fk")
    r = s.fit()
    cov = parameter_covariance(r, s.parameters)
    names = list(r.values)
    i, j = names.index("3d2: F2(3d)"), names.index("3d2: F4(3d)")
    e2, e4 = r.errors["3d2: F2(3d)"], r.errors["3d2: F4(3d)"]
    assert e2 > 0 and e4 > 0
    assert cov[i, i] == pytest.approx(e2**2) and cov[j, j] == pytest.approx(e4**2)
    assert cov[i, j] == pytest.approx(e2 * e4)  # x_F4 = ratio * x_F2: correlation 1
    k = names.index("3d2: zeta(3d)")
    assert cov[k, k] == pytest.approx(r.errors["3d2: zeta(3d)"] ** 2)


def test_members_without_ab_initio_values_get_hartree_fock_ones():
    members = []
    for Z in (22, 23):
        s, _ = synthetic_member(Z, Z)
        for n in s.parameters:
            s.set_parameter(n, ab_initio=None)
        members.append(s)
    analysis = fit_sequence(members)
    assert analysis.laws["3d2: F2(3d)"].kind == "ratio"
    hf = finefit.hartree_fock("3d2", Z=23, charge=3).parameters("3d2")
    m = analysis.members[1]
    assert m["ab_initio"][m["names"].index("3d2: F2(3d)")] == pytest.approx(hf["3d2: F2(3d)"])
