"""The ``[[level_set]]`` records of a session file: which line list produced the levels.

A record is written each time optimised level energies are applied to a session
(like ``[[parameter_set]]`` for fits): the line list, the reference level, the
statistics and the energies and uncertainties it set, with the values they replaced.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from finefit.errors import FinefitError

LEVEL_SET_KEYS = ("name", "created", "source", "reference", "blends", "excluded", "n_lines",
                  "n_levels", "chi2", "dof", "note", "energies", "uncertainties", "previous",
                  "previous_uncertainties")


@dataclass
class LevelSet:
    """Level energies from one line list, as applied to the session."""

    name: str
    created: str
    source: str  # the line list
    reference: str  # level id held fixed
    energies: dict[str, float]
    uncertainties: dict[str, float]
    previous: dict[str, float] = field(default_factory=dict)
    previous_uncertainties: dict[str, float] = field(default_factory=dict)
    blends: str = "exclude"
    excluded: list[int] = field(default_factory=list)  # file lines kept out of the fit
    n_lines: int = 0
    n_levels: int = 0
    chi2: float | None = None
    dof: int = 0
    note: str = ""


def _numbers(entry: dict, key: str, ctx: str, source: str) -> dict[str, float]:
    t = entry.get(key, {})
    if not isinstance(t, dict) or not all(
        isinstance(v, int | float) and not isinstance(v, bool) and math.isfinite(v)
        for v in t.values()
    ):
        raise FinefitError(f"{source}: {ctx} '{key}' must map level ids to numbers", ctx)
    return {k: float(v) for k, v in t.items()}


def parse_level_sets(items: Any, source: str) -> list[LevelSet]:
    """Validate the ``level_set`` array of a session document."""
    if not isinstance(items, list):
        raise FinefitError(f"{source}: 'level_set' must be an array of tables [[level_set]]",
                           "level_set")
    out = []
    for i, entry in enumerate(items, start=1):
        ctx = f"level set {i}"
        if not isinstance(entry, dict):
            raise FinefitError(f"{source}: {ctx} must be a table", ctx)
        for k in entry:
            if k not in LEVEL_SET_KEYS:
                raise FinefitError(f"{source}: unknown key '{k}' in {ctx}; allowed keys: "
                                   f"{', '.join(LEVEL_SET_KEYS)}", k)
        text = {}
        for k in ("name", "created", "source", "reference", "blends", "note"):
            v = entry.get(k, "")
            if not isinstance(v, str):
                raise FinefitError(f"{source}: {ctx}, key '{k}' must be text, got {v!r}", k)
            text[k] = v
        if not text["name"]:
            raise FinefitError(f"{source}: {ctx} needs 'name'", "name")
        ints = {}
        for k in ("n_lines", "n_levels", "dof"):
            v = entry.get(k, 0)
            if isinstance(v, bool) or not isinstance(v, int):
                raise FinefitError(f"{source}: {ctx}, key '{k}' must be a whole number, "
                                   f"got {v!r}", k)
            ints[k] = v
        chi2 = entry.get("chi2")
        if chi2 is not None and (isinstance(chi2, bool) or not isinstance(chi2, int | float)):
            raise FinefitError(f"{source}: {ctx}, key 'chi2' must be a number, got {chi2!r}",
                               "chi2")
        excluded = entry.get("excluded", [])
        if not isinstance(excluded, list) or not all(
                isinstance(x, int) and not isinstance(x, bool) for x in excluded):
            raise FinefitError(f"{source}: {ctx}, key 'excluded' must be a list of file line "
                               "numbers", "excluded")
        unc = _numbers(entry, "uncertainties", ctx, source)
        if any(not v >= 0 for v in unc.values()):
            raise FinefitError(f"{source}: {ctx} uncertainties must not be negative", ctx)
        out.append(LevelSet(
            name=text["name"], created=text["created"], source=text["source"],
            reference=text["reference"], energies=_numbers(entry, "energies", ctx, source),
            uncertainties=unc, previous=_numbers(entry, "previous", ctx, source),
            previous_uncertainties=_numbers(entry, "previous_uncertainties", ctx, source),
            blends=text["blends"] or "exclude", excluded=list(excluded), n_lines=ints["n_lines"],
            n_levels=ints["n_levels"], chi2=None if chi2 is None else float(chi2),
            dof=ints["dof"], note=text["note"],
        ))
    return out


def dump_level_sets(sets: list[LevelSet]) -> list[dict[str, Any]]:
    """The records as TOML-ready tables, keys in a fixed order."""
    out = []
    for ls in sets:
        d = {"name": ls.name, "created": ls.created, "source": ls.source,
             "reference": ls.reference, "blends": ls.blends,
             "excluded": list(ls.excluded) or None, "n_lines": ls.n_lines,
             "n_levels": ls.n_levels, "chi2": ls.chi2, "dof": ls.dof, "note": ls.note or None,
             "energies": dict(ls.energies), "uncertainties": dict(ls.uncertainties),
             "previous": dict(ls.previous),
             "previous_uncertainties": dict(ls.previous_uncertainties)}
        out.append({k: v for k, v in d.items() if v is not None})
    return out
