"""Editing state behind the terminal workspace: undo, redo, dirty flag, autosave journal.

Pure Python (no UI imports), so the same logic is testable and usable from a notebook.
Every edit goes through :meth:`Workspace.edit`, which snapshots the session before the
change; undo restores that snapshot exactly. After each edit the whole session is
written atomically to a journal file beside the session, so a dropped connection loses
nothing; saving removes the journal. Beside the journal the text of the file the edits
started from is kept (``.NAME.journal.base``), so that recovery can tell the user's
unsaved edits from changes made to the file since (from the command line, say), show
both and keep either or both (:class:`Recovery`).
"""

from __future__ import annotations

import copy
import os
from collections.abc import Callable
from dataclasses import dataclass, field, fields
from datetime import UTC, datetime
from pathlib import Path

from finefit.errors import FinefitError, quote, shorten
from finefit.session import Session
from finefit.storage.atomic import atomic_write_text
from finefit.storage.session_file import SessionData, parse_session


@dataclass
class Snapshot:
    parameters: dict
    levels: list
    parameter_sets: list
    options: object
    description: str
    level_sets: list = field(default_factory=list)


class FileChangedError(FinefitError):
    """The session file changed on disk since the workspace read or last saved it."""

    def __init__(self, message: str, recovery: Recovery) -> None:
        super().__init__(message, str(recovery.path))
        self.recovery = recovery


def journal_path(session_path: Path) -> Path:
    return session_path.with_name(f".{session_path.name}.journal")


def journal_base_path(session_path: Path) -> Path:
    """The file's text the journal's edits started from."""
    return session_path.with_name(f".{session_path.name}.journal.base")


# ----------------------------------------------------------------------------- recovery
_MISSING = object()


def _items(d: SessionData) -> dict[tuple[str, str], object]:
    """A session as independent items: a three-way merge works item by item."""
    out: dict[tuple[str, str], object] = {
        ("title", ""): d.title, ("note", ""): d.note, ("ion", ""): d.ion,
        ("configurations", ""): tuple(d.configurations), ("options", ""): d.options,
    }
    for n, p in d.parameters.items():
        out[("parameter", n)] = p
    for lv in d.levels:
        out[("level", lv.id)] = lv
    for ps in d.parameter_sets:
        out[("set", ps.name)] = ps
    return out


def _describe_item(key: tuple[str, str], a: object, b: object) -> str:
    kind, name = key
    what = {"parameter": "parameter", "level": "level", "set": "parameter set"}.get(kind, kind)
    label = f"{what} {quote(name, 40)}" if name else what
    if a is _MISSING:
        return f"{label} added"
    if b is _MISSING:
        return f"{label} removed"
    if kind in ("parameter", "level", "set"):
        diffs = [f.name for f in fields(a) if getattr(a, f.name) != getattr(b, f.name)]
        parts = []
        for fname in diffs[:3]:
            va, vb = getattr(a, fname), getattr(b, fname)
            simple = int | float | str | None
            if isinstance(va, simple) and isinstance(vb, simple):
                parts.append(f"{fname} {shorten(repr(va), 20)} -> {shorten(repr(vb), 20)}")
            else:
                parts.append(fname)
        return f"{label}: " + ", ".join(parts) + (" ..." if len(diffs) > 3 else "")
    return f"{label} changed"


def describe_changes(old: SessionData, new: SessionData, limit: int = 8) -> list[str]:
    """What changed from ``old`` to ``new``, one short line per item (at most ``limit``)."""
    a, b = _items(old), _items(new)
    lines = [_describe_item(k, a.get(k, _MISSING), b.get(k, _MISSING))
             for k in dict.fromkeys(list(a) + list(b)) if a.get(k, _MISSING) != b.get(k, _MISSING)]
    if len(lines) > limit:
        lines = lines[:limit] + [f"... and {len(lines) - limit} more"]
    return lines


def _normal(text: str, source: str) -> SessionData:
    """Parsed, validated and completed (default parameters filled in), for comparisons."""
    return Session(parse_session(text, source=source)).data()


@dataclass
class Recovery:
    """A journal left by an earlier run, the state it started from and the file now.

    ``file_changed`` says the file differs from the state the journal's edits started
    from: then :meth:`keep` offers the journal ("journal"), the file ("file") or both
    merged item by item ("both"; an item changed on both sides keeps the file's
    version and the journal is also kept as a separate file, so nothing is lost).
    """

    path: Path
    journal_text: str
    base_text: str | None  # None: the journal predates base records
    file_text: str | None  # None: the file is missing
    file_error: str | None = None  # the file exists but cannot be read as a session
    edits: list[str] = field(default_factory=list)  # journal vs base
    outside: list[str] = field(default_factory=list)  # file vs base

    @property
    def file_changed(self) -> bool:
        if self.file_text is None:
            return False
        if self.base_text is None:
            return True  # unknown start: treat the file as changed, so nothing is dropped
        return self.file_text != self.base_text

    def keep(self, choice: str) -> tuple[Workspace, str]:
        """The workspace for ``choice`` ('journal', 'file' or 'both') and a message."""
        if choice == "file":
            if self.file_error is not None:
                raise FinefitError(f"the file cannot be read: {self.file_error}", "file")
            ws = Workspace(Session.load(self.path))
            ws.discard_journal()
            return ws, "kept the file as it is; discarded the journal"
        journal = _normal(self.journal_text, str(journal_path(self.path)))
        if choice == "journal":
            ws = Workspace(Session(journal, path=self.path))
            msg = "recovered the unsaved changes from the journal (not yet saved)"
        elif choice == "both":
            if self.file_error is not None or self.file_text is None:
                raise FinefitError("the file cannot be read, so it cannot be merged; keep the "
                                   "journal instead", "file")
            data, conflicts = self.merged(journal)
            try:
                ws = Workspace(Session(data, path=self.path))
            except FinefitError as exc:
                raise FinefitError(f"the journal and the file cannot be merged: {exc}",
                                   exc.item) from None
            msg = "merged the journal's edits into the file's changes (not yet saved)"
            if conflicts:
                copy_path = self.keep_journal_copy()
                msg += (f"; {len(conflicts)} item(s) changed on both sides keep the file's "
                        f"version ({', '.join(conflicts[:3])}); the journal is kept as "
                        f"{copy_path.name}")
        else:
            raise FinefitError(f"unknown recovery choice {quote(choice)}", choice)
        ws.base_text = self.file_text
        ws.dirty = True
        ws.generation += 1
        return ws, msg

    def merged(self, journal: SessionData | None = None) -> tuple[SessionData, list[str]]:
        """Three-way merge of the journal and the file over the base; returns the merged
        data and the items changed differently on both sides (the file's version wins)."""
        if journal is None:
            journal = _normal(self.journal_text, str(journal_path(self.path)))
        fdata = _normal(self.file_text or "", str(self.path))
        base = (_normal(self.base_text, "journal base") if self.base_text
                else fdata)
        b, j, f = _items(base), _items(journal), _items(fdata)
        out: dict[tuple[str, str], object] = {}
        conflicts = []
        for k in dict.fromkeys(list(f) + list(j) + list(b)):
            vb, vj, vf = b.get(k, _MISSING), j.get(k, _MISSING), f.get(k, _MISSING)
            if vj == vb or vj == vf:
                v = vf
            elif vf == vb:
                v = vj
            else:
                v = vf
                conflicts.append(_describe_item(k, vb, vj).split(":")[0])
            if v is not _MISSING:
                out[k] = v
        data = SessionData(
            ion=out[("ion", "")], configurations=list(out[("configurations", "")]),
            parameters={k[1]: copy.copy(v) for k, v in out.items() if k[0] == "parameter"},
            levels=[copy.copy(v) for k, v in out.items() if k[0] == "level"],
            options=copy.deepcopy(out[("options", "")]),
            parameter_sets=[copy.deepcopy(v) for k, v in out.items() if k[0] == "set"],
            title=out.get(("title", ""), ""), note=out.get(("note", ""), ""),
        )
        return data, conflicts

    def keep_journal_copy(self) -> Path:
        """Write the journal's content to a visible file beside the session; its path."""
        stamp = datetime.now(UTC).strftime("%Y%m%dT%H%M%S")
        stem = self.path.name[:-5] if self.path.name.endswith(".toml") else self.path.name
        p = self.path.with_name(f"{stem}.unsaved-{stamp}.toml")
        atomic_write_text(p, self.journal_text, backup=False)
        return p


class Workspace:
    """A session being edited interactively."""

    def __init__(self, session: Session, journal: bool = True) -> None:
        self.session = session
        self.undo_stack: list[Snapshot] = []
        self.redo_stack: list[Snapshot] = []
        self.dirty = False
        self.use_journal = journal and session.path is not None
        self.generation = 0  # bumps on every change: stale fit results are dropped
        # the file's text the edits start from (recorded beside the journal)
        self.base_text: str | None = session.source_text
        self._base_written = False
        self.journal_error: str | None = None

    # ------------------------------------------------------------------ journal
    @property
    def journal(self) -> Path | None:
        return journal_path(self.session.path) if self.session.path else None

    @staticmethod
    def pending_journal(path: str | Path) -> Path | None:
        """A journal left by an earlier run that differs from the saved session, if any."""
        rec = Workspace.pending_recovery(path)
        return None if rec is None else journal_path(Path(path))

    @staticmethod
    def pending_recovery(path: str | Path) -> Recovery | None:
        """What an earlier run left behind: its journal, the state it started from and
        the file as it is now; None when there is no journal or it equals the file."""
        p = Path(path)
        j = journal_path(p)
        try:
            journal_text = j.read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError):
            return None
        try:
            file_text = p.read_text(encoding="utf-8")
        except FileNotFoundError:
            file_text = None
        except (OSError, UnicodeDecodeError) as exc:
            file_text, file_error = "", str(exc)
        else:
            file_error = None
        if file_text is not None and journal_text == file_text:
            return None
        try:
            base_text = journal_base_path(p).read_text(encoding="utf-8")
        except (OSError, UnicodeDecodeError):
            base_text = None
        rec = Recovery(p, journal_text, base_text, file_text, file_error)
        try:
            journal = _normal(journal_text, str(j))
        except FinefitError:
            return None  # an unreadable journal holds nothing to recover
        try:
            base = _normal(base_text, "journal base") if base_text else None
        except FinefitError:
            base = None
        if file_text is not None and file_error is None:
            try:
                fdata = _normal(file_text, str(p))
            except FinefitError as exc:
                rec.file_error = str(exc)
                fdata = None
        else:
            fdata = None
        ref = base if base is not None else fdata
        if ref is not None:
            rec.edits = describe_changes(ref, journal)
        if base is not None and fdata is not None and rec.file_changed:
            rec.outside = describe_changes(base, fdata)
        return rec

    @classmethod
    def recover(cls, path: str | Path, keep: str = "journal") -> Workspace:
        """Open the session with the journal's content (``keep='journal'``), the file's
        (``'file'``) or both merged (``'both'``); unsaved until saved."""
        p = Path(path)
        rec = cls.pending_recovery(p)
        if rec is None:
            j = journal_path(p)
            data = parse_session(j.read_text(encoding="utf-8"), source=str(j))
            ws = cls(Session(data, path=p))
            ws.dirty = True
            return ws
        return rec.keep(keep)[0]

    def discard_journal(self) -> None:
        for j in (self.journal, self._base_path):
            if j is not None and j.exists():
                os.unlink(j)
        self._base_written = False

    @property
    def _base_path(self) -> Path | None:
        return journal_base_path(self.session.path) if self.session.path else None

    def _write_journal(self) -> None:
        """Write the journal; a failure (disk full, say) does not undo the edit, which is
        valid, but is kept in ``journal_error`` for the front end to show."""
        if self.use_journal and self.journal is not None:
            try:
                if not self._base_written:  # first the state the edits start from
                    atomic_write_text(self._base_path, self.base_text or "", backup=False)
                    self._base_written = True
                atomic_write_text(self.journal, self.session.to_toml(), backup=False)
            except FinefitError as exc:
                self.journal_error = f"the autosave journal could not be written: {exc}"
            else:
                self.journal_error = None

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
            self.session.validate()  # the validation every save runs
            self.session.problem()  # labels against the eigenstates
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

    def changed_on_disk(self) -> Recovery | None:
        """When the file differs from the text these edits started from (someone changed
        it meanwhile), a Recovery comparing the workspace with it; else None."""
        p = self.session.path
        if p is None or self.base_text is None:
            return None
        try:
            now = p.read_text(encoding="utf-8")
        except FileNotFoundError:
            now = None
        except (OSError, UnicodeDecodeError) as exc:
            rec = Recovery(p, self.session.to_toml(), self.base_text, "", str(exc))
            return rec
        if now == self.base_text:
            return None
        rec = Recovery(p, self.session.to_toml(), self.base_text, now)
        if now is not None:
            try:
                rec.outside = describe_changes(_normal(self.base_text, "read"),
                                               _normal(now, str(p)))
            except FinefitError as exc:
                rec.file_error = str(exc)
        return rec

    def save(self, path: str | Path | None = None, overwrite: bool = False) -> Path:
        """Save; a file changed on disk since it was read is not overwritten silently:
        FileChangedError (with a Recovery to merge) unless ``overwrite``."""
        if path is None and self.session.path is None:
            raise FinefitError("no file name to save to", "path")
        if path is None and not overwrite:
            rec = self.changed_on_disk()
            if rec is not None:
                raise FileChangedError(
                    f"{quote(str(rec.path))} was changed on disk since it was read: "
                    + ("; ".join(rec.outside[:3]) or "content differs"), rec)
        old = [self.journal, self._base_path]
        p = self.session.save(path)
        self.dirty = False
        self.base_text = self.session.source_text
        self._base_written = False
        for j in old:
            if j is not None and j.exists():
                os.unlink(j)
        return p
