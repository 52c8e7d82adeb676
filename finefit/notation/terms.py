"""LS term symbols and the terms of an l^N subshell (pure)."""

from __future__ import annotations

import itertools
import re
from functools import cache

from finefit.errors import FinefitError

L_LETTERS = "SPDFGHIKLMNOQRTUVWXYZ"  # J is skipped, as is customary
ODD = "°"

_TERM = re.compile(r"^(\d+)([A-Z])(°|\*)?$")


def term_symbol(L: int, S2: int, odd: bool = False) -> str:
    """``2S+1`` and the letter of L, with ``°`` for odd parity: ``4F``, ``2P°``."""
    if L >= len(L_LETTERS):
        letter = f"[L={L}]"
    else:
        letter = L_LETTERS[L]
    return f"{S2 + 1}{letter}{ODD if odd else ''}"


def parse_term(text: str) -> tuple[int, int, bool]:
    """Read ``4F``, ``2P°`` or ``2P*`` into (L, 2S, odd)."""
    m = _TERM.match(text.strip())
    if not m or m.group(2) not in L_LETTERS:
        raise FinefitError(f"cannot read term symbol {text!r}: expected e.g. '4F' or '2P°'", text)
    mult = int(m.group(1))
    if mult < 1:
        raise FinefitError(f"term {text!r} has multiplicity below 1", text)
    return L_LETTERS.index(m.group(2)), mult - 1, m.group(3) is not None


@cache
def subshell_term_counts(l: int, n: int) -> dict[tuple[int, int], int]:
    """How often each term (L, 2S) occurs in l^N, by counting M_L, M_S (Condon & Shortley §7.4)."""
    orbitals = [(ml, ms2) for ml in range(-l, l + 1) for ms2 in (1, -1)]
    counts: dict[tuple[int, int], int] = {}
    for combo in itertools.combinations(orbitals, n):
        ml = sum(o[0] for o in combo)
        ms2 = sum(o[1] for o in combo)
        if ml >= 0 and ms2 >= 0:
            counts[(ml, ms2)] = counts.get((ml, ms2), 0) + 1
    terms = {}
    for (ml, ms2), c in counts.items():
        k = (
            c
            - counts.get((ml + 1, ms2), 0)
            - counts.get((ml, ms2 + 2), 0)
            + counts.get((ml + 1, ms2 + 2), 0)
        )
        if k:
            terms[(ml, ms2)] = k
    return terms


def seniority_copies(l: int, n: int, L: int, S2: int) -> list[int]:
    """Seniorities of the copies of term (L, 2S) in l^N, in increasing order.

    Terms of seniority v in l^N are those of l^v less those of l^(v-2) (Racah 1943,
    Phys. Rev. 63, 367), for v = N, N-2, ... down to 0 or 1, and v <= 4l+2-N.
    """
    out: list[int] = []
    for v in range(n % 2, min(n, 4 * l + 2 - n) + 1, 2):
        here = subshell_term_counts(l, v).get((L, S2), 0) if v else int((L, S2) == (0, 0))
        below = 0
        if v >= 2:
            below = subshell_term_counts(l, v - 2).get((L, S2), 0) if v > 2 else int(
                (L, S2) == (0, 0)
            )
        out.extend([v] * (here - below))
    return out
