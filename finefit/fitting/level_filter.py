"""The filter language of the level list (pure; used by the workspace, testable alone).

A filter is a list of terms separated by spaces; a level is shown when every term holds.

- a plain word matches id, label, configuration or the attached state's label
  (case-insensitive substring): ``4F``, ``L01``
- ``c=3d6 4s`` (also ``conf=``): the configuration; written with or without spaces
  between subshells (``c=3d64s``); words after ``c=`` that are subshells belong to it
- ``J=7/2`` or ``J=7/2,9/2`` (also ``J=3.5``): one of these J values
- ``p=odd`` / ``p=even`` (also ``p=o``)
- ``id=L001,L007``; ``label=4F`` (substring of the label only)
- ``e>20000``, ``e<30000``, ``e=20000..30000``: observed energy (cm-1)
- ``oc>5`` (|O-C| in cm-1) and ``oc>2s`` (in units of sigma)
- ``is=excluded``, ``is=included``, ``is=pinned``, ``is=mismatch``, ``is=outlier``
  (|O-C| above 2 sigma); several joined by commas must all hold

An unknown key or a value that cannot be read raises :class:`FilterError` naming the
term, so a typing mistake never silently empties the list.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass

from finefit.errors import FinefitError
from finefit.notation.jvalues import parse_j

KEYS = ("c", "conf", "configuration", "j", "p", "parity", "id", "label", "e", "oc", "is")
STATES = ("excluded", "included", "pinned", "mismatch", "outlier")
_SUBSHELL = re.compile(r"^\d+[spdfghik]\d*$", re.IGNORECASE)
_TERM = re.compile(r"^([A-Za-z]+)(=|>=|<=|>|<)(.*)$")


class FilterError(FinefitError):
    """A filter term that cannot be read."""


@dataclass(frozen=True)
class LevelFilter:
    """A parsed filter: ``matches(level, row, sigma)`` for an observed level, its fit row
    (or None before a fit) and the fit's sigma (or None)."""

    text: str
    tests: tuple[Callable, ...]

    def matches(self, level, row=None, sigma: float | None = None) -> bool:
        return all(t(level, row, sigma) for t in self.tests)

    def __bool__(self) -> bool:
        return bool(self.tests)


def _norm_conf(text: str) -> str:
    return text.replace(" ", "").replace(".", "").lower()


def _number(token: str, text: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise FilterError(f"filter term {token!r}: {text!r} is not a number", token) from None


def _compare(op: str, limit: float) -> Callable[[float], bool]:
    return {">": lambda x: x > limit, ">=": lambda x: x >= limit, "<": lambda x: x < limit,
            "<=": lambda x: x <= limit}[op]


def _tokens(text: str) -> list[str]:
    """Split on spaces, joining the subshells that follow ``c=`` to its value."""
    out: list[str] = []
    for word in text.split():
        prev = out[-1] if out else ""
        m = _TERM.match(prev)
        if m and m.group(1).lower() in ("c", "conf", "configuration") and _SUBSHELL.match(word):
            out[-1] = prev + " " + word
        else:
            out.append(word)
    return out


def parse_filter(text: str) -> LevelFilter:
    """Read a filter (see the module docstring); raises FilterError on a bad term."""
    tests: list[Callable] = []
    for token in _tokens(text or ""):
        m = _TERM.match(token)
        if not m:
            word = token.lower()
            tests.append(lambda lv, row, sg, w=word: w in " ".join(
                [lv.id, lv.label or "", lv.configuration or "",
                 row.calc_label if row is not None else "",
                 row.configuration if row is not None else ""]).lower())
            continue
        key, op, value = m.group(1).lower(), m.group(2), m.group(3).strip()
        if key not in KEYS:
            raise FilterError(f"filter term {token!r}: unknown key {key!r} (known: c, J, p, "
                              "id, label, e, oc, is)", token)
        if not value:
            raise FilterError(f"filter term {token!r} has no value", token)
        if key in ("e", "oc"):
            tests.append(_numeric(token, key, op, value))
            continue
        if op != "=":
            raise FilterError(f"filter term {token!r}: only e and oc take < or >", token)
        alternatives = [v for v in value.split(",") if v]
        if key in ("c", "conf", "configuration"):
            confs = {_norm_conf(v) for v in alternatives}
            tests.append(lambda lv, row, sg, cs=confs: _norm_conf(
                lv.configuration or (row.configuration if row is not None else "")) in cs)
        elif key == "j":
            js = set()
            for v in alternatives:
                try:
                    js.add(round(2 * parse_j(v)))
                except FinefitError:
                    raise FilterError(f"filter term {token!r}: {v!r} is not a J value",
                                      token) from None
            tests.append(lambda lv, row, sg, js=js: round(2 * lv.J) in js)
        elif key in ("p", "parity"):
            ps = set()
            for v in alternatives:
                full = next((p for p in ("even", "odd") if p.startswith(v.lower())), None)
                if full is None:
                    raise FilterError(f"filter term {token!r}: parity is even or odd", token)
                ps.add(full)
            tests.append(lambda lv, row, sg, ps=ps: lv.parity in ps)
        elif key == "id":
            ids = {v.lower() for v in alternatives}
            tests.append(lambda lv, row, sg, ids=ids: lv.id.lower() in ids)
        elif key == "label":
            word = value.lower()
            tests.append(lambda lv, row, sg, w=word: w in (lv.label or "").lower())
        else:  # is=
            for v in alternatives:
                state = next((s for s in STATES if s.startswith(v.lower())), None)
                if state is None:
                    raise FilterError(f"filter term {token!r}: is= takes "
                                      f"{', '.join(STATES)}", token)
                tests.append(_state_test(state))
    return LevelFilter(text or "", tuple(tests))


def _numeric(token: str, key: str, op: str, value: str) -> Callable:
    in_sigma = key == "oc" and value.lower().endswith(("s", "σ"))
    if in_sigma:
        value = value[:-1]
    if op == "=" and ".." in value:
        lo_t, hi_t = value.split("..", 1)
        lo, hi = _number(token, lo_t), _number(token, hi_t)
        ok = lambda x: lo <= x <= hi  # noqa: E731
    elif op == "=":
        raise FilterError(f"filter term {token!r}: write {key}>x, {key}<x or {key}=a..b", token)
    else:
        ok = _compare(op, _number(token, value))
    if key == "e":
        return lambda lv, row, sg: ok(lv.energy)

    def oc_test(lv, row, sg) -> bool:
        if row is None:
            return False
        x = abs(row.residual)
        if in_sigma:
            if not sg:
                return False
            x /= sg
        return ok(x)

    return oc_test


def _state_test(state: str) -> Callable:
    if state == "excluded":
        return lambda lv, row, sg: not lv.include
    if state == "included":
        return lambda lv, row, sg: bool(lv.include)
    if state == "pinned":
        return lambda lv, row, sg: lv.state is not None
    if state == "mismatch":
        return lambda lv, row, sg: row is not None and bool(row.label_mismatch)
    return lambda lv, row, sg: row is not None and bool(sg) and abs(row.residual) > 2 * sg
