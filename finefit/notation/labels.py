"""Level labels in LS, jj and pair (JK) coupling, written the trade's way.

LS:  ``3d6(5D)4s 6D``, ``2p5(2P°)3p 3D``, ``3d5(6S)4s(7S)4p 8P°``, ``2p 3p 1S``: the
     first open subshell carries its term in parentheses unless it is a single
     electron; later open subshells carry their own term when it is not implied
     (one electron or one hole); from the second open subshell on, the term coupled
     so far follows in parentheses. A subshell term that occurs more than once in
     l^N carries the index of the level compilations (Nielson & Koster 1963) as a
     trailing digit: ``3d7 2D2``, ``3d6(3P2)4s 4P``, ``4f3 2H2``. The explicit form,
     finefit's own, adds Racah's quantum numbers in braces: ``3d7 2D2{v3}``,
     ``4f3 2H2{v3,W210,U21}``; it is accepted on input with or without the index.
jj:  ``2p5(3/2)3p(1/2)``: each open subshell with its j-groups and its J
     (``3d6(3/2 5/2^5;4)``), the J coupled so far in angle brackets from the second
     subshell on (``<9/2>``).
JK:  ``2p5(2P°3/2)3p 2[5/2]``: the core's LS label with its term and J, then the
     outer electron and 2s+1 = 2 with [K].
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from finefit.errors import FinefitError
from finefit.notation.configuration import parse_subshell
from finefit.notation.jvalues import format_angular
from finefit.notation.terms import ODD, subshell_term_counts, term_symbol

_INDEX_LETTERS = "abcdefghijklmnopqrstuvwxyz"


@dataclass(frozen=True)
class SubshellPart:
    """What a label says of one written subshell."""

    name: str  # e.g. "3d"
    occupancy: int
    l: int
    L: int | None = None  # own term (open subshells)
    S2: int | None = None
    seniority: int | None = None
    index: int = 0  # repeated-term index (Nielson & Koster), 0 for a term that occurs once
    w: tuple[int, ...] = ()
    u: tuple[int, ...] = ()


def explicit_qualifier(seniority: int, w: tuple[int, ...] = (), u: tuple[int, ...] = ()) -> str:
    """finefit's explicit form of a repeated term's quantum numbers: ``{v3}``, ``{v3,W210,U21}``."""
    text = f"v{seniority}"
    if w:
        text += ",W" + "".join(str(x) for x in w)
    if u:
        text += ",U" + "".join(str(x) for x in u)
    return "{" + text + "}"


def subshell_term_text(
    l: int,
    n: int,
    L: int,
    S2: int,
    index: int,
    explicit: str = "",
) -> str:
    """A subshell's own term with its repeated-term index (and explicit qualifier if given)."""
    odd = (l * n) % 2 == 1
    sym = term_symbol(L, S2, False)
    if subshell_term_counts(l, n).get((L, S2), 1) > 1:
        sym += (str(index) if index else "") + explicit
    return sym + (ODD if odd else "")


def _part_term(p: SubshellPart, explicit: bool) -> str:
    qual = explicit_qualifier(p.seniority, p.w, p.u) if explicit and p.seniority is not None else ""
    return subshell_term_text(p.l, p.occupancy, p.L, p.S2, p.index, qual)


def _written(name: str, n: int) -> str:
    return name + (str(n) if n != 1 else "")


def format_ls(
    parts: list[SubshellPart],
    intermediates: list[tuple[int, int]],
    L: int,
    S2: int,
    odd: bool,
    explicit: bool = False,
) -> str:
    """An LS label from the written subshells (closed ones included, no term shown).

    ``explicit`` adds the quantum numbers of repeated subshell terms in braces.
    """
    open_pos = [i for i, p in enumerate(parts) if 0 < p.occupancy < 4 * p.l + 2]
    out = []
    parity = 0
    for i, p in enumerate(parts):
        text = _written(p.name, p.occupancy)
        parity += p.l * p.occupancy
        if i in open_pos:
            k = open_pos.index(i)
            unique = p.occupancy in (1, 4 * p.l + 1)
            last = k == len(open_pos) - 1
            if k == 0 and not last and p.occupancy != 1:
                text += f"({_part_term(p, explicit)})"
            elif k > 0:
                if not unique:
                    text += f"({_part_term(p, explicit)})"
                if not last:
                    iL, iS2 = intermediates[k - 1]
                    text += f"({term_symbol(iL, iS2, parity % 2 == 1)})"
        out.append(text)
    final = term_symbol(L, S2, odd)
    if len(open_pos) == 1:
        p = parts[open_pos[0]]
        final = _part_term(p, explicit)
    return "".join(_join(out)) + " " + final


def _join(chunks: list[str]) -> list[str]:
    """Subshells run together when the previous one carries a parenthesis, else a space."""
    res = []
    for i, c in enumerate(chunks):
        if i and not chunks[i - 1].endswith(")") and not chunks[i - 1].endswith(">"):
            res.append(" ")
        res.append(c)
    return res


def format_jj(
    parts: list[tuple[str, int, int, list[tuple[int, int]], int, int]],
    intermediates: list[int],
) -> str:
    """A jj label. ``parts``: (name, N, l, [(2j, n_j) nonempty j-groups], 2J_sub, index)."""
    out = []
    n_open = len(parts)
    for k, (name, n, l, groups, j2_sub, index) in enumerate(parts):
        text = _written(name, n)
        if n in (1, 4 * l + 1):
            text += f"({format_angular(j2_sub)})"
        else:
            occ = " ".join(format_angular(j2) + (f"^{nj}" if nj > 1 else "") for j2, nj in groups)
            suffix = _INDEX_LETTERS[index - 1] if index else ""
            text += f"({occ};{format_angular(j2_sub)}{suffix})"
        if 0 < k < n_open - 1:
            text += f"<{format_angular(intermediates[k - 1])}>"
        out.append(text)
    return "".join(out)


def format_jk(core_label: str, core_j2: int, outer_name: str, k2: int, odd: bool) -> str:
    """Pair-coupling label: ``2p5(2P°3/2)3p 2[5/2]``.

    ``core_label`` is the core's LS label without its final space, e.g. ``2p5(2P°)``
    is written from ``2p5`` and the core term ``2P°``.
    """
    return f"{core_label}{format_angular(core_j2)}){outer_name} 2[{format_angular(k2)}]" + (
        ODD if odd else ""
    )


_LS_SUBSHELL = re.compile(r"(\d+[a-zA-Z]\d*)((?:\([^()]*\))*)")


def normalise_label(text: str) -> str:
    """Canonical spelling of a user label: ``*`` -> ``°``, single spaces, no edges."""
    if not isinstance(text, str):
        raise FinefitError(f"label {text!r} is not text", str(text))
    t = text.replace("*", ODD).replace("^o", ODD).strip()
    t = re.sub(r"\s+", " ", t)
    return t


def check_ls_label(text: str) -> str:
    """Validate the syntax of an LS label and return its canonical spelling.

    Raises :class:`FinefitError` naming the first token that cannot be read.
    """
    t = normalise_label(text)
    if not t:
        raise FinefitError("label is empty", text)
    if t.count("(") != t.count(")"):
        raise FinefitError(f"label {text!r} has unbalanced parentheses", text)
    head, _, final = t.rpartition(" ")
    if not head:
        raise FinefitError(f"label {text!r} has no final term: write e.g. '3d6(5D)4s 6D'", text)
    pos = 0
    body = head.replace(" ", "")
    while pos < len(body):
        m = _LS_SUBSHELL.match(body, pos)
        if not m or m.end() == pos:
            raise FinefitError(f"cannot read {body[pos:]!r} in label {text!r}", body[pos:])
        parse_subshell(m.group(1))
        pos = m.end()
    if not re.match(r"^\d+[A-Z](°)?\d*[a-z]?(\d+(/2)?)?$", final):
        raise FinefitError(f"cannot read final term {final!r} in label {text!r}", final)
    return t
