"""The terminal workspace driven by real key presses (Textual run_test / Pilot)."""

import shutil
from pathlib import Path

import pytest
from textual.widgets import DataTable, Input, OptionList

from finefit import FinefitError
from finefit.session import load
from finefit.ui.app import make_app
from finefit.ui.commands import COMMANDS
from finefit.ui.screens import ChoiceScreen, FormScreen, HelpScreen, PickScreen, key_text
from finefit.workspace import Workspace, journal_path

SAMPLE = Path(__file__).resolve().parents[2] / "sample_sessions" / "kestrel_neon_like.toml"


@pytest.fixture
def session_file(tmp_path):
    p = tmp_path / "neon.toml"
    shutil.copy(SAMPLE, p)
    return p


async def settle(app, pilot):
    """Wait until the fit worker has finished and its result is on screen."""
    for _ in range(100):
        await app.workers.wait_for_complete()
        await pilot.pause()
        if not app.fit_running:
            return
    raise AssertionError("the fit never finished")


async def select_level(app, pilot, level_id):
    app.query_one("#levels-table", DataTable).focus()
    app.select_level(level_id)
    await pilot.pause()
    assert app.selected_level_id() == level_id


async def test_first_fit_matches_the_library(session_file):
    app = make_app(session_file)
    async with app.run_test(size=(120, 36)) as pilot:
        await settle(app, pilot)
        ref = load(session_file).fit()
        assert app.result.sigma == pytest.approx(ref.sigma, rel=1e-9)
        table = app.query_one("#levels-table", DataTable)
        assert table.row_count == 20
        assert "σ = " in str(app.query_one("#status").render())


async def test_space_excludes_a_level_and_refits(session_file):
    app = make_app(session_file)
    async with app.run_test(size=(120, 36)) as pilot:
        await settle(app, pilot)
        await select_level(app, pilot, "L003")
        await pilot.press("space")
        await settle(app, pilot)
        assert app.result.n_levels == 19
        s = load(session_file)
        s.update_level("L003", include=False)
        assert app.result.sigma == pytest.approx(s.fit().sigma, rel=1e-9)
        assert app.ws.dirty


async def test_reattach_changes_table_and_sigma_as_the_library_predicts(session_file):
    app = make_app(session_file)
    async with app.run_test(size=(120, 36)) as pilot:
        await settle(app, pilot)
        await select_level(app, pilot, "L004")  # J = 1
        await pilot.press("r")
        await pilot.pause()
        assert isinstance(app.screen, PickScreen)
        ol = app.screen.query_one(OptionList)
        ol.highlighted = 2  # state #2 of J = 1
        await pilot.press("enter")
        await settle(app, pilot)
        s = load(session_file)
        s.attach("L004", 2)
        expected = s.fit()
        assert app.ws.session.level("L004").state == 2
        assert app.result.sigma == pytest.approx(expected.sigma, rel=1e-9)
        row = app.result.level("L004")
        assert row.state_rank == 2
        assert row.energy_calc == pytest.approx(expected.level("L004").energy_calc)


async def test_toggling_vary_refits(session_file):
    app = make_app(session_file)
    async with app.run_test(size=(120, 36)) as pilot:
        await settle(app, pilot)
        n_free = app.result.n_free
        await pilot.press("2")
        table = app.query_one("#params-table", DataTable)
        table.move_cursor(row=3)  # 2p5 3p: G2(2p,3p)
        await pilot.pause()
        assert app.selected_parameter() == "2p5 3p: G2(2p,3p)"
        await pilot.press("v")
        await settle(app, pilot)
        assert app.result.n_free == n_free - 1
        assert app.result.status["2p5 3p: G2(2p,3p)"] == "fixed"


async def test_undo_restores_the_exact_previous_state(session_file):
    app = make_app(session_file)
    async with app.run_test(size=(120, 36)) as pilot:
        await settle(app, pilot)
        before = app.ws.session.to_toml()
        await select_level(app, pilot, "L005")
        await pilot.press("space")
        await pilot.press("2")
        app.query_one("#params-table", DataTable).move_cursor(row=1)
        await pilot.press("v")
        await settle(app, pilot)
        assert app.ws.session.to_toml() != before
        await pilot.press("u")
        await pilot.press("u")
        await settle(app, pilot)
        assert app.ws.session.to_toml() == before
        await pilot.press("U")
        await settle(app, pilot)
        assert app.ws.session.level("L005").include is False


async def test_invalid_value_shows_an_error_and_changes_nothing(session_file):
    app = make_app(session_file)
    errors = []
    real_notify = app.notify

    def notify(message, *a, **k):
        if k.get("severity") == "error":
            errors.append(message)
        return real_notify(message, *a, **k)

    app.notify = notify
    async with app.run_test(size=(120, 36)) as pilot:
        await settle(app, pilot)
        before = app.ws.session.to_toml()
        await select_level(app, pilot, "L002")
        await pilot.press("e")
        await pilot.pause()
        assert isinstance(app.screen, FormScreen)
        app.screen.query_one("#f-energy", Input).value = "twelve"
        app.screen.query_one("#f-label", Input).focus()
        await pilot.press("enter")
        await pilot.pause()
        assert errors and "number" in errors[-1]
        assert app.ws.session.to_toml() == before
        # a value the session rejects (a J = 3 level cannot be given this label)
        await pilot.press("e")
        await pilot.pause()
        app.screen.query_one("#f-label", Input).value = "2p5(2P°)3p 1S"
        app.screen.query_one("#f-label", Input).focus()
        await pilot.press("enter")
        await pilot.pause()
        assert len(errors) == 2
        assert app.ws.session.to_toml() == before
        assert not app.ws.undo_stack


async def test_save_writes_a_file_that_reloads_to_the_same_state(session_file):
    app = make_app(session_file)
    async with app.run_test(size=(120, 36)) as pilot:
        await settle(app, pilot)
        await select_level(app, pilot, "L007")
        await pilot.press("space")
        await settle(app, pilot)
        await pilot.press("w")
        await pilot.pause()
        assert not app.ws.dirty
        assert load(session_file).to_toml() == app.ws.session.to_toml()
        assert not journal_path(session_file).exists()


async def test_journal_restores_edits_after_a_crash(session_file):
    app = make_app(session_file)
    async with app.run_test(size=(120, 36)) as pilot:
        await settle(app, pilot)
        await select_level(app, pilot, "L009")
        await pilot.press("space")
        await settle(app, pilot)
        edited = app.ws.session.to_toml()
        # the connection drops: the app goes away without saving or cleaning up
    assert journal_path(session_file).exists()
    assert load(session_file).level("L009").include is True
    again = make_app(session_file)
    assert again.offer_recovery
    async with again.run_test(size=(120, 36)) as pilot:
        await pilot.pause()
        assert isinstance(again.screen, ChoiceScreen)
        await pilot.press("r")
        await settle(again, pilot)
        assert again.ws.session.to_toml() == edited
        assert again.ws.dirty


async def test_help_lists_every_binding(session_file):
    app = make_app(session_file)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        await pilot.press("question_mark")
        await pilot.pause()
        assert isinstance(app.screen, HelpScreen)
        text = app.screen.plain_text(200)
        for binding in app.BINDINGS:
            assert key_text(binding.key) in text, binding.key
            assert binding.description in text
        for c in COMMANDS:
            assert c.title in text
        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, HelpScreen)


async def test_quit_with_unsaved_changes_asks(session_file):
    app = make_app(session_file)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        await select_level(app, pilot, "L001")
        await pilot.press("space")
        await settle(app, pilot)
        await pilot.press("q")
        await pilot.pause()
        assert isinstance(app.screen, ChoiceScreen)
        await pilot.press("c")
        await pilot.pause()
        assert not isinstance(app.screen, ChoiceScreen)
        assert app.is_running


@pytest.mark.parametrize("size, detail", [((80, 24), False), ((200, 60), True)])
async def test_small_and_large_terminals(session_file, size, detail):
    app = make_app(session_file)
    async with app.run_test(size=size) as pilot:
        await settle(app, pilot)
        assert app.query_one("#detail").display is detail
        for tab in "2345":
            await pilot.press(tab)
            await pilot.pause()
        await pilot.press("1")
        await pilot.press("d")
        await pilot.pause()
        assert app.query_one("#detail").display is (not detail)


def test_workspace_edit_rolls_back_on_bad_input(session_file):
    ws = Workspace(load(session_file))
    before = ws.session.to_toml()
    with pytest.raises(FinefitError):
        ws.edit("bad", lambda s: s.update_level("L001", J=9))
    assert ws.session.to_toml() == before
    assert not ws.undo_stack and not ws.dirty


async def test_lines_view_shows_predicted_lines_of_the_level(tmp_path):
    # invented two-parity session: Na-like 3s and 3p levels
    from finefit.session import Session

    s = Session.new(["3s", "3p"], Z=11)
    s.set_parameter("3p: Eav", 16960.0, vary=True)
    s.set_parameter("3p: zeta(3p)", 11.0, vary=True)
    s.add_level(energy=0.0, J=0.5, parity="even", id="g")
    s.add_level(energy=16956.17, J=0.5, parity="odd", id="d1")
    s.add_level(energy=16973.37, J=1.5, parity="odd", id="d2")
    s.set_parameter("3s: Eav", 0.0, vary=False)
    p = tmp_path / "na.toml"
    s.save(p)
    app = make_app(p)
    async with app.run_test(size=(140, 36)) as pilot:
        await settle(app, pilot)
        await select_level(app, pilot, "g")
        await pilot.press("6")
        for _ in range(200):
            await app.workers.wait_for_complete()
            await pilot.pause()
            if app.lines_cache is not None:
                break
        await pilot.pause()
        table = app.query_one("#lines-table", DataTable)
        note = str(app.query_one("#lines-note").render())
        assert table.row_count == 2, note  # the two resonance lines of the ground level
        assert "predicted lines of g" in str(app.query_one("#lines-note").render())


async def test_adopting_the_fit_sets_starting_values_and_undoes(session_file):
    app = make_app(session_file)
    async with app.run_test(size=(120, 36)) as pilot:
        await settle(app, pilot)
        before = app.ws.session.to_toml()
        fitted = dict(app.result.values)
        await pilot.press("y")
        await settle(app, pilot)
        for name, v in fitted.items():
            assert app.ws.session.parameters[name].value == pytest.approx(v)
        await pilot.press("u")
        await settle(app, pilot)
        assert app.ws.session.to_toml() == before


async def test_optimising_levels_from_lines_shows_observed_lines_and_undoes(tmp_path):
    # the invented two-parity demo and its invented line list; file line 10 is the
    # deliberately mismeasured line (sample_sessions/make_samples.py)
    samples = SAMPLE.parent
    p = tmp_path / "kc.toml"
    shutil.copy(samples / "kestrel_two_parity.toml", p)
    lines = samples / "kestrel_two_parity_lines.txt"
    app = make_app(p)
    async with app.run_test(size=(120, 36)) as pilot:
        await settle(app, pilot)
        before = app.ws.session.to_toml()
        await pilot.press("O")
        await pilot.pause()
        assert isinstance(app.screen, FormScreen)
        app.screen.query_one("#f-path", Input).value = str(lines)
        app.screen.query_one("#f-exclude", Input).focus()
        await pilot.press("enter")
        await settle(app, pilot)
        s = app.ws.session
        assert app.level_opt is not None and s.level_sets[-1].excluded == []
        assert s.level("L012").uncertainty < 0.005
        await select_level(app, pilot, "L012")
        await pilot.press("6")
        await pilot.pause()
        table = app.query_one("#obs-lines-table", DataTable)
        assert table.row_count == 4  # L012 has four classified lines in the list
        note = str(app.query_one("#obs-lines-note").render())
        # with nothing kept out, the mismeasured line (-7 sigma) and the line it drags
        # (+3.1 sigma) are both beyond 3 sigma
        assert note.startswith("4 observed lines of L012") and "2 beyond 3 σ" in note
        await pilot.press("u")
        await settle(app, pilot)
        assert app.ws.session.to_toml() == before
