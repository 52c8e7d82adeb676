"""The workspace's edit commands: each turns a key into one undoable edit of the session
through ``WorkspaceApp.apply_edit`` (a mixin of the app; which keys act where is decided
by the app's ``check_action`` from the command registry)."""

from __future__ import annotations

from rich.text import Text
from textual.widgets import DataTable, TabbedContent

from finefit.errors import FinefitError
from finefit.fitting.validation import parse_number
from finefit.model.statekey import StateKey
from finefit.notation.jvalues import format_j
from finefit.session import Session
from finefit.ui import views
from finefit.ui.screens import ChoiceScreen, FormScreen, PickScreen, TableScreen


class EditActions:
    """Levels, parameters, exchanges and parameter sets."""

    # ------------------------------------------------------------------ actions: levels
    def action_toggle_include(self) -> None:
        lid = self.selected_level_id()
        if lid is None:
            return
        lv = self.ws.session.level(lid)
        self.apply_edit(f"{'excluded' if lv.include else 'included'} {lid}",
                        lambda s: s.update_level(lid, include=not lv.include))

    def action_reattach(self) -> None:
        lid = self.selected_level_id()
        if lid is None or self.result is None:
            return
        lv = self.ws.session.level(lid)
        result = self.result
        sol = result.solutions[lv.parity]
        states = sorted((x for x in sol.levels if x.block == round(2 * lv.J)),
                        key=lambda x: x.position)
        owner = {StateKey.of(row): row.id for row in result.levels}
        mine = result.level(lid) if lid in self.rows_by_id() else None
        options = [Text("let the fit choose (by label, then energy order)")]
        highlight = 0
        for x in states:
            comps = sol.composition(x, "LS", top=2)
            who = owner.get(StateKey.of(x))
            t = Text(f"#{x.position + 1:<3}{x.energy:11.2f} {lv.energy - x.energy:+9.2f}  ")
            t.append("  ".join(f"{100 * c.fraction:.0f}% {c.label}" for c in comps))
            if who:
                t.append(f"  [{who}]", style="bold" if who == lid else "")
                if who == lid:
                    highlight = x.position + 1
            options.append(t)
        header = Text(f"E obs {lv.energy:.3f}   label {lv.label or '—'}\n"
                      f"#   E calc        O-C   leading LS components   [level there]",
                      style="bold")

        def chosen(index: int | None) -> None:
            if index is None:
                return
            if index == 0:
                self.apply_edit(f"{lid} attached by the fit again",
                                lambda s: s.attach(lid, None), select=lid)
                return
            other = owner.get(StateKey(lv.parity, round(2 * lv.J), index - 1))
            if other and other != lid and mine is not None:
                # the state belongs to another level: exchange the two (pins and labels),
                # or the other level would be sent to some far state
                self.apply_edit(f"exchanged {lid} and {other} (states and labels)",
                                lambda s: s.exchange(lid, other, result), select=lid)
                return
            state = states[index - 1]
            relabel = lv.label is not None and mine is not None and state.label != lv.label

            def change(s: Session) -> None:
                s.attach(lid, index)
                if relabel:
                    s.update_level(lid, label=state.label)

            note = f"; label now {state.label} (was {lv.label})" if relabel else ""
            self.apply_edit(f"attached {lid} to state #{index}{note}", change, select=lid)

        self.push_screen(
            PickScreen(f"Attach {lid} (J = {format_j(lv.J)}, {lv.parity}) to:", options,
                       highlight, header=header), chosen)

    def action_edit(self) -> None:
        if self.current_tab() == "levels":
            self._edit_level()
        elif self.current_tab() == "params":
            self._edit_parameter()

    def _edit_level(self) -> None:
        lid = self.selected_level_id()
        if lid is None:
            return
        lv = self.ws.session.level(lid)
        fields = [("energy", "energy (cm-1)", f"{lv.energy!r}"),
                  ("uncertainty", "uncertainty (empty: none)",
                   "" if lv.uncertainty is None else f"{lv.uncertainty!r}"),
                  ("label", "label (empty: none)", lv.label or "")]

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
                lid, energy=energy, uncertainty=unc, label=label), select=lid)

        self.push_screen(FormScreen(f"Edit level {lid}", fields), done)

    def _edit_parameter(self) -> None:
        name = self.selected_parameter()
        if name is None:
            return
        p = self.ws.session.parameters[name]
        fields = [("value", "value (cm-1)", f"{p.value!r}"),
                  ("min", "lower bound (empty: none)", "" if p.min is None else f"{p.min!r}"),
                  ("max", "upper bound (empty: none)", "" if p.max is None else f"{p.max!r}")]

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
        s = self.ws.session
        fields = [("id", "id", s.new_level_id()), ("energy", "energy (cm-1)", ""),
                  ("J", "J (e.g. 5/2)", ""), ("parity", "parity (even/odd)", next(iter(s.models))),
                  ("configuration", "configuration", ""), ("label", "label", ""),
                  ("uncertainty", "uncertainty (cm-1)", ""),
                  ("include", "in the fit now (y/n)", "n")]

        def done(values: dict | None) -> None:
            if values is None:
                return
            unc = values["uncertainty"].strip()
            try:
                unc_v = parse_number(unc, "uncertainty", positive=True) if unc else None
            except ValueError as exc:  # FinefitError names the field
                self.notify(str(exc), severity="error", title="not added")
                return
            lid = values["id"].strip() or None
            include = values["include"].strip().lower().startswith("y")
            new_id = lid or s.new_level_id()
            self.apply_edit(
                f"added {new_id}" + ("" if include else " (excluded: Space takes it in)"),
                lambda sess: sess.add_level(
                    energy=values["energy"], J=values["J"], parity=values["parity"].strip(),
                    configuration=values["configuration"].strip() or None,
                    label=values["label"].strip() or None, uncertainty=unc_v,
                    include=include, id=new_id), select=new_id)

        self.push_screen(FormScreen("Add an observed level", fields,
                                    note="Optional: configuration, label, uncertainty."), done)

    def action_delete_level(self) -> None:
        lid = self.selected_level_id()
        if lid is None:
            return

        def answer(a: str | None) -> None:
            if a == "y":
                self.apply_edit(f"deleted {lid}", lambda s: s.remove_level(lid))

        self.push_screen(ChoiceScreen(f"Delete level {lid}? (undo brings it back)",
                                      [("y", "delete"), ("n", "keep")]), answer)

    def action_first_row(self) -> None:
        self._table_of_view().move_cursor(row=0)

    def action_last_row(self) -> None:
        table = self._table_of_view()
        table.move_cursor(row=max(table.row_count - 1, 0))

    def _table_of_view(self) -> DataTable:
        return self.query_one(f"#{self.current_tab()}-view").query_one(DataTable)

    def action_detail_down(self) -> None:
        self.query_one("#detail").scroll_relative(y=5)

    def action_detail_up(self) -> None:
        self.query_one("#detail").scroll_relative(y=-5)

    def _move_point(self, step: int) -> None:
        if self.result is None:
            return
        rows = sorted(self.result.levels, key=lambda row: row.energy_obs)
        ids = [row.id for row in rows]
        i = ids.index(self.selected_id) if self.selected_id in ids else -step
        self.selected_id = ids[min(max(i + step, 0), len(ids) - 1)]
        self.query_one(views.LevelsView).select(self.selected_id)
        self.query_one(views.ResidView).redraw()

    def action_previous_point(self) -> None:
        self._move_point(-1)

    def action_next_point(self) -> None:
        self._move_point(1)

    def action_corr_columns(self, step: int) -> None:
        view = self.query_one(views.CorrView)
        shown = max(len(view.query_one(DataTable).columns) - 1, 1)
        self.corr_first += step * shown
        view.redraw()

    # ------------------------------------------------------------------ actions: parameters
    def action_toggle_vary(self) -> None:
        name = self.selected_parameter()
        if name is None:
            return
        vary = not self.ws.session.parameters[name].vary
        if not vary and self._fit_is_current() and name in self.result.values:
            value = self.result.values[name]
            start = self.ws.session.parameters[name].value
            self.apply_edit(f"fixed {name} at its fitted value {value:.6g} (start was "
                            f"{start:.6g})",
                            lambda s: s.set_parameter(name, value, vary=False))
            return
        self.apply_edit(f"{'varying' if vary else 'fixed'} {name}",
                        lambda s: s.set_parameter(name, vary=vary))

    def action_link(self) -> None:
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
            ("group", "group (empty: none)", p.link or "")],
            note="Parameters of one group vary together, keeping the ratios they have "
                 "when the fit starts."), done)

    # ------------------------------------------------------------------ actions: diagnosis
    def action_apply_swap(self) -> None:
        r = self.result
        if r is None:
            return
        key = self.query_one(views.DiagView).selected() or ""
        if not key.startswith(("swap:", "pair:")):
            pairs = views.exchange_candidates(r)
            key = f"pair:{pairs[0][0]}:{pairs[0][1]}" if pairs else (
                "swap:0" if r.suspected_swaps else "")
        if not key:
            self.notify("no suspected exchange in this fit")
            return
        if key.startswith("pair:"):
            _, a, b = key.split(":")
        else:
            a, b, _ = r.suspected_swaps[int(key.split(":")[1])]
        if not b:  # a move of one level: choose its state by hand
            self.select_level(a)
            self.query_one(TabbedContent).active = "levels"
            self.call_after_refresh(self.action_reattach)
            return
        self.apply_edit(f"exchanged {a} and {b} (states and labels)",
                        lambda s: s.exchange(a, b, r), select=a)


    # ------------------------------------------------------------------ parameter sets
    def action_keep_set(self) -> None:
        if self.result is None:
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
        if self.result is None:
            return
        result = self.result
        self.apply_edit("adopted the fitted values", lambda s: s.apply(result))

    def action_compare_sets(self) -> None:
        sets = self.ws.session.parameter_sets
        r = self.result
        if not sets or r is None:
            self.notify("no saved parameter sets yet (k keeps the current fit)")
            return
        options = [Text(f"{ps.name}   σ = {'—' if ps.sigma is None else f'{ps.sigma:.4g}'}"
                        f"   N = {ps.n_levels}   free = {ps.n_free}") for ps in sets]

        def chosen(i: int | None) -> None:
            if i is None:
                return
            ps = sets[i]
            rows = []
            for name in r.values:
                a = ps.values.get(name)
                b = r.values[name]
                ea, eb = ps.errors.get(name, 0.0), r.errors.get(name, 0.0)
                diff = None if a is None else b - a
                comb = (ea ** 2 + eb ** 2) ** 0.5 if all(
                    x == x and x != float("inf") for x in (ea, eb)) else 0.0
                rows.append([Text(name), Text("—" if a is None else f"{a:.3f}", justify="right"),
                             Text(f"{b:.3f}", justify="right"),
                             Text("—" if diff is None else f"{diff:+.3f}", justify="right"),
                             Text(f"{diff / comb:+.1f}" if diff is not None and comb > 0 else "",
                                  justify="right")])
            sig_a = "—" if ps.sigma is None else f"{ps.sigma:.4g}"
            sig_b = "—" if r.sigma is None else f"{r.sigma:.4g}"
            self.push_screen(TableScreen(
                f"{ps.name} (σ {sig_a}) against the current fit (σ {sig_b})",
                ["parameter", "set", "now", "change", "in errors"], rows,
                note="in errors: the change over both standard errors combined"))

        self.push_screen(PickScreen("Compare the current fit with:", options), chosen)

    def action_optimise_levels(self) -> None:
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
