"""Wigner 3j symbols, Clebsch-Gordan and Gaunt coefficients as cached floats.

The exact values come from sympy.physics.wigner (Racah's formula in exact
arithmetic); we cache the float conversions because the engine asks for the
same few thousand symbols over and over. Arguments are given as *twice* the
angular momenta so that half-integers stay exact integers.
"""

from __future__ import annotations

from functools import cache

import numpy as np
from sympy import Rational
from sympy.physics.wigner import clebsch_gordan, wigner_3j


def _half(x2: int) -> Rational:
    return Rational(x2, 2)


@cache
def three_j2(j1: int, j2: int, j3: int, m1: int, m2: int, m3: int) -> float:
    """Wigner 3j symbol (j1 j2 j3; m1 m2 m3), all arguments doubled."""
    if m1 + m2 + m3 != 0:
        return 0.0
    return float(wigner_3j(_half(j1), _half(j2), _half(j3), _half(m1), _half(m2), _half(m3)))


@cache
def clebsch_gordan2(j1: int, m1: int, j2: int, m2: int, j: int, m: int) -> float:
    """<j1 m1 j2 m2 | j m> (Condon-Shortley phase), all arguments doubled."""
    if m1 + m2 != m:
        return 0.0
    if abs(m1) > j1 or abs(m2) > j2 or abs(m) > j:
        return 0.0
    return float(clebsch_gordan(_half(j1), _half(j2), _half(j), _half(m1), _half(m2), _half(m)))


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
