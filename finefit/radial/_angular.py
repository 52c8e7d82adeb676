"""The only angular quantity the average-energy expression needs: (l k l'; 0 0 0)^2.

Closed form of the 3-j symbol with all projections zero (Edmonds, "Angular Momentum in
Quantum Mechanics", 1957; section and equation numbers not checked): for
J = l1 + l2 + l3 even and g = J/2,
(l1 l2 l3; 0 0 0) = (-1)^g sqrt[(J-2l1)!(J-2l2)!(J-2l3)!/(J+1)!] g!/[(g-l1)!(g-l2)!(g-l3)!],
and zero for J odd or a broken triangle.
"""

from __future__ import annotations

from fractions import Fraction
from functools import cache
from math import factorial


@cache
def threej0_squared(l1: int, l2: int, l3: int) -> Fraction:
    """Return (l1 l2 l3; 0 0 0)^2 exactly as a fraction."""
    if l1 < 0 or l2 < 0 or l3 < 0:
        return Fraction(0)
    if l3 > l1 + l2 or l3 < abs(l1 - l2):
        return Fraction(0)
    big = l1 + l2 + l3
    if big % 2:
        return Fraction(0)
    g = big // 2
    root = Fraction(
        factorial(big - 2 * l1) * factorial(big - 2 * l2) * factorial(big - 2 * l3),
        factorial(big + 1),
    )
    ratio = Fraction(
        factorial(g), factorial(g - l1) * factorial(g - l2) * factorial(g - l3)
    )
    return root * ratio * ratio


def direct_ks(la: int, lb: int) -> list[int]:
    """k values of F^k between an l_a and an l_b electron with nonzero angular factor."""
    return [k for k in range(0, 2 * min(la, lb) + 1, 2)]


def exchange_ks(la: int, lb: int) -> list[int]:
    """k values of G^k between an l_a and an l_b electron: |la-lb| .. la+lb, step 2."""
    return list(range(abs(la - lb), la + lb + 1, 2))
