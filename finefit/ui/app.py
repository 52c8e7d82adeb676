"""The finefit workspace: observed levels, parameters and pictures, refitted live.

All physics and file handling come from finefit.session / finefit.workspace; this
module holds the app's state, turns keys (finefit.ui.commands) into edits and runs the
fits; each view (finefit.ui.views) draws itself when a FitFinished message arrives.
Fits run in a thread worker (a newer edit cancels a running fit; a generation counter
drops stale results). Which keys apply where is decided in ``check_action`` from the
command registry (no key works behind a dialog).
"""

from __future__ import annotations

import time
from functools import partial
from pathlib import Path

from rich.text import Text
from textual import work
from textual.app import App, ComposeResult, SystemCommand
from textual.binding import Binding
from textual.css.query import NoMatches
from textual.screen import ModalScreen
from textual.widgets import DataTable, Footer, Header, Static, TabbedContent, TabPane
from textual.worker import get_current_worker

from finefit.errors import FinefitError, quote
from finefit.fitting.fit import FitCancelled
from finefit.fitting.level_filter import LevelFilter, parse_filter
from finefit.fitting.results import FitResult
from finefit.session import Session
from finefit.threads import engine_threads
from finefit.ui import views
from finefit.ui.commands import COMMANDS
from finefit.ui.edits import EditActions
from finefit.ui.formatting import pack_status
from finefit.ui.messages import FitFinished
from finefit.ui.screens import ChoiceScreen, FormScreen, HelpScreen
from finefit.workspace import FileChangedError, Recovery, Workspace

SORTS = ("energy", "|O-C|", "id", "J")
_BY_NAME = {c.name: c for c in COMMANDS}
# what works while the session's models are still being built (start-up)
_WHILE_LOADING = {"help", "quit_workspace", "show_tab", "first_row", "last_row",
                  "detail_down", "detail_up"}


def _bindings() -> list[Binding]:
    return [Binding(c.keys, c.action, c.title, show=c.show, priority=c.priority,
                    id=c.action) for c in COMMANDS]


class WorkspaceApp(EditActions, App):
    """Interactive term analysis of one session file."""

    CSS_PATH = "finefit.tcss"
    TITLE = "finefit"
    BINDINGS = _bindings()

    def __init__(self, workspace: Workspace | None, offer_recovery: bool = False,
                 preview=None, path: Path | None = None,
                 recovery: Recovery | None = None) -> None:
        """``workspace`` is None for a deferred start: the levels of ``preview`` (the
        parsed session file at ``path``) are shown while the models are built in a
        thread. ``recovery``: an autosave journal found at start (see workspace.py)."""
        super().__init__()
        self.ws = workspace
        self.preview = preview
        self.path = path
        self.offer_recovery = offer_recovery or recovery is not None
        self.recovery = recovery
        self.result: FitResult | None = None
        self.result_generation = -1  # the workspace generation the result belongs to
        self.previous_sigma: float | None = None
        self.fit_running = False
        self.fit_error: str | None = None
        self.message = ""
        self.sort_mode = 0
        self.level_filter: LevelFilter = parse_filter("")
        self.outliers_only = False
        self.detail_visible = True
        self.fits_done = 0
        self.fit_landed: list[float] = []  # perf_counter times of applied fit results
        self.diagram_choice = 0  # 0: all configurations, k: the k-th
        self.lines_cache: tuple[int, list] | None = None  # (generation, predicted lines)
        self.radial_cache: dict = {}
        self.lines_running = False
        self.level_opt = None  # the last level optimisation (observed lines of a level)
        self.selected_id: str | None = None  # the selected level (levels view, O-C plot)
        self.pending_select: str | None = None  # select this level at the next redraw
        self.last_warnings: list[str] = []
        self.corr_first = 0  # the first column shown in the correlation view

    # ------------------------------------------------------------------ layout
    def compose(self) -> ComposeResult:
        yield Header(show_clock=False)
        with TabbedContent(initial="levels", id="tabs"):
            for tab, title, view in (
                ("levels", "1 Levels", views.LevelsView), ("params", "2 Parameters",
                                                            views.ParamsView),
                ("corr", "3 Correl.", views.CorrView), ("resid", "4 O-C", views.ResidView),
                ("diagram", "5 Diagram", views.DiagramView),
                ("lines", "6 Lines", views.LinesView), ("diag", "7 Check", views.DiagView),
            ):
                with TabPane(title, id=tab):
                    yield view(id=f"{tab}-view")
        yield Static("", id="status", markup=False)
        yield Footer()

    @property
    def filter_text(self) -> str:
        return self.level_filter.text

    def on_mount(self) -> None:
        path = self.ws.session.path if self.ws is not None else self.path
        confs = (self.ws.session.configurations if self.ws is not None
                 else self.preview.configurations)
        self.sub_title = f"{path.name if path else 'unsaved'} — {', '.join(confs)}"
        self.detail_visible = self.size.width >= views.SIDE_BY_SIDE
        lv = self.query_one(views.LevelsView)
        lv.redraw()  # the observed levels are on screen before the first fit returns
        lv.table.focus()
        self.update_status()
        rec = self.recovery
        if self.ws is None:
            self._load_worker()
        elif rec is not None and rec.file_changed:
            lines = ["Unsaved edits from an earlier session were found in the autosave "
                     "journal, and the file has changed since they started."]
            if rec.edits:
                lines += ["", "Your unsaved edits:"] + [f"  {x}" for x in rec.edits]
            if rec.outside:
                lines += ["", "Changed in the file since:"] + [f"  {x}" for x in rec.outside]
            if rec.file_error:
                lines += ["", f"The file cannot be read now: {rec.file_error}"]
            self.push_screen(
                ChoiceScreen("\n".join(lines),
                             [("j", "keep my edits"), ("f", "keep the file"),
                              ("b", "keep both (merge)")]),
                self._recovery_answer,
            )
        elif self.offer_recovery:
            self.push_screen(
                ChoiceScreen(
                    "Unsaved changes from an earlier session were found in the autosave "
                    "journal. Recover them?",
                    [("r", "recover"), ("d", "discard")],
                ),
                self._recovery_answer,
            )
        else:
            self.call_after_refresh(self.schedule_fit)

    @work(thread=True, exclusive=True, group="load", exit_on_error=False)
    def _load_worker(self) -> None:
        try:
            ws = Workspace(Session.load(self.path))
        except Exception as exc:  # noqa: BLE001 - shown in the status line
            self.call_from_thread(self._load_failed, exc)
            return
        self.call_from_thread(self._loaded, ws)

    def _load_failed(self, exc: Exception) -> None:
        if isinstance(exc, FinefitError):  # bad input: said on leaving, exit status 2
            self.exit(return_code=2, message=f"finefit: {exc}")
            return
        self.fit_error = f"{type(exc).__name__}: {exc}"
        self.update_status()

    def _loaded(self, ws: Workspace) -> None:
        self.ws = ws
        self.preview = None
        self.refresh_bindings()
        self.schedule_fit()

    def _recovery_answer(self, answer: str | None) -> None:
        path = self.ws.session.path
        rec = self.recovery or (Workspace.pending_recovery(path) if path else None)
        choice = {"r": "journal", "j": "journal", "f": "file", "b": "both"}.get(answer or "")
        if rec is not None and choice is not None:
            try:
                self.ws, self.message = rec.keep(choice)
            except FinefitError as exc:  # e.g. the two versions cannot be merged
                self.notify(str(exc), title="not recovered", severity="error")
                self.push_screen(ChoiceScreen(str(exc), [("j", "keep my edits"),
                                                         ("f", "keep the file")]),
                                 self._recovery_answer)
                return
        elif rec is not None and answer == "d":
            self.ws.discard_journal()
            self.message = "discarded the autosave journal"
        elif rec is not None:  # dismissed: the journal is kept as a visible file
            copy_path = rec.keep_journal_copy()
            self.ws.discard_journal()
            self.message = f"the journal's edits are kept in {copy_path.name}"
        else:
            self.ws.discard_journal()
            self.message = "discarded the autosave journal"
        self.recovery = None
        self.redraw_views()
        self.schedule_fit()

    # ------------------------------------------------------------------ actions allowed
    def check_action(self, action: str, parameters: tuple[object, ...]) -> bool | None:
        """No workspace key acts behind a dialog; view keys act only in their view (the
        footer shows what applies)."""
        command = _BY_NAME.get(action)
        if action == "quit":
            return not isinstance(self.screen, ChoiceScreen)
        if command is None:
            return True
        if isinstance(self.screen, ModalScreen):
            return False
        if self.ws is None and command.name not in _WHILE_LOADING:
            return False
        if command.views and self.current_tab() not in command.views:
            return False
        return True

    # ------------------------------------------------------------------ fitting
    def schedule_fit(self) -> None:
        gen = self.ws.generation
        try:
            problem = self.ws.session.problem()
        except FinefitError as exc:
            self.fit_error = str(exc)
            self.fit_running = False
            self.update_status()
            return
        self.fit_error = None
        self.fit_running = True
        self.update_status()
        self._fit_worker(problem, gen)

    @work(thread=True, exclusive=True, group="fit", exit_on_error=False)
    def _fit_worker(self, problem, generation: int) -> None:
        worker = get_current_worker()
        try:
            with engine_threads():  # one BLAS thread for the small blocks (finefit.threads)
                result = problem.fit(should_stop=lambda: worker.is_cancelled)
        except FitCancelled:
            return
        except Exception as exc:  # noqa: BLE001 - shown in the status line, never a crash
            self.call_from_thread(self._fit_failed, generation, exc)
            return
        if not worker.is_cancelled:
            self.call_from_thread(self._fit_done, generation, result)

    def _fit_failed(self, generation: int, exc: Exception) -> None:
        if generation != self.ws.generation:
            return
        self.fit_running = False
        self.fit_error = f"{type(exc).__name__}: {exc}"
        self.update_status()

    def _fit_done(self, generation: int, result: FitResult) -> None:
        if generation != self.ws.generation or not self.is_running:
            return  # an edit came after this fit started (a newer fit is on its way), or
            # the app is closing
        self.fit_running = False
        if self.result is not None:
            self.previous_sigma = self.result.sigma
        self.result = result
        self.result_generation = generation
        self.lines_cache = None  # predicted lines follow the new fit
        self.fits_done += 1
        self.fit_landed.append(time.perf_counter())
        new = [w for w in result.warnings if w not in self.last_warnings]
        self.last_warnings = list(result.warnings)
        if new and result.suspected_swaps:
            self.notify(f"{len(result.suspected_swaps)} suspected exchange(s): 7", timeout=4)
        self.update_status()
        # the status line (new sigma) is painted first; the tables, which cost a frame
        # of their own, follow at once
        self.call_after_refresh(self.redraw_views)

    def redraw_views(self) -> None:
        """Tell every view that the fit (or what it shows) changed."""
        for view in self.query(views.View):
            view.post_message(FitFinished(self.result))

    def last_fit_landed_after(self, t: float) -> float:
        """When the first fit result after time ``t`` arrived (inf if none yet)."""
        return next((x for x in self.fit_landed if x > t), float("inf"))

    # ------------------------------------------------------------------ state read by views
    def current_tab(self) -> str:
        try:
            return self.query_one(TabbedContent).active
        except NoMatches:
            return ""

    def sort_name(self) -> str:
        return SORTS[self.sort_mode]

    def rows_by_id(self) -> dict:
        return {row.id: row for row in self.result.levels} if self.result else {}

    def visible_levels(self) -> list:
        rows = self.rows_by_id()
        sigma = self.result.sigma if self.result and self.result.sigma else None
        out = []
        levels = self.ws.session.levels if self.ws is not None else self.preview.levels
        for lv in levels:
            row = rows.get(lv.id)
            if self.outliers_only:
                if row is None or sigma is None or abs(row.residual) <= 2 * sigma:
                    continue
            if self.level_filter and not self.level_filter.matches(lv, row, sigma):
                continue
            out.append((lv, row))
        mode = SORTS[self.sort_mode]
        if mode == "energy":
            out.sort(key=lambda t: t[0].energy)
        elif mode == "|O-C|":
            out.sort(key=lambda t: -abs(t[1].residual) if t[1] else 0.0)
        elif mode == "J":
            out.sort(key=lambda t: (t[0].J, t[0].energy))
        return out

    def selected_level_id(self) -> str | None:
        return self.selected_id

    def select_level(self, level_id: str) -> None:
        if self.query_one(views.LevelsView).select(level_id):
            self.selected_id = level_id

    def selected_parameter(self) -> str | None:
        return self.query_one(views.ParamsView).selected()

    def update_status(self) -> None:
        r = self.result
        parts: list[tuple[int, str]] = []
        if self.ws is None and not self.fit_error:
            parts.append((0, "loading the model…"))
        if self.fit_running:
            parts.append((0, "fitting…"))
        if self.fit_error:
            parts.append((0, f"cannot fit: {self.fit_error}"))
        if self.ws is not None and self.ws.dirty:
            parts.append((0, "unsaved"))
        if r is not None:
            sig = "σ = —" if r.sigma is None else f"σ = {r.sigma:.4g}"
            parts.append((0, sig))
            if r.sigma is not None and self.previous_sigma is not None:
                parts.append((4, f"Δ {r.sigma - self.previous_sigma:+.3g}"))
            if r.fitted and not r.converged:
                parts.append((0, "NOT CONVERGED"))
        n_check = views.diagnosis_count(r)
        if n_check:
            parts.append((1, f"check {n_check} (7)"))
        if self.level_filter or self.outliers_only:
            extra = " !" if self.outliers_only else ""
            parts.append((2, f"filter {self.filter_text}{extra}"))
        if SORTS[self.sort_mode] != "energy":
            parts.append((3, f"sort {SORTS[self.sort_mode]}"))
        if self.message:
            parts.append((2, self.message))
        if r is not None:
            parts.append((5, f"N {r.n_levels} free {r.n_free} eval {r.iterations}"))
        style = "bold" if (self.fit_error or (r is not None and not r.converged)) else ""
        try:
            status = self.query_one("#status", Static)
        except NoMatches:
            return
        width = max((status.size.width or self.size.width) - 2, 20)
        status.update(Text(pack_status(parts, width), style=style))

    # ------------------------------------------------------------------ events
    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        if event.data_table.id == "levels-table":
            try:
                view = self.query_one(views.LevelsView)
                self.selected_id = view.selected_id()
                view.draw_detail()
            except NoMatches:  # the app is closing: its widgets are gone
                pass

    def on_tabbed_content_tab_activated(self, event: TabbedContent.TabActivated) -> None:
        view = self._view(self.current_tab())
        if view is not None:
            view.shown()
            if not isinstance(self.screen, ModalScreen):
                view.focus_target().focus()  # also when the tab was clicked
            self.refresh_bindings()

    def on_resize(self, event) -> None:
        self.call_after_refresh(self.update_status)  # the views follow on their own resize

    def _view(self, tab: str):
        try:
            return self.query_one(f"#{tab}-view", views.View)
        except NoMatches:
            return None

    # ------------------------------------------------------------------ lines worker
    def start_lines(self) -> None:
        if self.lines_running or self.result is None:
            return
        self.lines_running = True
        at_fit = self.ws.session.copy()
        at_fit.apply(self.result)  # lines at the fitted values, not the start ones
        source = None
        s = self.ws.session
        if self.level_opt is None and s.level_sets and s.level_sets[-1].source:
            # the observed lines of the last level optimisation, read again (the list's
            # path as written, or beside the session file)
            last = s.level_sets[-1]
            for cand in (Path(last.source),
                         (s.path.parent if s.path else Path.cwd()) / last.source):
                if cand.exists():
                    source = (str(cand), list(last.excluded))
                    break
        self._lines_worker(at_fit, self.ws.generation, dict(self.radial_cache), source)

    @work(thread=True, exclusive=True, group="lines", exit_on_error=False)
    def _lines_worker(self, session, generation: int, radial: dict, source) -> None:
        try:
            lines, used = session.predict_lines(radial)
            opt = None
            if source is not None:  # the observed lines of the last level optimisation
                try:
                    opt = session.optimise_levels(source[0], exclude=source[1])
                except FinefitError:
                    opt = None
        except Exception as exc:  # noqa: BLE001 - shown in the view
            self.call_from_thread(self._lines_failed, str(exc))
            return
        self.call_from_thread(self._lines_done, generation, lines, used, opt)

    def _lines_done(self, generation: int, lines, used, opt=None) -> None:
        self.lines_running = False
        if not self.is_running:
            return
        self.radial_cache.update(used)
        if opt is not None and self.level_opt is None:
            self.level_opt = opt
        self.lines_cache = (generation, lines) if generation == self.ws.generation else None
        if self.current_tab() == "lines":
            self.query_one(views.LinesView).redraw()

    def _lines_failed(self, message: str) -> None:
        self.lines_running = False
        self.query_one("#lines-note", Static).update(Text(f"cannot predict lines: {message}",
                                                          style="bold"))

    # ------------------------------------------------------------------ edits
    def apply_edit(self, description: str, change, select: str | None = None) -> bool:
        """One undoable edit; a bad value changes nothing and says why."""
        try:
            self.ws.edit(description, change)
        except FinefitError as exc:
            self.message = ""
            self.notify(str(exc), title="not changed", severity="error", timeout=6)
            self.update_status()
            return False
        self.message = description
        if self.ws.journal_error:
            self.notify(self.ws.journal_error, title="not autosaved", severity="warning")
        if select:
            self.pending_select = select
        # the tables are redrawn once, when the new fit lands (redrawing a large table
        # costs as much as the fit itself); if the session cannot be fitted, redraw now
        self.schedule_fit()
        if not self.fit_running:
            self.redraw_views()
        return True

    def _fit_is_current(self) -> bool:
        return (self.result is not None and not self.fit_running
                and self.result_generation == self.ws.generation)

    # ------------------------------------------------------------------ history, files
    def action_undo(self) -> None:
        self._step_history(self.ws.undo, "undone", "nothing to undo")

    def action_redo(self) -> None:
        self._step_history(self.ws.redo, "redone", "nothing to redo")

    def _step_history(self, step, done_word: str, nothing: str) -> None:
        before = {lv.id for lv in self.ws.session.levels}
        d = step()
        self.message = f"{done_word}: {d}" if d else nothing
        if d:
            back = [lv.id for lv in self.ws.session.levels if lv.id not in before]
            self.pending_select = back[0] if back else self.selected_id
            self.schedule_fit()  # the tables are redrawn when the fit lands
            if not self.fit_running:
                self.redraw_views()
        else:
            self.update_status()

    def action_refit(self) -> None:
        self.schedule_fit()

    def _write(self) -> bool:
        """Write the session with the fit on screen: its values become the session's,
        the values they replace are kept as a parameter set (undoable)."""
        note = ""
        if self._fit_is_current() and self.result.fitted and self.result.converged:
            result = self.result
            if any(self.ws.session.parameters[n].value != v
                   for n, v in result.values.items() if n in self.ws.session.parameters):
                try:
                    self.ws.edit("took the fitted values for writing",
                                 lambda s: s.take_fit(result))
                except FinefitError as exc:
                    self.notify(str(exc), title="not saved", severity="error")
                    return False
                self.result_generation = self.ws.generation  # same values: still current
                note = " with the fitted values (the previous ones kept as a set)"
        elif self.result is not None:
            note = " with the starting values (the fit on screen is not current or not " \
                   "converged)"
        try:
            p = self.ws.save()
        except FileChangedError as exc:
            self._ask_changed_on_disk(exc.recovery)
            return False
        except (FinefitError, OSError) as exc:
            self.notify(str(exc), title="not saved", severity="error")
            return False
        self.message = f"saved {p.name}{note}"
        self.update_status()
        return True

    def _ask_changed_on_disk(self, rec: Recovery) -> None:
        """The file changed since it was read: overwrite it, merge its changes, or cancel."""
        lines = ["The file was changed on disk since the workspace read it."]
        if rec.outside:
            lines += ["", "Changed in the file:"] + [f"  {x}" for x in rec.outside]

        def answer(a: str | None) -> None:
            try:
                if a == "b":
                    self.ws, self.message = rec.keep("both")
                elif a != "o":
                    return
                p = self.ws.save(overwrite=True)
            except (FinefitError, OSError) as exc:
                self.notify(str(exc), title="not saved", severity="error")
                return
            self.message = f"saved {p.name}" + (" (with the file's changes)" if a == "b" else "")
            self.redraw_views()
            self.schedule_fit()

        self.push_screen(ChoiceScreen("\n".join(lines),
                                      [("b", "merge them, then save"), ("o", "overwrite"),
                                       ("c", "cancel")]), answer)

    def action_save(self) -> None:
        self._write()

    # ------------------------------------------------------------------ actions: display
    def set_filter(self, text: str) -> bool:
        """Use a filter; a term that cannot be read is reported and changes nothing."""
        try:
            self.level_filter = parse_filter(text)
        except FinefitError as exc:
            self.notify(str(exc), title="filter not changed", severity="error", timeout=8)
            return False
        self._redraw_levels()
        return True

    def _redraw_levels(self) -> None:
        self.query_one(views.LevelsView).redraw()
        self.update_status()

    def action_filter(self) -> None:
        def done(values: dict | None) -> None:
            if values is not None:
                self.set_filter(values["filter"].strip())

        self.push_screen(FormScreen(
            "Filter levels", [("filter", "filter", self.filter_text)],
            note="Words match id, label or configuration; c=3d6 4s  J=7/2,9/2  p=odd  "
                 "id=L001,L002  e>20000  e=0..5000  oc>5  oc>2s  is=excluded|pinned|"
                 "mismatch|outlier. Empty shows all."), done)

    def action_toggle_outliers(self) -> None:
        self.outliers_only = not self.outliers_only
        self._redraw_levels()

    def action_cycle_sort(self) -> None:
        self.sort_mode = (self.sort_mode + 1) % len(SORTS)
        view = self.query_one(views.LevelsView)
        view.redraw()
        if view.table.row_count:
            view.table.move_cursor(row=0)  # the first rows are the point of sorting
            view.table.scroll_home(animate=False)
            self.selected_id = view.selected_id()
        self.update_status()

    def action_toggle_detail(self) -> None:
        self.detail_visible = not self.detail_visible
        self.query_one(views.LevelsView).redraw()

    def action_show_tab(self, name: str) -> None:
        self.query_one(TabbedContent).active = name
        view = self._view(name)
        if view is not None:
            view.shown()
            # the view takes the focus: focus left in a hidden pane would switch back
            view.focus_target().focus()
        self.refresh_bindings()

    def action_cycle_diagram(self) -> None:
        if self.result is None:
            return
        n = len(views.pictures.diagram_configurations(self.result))
        self.diagram_choice = (self.diagram_choice + 1) % (n + 1)
        self.query_one(views.DiagramView).redraw()

    def action_help(self) -> None:
        if not isinstance(self.screen, HelpScreen):
            self.push_screen(HelpScreen())

    async def action_quit(self) -> None:
        """ctrl+q and the palette's Quit ask about unsaved changes like q."""
        self.action_quit_workspace()

    def action_quit_workspace(self) -> None:
        if self.ws is None:
            self.exit()
            return
        if not self.ws.dirty:
            self.ws.discard_journal()
            self.exit()
            return

        def answer(a: str | None) -> None:
            if a == "s":
                if self._write():
                    self.exit()
            elif a == "d":
                self.ws.discard_journal()
                self.exit()

        self.push_screen(ChoiceScreen("There are unsaved changes. Write them before leaving?",
                                      [("s", "write and quit"), ("d", "discard and quit"),
                                       ("c", "cancel")]), answer)

    def get_system_commands(self, screen):
        ours = {c.title for c in COMMANDS}
        for cmd in super().get_system_commands(screen):
            if cmd.title not in ours:  # our Keys and Quit replace the built-in ones
                yield cmd
        for c in COMMANDS:
            yield SystemCommand(c.title, c.help, partial(self.run_action, c.action))


def make_app(path: str | Path, deferred: bool = False) -> WorkspaceApp:
    """The workspace for one session file (used by the command line and the tests).

    ``deferred`` (the command line): the file is only read and checked here, the
    levels are on screen at once and the models are built in a thread."""
    p = Path(path)
    pending = Workspace.pending_recovery(p)
    if not p.exists() and pending is None:
        raise FinefitError(f"session file {quote(str(p))} does not exist", str(p))
    if deferred and pending is None:
        from finefit.storage.atomic import read_text
        from finefit.storage.session_file import parse_session

        return WorkspaceApp(None, preview=parse_session(read_text(p, "session file"),
                                                        source=str(p)), path=p)
    if p.exists() and (pending is None or pending.file_error is None):
        ws = Workspace(Session.load(p))
    else:  # the file is missing or unreadable: start from the journal
        ws, _ = pending.keep("journal")
        if not p.exists():
            pending = None
    return WorkspaceApp(ws, recovery=pending)
