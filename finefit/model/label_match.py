"""Reading a level label against a model: which basis state, in which coupling scheme.

A label is strict: it names exactly one basis state of the J block, in LS
(``3d6(3P2)4s 4P``, also finefit's explicit form ``3d6(3P{v4})4s 4P``), pair coupling
(``2p5(2P°1/2)3p 2[1/2]``), J1j coupling (``4f2(3H4)6d(5/2)``) or jj coupling
(``3d6(3/2 5/2^5;4)``). A term the configuration cannot have, a repeated-term index
out of range, or a repeated term written without its index is an error whose
message lists the labels that exist. J may be appended to the term (``6D9/2``).
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from finefit.errors import FinefitError
from finefit.notation.jvalues import format_j
from finefit.notation.labels import normalise_label

SCHEMES = ("LS", "JK", "J1j", "jj")
_MAX_LISTED = 14


@dataclass(frozen=True)
class LabelTarget:
    """The basis state a label names: its scheme, its row in that scheme's J block."""

    scheme: str
    row: int
    text: str  # the canonical spelling


def canonical_spelling(text: str) -> str:
    """``*`` -> ``°``, single spaces, and ``°`` after a term's index and qualifier."""
    t = normalise_label(text)
    # a final term written '2H°2' or '2H°2{...}' -> '2H2°', '2H2{...}°'
    head, sep, final = t.rpartition(" ")
    final = re.sub(r"^(\d+[A-Z])°(\d+)(\{[^}]*\})?$", r"\1\2\3°", final)
    return head + sep + final


def _drop_index(text: str) -> str:
    """The label with repeated-term indices removed (``3d6(3P2)4s`` -> ``3d6(3P)4s``)."""
    return re.sub(r"([SPDFGHIKLMNOQRTUVWXYZ])\d+(?=[{°),\s]|$)", r"\1", text)


def _drop_qualifiers(text: str) -> str:
    return re.sub(r"\{[^}]*\}", "", text)


def _loose(text: str) -> str:
    return _drop_index(_drop_qualifiers(text))


def _spellings(cd) -> dict[str, LabelTarget]:
    """Every accepted spelling of every state of one J block (cached on the block)."""
    cached = getattr(cd, "_spellings", None)
    if cached is not None:
        return cached
    table: dict[str, LabelTarget] = {}
    n = len(cd.ls_labels)
    explicit = cd.ls_explicit or cd.ls_labels
    for r in range(n):
        canon = cd.ls_labels[r]
        target = LabelTarget("LS", r, canon)
        table.setdefault(canon, target)
        table.setdefault(explicit[r], target)
        # the explicit form without the index: '3d7 2D{v3}'
        table.setdefault(re.sub(r"([A-Z])\d+(\{)", r"\1\2", explicit[r]), target)
    if cd.has_jk:
        for r in range(n):
            if cd.jk_labels[r] != cd.ls_labels[r]:
                table.setdefault(cd.jk_labels[r], LabelTarget("JK", r, cd.jk_labels[r]))
            if cd.j1j_labels and cd.j1j_labels[r] != cd.ls_labels[r]:
                table.setdefault(cd.j1j_labels[r], LabelTarget("J1j", r, cd.j1j_labels[r]))
    for r in range(n):
        if cd.jj_labels[r]:
            table.setdefault(cd.jj_labels[r], LabelTarget("jj", r, cd.jj_labels[r]))
    cd._spellings = table
    return table


def _quote(text: str, limit: int = 80) -> str:
    return repr(text if len(text) <= limit else text[: limit - 1] + "…")


def _listing(labels: list[str]) -> str:
    labels = sorted(set(labels))
    if len(labels) > _MAX_LISTED:
        return ", ".join(labels[:_MAX_LISTED]) + f", … ({len(labels)} in all)"
    return ", ".join(labels)


def resolve_label(coupling: dict, label: str, J: float) -> LabelTarget:
    """The basis state of J block ``J`` that ``label`` names (``coupling``: per-J data).

    Raises :class:`FinefitError` with the labels that exist when the label names no
    state, names a repeated term without its index, or has an index out of range.
    """
    j2 = int(round(2 * J))
    cd = coupling.get(j2)
    jt = format_j(J)
    if cd is None:
        raise FinefitError(f"the model has no states with J = {jt}", jt)
    if not isinstance(label, str) or not label.strip():
        raise FinefitError("label is empty", "label")
    text = canonical_spelling(label)
    table = _spellings(cd)
    hit = table.get(text)
    if hit is None:
        # J appended to the final term: '6D9/2', '6D_9/2', '5D4'
        for suffix in (jt, "_" + jt):
            if text.endswith(suffix) and len(text) > len(suffix):
                hit = table.get(text[: -len(suffix)].rstrip("_ "))
                if hit is not None:
                    break
    if hit is not None:
        return hit
    raise FinefitError(_diagnose(coupling, cd, text, label, J), label[:80])


def _diagnose(coupling: dict, cd, text: str, label: str, J: float) -> str:
    jt = format_j(J)
    variants = [text] + [
        text[: -len(sfx)].rstrip("_ ")
        for sfx in (jt, "_" + jt)
        if text.endswith(sfx) and len(text) > len(sfx)
    ]
    others = {j2: other for j2, other in coupling.items() if other is not cd}

    def other_j(match) -> list[str]:
        return [
            format_j(j2 / 2)
            for j2, other in sorted(others.items())
            if any(match(t.text) for t in _spellings(other).values())
            or any(match(sp) for sp in _spellings(other))
        ]

    exact = other_j(lambda t: t in variants)
    if exact:
        return f"label {_quote(label)} exists with J = {', '.join(exact)} but not with J = {jt}"
    canon = sorted({t.text for t in _spellings(cd).values()})
    for v in variants:
        same = [lab for lab in canon if _loose(lab) == _loose(v)]
        if not same:
            continue
        if _drop_qualifiers(v) == _loose(v) and len(same) > 1:
            return (
                f"label {_quote(label)} names a term that occurs more than once; write its "
                f"index as the level compilations do: {_listing(same)}"
            )
        return f"label {_quote(label)}: no such term; the labels that exist: {_listing(same)}"
    loose = other_j(lambda t: any(_loose(t) == _loose(v) for v in variants))
    if loose:
        return f"label {_quote(label)}: this term has J = {', '.join(loose)}, not J = {jt}"
    ls = cd.ls_labels
    head = text.rpartition(" ")[0]
    same_cfg = [lab for lab in ls if head and lab.rpartition(" ")[0] == head]
    listed = same_cfg or ls
    return (
        f"label {_quote(label)} names no state with J = {jt}; the LS labels that exist there: "
        f"{_listing(listed)}"
    )


def leading_row(cd, scheme: str, vector) -> int:
    """Row of the largest component of an eigenvector in a scheme's basis."""
    _, coords = cd.scheme(scheme, vector)
    return int(abs(coords).argmax())


__all__ = ["LabelTarget", "resolve_label", "leading_row", "canonical_spelling", "SCHEMES"]
