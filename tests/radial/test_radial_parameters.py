"""Parameter dictionaries, integral symmetries and orbital properties of HF results."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import constants

from finefit.radial import (
    average_energy_differences,
    configuration_interaction_integral,
    hartree_fock,
)
from finefit.radial.solver import HartreeFockSolver


@pytest.fixture(scope="module")
def neon():
    return hartree_fock("1s2 2s2 2p6", Z=10, grid_step=0.06)


@pytest.fixture(scope="module")
def fe2():
    return hartree_fock("3d6 4s", Z=26, charge=1, grid_step=0.06)


def test_parameter_names_follow_conventions(neon):
    p = neon.parameters("2p5 3p")
    assert list(p) == [
        "2p5 3p: Eav",
        "2p5 3p: F2(2p,3p)",
        "2p5 3p: G0(2p,3p)",
        "2p5 3p: G2(2p,3p)",
        "2p5 3p: zeta(2p)",
        "2p5 3p: zeta(3p)",
    ]
    assert all(np.isfinite(v) for v in p.values())
    # exchange and direct integrals are positive; 2p is far more compact than 3p
    assert p["2p5 3p: F2(2p,3p)"] > 0 and p["2p5 3p: G0(2p,3p)"] > 0
    assert p["2p5 3p: zeta(2p)"] > 20 * p["2p5 3p: zeta(3p)"] > 0


def test_parameter_names_fe_ii(fe2):
    assert list(fe2.parameters("3d6 4s")) == [
        "3d6 4s: Eav",
        "3d6 4s: F2(3d)",
        "3d6 4s: F4(3d)",
        "3d6 4s: G2(3d,4s)",
        "3d6 4s: zeta(3d)",
    ]
    assert list(fe2.parameters("3d7")) == [
        "3d7: Eav",
        "3d7: F2(3d)",
        "3d7: F4(3d)",
        "3d7: zeta(3d)",
    ]
    # dots accepted, name normalised; closed subshells carry no parameter
    assert list(fe2.parameters("3d5.4s2")) == [
        "3d5 4s2: Eav",
        "3d5 4s2: F2(3d)",
        "3d5 4s2: F4(3d)",
        "3d5 4s2: zeta(3d)",
    ]


def test_parameter_rules_for_few_electrons_or_holes():
    hf = hartree_fock("2p5 3d", Z=10, grid_step=0.08)
    assert list(hf.parameters()) == [
        "2p5 3d: Eav",  # no F2(2p): p5 has a single hole
        "2p5 3d: F2(2p,3d)",
        "2p5 3d: G1(2p,3d)",
        "2p5 3d: G3(2p,3d)",
        "2p5 3d: zeta(2p)",
        "2p5 3d: zeta(3d)",
    ]
    closed = hartree_fock("2p6 3d", Z=11, grid_step=0.08)
    assert list(closed.parameters()) == ["2p6 3d: Eav", "2p6 3d: zeta(3d)"]
    s2 = hartree_fock("2s 3s", Z=4, grid_step=0.08)
    assert list(s2.parameters()) == ["2s 3s: Eav", "2s 3s: G0(2s,3s)"]


def test_four_f_parameters():
    hf = hartree_fock("4f2 5d", Z=59, charge=2, grid_step=0.07)
    names = [n.split(": ")[1] for n in hf.parameters()]
    assert names == [
        "Eav", "F2(4f)", "F4(4f)", "F6(4f)", "F2(4f,5d)", "F4(4f,5d)",
        "G1(4f,5d)", "G3(4f,5d)", "G5(4f,5d)", "zeta(4f)", "zeta(5d)",
    ]  # fmt: skip
    p = hf.parameters()
    assert p["4f2 5d: F2(4f)"] > p["4f2 5d: F4(4f)"] > p["4f2 5d: F6(4f)"] > 0


def test_same_configuration_uses_same_orbitals(fe2):
    # "3d6 4s" with the core written out is the same solved configuration
    a = fe2.parameters("3d6 4s")
    b = fe2.parameters("1s2 2s2 2p6 3s2 3p6 3d6 4s")
    assert a["3d6 4s: F2(3d)"] == b["1s2 2s2 2p6 3s2 3p6 3d6 4s: F2(3d)"]
    assert fe2.result_for("3d6 4s") is fe2


def test_eav_is_total_energy_in_cm(fe2):
    p = fe2.parameters("3d6 4s")
    assert p["3d6 4s: Eav"] == pytest.approx(fe2.total_energy_cm, rel=1e-14)
    other = fe2.result_for("3d7")
    assert fe2.parameters("3d7")["3d7: Eav"] == pytest.approx(other.total_energy_cm)
    assert other.charge == 1 and other.Z == 26


def test_average_energy_differences():
    d = average_energy_differences(["3d6 4s", "3d7", "3d5 4s2"], 26, 1, grid_step=0.08)
    assert list(d) == ["3d6 4s", "3d7", "3d5 4s2"]
    assert d["3d6 4s"] == 0.0
    # configuration-average separations in Fe II are of the order of 1e4 cm^-1
    # (common practice: HF E_av differences of a few eV between these configurations)
    assert all(abs(v) < 1e5 for v in d.values())
    assert d["3d5 4s2"] > 0


def test_integral_symmetries(fe2):
    r = fe2.slater_integral
    for k in (0, 2, 4):
        a = r(k, "3d", "4s", "3p", "3s")
        assert r(k, "4s", "3d", "3s", "3p") == pytest.approx(a, rel=1e-12)  # swap electrons
        assert r(k, "3p", "3s", "3d", "4s") == pytest.approx(a, rel=1e-12)  # swap bra/ket
    assert fe2.G(2, "3d", "4s") == pytest.approx(fe2.G(2, "4s", "3d"), rel=1e-12)
    assert fe2.F(2, "3d") == pytest.approx(fe2.slater_integral(2, "3d", "3d", "3d", "3d"))
    assert fe2.F(0, "3d", "4s") > fe2.G(2, "3d", "4s") > 0


def test_ci_integral_between_runs(fe2):
    d7 = fe2.result_for("3d7")
    x = configuration_interaction_integral(2, "3d", "4s", "3d", "3d", fe2, d7)
    y = d7.configuration_interaction_integral(2, "3d", "3d", "3d", "4s", fe2)
    assert x == pytest.approx(y, rel=1e-12)  # R^k(ab,cd) = R^k(cd,ab)
    assert x != 0.0
    # same orbitals when both come from one run
    assert configuration_interaction_integral(2, "3d", "3d", "3d", "3d", d7) == pytest.approx(
        d7.F(2, "3d")
    )


def test_orthonormality_and_moments(fe2):
    for a in fe2.orbitals:
        assert fe2.overlap(a, a) == pytest.approx(1.0, abs=1e-10)
    for a, b in (("1s", "2s"), ("2s", "4s"), ("3s", "4s"), ("2p", "3p")):
        assert abs(fe2.overlap(a, b)) < 1e-10
    assert fe2.expectation_r("4s") > fe2.expectation_r("3d") > fe2.expectation_r("3p")
    assert fe2.expectation_r2("3d") > fe2.expectation_r("3d") ** 2  # variance > 0
    r, p = fe2.radial_function("3d")
    assert p[np.argmax(np.abs(p))] > 0 and len(r) == len(p)


def test_orbital_energies_ordered(fe2):
    e = [fe2.orbital_energy(x) for x in ("1s", "2s", "2p", "3s", "3p")]
    assert e == sorted(e)
    assert fe2.orbital_energy("4s") < 0 and fe2.orbital_energy("3d") < 0


def test_open_shell_solution_is_stationary_under_rotation():
    """For 1s2 2s the 1s-2s rotation is not an invariance: the solver must have made the
    energy stationary with respect to it (the off-diagonal Lagrange
    multiplier condition of the variational principle)."""
    hf = hartree_fock("1s2 2s", Z=3, grid_step=0.08)
    from finefit.radial._config import complete_configuration

    solver = HartreeFockSolver(complete_configuration("1s2 2s", 3), 3, hf.grid)
    z = np.array(hf._z)
    e0 = solver.energy(z)[0]
    d = 1e-3
    ep = solver.energy(solver._rotated(z, 0, 1, d))[0]
    em = solver.energy(solver._rotated(z, 0, 1, -d))[0]
    assert abs(ep - em) / (2 * d) < 1e-6  # gradient ~ 0
    assert ep > e0 and em > e0  # a minimum along the rotation
    assert e0 == pytest.approx(hf.total_energy, rel=1e-12)


def test_zeta_central_field_against_screened_limit(neon):
    # zeta(2p) of Ne 2p5 3s lies between the hydrogenic values for the bare nucleus
    # (Z = 10) and for a nearly fully screened one (Z_eff = 2) — Bethe & Salpeter 1957
    hf = neon.result_for("2p5 3s")
    z = hf.zeta("2p")
    ryd = constants.physical_constants["Rydberg constant"][0] / 100
    hydro = constants.fine_structure**2 * ryd / (8 * 1 * 1.5 * 2)  # n=2, l=1, times Z^4
    assert hydro * 2**4 < z < hydro * 10**4
    hartree_cm = constants.physical_constants["hartree-inverse meter relationship"][0] / 100
    assert hf.zeta("2p", unit="hartree") * hartree_cm == pytest.approx(z, rel=1e-12)
    # spin-orbit of s is undefined
    from finefit.errors import FinefitError

    with pytest.raises(FinefitError):
        hf.zeta("3s")


def test_relativistic_option_shifts_energy(neon):
    rel = hartree_fock("2p6", 10, relativistic=True, grid_step=0.06)
    shift = rel.total_energy - neon.total_energy
    assert shift == pytest.approx(rel.relativistic_shift, rel=1e-9)
    # first-order Breit-Pauli mass-velocity + Darwin for Ne is about -0.13 hartree
    # (order of magnitude alpha^2 Z^4 ... common practice estimate)
    assert -0.3 < shift < -0.05
    assert rel.orbital_energy("1s") < neon.orbital_energy("1s")
    # the zeta and Slater integrals come from the same non-relativistic orbitals
    assert rel.F(0, "2p") == pytest.approx(neon.F(0, "2p"), rel=1e-9)


def test_named_interaction_parameter(fe2):
    d7 = fe2.result_for("3d7")
    direct = fe2.configuration_interaction_integral(2, "3d", "4s", "3d", "3d", d7)
    assert fe2.interaction_parameter("3d6 4s | 3d7: R2(3d4s,3d3d)", d7) == direct
    assert fe2.interaction_parameter("R2(3d4s,3d3d)", d7) == direct
    from finefit.errors import FinefitError

    with pytest.raises(FinefitError) as err:
        fe2.interaction_parameter("R2(3d,4s)", d7)
    assert err.value.item == "R2(3d,4s)"


def test_numpy_integers_accepted():
    hf = hartree_fock("2s", np.int64(3), np.int64(0), grid_step=0.1)
    assert hf.Z == 3 and isinstance(hf.Z, int)
