"""Import of published level compilations into a session (session layer).

Rows are read by :mod:`finefit.storage.level_tables` and translated by
:mod:`finefit.notation.compilation`; here each row is decided on against the
session's configurations and models. Defaults (documented in DEVELOPERS.md,
"Importing published level lists"):

- ionization-limit rows, rows without an energy, rows with an unresolved J
  (``7/2,9/2``, ``3 or 4``), levels known only relative to an unknown offset
  (``+x``) and levels of configurations the session does not have are skipped,
  each with its line and reason;
- doubtful levels (``?``) and doubtful J (``2?``) are imported excluded from the fit,
  and so are levels in brackets (derived, not observed) unless ``include_derived``;
- a designation that finefit cannot read as a label of the model (a doubtful term,
  a parent with an ordering letter, a repeated term without its index, a coupling
  tree finefit does not build) is kept in the level's note and the level is imported
  unlabelled: it attaches by energy order among the states the labelled levels leave;
- importing the same table again updates the levels it imported before (same
  parity, J and published designation, or the same energy) instead of adding them.
"""

from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

from finefit.errors import FinefitError
from finefit.fitting.settings import ObservedLevel
from finefit.notation.compilation import (
    CompilationRow,
    finefit_label,
    open_part,
    read_term,
)
from finefit.notation.configuration import parse_configuration
from finefit.notation.jvalues import format_j, parse_j
from finefit.storage.level_tables import read_compilation

PUBLISHED = "as published: "
_MATCH_ENERGY = 0.005  # cm^-1: an earlier import of the same level, without a designation


@dataclass
class ImportReport:
    """What an import did: counts, and every row not taken with its line and reason."""

    source: str
    rows: int = 0
    imported: int = 0
    updated: int = 0
    skipped: list[tuple[int, str]] = field(default_factory=list)
    excluded: list[tuple[str, str]] = field(default_factory=list)  # (level id, why)
    unlabelled: list[tuple[str, str]] = field(default_factory=list)  # (level id, why)
    ionization_limit: float | None = None

    def skipped_by_reason(self) -> Counter:
        return Counter(_reason_kind(r) for _, r in self.skipped)

    def summary(self) -> list[str]:
        """A short report, one line per kind."""
        out = [
            f"{self.source}: {self.rows} rows: {self.imported} levels imported, "
            f"{self.updated} updated, {len(self.skipped)} skipped"
        ]
        for kind, n in sorted(self.skipped_by_reason().items(), key=lambda kv: -kv[1]):
            out.append(f"  skipped {n:4d}  {kind}")
        for kind, n in sorted(
            Counter(_reason_kind(r) for _, r in self.excluded).items(), key=lambda kv: -kv[1]
        ):
            out.append(f"  imported, excluded from the fit {n:4d}  {kind}")
        for kind, n in sorted(
            Counter(_reason_kind(r) for _, r in self.unlabelled).items(), key=lambda kv: -kv[1]
        ):
            out.append(f"  imported without a label {n:4d}  {kind}")
        if self.ionization_limit is not None:
            out.append(f"  ionization limit in the table: {self.ionization_limit:g} cm-1")
        return out

    def as_dict(self) -> dict:
        return {
            "source": self.source,
            "rows": self.rows,
            "imported": self.imported,
            "updated": self.updated,
            "skipped": [{"line": ln, "reason": r} for ln, r in self.skipped],
            "excluded": [{"id": i, "reason": r} for i, r in self.excluded],
            "unlabelled": [{"id": i, "reason": r} for i, r in self.unlabelled],
            "ionization_limit": self.ionization_limit,
        }


def _reason_kind(reason: str) -> str:
    """The kind of a reason, without the row's particulars (for counting)."""
    return reason.split(":")[0]


def _energy(text: str) -> tuple[float | None, str]:
    t = text.strip()
    if not t:
        return None, "no energy"
    if "+x" in t.replace(" ", "").lower() or re.search(r"[+][a-z]", t):
        return None, "known only relative to an unknown offset (+x)"
    if t.endswith("."):
        t = t[:-1]
    if not re.fullmatch(r"[+-]?\d+(\.\d*)?([eE][+-]?\d+)?", t):
        return None, f"energy not a number: {text[:40]!r}"
    return float(t), ""


def import_compilation(
    session, path: str | Path, include_derived: bool = False
) -> ImportReport:
    """Import a level table in the compilations' layout into ``session`` (changed in place)."""
    rows = read_compilation(path)
    report = ImportReport(str(path), rows=len(rows))
    by_open: dict[tuple, str] = {}
    for cfg in session.configurations:
        by_open.setdefault(open_part(parse_configuration(cfg).subshells), cfg)
    new_levels: list[tuple[CompilationRow, ObservedLevel, list[str], str]] = []
    for row in rows:
        lv, why, reasons, label_why = _level_of_row(
            session, row, by_open, include_derived, report
        )
        if lv is None:
            report.skipped.append((row.line, why))
        else:
            new_levels.append((row, lv, reasons, label_why))
    _place(session, new_levels, report)
    return report


def _level_of_row(session, row: CompilationRow, by_open, include_derived, report):
    term = read_term(row.term_text)
    if row.j_text.strip() == "---" or row.term_text.strip().lower() == "limit":
        e, _ = _energy(row.energy_text)
        if e is not None and report.ionization_limit is None:
            report.ionization_limit = e
        return None, "ionization limit", [], ""
    if row.config_problem:
        if row.config_problem == "no configuration":
            return None, "no configuration given", [], ""
        return None, f"configuration not read: {row.configuration_text[:60]}", [], ""
    cfg = by_open.get(open_part(row.subshells))
    if cfg is None:
        return None, f"other configuration: {row.configuration_text[:60]}", [], ""
    energy, why = _energy(row.energy_text + ("+x" if "+x" in row.suffix else ""))
    if energy is None:
        return None, why, [], ""
    jt = row.j_text.strip()
    notes = [PUBLISHED + row.designation]
    include = True
    reasons = []
    if not jt:
        return None, "no J", [], ""
    if "," in jt or " or " in jt:
        return None, f"J not resolved: {jt}", [], ""
    if jt.endswith("?"):
        jt = jt[:-1].strip()
        include = False
        reasons.append("doubtful J")
    try:
        J = parse_j(jt)
    except FinefitError:
        return None, f"J not read: {jt[:20]!r}", [], ""
    parity = parse_configuration(cfg).parity
    if term.odd is not None and term.odd != (parity == "odd"):
        return None, f"parity of the term disagrees with the configuration: {row.term_text}", [], ""
    model = session.models[parity]
    if int(round(2 * J)) not in {b.J2 for b in model.blocks}:
        return None, f"J = {format_j(J)} impossible for {cfg}", [], ""
    if "?" in row.prefix + row.suffix:
        include = False
        reasons.append("doubtful level (?)")
    if "[" in row.prefix + row.suffix and not include_derived:
        include = False
        reasons.append("derived, not observed ([ ])")
    label = None
    label_why = ""
    if term.doubtful:
        label_why = "doubtful designation"
    elif term.scheme == "none":
        label_why = "no term given"
    elif term.scheme == "unread":
        label_why = f"term not read: {row.term_text[:30]}"
    else:
        text = finefit_label(row.subshells, term, parse_configuration(cfg))
        if text is None:
            label_why = "designation with an energy-ordered parent or an inconsistent J"
        else:
            try:
                label = session.resolve_label(text, J, parity).text
            except FinefitError as exc:
                msg = str(exc)
                if "more than once" in msg:
                    label_why = "repeated term without its index"
                else:
                    label_why = "not a state of the model in its coupling scheme"
    if reasons:
        notes.append("excluded: " + ", ".join(reasons))
    lv = ObservedLevel(
        id="", energy=energy, J=J, parity=parity, configuration=cfg, label=label,
        include=include, note="; ".join(notes),
    )
    return lv, "", reasons, label_why


def _designation(lv: ObservedLevel) -> str | None:
    for part in (lv.note or "").split("; "):
        if part.startswith(PUBLISHED):
            return part[len(PUBLISHED) :]
    return None


def _place(session, new_levels, report: ImportReport) -> None:
    """Update earlier imports of the same levels, add the rest (within the model's room)."""
    existing = list(session.levels)
    by_key: dict[tuple, list[ObservedLevel]] = {}
    for lv in existing:
        d = _designation(lv)
        if d is not None:
            by_key.setdefault((lv.parity, round(2 * lv.J), d), []).append(lv)
    room: dict[tuple[str, int], int] = {}
    for parity, model in session.models.items():
        for b in model.blocks:
            room[(parity, b.J2)] = b.size
    for lv in existing:
        room[(lv.parity, round(2 * lv.J))] -= 1
    claimed: set[str] = set()
    for row, lv, reasons, label_why in new_levels:
        key = (lv.parity, round(2 * lv.J), _designation(lv))
        candidates = [c for c in by_key.get(key, []) if c.id not in claimed]
        if len(candidates) > 1:
            candidates = sorted(candidates, key=lambda c: abs(c.energy - lv.energy))[:1]
        if not candidates:
            candidates = [
                c
                for c in existing
                if c.id not in claimed
                and c.parity == lv.parity
                and round(2 * c.J) == round(2 * lv.J)
                and abs(c.energy - lv.energy) <= _MATCH_ENERGY
            ][:1]
        if candidates:
            old = candidates[0]
            claimed.add(old.id)
            old.energy = lv.energy
            old.configuration = lv.configuration
            if lv.label:
                old.label = lv.label
            if _designation(old) is None:
                old.note = "; ".join(x for x in (old.note, lv.note) if x)
            report.updated += 1
            continue
        block = (lv.parity, round(2 * lv.J))
        if room.get(block, 0) <= 0:
            report.skipped.append(
                (row.line, f"more levels of J = {format_j(lv.J)} ({lv.parity}) than states")
            )
            continue
        room[block] -= 1
        lv.id = session.new_level_id()
        session.levels.append(lv)
        report.imported += 1
        if reasons:
            report.excluded.append((lv.id, ", ".join(reasons)))
        if label_why:
            report.unlabelled.append((lv.id, label_why))


__all__ = ["ImportReport", "import_compilation", "PUBLISHED"]
