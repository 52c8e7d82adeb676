"""Saves keep the file's nature (links, mode, owner, group), the backup is atomic, and no
temporary file survives a failure; a save killed at random points leaves the old or the
new file and a complete backup."""

import os
import random
import signal
import stat
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from finefit import FinefitError
from finefit.session import load
from finefit.storage import atomic
from finefit.storage.atomic import atomic_write_text, stale_temporary_files

SAMPLE = Path(__file__).resolve().parents[2] / "sample_sessions" / "kestrel_neon_like.toml"


def _temps(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


@pytest.mark.parametrize("mode", [0o644, 0o664, 0o600, 0o640])
def test_save_keeps_the_mode(tmp_path, mode):
    p = tmp_path / "s.toml"
    p.write_text(SAMPLE.read_text())
    os.chmod(p, mode)
    s = load(p)
    s.set_parameter("2p5 3p: Eav", 1.0 + s.parameters["2p5 3p: Eav"].value)
    s.save()
    assert stat.S_IMODE(os.stat(p).st_mode) == mode
    assert stat.S_IMODE(os.stat(tmp_path / "s.toml.bak").st_mode) == mode


def test_new_file_gets_the_umask_mode(tmp_path):
    old = os.umask(0o002)
    try:
        atomic_write_text(tmp_path / "a.txt", "x\n")
    finally:
        os.umask(old)
    assert stat.S_IMODE(os.stat(tmp_path / "a.txt").st_mode) == 0o664  # 0666 & ~0002


def test_publish_tables_keep_their_mode(tmp_path):
    from finefit.cli import main

    s = tmp_path / "s.toml"
    s.write_text(SAMPLE.read_text())
    out = tmp_path / "tables"
    assert main(["publish", str(s), str(out)]) == 0
    os.chmod(out / "levels.csv", 0o664)
    assert main(["publish", str(s), str(out)]) == 0
    assert stat.S_IMODE(os.stat(out / "levels.csv").st_mode) == 0o664


def test_save_writes_through_a_symbolic_link(tmp_path):
    real = tmp_path / "store" / "real.toml"
    real.parent.mkdir()
    real.write_text(SAMPLE.read_text())
    link = tmp_path / "link.toml"
    link.symlink_to(real)
    s = load(link)
    s.set_parameter("2p5 3p: Eav", 12345.0)
    s.save()
    assert link.is_symlink() and os.readlink(link) == str(real)
    assert load(real).parameters["2p5 3p: Eav"].value == 12345.0
    assert (real.parent / "real.toml.bak").read_text() == SAMPLE.read_text()
    assert not (tmp_path / "link.toml.bak").exists()


def test_relative_and_chained_links(tmp_path):
    (tmp_path / "d").mkdir()
    (tmp_path / "d" / "f.txt").write_text("old\n")
    os.symlink("d/f.txt", tmp_path / "one")
    os.symlink("one", tmp_path / "two")
    atomic_write_text(tmp_path / "two", "new\n")
    assert (tmp_path / "d" / "f.txt").read_text() == "new\n"
    assert (tmp_path / "two").is_symlink() and (tmp_path / "one").is_symlink()


@pytest.mark.skipif(os.geteuid() != 0, reason="changing a file's owner needs root")
def test_save_keeps_owner_and_group(tmp_path):
    p = tmp_path / "s.txt"
    p.write_text("old\n")
    os.chown(p, 12345, 23456)
    atomic_write_text(p, "new\n")
    st = os.stat(p)
    assert (st.st_uid, st.st_gid) == (12345, 23456)
    assert p.read_text() == "new\n"


def test_backup_is_replaced_atomically(tmp_path, monkeypatch):
    p = tmp_path / "s.txt"
    p.write_text("one\n")
    atomic_write_text(p, "two\n")
    assert (tmp_path / "s.txt.bak").read_text() == "one\n"
    real_replace = os.replace
    calls = []

    def fail_on_target(src, dst):
        calls.append(Path(dst).name)
        if Path(dst).name == "s.txt":
            raise OSError(5, "simulated I/O error")
        return real_replace(src, dst)

    monkeypatch.setattr(atomic.os, "replace", fail_on_target)
    with pytest.raises(FinefitError, match="simulated I/O error"):
        atomic_write_text(p, "three\n")
    assert calls == ["s.txt.bak", "s.txt"]  # the backup is renamed into place, never copied
    assert p.read_text() == "two\n"
    assert (tmp_path / "s.txt.bak").read_text() == "two\n"
    assert _temps(tmp_path) == []


@pytest.mark.parametrize("failing", ["write", "fsync", "fchmod", "link", "open"])
def test_no_temporary_file_survives_a_failure(tmp_path, monkeypatch, failing):
    p = tmp_path / "s.txt"
    p.write_text("old\n")
    real = getattr(os, failing)

    def boom(*a, **k):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(atomic.os, failing, boom)
    try:
        atomic_write_text(p, "new\n")
    except FinefitError as exc:
        assert "s.txt" in str(exc)
    monkeypatch.setattr(atomic.os, failing, real)
    assert p.read_text() in ("old\n", "new\n")
    assert _temps(tmp_path) == []


def test_interrupt_removes_the_temporary_file(tmp_path, monkeypatch):
    p = tmp_path / "s.txt"
    p.write_text("old\n")

    def interrupted(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(atomic.os, "replace", interrupted)
    with pytest.raises(KeyboardInterrupt):
        atomic_write_text(p, "new\n")
    assert p.read_text() == "old\n"
    assert _temps(tmp_path) == []


def test_old_temporary_files_are_removed(tmp_path):
    p = tmp_path / "s.txt"
    p.write_text("old\n")
    # a process that no longer runs: the pid of a child that has exited
    child = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                           capture_output=True, text=True, check=True)
    dead = int(child.stdout)
    left = tmp_path / f".s.txt.{dead}.abc123.tmp"
    left.write_text("half")
    running = tmp_path / f".s.txt.{os.getpid()}.def456.tmp"  # our own: not touched
    running.write_text("busy")
    unrelated = tmp_path / ".other.txt.1.x.tmp"
    unrelated.write_text("not ours")
    assert stale_temporary_files(p) == [left]
    atomic_write_text(p, "new\n")
    assert not left.exists() and running.exists() and unrelated.exists()


def test_writing_onto_a_folder_is_a_message(tmp_path):
    with pytest.raises(FinefitError, match="folder"):
        atomic_write_text(tmp_path, "x")


# ---------------------------------------------------------------- kill -9 during saves
_WRITER = textwrap.dedent("""
    import sys, types
    # load finefit's storage modules without the package's heavy __init__ (fast start)
    pkg = types.ModuleType("finefit"); pkg.__path__ = [sys.argv[1] + "/finefit"]
    sys.modules["finefit"] = pkg
    from finefit.storage.atomic import atomic_write_text
    target, n = sys.argv[2], int(sys.argv[3])
    a, b = "A" * n + chr(10), "B" * n + chr(10)
    print("ready", flush=True)
    i = 0
    while True:
        atomic_write_text(target, a if i % 2 else b)
        i += 1
""")


def test_kill_during_saves_leaves_old_or_new_file(tmp_path):
    root = str(Path(__file__).resolve().parents[2])
    target = tmp_path / "s.toml"
    a = "A" * 150_000 + "\n"  # big enough that a save takes a measurable time
    b = "B" * 150_000 + "\n"
    target.write_text(a)
    rng = random.Random(13)
    for _ in range(12):
        proc = subprocess.Popen([sys.executable, "-c", _WRITER, root, str(target), "150000"],
                                stdout=subprocess.PIPE, text=True)
        assert proc.stdout.readline().strip() == "ready"
        time.sleep(rng.uniform(0.002, 0.05))
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        proc.stdout.close()
        assert target.read_text() in (a, b)  # old or new, never partial
        bak = tmp_path / "s.toml.bak"
        if bak.exists():
            assert bak.read_text() in (a, b)  # a complete backup
    atomic_write_text(target, a)  # the next save removes what killed saves left
    assert _temps(tmp_path) == []


def test_read_only_file_is_not_replaced(tmp_path):
    p = tmp_path / "archived.toml"
    p.write_text(SAMPLE.read_text())
    os.chmod(p, 0o444)
    s = load(p)
    s.set_parameter("2p5 3p: Eav", 1.0)
    with pytest.raises(FinefitError, match="read-only"):
        s.save()
    assert p.read_text() == SAMPLE.read_text() and _temps(tmp_path) == []
    assert not (tmp_path / "archived.toml.bak").exists()
