"""The finefit workspace: observed levels, parameters and pictures, refitted live.

All physics and file handling come from finefit.session / finefit.workspace; this
module only shows their state and turns keys into edits. Fits run in a thread worker
(a newer edit cancels a running fit; a generation counter drops stale results).
"""

from __future__ import annotations

import time
from functools import partial
from pathlib import Path

from rich.text import Text
from textual import work
from textual.app import App, ComposeResult, SystemCommand
from textual.binding import Binding
from textual.containers import Horizontal, VerticalScroll
from textual.coordinate import Coordinate
from textual.css.query import NoMatches
from textual.screen import ModalScreen
from textual.widgets import DataTable, Footer, Header, Static, TabbedContent, TabPane
from textual.worker import get_current_worker

from finefit.errors import FinefitError, quote
from finefit.fitting.fit import FitCancelled
from finefit.fitting.results import FitResult
from finefit.fitting.validation import parse_number
from finefit.notation.jvalues import format_j
from finefit.session import Session
from finefit.threads import engine_threads
from finefit.ui import pictures
from finefit.ui.commands import COMMANDS
from finefit.ui.screens import ChoiceScreen, FormScreen, HelpScreen, PickScreen
from finefit.workspace import FileChangedError, Recovery, Workspace

SORTS = ("energy", "|O-C|", "id", "J")


def _bindings() -> list[Binding]:
    out = []
    for c in COMMANDS:
        out.append(Binding(c.keys, c.action, c.title, show=c.show,
                           id=c.action.split("(")[0] + (c.action[c.action.find("("):]
                                                       if "(" in c.action else "")))
    return out


class WorkspaceApp(App):
    """Interactive term analysis of one session file."""

    CSS_PATH = "finefit.tcss"
    TITLE = "finefit"
    BINDINGS = _bindings()

    def __init__(self, workspace: Workspace, offer_recovery: bool = False,
                 recovery: Recovery | None = None) -> None:
        super().__init__()
        self.ws = workspace
        self.offer_recovery = offer_recovery or recovery is not None
        self.recovery = recovery
        self.result: FitResult | None = None
        self.previous_sigma: float | None = None
        self.fit_running = False
        self.fit_error: str | None = None
        self.message = ""
        self.sort_mode = 0
        self.filter_text = ""
        self.outliers_only = False
        self.detail_visible = True
        self.fits_done = 0
        self.fit_landed: list[float] = []  # perf_counter times of applied fit results
        self.diagram_choice = 0  # 0: all configurations, k: the k-th
        self.wide_table = False
        self.lines_cache: tuple[int, list] | None = None  # (generation, predicted lines)
        self.radial_cache: dict = {}
        self.lines_running = False
        self.pictures_stale = True
        self.level_opt = None  # the last level optimisation (observed lines of a level)

    # ------------------------------------------------------------------ layout
    def compose(self) -> ComposeResult:
        yield Header(show_clock=False)
        with TabbedContent(initial="levels", id="tabs"):
            with TabPane("Levels", id="levels"):
                with Horizontal(id="levels-row"):
                    yield DataTable(id="levels-table", cursor_type="row")
                    with VerticalScroll(id="detail"):
                        yield Static("", id="detail-text", markup=False)
            with TabPane("Parameters", id="params"):
                yield DataTable(id="params-table", cursor_type="row")
            with TabPane("Correlations", id="corr"):
                yield DataTable(id="corr-table", cursor_type="cell")
            with TabPane("O-C plot", id="resid"):
                yield Static("", id="resid-plot", markup=False)
            with TabPane("Diagram", id="diagram"):
                yield Static("", id="diagram-plot", markup=False)
            with TabPane("Lines", id="lines"):
                yield Static("", id="lines-note", markup=False)
                yield DataTable(id="lines-table", cursor_type="row")
                yield Static("", id="obs-lines-note", markup=False)
                yield DataTable(id="obs-lines-table", cursor_type="row")
        yield Static("", id="status", markup=False)
        yield Footer()

    def on_mount(self) -> None:
        s = self.ws.session
        self.sub_title = f"{s.path.name if s.path else 'unsaved'} — {', '.join(s.configurations)}"
        lt = self.query_one("#levels-table", DataTable)
        # numeric columns get fixed widths: the table is rebuilt after every fit and must
        # not jump or truncate numbers
        # on wide screens the configuration, parity and observed g get their own columns
        # (on narrow ones parity is the ° on J and g obs is in the detail pane)
        self.wide_table = self.size.width >= 140
        # every column has a fixed width: measuring auto-width cells after each fit costs
        # as much as drawing them
        lvs = self.ws.session.levels
        w_id = max([len(lv.id) for lv in lvs] + [4])
        w_conf = max([len(c) for c in s.configurations] + [13])
        label_names = [len(lv.label or "") for lv in lvs]
        w_label = min(max(label_names + [len(c) + 2 for c in s.configurations] + [8]), 40)
        columns = [("id", "id", w_id)]
        if self.wide_table:
            columns.append(("conf", "configuration", w_conf))
        columns += [("label", "label", w_label), ("J", "J", 5)]
        if self.wide_table:
            columns.append(("par", "parity", 6))
        columns += [("eobs", "E obs", 11), ("ecalc", "E calc", 11), ("oc", "O-C", 12),
                    ("pur", "%LS", 4), ("lead", "leading (best scheme)", w_label + 10),
                    ("gc", "g calc", 7)]
        if self.wide_table:
            columns.append(("go", "g obs", 6))
        columns.append(("flags", "", 14))
        for key, label, width in columns:
            lt.add_column(label, key=key, width=width)
        ln = self.query_one("#lines-table", DataTable)
        for key, label, width in (("air", "λ air (Å)", 11), ("vac", "λ vac (Å)", 11),
                                  ("sigma", "σ (cm-1)", 10), ("unc", "± (cm-1)", 8),
                                  ("other", "other level", None), ("J", "J", 5),
                                  ("gf", "gf", 8), ("A", "A (s-1)", 9)):
            ln.add_column(label, key=key, width=width)
        ob = self.query_one("#obs-lines-table", DataTable)
        for key, label, width in (("line", "line", 5), ("other", "other level", 8),
                                  ("obs", "σ obs", 15), ("ritz", "σ Ritz", 15),
                                  ("or", "obs-Ritz", 9), ("z", "/σ", 5), ("flags", "flags", 24)):
            ob.add_column(label, key=key, width=width)
        pt = self.query_one("#params-table", DataTable)
        for key, label in (("name", "parameter"), ("value", "value"), ("err", "± error"),
                           ("state", "status"), ("link", "link"), ("bounds", "bounds"),
                           ("ratio", "ratio"), ("to", "to")):
            pt.add_column(label, key=key)
        self.detail_visible = self.size.width >= 110
        self._apply_detail_visibility()
        self.refresh_all()
        lt.focus()
        rec = self.recovery
        if rec is not None and rec.file_changed:
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
        self.recovery = None
        self.refresh_all()
        self.schedule_fit()

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
        self.lines_cache = None  # predicted lines follow the new fit
        self.fits_done += 1
        self.fit_landed.append(time.perf_counter())
        self.refresh_all()

    def last_fit_landed_after(self, t: float) -> float:
        """When the first fit result after time ``t`` arrived (inf if none yet)."""
        return next((x for x in self.fit_landed if x > t), float("inf"))

    # ------------------------------------------------------------------ refreshing
    def refresh_all(self) -> None:
        self.refresh_levels()
        self.refresh_params()
        self.refresh_pictures()
        self.refresh_detail()
        if self._tab() == "lines":
            self.refresh_lines()
        self.update_status()

    def _rows_by_id(self) -> dict:
        return {row.id: row for row in self.result.levels} if self.result else {}

    def visible_levels(self) -> list:
        rows = self._rows_by_id()
        sigma = self.result.sigma if self.result and self.result.sigma else None
        out = []
        for lv in self.ws.session.levels:
            row = rows.get(lv.id)
            if self.outliers_only:
                if row is None or sigma is None or abs(row.residual) <= 2 * sigma:
                    continue
            if self.filter_text and not self._matches(lv, row):
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

    def _matches(self, lv, row) -> bool:
        for token in self.filter_text.split():
            key, _, value = token.partition("=")
            if value:
                key = key.lower()
                if key in ("j",):
                    if format_j(lv.J) != value and str(lv.J) != value:
                        return False
                elif key in ("p", "parity"):
                    if not lv.parity.startswith(value.lower()):
                        return False
                elif key in ("c", "conf", "configuration"):
                    conf = (lv.configuration or (row.configuration if row else "")).replace(" ", "")
                    if value.replace(" ", "") != conf:
                        return False
                else:
                    return False
            else:
                hay = " ".join([lv.id, lv.label or "", lv.configuration or "",
                                row.calc_label if row else ""]).lower()
                if token.lower() not in hay:
                    return False
        return True

    def refresh_levels(self) -> None:
        table = self.query_one("#levels-table", DataTable)
        keep = self.selected_level_id()
        table.clear()
        sigma = self.result.sigma if self.result and self.result.sigma else None
        for lv, row in self.visible_levels():
            flags = []
            if not lv.include:
                flags.append("excl")
            if lv.state is not None:
                flags.append("pin")
            oc = Text("")
            if row is not None:
                q = abs(row.residual) / sigma if sigma else 0.0
                mark = " !!" if q > 3 else (" !" if q > 2 else "")
                style = "bold red" if q > 3 else ("yellow" if q > 2 else "")
                oc = Text(f"{row.residual:9.2f}{mark}", style=style, justify="left")
                if row.label_mismatch:
                    flags.append("≠label")
            conf = lv.configuration or (row.configuration if row else "?")
            cells = [Text(lv.id)]
            if self.wide_table:
                cells.append(Text(conf))
            cells += [
                Text(lv.label or f"({conf})"),
                Text(format_j(lv.J) + ("°" if lv.parity == "odd" else ""), justify="right"),
            ]
            if self.wide_table:
                cells.append(Text(lv.parity))
            cells += [
                Text(f"{lv.energy:.3f}", justify="right"),
                Text(f"{row.energy_calc:.3f}" if row else "…", justify="right"),
                oc,
                Text(f"{100 * row.purity:.0f}" if row else "", justify="right"),
                Text(
                    f"{100 * row.components[0][1]:.0f}% {row.components[0][0]} ({row.best_scheme})"
                    if row and row.components else ""
                ),
                Text(f"{row.g_calc:.4f}" if row else "", justify="right"),
            ]
            if self.wide_table:
                cells.append(Text("" if lv.g is None else f"{lv.g:.3f}", justify="right"))
            cells.append(Text(" ".join(flags), style="dim"))
            table.add_row(*cells, key=lv.id)
        if keep is not None:
            self.select_level(keep)

    def selected_level_id(self) -> str | None:
        table = self.query_one("#levels-table", DataTable)
        if table.row_count == 0:
            return None
        try:
            key = table.coordinate_to_cell_key(Coordinate(table.cursor_row, 0)).row_key
        except Exception:  # noqa: BLE001 - empty or shrinking table
            return None
        return key.value

    def select_level(self, level_id: str) -> None:
        table = self.query_one("#levels-table", DataTable)
        try:
            table.move_cursor(row=table.get_row_index(level_id))
        except Exception:  # noqa: BLE001 - filtered out
            pass

    def selected_parameter(self) -> str | None:
        table = self.query_one("#params-table", DataTable)
        if table.row_count == 0:
            return None
        return table.coordinate_to_cell_key(Coordinate(table.cursor_row, 0)).row_key.value

    def refresh_params(self) -> None:
        table = self.query_one("#params-table", DataTable)
        keep = table.cursor_row if table.row_count else 0
        table.clear()
        r = self.result
        for name, p in self.ws.session.parameters.items():
            value = r.values.get(name, p.value) if r else p.value
            status = r.status.get(name, "") if r else ("vary" if p.vary else "fixed")
            err = ""
            if r:
                e = r.errors.get(name, 0.0)
                err = {"fixed": "", "at bound": "at bound", "undetermined": "undetermined"}.get(
                    status, f"{e:.2f}")
            ratio = r.ratios.get(name) if r else None
            bounds = ""
            if p.min is not None or p.max is not None:
                bounds = f"[{'' if p.min is None else f'{p.min:g}'}, " \
                         f"{'' if p.max is None else f'{p.max:g}'}]"
            setting = "vary" if p.vary else "fixed"
            table.add_row(
                Text(name), Text(f"{value:.2f}", justify="right"), Text(err, justify="right"),
                Text(f"{setting} / {status}" if r and status not in ("varied", "fixed") else
                     setting),
                Text(p.link or ""), Text(bounds),
                Text("" if ratio is None else f"{ratio:.3f}", justify="right"),
                Text(r.ratio_reference.get(name, "") if r and ratio is not None else ""),
                key=name,
            )
        if table.row_count:
            table.move_cursor(row=min(keep, table.row_count - 1))

    def refresh_pictures(self, force: bool = False) -> None:
        """Redraw the pictures; those not on screen are only marked stale (drawing the
        correlation table and plots after every fit would slow the refit down)."""
        if not force and self._tab() not in ("corr", "resid", "diagram"):
            self.pictures_stale = True
            return
        self.pictures_stale = False
        r = self.result
        corr = self.query_one("#corr-table", DataTable)
        corr.clear(columns=True)
        w = max(self.size.width - 2, 40)
        h = max(self.size.height - 8, 10)
        if r is None:
            self.query_one("#resid-plot", Static).update(Text("no fit yet"))
            self.query_one("#diagram-plot", Static).update(Text("no fit yet"))
            return
        names, cells = pictures.correlation_cells(r, self.ws.session.options.correlation_threshold)
        corr.add_column("", key="name")
        for i, n in enumerate(names):
            corr.add_column(Text(n), key=f"c{i}")
        for i, n in enumerate(names):
            corr.add_row(Text(n), *cells[i], key=f"r{i}")
        self.query_one("#resid-plot", Static).update(pictures.residual_plot(r, w, h))
        configs = pictures.diagram_configurations(r)
        chosen = configs[self.diagram_choice - 1] if 0 < self.diagram_choice <= len(configs) \
            else None
        self.query_one("#diagram-plot", Static).update(
            pictures.level_diagram(r, w, h, configuration=chosen))

    def refresh_detail(self) -> None:
        static = self.query_one("#detail-text", Static)
        lid = self.selected_level_id()
        r = self.result
        if lid is None or r is None:
            static.update(Text("select a level" if r else "fitting…"))
            return
        row = self._rows_by_id().get(lid)
        if row is None:
            static.update(Text(f"{lid}: not attached"))
            return
        sol = r.solutions[row.parity]
        lev = next(x for x in sol.levels
                   if x.block == round(2 * row.J) and x.position == row.state_rank - 1)
        width = 40
        out = Text()
        out.append(f"{row.id}  J = {format_j(row.J)}  {row.parity}\n", style="bold")
        out.append(f"E obs {row.energy_obs:.3f}   E calc {row.energy_calc:.3f} "
                   f"± {row.calc_uncertainty:.2f}\nO-C {row.residual:.3f}   "
                   f"g calc {row.g_calc:.4f}")
        out.append(f"   g obs {row.g_obs:.3f}\n" if row.g_obs is not None else "\n")
        out.append(f"state {row.state_rank} of its J; label {row.label or '—'}\n")
        for scheme in ("LS", "jj", "JK"):
            comps = [(c.label, c.fraction) for c in sol.composition(lev, scheme, top=4)]
            out.append(f"\n{scheme} coupling", style="bold underline")
            out.append(" (best)\n" if scheme == row.best_scheme else "\n")
            out.append(pictures.composition_bars(comps, width))
        out.append("\nnearest computed states\n", style="bold underline")
        near = sorted(sol.levels, key=lambda x: abs(x.energy - row.energy_calc))[1:6]
        for x in near:
            out.append(f"{x.energy - row.energy_calc:+9.1f}  J={format_j(x.J):>4}  {x.label}\n")
        static.update(out)

    def update_status(self) -> None:
        r = self.result
        parts = []
        if r is not None:
            sig = "—" if r.sigma is None else f"{r.sigma:.3f}"
            delta = ""
            if r.sigma is not None and self.previous_sigma is not None:
                delta = f" (Δ {r.sigma - self.previous_sigma:+.3f})"
            parts.append(f"σ = {sig} cm-1{delta}")
            parts.append(f"N = {r.n_levels}  free = {r.n_free}  eval = {r.iterations}")
            parts.append("converged" if r.converged else "NOT CONVERGED")
        if self.fit_running:
            parts.append("fitting…")
        if self.fit_error:
            parts.append(f"cannot fit: {self.fit_error}")
        if self.ws.dirty:
            parts.append("unsaved")
        if self.filter_text or self.outliers_only:
            extra = " outliers" if self.outliers_only else ""
            parts.append(f"filter: {self.filter_text or ''}{extra}")
        if SORTS[self.sort_mode] != "energy":
            parts.append(f"sort: {SORTS[self.sort_mode]}")
        if self.message:
            parts.append(self.message)
        style = "bold red" if (self.fit_error or (r is not None and not r.converged)) else ""
        self.query_one("#status", Static).update(Text("  │  ".join(parts), style=style))

    # ------------------------------------------------------------------ events
    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        if event.data_table.id == "levels-table":
            try:
                self.refresh_detail()
            except NoMatches:  # the app is closing: its widgets are gone
                pass

    # ------------------------------------------------------------------ lines view
    def refresh_observed_lines(self) -> None:
        """Observed lines of the selected level from the last level optimisation (O)."""
        from finefit.reports.levelopt import paren

        note = self.query_one("#obs-lines-note", Static)
        table = self.query_one("#obs-lines-table", DataTable)
        table.clear()
        opt = self.level_opt
        if opt is None:
            note.update(Text("Observed lines: O optimises the levels from a line list.",
                             style="dim"))
            return
        lid = self.selected_level_id()
        mine = opt.lines_of(lid) if lid else []
        n_bad = sum("outlier" in x.flags for x in mine)
        note.update(Text(f"{len(mine)} observed lines of {lid} in {opt.source or 'the list'}"
                         f" (chi2/dof {opt.reduced_chi2 or 0:.2f}; {n_bad} beyond 3 σ)",
                         style="bold yellow" if n_bad else ""))
        for x in sorted(mine, key=lambda x: x.wavenumber):
            z = "" if x.normalised is None else f"{x.normalised:+.1f}"
            style = "red" if "outlier" in x.flags else ("dim" if not x.used else "")
            table.add_row(Text(str(x.source_line)), Text(x.upper if x.lower == lid else x.lower),
                          Text(paren(x.wavenumber, x.uncertainty)),
                          Text(paren(x.ritz, x.ritz_uncertainty)), Text(f"{x.residual:+.4f}"),
                          Text(z, style=style), Text(", ".join(x.flags), style=style))

    def refresh_lines(self) -> None:
        self.refresh_observed_lines()
        note = self.query_one("#lines-note", Static)
        table = self.query_one("#lines-table", DataTable)
        table.clear()
        s = self.ws.session
        if set(s.models) != {"even", "odd"}:
            note.update(Text("Predicted lines need configurations of both parities in the "
                             "session."))
            return
        if self.lines_cache is None or self.lines_cache[0] != self.ws.generation:
            note.update(Text("computing line strengths (Hartree-Fock dipole integrals the "
                             "first time)…"))
            if not self.lines_running and self.result is not None:
                self.lines_running = True
                at_fit = s.copy()
                at_fit.apply(self.result)  # lines at the fitted values, not the start ones
                self._lines_worker(at_fit, self.ws.generation, dict(self.radial_cache))
            return
        lid = self.selected_level_id()
        row = self._rows_by_id().get(lid) if lid else None
        if row is None:
            note.update(Text("select an attached level in the levels view"))
            return
        key = (row.parity, round(2 * row.J), row.state_rank - 1)
        mine = []
        for x in self.lines_cache[1]:
            for a, b in ((x.lower, x.upper), (x.upper, x.lower)):
                if (a.parity, a.block, a.position) == key:
                    mine.append((x, b))
        note.update(Text(f"{len(mine)} predicted lines of {row.id} (J = {format_j(row.J)}, "
                         f"{row.parity}), strongest first. Ritz wavelengths where both "
                         "levels are observed, else from calculated energies (other level "
                         "shown by label); check them against the spectrum."))
        def other_id(x, other):
            return x.upper_id if other is x.upper else x.lower_id

        for x, other in mine[:200]:
            table.add_row(
                Text("" if x.air_wavelength is None else f"{x.air_wavelength:.3f}"),
                Text(f"{x.vacuum_wavelength:.3f}"), Text(f"{x.wavenumber:.2f}"),
                Text("" if x.wavenumber_uncertainty is None else
                     f"{x.wavenumber_uncertainty:.2f}"),
                Text(other_id(x, other) or other.label), Text(format_j(other.J)),
                Text(f"{x.gf:.3g}"),
                Text(f"{x.A:.3g}"))

    @work(thread=True, exclusive=True, group="lines", exit_on_error=False)
    def _lines_worker(self, session, generation: int, radial: dict) -> None:
        try:
            lines, used = session.predict_lines(radial)
        except Exception as exc:  # noqa: BLE001 - shown in the view
            self.call_from_thread(self._lines_failed, str(exc))
            return
        self.call_from_thread(self._lines_done, generation, lines, used)

    def _lines_done(self, generation: int, lines, used) -> None:
        self.lines_running = False
        if not self.is_running:
            return
        self.radial_cache.update(used)
        self.lines_cache = (generation, lines) if generation == self.ws.generation else None
        if self._tab() == "lines":
            self.refresh_lines()

    def _lines_failed(self, message: str) -> None:
        self.lines_running = False
        self.query_one("#lines-note", Static).update(Text(f"cannot predict lines: {message}",
                                                          style="bold red"))

    def on_resize(self, event) -> None:
        if self.result is not None:
            self.refresh_pictures()

    # ------------------------------------------------------------------ helpers
    def _modal_open(self) -> bool:
        return isinstance(self.screen, ModalScreen)

    def _tab(self) -> str:
        return self.query_one(TabbedContent).active

    def apply_edit(self, description: str, change) -> bool:
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
        # the tables are redrawn once, when the new fit lands (redrawing a large table
        # costs as much as the fit itself); if the session cannot be fitted, redraw now
        self.schedule_fit()
        if not self.fit_running:
            self.refresh_levels()
            self.refresh_params()
        return True

    # ------------------------------------------------------------------ actions
    def action_toggle_include(self) -> None:
        if self._modal_open() or self._tab() != "levels":
            return
        lid = self.selected_level_id()
        if lid is None:
            return
        lv = self.ws.session.level(lid)
        self.apply_edit(f"{'excluded' if lv.include else 'included'} {lid}",
                        lambda s: s.update_level(lid, include=not lv.include))

    def action_reattach(self) -> None:
        if self._modal_open() or self._tab() != "levels" or self.result is None:
            return
        lid = self.selected_level_id()
        if lid is None:
            return
        lv = self.ws.session.level(lid)
        sol = self.result.solutions[lv.parity]
        states = [x for x in sol.levels if x.block == round(2 * lv.J)]
        states.sort(key=lambda x: x.position)
        owner = {(row.state_rank): row.id for row in self.result.levels
                 if row.parity == lv.parity and row.J == lv.J}
        options = [Text("let the fit choose (by label, then energy order)")]
        highlight = 0
        for x in states:
            comps = sol.composition(x, "LS", top=2)
            who = owner.get(x.position + 1)
            t = Text(f"#{x.position + 1:<3} {x.energy:11.2f}  ")
            t.append("  ".join(f"{100 * c.fraction:.0f}% {c.label}" for c in comps))
            if who:
                t.append(f"   [{who}]", style="bold" if who == lid else "dim")
                if who == lid:
                    highlight = x.position + 1
            options.append(t)

        def chosen(index: int | None) -> None:
            if index is None:
                return
            state = None if index == 0 else index
            self.apply_edit(f"attached {lid} to state {state or 'by label'}",
                            lambda s: s.attach(lid, state))

        self.push_screen(
            PickScreen(f"Attach {lid} (J = {format_j(lv.J)}, {lv.parity}) to:", options,
                       highlight), chosen)

    def action_edit(self) -> None:
        if self._modal_open():
            return
        if self._tab() == "levels":
            self._edit_level()
        elif self._tab() == "params":
            self._edit_parameter()

    def _edit_level(self) -> None:
        lid = self.selected_level_id()
        if lid is None:
            return
        lv = self.ws.session.level(lid)
        fields = [("energy", "energy (cm-1)", f"{lv.energy!r}"),
                  ("uncertainty", "uncertainty (cm-1, empty = none)",
                   "" if lv.uncertainty is None else f"{lv.uncertainty!r}"),
                  ("label", "label (empty = none)", lv.label or "")]

        def done(values: dict | None) -> None:
            if values is None:
                return
            try:
                energy = parse_number(values["energy"], "energy")
                unc = parse_number(values["uncertainty"], "uncertainty", positive=True) \
                    if values["uncertainty"].strip() else None
            except ValueError as exc:  # FinefitError names the field
                self.notify(str(exc), title="not changed", severity="error")
                return
            label = values["label"].strip() or None
            self.apply_edit(f"edited {lid}", lambda s: s.update_level(
                lid, energy=energy, uncertainty=unc, label=label))

        self.push_screen(FormScreen(f"Edit level {lid}", fields), done)

    def _edit_parameter(self) -> None:
        name = self.selected_parameter()
        if name is None:
            return
        p = self.ws.session.parameters[name]
        fields = [("value", "value (cm-1)", f"{p.value!r}"),
                  ("min", "lower bound (empty = none)", "" if p.min is None else f"{p.min!r}"),
                  ("max", "upper bound (empty = none)", "" if p.max is None else f"{p.max!r}")]

        def done(values: dict | None) -> None:
            if values is None:
                return
            try:
                value = parse_number(values["value"], "value")
                lo = parse_number(values["min"], "min") if values["min"].strip() else None
                hi = parse_number(values["max"], "max") if values["max"].strip() else None
            except ValueError as exc:  # FinefitError names the field
                self.notify(str(exc), title="not changed", severity="error")
                return
            self.apply_edit(f"edited {name}",
                            lambda s: s.set_parameter(name, value, min=lo, max=hi))

        self.push_screen(FormScreen(f"Edit {name}", fields), done)

    def action_add_level(self) -> None:
        if self._modal_open():
            return
        s = self.ws.session
        fields = [("energy", "energy (cm-1)", ""), ("J", "J (e.g. 5/2)", ""),
                  ("parity", "parity (even/odd)", next(iter(s.models))),
                  ("configuration", "configuration (optional)", ""),
                  ("label", "label (optional)", ""), ("uncertainty", "uncertainty (optional)", "")]

        def done(values: dict | None) -> None:
            if values is None:
                return
            unc = values["uncertainty"].strip()
            try:
                unc_v = parse_number(unc, "uncertainty", positive=True) if unc else None
            except ValueError as exc:  # FinefitError names the field
                self.notify(str(exc), severity="error", title="not added")
                return
            self.apply_edit("added a level", lambda s: s.add_level(
                energy=values["energy"], J=values["J"], parity=values["parity"].strip(),
                configuration=values["configuration"].strip() or None,
                label=values["label"].strip() or None, uncertainty=unc_v))

        self.push_screen(FormScreen("Add an observed level", fields), done)

    def action_delete_level(self) -> None:
        if self._modal_open() or self._tab() != "levels":
            return
        lid = self.selected_level_id()
        if lid is None:
            return

        def answer(a: str | None) -> None:
            if a == "y":
                self.apply_edit(f"deleted {lid}", lambda s: s.remove_level(lid))

        self.push_screen(ChoiceScreen(f"Delete level {lid}? (undo brings it back)",
                                      [("y", "delete"), ("n", "keep")]), answer)

    def action_toggle_vary(self) -> None:
        if self._modal_open() or self._tab() != "params":
            return
        name = self.selected_parameter()
        if name is None:
            return
        vary = not self.ws.session.parameters[name].vary
        self.apply_edit(f"{'varying' if vary else 'fixed'} {name}",
                        lambda s: s.set_parameter(name, vary=vary))

    def action_link(self) -> None:
        if self._modal_open() or self._tab() != "params":
            return
        name = self.selected_parameter()
        if name is None:
            return
        p = self.ws.session.parameters[name]

        def done(values: dict | None) -> None:
            if values is None:
                return
            group = values["group"].strip() or None
            self.apply_edit(f"{name} {'in link group ' + group if group else 'unlinked'}",
                            lambda s: s.set_parameter(name, link=group))

        self.push_screen(FormScreen(f"Link group of {name}", [
            ("group", "group name (empty = not linked)", p.link or "")],
            note="Parameters of one group vary together, keeping the ratios they have "
                 "when the fit starts."), done)

    def action_undo(self) -> None:
        self._step_history(self.ws.undo, "undone", "nothing to undo")

    def action_redo(self) -> None:
        self._step_history(self.ws.redo, "redone", "nothing to redo")

    def _step_history(self, step, done_word: str, nothing: str) -> None:
        if self._modal_open():
            return
        d = step()
        self.message = f"{done_word}: {d}" if d else nothing
        if d:
            self.schedule_fit()  # the tables are redrawn when the fit lands
        else:
            self.update_status()

    def action_refit(self) -> None:
        if not self._modal_open():
            self.schedule_fit()

    def action_save(self) -> None:
        if self._modal_open():
            return
        try:
            p = self.ws.save()
        except FileChangedError as exc:
            self._ask_changed_on_disk(exc.recovery)
            return
        except (FinefitError, OSError) as exc:
            self.notify(str(exc), title="not saved", severity="error")
            return
        self.message = f"saved {p.name}"
        self.update_status()

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
            self.refresh_all()
            self.schedule_fit()

        self.push_screen(ChoiceScreen("\n".join(lines),
                                      [("b", "merge them, then save"), ("o", "overwrite"),
                                       ("c", "cancel")]), answer)

    def action_keep_set(self) -> None:
        if self._modal_open() or self.result is None:
            return
        result = self.result

        def done(values: dict | None) -> None:
            if values is None:
                return
            name = values["name"].strip()
            self.apply_edit(f"kept set {name!r}", lambda s: s.keep(result, name))

        self.push_screen(FormScreen("Keep the current fit as a parameter set",
                                    [("name", "name", "")]), done)

    def action_adopt_fit(self) -> None:
        if self._modal_open() or self.result is None:
            return
        result = self.result
        self.apply_edit("adopted the fitted values", lambda s: s.apply(result))

    def action_optimise_levels(self) -> None:
        if self._modal_open():
            return
        s = self.ws.session
        last = s.level_sets[-1] if s.level_sets else None
        start = last.source if last else ""
        skip = ", ".join(str(x) for x in last.excluded) if last else ""

        def done(values: dict | None) -> None:
            if values is None:
                return
            try:
                exclude = [int(x) for x in values["exclude"].replace(",", " ").split()]
            except ValueError:
                self.notify("file lines to keep out must be whole numbers", severity="error")
                return
            try:
                opt = s.optimise_levels(values["path"].strip(), exclude=exclude)
            except FinefitError as exc:
                self.notify(str(exc), title="not optimised", severity="error", timeout=8)
                return
            if self.apply_edit(f"levels optimised from {opt.source}",
                               lambda sess: sess.apply_levels(opt)):
                self.level_opt = opt
                n_bad = sum("outlier" in x.flags and x.used for x in opt.lines)
                red = opt.reduced_chi2
                self.notify(f"{len(opt.levels)} levels from {opt.n_used} lines; chi2/dof "
                            f"{'—' if red is None else f'{red:.2f}'}; {n_bad} line(s) beyond "
                            "3 σ (lines view: 6)", timeout=8)

        self.push_screen(FormScreen(
            "Optimise the levels from a line list", [("path", "line list", start),
                                                     ("exclude", "file lines kept out", skip)],
            note="Energies and uncertainties of every level with lines are replaced "
                 "(u undoes it)."), done)

    def action_load_set(self) -> None:
        if self._modal_open():
            return
        sets = self.ws.session.parameter_sets
        if not sets:
            self.notify("no saved parameter sets yet (k keeps the current fit)")
            return
        options = [Text(f"{ps.name}   σ = {ps.sigma if ps.sigma is None else f'{ps.sigma:.3f}'}"
                        f"   N = {ps.n_levels}   free = {ps.n_free}   {ps.created}")
                   for ps in sets]

        def chosen(i: int | None) -> None:
            if i is None:
                return
            name = sets[i].name
            self.apply_edit(f"started from set {name!r}", lambda s: s.use_set(name))

        self.push_screen(PickScreen("Start from a saved parameter set:", options), chosen)

    def action_filter(self) -> None:
        if self._modal_open():
            return

        def done(values: dict | None) -> None:
            if values is None:
                return
            self.filter_text = values["filter"].strip()
            self.refresh_levels()
            self.update_status()

        self.push_screen(FormScreen("Filter levels", [("filter", "filter", self.filter_text)],
                                    note="Words match id, label or configuration; also "
                                         "c=3d7  J=5/2  p=odd. Empty shows all."), done)

    def action_toggle_outliers(self) -> None:
        if self._modal_open():
            return
        self.outliers_only = not self.outliers_only
        self.refresh_levels()
        self.update_status()

    def action_cycle_sort(self) -> None:
        if self._modal_open():
            return
        self.sort_mode = (self.sort_mode + 1) % len(SORTS)
        self.refresh_levels()
        self.update_status()

    def _apply_detail_visibility(self) -> None:
        self.query_one("#detail").display = self.detail_visible

    def action_toggle_detail(self) -> None:
        if self._modal_open():
            return
        self.detail_visible = not self.detail_visible
        self._apply_detail_visibility()
        self.refresh_detail()

    def on_tabbed_content_tab_activated(self, event: TabbedContent.TabActivated) -> None:
        if self.pictures_stale and self._tab() in ("corr", "resid", "diagram"):
            self.refresh_pictures(force=True)

    def action_show_tab(self, name: str) -> None:
        if self._modal_open():
            return
        self.query_one(TabbedContent).active = name
        if self.pictures_stale and name in ("corr", "resid", "diagram"):
            self.refresh_pictures(force=True)
        if name == "params":
            self.query_one("#params-table").focus()
        elif name == "levels":
            self.query_one("#levels-table").focus()
        elif name == "corr":
            self.query_one("#corr-table").focus()
        elif name == "lines":
            self.query_one("#lines-table").focus()  # focus in another pane would switch back
            self.refresh_lines()

    def action_cycle_diagram(self) -> None:
        if self._modal_open() or self.result is None:
            return
        n = len(pictures.diagram_configurations(self.result))
        self.diagram_choice = (self.diagram_choice + 1) % (n + 1)
        self.refresh_pictures(force=True)

    def action_help(self) -> None:
        if not isinstance(self.screen, HelpScreen):
            self.push_screen(HelpScreen())

    def action_quit_workspace(self) -> None:
        if self._modal_open():
            return
        if not self.ws.dirty:
            self.ws.discard_journal()
            self.exit()
            return

        def answer(a: str | None) -> None:
            if a == "s":
                try:
                    self.ws.save()
                except FileChangedError as exc:
                    self._ask_changed_on_disk(exc.recovery)
                    return
                except (FinefitError, OSError) as exc:
                    self.notify(str(exc), title="not saved", severity="error")
                    return
                self.exit()
            elif a == "d":
                self.ws.discard_journal()
                self.exit()

        self.push_screen(ChoiceScreen("There are unsaved changes. Save before leaving?",
                                      [("s", "save and quit"), ("d", "discard and quit"),
                                       ("c", "cancel")]), answer)

    def get_system_commands(self, screen):
        yield from super().get_system_commands(screen)
        for c in COMMANDS:
            yield SystemCommand(c.title, c.help, partial(self.run_action, c.action))


def make_app(path: str | Path) -> WorkspaceApp:
    """The workspace for one session file (used by the command line and the tests)."""
    p = Path(path)
    pending = Workspace.pending_recovery(p)
    if not p.exists() and pending is None:
        raise FinefitError(f"session file {quote(str(p))} does not exist", str(p))
    if p.exists() and (pending is None or pending.file_error is None):
        ws = Workspace(Session.load(p))
    elif pending is not None:  # the file is missing or unreadable: start from the journal
        ws, _ = pending.keep("journal")
        if not p.exists():
            pending = None
    return WorkspaceApp(ws, recovery=pending)
