"""Atomic file writes that keep the previous version as a backup."""

from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path


def read_text(path: str | os.PathLike, what: str) -> str:
    """A text file's content; a missing or unreadable file is a FinefitError naming it."""
    from finefit.errors import FinefitError

    p = Path(path)
    try:
        return p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise FinefitError(f"{what} {str(p)!r} does not exist", str(p)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise FinefitError(f"cannot read {what} {str(p)!r}: {exc}", str(p)) from None


def atomic_write_text(path: str | os.PathLike, text: str, backup: bool = True) -> Path:
    """Write ``text`` to ``path`` so that a crash leaves either the old or the new file.

    The text goes to a temporary file in the same folder, is flushed and fsync'ed,
    the old file is copied to ``<name>.bak`` and the temporary file is renamed over
    the target (an atomic replace on POSIX and Windows).
    """
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    folder.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        if backup and target.exists():
            shutil.copy2(target, target.with_name(target.name + ".bak"))
        os.replace(tmp, target)
        tmp = None
        try:
            dir_fd = os.open(folder, os.O_RDONLY)
        except OSError:
            dir_fd = None
        if dir_fd is not None:
            try:
                os.fsync(dir_fd)
            except OSError:
                pass
            finally:
                os.close(dir_fd)
    finally:
        if tmp is not None and os.path.exists(tmp):
            os.unlink(tmp)
    return target
