"""The workspace's views: one widget per tab, each redrawing itself on FitFinished.

A view reads the app's state (session, last fit, selection, filter) and draws it; it
changes nothing. Views not on screen only note that they are stale and redraw when shown,
so a refit costs one table redraw.
"""

from __future__ import annotations

from rich.text import Text
from textual.app import ComposeResult
from textual.containers import Container, Vertical, VerticalScroll
from textual.coordinate import Coordinate
from textual.widgets import DataTable, Static

from finefit.model.statekey import StateKey
from finefit.notation.jvalues import format_j
from finefit.ui import pictures
from finefit.ui.formatting import Column, clip, decimals_for, fit_columns, value_error
from finefit.ui.messages import FitFinished

DETAIL_WIDTH = 46  # the composition pane beside the table (wide terminals)
SIDE_BY_SIDE = 110  # from this width the pane sits beside the table, else below it


class View(Container):
    """Base of the views: redraw when visible, else remember to redraw when shown."""

    TAB = ""
    stale = True

    def __init_subclass__(cls, **kwargs) -> None:
        # every view draws itself: a view class without its own draw() is a mistake
        super().__init_subclass__(**kwargs)
        if "draw" not in cls.__dict__:
            raise TypeError(f"{cls.__name__} must define draw()")

    def on_fit_finished(self, message: FitFinished) -> None:
        self.stale = True
        if self.app.current_tab() == self.TAB:
            self.redraw()

    def redraw(self) -> None:
        self.stale = False
        self.draw()

    def on_resize(self, event) -> None:
        # the layout follows the terminal (wide columns, pane beside or below the table)
        self.stale = True
        if self.app.current_tab() == self.TAB:
            self.redraw()

    def shown(self) -> None:
        if self.stale:
            self.redraw()

    def draw(self) -> None:
        """Fill the view from the app's state (each view class defines its own)."""

    def focus_target(self):
        return self


class FocusStatic(Static, can_focus=True):
    """A picture that can hold the focus (so its view's keys reach the app)."""


def _table_cursor_key(table: DataTable) -> str | None:
    if table.row_count == 0:
        return None
    try:
        return table.coordinate_to_cell_key(Coordinate(table.cursor_row, 0)).row_key.value
    except Exception:  # noqa: BLE001 - an empty or shrinking table
        return None


def fill_table(table: DataTable, spec: list[tuple[str, str, bool, int, bool]],
               rows: list[dict[str, tuple[str, str]]], available: int) -> None:
    """Fill a table with the columns of ``spec`` (key, title, required, shrink_to,
    right-justified) that fit ``available`` cells whole (formatting.fit_columns)."""
    columns = [Column(k, t, max([len(t)] + [len(r[k][0]) for r in rows]), req, shrink)
               for k, t, req, shrink, _ in spec]
    shown = fit_columns(columns, available)
    right = {k for k, _, _, _, r in spec if r}
    table.clear(columns=True)
    for c in shown:
        table.add_column(c.title, key=c.key, width=c.width)
    for r in rows:
        table.add_row(*[Text(clip(r[c.key][0], c.width), style=r[c.key][1],
                             justify="right" if c.key in right else "left") for c in shown])


# ---------------------------------------------------------------------- levels
class LevelsView(View):
    """Observed levels against the fit, with the composition pane."""

    TAB = "levels"

    def compose(self) -> ComposeResult:
        yield DataTable(id="levels-table", cursor_type="row")
        with VerticalScroll(id="detail"):
            yield Static("", id="detail-text", markup=False)

    @property
    def table(self) -> DataTable:
        return self.query_one("#levels-table", DataTable)

    def focus_target(self):
        return self.table

    def selected_id(self) -> str | None:
        return _table_cursor_key(self.table)

    def select(self, level_id: str | None) -> bool:
        if level_id is None:
            return False
        try:
            self.table.move_cursor(row=self.table.get_row_index(level_id))
        except Exception:  # noqa: BLE001 - filtered out
            return False
        return True

    def layout_detail(self) -> None:
        """Beside the table on wide terminals, below it on narrow ones (never squeezing
        the numbers to a digit)."""
        app = self.app
        self.query_one("#detail").display = app.detail_visible
        self.set_class(app.size.width < SIDE_BY_SIDE, "stacked")

    def table_width(self) -> int:
        app = self.app
        width = self.size.width or app.size.width
        if app.detail_visible and app.size.width >= SIDE_BY_SIDE:
            width -= DETAIL_WIDTH + 1
        return max(width - 2, 20)  # the vertical scroll bar

    def draw(self) -> None:
        self.layout_detail()
        self.draw_table()
        self.draw_detail()

    def draw_table(self) -> None:
        app = self.app
        table = self.table
        keep = app.pending_select or app.selected_id
        r = app.result
        sigma = r.sigma if r is not None and r.sigma else None
        rows = app.visible_levels()
        d_oc = decimals_for(sigma)
        uncs = [lv.uncertainty for lv, _ in rows if lv.uncertainty]
        d_e = decimals_for(min(uncs), lo=3, hi=5) if uncs else 3
        color = not app.no_color
        data = []
        for lv, row in rows:
            flag = ("x" if not lv.include else "") + ("p" if lv.state is not None else "")
            oc_style = ""
            q = 0.0
            if row is not None:
                if row.label_mismatch:
                    flag += "≠"
                q = abs(row.residual) / sigma if sigma else 0.0
                if q > 3:
                    flag += "!!"
                    oc_style = "bold red" if color else "bold reverse"
                elif q > 2:
                    flag += "!"
                    oc_style = "yellow" if color else "bold"
            conf = lv.configuration or (row.configuration if row is not None else "?")
            lead = ""
            if row is not None and row.components:
                lead = (f"{100 * row.components[0][1]:.0f}% {row.components[0][0]} "
                        f"({row.best_scheme})")
            data.append({
                "id": (lv.id, ""), "flag": (flag, "bold"),
                "label": (lv.label or f"({conf})", "" if lv.include or not color else "dim"),
                "J": (format_j(lv.J) + ("°" if lv.parity == "odd" else ""), ""),
                "eobs": (f"{lv.energy:.{d_e}f}", ""),
                "ecalc": (f"{row.energy_calc:.{d_e}f}" if row is not None else "…", ""),
                "oc": (f"{row.residual:.{d_oc}f}" if row is not None else "", oc_style),
                "pur": (f"{100 * row.purity:.0f}" if row is not None else "", ""),
                "gc": (f"{row.g_calc:.4f}" if row is not None else "", ""),
                "lead": (lead, ""),
                "conf": (conf, ""), "par": (lv.parity, ""),
                "go": ("" if lv.g is None else f"{lv.g:.3f}", ""),
            })

        def width(key: str, title: str, cap: int = 200) -> int:
            return min(max([len(title)] + [len(d[key][0]) for d in data]), cap)

        sort = app.sort_name()
        titles = {"id": "id", "flag": "flag", "label": "label", "J": "J", "eobs": "E obs",
                  "ecalc": "E calc", "oc": "O-C", "pur": "%LS", "gc": "g calc",
                  "lead": "leading (best scheme)", "conf": "configuration", "par": "parity",
                  "go": "g obs"}
        mark = {"energy": "eobs", "|O-C|": "oc", "id": "id", "J": "J"}[sort]
        titles[mark] += " ▼" if sort == "|O-C|" else " ▲"
        columns = [
            Column("id", titles["id"], width("id", titles["id"])),
            Column("flag", titles["flag"], width("flag", titles["flag"])),
            Column("label", titles["label"], width("label", titles["label"], 40), shrink_to=8),
            Column("J", titles["J"], width("J", titles["J"])),
            Column("eobs", titles["eobs"], width("eobs", titles["eobs"])),
            Column("ecalc", titles["ecalc"], width("ecalc", titles["ecalc"])),
            Column("oc", titles["oc"], width("oc", titles["oc"])),
            Column("pur", titles["pur"], width("pur", titles["pur"]), required=False),
            Column("gc", titles["gc"], width("gc", titles["gc"]), required=False),
            Column("lead", titles["lead"], width("lead", titles["lead"], 50), required=False,
                   shrink_to=16),
            Column("go", titles["go"], width("go", titles["go"]), required=False),
            Column("conf", titles["conf"], width("conf", titles["conf"]), required=False),
        ]  # parity is the ° on J (and in the detail pane)
        # a column with nothing in it (no observed g, no fit yet) takes no room
        columns = [c for c in columns if c.required or any(d[c.key][0] for d in data)]
        shown = fit_columns(columns, self.table_width())
        right = {"J", "eobs", "ecalc", "oc", "pur", "gc", "go"}
        with self.app.batch_update():
            table.clear(columns=True)
            for c in shown:
                table.add_column(c.title, key=c.key, width=c.width)
            for (lv, _), d in zip(rows, data, strict=True):
                table.add_row(*[
                    Text(clip(d[c.key][0], c.width), style=d[c.key][1],
                         justify="right" if c.key in right else "left")
                    for c in shown], key=lv.id)
            if not (keep and self.select(keep)) and table.row_count:
                table.move_cursor(row=0)
        app.pending_select = None
        app.selected_id = self.selected_id()

    def draw_detail(self) -> None:
        app = self.app
        if not app.detail_visible:
            return
        static = self.query_one("#detail-text", Static)
        lid = app.selected_id
        r = app.result
        if lid is None or r is None:
            static.update(Text("select a level" if r else "fitting…"))
            return
        row = app.rows_by_id().get(lid)
        if row is None:
            static.update(Text(f"{lid}: not attached"))
            return
        sol = r.solutions[row.parity]
        key = StateKey.of(row)
        lev = next(x for x in sol.levels if StateKey.of(x) == key)
        d = decimals_for(r.sigma)
        out = Text()
        out.append(f"{row.id}  J = {format_j(row.J)}  {row.parity}"
                   f"{'' if row.included else '  (excluded)'}\n", style="bold")
        out.append(f"E obs  {row.energy_obs:.3f}\nE calc {row.energy_calc:.3f} "
                   f"± {row.calc_uncertainty:.{d}f}\nO-C    {row.residual:.{d}f}\n"
                   f"g calc {row.g_calc:.4f}")
        out.append(f"   g obs {row.g_obs:.3f}\n" if row.g_obs is not None else "\n")
        lv = app.ws.session.level(lid)
        pin = f"pinned to #{lv.state}" if lv.state is not None else "attached by the fit"
        out.append(f"state #{row.state_rank} of its J ({pin})\nlabel {row.label or '—'}")
        out.append("  ≠ attached state\n" if row.label_mismatch else "\n",
                   style="bold" if row.label_mismatch else "")
        width = 40
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


# ---------------------------------------------------------------------- parameters
class ParamsView(View):
    TAB = "params"

    def compose(self) -> ComposeResult:
        yield DataTable(id="params-table", cursor_type="row")

    def focus_target(self):
        return self.query_one(DataTable)

    def selected(self) -> str | None:
        return _table_cursor_key(self.query_one(DataTable))

    def draw(self) -> None:
        app = self.app
        table = self.query_one(DataTable)
        keep = table.cursor_row if table.row_count else 0
        r = app.result
        data = []
        if app.ws is None:  # still loading
            return
        for name, p in app.ws.session.parameters.items():
            value = r.values.get(name, p.value) if r else p.value
            status = r.status.get(name, "") if r else ("vary" if p.vary else "fixed")
            v_text, e_text = f"{value:.2f}", ""
            if r is not None:
                e = r.errors.get(name, 0.0)
                if status in ("at bound", "undetermined"):
                    e_text = status
                elif status != "fixed" and e > 0:
                    v_text, e_text = value_error(value, e)
            ratio = r.ratios.get(name) if r else None
            bounds = ""
            if p.min is not None or p.max is not None:
                bounds = f"[{'' if p.min is None else f'{p.min:g}'}, " \
                         f"{'' if p.max is None else f'{p.max:g}'}]"
            setting = "vary" if p.vary else "fixed"
            data.append((name, {
                "name": name, "value": v_text, "err": e_text,
                "state": f"{setting} / {status}" if r and status not in ("varied", "fixed")
                else setting,
                "ratio": "" if ratio is None else f"{ratio:.3f}",
                "to": r.ratio_reference.get(name, "") if r and ratio is not None else "",
                "link": p.link or "", "bounds": bounds}))
        titles = {"name": "parameter", "value": "value", "err": "± error", "state": "status",
                  "ratio": "ratio", "to": "to", "link": "link", "bounds": "bounds"}

        def width(key: str) -> int:
            return max([len(titles[key])] + [len(d[key]) for _, d in data])

        columns = [Column(k, titles[k], width(k), required=k in ("name", "value", "err"),
                          shrink_to=12 if k == "name" else 0)
                   for k in ("name", "value", "err", "ratio", "state", "link", "bounds", "to")]
        shown = fit_columns(columns, max((self.size.width or app.size.width) - 2, 20))
        right = {"value", "err", "ratio"}
        with self.app.batch_update():
            table.clear(columns=True)
            for c in shown:
                table.add_column(c.title, key=c.key, width=c.width)
            for name, d in data:
                table.add_row(*[Text(clip(d[c.key], c.width),
                                     justify="right" if c.key in right else "left")
                                for c in shown], key=name)
            if table.row_count:
                table.move_cursor(row=min(keep, table.row_count - 1))


# ---------------------------------------------------------------------- correlations
class CorrView(View):
    """The correlation matrix: full parameter names on the rows, numbered columns; only
    columns that fit whole are shown (< and > move the window across the rest)."""

    TAB = "corr"
    CELL = 6  # "+0.98*"

    def compose(self) -> ComposeResult:
        yield Static("", id="corr-note", markup=False)
        yield DataTable(id="corr-table", cursor_type="cell")

    def focus_target(self):
        return self.query_one(DataTable)

    def draw(self) -> None:
        app = self.app
        table = self.query_one(DataTable)
        table.clear(columns=True)
        r = app.result
        if r is None:
            return
        names, cells = pictures.correlation_cells(
            r, app.ws.session.options.correlation_threshold)
        n = len(names)
        labels = [f"{i + 1:>2} {name}" for i, name in enumerate(names)]
        namew = max([len(x) for x in labels] + [9])
        avail = max((self.size.width or app.size.width) - 2, 30)
        k = max(1, min(n, (avail - namew - 2) // (self.CELL + 2)))
        app.corr_first = min(max(app.corr_first, 0), max(n - k, 0))
        first = app.corr_first
        cols = range(first, min(first + k, n))
        threshold = app.ws.session.options.correlation_threshold
        window = "" if k >= n else (f"columns {first + 1}–{cols[-1] + 1} of {n} "
                                    "(< > show the others); ")
        self.query_one("#corr-note", Static).update(Text(
            f"{window}* marks |ρ| ≥ {threshold:g}", style="dim"))
        # the row names are the full parameter names; the columns carry their numbers
        table.add_column(Text("parameter"), key="name", width=namew)
        for i in cols:
            table.add_column(Text(str(i + 1), justify="right"), key=f"c{i}", width=self.CELL)
        for i in range(n):
            table.add_row(Text(labels[i]), *[cells[i][j] for j in cols], key=f"r{i}")


# ---------------------------------------------------------------------- pictures
class ResidView(View):
    TAB = "resid"

    def compose(self) -> ComposeResult:
        yield FocusStatic("", id="resid-plot", markup=False)

    def focus_target(self):
        return self.query_one("#resid-plot")

    def draw(self) -> None:
        app = self.app
        plot = self.query_one("#resid-plot", Static)
        if app.result is None:
            plot.update(Text("no fit yet"))
            return
        w = max(app.size.width - 2, 40)
        h = max(app.size.height - 6, 12)
        plot.update(pictures.residual_plot(app.result, w, h, selected=app.selected_id,
                                           color=not app.no_color))


class DiagramView(View):
    TAB = "diagram"

    def compose(self) -> ComposeResult:
        yield FocusStatic("", id="diagram-plot", markup=False)

    def focus_target(self):
        return self.query_one("#diagram-plot")

    def draw(self) -> None:
        app = self.app
        plot = self.query_one("#diagram-plot", Static)
        r = app.result
        if r is None:
            plot.update(Text("no fit yet"))
            return
        configs = pictures.diagram_configurations(r)
        chosen = configs[app.diagram_choice - 1] if 0 < app.diagram_choice <= len(configs) \
            else None
        w = max(app.size.width - 2, 40)
        h = max(app.size.height - 6, 12)
        plot.update(pictures.level_diagram(r, w, h, configuration=chosen))


# ---------------------------------------------------------------------- lines
class LinesView(View):
    """Predicted E1 lines of the selected level, and its observed lines."""

    TAB = "lines"

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Static("", id="lines-note", markup=False)
            yield DataTable(id="lines-table", cursor_type="row")
            yield Static("", id="obs-lines-note", markup=False)
            yield DataTable(id="obs-lines-table", cursor_type="row")

    def focus_target(self):
        return self.query_one("#lines-table")

    def draw(self) -> None:
        self.draw_observed()
        self.draw_predicted()

    def draw_observed(self) -> None:
        from finefit.reports.levelopt import paren

        app = self.app
        note = self.query_one("#obs-lines-note", Static)
        table = self.query_one("#obs-lines-table", DataTable)
        table.clear()
        opt = app.level_opt
        if opt is None:
            note.update(Text("Observed lines: O optimises the levels from a line list "
                             "(the last list used is read again when this view opens).",
                             style="dim"))
            return
        lid = app.selected_id
        mine = opt.lines_of(lid) if lid else []
        n_bad = sum("outlier" in x.flags for x in mine)
        note.update(Text(f"{len(mine)} observed lines of {lid} in {opt.source or 'the list'}"
                         f" (chi2/dof {opt.reduced_chi2 or 0:.2f}; {n_bad} beyond 3 σ)",
                         style="bold" if n_bad else ""))
        rows = []
        for x in sorted(mine, key=lambda x: x.wavenumber):
            z = "" if x.normalised is None else f"{x.normalised:+.1f}"
            style = "bold" if "outlier" in x.flags else ""
            rows.append({"line": (str(x.source_line), ""),
                         "other": (x.upper if x.lower == lid else x.lower, ""),
                         "obs": (paren(x.wavenumber, x.uncertainty), ""),
                         "ritz": (paren(x.ritz, x.ritz_uncertainty), ""),
                         "or": (f"{x.residual:+.4f}", ""), "z": (z, style),
                         "flags": (", ".join(x.flags) or "classified", style)})
        fill_table(table, [("line", "line", True, 0, True), ("other", "other level", True, 0,
                                                                False),
                           ("obs", "σ obs", True, 0, True), ("or", "obs-Ritz", True, 0, True),
                           ("z", "/σ", True, 0, True), ("flags", "classification", True, 8,
                                                        False),
                           ("ritz", "σ Ritz", False, 0, True)], rows, self.available())

    def available(self) -> int:
        return max((self.size.width or self.app.size.width) - 2, 30)

    def draw_predicted(self) -> None:
        app = self.app
        note = self.query_one("#lines-note", Static)
        table = self.query_one("#lines-table", DataTable)
        table.clear()
        if app.ws is None:
            return
        s = app.ws.session
        if set(s.models) != {"even", "odd"}:
            note.update(Text("Predicted lines need configurations of both parities in the "
                             "session."))
            return
        if app.lines_cache is None or app.lines_cache[0] != app.ws.generation:
            note.update(Text("computing line strengths (Hartree-Fock dipole integrals the "
                             "first time)…"))
            app.start_lines()
            return
        lid = app.selected_id
        row = app.rows_by_id().get(lid) if lid else None
        if row is None:
            note.update(Text("select an attached level in the levels view"))
            return
        key = StateKey.of(row)
        mine = []
        for x in app.lines_cache[1]:
            for a, b in ((x.lower, x.upper), (x.upper, x.lower)):
                if StateKey.of(a) == key:
                    mine.append((x, b))
        note.update(Text(f"{len(mine)} predicted lines of {row.id} (J = {format_j(row.J)}, "
                         f"{row.parity}), strongest first; Ritz where both levels are "
                         "observed, else calculated (other level by label)."))

        def other_id(x, other):
            return x.upper_id if other is x.upper else x.lower_id

        rows = []
        for x, other in mine[:200]:
            rows.append({
                "air": ("" if x.air_wavelength is None else f"{x.air_wavelength:.3f}", ""),
                "vac": (f"{x.vacuum_wavelength:.3f}", ""), "sigma": (f"{x.wavenumber:.3f}", ""),
                "unc": ("" if x.wavenumber_uncertainty is None else
                        f"{x.wavenumber_uncertainty:.2g}", ""),
                "other": (other_id(x, other) or other.label, ""),
                "J": (format_j(other.J), ""), "gf": (f"{x.gf:.3g}", ""),
                "A": (f"{x.A:.3g}", "")})
        fill_table(table, [("air", "λ air (Å)", True, 0, True), ("sigma", "σ (cm-1)", True, 0,
                                                                  True),
                           ("other", "other level", True, 10, False), ("J", "J", True, 0, True),
                           ("gf", "gf", True, 0, True), ("A", "A (s-1)", True, 0, True),
                           ("unc", "±", False, 0, True), ("vac", "λ vac (Å)", False, 0, True)],
                   rows, self.available())


# ---------------------------------------------------------------------- diagnosis
class DiagView(View):
    """What to check next: suspected exchanges (s applies one), label mismatches,
    undetermined parameters, warnings of the fit."""

    TAB = "diag"

    def compose(self) -> ComposeResult:
        yield Static("", id="diag-note", markup=False)
        yield DataTable(id="diag-table", cursor_type="row")

    def focus_target(self):
        return self.query_one("#diag-table")

    def selected(self) -> str | None:
        return _table_cursor_key(self.query_one("#diag-table", DataTable))

    def draw(self) -> None:
        app = self.app
        table = self.query_one("#diag-table", DataTable)
        note = self.query_one("#diag-note", Static)
        keep = table.cursor_row if table.row_count else 0
        table.clear(columns=True)
        r = app.result
        if r is None:
            note.update(Text("no fit yet"))
            return
        width = max((self.size.width or app.size.width) - 16, 30)
        table.add_column("kind", key="kind", width=12)
        table.add_column("what to check", key="what", width=width)
        rows = diagnosis_rows(r)
        for key, kind, text in rows:
            table.add_row(Text(kind, style="bold"), Text(text), key=key,
                          height=None)  # long texts wrap in their cell
        n_swaps = len(r.suspected_swaps) + len(exchange_candidates(r))
        note.update(Text(
            (f"{n_swaps} suspected exchange(s): select one and press s to apply it "
             "(undoable). " if n_swaps else "") +
            ("Nothing to check." if not rows else f"{len(rows)} item(s)."),
            style="bold" if n_swaps else ""))
        if table.row_count:
            table.move_cursor(row=min(keep, table.row_count - 1))


def exchange_candidates(r) -> list[tuple[str, str, float]]:
    """Pairs of included levels of one J and parity, both beyond 3 sigma, where each
    observed energy lies near the other's calculated one (the classic pair of exchanged
    labels); with the larger |O-C| the exchange would leave. Not already proposed by the
    fit."""
    if not r.sigma:
        return []
    proposed = {frozenset((a, b)) for a, b, _ in r.suspected_swaps}
    bad = [row for row in r.levels if row.included and abs(row.residual) > 3 * r.sigma]
    out = []
    for i, a in enumerate(bad):
        for b in bad[i + 1:]:
            if (a.parity, a.J) != (b.parity, b.J) or frozenset((a.id, b.id)) in proposed:
                continue
            after = max(abs(a.energy_obs - b.energy_calc), abs(b.energy_obs - a.energy_calc))
            if after < min(abs(a.residual), abs(b.residual)) / 3:
                out.append((a.id, b.id, after))
    return out


def diagnosis_rows(r) -> list[tuple[str, str, str]]:
    """(row key, kind, text) of everything the diagnosis view lists."""
    rows = []
    for a, b, after in exchange_candidates(r):
        rows.append((f"pair:{a}:{b}", "exchange?", f"{a} and {b} (J = {format_j(r.level(a).J)}) "
                     f"are far off in opposite directions; exchanged, each would be within "
                     f"{after:.3g} cm-1 of its state: s exchanges them (states and labels)"))
    for i, (a, b, sg) in enumerate(r.suspected_swaps):
        after = "—" if sg is None else f"{sg:.4g}"
        what = (f"exchange {a} and {b}: sigma {after} after refitting, against a label"
                if b else f"move {a} to another state: sigma {after}, against its label")
        rows.append((f"swap:{i}", "exchange" if b else "move", what))
    for row in r.levels:
        if row.label_mismatch:
            rows.append((f"mis:{row.id}", "label", f"{row.id}: label {row.label} but attached "
                         f"state #{row.state_rank} is {row.calc_label}"))
    for name in r.undetermined:
        rows.append((f"und:{name}", "undetermined", f"{name}: the data do not determine it "
                     "(fix it or link it)"))
    if r.fitted and not r.converged:
        rows.append(("conv", "not converged", r.message))
    if not r.fixed_point:
        rows.append(("fixed", "attachment", "re-solving at the fitted values does not "
                     "reproduce E calc: the attachment is unstable"))
    for i, w in enumerate(r.warnings):
        rows.append((f"warn:{i}", "warning", w))
    for i, w in enumerate(r.next_steps):
        rows.append((f"next:{i}", "next", w))
    return rows


def diagnosis_count(r) -> int:
    """Items that need the analyst (exchanges, mismatches, undetermined, convergence)."""
    if r is None:
        return 0
    return (len(r.suspected_swaps) + len(exchange_candidates(r))
            + sum(row.label_mismatch for row in r.levels)
            + len(r.undetermined) + int(r.fitted and not r.converged) + int(not r.fixed_point))
