"""Editing state behind the terminal workspace: undo, redo, dirty flag, autosave journal.

Pure Python (no UI imports), so the same logic is testable and usable from a notebook.
Every edit goes through :meth:`Workspace.edit`, which snapshots the session before the
change; undo restores that snapshot exactly. After each edit the whole session is
written atomically to a journal file beside the session, so a dropped connection loses
nothing; saving removes the journal.
"""

from __future__ import annotations

import copy
import os
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from finefit.errors import FinefitError
from finefit.session import Session
from finefit.storage.atomic import atomic_write_text
from finefit.storage.session_file import parse_session


@dataclass
class Snapshot:
    parameters: dict
    levels: list
    parameter_sets: list
    options: object
    description: str
    level_sets: list = field(default_factory=list)


def journal_path(session_path: Path) -> Path:
    return session_path.with_name(f".{session_path.name}.journal")


class Workspace:
    """A session being edited interactively."""

    def __init__(self, session: Session, journal: bool = True) -> None:
        self.session = session
        self.undo_stack: list[Snapshot] = []
        self.redo_stack: list[Snapshot] = []
        self.dirty = False
        self.use_journal = journal and session.path is not None
        self.generation = 0  # bumps on every change: stale fit results are dropped

    # ------------------------------------------------------------------ journal
    @property
    def journal(self) -> Path | None:
        return journal_path(self.session.path) if self.session.path else None

    @staticmethod
    def pending_journal(path: str | Path) -> Path | None:
        """A journal left by an earlier run that differs from the saved session, if any."""
        p = Path(path)
        j = journal_path(p)
        if not j.exists():
            return None
        try:
            if p.exists() and j.read_text(encoding="utf-8") == p.read_text(encoding="utf-8"):
                return None
        except OSError:
            return None
        return j

    @classmethod
    def recover(cls, path: str | Path) -> Workspace:
        """Open the session with the journal's content (unsaved until saved)."""
        p = Path(path)
        j = journal_path(p)
        data = parse_session(j.read_text(encoding="utf-8"), source=str(j))
        ws = cls(Session(data, path=p))
        ws.dirty = True
        return ws

    def discard_journal(self) -> None:
        j = self.journal
        if j is not None and j.exists():
            os.unlink(j)

    def _write_journal(self) -> None:
        if self.use_journal and self.journal is not None:
            atomic_write_text(self.journal, self.session.to_toml(), backup=False)

    # ------------------------------------------------------------------ edits
    def _snapshot(self, description: str) -> Snapshot:
        s = self.session
        return Snapshot(
            parameters={n: p.copy() for n, p in s.parameters.items()},
            levels=[lv.copy() for lv in s.levels],
            parameter_sets=copy.deepcopy(s.parameter_sets),
            options=copy.deepcopy(s.options),
            description=description,
            level_sets=copy.deepcopy(s.level_sets),
        )

    def _restore(self, snap: Snapshot) -> None:
        s = self.session
        s.parameters = {n: p.copy() for n, p in snap.parameters.items()}
        s.levels = [lv.copy() for lv in snap.levels]
        s.parameter_sets = copy.deepcopy(snap.parameter_sets)
        s.options = copy.deepcopy(snap.options)
        s.level_sets = copy.deepcopy(snap.level_sets)

    def edit(self, description: str, change: Callable[[Session], object]) -> object:
        """Apply ``change`` to the session as one undoable step.

        If it raises (bad input) or leaves a session the fit cannot accept, the session
        is restored and the error propagates: nothing changes.
        """
        before = self._snapshot(description)
        try:
            result = change(self.session)
            self.session.problem()  # validates labels, J counts and pins as a whole
        except Exception:
            self._restore(before)
            raise
        self.undo_stack.append(before)
        self.redo_stack.clear()
        self.dirty = True
        self.generation += 1
        self._write_journal()
        return result

    def undo(self) -> str | None:
        """Go back one edit; returns its description (None when there is nothing to undo)."""
        return self._move(self.undo_stack, self.redo_stack)

    def redo(self) -> str | None:
        """Repeat the edit undone last; returns its description."""
        return self._move(self.redo_stack, self.undo_stack)

    def _move(self, source: list[Snapshot], target: list[Snapshot]) -> str | None:
        if not source:
            return None
        snap = source.pop()
        target.append(self._snapshot(snap.description))
        self._restore(snap)
        self.dirty = True
        self.generation += 1
        self._write_journal()
        return snap.description

    def save(self, path: str | Path | None = None) -> Path:
        if path is None and self.session.path is None:
            raise FinefitError("no file name to save to", "path")
        old_journal = self.journal
        p = self.session.save(path)
        self.dirty = False
        if old_journal is not None and old_journal.exists():
            os.unlink(old_journal)
        return p
