"""The defects of the daily-work report on the workspace (issue 14), each driven by key
presses through Textual's Pilot on the invented demo sessions (sample_sessions/)."""

import shutil
from pathlib import Path

import pytest
from textual.widgets import Button, DataTable, Input, OptionList

from finefit.session import load
from finefit.ui import views
from finefit.ui.app import make_app
from finefit.ui.screens import ChoiceScreen, FormScreen, PickScreen, TableScreen

SAMPLES = Path(__file__).resolve().parents[2] / "sample_sessions"


def copy_sample(tmp_path, name):
    p = tmp_path / name
    shutil.copy(SAMPLES / name, p)
    return p


async def settle(app, pilot):
    for _ in range(200):
        await app.workers.wait_for_complete()
        await pilot.pause()
        if not app.fit_running and app.result is not None:
            await pilot.pause()
            return
    raise AssertionError("the fit never finished")


def cells(table: DataTable, row_key: str) -> dict[str, str]:
    return {str(k.value): str(v) for k, v in zip(table.columns, table.get_row(row_key),
                                                 strict=True)}


def assert_no_cut_column(table: DataTable, width: int) -> None:
    """Every column shown whole within ``width`` cells; no cell longer than its column
    unless it ends in the visible mark '…'."""
    used = sum(c.width + 2 for c in table.columns.values())
    assert used <= width, (used, width)
    for row_key in table.rows:
        for col, cell in zip(table.columns.values(), table.get_row(row_key), strict=True):
            text = str(cell)
            assert len(text) <= col.width, (col.key.value, text, col.width)


@pytest.fixture
def iron(tmp_path):
    return copy_sample(tmp_path, "kestrel_iron_group.toml")


@pytest.fixture
def neon(tmp_path):
    return copy_sample(tmp_path, "kestrel_neon_like.toml")


async def test_1_plot_views_open_from_the_levels_view(neon):
    app = make_app(neon)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        for key, tab, widget in (("4", "resid", "#resid-plot"), ("1", "levels", None),
                                 ("5", "diagram", "#diagram-plot")):
            await pilot.press(key)
            await pilot.pause()
            assert app.current_tab() == tab
            if widget:
                assert app.focused is app.query_one(widget)
                assert "O-C" in str(app.query_one(widget).render()) or key == "5"


@pytest.mark.parametrize("size", [(80, 24), (120, 40), (200, 55)])
async def test_2_numbers_are_never_cut(iron, size):
    app = make_app(iron)
    async with app.run_test(size=size) as pilot:
        await settle(app, pilot)
        lv = app.query_one(views.LevelsView)
        assert_no_cut_column(lv.table, lv.table_width())
        keys = {c.key.value for c in lv.table.columns.values()}
        assert {"id", "flag", "eobs", "ecalc", "oc"} <= keys
        assert ("lead" in keys) is (size[0] >= 200)  # shown where it fits whole
        await pilot.press("2")
        await pilot.pause()
        pt = app.query_one("#params-table", DataTable)
        assert_no_cut_column(pt, app.query_one(views.ParamsView).size.width - 2)


async def test_3_flags_and_outliers_as_text_in_the_first_80_columns(iron, monkeypatch):
    monkeypatch.setenv("NO_COLOR", "1")
    app = make_app(iron)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        assert app.no_color
        table = app.query_one(views.LevelsView).table
        order = [c.key.value for c in table.columns.values()]
        assert order.index("flag") == 1  # right after the id
        # the two levels whose labels are exchanged in the demo are far off: '!!'
        assert cells(table, "L019")["flag"] == "!!"
        app.select_level("L005")
        await pilot.press("space")
        await settle(app, pilot)
        assert cells(table, "L005")["flag"].startswith("x")
        oc = table.get_row("L019")[order.index("oc")]
        assert "red" not in str(oc.style) and "bold" in str(oc.style)


async def test_4_status_keeps_fitting_and_unsaved_at_80_columns(neon):
    app = make_app(neon)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        app.select_level("L003")
        await pilot.press("space")
        await settle(app, pilot)
        app.previous_sigma = 99.0  # a long line: sigma change, message, filter, sort
        app.message = "excluded L003 and a rather long description of what was done here"
        app.set_filter("c=2p5 3p")
        app.fit_running = True
        app.update_status()
        text = str(app.query_one("#status").render())
        assert len(text) <= 78
        assert text.startswith("fitting…") and "unsaved" in text and "σ = " in text


async def test_5_reattach_exchanges_the_two_levels_and_warnings_are_shown(iron):
    app = make_app(iron)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        assert app.result.sigma > 300  # the labels of L019 and L023 are exchanged
        # the fit's warnings are listed in the diagnosis view, and counted on the status
        assert "check" in str(app.query_one("#status").render())
        await pilot.press("7")
        await pilot.pause()
        diag = app.query_one("#diag-table", DataTable)
        texts = [str(diag.get_row(k)[1]) for k in diag.rows]
        assert any("re-attached" in t for t in texts)
        assert any("3d5 4s2: zeta(3d)" in t for t in texts)
        await pilot.press("1")
        await pilot.pause()
        l019 = app.result.level("L019")
        app.select_level("L023")
        await pilot.press("r")
        await pilot.pause()
        assert isinstance(app.screen, PickScreen)
        ol = app.screen.query_one(OptionList)
        ol.highlighted = l019.state_rank  # the state L019 holds
        # the picker shows E calc and O-C of this level for every state
        assert "[L019]" in str(ol.get_option_at_index(l019.state_rank).prompt)
        await pilot.press("enter")
        await settle(app, pilot)
        s = app.ws.session
        assert s.level("L023").label == "3d6(3F2)4s 4F" and s.level("L019").label == \
            "3d6(3H)4s 4H"
        assert s.level("L023").state is not None and s.level("L019").state is not None
        assert app.result.sigma < 20  # no level sent to a far state
        assert not any(row.label_mismatch for row in app.result.levels)


async def test_6_forms_and_dialogs(neon):
    app = make_app(neon)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        app.select_level("L002")
        await pilot.press("enter")  # Enter edits, like e (the table does not take it)
        await pilot.pause()
        assert isinstance(app.screen, FormScreen)
        assert app.focused is app.screen.query_one("#f-energy", Input)
        app.screen.query_one("#f-energy", Input).value = "151000.5"
        await pilot.press("enter")  # accepts from the first field
        await settle(app, pilot)
        assert app.ws.session.level("L002").energy == 151000.5
        # ctrl+q asks like q; the buttons show their keys; arrows move between them
        await pilot.press("ctrl+q")
        await pilot.pause()
        assert isinstance(app.screen, ChoiceScreen) and app.is_running
        labels = [str(b.label) for b in app.screen.query(Button)]
        assert labels[0].startswith("[s]")
        first = app.focused
        await pilot.press("right")
        assert app.focused is not first and isinstance(app.focused, Button)
        await pilot.press("c")
        await pilot.pause()
        titles = [c.title for c in app.get_system_commands(app.screen)]
        assert titles.count("Keys") == 1 and titles.count("Quit") == 1


async def test_7_correlation_names_keep_the_configuration(iron):
    app = make_app(iron)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        await pilot.press("3")
        await pilot.pause()
        table = app.query_one("#corr-table", DataTable)
        names = [str(table.get_row(k)[0]) for k in table.rows]
        assert len(set(names)) == len(names)
        assert any("3d7: Eav" in n for n in names) and any("3d6 4s: Eav" in n for n in names)
        await pilot.resize_terminal(80, 24)  # columns that do not fit are not cut
        await pilot.pause()
        await pilot.pause()
        view = app.query_one(views.CorrView)
        assert_no_cut_column(table, view.size.width - 2)
        first = [c.key.value for c in table.columns.values()][1]
        await pilot.press("greater_than_sign")
        await pilot.pause()
        assert [c.key.value for c in table.columns.values()][1] != first


async def test_8_filter_language(neon):
    app = make_app(neon)
    errors = []
    real = app.notify
    app.notify = lambda m, *a, **k: (errors.append(m) if k.get("severity") == "error"
                                     else None, real(m, *a, **k))[1]
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        table = app.query_one(views.LevelsView).table
        everything = table.row_count
        await pilot.press("slash")
        await pilot.pause()
        app.screen.query_one("#f-filter", Input).value = "c=2p5 3p J=1,2"
        await pilot.press("enter")
        await pilot.pause()
        s = app.ws.session
        want = [lv.id for lv in s.levels
                if lv.configuration in (None, "2p5 3p") and lv.J in (1.0, 2.0)]
        shown = [k.value for k in table.rows]
        assert 0 < len(shown) < everything
        assert set(shown) <= set(want)
        before = shown
        await pilot.press("slash")
        await pilot.pause()
        app.screen.query_one("#f-filter", Input).value = "foo=bar"
        await pilot.press("enter")
        await pilot.pause()
        assert errors and "foo" in errors[-1]
        assert [k.value for k in table.rows] == before  # nothing silently emptied


async def test_9_sorting_home_plot_and_resize(iron):
    app = make_app(iron)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        table = app.query_one(views.LevelsView).table
        app.select_level("L040")
        await pilot.press("t")  # |O-C|: cursor to the worst level, header marked
        await pilot.pause()
        assert table.cursor_row == 0
        worst = max(app.result.levels, key=lambda row: abs(row.residual)).id
        assert app.selected_id == worst
        assert any("▼" in str(c.label) for c in table.columns.values())
        table.move_cursor(row=12)
        await pilot.press("home")
        await pilot.pause()
        assert table.cursor_row == 0 and table.scroll_x == 0
        await pilot.press("4")
        await pilot.pause()
        plot = str(app.query_one("#resid-plot").render())
        zero_line = next(line for line in plot.splitlines() if "─" * 10 in line)
        assert zero_line.split("│")[0].strip() == "0.0"
        assert f"@ {worst}" in plot
        await pilot.press("right")
        await pilot.pause()
        assert app.selected_id != worst
        await pilot.press("5")
        await pilot.pause()
        assert "3d7" in str(app.query_one("#diagram-plot").render())
        await pilot.press("1")
        await pilot.press("d")  # the composition pane goes below the table at 80 columns
        await pilot.pause()
        lv = app.query_one(views.LevelsView)
        assert lv.has_class("stacked") and app.query_one("#detail").display
        assert_no_cut_column(table, lv.table_width())
        await pilot.press("right_square_bracket")
        await pilot.pause()
        assert app.query_one("#detail").scroll_y > 0
        await pilot.resize_terminal(200, 55)  # the wide layout follows the terminal
        await pilot.pause()
        await pilot.pause()
        assert not lv.has_class("stacked")
        assert "lead" in {c.key.value for c in table.columns.values()}


async def test_9_fixing_adding_deleting_undoing(neon):
    app = make_app(neon)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        await pilot.press("2")
        pt = app.query_one("#params-table", DataTable)
        pt.move_cursor(row=3)
        await pilot.pause()
        name = app.selected_parameter()
        fitted = app.result.values[name]
        assert fitted != app.ws.session.parameters[name].value
        await pilot.press("v")  # fixing keeps the fitted value and says so
        await settle(app, pilot)
        assert app.ws.session.parameters[name].value == fitted
        assert "fitted value" in app.message
        await pilot.press("1")
        app.select_level("L010")  # J = 0; every J = 0 state is observed: make room
        await pilot.press("x")
        await pilot.pause()
        await pilot.press("y")
        await settle(app, pilot)
        await pilot.press("a")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, FormScreen)
        assert form.query_one("#form").region.bottom <= 24  # the whole form on screen
        new_id = form.query_one("#f-id", Input).value
        assert new_id
        form.query_one("#f-energy", Input).value = "150000"
        form.query_one("#f-J", Input).value = "0"
        await pilot.press("enter")
        await settle(app, pilot)
        assert app.ws.session.level(new_id).include is False  # checked before it counts
        assert app.selected_id == new_id
        await pilot.press("u")
        await settle(app, pilot)
        await pilot.press("u")
        await settle(app, pilot)
        assert app.selected_id == "L010"  # undo returns to the level it brought back


async def test_writing_keeps_the_fit_on_screen(neon):
    app = make_app(neon)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        on_screen = app.result.sigma
        start = load(neon).report().sigma
        assert abs(start - on_screen) > 1e-3
        await pilot.press("k")
        await pilot.pause()
        app.screen.query_one("#f-name", Input).value = "first"
        await pilot.press("enter")
        await settle(app, pilot)
        await pilot.press("w")
        await pilot.pause()
        written = load(neon)
        assert written.report().sigma == pytest.approx(on_screen, rel=1e-6)
        before = [ps for ps in written.parameter_sets if ps.name.startswith("before")]
        assert len(before) == 1  # the values the fit replaced
        # comparing parameter sets inside the workspace
        await pilot.press("C")
        await pilot.pause()
        assert isinstance(app.screen, PickScreen)
        await pilot.press("enter")
        await pilot.pause()
        assert isinstance(app.screen, TableScreen)
        assert app.screen.query_one(DataTable).row_count == len(app.result.values)


async def test_diagnosis_proposes_the_exchange_and_s_applies_it(iron):
    app = make_app(iron)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        await pilot.press("7")
        await pilot.pause()
        diag = app.query_one("#diag-table", DataTable)
        keys = [k.value for k in diag.rows]
        # the fit itself proposes the exchange (suspected_swaps), or the view finds the pair
        proposed = [f"swap:{i}" for i, (a, b, _) in enumerate(app.result.suspected_swaps)
                    if {a, b} == {"L019", "L023"}]
        assert "pair:L019:L023" in keys or any(k in keys for k in proposed)
        await pilot.press("s")
        await settle(app, pilot)
        assert app.result.sigma < 20
        assert app.ws.session.level("L019").label == "3d6(3H)4s 4H"
        await pilot.press("u")  # undoable
        await settle(app, pilot)
        assert app.ws.session.level("L019").label == "3d6(3F2)4s 4F"


async def test_lines_view_reads_the_observed_lines_of_the_last_level_set(tmp_path):
    # the invented two-parity demo and its invented line list (sample_sessions/)
    p = copy_sample(tmp_path, "kestrel_two_parity.toml")
    copy_sample(tmp_path, "kestrel_two_parity_lines.txt")
    s = load(p)
    s.apply_levels(s.optimise_levels(str(tmp_path / "kestrel_two_parity_lines.txt")))
    s.save()
    app = make_app(p)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        app.select_level("L012")
        await pilot.press("6")
        for _ in range(300):
            await app.workers.wait_for_complete()
            await pilot.pause()
            if app.lines_cache is not None:
                break
        await pilot.pause()
        table = app.query_one("#obs-lines-table", DataTable)
        assert table.row_count == 4  # L012 has four classified lines in the list
        others = {str(table.get_row(k)[1]) for k in table.rows}
        assert all(o.startswith("L") for o in others)  # the other level's id
        view = app.query_one(views.LinesView)
        assert_no_cut_column(table, view.available())
        assert_no_cut_column(app.query_one("#lines-table", DataTable), view.available())


async def test_start_up_shows_the_levels_before_the_models_are_built(neon):
    app = make_app(neon, deferred=True)
    assert app.ws is None  # only the file was read
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        table = app.query_one(views.LevelsView).table
        assert table.row_count == 20
        if app.ws is None:  # still building: edits wait, the status says so
            assert app.check_action("toggle_include", ()) is False
            assert "loading" in str(app.query_one("#status").render())
        await settle(app, pilot)
        assert app.ws is not None and app.result.sigma == pytest.approx(
            load(neon).fit().sigma, rel=1e-9)
        assert app.check_action("toggle_include", ()) is True


async def test_deferred_start_of_a_bad_session_leaves_with_status_2(tmp_path):
    text = (SAMPLES / "kestrel_neon_like.toml").read_text(encoding="utf-8")
    i = text.index("[parameters.")
    bad = tmp_path / "bad.toml"  # a parameter the configurations do not have
    bad.write_text(text[:i] + '[parameters."2p5 5p: Eav"]\nvalue = 1.0\n\n' + text[i:],
                   encoding="utf-8")
    app = make_app(bad, deferred=True)
    async with app.run_test(size=(80, 24)) as pilot:
        for _ in range(200):
            if app.return_code is not None:
                break
            await pilot.pause(0.02)
    assert app.return_code == 2
