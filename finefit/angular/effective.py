"""Spin-orbital forms of the effective operators of an open subshell l^N.

Each operator is a one-body term list plus two-body terms (see
:mod:`finefit.angular.operators`), so the engine turns it into one coefficient
matrix per parameter like the electrostatic integrals. Definitions and sources:

- ``beta(nd)``: Racah's seniority operator Q = sum_{i<j} q_ij with
  <l^2 L S|q|l^2 L S> = (2l+1) d(L,0) d(S,0) (Racah 1943, Phys. Rev. 63, 367).
  In second quantisation q is the pair operator A+A of the quasi-spin scheme,
  A+ = sum_m (-1)^(l-m) a+_{m up} a+_{-m down}; on l^N of seniority v its eigenvalue
  is (N - v)(4l + 4 - N - v)/4 (Racah 1943; Judd, Operator Techniques in Atomic
  Spectroscopy, 1963). For d^N: (N - v)(12 - N - v)/4.
- The Casimir operators G(G2) and G(R7) of an f shell (``beta(4f)``, ``gamma(4f)``)
  come from :mod:`finefit.angular.operators`.
"""

from __future__ import annotations

import numpy as np

from finefit.angular.determinants import SpinOrbitals, TwoBodyTerms
from finefit.angular.operators import normalise_two_body, pairing_terms


def seniority_terms(so: SpinOrbitals, shell: int) -> TwoBodyTerms:
    """Racah's seniority operator Q of one subshell (eigenvalue (N-v)(4l+4-N-v)/4)."""
    return pairing_terms(so, shell)


def stack_two_body(parts: list[TwoBodyTerms]) -> TwoBodyTerms:
    """One set of two-body terms with one weight column per part (one pass over a block)."""
    n_types = sum(p.weights.shape[1] for p in parts)
    a, b, c, d, w = [], [], [], [], []
    col = 0
    for p in parts:
        k = p.weights.shape[1]
        wp = np.zeros((p.a.size, n_types))
        wp[:, col : col + k] = p.weights
        col += k
        a.append(p.a)
        b.append(p.b)
        c.append(p.c)
        d.append(p.d)
        w.append(wp)
    return normalise_two_body(
        np.concatenate(a), np.concatenate(b), np.concatenate(c), np.concatenate(d),
        np.vstack(w),
    )
