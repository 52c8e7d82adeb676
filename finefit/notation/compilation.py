"""Rows of the published level compilations, read into finefit's notation (pure).

The compilations write a level as configuration, term, J and energy, with their own
conventions: configurations with dots, parent terms and sometimes closed subshells
(``3d6.(5D).4s``, ``3p6.3d2``, ``2p5.(2P*<3/2>).3p``, ``4f2.(3H<4>).6d<5/2>``); terms
with an ordering letter, ``*`` for odd parity, the repeated-term index and ``?`` for
a doubtful designation (``a 6D``, ``z 6F*``, ``3d7 a 2D2``, ``3F?``); pair coupling
``2[5/2]`` and J1j coupling ``(4,5/2)``; J as ``7/2``, ``---`` (the ionization
limit), ``7/2,9/2`` or ``3 or 4`` (unresolved), ``2?`` (doubtful) or blank; and
prefix/suffix marks ``[ ]`` (a level derived rather than observed), ``?`` (doubtful)
and ``+x`` (known only relative to an unknown offset).

This module reads such a row and writes the label finefit expects; deciding what
to do with a row (skip it, import it excluded from the fit) is the session's job.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from finefit.errors import FinefitError
from finefit.notation.configuration import (
    ORBITAL_LETTERS,
    Configuration,
    Subshell,
    parse_subshell,
)
from finefit.notation.terms import ODD

COMPILATION_HEADER = ("configuration", "term", "j", "prefix", "level (cm-1)", "suffix")

_SUBSHELL = re.compile(r"^(\d+)([spdfghik])(\d*)(?:<(\d+(?:/2)?)>)?$")
_PARENT = re.compile(r"^\((?:([a-z]) )?(\d+)([A-Z])(\d*)(\*?)(?:<(\d+(?:/2)?)>)?\)$")
_LS_TERM = re.compile(r"^(?:([a-z]) )?(\d+)([A-Z])(\d*)(\*?)$")
_JK_TERM = re.compile(r"^(\d+)\[(\d+(?:/2)?)\](\*?)$")
_J1J_TERM = re.compile(r"^\((\d+(?:/2)?),(\d+(?:/2)?)\)(\*?)$")


@dataclass(frozen=True)
class WrittenSubshell:
    """A subshell as a compilation row writes it, with what follows it."""

    subshell: Subshell
    parent: str = ""  # the term in parentheses after it, in finefit's spelling ("3P2", "2P°")
    parent_letter: str = ""  # an ordering letter inside the parent: "(a 2G)"
    parent_j: str = ""  # "<3/2>" on the parent: J of the core (pair and J1j coupling)
    j: str = ""  # "<5/2>" on the subshell itself: j of the outer electron (J1j coupling)


@dataclass(frozen=True)
class CompilationRow:
    """One row of a compilation table, read (nothing decided yet)."""

    line: int
    configuration_text: str
    term_text: str
    j_text: str
    prefix: str
    energy_text: str
    suffix: str
    subshells: tuple[WrittenSubshell, ...] = ()
    config_problem: str = ""  # why the configuration could not be read ("" = fine)
    extra: tuple[str, ...] = field(default_factory=tuple)

    @property
    def designation(self) -> str:
        """The level's name as published: configuration and term."""
        return " ".join(t for t in (self.configuration_text, self.term_text) if t)


def parse_compilation_configuration(text: str) -> tuple[tuple[WrittenSubshell, ...], str]:
    """The subshells (with parents) of a compilation configuration, or a reason it is unread.

    Returns ``(subshells, "")`` or ``((), reason)``; never raises.
    """
    t = text.strip()
    if not t:
        return (), "no configuration"
    if "?" in t:
        return (), "doubtful configuration"
    # tokens: split on dots outside parentheses
    tokens, depth, cur = [], 0, ""
    for ch in t:
        if ch == "(":
            depth += 1
        elif ch == ")":
            depth -= 1
        if ch == "." and depth == 0:
            tokens.append(cur)
            cur = ""
        else:
            cur += ch
    tokens.append(cur)
    out: list[WrittenSubshell] = []
    for tok in tokens:
        tok = tok.strip()
        if not tok:
            return (), f"cannot read {text!r}"
        if tok.startswith("("):
            m = _PARENT.match(tok)
            if not m or not out:
                return (), f"cannot read parent term {tok!r}"
            letter, mult, L, index, star, pj = m.groups()
            prev = out[-1]
            if prev.parent:
                return (), f"two parent terms after {prev.subshell}"
            parent = f"{mult}{L}{index}{ODD if star else ''}"
            out[-1] = WrittenSubshell(prev.subshell, parent, letter or "", pj or "", prev.j)
            continue
        m = _SUBSHELL.match(tok)
        if not m:
            return (), f"cannot read subshell {tok!r}"
        n, letter, occ, j = m.groups()
        try:
            sub = parse_subshell(f"{n}{letter}{occ}")
        except FinefitError as exc:
            return (), str(exc)
        if letter not in ORBITAL_LETTERS:
            return (), f"orbital letter {letter!r} is outside s..i"
        out.append(WrittenSubshell(sub, j=j or ""))
    names = [w.subshell.name for w in out]
    if len(set(names)) != len(names):
        return (), "a subshell appears twice"
    return tuple(out), ""


def open_part(subshells) -> tuple[tuple[int, int, int], ...]:
    """The open subshells (n, l, N) of a configuration, sorted: what identifies it in an ion."""
    subs = [w.subshell if isinstance(w, WrittenSubshell) else w for w in subshells]
    return tuple(sorted((s.n, s.l, s.occupancy) for s in subs if s.is_open))


def read_row(line: int, cells: list[str]) -> CompilationRow:
    """A row from its cells in the order of :data:`COMPILATION_HEADER`."""
    cells = [c.strip() for c in cells] + [""] * (6 - len(cells))
    subs, problem = parse_compilation_configuration(cells[0])
    return CompilationRow(
        line, cells[0], cells[1], cells[2], cells[3], cells[4], cells[5], subs, problem,
        tuple(cells[6:]),
    )


@dataclass(frozen=True)
class TermReading:
    """What a compilation term says: scheme, finefit's final-term text, parity, doubt."""

    scheme: str  # "LS", "JK", "J1j", "none" (blank or '*' only), "unread"
    text: str = ""  # final term in finefit's spelling: "6D", "2D2", "2[5/2]", "(4,5/2)"
    odd: bool | None = None  # None: the term does not say
    doubtful: bool = False
    letter: str = ""


def read_term(text: str) -> TermReading:
    """Read a compilation term (``a 6D``, ``z 6F*``, ``2D2``, ``2[1/2]*``, ``(4,5/2)``, ``3F?``)."""
    t = text.strip()
    doubtful = t.endswith("?")
    if doubtful:
        t = t[:-1].strip()
    if t in ("", "*"):
        return TermReading("none", "", True if t == "*" else None, doubtful)
    m = _LS_TERM.match(t)
    if m:
        letter, mult, L, index, star = m.groups()
        return TermReading("LS", f"{mult}{L}{index}", bool(star), doubtful, letter or "")
    m = _JK_TERM.match(t)
    if m:
        mult, k, star = m.groups()
        return TermReading("JK", f"{mult}[{k}]", bool(star), doubtful)
    m = _J1J_TERM.match(t)
    if m:
        jc, j, star = m.groups()
        return TermReading("J1j", f"({jc},{j})", bool(star), doubtful)
    return TermReading("unread", t, None, doubtful)


def finefit_label(
    subshells: tuple[WrittenSubshell, ...], term: TermReading, target: Configuration
) -> str | None:
    """The row's designation as a finefit label for configuration ``target``, or None.

    Subshells are written as ``target`` writes them (closed ones it does not write are
    dropped), each followed by the row's parent term; the final term follows in the
    row's scheme: ``3d6(5D)4s 6D``, ``2p5(2P°1/2)3p 2[1/2]``, ``4f2(3H4)6d(5/2)``.
    Returns None when the row gives no term or a parent with an ordering letter
    (the letter orders by energy; it is not the repeated-term index).
    """
    if term.scheme not in ("LS", "JK", "J1j"):
        return None
    written = {w.subshell.name: w for w in subshells}
    odd = target.parity == "odd"
    chunks: list[str] = []
    core_j = ""
    for s in target.subshells:
        w = written.get(s.name)
        text = str(s)
        if w is not None and w.parent:
            if w.parent_letter:
                return None
            if w.parent_j:
                core_j = w.parent_j
                sep = "," if re.search(r"[A-Z]\d", w.parent) else ""
                text += f"({w.parent}{sep}{w.parent_j})"
            else:
                text += f"({w.parent})"
        chunks.append(text)
    head = ""
    for i, c in enumerate(chunks):
        if i and not chunks[i - 1].endswith(")"):
            head += " "
        head += c
    if term.scheme == "LS":
        final = term.text
        if odd:
            final += ODD
        return f"{head} {final}"
    if term.scheme == "JK":
        if not core_j:
            return None
        return f"{head} {term.text}" + (ODD if odd else "")
    # J1j: '(Jc,j)' -> the outer electron's j after it: '4f2(3H4)6d(5/2)'
    m = _J1J_TERM.match(term.text)
    jc, j = m.group(1), m.group(2)
    if not core_j:
        return None
    if core_j != jc:
        return None
    return f"{head}({j})"


__all__ = [
    "COMPILATION_HEADER",
    "CompilationRow",
    "TermReading",
    "WrittenSubshell",
    "finefit_label",
    "open_part",
    "parse_compilation_configuration",
    "read_row",
    "read_term",
]
