"""Output files (level tables, publication tables, figures) that never overwrite by accident.

An output command may replace a file only when finefit wrote it and nobody changed it
since: each folder that receives outputs holds a small manifest
(``.finefit-outputs.json``) with the SHA-256 of every file finefit wrote there. The
session file, its backup and its journal are never outputs, and any other existing
file needs ``force`` (its old content is then kept as ``<name>.bak``). All targets are
checked before the first one is written, so a refused command changes nothing.
"""

from __future__ import annotations

import hashlib
import json
import os
from collections.abc import Iterable
from pathlib import Path

from finefit.errors import FinefitError, quote_path
from finefit.storage.atomic import atomic_write_bytes, check_path, real_target

MANIFEST = ".finefit-outputs.json"


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _manifest(folder: Path) -> dict[str, str]:
    try:
        doc = json.loads((folder / MANIFEST).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}
    if not isinstance(doc, dict):
        return {}
    return {k: v for k, v in doc.items() if isinstance(k, str) and isinstance(v, str)}


def session_companions(session_path: str | os.PathLike) -> list[Path]:
    """The session file and the files that belong to it (backup, journal)."""
    p = real_target(session_path)
    return [p, p.with_name(p.name + ".bak"), p.with_name(f".{p.name}.journal"),
            p.with_name(f".{p.name}.journal.base")]


class OutputGuard:
    """Decides which output files may be written and writes them atomically."""

    def __init__(self, protected: Iterable[str | os.PathLike] = (), force: bool = False) -> None:
        self.protected = {real_target(p) for p in protected}
        self.force = force

    def _owned(self, target: Path) -> bool:
        """True when finefit wrote ``target`` and its content is unchanged since."""
        digest = _manifest(target.parent).get(target.name)
        if digest is None:
            return False
        try:
            return _sha256(target.read_bytes()) == digest
        except OSError:
            return False

    def check(self, paths: Iterable[str | os.PathLike]) -> None:
        """Raise a FinefitError for the first path that must not be written."""
        for path in paths:
            shown = str(path)
            target = real_target(path)
            if target in self.protected:
                if not self.force:
                    raise FinefitError(
                        f"{quote_path(shown)} is the session file (or its backup or journal); "
                        "an output would overwrite it (use --force if you mean it)", shown)
            if target.name == MANIFEST:
                raise FinefitError(f"{quote_path(shown)} is finefit's list of written files", shown)
            if target.is_dir():
                raise FinefitError(f"{quote_path(shown)} is a folder, not a file", shown)
            if target.exists() and not self.force and not self._owned(target):
                raise FinefitError(
                    f"{quote_path(shown)} exists and was not written by finefit (or was changed "
                    "since); use --force to overwrite it (its content goes to .bak)", shown)
            parent = target.parent
            while not parent.exists() and parent != parent.parent:
                parent = parent.parent
            if not parent.is_dir():
                raise FinefitError(f"cannot write {quote_path(shown)}: {quote_path(parent)} is a "
                                   "file, not a folder", shown)

    def write(self, path: str | os.PathLike, data: bytes | str) -> Path:
        """Write one output (checked again) and record it in its folder's manifest."""
        self.check([path])
        if isinstance(data, str):
            data = data.encode("utf-8")
        target = real_target(path)
        foreign = target.exists() and not self._owned(target)
        atomic_write_bytes(path, data, backup=foreign)
        folder = target.parent
        record = _manifest(folder)
        record[target.name] = _sha256(data)
        atomic_write_bytes(folder / MANIFEST,
                           (json.dumps(record, indent=1, sort_keys=True) + "\n").encode(),
                           backup=False)
        return Path(path)


def check_output_folder(folder: str | os.PathLike) -> Path:
    """A folder for outputs: an existing file of that name is an error."""
    p = check_path(folder)
    if p.exists() and not p.is_dir():
        raise FinefitError(f"output folder {quote_path(p)} is a file, not a folder", str(p))
    return p
