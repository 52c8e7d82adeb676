"""A persistent cache of built models (coefficient matrices, LS labels, coupling bases).

One ``.npz`` file per configuration set (numpy's own format, read with
``allow_pickle=False``: a cache file can never run code); the numeric arrays are
packed per dtype into a few members, which numpy reads much faster than many. The
key is the cache format, a fingerprint of the engine's source (every ``.py`` file of
``finefit/notation``, ``angular`` and ``model``, so any code change starts new
entries) and the configurations; the file name carries its CRC, the file the whole
key. Each file also holds a CRC-32 over every array (names, dtypes, shapes, bytes;
zip checks its own CRC per member too): a truncated, corrupt or foreign file fails
a check and is rebuilt (and overwritten), never used. Files are written to a
temporary name in the same folder, fsync'ed and renamed (atomic on POSIX and
Windows), so a crash or a second process writing the same entry leaves a complete
file or none.

Where: ``FINEFIT_CACHE_DIR`` if set, else ``$XDG_CACHE_HOME/finefit``, else
``~/.cache/finefit``. ``FINEFIT_CACHE=off`` (or ``0``, ``no``, ``false``) switches the
cache off. The cache never raises: any failure to read or write means "build anew".
"""

from __future__ import annotations

import json
import os
import zipfile
import zlib
from collections.abc import Mapping
from functools import cache
from pathlib import Path

import numpy as np

# Bump when the file layout or the key changes (the engine's code is in the key already).
CACHE_FORMAT = 1
_OFF = {"0", "off", "no", "false", "none"}
# Entries above this size are not written (4f6 5d, 2 725 levels, takes about 0.1 GiB).
MAX_ENTRY_BYTES = 2**30
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
    """CRC-32 and length of the engine's source files (names and contents).

    Any edit of a source file changes it (up to a 2^-32 chance): the cache then starts
    new entries. (zlib rather than hashlib: its import is free, hashlib's is not.)
    """
    root = Path(__file__).resolve().parents[1]
    crc, size = 0, 0
    for package in _ENGINE_PACKAGES:
        for path in sorted((root / package).rglob("*.py")):
            data = str(path.relative_to(root)).encode() + b"\0" + path.read_bytes()
            crc = zlib.crc32(data, crc)
            size += len(data)
    # no sources (a byte-code-only install): no fingerprint, and so no cache
    return f"{crc:08x}-{size}" if size else ""


def cache_key(configurations: tuple[str, ...] | list[str]) -> str:
    """The key of a configuration set: format, engine fingerprint and configurations.

    The whole key is stored in the file and compared on reading, so two sets whose
    file names collide can never be mistaken for each other.
    """
    return json.dumps({"format": CACHE_FORMAT, "engine": engine_fingerprint(),
                       "configurations": list(configurations)}, sort_keys=True)


def cache_path(configurations: tuple[str, ...] | list[str]) -> Path | None:
    folder = cache_dir()
    if folder is None or not engine_fingerprint():
        return None
    name = f"{zlib.crc32(cache_key(configurations).encode()):08x}"
    text = "_".join(configurations)
    # readable and short: the configurations (sanitised) and the key's CRC
    safe = "".join(ch if ch.isalnum() else "-" for ch in text)[:60]
    return folder / f"model-{safe}-{name}.npz"


def checksum(arrays: Mapping[str, np.ndarray]) -> str:
    """CRC-32 over every array's name, dtype, shape and bytes (in name order)."""
    crc = 0
    for name in sorted(arrays):
        if name in _RESERVED:
            continue
        a = np.ascontiguousarray(arrays[name])
        crc = zlib.crc32(f"{name}|{a.dtype.str}|{a.shape}|".encode(), crc)
        if a.size:
            crc = zlib.crc32(memoryview(a).cast("B"), crc)
    return f"{crc:08x}"


def _pack(arrays: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Numeric arrays concatenated per dtype (a few zip members read much faster than
    sixty); an index in JSON says where each one lies. Text arrays stay members."""
    index, parts, out = [], {}, {}
    for name, a in arrays.items():
        if a.dtype.kind in "fiub":
            chunks = parts.setdefault(a.dtype.str, [])
            start = sum(c.size for c in chunks)
            chunks.append(np.ascontiguousarray(a).ravel())
            index.append([name, a.dtype.str, list(a.shape), start])
        else:
            out[name] = a
    for dt, chunks in parts.items():
        out[f"pack.{dt}"] = np.concatenate(chunks) if chunks else np.zeros(0, dt)
    out["pack.index"] = np.array(json.dumps(index))
    return out


def _unpack(stored: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    out = {k: v for k, v in stored.items() if not k.startswith("pack.")}
    for name, dt, shape, start in json.loads(str(stored["pack.index"][()])):
        flat = stored[f"pack.{dt}"]
        size = int(np.prod(shape, dtype=np.int64))
        if flat.dtype.str != dt or start < 0 or start + size > flat.size:
            raise ValueError(f"packed array {name!r} does not fit")
        out[name] = flat[start : start + size].reshape(shape)
    return out


def load_model_arrays(configurations: tuple[str, ...] | list[str]) -> dict[str, np.ndarray] | None:
    """The stored arrays of a configuration set, or None (missing, off, or failing a check)."""
    path = cache_path(configurations)
    if path is None:
        return None
    try:
        with np.load(path, allow_pickle=False) as npz:
            stored = {name: npz[name] for name in npz.files}
    except FileNotFoundError:
        return None
    except (OSError, ValueError, EOFError, KeyError, zipfile.BadZipFile, RuntimeError):
        return None  # truncated, corrupt or not an npz file: rebuild
    try:
        if (str(stored["cache.key"][()]) != cache_key(configurations)
                or str(stored["cache.checksum"][()]) != checksum(stored)):
            return None
        arrays = _unpack(stored)
    except (KeyError, ValueError, TypeError, IndexError):
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
    if any(a.dtype.hasobject for a in data.values()) or any(
        k in _RESERVED or k.startswith("pack.") for k in data
    ):
        raise ValueError("model arrays must be plain arrays without the reserved names")
    if sum(a.nbytes for a in data.values()) > MAX_ENTRY_BYTES:
        return None  # a very large set: rebuilding costs less than the disk space
    data = _pack(data)
    data["cache.key"] = np.array(cache_key(configurations))
    data["cache.checksum"] = np.array(checksum(data))
    import tempfile  # only writers need it

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
