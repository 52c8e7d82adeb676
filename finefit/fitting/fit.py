"""The least-squares fit: lmfit drives, the engine supplies energies and an exact Jacobian.

Residuals are E_calc - E_obs of the included observed levels (times 1/u with
``weighting = "uncertainty"``). The Jacobian is the Hellmann-Feynman derivative
dE_i/dx_p = v_i^T C_p v_i carried through link groups by the chain rule
(x_member = ratio * x_leader, so dE/dx_leader = sum ratio * dE/dx_member). lmfit's
``least_squares`` method passes bounds to scipy natively, so the Jacobian needs
no bound transformation. Statistics and the covariance are computed here from
the final Jacobian so that undetermined parameters and parameters at a bound
are named rather than given meaningless errors.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from finefit.errors import FinefitError
from finefit.fitting.assignment import (
    BlockAttachment,
    attach_block,
    global_attach_block,
    label_compatibility,
)
from finefit.fitting.results import FitResult, LevelRow, PredictedLevel
from finefit.fitting.settings import FitOptions, ObservedLevel, ParameterSetting
from finefit.model.coupling import coupling_data
from finefit.model.hamiltonian import Model
from finefit.model.label_match import leading_row, resolve_label
from finefit.notation.jvalues import format_j
from finefit.threads import with_engine_threads


class FitCancelled(Exception):
    """Raised inside the fit when the caller asked it to stop."""


@dataclass(frozen=True)
class Variable:
    """One lmfit variable: a free parameter or the leader of a varying link group."""

    name: str  # the (leader) parameter's qualified name
    members: tuple[tuple[int, float], ...]  # (global parameter index, ratio)
    min: float
    max: float
    group: str | None


class FitProblem:
    """Observed levels, models (one per parity) and parameter settings, ready to fit."""

    def __init__(
        self,
        models: dict[str, Model],
        settings: dict[str, ParameterSetting],
        levels: list[ObservedLevel],
        options: FitOptions | None = None,
    ) -> None:
        self.models = models
        self.options = options or FitOptions()
        self.options.check()
        self.names: list[str] = []
        self.offset: dict[str, int] = {}
        for parity, model in models.items():
            self.offset[parity] = len(self.names)
            self.names.extend(model.parameters)
        known = set(self.names)
        for name in settings:
            if name not in known:
                raise FinefitError(
                    f"parameter {name!r} does not exist for the session's configurations", name
                )
        self.settings = {n: (settings.get(n) or ParameterSetting()).copy() for n in self.names}
        for n, s in self.settings.items():
            s.check(n)
        self.x_start = np.array([self.settings[n].value for n in self.names])
        self.variables = self._variables()
        self.chain = np.zeros((len(self.names), len(self.variables)))
        for j, var in enumerate(self.variables):
            for gi, ratio in var.members:
                self.chain[gi, j] = ratio
        self.fixed_part = self.x_start.copy()
        for var in self.variables:
            for gi, _ in var.members:
                self.fixed_part[gi] = 0.0
        self.levels = [lv.copy() for lv in levels]
        self._check_levels()
        self.included = [lv for lv in self.levels if lv.include]
        self.warnings: list[str] = []
        self._attach()

    # ------------------------------------------------------------------ set-up
    def _variables(self) -> list[Variable]:
        groups: dict[str, list[int]] = {}
        out: list[Variable] = []
        for i, n in enumerate(self.names):
            s = self.settings[n]
            if s.link:
                groups.setdefault(s.link, []).append(i)
            elif s.vary:
                out.append(
                    Variable(
                        n, ((i, 1.0),),
                        -np.inf if s.min is None else s.min,
                        np.inf if s.max is None else s.max,
                        None,
                    )
                )
        for g, members in groups.items():
            if not any(self.settings[self.names[i]].vary for i in members):
                continue
            lead = members[0]
            v0 = self.settings[self.names[lead]].value
            if v0 == 0.0:
                raise FinefitError(
                    f"link group {g!r}: its first parameter {self.names[lead]!r} is 0, so the "
                    "ratios are undefined; give it a non-zero value",
                    g,
                )
            ratios = tuple((i, self.settings[self.names[i]].value / v0) for i in members)
            lo, hi = -np.inf, np.inf
            for i, r in ratios:
                s = self.settings[self.names[i]]
                for bound in (s.min, s.max):
                    if bound is None or r == 0:
                        continue
                    b = bound / r
                    if (bound is s.min) == (r > 0):
                        lo = max(lo, b)
                    else:
                        hi = min(hi, b)
            out.append(Variable(self.names[lead], ratios, lo, hi, g))
        out.sort(key=lambda v: self.names.index(v.name))
        return out

    def _check_levels(self) -> None:
        seen: dict[str, ObservedLevel] = {}
        keys: dict[tuple, str] = {}
        for lv in self.levels:
            if lv.id in seen:
                raise FinefitError(f"level id {lv.id!r} is used twice", lv.id)
            seen[lv.id] = lv
            if lv.parity not in self.models:
                raise FinefitError(
                    f"level {lv.id}: no configuration of {lv.parity} parity in the session",
                    lv.id,
                )
            model = self.models[lv.parity]
            j2 = round(2 * lv.J)
            block = next((b for b in model.blocks if b.J2 == j2), None)
            if block is None:
                raise FinefitError(
                    f"level {lv.id}: J = {format_j(lv.J)} is impossible for "
                    f"{', '.join(model.configurations)}",
                    lv.id,
                )
            if lv.configuration is not None:
                if lv.configuration not in model.configurations:
                    raise FinefitError(
                        f"level {lv.id}: configuration {lv.configuration!r} is not among the "
                        f"session's {lv.parity} configurations ({', '.join(model.configurations)})",
                        lv.id,
                    )
                ci = model.configurations.index(lv.configuration)
                if not np.any(block.state_config == ci):
                    raise FinefitError(
                        f"level {lv.id}: J = {format_j(lv.J)} is impossible for "
                        f"configuration {lv.configuration}",
                        lv.id,
                    )
            key = (lv.parity, j2, round(lv.energy, 6))
            if key in keys:
                raise FinefitError(
                    f"levels {keys[key]} and {lv.id} are duplicates (same energy, J and parity)",
                    lv.id,
                )
            keys[key] = lv.id
            if lv.uncertainty is not None and not lv.uncertainty > 0:
                raise FinefitError(f"level {lv.id}: uncertainty must be positive", lv.id)

    def _attach(self) -> None:
        self.attachments: dict[tuple[str, int], BlockAttachment] = {}
        by_block: dict[tuple[str, int], list[ObservedLevel]] = {}
        for lv in self.levels:
            by_block.setdefault((lv.parity, round(2 * lv.J)), []).append(lv)
        for (parity, j2), lvs in by_block.items():
            model = self.models[parity]
            b = next(b for b in model.blocks if b.J2 == j2)
            x = self._model_x(self.x_start, parity)
            eig = model.eigen_block(b, x)
            w, V = eig.energies, eig.vectors
            idx, warns = attach_block(
                lvs, w, V, coupling_data(model), b.state_config, model.configurations,
                self.options.assignment,
            )
            self.warnings.extend(warns)
            self.attachments[(parity, j2)] = BlockAttachment(
                parity, j2, [lv.id for lv in lvs], idx, V.copy()
            )
        # residual order: included levels, in the order given; per block, which of its
        # attached levels enter the residuals and where
        row_of = {lv.id: i for i, lv in enumerate(self.included)}
        self._plan = {}
        self._cache: dict = {}
        for key, att in self.attachments.items():
            parity, j2 = key
            b = next(bb for bb in self.models[parity].blocks if bb.J2 == j2)
            sel = np.array([p for p, lid in enumerate(att.level_ids) if lid in row_of], dtype=int)
            rows = np.array([row_of[att.level_ids[p]] for p in sel], dtype=int)
            # only parameters that enter a variable need derivatives
            used = np.flatnonzero(self.chain[self.offset[parity] + b.param_index].any(axis=1))
            cols = self.offset[parity] + b.param_index[used]
            grid = (rows[:, None], cols[None, :])
            self._plan[key] = (b, rows, sel, grid, used)
        self.obs = np.array([lv.energy for lv in self.included])
        u = np.array(
            [lv.uncertainty if lv.uncertainty else self.options.default_uncertainty
             for lv in self.included]
        )
        self.u = u
        self.sqrt_w = 1.0 / u if self.options.weighting == "uncertainty" else np.ones_like(u)

    def _model_x(self, x_global: np.ndarray, parity: str) -> np.ndarray:
        off = self.offset[parity]
        return x_global[off : off + len(self.models[parity].parameters)]

    def x_of(self, v: np.ndarray) -> np.ndarray:
        return self.fixed_part + self.chain @ v

    @property
    def v_start(self) -> np.ndarray:
        return np.array([self.x_start[var.members[0][0]] for var in self.variables])

    # ------------------------------------------------------------------ evaluation
    def evaluate(self, v: np.ndarray, jacobian: bool, commit: bool):
        """Calculated energies of the included levels (and their d/d variables)."""
        x = self.x_of(v)
        key = x.tobytes()
        e = np.empty(len(self.included))
        J = np.zeros((len(self.included), len(self.names))) if jacobian else None
        follow = self.options.follow_eigenvectors
        xs = {parity: self._model_x(x, parity) for parity in self.models}
        for bkey, att in self.attachments.items():
            parity = bkey[0]
            b, rows, sel, grid, used = self._plan[bkey]
            hit = self._cache.get(bkey)
            if hit is not None and hit[0] == key and hit[3] is att.reference:
                eig, idx = hit[1], hit[2]
            else:
                eig = self.models[parity].eigen_block(b, xs[parity])
                idx = att.follow(eig.vectors) if follow else att.eigen_index
                self._cache[bkey] = (key, eig, idx, att.reference)
            if commit:
                att.commit(idx, eig.vectors)
            if not rows.size:
                continue
            states = idx[sel]
            e[rows] = eig.energies[states]
            if jacobian and used.size:
                J[grid] = eig.derivatives(states, used)
        if not jacobian:
            return e, None
        return e, J @ self.chain

    # ------------------------------------------------------------------ fit
    @with_engine_threads
    def fit(
        self,
        should_stop: Callable[[], bool] | None = None,
        progress: Callable[[int, float], None] | None = None,
        mirror: bool = True,
        exchanges: bool = True,
    ) -> FitResult:
        """Run the least-squares fit from the settings' values; never raises for a bad fit.

        Rounds: a fit that follows the eigenvectors, then one global re-attachment at the
        fitted values (labels, energies in units of the present sigma, the present
        state); repeated until the attachment is a fixed point or a round repeats an
        earlier attachment (then not converged, and the competing attachments are
        reported). Then exchanges of same-J levels and moves to free states are tried
        with a refit each (kept when chi-square drops; proposed, not applied, when they
        contradict a label), and spin-orbit parameters whose sign the data may leave
        open are refitted from the mirrored start.
        """
        if not self.variables:
            return self.report(message="nothing to vary: values as given")
        if not self.included:
            raise FinefitError("no observed level is included in the fit", "levels")
        self._should_stop = should_stop
        self._progress = progress
        self._total = 0
        self.suspected: list[tuple[str, str, float]] = []
        self.diagnoses: list[str] = []
        v, converged, message = self._fit_to_fixed_point(self.v_start)
        frozen = not self.options.follow_eigenvectors
        if converged and exchanges and not frozen:
            v, converged, message = self._exchange_search(v, converged, message)
        if converged and mirror and not frozen:
            v, converged, message = self._mirrored_starts(v, converged, message)
        return self._result(v, converged, message, self._total)

    def _minimize(self, v0: np.ndarray) -> tuple[np.ndarray, bool, str]:
        """One lmfit run from ``v0`` with the attachment followed along the eigenvectors."""
        import lmfit  # imported here: loading it costs about a second (scipy.stats, plotting)

        n_var = len(self.variables)
        params = lmfit.Parameters()
        for j, var in enumerate(self.variables):
            params.add(f"v{j}", value=float(np.clip(v0[j], var.min, var.max)),
                       min=var.min, max=var.max)
        state = {"calls": 0}
        should_stop, progress = self._should_stop, self._progress

        def values(p) -> np.ndarray:
            return np.array([p[f"v{j}"].value for j in range(n_var)])

        def residual(p, **_):
            e, _ = self.evaluate(values(p), jacobian=False, commit=False)
            return (e - self.obs) * self.sqrt_w

        def jac(p, **_):
            _, J = self.evaluate(values(p), jacobian=True, commit=True)
            return J * self.sqrt_w[:, None]

        def iter_cb(p, it, resid, *a, **k):
            state["calls"] = it
            if progress is not None:
                progress(it, float(np.sqrt(np.mean((resid / self.sqrt_w) ** 2))))
            if should_stop is not None and should_stop():
                state["cancelled"] = True
                return True
            return False

        mini = lmfit.Minimizer(residual, params, iter_cb=iter_cb)
        with np.errstate(all="ignore"):
            res = mini.minimize(
                method="least_squares",
                jac=jac,
                max_nfev=self.options.max_iterations,
                ftol=self.options.tolerance,
                xtol=self.options.tolerance,
                gtol=self.options.tolerance,
                x_scale="jac",
            )
        if state.get("cancelled"):
            raise FitCancelled("fit cancelled")
        v = values(res.params)
        self._total += int(res.nfev)
        # lmfit also 'aborts' when it runs out of evaluations: that is non-convergence
        aborted = bool(getattr(res, "aborted", False))
        converged = bool(res.success) and not aborted and res.nfev < self.options.max_iterations
        # the attachment at the returned point (the last Jacobian may be older)
        self.evaluate(v, jacobian=False, commit=True)
        message = "" if converged else (
            f"the optimiser did not converge ({getattr(res, 'message', '')})"
        )
        return v, converged, message

    # ------------------------------------------------------------ attachment rounds
    def _snapshot(self) -> dict:
        return {k: (att.eigen_index.copy(), att.reference) for k, att in self.attachments.items()}

    def _restore(self, snap: dict) -> None:
        for k, (idx, ref) in snap.items():
            att = self.attachments[k]
            if ref is None:
                att.eigen_index = idx.copy()
                att.reference = None
            else:
                att.commit(idx.copy(), ref)
        self._cache = {}

    def _signature(self) -> tuple:
        return tuple(
            (k, tuple(int(i) for i in att.eigen_index))
            for k, att in sorted(self.attachments.items())
        )

    def _chi2(self, v: np.ndarray) -> float:
        e, _ = self.evaluate(v, jacobian=False, commit=False)
        return float(np.sum(((e - self.obs) * self.sqrt_w) ** 2))

    def _scale(self, v: np.ndarray) -> float:
        """Energy scale of the global attachment: the present sigma, floored."""
        e, _ = self.evaluate(v, jacobian=False, commit=False)
        dof = max(len(self.included) - len(self.variables), 1)
        sigma = math.sqrt(float(np.sum((e - self.obs) ** 2)) / dof)
        floor = float(np.median(self.u)) if self.options.weighting == "uncertainty" else 1.0
        return max(sigma, floor, 1e-3)

    def _blocks_at(self, v: np.ndarray):
        """Per attached block at ``v``: key, its levels, model, J block and eigen-solution."""
        x = self.x_of(v)
        lv_by_id = {lv.id: lv for lv in self.levels}
        for key, att in self.attachments.items():
            parity, j2 = key
            model = self.models[parity]
            b = next(bb for bb in model.blocks if bb.J2 == j2)
            eig = model.eigen_block(b, self._model_x(x, parity))
            yield key, att, [lv_by_id[i] for i in att.level_ids], model, b, eig

    def _global_attachment(self, v: np.ndarray) -> dict:
        """The global assignment of every block at ``v`` (not applied)."""
        scale = self._scale(v)
        out = {}
        for key, att, lvs, model, b, eig in self._blocks_at(v):
            new = global_attach_block(
                lvs, eig.energies, eig.vectors, coupling_data(model), b.state_config,
                model.configurations, att.eigen_index, scale,
            )
            out[key] = (new, eig.vectors)
        return out

    def _apply(self, attachment: dict) -> list[str]:
        moved = []
        for key, (idx, V) in attachment.items():
            att = self.attachments[key]
            moved.extend(att.level_ids[k] for k in np.flatnonzero(idx != att.eigen_index))
            att.commit(idx, V)
        self._cache = {}
        return moved

    def _fit_to_fixed_point(self, v0: np.ndarray) -> tuple[np.ndarray, bool, str]:
        seen: dict[tuple, tuple[float, np.ndarray, dict]] = {}
        v = v0
        for _round in range(8):
            v, converged, message = self._minimize(v)
            if not converged:
                return v, False, message
            if not self.options.follow_eigenvectors:
                return v, True, "converged (attachment frozen)"
            sig = self._signature()
            contra = sum(
                len(self._contradicts_label(k, a.eigen_index, v))
                for k, a in self.attachments.items()
            )
            seen[sig] = (contra, self._sigma_of(v), v.copy(), self._snapshot())
            attachment = self._global_attachment(v)
            moved = self._apply(attachment)
            if not moved:
                return v, True, "converged"
            if self._signature() in seen:
                # the rounds oscillate between attachments: report them, keep the one that
                # contradicts the fewest labels (then the lowest sigma)
                competing = sorted(seen.values(), key=lambda t: (t[0], t[1]))
                _, _, best_v, best_snap = competing[0]
                self._restore(best_snap)
                self.diagnoses.append(
                    "re-attachment oscillates between "
                    f"{len(competing)} attachments: "
                    + "; ".join(
                        f"sigma {c[1]:.4g} cm-1 with {c[0]} level(s) off their label"
                        for c in competing
                    )
                    + f" (levels moving: {', '.join(sorted(set(moved)))}); kept the first; "
                    "pin the levels (attach) to decide"
                )
                return best_v, False, "the attachment does not settle (oscillates)"
            self.warnings.append(
                "after a fit, levels " + ", ".join(moved)
                + " were re-attached (labels and energies) and the fit repeated"
            )
        return v, False, "the attachment did not settle in 8 rounds"

    # ------------------------------------------------------------ exchanges, mirrors
    def _candidate_moves(self, v: np.ndarray, limit: int = 6) -> list[tuple[float, tuple, dict]]:
        """Exchanges of two levels of one J, and moves of one level to a free state, that
        lower chi-square at the present values (screened without a refit), best first."""
        x = self.x_of(v)
        row_of = {lv.id: i for i, lv in enumerate(self.included)}
        e_now, _ = self.evaluate(v, jacobian=False, commit=False)
        w2 = self.sqrt_w**2
        out = []
        for key, att in self.attachments.items():
            parity, j2 = key
            model = self.models[parity]
            b = next(bb for bb in model.blocks if bb.J2 == j2)
            energies = model.eigen_block(b, self._model_x(x, parity)).energies
            idx = att.eigen_index
            ids = att.level_ids
            rows = [row_of.get(i) for i in ids]

            def part(r, e):
                return 0.0 if r is None else w2[r] * (self.obs[r] - e) ** 2

            now = [part(rows[k], energies[idx[k]]) for k in range(len(ids))]
            for a in range(len(ids)):
                for c in range(a + 1, len(ids)):
                    if rows[a] is None and rows[c] is None:
                        continue
                    d = (part(rows[a], energies[idx[c]]) + part(rows[c], energies[idx[a]])
                         - now[a] - now[c])
                    if d < 0:
                        new = idx.copy()
                        new[a], new[c] = idx[c], idx[a]
                        out.append((d, (ids[a], ids[c]), {key: new}))
            # short cycles: three levels neighbouring in calculated energy pass their
            # states round (both directions)
            order = sorted(range(len(ids)), key=lambda k: energies[idx[k]])
            for t in range(len(order) - 2):
                a, b, c = order[t], order[t + 1], order[t + 2]
                if rows[a] is None and rows[b] is None and rows[c] is None:
                    continue
                for perm in ((b, c, a), (c, a, b)):
                    d = sum(part(rows[x], energies[idx[y]]) - now[x]
                            for x, y in zip((a, b, c), perm, strict=True))
                    if d < 0:
                        new = idx.copy()
                        new[a], new[b], new[c] = idx[perm[0]], idx[perm[1]], idx[perm[2]]
                        out.append((d, (ids[a], ids[b], ids[c]), {key: new}))
            free = sorted(set(range(energies.size)) - set(int(i) for i in idx))
            for a in range(len(ids)):
                if rows[a] is None:
                    continue
                for f in free:
                    d = part(rows[a], energies[f]) - now[a]
                    if d < 0:
                        new = idx.copy()
                        new[a] = f
                        out.append((d, (ids[a],), {key: new}))
        out.sort(key=lambda t: t[0])
        return out[:limit]

    def _contradicts_label(self, key, new_idx: np.ndarray, v: np.ndarray) -> list[str]:
        """Levels whose label the attachment ``new_idx`` of block ``key`` would contradict."""
        parity, j2 = key
        model = self.models[parity]
        b = next(bb for bb in model.blocks if bb.J2 == j2)
        eig = model.eigen_block(b, self._model_x(self.x_of(v), parity))
        lv_by_id = {lv.id: lv for lv in self.levels}
        lvs = [lv_by_id[i] for i in self.attachments[key].level_ids]
        _, ok = label_compatibility(lvs, eig.vectors, coupling_data(model))
        return [lv.id for k, lv in enumerate(lvs) if lv.label and not ok[k, new_idx[k]]]

    def _label_attachment(self, v: np.ndarray) -> dict:
        """Every block attached the way the start does it (labels first) at ``v``."""
        out = {}
        for key, att, lvs, model, b, eig in self._blocks_at(v):
            idx, _ = attach_block(lvs, eig.energies, eig.vectors, coupling_data(model),
                                  b.state_config, model.configurations, self.options.assignment)
            if not np.array_equal(idx, att.eigen_index):
                out[key] = idx
        return out

    def _exchange_search(self, v, converged, message):
        """Keep exchanges (and moves to free states) that lower chi-square after a refit.

        The first candidate re-attaches every level the way the start does (labels
        first, by overlap in their scheme): a local minimum reached with levels led away
        from their labels is left this way when the labelled attachment fits better.
        """
        chi2 = self._chi2(v)
        proposed: set[tuple] = set()
        by_label = self._label_attachment(v)
        if by_label:
            base = self._snapshot()
            for key, idx in by_label.items():
                att = self.attachments[key]
                att.commit(idx, att.reference)
            self._cache = {}
            try:
                v_new, conv_new, _ = self._minimize(v)
                chi2_new = self._chi2(v_new)
            except FinefitError:
                conv_new, chi2_new = False, np.inf
            if conv_new and chi2_new < chi2 * (1 - 1e-6) - 1e-12:
                v_settled, conv_settled, msg_settled = self._fit_to_fixed_point(v_new)
                if not conv_settled:
                    converged, message = False, msg_settled
                self.warnings.append(
                    "re-attached the levels by their labels after a local minimum: "
                    f"chi-square {chi2:.6g} -> {self._chi2(v_settled):.6g}"
                )
                v, chi2 = v_settled, self._chi2(v_settled)
            else:
                self._restore(base)
        for _pass in range(6):
            improved = False
            for _d, who, change in self._candidate_moves(v):
                if who in proposed:
                    continue
                (key, new_idx), = change.items()
                base = self._snapshot()
                att = self.attachments[key]
                att.commit(new_idx, att.reference)
                self._cache = {}
                try:
                    # the trial attachment is held (followed along the eigenvectors only)
                    v_new, conv_new, msg_new = self._minimize(v)
                except FinefitError:
                    self._restore(base)
                    continue
                chi2_new = self._chi2(v_new)
                if conv_new and chi2_new < chi2 * (1 - 1e-6) - 1e-12:
                    bad = [
                        lid for k2, a2 in self.attachments.items()
                        for lid in self._contradicts_label(k2, a2.eigen_index, v_new)
                    ]
                    if bad:
                        sigma_after = self._sigma_of(v_new)
                        self._restore(base)
                        if len(who) == 2:
                            self.suspected.append((*who, sigma_after))
                        elif len(who) == 1:
                            self.suspected.append((who[0], "", sigma_after))
                        else:  # a cycle: proposed as the exchanges it is made of
                            self.suspected.append((who[0], who[1], sigma_after))
                            self.suspected.append((who[1], who[2], sigma_after))
                        proposed.add(who)
                        continue
                    self.warnings.append(
                        ("exchanged the states of levels " + " and ".join(who))
                        if len(who) == 2
                        else f"moved level {who[0]} to another state" if len(who) == 1
                        else "passed the states of levels " + ", ".join(who) + " round"
                    )
                    self.warnings[-1] += (
                        f": chi-square {chi2:.6g} -> {chi2_new:.6g} after a refit"
                    )
                    v_settled, conv_settled, msg_settled = self._fit_to_fixed_point(v_new)
                    if not conv_settled:
                        converged, message = False, msg_settled
                    v, chi2 = v_settled, self._chi2(v_settled)
                    improved = True
                    break
                self._restore(base)
                proposed.add(who)
            if not improved:
                break
        self.evaluate(v, jacobian=False, commit=True)
        return v, converged, message

    def _mirrored_starts(self, v, converged, message):
        """Refit from the mirrored sign of spin-orbit parameters the data may leave open.

        A zeta that came out negative, or whose error is large against its value, is
        flipped and the fit repeated; a lower minimum is kept (and said), a different one
        of similar chi-square is reported as a second minimum.
        """
        names = [var.name for var in self.variables]
        kinds = {sp.name: sp.kind for m in self.models.values() for sp in m.parameter_specs}
        try:
            e, J = self.evaluate(v, jacobian=True, commit=False)
            Jw = J * self.sqrt_w[:, None]
            cov = np.linalg.pinv(Jw.T @ Jw)
            dof = max(len(self.included) - len(self.variables), 1)
            cov *= float(np.sum(((e - self.obs) * self.sqrt_w) ** 2)) / dof
            err = np.sqrt(np.clip(np.diag(cov), 0, None))
        except np.linalg.LinAlgError:
            return v, converged, message
        chi2 = self._chi2(v)
        sigma_here = self._sigma_of(v)
        for j, name in enumerate(names):
            if kinds.get(name) != "zeta":
                continue
            if not (v[j] < 0 or err[j] > 0.3 * abs(v[j])):
                continue
            start = v.copy()
            start[j] = -start[j] if start[j] != 0 else err[j]
            base = self._snapshot()
            x_save = self.x_start
            try:
                self._attach_at(start)
                v2, conv2, _ = self._fit_to_fixed_point(start)
            except FinefitError:
                self._restore(base)
                continue
            finally:
                self.x_start = x_save
            chi2_2 = self._chi2(v2)
            sigma_2 = self._sigma_of(v2)
            if conv2 and chi2_2 < chi2 * (1 - 1e-6) - 1e-12:
                self.diagnoses.append(
                    f"{name}: the start with the opposite sign reached a lower minimum "
                    f"({sigma_here:.4g} -> {sigma_2:.4g} cm-1), kept"
                )
                v, chi2, sigma_here = v2, chi2_2, sigma_2
                continue
            if conv2 and abs(v2[j] - v[j]) > 2 * max(err[j], 1e-9) and np.sign(v2[j]) != np.sign(
                v[j]
            ):
                self.diagnoses.append(
                    f"{name}: a second minimum with the opposite sign ({v2[j]:.4g}) at sigma "
                    f"{sigma_2:.4g} cm-1 (this one: {v[j]:.4g} at {sigma_here:.4g}); the "
                    "data leave its sign open"
                )
            self._restore(base)
        self.evaluate(v, jacobian=False, commit=True)
        return v, converged, message

    def _attach_at(self, v: np.ndarray) -> None:
        """Initial attachment (labels, then energy order) at the values of ``v``."""
        x = self.x_of(v)
        self.x_start = x
        self._attach()

    def _sigma_of(self, v: np.ndarray) -> float:
        e, _ = self.evaluate(v, jacobian=False, commit=False)
        dof = max(len(self.included) - len(self.variables), 1)
        return math.sqrt(float(np.sum((e - self.obs) ** 2)) / dof)

    def report(self, message: str = "not fitted: values as given") -> FitResult:
        """Statistics and levels at the settings' values, without fitting (never converged)."""
        self.suspected = []
        self.diagnoses = []
        return self._result(self.v_start, False, message, 0, fitted=False)

    # ------------------------------------------------------------------ results
    def _result(
        self, v: np.ndarray, converged: bool, message: str, nfev: int, fitted: bool = True
    ) -> FitResult:
        e, J = self.evaluate(v, jacobian=True, commit=True)
        x = self.x_of(v)
        resid = self.obs - e
        n = len(self.included)
        n_free = len(self.variables)
        dof = n - n_free
        sigma = math.sqrt(float(resid @ resid) / dof) if dof > 0 else None
        chi2 = float(np.sum((resid / self.u) ** 2))
        red = chi2 / dof if dof > 0 else None
        warnings = list(self.warnings)
        status = {}
        for i, nme in enumerate(self.names):
            s = self.settings[nme]
            status[nme] = "linked" if (s.link and np.any(self.chain[i])) else (
                "varied" if np.any(self.chain[i]) else "fixed")
        errors_v, undetermined, at_bound, corr, note = self._covariance(v, J, resid, dof, warnings)
        self._corr_v = corr
        cov_v = self._cov_v
        errors = {nme: 0.0 for nme in self.names}
        for j, var in enumerate(self.variables):
            for gi, ratio in var.members:
                nm = self.names[gi]
                errors[nm] = float(abs(ratio) * errors_v[j])
                if j in undetermined:
                    status[nm] = "undetermined"
                elif j in at_bound:
                    status[nm] = "at bound"
        var_names = [var.name + (f" [{var.group}]" if var.group else "") for var in self.variables]
        strong = []
        thr = self.options.correlation_threshold
        for a in range(n_free):
            for b in range(a + 1, n_free):
                if abs(corr[a, b]) >= thr:
                    strong.append((var_names[a], var_names[b], float(corr[a, b])))
        values = {nme: float(x[i]) for i, nme in enumerate(self.names)}
        start = {nme: float(self.x_start[i]) for i, nme in enumerate(self.names)}
        ratios, ref = {}, {}
        kinds = {sp.name: sp.kind for m in self.models.values() for sp in m.parameter_specs}
        for nme in self.names:
            ab = self.settings[nme].ab_initio
            if kinds[nme] == "Eav":  # an energy origin: a ratio means nothing
                ratios[nme], ref[nme] = None, ""
            elif ab:
                ratios[nme], ref[nme] = values[nme] / ab, "ab initio"
            elif start[nme]:
                ratios[nme], ref[nme] = values[nme] / start[nme], "start"
            else:
                ratios[nme], ref[nme] = None, "start"
        undetermined_names = [self.variables[j].name for j in sorted(undetermined)]
        if undetermined_names:
            warnings.append(
                "the data do not determine: " + ", ".join(undetermined_names)
                + " (fix or link them)"
            )
        warnings.extend(getattr(self, "diagnoses", []))
        explicit = np.array([lv.uncertainty is not None for lv in self.included])
        if fitted and dof > 0 and explicit.sum() >= max(1, explicit.size // 2):
            z = resid[explicit] / self.u[explicit]
            ratio = math.sqrt(float(np.sum(z**2)) / max(int(explicit.sum()) - n_free, 1))
            if ratio > 3.0:
                warnings.append(
                    f"the residuals are {ratio:.3g} times the levels' stated uncertainties: "
                    "a wrong attachment, a missing interaction or a local minimum; try "
                    "several starts (--starts)"
                )
        warnings.extend(self._range_warnings(values, kinds, status))
        weak = self._weakly_determined(errors, values, status, undetermined_names)
        if weak:
            warnings.append(
                "poorly determined (error larger than the value, or |correlation| > 0.999 "
                "with another): " + ", ".join(weak) + " (fix or link them)"
            )
            undetermined_names = undetermined_names + weak
        rows, preds, sols = self._levels(x, cov_v)
        fixed_point = (
            self._is_fixed_point(v, rows)
            if fitted and self.options.follow_eigenvectors
            else True
        )
        if fitted and not fixed_point and converged:
            converged = False
            message = "the attachment is not a fixed point at the fitted values"
        if fitted and not converged:
            warnings.append("the fit did not converge: " + message)
        mismatched = [r.id for r in rows if r.label_mismatch]
        if mismatched:
            warnings.append(
                "leading component differs from the label for levels " + ", ".join(mismatched)
            )
        return FitResult(
            converged=converged, message=message, n_levels=n, n_free=n_free, sigma=sigma,
            chi2=chi2, reduced_chi2=red, iterations=nfev, values=values, errors=errors,
            status=status, start=start, ratios=ratios, ratio_reference=ref,
            correlation=(var_names, corr), strong_correlations=strong, levels=rows,
            predictions=preds, warnings=warnings, undetermined=undetermined_names,
            included_ids=[lv.id for lv in self.included], covariance_note=note, solutions=sols,
            suspected_swaps=list(getattr(self, "suspected", [])), fitted=fitted,
            fixed_point=fixed_point,
            next_steps=self._next_steps(rows, undetermined_names, fitted, converged),
        )

    # ------------------------------------------------------------------ diagnosis
    RATIO_RANGES = {  # fitted / Hartree-Fock, the trade's usual ranges (common practice)
        "F": (0.5, 1.2), "G": (0.5, 1.2), "R": (0.5, 1.2), "zeta": (0.7, 1.3),
    }

    def _range_warnings(self, values, kinds, status) -> list[str]:
        out = []
        for name, value in values.items():
            kind = kinds.get(name)
            if status.get(name) == "fixed":
                continue
            if kind == "zeta" and value < 0:
                out.append(f"{name} = {value:.4g} is negative: spin-orbit parameters are "
                           "positive (check the attachment or the sign of the start)")
                continue
            ab = self.settings[name].ab_initio
            lo_hi = self.RATIO_RANGES.get(kind)
            if lo_hi and ab:
                r = value / ab
                if not lo_hi[0] <= r <= lo_hi[1]:
                    out.append(
                        f"{name}: fitted / ab initio = {r:.3g}, outside the usual "
                        f"{lo_hi[0]}-{lo_hi[1]} (common practice; a warning, not an error)"
                    )
        return out

    def _weakly_determined(self, errors, values, status, known) -> list[str]:
        """Varied parameters with an error larger than their value, or with |correlation|
        above 0.999 with another (besides those already named undetermined)."""
        names = [var.name for var in self.variables]
        out = [
            nm for nm in names
            if nm not in known
            and status.get(nm) not in ("fixed", "at bound", "undetermined")
            and math.isfinite(errors.get(nm, 0.0))
            and errors.get(nm, 0.0) > max(abs(values[nm]), 0.0)
            and errors.get(nm, 0.0) > 0
        ]
        corr = getattr(self, "_corr_v", None)
        if corr is not None:
            a_idx, b_idx = np.nonzero(np.triu(np.abs(corr) > 0.999, k=1))
            for k in np.concatenate([a_idx, b_idx]):
                if names[k] not in out and names[k] not in known:
                    out.append(names[k])
        return out

    def _is_fixed_point(self, v: np.ndarray, rows) -> bool:
        """Re-solve at ``v``: the attached states give the reported E_calc, and a fresh
        global attachment keeps every level where it is."""
        calc = {r.id: r.energy_calc for r in rows}
        x = self.x_of(v)
        for key, att in self.attachments.items():
            parity, j2 = key
            model = self.models[parity]
            b = next(bb for bb in model.blocks if bb.J2 == j2)
            eig = model.eigen_block(b, self._model_x(x, parity))
            for k, lid in enumerate(att.level_ids):
                if abs(eig.energies[att.eigen_index[k]] - calc[lid]) > 1e-6 * max(
                    1.0, abs(calc[lid])
                ):
                    return False
        fresh = self._global_attachment(v)
        return all(
            np.array_equal(idx, self.attachments[k].eigen_index) for k, (idx, _) in fresh.items()
        )

    def _next_steps(self, rows, undetermined, fitted, converged) -> list[str]:
        out = []
        if not fitted:
            out.append("these are the values as given: run a fit to adjust them")
        mism = [r.id for r in rows if r.label_mismatch]
        if mism:
            out.append("labels that disagree with the attached state: " + ", ".join(mism)
                       + " (check the label, or attach the level by hand)")
        for a, b, sg in getattr(self, "suspected", []):
            if b:
                out.append(f"exchanging {a} and {b} gives sigma {sg:.4g} but contradicts a "
                           f"label: check both assignments")
            else:
                out.append(f"moving {a} to another state gives sigma {sg:.4g} but contradicts "
                           "its label")
        if undetermined:
            out.append("fix or link parameters the data do not determine: "
                       + ", ".join(undetermined))
        if fitted and not converged:
            out.append("the fit is not converged: do not use these values as a result")
        return out

    def _covariance(self, v, J, resid, dof, warnings):
        n_free = len(self.variables)
        errors = np.full(n_free, np.inf)
        corr = np.eye(n_free)
        self._cov_v = np.zeros((n_free, n_free))
        at_bound = set()
        for j, var in enumerate(self.variables):
            span = max(1.0, abs(v[j]))
            if (np.isfinite(var.min) and v[j] - var.min <= 1e-9 * span) or (
                np.isfinite(var.max) and var.max - v[j] <= 1e-9 * span
            ):
                at_bound.add(j)
        if n_free == 0:
            return errors, set(), at_bound, corr, "no free parameters"
        Jw = J * self.sqrt_w[:, None]
        active = [j for j in range(n_free) if j not in at_bound]
        undetermined: set[int] = set()
        norms = np.linalg.norm(Jw, axis=0)
        big = norms.max(initial=0.0)
        for j in active:
            if norms[j] <= 1e-12 * max(big, 1e-300):
                undetermined.add(j)
        det = [j for j in active if j not in undetermined]
        if dof <= 0:
            warnings.append(
                f"{len(self.included)} levels for {n_free} free parameters: no degrees of "
                "freedom, so no sigma and no standard errors"
            )
            return errors, undetermined, at_bound, corr, "no degrees of freedom"
        if det:
            A = Jw[:, det] / norms[det]
            U, s, Vt = np.linalg.svd(A, full_matrices=False)
            keep = s > 1e-9 * s[0]
            for k in np.flatnonzero(~keep):
                for jj in np.flatnonzero(np.abs(Vt[k]) > 0.3):
                    undetermined.add(det[jj])
            cov_s = (Vt[keep].T / s[keep] ** 2) @ Vt[keep]
            cov = cov_s / np.outer(norms[det], norms[det])
            if self.options.weighting == "none":
                scale = float(resid @ resid) / dof
                note = "covariance scaled by sigma^2 (unweighted fit)"
            elif self.options.scale_covariance:
                scale = float(np.sum((resid * self.sqrt_w) ** 2)) / dof
                note = "covariance scaled by the reduced chi-square"
            else:
                scale = 1.0
                note = "covariance from the given uncertainties (not scaled)"
            cov *= scale
            for a, ja in enumerate(det):
                for b, jb in enumerate(det):
                    self._cov_v[ja, jb] = cov[a, b]
            d = np.sqrt(np.clip(np.diag(cov), 0.0, None))
            for a, ja in enumerate(det):
                if ja not in undetermined:
                    errors[ja] = d[a]
            with np.errstate(invalid="ignore", divide="ignore"):
                c = cov / np.outer(d, d)
            for a, ja in enumerate(det):
                for b, jb in enumerate(det):
                    if ja in undetermined or jb in undetermined:
                        continue
                    corr[ja, jb] = c[a, b] if np.isfinite(c[a, b]) else 0.0
        else:
            note = "no determined parameter"
        for j in at_bound:
            warnings.append(f"{self.variables[j].name} is at a bound: no standard error")
        return errors, undetermined, at_bound, corr, note

    def _levels(self, x: np.ndarray, cov_v: np.ndarray):
        rows: list[LevelRow] = []
        preds: list[PredictedLevel] = []
        sols = {}
        lv_by_id = {lv.id: lv for lv in self.levels}
        for parity, model in self.models.items():
            sol = model.solve(self._model_x(x, parity))
            sols[parity] = sol
            coupling = coupling_data(model)
            by_pos = {(lev.block, lev.position): lev for lev in sol.levels}
            attached: dict[tuple[int, int], str] = {}
            for (p, j2), att in self.attachments.items():
                if p != parity:
                    continue
                for pos, lid in enumerate(att.level_ids):
                    attached[(j2, int(att.eigen_index[pos]))] = lid
            off = self.offset[parity]
            for lev in sol.levels:
                grad = np.zeros(len(self.names))
                grad[off : off + len(model.parameters)] = sol.gradient(lev)
                gv = grad @ self.chain
                unc = float(np.sqrt(max(gv @ cov_v @ gv, 0.0)))
                scheme = sol.best_scheme(lev)
                comps = tuple(
                    (c.label, c.fraction) for c in sol.composition(lev, scheme, top=3)
                )
                key = (lev.block, lev.position)
                if key in attached:
                    lid = attached[key]
                    obs = lv_by_id[lid]
                    mismatch = False
                    if obs.label:
                        target = resolve_label(coupling, obs.label, obs.J)
                        vec = sol.eigenvector(lev)
                        mismatch = leading_row(coupling[lev.block], target.scheme, vec) != (
                            target.row
                        )
                    rows.append(
                        LevelRow(
                            id=lid, J=lev.J, parity=parity, energy_obs=obs.energy,
                            uncertainty=obs.uncertainty, energy_calc=lev.energy,
                            residual=obs.energy - lev.energy, included=obs.include,
                            label=obs.label or "", calc_label=lev.label,
                            configuration=lev.configuration, purity=lev.purity,
                            purity_jj=sol.purity(lev, "jj"), purity_jk=sol.purity(lev, "JK"),
                            best_scheme=scheme, components=comps, g_calc=lev.g, g_obs=obs.g,
                            state_rank=lev.position + 1, calc_uncertainty=unc,
                            label_mismatch=mismatch,
                        )
                    )
                else:
                    preds.append(
                        PredictedLevel(
                            J=lev.J, parity=parity, energy=lev.energy, uncertainty=unc,
                            label=lev.label, configuration=lev.configuration,
                            purity=lev.purity, g=lev.g, state_rank=lev.position + 1,
                            components=comps,
                        )
                    )
            del by_pos
        order = {lv.id: i for i, lv in enumerate(self.levels)}
        rows.sort(key=lambda r: order[r.id])
        preds.sort(key=lambda p: (p.parity, p.energy))
        return rows, preds, sols
