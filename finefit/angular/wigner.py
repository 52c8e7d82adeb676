"""Wigner 3j symbols, Clebsch-Gordan and Gaunt coefficients as cached floats.

Integer angular momenta (all Gaunt coefficients, orbital couplings) come from the
``wigners`` library (compiled Racah formula, double precision). Half-integer ones
(spin couplings, J of odd-electron states), which that library does not take, come
from Racah's closed formula (Edmonds 1957, eq. 3.6.11) summed in exact rational
arithmetic here. We cache the floats because the engine asks for the same few
thousand symbols over and over. Arguments are given as *twice* the angular momenta
so that half-integers stay exact integers. The tests check both routes against
sympy.physics.wigner.
"""

from __future__ import annotations

import math
from fractions import Fraction
from functools import cache

import numpy as np
import wigners


def _allowed(j1: int, j2: int, j3: int, m1: int, m2: int, m3: int) -> bool:
    """Selection rules of (j1 j2 j3; m1 m2 m3), doubled arguments (m1 + m2 + m3 = 0 given)."""
    if min(j1, j2, j3) < 0 or (j1 + j2 + j3) % 2:
        return False
    if not abs(j1 - j2) <= j3 <= j1 + j2:
        return False
    for j, m in ((j1, m1), (j2, m2), (j3, m3)):
        if abs(m) > j or (j + m) % 2:
            return False
    return True


def _racah_cg2(j1: int, m1: int, j2: int, m2: int, j: int, m: int) -> float:
    """<j1 m1 j2 m2 | j m> by Racah's formula in exact arithmetic (doubled arguments)."""
    f = math.factorial
    a, b, c = (j1 + j2 - j) // 2, (j1 - j2 + j) // 2, (-j1 + j2 + j) // 2
    norm = Fraction((j + 1) * f(a) * f(b) * f(c), f((j1 + j2 + j) // 2 + 1))
    norm *= (f((j1 + m1) // 2) * f((j1 - m1) // 2) * f((j2 + m2) // 2) * f((j2 - m2) // 2)
             * f((j + m) // 2) * f((j - m) // 2))
    total = Fraction(0)
    for k in range(0, a + 1):
        d = (a - k, (j1 - m1) // 2 - k, (j2 + m2) // 2 - k,
             (j - j2 + m1) // 2 + k, (j - j1 - m2) // 2 + k)
        if min(d) < 0:
            continue
        term = Fraction(1, f(k) * f(d[0]) * f(d[1]) * f(d[2]) * f(d[3]) * f(d[4]))
        total += -term if k % 2 else term
    if total == 0:
        return 0.0
    # sign * sqrt(total^2 * norm): one rounding of an exact rational
    return math.copysign(math.sqrt(total * total * norm), total)


@cache
def three_j2(j1: int, j2: int, j3: int, m1: int, m2: int, m3: int) -> float:
    """Wigner 3j symbol (j1 j2 j3; m1 m2 m3), all arguments doubled."""
    if m1 + m2 + m3 != 0 or not _allowed(j1, j2, j3, m1, m2, m3):
        return 0.0
    if j1 % 2 == 0 and j2 % 2 == 0 and j3 % 2 == 0:
        return float(wigners.wigner_3j(j1 // 2, j2 // 2, j3 // 2, m1 // 2, m2 // 2, m3 // 2))
    # (j1 j2 j3; m1 m2 m3) = (-1)^(j1 - j2 - m3) <j1 m1 j2 m2 | j3 -m3> / sqrt(2 j3 + 1)
    sign = -1.0 if ((j1 - j2 - m3) // 2) % 2 else 1.0
    return sign * _racah_cg2(j1, m1, j2, m2, j3, -m3) / math.sqrt(j3 + 1)


@cache
def clebsch_gordan2(j1: int, m1: int, j2: int, m2: int, j: int, m: int) -> float:
    """<j1 m1 j2 m2 | j m> (Condon-Shortley phase), all arguments doubled."""
    if m1 + m2 != m:
        return 0.0
    if abs(m1) > j1 or abs(m2) > j2 or abs(m) > j:
        return 0.0
    if not _allowed(j1, j2, j, m1, m2, -m):
        return 0.0
    if j1 % 2 == 0 and j2 % 2 == 0 and j % 2 == 0:
        return float(wigners.clebsch_gordan(j1 // 2, m1 // 2, j2 // 2, m2 // 2, j // 2, m // 2))
    return _racah_cg2(j1, m1, j2, m2, j, m)


@cache
def gaunt(l: int, m: int, k: int, lp: int, mp: int) -> float:
    """Gaunt coefficient c^k(l m; l' m') = <l m|C^k_{m-m'}|l' m'>.

    c^k(l m; l' m') = (-1)^m sqrt((2l+1)(2l'+1)) (l k l'; 0 0 0) (l k l'; -m, m-m', m')
    (Condon & Shortley 1935; the form of CONVENTIONS.md).
    """
    q = m - mp
    if abs(q) > k:
        return 0.0
    parity_factor = three_j2(2 * l, 2 * k, 2 * lp, 0, 0, 0)
    if parity_factor == 0.0:
        return 0.0
    sign = -1.0 if m % 2 else 1.0
    return (
        sign
        * np.sqrt((2 * l + 1) * (2 * lp + 1))
        * parity_factor
        * three_j2(2 * l, 2 * k, 2 * lp, -2 * m, 2 * q, 2 * mp)
    )


@cache
def gaunt_table(l: int, k: int, lp: int) -> np.ndarray:
    """Array c[m + l, m' + lp] of c^k(l m; l' m') for all m, m'."""
    table = np.zeros((2 * l + 1, 2 * lp + 1))
    for m in range(-l, l + 1):
        for mp in range(-lp, lp + 1):
            table[m + l, mp + lp] = gaunt(l, m, k, lp, mp)
    table.setflags(write=False)
    return table
