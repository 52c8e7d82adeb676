"""Electric-dipole line strengths: multiplet patterns, sum rules, hydrogen Lyman alpha."""

import numpy as np
import pytest
from sympy.physics.wigner import wigner_6j

from finefit import Model
from finefit.lines.transitions import DipoleModel, line_strengths


def test_lyman_alpha_oscillator_strength():
    # hydrogen 1s-2p: <1s|r|2p> = 2^7 sqrt(6) / 3^5 bohr and f = 0.4162
    # (Bethe & Salpeter 1957, tables of hydrogen oscillator strengths)  # from memory
    a, b = Model("1s"), Model("2p")
    radial = 2**7 * np.sqrt(6) / 3**5
    lines = line_strengths(DipoleModel(a, b), a.solve({}), b.solve({}), {("1s", "2p"): radial})
    S = sum(s for _, _, s in lines)
    delta_e = 0.375  # hartree, 3/8 for infinite nuclear mass
    f = 2 / 3 * delta_e * S / 2  # f = (2/3) dE S / g_lower, atomic units (Bethe & Salpeter 1957)
    assert f == pytest.approx(0.4162, abs=2e-4)


def test_doublet_2s_2p_ratio():
    # 2S1/2 - 2P3/2 : 2S1/2 - 2P1/2 = 2 : 1 (Condon & Shortley 1935; Allen, Astrophysical
    # Quantities, multiplet tables)  # from memory
    a, b = Model("3s"), Model("3p")
    lines = line_strengths(DipoleModel(a, b), a.solve({}), b.solve({"3p: zeta(3p)": 10.0}),
                           {("3s", "3p"): 1.0})
    s = {(la.J, lb.J): S for la, lb, S in lines}
    assert s[(0.5, 1.5)] / s[(0.5, 0.5)] == pytest.approx(2.0)


def _pure_ls_lines():
    odd, even = Model("2p 3s"), Model("2p 3p")
    so = odd.solve({"2p 3s: G1(2p,3s)": 3000.0, "2p 3s: zeta(2p)": 1e-4})
    se = even.solve({"2p 3p: F2(2p,3p)": 20000.0, "2p 3p: G0(2p,3p)": 3000.0,
                     "2p 3p: G2(2p,3p)": 9000.0, "2p 3p: zeta(2p)": 1e-4})
    lines = line_strengths(DipoleModel(odd, even), so, se, {("3s", "3p"): 1.0})
    return lines


def _component(lines, lower, upper):
    return {(la.J, lb.J): S for la, lb, S in lines if la.label == lower and lb.label == upper}


def test_3p_3s_pattern():
    # 3P - 3S: components proportional to 2J+1 of 3P: 5 : 3 : 1 (Allen, Astrophysical
    # Quantities, relative strengths in LS multiplets)  # from memory
    c = _component(_pure_ls_lines(), "2p 3s 3P°", "2p 3p 3S")
    assert c[(2.0, 1.0)] / c[(0.0, 1.0)] == pytest.approx(5.0, rel=1e-4)
    assert c[(1.0, 1.0)] / c[(0.0, 1.0)] == pytest.approx(3.0, rel=1e-4)


def test_3p_3d_pattern_against_table_and_6j():
    # 3P - 3D line strengths (total 180): P2-D3 84, P2-D2 15, P2-D1 1, P1-D2 45, P1-D1 15,
    # P0-D1 20 (Allen, Astrophysical Quantities; White & Eliason 1933)  # from memory
    table = {(2, 3): 84, (2, 2): 15, (2, 1): 1, (1, 2): 45, (1, 1): 15, (0, 1): 20}
    c = _component(_pure_ls_lines(), "2p 3s 3P°", "2p 3p 3D")
    total = sum(c.values())
    for (j, jp), rel in table.items():
        assert c[(float(j), float(jp))] / total == pytest.approx(rel / 180, rel=1e-4)
        # and the closed form S_J ~ (2J+1)(2J'+1){L J S; J' L' 1}^2 (Condon & Shortley 1935)
        six = float(wigner_6j(1, j, 1, jp, 2, 1)) ** 2
        assert c[(float(j), float(jp))] / total == pytest.approx(
            (2 * j + 1) * (2 * jp + 1) * six / sum(
                (2 * a + 1) * (2 * b + 1) * float(wigner_6j(1, a, 1, b, 2, 1)) ** 2
                for a, b in table), rel=1e-4)


def test_sum_rules_under_mixing():
    # the fine-structure components add up to the multiplet strength, and the total strength
    # of the transition array does not depend on the mixing (Condon & Shortley 1935)
    # from memory
    pure = _pure_ls_lines()
    odd, even = Model("2p 3s"), Model("2p 3p")
    so = odd.solve({"2p 3s: G1(2p,3s)": 300.0, "2p 3s: zeta(2p)": 900.0})
    se = even.solve({"2p 3p: F2(2p,3p)": 2000.0, "2p 3p: G0(2p,3p)": 300.0,
                     "2p 3p: G2(2p,3p)": 900.0, "2p 3p: zeta(2p)": 900.0,
                     "2p 3p: zeta(3p)": 50.0})
    mixed = line_strengths(DipoleModel(odd, even), so, se, {("3s", "3p"): 1.0})
    total_pure = sum(s for *_, s in pure)
    assert sum(s for *_, s in mixed) == pytest.approx(total_pure, rel=1e-10)
    # one-electron 3s-3p with a 2p5 spectator: total = (2l+1 of core ... ) * max(l,l') * R^2:
    # 6 core states x 2 spins x 1 (one-electron sum over m of Bethe & Salpeter 1957)
    # from memory
    assert total_pure == pytest.approx(12.0, rel=1e-10)
    multiplet = sum(s for la, lb, s in pure if la.label == "2p 3s 3P°" and lb.label == "2p 3p 3D")
    assert multiplet == pytest.approx(sum(_component(pure, "2p 3s 3P°", "2p 3p 3D").values()))


def test_lyman_alpha_transition_probability_and_wavelength():
    # A(2p-1s) = 6.265e8 s^-1 (Wiese & Fuhr 2009, J. Phys. Chem. Ref. Data 38, 565;
    # infinite nuclear mass here, so within 0.2 %)  # from memory
    from finefit.lines.transitions import predict_lines

    a, b = Model("1s"), Model("2p")
    rydberg_cm = 109737.31568  # R_inf in cm-1 (CODATA)  # from memory
    sa = a.solve({"1s: Eav": 0.0})
    sb = b.solve({"2p: Eav": 0.75 * rydberg_cm})
    lines = predict_lines(DipoleModel(a, b), sa, sb, {("1s", "2p"): 2**7 * np.sqrt(6) / 3**5})
    total_A = sum(x.A * (2 * x.upper.J + 1) for x in lines) / 6.0  # mean over the 2p states
    assert total_A == pytest.approx(6.265e8, rel=2e-3)
    assert lines[0].vacuum_wavelength == pytest.approx(1215.0, abs=1.0)  # Lyman alpha
    assert lines[0].air_wavelength is None  # below 2000 A: vacuum (common practice)
    assert sum(x.gf for x in lines) / 2 == pytest.approx(0.4162, abs=2e-4)


def test_session_lines_with_ab_initio_dipole(tmp_path, capsys):
    # Na I resonance doublet with Hartree-Fock <3s|r|3p>: |<3s|r|3p>| about 4.5 bohr
    # (HF without core polarisation; the measured-f value corresponds to about 4.3)
    # from memory; the D2/D1 gf ratio is 2 (LS), the D lines near 5890/5896 A in air.
    import json

    from finefit.cli import main
    from finefit.session import Session

    s = Session.new(["3s", "3p"], Z=11)
    s.set_parameter("3p: Eav", 16960.0)
    s.set_parameter("3p: zeta(3p)", 11.5)
    lines, radial = s.predict_lines()
    assert 4.0 < abs(radial[("3s", "3p")]) < 5.0
    d2, d1 = lines
    assert d2.S / d1.S == pytest.approx(2.0, rel=1e-9)
    assert d2.gf / d1.gf == pytest.approx(2.0, rel=5e-3)  # gf carries the wavenumber too
    assert d2.air_wavelength == pytest.approx(5892.6, abs=0.1)
    p = tmp_path / "na.toml"
    s.save(p)
    assert main(["lines", str(p), "--radial", "3s,3p=4.26", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert len(out["lines"]) == 2 and out["radial_integrals"][0]["bohr"] == 4.26
    assert main(["lines", str(p), "--radial", "oops"]) == 2
    one = Session.new(["3s"], Z=11)
    from finefit import FinefitError

    with pytest.raises(FinefitError):
        one.predict_lines()


def test_line_wavelength_uncertainties_follow_the_fit():
    # invented data: Na-like doublet; after a fit the line positions carry the propagated
    # uncertainties, dlambda = lambda^2 dsigma / 1e8 (differentiating lambda = 1e8/sigma)
    from finefit.session import Session

    s = Session.new(["3s", "3p"], Z=11)
    s.set_parameter("3p: Eav", 16960.0, vary=True)
    s.set_parameter("3p: zeta(3p)", 11.0, vary=True)
    s.add_level(energy=16956.17, J=0.5, parity="odd")
    s.add_level(energy=16973.37, J=1.5, parity="odd")
    s.add_level(energy=0.0, J=0.5, parity="even")
    s.set_parameter("3s: Eav", 0.0, vary=False)
    r = s.fit()
    s.apply(r)
    lines, _ = s.predict_lines({("3s", "3p"): 4.3})
    for x in lines:
        assert x.wavenumber_uncertainty is not None
        assert x.wavelength_uncertainty == pytest.approx(
            x.vacuum_wavelength**2 * x.wavenumber_uncertainty / 1e8)
