"""A persistent cache of built models (coefficient matrices, LS labels, coupling bases).

One ``.npz`` file per configuration set (numpy's own format, read with
``allow_pickle=False``: a cache file can never run code). The file name is a hash of
the key: the cache format, a fingerprint of the engine's source (every ``.py`` file
of ``finefit/notation``, ``angular`` and ``model``, so any code change makes new
names) and the configurations. Each file also holds its key and a BLAKE2b checksum
of every array; a truncated, corrupt or foreign file fails the check and is rebuilt
(and overwritten), never used. Files are written to a temporary name in the same
folder, fsync'ed and renamed (atomic on POSIX and Windows), so a crash or a second
process writing the same entry leaves a complete file or none.

Where: ``FINEFIT_CACHE_DIR`` if set, else ``$XDG_CACHE_HOME/finefit``, else
``~/.cache/finefit``. ``FINEFIT_CACHE=off`` (or ``0``, ``no``, ``false``) switches the
cache off. The cache never raises: any failure to read or write means "build anew".
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
import zipfile
from collections.abc import Mapping
from functools import cache
from pathlib import Path

import numpy as np

# Bump when the file layout or the key changes (the engine's code is in the key already).
CACHE_FORMAT = 1
_OFF = {"0", "off", "no", "false", "none"}
_ENGINE_PACKAGES = ("notation", "angular", "model")
_RESERVED = ("cache.key", "cache.checksum")


def cache_dir() -> Path | None:
    """The cache folder, or None when the cache is switched off."""
    if os.environ.get("FINEFIT_CACHE", "").strip().lower() in _OFF:
        return None
    explicit = os.environ.get("FINEFIT_CACHE_DIR", "").strip()
    if explicit:
        return Path(explicit).expanduser()
    xdg = os.environ.get("XDG_CACHE_HOME", "").strip()
    base = Path(xdg).expanduser() if xdg else Path.home() / ".cache"
    return base / "finefit"


@cache
def engine_fingerprint() -> str:
    """BLAKE2b of the engine's source files (names and contents): changes with any edit."""
    root = Path(__file__).resolve().parents[1]
    h = hashlib.blake2b(digest_size=16)
    for package in _ENGINE_PACKAGES:
        for path in sorted((root / package).rglob("*.py")):
            h.update(str(path.relative_to(root)).encode())
            h.update(path.read_bytes())
    return h.hexdigest()


def cache_key(configurations: tuple[str, ...] | list[str]) -> str:
    """The key of a configuration set: format, engine fingerprint and configurations."""
    text = json.dumps({"format": CACHE_FORMAT, "engine": engine_fingerprint(),
                       "configurations": list(configurations)}, sort_keys=True)
    return hashlib.blake2b(text.encode(), digest_size=20).hexdigest()


def cache_path(configurations: tuple[str, ...] | list[str]) -> Path | None:
    folder = cache_dir()
    return None if folder is None else folder / f"model-{cache_key(configurations)}.npz"


def checksum(arrays: Mapping[str, np.ndarray]) -> str:
    """BLAKE2b over every array's name, dtype, shape and bytes (in name order)."""
    h = hashlib.blake2b(digest_size=32)
    for name in sorted(arrays):
        if name in _RESERVED:
            continue
        a = np.ascontiguousarray(arrays[name])
        h.update(name.encode())
        h.update(a.dtype.str.encode())
        h.update(repr(a.shape).encode())
        h.update(memoryview(a).cast("B") if a.size else b"")
    return h.hexdigest()


def load_model_arrays(configurations: tuple[str, ...] | list[str]) -> dict[str, np.ndarray] | None:
    """The stored arrays of a configuration set, or None (missing, off, or failing a check)."""
    path = cache_path(configurations)
    if path is None:
        return None
    try:
        with np.load(path, allow_pickle=False) as npz:
            arrays = {name: npz[name] for name in npz.files}
    except FileNotFoundError:
        return None
    except (OSError, ValueError, EOFError, KeyError, zipfile.BadZipFile, RuntimeError):
        return None  # truncated, corrupt or not an npz file: rebuild
    try:
        ok = (str(arrays["cache.key"][()]) == cache_key(configurations)
              and str(arrays["cache.checksum"][()]) == checksum(arrays))
    except (KeyError, ValueError, TypeError, IndexError):
        ok = False
    if not ok:
        return None
    return {k: v for k, v in arrays.items() if k not in _RESERVED}


def save_model_arrays(
    configurations: tuple[str, ...] | list[str], arrays: Mapping[str, np.ndarray]
) -> Path | None:
    """Store the arrays of a configuration set atomically; None if off or not writable."""
    path = cache_path(configurations)
    if path is None:
        return None
    data = {k: np.asarray(v) for k, v in arrays.items()}
    if any(a.dtype.hasobject for a in data.values()) or set(data) & set(_RESERVED):
        raise ValueError("model arrays must be plain arrays without the reserved names")
    data["cache.key"] = np.array(cache_key(configurations))
    data["cache.checksum"] = np.array(checksum(data))
    tmp = None
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
        with os.fdopen(fd, "wb") as fh:
            np.savez(fh, **data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
        tmp = None
    except OSError:
        return None  # a read-only or full disk only costs the next build
    finally:
        if tmp is not None:
            try:
                os.unlink(tmp)
            except OSError:
                pass
    return path


def clear_cache() -> int:
    """Remove every stored model of the cache folder; the number of files removed."""
    folder = cache_dir()
    if folder is None or not folder.is_dir():
        return 0
    n = 0
    for path in folder.glob("model-*.npz"):
        try:
            path.unlink()
            n += 1
        except OSError:
            pass
    return n
