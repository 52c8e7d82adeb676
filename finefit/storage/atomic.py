"""Atomic file writes that keep the previous version as a backup.

A save never leaves a half-written file: the new content goes to a temporary file in
the target's folder (an unnamed one where the system allows it, so that a killed
process leaves nothing behind), is fsync'ed and renamed over the target. The file
keeps its nature: a symbolic link is followed and its target written, the mode, owner
and group of the old file are kept (a new file gets the usual 0666 minus the umask),
and ``<name>.bak`` is replaced atomically as well, so it is always a complete copy. A
file without any write permission bit is left alone (a FinefitError says so).
Temporary files left by a process that was killed are removed by the next save.
"""

from __future__ import annotations

import errno
import os
import re
from pathlib import Path

from finefit.errors import FinefitError, quote_path

_PREFIX_LEN = 100  # of the target's name inside temporary names (names stay < 255 bytes)


def read_text(path: str | os.PathLike, what: str) -> str:
    """A text file's content; a missing or unreadable file is a FinefitError naming it."""
    p = check_path(path)
    try:
        if p.is_dir():
            raise FinefitError(f"{what} {quote_path(p)} is a folder, not a file", str(p))
        return p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise FinefitError(f"{what} {quote_path(p)} does not exist", str(p)) from None
    except UnicodeDecodeError as exc:
        raise FinefitError(f"cannot read {what} {quote_path(p)}: not UTF-8 text "
                           f"(byte {exc.start})", str(p)) from None
    except OSError as exc:
        raise FinefitError(f"cannot read {what} {quote_path(p)}: "
                           f"{exc.strerror or exc}", str(p)) from None


def check_path(path: str | os.PathLike) -> Path:
    """``path`` as a Path; a NUL character (which no file name can hold) is a FinefitError."""
    text = os.fspath(path)
    if "\x00" in str(text):
        raise FinefitError(f"file name {quote_path(text)} contains a NUL character", str(text))
    return Path(text)


def real_target(path: str | os.PathLike) -> Path:
    """The file a save of ``path`` writes: symbolic links followed to their target."""
    return Path(os.path.realpath(check_path(path)))


def _umask() -> int:
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    mask = os.umask(0o022)  # no other way to read it; restored at once
    os.umask(mask)
    return mask


def _temp_prefix(name: str) -> str:
    return f".{name[:_PREFIX_LEN]}.{os.getpid()}."


_TEMP_NAME = re.compile(r"^\.(?P<name>.*)\.(?P<pid>\d+)\.[A-Za-z0-9_-]+\.tmp$")


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:
        return True  # exists, owned by someone else
    return True


def stale_temporary_files(path: str | os.PathLike) -> list[Path]:
    """Temporary files of saves of ``path`` whose writing process no longer runs."""
    target = real_target(path)
    short = target.name[:_PREFIX_LEN]
    out = []
    try:
        entries = list(os.scandir(target.parent))
    except OSError:
        return []
    for e in entries:
        m = _TEMP_NAME.match(e.name)
        if m and m.group("name") in (short, (target.name + ".bak")[:_PREFIX_LEN]) \
                and not _alive(int(m.group("pid"))):
            out.append(Path(e.path))
    return out


def remove_stale_temporary_files(path: str | os.PathLike) -> int:
    """Remove what :func:`stale_temporary_files` finds; returns how many were removed."""
    n = 0
    for p in stale_temporary_files(path):
        try:
            os.unlink(p)
            n += 1
        except OSError:
            pass
    return n


def _fsync_folder(folder: Path) -> None:
    try:
        dir_fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(dir_fd)
    except OSError:
        pass
    finally:
        os.close(dir_fd)


def _keep_nature(fd: int, like: os.stat_result | None, new_mode: int) -> None:
    """Give the open temporary file the old file's owner, group and mode."""
    if not hasattr(os, "fchmod"):  # not on every platform; the default mode stays
        return
    if like is None:
        os.fchmod(fd, new_mode)
        return
    if (like.st_uid, like.st_gid) != (os.geteuid(), os.getegid()) and hasattr(os, "fchown"):
        try:
            os.fchown(fd, like.st_uid, like.st_gid)
        except OSError:
            try:  # an ordinary user may still keep the group (one of their own)
                os.fchown(fd, -1, like.st_gid)
            except OSError:
                pass
    os.fchmod(fd, like.st_mode & 0o7777)  # after chown, which clears set-id bits


class _Temp:
    """A temporary file in the target's folder holding ``data``, fsync'ed.

    Where the system offers unnamed files (O_TMPFILE) the file gets a name only in
    :meth:`name`, just before it is renamed over its target, so a process killed while
    writing leaves nothing behind; elsewhere it is a named file from the start.
    """

    def __init__(self, folder: Path, prefix: str, data: bytes, like: os.stat_result | None,
                 new_mode: int) -> None:
        self.folder, self.prefix, self.data = folder, prefix, data
        self.like, self.new_mode = like, new_mode
        self.fd: int | None = None
        self.path: str | None = None
        if hasattr(os, "O_TMPFILE"):
            try:
                self.fd = os.open(folder, os.O_TMPFILE | os.O_WRONLY, 0o600)
            except OSError:
                self.fd = None
        if self.fd is not None:
            try:
                _keep_nature(self.fd, like, new_mode)
                _write_all(self.fd, data)
            except BaseException:
                self.close()
                raise
        else:
            self.path = self._write_named()

    def _write_named(self) -> str:
        while True:
            name = os.path.join(self.folder, f"{self.prefix}{os.urandom(6).hex()}.tmp")
            try:
                fd = os.open(name, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
                break
            except FileExistsError:
                continue
        try:
            _keep_nature(fd, self.like, self.new_mode)
            _write_all(fd, self.data)
        except BaseException:
            os.close(fd)
            _unlink_quietly(name)
            raise
        os.close(fd)
        return name

    def name(self) -> str:
        """Give the file a name in its folder (done once) and return it."""
        if self.path is not None:
            return self.path
        dir_fd = os.open(self.folder, os.O_RDONLY)
        try:
            for _ in range(20):
                base = f"{self.prefix}{os.urandom(6).hex()}.tmp"
                try:
                    # with folder descriptors os.link calls linkat(AT_SYMLINK_FOLLOW),
                    # which names the unnamed file through /proc (plain link() would not)
                    os.link(f"/proc/self/fd/{self.fd}", base, src_dir_fd=dir_fd,
                            dst_dir_fd=dir_fd, follow_symlinks=True)
                except FileExistsError:
                    continue
                except OSError:
                    break  # no /proc: write a named file instead
                self.path = os.path.join(self.folder, base)
                break
        finally:
            os.close(dir_fd)
        self.close()
        if self.path is None:
            self.path = self._write_named()
        return self.path

    def close(self) -> None:
        if self.fd is not None:
            os.close(self.fd)
            self.fd = None

    def discard(self) -> None:
        self.close()
        _unlink_quietly(self.path)
        self.path = None


def _write_all(fd: int, data: bytes) -> None:
    view = memoryview(data)
    while view:
        n = os.write(fd, view)
        view = view[n:]
    os.fsync(fd)


def _unlink_quietly(name: str | None) -> None:
    if name is not None:
        try:
            os.unlink(name)
        except OSError:
            pass


def atomic_write_bytes(path: str | os.PathLike, data: bytes, backup: bool = True) -> Path:
    """Write ``data`` to ``path`` so that a crash leaves either the old or the new file.

    Symbolic links are followed (the link stays, its target gets the new content);
    mode, owner and group of an existing file are kept; with ``backup`` the old
    content is first put atomically into ``<name>.bak`` beside the real file. Any
    failure removes the temporary files and raises a FinefitError naming the file.
    """
    shown = Path(path)
    target = real_target(path)
    folder = target.parent
    tmp = bak_tmp = None
    try:
        if target.is_dir():
            raise FinefitError(f"{quote_path(shown)} is a folder, not a file", str(shown))
        folder.mkdir(parents=True, exist_ok=True)
        remove_stale_temporary_files(target)
        try:
            like = os.stat(target)
        except FileNotFoundError:
            like = None
        if like is not None and not like.st_mode & 0o222:
            # a file nobody may write (chmod a-w) is protected on purpose: renaming over
            # it would only need write permission on the folder
            raise FinefitError(f"{quote_path(shown)} is read-only; make it writable "
                               "(chmod u+w) to save over it", str(shown))
        new_mode = 0o666 & ~_umask()
        tmp = _Temp(folder, _temp_prefix(target.name), data, like, new_mode)
        if backup and like is not None:
            with open(target, "rb") as fh:
                old = fh.read()
            bak = target.with_name(target.name + ".bak")
            bak_tmp = _Temp(folder, _temp_prefix(bak.name), old, like, new_mode)
            os.replace(bak_tmp.name(), bak)
            bak_tmp.path = None
        os.replace(tmp.name(), target)
        tmp.path = None
        _fsync_folder(folder)
    except OSError as exc:
        reason = exc.strerror or str(exc)
        if exc.errno in (errno.EROFS, errno.EACCES, errno.EPERM):
            reason += " (no permission to write there)"
        raise FinefitError(f"cannot write {quote_path(shown)}: {reason}", str(shown)) from None
    finally:
        for t in (bak_tmp, tmp):
            if t is not None:
                t.discard()
    return shown


def atomic_write_text(path: str | os.PathLike, text: str, backup: bool = True) -> Path:
    """Write ``text`` (UTF-8, ``\\n`` line ends) atomically; see :func:`atomic_write_bytes`."""
    return atomic_write_bytes(path, text.encode("utf-8"), backup)
