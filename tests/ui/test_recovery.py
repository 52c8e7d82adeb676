"""Journal recovery: the file changed after a crash is compared with the state the journal
started from, and the user keeps the edits, the file, or both."""

import shutil
from pathlib import Path

import pytest

from finefit import FinefitError
from finefit.cli import main
from finefit.session import load
from finefit.ui.app import make_app
from finefit.ui.screens import ChoiceScreen
from finefit.workspace import Workspace, journal_base_path, journal_path

SAMPLE = Path(__file__).resolve().parents[2] / "sample_sessions" / "kestrel_neon_like.toml"


@pytest.fixture
def crashed(tmp_path):
    """A workspace edited L009 (excluded) and died; then the file was edited from the
    command line (L003's uncertainty), as a user would after the crash."""
    p = tmp_path / "neon.toml"
    shutil.copy(SAMPLE, p)
    ws = Workspace(load(p))
    ws.edit("exclude L009", lambda s: s.update_level("L009", include=False))
    assert journal_path(p).exists() and journal_base_path(p).read_text() == SAMPLE.read_text()
    # the process dies here: no save, no clean-up
    assert main(["edit", str(p), "L003", "uncertainty=0.05"]) == 0
    return p


def test_unchanged_file_offers_the_journal(tmp_path):
    p = tmp_path / "neon.toml"
    shutil.copy(SAMPLE, p)
    ws = Workspace(load(p))
    ws.edit("exclude L009", lambda s: s.update_level("L009", include=False))
    rec = Workspace.pending_recovery(p)
    assert rec is not None and not rec.file_changed
    assert any("L009" in line and "include" in line for line in rec.edits)
    ws2, _ = rec.keep("journal")
    assert ws2.session.level("L009").include is False and ws2.dirty


def test_changed_file_is_detected_and_described(crashed):
    rec = Workspace.pending_recovery(crashed)
    assert rec.file_changed
    assert any("L009" in x for x in rec.edits)
    assert any("L003" in x and "uncertainty" in x for x in rec.outside)


def test_keep_the_edits(crashed):
    ws, _ = Workspace.pending_recovery(crashed).keep("journal")
    assert ws.session.level("L009").include is False
    assert ws.session.level("L003").uncertainty != 0.05  # the outside edit is not in it


def test_keep_the_file(crashed):
    ws, msg = Workspace.pending_recovery(crashed).keep("file")
    assert ws.session.level("L003").uncertainty == 0.05
    assert ws.session.level("L009").include is True
    assert not journal_path(crashed).exists() and not journal_base_path(crashed).exists()


def test_keep_both(crashed):
    ws, msg = Workspace.pending_recovery(crashed).keep("both")
    assert ws.session.level("L009").include is False  # the workspace edit
    assert ws.session.level("L003").uncertainty == 0.05  # the command-line edit
    ws.save()
    again = load(crashed)
    assert again.level("L009").include is False and again.level("L003").uncertainty == 0.05
    assert not journal_path(crashed).exists()


def test_conflicting_edit_keeps_the_file_and_a_copy_of_the_journal(crashed):
    assert main(["exclude", str(crashed), "L009"]) == 0
    assert main(["include", str(crashed), "L009"]) == 0  # back to the base value: no conflict
    assert main(["edit", str(crashed), "L009", "note=checked"]) == 0  # a real conflict
    ws, msg = Workspace.pending_recovery(crashed).keep("both")
    assert ws.session.level("L009").note == "checked"
    copies = list(crashed.parent.glob("neon.unsaved-*.toml"))
    assert len(copies) == 1 and copies[0].name in msg
    assert load(copies[0]).level("L009").include is False  # nothing lost


def test_unreadable_file_cannot_be_merged(crashed):
    crashed.write_text("[ion\n")  # broken by hand after the crash
    rec = Workspace.pending_recovery(crashed)
    assert rec.file_error is not None
    with pytest.raises(FinefitError):
        rec.keep("both")
    ws, _ = rec.keep("journal")
    assert ws.session.level("L009").include is False


async def test_dialog_offers_edits_file_or_both(crashed):
    app = make_app(crashed)
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.pause()
        assert isinstance(app.screen, ChoiceScreen)
        assert [k for k, _ in app.screen.choices] == ["j", "f", "b"]
        assert "L003" in app.screen.question and "L009" in app.screen.question
        await pilot.press("b")
        await pilot.pause()
        s = app.ws.session
        assert s.level("L009").include is False and s.level("L003").uncertainty == 0.05
        assert app.ws.dirty


def test_workspace_edit_runs_the_save_validation(tmp_path):
    p = tmp_path / "neon.toml"
    shutil.copy(SAMPLE, p)
    ws = Workspace(load(p))

    def sneaky(s):  # a change made behind the setters' checks
        s.parameters["2p5 3p: Eav"].max = float("inf")

    with pytest.raises(FinefitError, match="finite"):
        ws.edit("bad bound", sneaky)
    assert ws.session.parameters["2p5 3p: Eav"].max is None  # rolled back
    assert not journal_path(p).exists()  # nothing written


def test_save_does_not_overwrite_a_file_changed_on_disk(tmp_path):
    from finefit.workspace import FileChangedError

    p = tmp_path / "neon.toml"
    shutil.copy(SAMPLE, p)
    ws = Workspace(load(p))
    ws.edit("exclude L009", lambda s: s.update_level("L009", include=False))
    assert main(["edit", str(p), "L003", "uncertainty=0.05"]) == 0  # meanwhile, outside
    with pytest.raises(FileChangedError) as err:
        ws.save()
    assert "L003" in str(err.value)
    assert load(p).level("L009").include is True  # not overwritten
    merged, _ = err.value.recovery.keep("both")
    merged.save(overwrite=True)
    s = load(p)
    assert s.level("L009").include is False and s.level("L003").uncertainty == 0.05
    merged.edit("include L009", lambda s: s.update_level("L009", include=True))
    merged.save()  # its own save is the new starting point: no complaint


async def test_save_key_asks_when_the_file_changed(tmp_path):
    p = tmp_path / "neon.toml"
    shutil.copy(SAMPLE, p)
    app = make_app(p)
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.pause()
        app.ws.edit("exclude L009", lambda s: s.update_level("L009", include=False))
        assert main(["edit", str(p), "L003", "uncertainty=0.05"]) == 0
        await pilot.press("w")
        await pilot.pause()
        assert isinstance(app.screen, ChoiceScreen) and "L003" in app.screen.question
        await pilot.press("b")
        await pilot.pause()
    s = load(p)
    assert s.level("L009").include is False and s.level("L003").uncertainty == 0.05


async def test_dismissing_the_dialog_keeps_the_edits_in_a_file(crashed):
    app = make_app(crashed)
    async with app.run_test(size=(120, 40)) as pilot:
        await pilot.pause()
        assert isinstance(app.screen, ChoiceScreen)
        await pilot.press("escape")
        await pilot.pause()
        assert app.ws.session.level("L003").uncertainty == 0.05  # the file as it is
    copies = list(crashed.parent.glob("neon.unsaved-*.toml"))
    assert len(copies) == 1 and load(copies[0]).level("L009").include is False
    assert not journal_path(crashed).exists()


def test_journal_failure_keeps_the_edit_and_says_so(tmp_path, monkeypatch):
    import finefit.workspace as wsmod

    p = tmp_path / "neon.toml"
    shutil.copy(SAMPLE, p)
    ws = Workspace(load(p))

    def disk_full(*a, **k):
        raise FinefitError("cannot write: No space left on device", "journal")

    monkeypatch.setattr(wsmod, "atomic_write_text", disk_full)
    ws.edit("exclude L009", lambda s: s.update_level("L009", include=False))
    assert ws.session.level("L009").include is False and ws.dirty
    assert "No space left" in ws.journal_error
