"""Angular coefficients against an independent library and the textbook tables."""

import itertools

import pytest
from sympy import pi, sqrt
from sympy.physics.wigner import gaunt as sympy_gaunt

from finefit.angular.wigner import clebsch_gordan2, gaunt, three_j2


def test_gaunt_against_sympy_integral_of_three_harmonics():
    # c^k(l m; l' m') = sqrt(4 pi/(2k+1)) * integral Y*_lm Y_kq Y_l'm', Y*_lm = (-1)^m Y_l,-m
    # reference library: sympy.physics.wigner.gaunt (integral of three spherical harmonics)
    for l, lp in itertools.product(range(4), repeat=2):
        for k in range(abs(l - lp), l + lp + 1):
            for m in range(-l, l + 1):
                for mp in range(-lp, lp + 1):
                    q = m - mp
                    if abs(q) > k:
                        continue
                    ref = sqrt(4 * pi / (2 * k + 1)) * (-1) ** m * sympy_gaunt(l, k, lp, -m, q, mp)
                    assert gaunt(l, m, k, lp, mp) == pytest.approx(float(ref), abs=1e-12)


def test_gaunt_condon_shortley_table_values():
    # Condon & Shortley (1935), Table 1^6: c^2(p0, p0) = 2/5, c^2(p1, p1) = -1/5,
    # c^2(p1, p0) = sqrt(3)/5; c^2(d0, s0) = 1/sqrt(5)  # from memory
    assert gaunt(1, 0, 2, 1, 0) == pytest.approx(2 / 5)
    assert gaunt(1, 1, 2, 1, 1) == pytest.approx(-1 / 5)
    assert abs(gaunt(1, 1, 2, 1, 0)) == pytest.approx(3**0.5 / 5)
    assert gaunt(2, 0, 2, 0, 0) == pytest.approx(5**-0.5)


def test_clebsch_gordan_closed_forms():
    # <1/2 1/2 1/2 -1/2 | 1 0> = 1/sqrt(2); <1 1 1 -1|0 0> = 1/sqrt(3) (Condon & Shortley §3.14)
    assert clebsch_gordan2(1, 1, 1, -1, 2, 0) == pytest.approx(2**-0.5)
    assert clebsch_gordan2(2, 2, 2, -2, 0, 0) == pytest.approx(3**-0.5)
    # (j j 0; m -m 0) = (-1)^(j-m)/sqrt(2j+1) (Edmonds 1957, eq. 3.7.9)
    assert three_j2(2, 2, 0, 2, -2, 0) == pytest.approx(3**-0.5)
    assert three_j2(2, 2, 0, 0, 0, 0) == pytest.approx(-(3**-0.5))


def test_run_time_symbols_match_sympy_for_integer_and_half_integer_arguments():
    # reference library: sympy.physics.wigner (Racah's formula in exact arithmetic); the
    # engine takes integer arguments from the wigners library and half-integer ones from
    # its own exact Racah sum, so both routes are covered here (all doubled arguments)
    from sympy import Rational
    from sympy.physics.wigner import clebsch_gordan, wigner_3j

    def h(x):
        return Rational(x, 2)

    checked = {"integer": 0, "half": 0}
    for j1, j2, j3 in itertools.product(range(0, 7), range(0, 7), range(0, 8)):
        for m1 in range(-j1, j1 + 1, 2):
            for m2 in range(-j2, j2 + 1, 2):
                m3 = -m1 - m2
                if abs(m3) > j3 or (j3 + m3) % 2:
                    continue
                ref3 = float(wigner_3j(h(j1), h(j2), h(j3), h(m1), h(m2), h(m3)))
                refcg = float(clebsch_gordan(h(j1), h(j2), h(j3), h(m1), h(m2), h(-m3)))
                assert three_j2(j1, j2, j3, m1, m2, m3) == pytest.approx(ref3, abs=1e-14)
                assert clebsch_gordan2(j1, m1, j2, m2, j3, -m3) == pytest.approx(
                    refcg, abs=1e-14)
                if ref3:
                    checked["integer" if j1 % 2 == j2 % 2 == j3 % 2 == 0 else "half"] += 1
    assert checked["integer"] > 100 and checked["half"] > 300


def test_spin_half_clebsch_gordan_closed_forms():
    # <1/2 1/2, 1/2 -1/2 | 1 0> = 1/sqrt(2), <1/2 1/2, 1/2 -1/2 | 0 0> = 1/sqrt(2),
    # <1 1, 1/2 -1/2 | 1/2 1/2> = sqrt(2/3) (Condon & Shortley 1935, table 2^3; any
    # quantum-mechanics text's spin-1/2 coupling table)
    assert clebsch_gordan2(1, 1, 1, -1, 2, 0) == pytest.approx(2**-0.5, abs=1e-15)
    assert clebsch_gordan2(1, 1, 1, -1, 0, 0) == pytest.approx(2**-0.5, abs=1e-15)
    assert clebsch_gordan2(2, 2, 1, -1, 1, 1) == pytest.approx((2 / 3) ** 0.5, abs=1e-15)
    # selection rules: triangle, m sum and |m| <= j give zero instead of an error
    assert clebsch_gordan2(1, 1, 1, 1, 6, 2) == 0.0
    assert three_j2(1, 1, 2, 1, 1, 0) == 0.0
    assert three_j2(2, 2, 2, 4, -4, 0) == 0.0
