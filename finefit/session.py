"""A term-analysis session: ion, configurations, parameters, observed levels, saved fits.

This is the API the command line, the terminal workspace and notebooks share.

>>> s = Session.new(["2p2"], Z=6)                           # doctest: +SKIP
>>> s.set_parameter("2p2: F2(2p)", 45000.0, vary=True)
>>> s.add_level(energy=43.4, J=2, parity="even", label="2p2 3P")
>>> r = s.fit(); r.sigma
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from dataclasses import replace
from datetime import UTC, datetime
from functools import lru_cache
from pathlib import Path
from typing import TYPE_CHECKING

from finefit.errors import FinefitError, quote
from finefit.fitting.settings import FitOptions, ObservedLevel, ParameterSetting
from finefit.fitting.validation import (
    MAX_MAGNITUDE,
    check_configurations,
    check_ion,
    check_levels,
    check_number,
    check_parameter,
    check_text,
    parse_number,
    validate_session,
)
from finefit.model.coupling import coupling_data
from finefit.model.estimates import default_link, typical_value
from finefit.model.hamiltonian import Model
from finefit.model.label_match import LabelTarget, resolve_label
from finefit.model.parameters import ParameterSpec
from finefit.model.statekey import StateKey
from finefit.notation.configuration import parse_configuration
from finefit.notation.jvalues import parse_j
from finefit.storage.atomic import atomic_write_text, read_text
from finefit.storage.level_sets import LevelSet
from finefit.storage.session_file import (
    Ion,
    ParameterSet,
    SessionData,
    dump_session,
    parse_session,
)
from finefit.threads import with_engine_threads

if TYPE_CHECKING:  # the fit's modules load with the first fit or check (start-up time)
    from finefit.fitting.fit import FitProblem
    from finefit.fitting.results import FitResult

# Kinds varied by default in a new session; CI integrals and effective corrections are
# commonly held fixed at scaled ab initio values until the data can carry them.
DEFAULT_VARY = {"Eav", "F", "G", "zeta"}
# In d and f shells the two-electron corrections alpha, beta (and gamma for f) are
# free in practically every published fit, so a new session varies them too; the
# three-electron T^i and the magnetic M^k, P^k start fixed (# common practice), the T^i
# at 0 because their published values refer to a normalisation finefit could not check
# (see finefit/angular/threebody.py).
DEFAULT_VARY_DF = {"alpha", "beta", "gamma"}


def default_setting(spec: ParameterSpec, config: str, fresh: bool) -> ParameterSetting:
    """Setting of a parameter that the session does not list yet.

    ``fresh`` (a new session): the vary flags above, typical values of the effective
    operators (:func:`finefit.model.estimates.typical_value`) and their usual link
    groups. Otherwise (a file written before the parameter existed): 0 and fixed for
    effective operators, so that an old session keeps its model.
    """
    if not fresh:
        return ParameterSetting(vary=spec.kind in DEFAULT_VARY)
    d_or_f = bool(spec.orbitals) and spec.orbitals[0][-1:] in ("d", "f")
    vary = spec.kind in DEFAULT_VARY or (
        spec.kind in DEFAULT_VARY_DF and d_or_f and len(spec.orbitals) == 1
    )
    return ParameterSetting(
        value=typical_value(spec.short), vary=vary, link=default_link(config, spec.short)
    )


def _number(value: object, what: str) -> float:
    """A number given as text (ASCII digits only) or as a number; finite, physical size."""
    if isinstance(value, str):
        return parse_number(value, what)
    try:
        return check_number(float(value), what)
    except (TypeError, ValueError, OverflowError):
        raise FinefitError(f"{what} must be a number, got {quote(value)}", what) from None


@lru_cache(maxsize=16)
def model_for(configurations: tuple[str, ...]) -> Model:
    """The (immutable) model of one interacting set, shared between sessions.

    Read from the persistent model cache (``finefit.storage.model_cache``) when an
    entry written by this engine exists and passes its checks, else built and stored.
    """
    from finefit.model.serial import model_from_arrays, model_to_arrays
    from finefit.storage import model_cache

    arrays = model_cache.load_model_arrays(configurations)
    if arrays is not None:
        try:
            return model_from_arrays(arrays)
        except (FinefitError, KeyError, ValueError, TypeError, IndexError):
            pass  # checksum-valid but unreadable (never expected): build anew
    model = Model(list(configurations))
    if model_cache.cache_dir() is not None:
        model_cache.save_model_arrays(configurations, model_to_arrays(model))
    return model


def group_by_parity(configurations: list[str]) -> dict[str, tuple[str, ...]]:
    """Interacting sets: the configurations of each parity, in the order given."""
    out: dict[str, list[str]] = {}
    for text in configurations:
        c = parse_configuration(text)
        out.setdefault(c.parity, []).append(str(c))
    return {p: tuple(v) for p, v in out.items()}


class Session:
    """Observed levels of one ion and the parametric model fitted to them."""

    @with_engine_threads
    def __init__(
        self, data: SessionData, path: str | Path | None = None, fresh: bool = False
    ) -> None:
        self.path = Path(path) if path else None
        self.ion = data.ion
        self.title = data.title
        self.note = data.note
        self.options = data.options
        self.parameter_sets: list[ParameterSet] = list(data.parameter_sets)
        self.level_sets: list[LevelSet] = list(data.level_sets)
        # the ion and the electron count of every configuration are checked before any
        # model is built (a configuration that cannot exist must not cost a build)
        check_ion(self.ion.Z, self.ion.charge, self.ion.ionization_limit, self.ion.name)
        self.configurations = check_configurations(list(data.configurations), self.ion.Z,
                                                   self.ion.charge)
        self._sets = group_by_parity(self.configurations)
        self.models = {p: model_for(cfgs) for p, cfgs in self._sets.items()}
        self.parameters: dict[str, ParameterSetting] = {}
        known = [n for m in self.models.values() for n in m.parameters]
        for name in data.parameters:
            if name not in known:
                raise FinefitError(
                    f"parameter {quote(name)} does not exist for configurations "
                    f"{', '.join(self.configurations)}",
                    name,
                )
        for model in self.models.values():
            for spec in model.parameter_specs:
                self.parameters[spec.name] = data.parameters.get(spec.name) or default_setting(
                    spec, model.configurations[spec.configs[0]], fresh
                )
        self.levels: list[ObservedLevel] = []
        for lv in data.levels:
            # labels are read strictly when they are used (attach, fit) and when edited, so
            # that a file with a label this version reads differently stays loadable
            self._check_level(lv, labels=False)
            self.levels.append(lv)
        self.last_result: FitResult | None = None
        self.source_text: str | None = None  # the file's text as read or last written
        self.warnings: list[str] = self.validate()

    # ------------------------------------------------------------------ creation
    @classmethod
    def new(
        cls,
        configurations: list[str] | str,
        Z: int,
        charge: int = 0,
        ionization_limit: float | None = None,
        name: str = "",
        title: str = "",
    ) -> Session:
        if isinstance(configurations, str):
            configurations = [configurations]
        check_ion(Z, charge, ionization_limit, name)
        check_text(title or "", "title", max_len=1000, lines=True)
        data = SessionData(
            ion=Ion(Z, charge, ionization_limit, name), configurations=list(configurations),
            parameters={}, levels=[], options=FitOptions(), title=title,
        )
        return cls(data, fresh=True)

    @classmethod
    def load(cls, path: str | Path) -> Session:
        """Read and validate a session file (the same validation every save runs)."""
        p = Path(path)
        text = read_text(p, "session file")
        data = parse_session(text, source=str(p))
        try:
            s = cls(data, path=p)
        except FinefitError as exc:
            raise FinefitError(f"{quote(str(p))}: {exc}", exc.item) from None
        s.source_text = text
        return s

    def validate(self) -> list[str]:
        """Check the whole session as the reader will (no eigen-solve); returns warnings.

        Raises FinefitError naming the first offending item.
        """
        return validate_session(self.ion, self.configurations, self.models, self.parameters,
                                self.levels, self.options, self.parameter_sets, self.title,
                                self.note)

    # ------------------------------------------------------------------ persistence
    def data(self) -> SessionData:
        return SessionData(
            ion=self.ion, configurations=list(self.configurations),
            parameters=dict(self.parameters), levels=list(self.levels), options=self.options,
            parameter_sets=list(self.parameter_sets), title=self.title, note=self.note,
            level_sets=list(self.level_sets),
        )

    def to_toml(self) -> str:
        return dump_session(self.data())

    def save(self, path: str | Path | None = None) -> Path:
        """Save atomically; the previous file is kept as ``<name>.bak``.

        The session is validated first and the text written is read back as the reader
        will read it, so a save never leaves a file finefit refuses to open.
        """
        target = Path(path) if path else self.path
        if target is None:
            raise FinefitError("no file name given for saving the session", "path")
        self.warnings = self.validate()
        text = self.to_toml()
        Session(parse_session(text, source=str(target)))  # what the reader will see
        atomic_write_text(target, text)
        self.path = target
        self.source_text = text
        return target

    def copy(self) -> Session:
        return Session(parse_session(self.to_toml()), path=self.path)

    # ------------------------------------------------------------------ parameters
    def set_parameter(
        self,
        name: str,
        value: float | None = None,
        vary: bool | None = None,
        *,
        min: float | None | str = "keep",
        max: float | None | str = "keep",
        link: str | None = "keep",
        ab_initio: float | None | str = "keep",
    ) -> ParameterSetting:
        """Change a parameter; arguments left out keep their current setting."""
        if name not in self.parameters:
            raise FinefitError(
                f"parameter {quote(name)} does not exist; known: {', '.join(self.parameters)}",
                name)
        s = self.parameters[name].copy()
        if value is not None:
            s.value = _number(value, f"value of {quote(name)}")
        if vary is not None:
            s.vary = bool(vary)
        if min != "keep":
            s.min = None if min is None else float(min)
        if max != "keep":
            s.max = None if max is None else float(max)
        if link != "keep":
            s.link = link or None
        if ab_initio != "keep":
            s.ab_initio = None if ab_initio is None else float(ab_initio)
        check_parameter(name, s)
        self.parameters[name] = s
        return s

    def values(self) -> dict[str, float]:
        return {n: s.value for n, s in self.parameters.items()}

    # ------------------------------------------------------------------ levels
    def _check_level(self, lv: ObservedLevel, labels: bool = True) -> None:
        if lv.parity not in self.models:
            raise FinefitError(
                f"level {lv.id}: the session has no {lv.parity} configuration", lv.id
            )
        model = self.models[lv.parity]
        if round(2 * lv.J) not in {b.J2 for b in model.blocks}:
            raise FinefitError(
                f"level {lv.id}: J = {lv.J:g} is impossible for {', '.join(model.configurations)}",
                lv.id,
            )
        if lv.configuration is not None:
            c = str(parse_configuration(lv.configuration))
            if c not in model.configurations:
                raise FinefitError(
                    f"level {lv.id}: configuration {quote(lv.configuration)} is not in the session",
                    lv.id,
                )
            lv.configuration = c
        check_levels([lv], self.models, self.configurations)
        if labels and lv.label:
            lv.label = self.resolve_label(lv.label, lv.J, lv.parity, lv.id).text
        if labels and isinstance(lv.state, str):
            lv.state = self.resolve_label(lv.state, lv.J, lv.parity, lv.id).text

    def resolve_label(
        self, label: str, J: float | str, parity: str, level_id: str | None = None
    ) -> LabelTarget:
        """The basis state a label names (strict: see :func:`finefit.model.label_match`)."""
        if parity not in self.models:
            raise FinefitError(f"the session has no {parity} configuration", parity)
        model = self.models[parity]
        try:
            return resolve_label(coupling_data(model), label, parse_j(J))
        except FinefitError as exc:
            if level_id is None:
                raise
            raise FinefitError(f"level {level_id}: {exc}", level_id) from None

    def import_levels(self, path: str | Path, include_derived: bool = False):
        """Import a published level list in the compilations' layout (see DEVELOPERS.md).

        Only levels of the session's configurations are taken; every other row is
        listed in ``report.skipped`` with its line and reason. Returns the
        :class:`~finefit.level_import.ImportReport`; the session is changed in place.
        """
        from finefit.level_import import import_compilation

        return import_compilation(self, path, include_derived=include_derived)

    def new_level_id(self) -> str:
        """The next free level id (``L001``, ``L002``, ...)."""
        return self._new_id()

    def _new_id(self) -> str:
        used = {lv.id for lv in self.levels}
        k = len(self.levels) + 1
        while f"L{k:03d}" in used:
            k += 1
        return f"L{k:03d}"

    def add_level(
        self,
        energy: float,
        J: float | str,
        parity: str,
        configuration: str | None = None,
        label: str | None = None,
        uncertainty: float | None = None,
        include: bool = True,
        g: float | None = None,
        note: str = "",
        id: str | None = None,
        state: int | str | None = None,
    ) -> str:
        """Add an observed level; returns its id."""
        if parity not in ("even", "odd"):
            raise FinefitError(f"parity must be 'even' or 'odd', got {quote(parity)}", "parity")
        e = _number(energy, "energy")
        if uncertainty is not None:
            uncertainty = check_number(uncertainty, "uncertainty", positive=True)
        lid = id or self._new_id()
        if any(lv.id == lid for lv in self.levels):
            raise FinefitError(f"level id {quote(lid)} is already used", lid)
        lv = ObservedLevel(
            id=lid, energy=e, J=parse_j(J), parity=parity, uncertainty=uncertainty,
            configuration=configuration, label=label, include=include, g=g, note=note,
            state=state,
        )
        self._check_level(lv)
        check_levels(self.levels + [lv], self.models, self.configurations)
        self.levels.append(lv)
        return lid

    def level(self, level_id: str) -> ObservedLevel:
        for lv in self.levels:
            if lv.id == level_id:
                return lv
        raise FinefitError(f"no level with id {quote(level_id)}", level_id)

    def update_level(self, level_id: str, **changes) -> ObservedLevel:
        """Change fields of an observed level (validated as a whole)."""
        lv = self.level(level_id)
        allowed = {"energy", "J", "parity", "configuration", "label", "uncertainty", "include",
                   "g", "note", "state"}
        bad = set(changes) - allowed
        if bad:
            raise FinefitError(f"unknown level field {quote(sorted(bad)[0])}", sorted(bad)[0])
        if "J" in changes:
            changes["J"] = parse_j(changes["J"])
        if "energy" in changes:
            changes["energy"] = _number(changes["energy"], "energy")
        if changes.get("uncertainty") is not None:
            changes["uncertainty"] = check_number(changes["uncertainty"],
                                                  f"level {quote(level_id)}: uncertainty",
                                                  positive=True)
        if changes.get("g") is not None:
            changes["g"] = check_number(changes["g"], f"level {quote(level_id)}: g")
        new = replace(lv, **changes)
        self._check_level(new)
        i = self.levels.index(lv)
        check_levels(self.levels[:i] + [new] + self.levels[i + 1:], self.models,
                     self.configurations)
        self.levels[i] = new
        return new

    def remove_level(self, level_id: str) -> ObservedLevel:
        lv = self.level(level_id)
        self.levels.remove(lv)
        return lv

    def attach(self, level_id: str, state: int | str | None) -> ObservedLevel:
        """Pin an observed level to a computed eigenstate (rank within its J, or an LS label)."""
        return self.update_level(level_id, state=state)

    # ------------------------------------------------------------------ fitting
    @with_engine_threads
    def problem(self) -> FitProblem:
        from finefit.fitting.fit import FitProblem

        return FitProblem(self.models, self.parameters, self.levels, self.options)

    @with_engine_threads
    def fit(
        self,
        should_stop: Callable[[], bool] | None = None,
        progress: Callable[[int, float], None] | None = None,
        starts: int = 1,
        seed: int = 0,
    ) -> FitResult:
        """Fit with the session's options; the session's values are not changed.

        ``starts`` > 1 refits from further starting points: the ab initio values (F, G,
        R^k at 0.85 of Hartree-Fock, common practice; zeta as computed) where the
        session has them, then random perturbations of every varied value by up to
        ±30 % (reproducible with ``seed``). The best result is kept (converged first,
        then fewest label mismatches, then lowest chi-square) and says how many
        starts reached it.
        """
        result = self.problem().fit(should_stop=should_stop, progress=progress)
        if starts > 1:
            result = self._best_of_starts(result, starts, seed, should_stop)
        self.last_result = result
        return result

    def _start_settings(self, k: int, rng) -> dict[str, ParameterSetting] | None:
        settings = {n: p.copy() for n, p in self.parameters.items()}
        kinds = {sp.name: sp.kind for m in self.models.values() for sp in m.parameter_specs}
        if k == 1:
            if not any(p.ab_initio for p in settings.values()):
                return None
            for n, p in settings.items():
                if p.ab_initio and kinds.get(n) != "Eav" and (p.vary or p.link):
                    scale = 1.0 if kinds.get(n) == "zeta" else 0.85
                    p.value = p.ab_initio * scale
        else:
            for n, p in settings.items():
                if (p.vary or p.link) and kinds.get(n) != "Eav" and p.value:
                    p.value *= float(rng.uniform(0.7, 1.3))
        for p in settings.values():
            if p.min is not None:
                p.value = max(p.value, p.min)
            if p.max is not None:
                p.value = min(p.value, p.max)
        return settings

    def _best_of_starts(self, first: FitResult, starts: int, seed: int, should_stop):
        import dataclasses

        import numpy as np

        from finefit.fitting.fit import FitProblem

        rng = np.random.default_rng(seed)
        results = [first]
        for k in range(1, starts):
            settings = self._start_settings(k, rng)
            if settings is None:
                settings = self._start_settings(2, rng)
            try:
                prob = FitProblem(self.models, settings, self.levels, self.options)
                results.append(prob.fit(should_stop=should_stop))
            except FinefitError:
                continue

        def rank(r: FitResult):
            return (not r.converged, sum(row.label_mismatch for row in r.levels), r.chi2)

        best = min(results, key=rank)
        tol = 1e-3 * best.chi2 + 1e-9
        reached = sum(
            1 for r in results if r.converged and abs(r.chi2 - best.chi2) <= tol
        )
        note = (
            f"{reached} of {len(results)} starts reached this minimum"
            + (f" (sigma {best.sigma:.4g} cm-1)" if best.sigma is not None else "")
        )
        others = sorted(
            {round(r.sigma, 3) for r in results if r.converged and r.sigma is not None
             and abs(r.chi2 - best.chi2) > tol}
        )
        if others:
            note += "; other minima at sigma " + ", ".join(f"{x:g}" for x in others[:5])
        return dataclasses.replace(
            best, warnings=[*best.warnings, note], starts=(reached, len(results))
        )

    @with_engine_threads
    def report(self) -> FitResult:
        """Observed vs calculated at the current values, without fitting."""
        result = self.problem().report()
        self.last_result = result
        return result

    def apply(self, result: FitResult) -> None:
        """Take the fitted values as the session's current values."""
        for name, v in result.values.items():
            if name in self.parameters:
                self.parameters[name].value = v

    @with_engine_threads
    def solve(self, parity: str | None = None):
        """Computed levels at the current values (one Solution per parity)."""
        out = {}
        for p, model in self.models.items():
            if parity is None or p == parity:
                out[p] = model.solve({n: self.parameters[n].value for n in model.parameters})
        return out

    def fill_ab_initio(
        self,
        scales: dict[str, float] | None = None,
        set_values: bool = True,
        relativistic: bool = False,
        progress: Callable[[str], None] | None = None,
        zeta_method: str = "blume-watson",
    ):
        """Store Hartree-Fock values as ``ab_initio`` and (optionally) scaled starting values.

        ``zeta_method``: ``"blume-watson"`` (default) or ``"central-field"``."""
        from finefit.fitting.starting import ab_initio_values

        lowest = {}
        for lv in self.levels:
            lowest[lv.parity] = min(lowest.get(lv.parity, lv.energy), lv.energy)
        res = ab_initio_values(self.models, self.ion.Z, self.ion.charge, scales, lowest,
                               relativistic, progress, zeta_method)
        for name, value in res.ab_initio.items():
            self.parameters[name].ab_initio = value
            if set_values:
                self.parameters[name].value = res.start[name]
        return res

    @with_engine_threads
    def predict_lines(
        self,
        radial: dict[tuple[str, str], float] | None = None,
        min_strength: float = 0.0,
        air_range: tuple[float, float] = (2000.0, 20000.0),
        observed: bool = True,
        optimised=None,
    ):
        """E1 lines between the session's even and odd levels at the current values.

        Between two observed levels (attached to the computed states) the wavenumber is
        the Ritz value of the observed energies (``line.source == "Ritz"``), with the
        uncertainty from the covariance of ``optimised`` (a level optimisation) where
        it holds both levels, else the two level uncertainties (or the fit's default
        uncertainty) in quadrature. Where a level is unobserved its calculated energy is
        used, with the uncertainty from the covariance of a fit at the current set-up.
        ``observed=False`` uses calculated energies throughout. Radial dipole integrals
        (bohr) not given in ``radial`` come from Hartree-Fock runs. Returns (lines,
        radial integrals used).
        """
        from finefit.lines.radial_join import ab_initio_dipoles
        from finefit.lines.transitions import DipoleModel, predict_lines

        if set(self.models) != {"even", "odd"}:
            raise FinefitError(
                "predicting lines needs configurations of both parities in the session",
                "configurations",
            )
        dip = DipoleModel(self.models["even"], self.models["odd"])
        given = dict(radial or {})
        missing = [p for p in dip.pair_names if p not in given and p[::-1] not in given]
        if missing:
            given.update(ab_initio_dipoles(self.models, missing, self.ion.Z, self.ion.charge))
        # calculated energies at the current values; their uncertainties are propagated
        # from the covariance of the fit set-up (Hellmann-Feynman gradients)
        result = self.report()
        sols = result.solutions
        unc = {}
        for row in result.levels:
            unc[StateKey.of(row)] = row.calc_uncertainty
        for p in result.predictions:
            unc[StateKey.of(p)] = p.uncertainty

        def level_uncertainty(level):
            return unc.get(StateKey.of(level))

        obs = {}
        if observed:
            for row in result.levels:
                e, u = row.energy_obs, row.uncertainty or self.options.default_uncertainty
                if optimised is not None and row.id in optimised.levels:
                    e, u = optimised.levels[row.id]
                obs[StateKey.of(row)] = (row.id, e, u)

        def observed_level(level):
            return obs.get(StateKey.of(level))

        def ritz_uncertainty(lower_id: str, upper_id: str):
            if optimised is None or lower_id not in optimised.levels \
                    or upper_id not in optimised.levels:
                return None
            return optimised.ritz(lower_id, upper_id)[1]

        lines = predict_lines(dip, sols["even"], sols["odd"], given, min_strength,
                              level_uncertainty, air_range, observed_level, ritz_uncertainty)
        return lines, given

    def search_level(
        self,
        wavenumbers,
        J: float | str,
        parity: str,
        energy: float,
        tolerance: float = 0.05,
        window: float = 500.0,
        step: float = 0.01,
        weighted: bool = True,
        radial: dict[tuple[str, str], float] | None = None,
        top: int = 10,
    ):
        """Candidate positions of a missing level among the lines no known level explains.

        With ``weighted`` (and both parities in the session) each explained line counts
        with the predicted gf of that transition from the model state of this J and parity
        nearest to ``energy``, relative to the strongest; otherwise each counts 1.
        Returns (candidates, weights used or None).
        """
        import numpy as np

        from finefit.lines.classify import classify_lines
        from finefit.lines.classify import search_level as search

        j = parse_j(J)
        known = self.known_levels()
        w = np.asarray(wavenumbers, dtype=float)
        c = classify_lines(known, w, tolerance)
        weights = None
        if weighted and set(self.models) == {"even", "odd"}:
            lines, _ = self.predict_lines(radial)
            result = self.last_result
            owner = {StateKey.of(row): row.id for row in result.levels}
            sol = result.solutions[parity]
            cands = [lev for lev in sol.levels if lev.block == round(2 * j)]
            if cands:
                target = min(cands, key=lambda lev: abs(lev.energy - energy))
                key_t = StateKey.of(target)
                weights = {}
                for x in lines:
                    for a, b in ((x.lower, x.upper), (x.upper, x.lower)):
                        if StateKey.of(a) == key_t:
                            lid = owner.get(StateKey.of(b))
                            if lid is not None:
                                weights[lid] = max(weights.get(lid, 0.0), x.gf)
                top_gf = max(weights.values(), default=0.0)
                weights = {k: v / top_gf for k, v in weights.items()} if top_gf > 0 else None
        _, _, found = search(known, j, parity, energy, w[c.unclassified], tolerance, window,
                             step, weights, top)
        return found, weights

    def known_levels(self):
        """The observed levels as known levels for line classification."""
        from finefit.lines.classify import KnownLevel

        return [KnownLevel(lv.id, lv.energy, lv.J, lv.parity, lv.uncertainty or 0.0)
                for lv in self.levels]

    # ------------------------------------------------------------------ level optimisation
    def resolve_level(self, text: str, where: str = "") -> str:
        """A level id from an id, a label (``2p 3s 3P°``) or a label followed by J
        (``2p 3s 3P° 1``, or compact ``2p 3s 3P°1`` for labels without a trailing digit)."""
        from finefit.notation.jvalues import parse_j as pj

        def norm(x: str) -> str:
            return " ".join(x.replace("*", "°").split())

        key = text.strip()
        for lv in self.levels:
            if lv.id == key:
                return lv.id
        hits = [lv for lv in self.levels if lv.label and norm(lv.label) == norm(key)]
        splits = []
        if " " in key:
            splits.append(tuple(key.rsplit(None, 1)))  # "2p 3s 3P° 1"
        compact = re.match(r"^(.*[A-Z][°*]?)(\d+/2|\d+(?:\.\d)?)$", key)
        if compact:
            splits.append((compact.group(1), compact.group(2)))  # "2p 3s 3P°1"
        for head, tail in splits:
            if len(hits) == 1:
                break
            try:
                j = pj(tail)
            except FinefitError:
                continue
            hits = [lv for lv in self.levels
                    if lv.label and norm(lv.label) == norm(head) and lv.J == j]
        prefix = f"{where}: " if where else ""
        if len(hits) == 1:
            return hits[0].id
        if len(hits) > 1:
            raise FinefitError(
                f"{prefix}{text!r} names {len(hits)} levels "
                f"({', '.join(lv.id for lv in hits)}); add J or use the level id", text)
        raise FinefitError(f"{prefix}no level has the id or label {text!r}", text)

    def optimise_levels(
        self,
        lines,
        tolerance: float | None = None,
        reference: str | None = None,
        blends: str = "exclude",
        medium: str | None = None,
        uncertainty: float | None = None,
        source: str | None = None,
        exclude=(),
    ):
        """Level energies from a line list by weighted least squares (levelopt module).

        ``lines`` is a line-list file (or a ``LineList``). A list with ``lower``/``upper``
        columns is taken as classified; otherwise every line is classified here by Ritz
        combinations of the session's levels within ``tolerance`` (default: three times
        the combined uncertainty of the line and two typical levels, common practice, but
        at least 0.05 cm^-1).
        Lines without an uncertainty take ``uncertainty`` (cm^-1); a list without any
        weighs all lines alike and estimates their common uncertainty from the residuals
        (sqrt(chi^2/dof)), and says so in ``warnings``. ``reference`` (an id
        or label) is held fixed; default the lowest level that has a line. ``source``
        names the line list in the record (default: the file name given). ``exclude``
        lists file line numbers of lines kept out of the fit (their Ritz values are
        still given).
        """
        import numpy as np

        from finefit.lines.classify import classify_lines
        from finefit.lines.levelopt import optimise_levels
        from finefit.storage.line_tables import LineList, read_lines

        ll = lines if isinstance(lines, LineList) else read_lines(lines, medium)
        if source is None:
            source = "" if isinstance(lines, LineList) else str(lines)
        n = ll.wavenumber.size
        unc = np.full(n, np.nan) if ll.uncertainty is None else np.array(ll.uncertainty)
        if uncertainty is not None:
            if not float(uncertainty) > 0:
                raise FinefitError("the line uncertainty must be positive", "uncertainty")
            unc = np.where(np.isfinite(unc), unc, float(uncertainty))
        # a list without any uncertainty: equal weights, the common uncertainty estimated
        # from the residuals afterwards (a start of tolerance/3, 0.05 cm-1 by default,
        # for the classification window: common practice)
        estimate = not np.any(np.isfinite(unc))
        if estimate:
            unc = np.full(n, (tolerance if tolerance else 0.05) / 3.0)
        missing = np.flatnonzero(~np.isfinite(unc))
        if missing.size:
            raise FinefitError(
                f"{source or 'line list'} line {int(ll.source_lines[missing[0]])}: no "
                "uncertainty (add an 'uncertainty' column or give a default uncertainty)",
                "uncertainty")
        if tolerance is not None and not tolerance > 0:
            raise FinefitError("the classification tolerance must be positive", "tolerance")
        if ll.lower is not None:
            classes = []
            for i in range(n):
                where = f"line {int(ll.source_lines[i])}"
                if not ll.lower[i]:
                    classes.append([])
                    continue
                pairs = zip(ll.lower[i].split("+"), ll.upper[i].split("+"), strict=True)
                classes.append([(self.resolve_level(a, where), self.resolve_level(b, where))
                                for a, b in pairs])
        else:
            known = self.known_levels()
            if tolerance is None:
                given = [lv.uncertainty for lv in self.levels if lv.uncertainty]
                u_lev = float(np.median(given)) if given else 0.0
                # never narrower than the classify command's default window
                tol = np.maximum(0.05, 3.0 * np.sqrt(unc**2 + 2.0 * u_lev**2))
            else:
                tol = float(tolerance)
            c = classify_lines(known, ll.wavenumber, tol, unc)
            classes = [[(a, b) for a, b, _ in m] for m in c.matches]
        ref = None if reference is None else self.resolve_level(reference, "reference")
        rows = {int(x): i for i, x in enumerate(ll.source_lines)}
        skip = []
        for x in exclude:
            if int(x) not in rows:
                raise FinefitError(f"{source or 'line list'}: there is no line on file line "
                                   f"{x} to exclude", str(x))
            skip.append(rows[int(x)])
        opt = optimise_levels(self.known_levels(), ll.wavenumber, unc, classes, ref, blends,
                              ll.intensity, ll.source_lines, source=source, exclude=skip)
        if estimate and opt.dof > 0:
            common = float(unc[0] * np.sqrt(opt.chi2 / opt.dof))
            opt = optimise_levels(self.known_levels(), ll.wavenumber, np.full(n, common),
                                  classes, ref, blends, ll.intensity, ll.source_lines,
                                  source=source, exclude=skip)
            opt.warnings.append(f"the line list gives no uncertainties: all lines weighted "
                                f"alike, with {common:.2g} cm-1 estimated from the residuals")
        elif estimate:
            opt.warnings.append(f"the line list gives no uncertainties and no degree of freedom "
                                f"is left: {unc[0]:.2g} cm-1 (tolerance/3) assumed per line")
        return opt

    def apply_levels(self, opt, name: str | None = None, note: str = "") -> LevelSet:
        """Take optimised energies and uncertainties as the session's observed levels.

        Every optimised level gets its energy and its uncertainty relative to the
        reference (the reference keeps its own uncertainty: zero is no weight a fit can
        use); a ``LevelSet`` record names the line list and keeps the replaced values.
        """
        from pathlib import PurePath

        stamp = datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
        if not name:
            base = PurePath(opt.source).name if opt.source else "lines"
            name, k = base, 2
            while any(ls.name == name for ls in self.level_sets):
                name, k = f"{base} ({k})", k + 1
        elif any(ls.name == name for ls in self.level_sets):
            raise FinefitError(f"a level set named {name!r} exists already", name)
        energies, uncs, prev, prev_u = {}, {}, {}, {}
        for lid, (e, u) in opt.levels.items():
            lv = self.level(lid)
            prev[lid] = lv.energy
            if lv.uncertainty is not None:
                prev_u[lid] = lv.uncertainty
            changes = {"energy": float(e)}
            if u > 0:
                changes["uncertainty"] = float(u)
                uncs[lid] = float(u)
            energies[lid] = float(e)
            self.update_level(lid, **changes)
        ls = LevelSet(
            name=name, created=stamp, source=opt.source, reference=opt.reference,
            energies=energies, uncertainties=uncs, previous=prev, previous_uncertainties=prev_u,
            blends=opt.blends, n_lines=opt.n_used, n_levels=len(energies), chi2=opt.chi2,
            excluded=sorted({x.source_line for x in opt.lines
                             if "excluded" in x.flags and "blend" not in x.flags}),
            dof=opt.dof, note=note or "; ".join(opt.warnings),
        )
        self.level_sets.append(ls)
        return ls

    def exchange(self, first: str, second: str, result: FitResult) -> None:
        """Exchange the computed states of two observed levels of one J and parity as
        ``result`` attached them: each is pinned to the other's state (rank within its J)
        and their labels are exchanged, so labels and attachment stay consistent."""
        ra, rb = result.level(first), result.level(second)
        if (ra.parity, ra.J) != (rb.parity, rb.J):
            raise FinefitError(f"{first} and {second} differ in J or parity: they cannot "
                               "exchange states", first)
        la, lb = self.level(first), self.level(second)
        self.update_level(first, state=rb.state_rank, label=lb.label)
        self.update_level(second, state=ra.state_rank, label=la.label)

    def take_fit(self, result: FitResult) -> ParameterSet | None:
        """Make a fit's values the session's values, keeping the values they replace as a
        parameter set ("before ..."); None when nothing changes."""
        changed = {n: self.parameters[n].value for n, v in result.values.items()
                   if n in self.parameters and self.parameters[n].value != v}
        if not changed:
            return None
        stamp = datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
        name, k = f"before {stamp}", 2
        while any(ps.name == name for ps in self.parameter_sets):
            name, k = f"before {stamp} ({k})", k + 1
        ps = ParameterSet(
            name=name, created=stamp, values=self.values(), errors={}, sigma=None,
            n_levels=0, n_free=0, included=[], converged=False,
            note="starting values replaced by a fit when the session was written",
        )
        self.parameter_sets.append(ps)
        self.apply(result)
        return ps

    # ------------------------------------------------------------------ parameter sets
    def keep(self, result: FitResult, name: str, note: str = "") -> ParameterSet:
        """Store a fit as a named, timestamped parameter set."""
        self.check_set_name(name)
        ps = ParameterSet(
            name=name, created=datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
            values=dict(result.values),
            # an error beyond any physical size says "undetermined", as an infinite one does
            errors={k: (v if abs(v) <= MAX_MAGNITUDE else math.inf)
                    for k, v in result.errors.items()},
            sigma=result.sigma, n_levels=result.n_levels, n_free=result.n_free,
            included=list(result.included_ids), converged=result.converged, note=note,
        )
        self.parameter_sets.append(ps)
        return ps

    def check_set_name(self, name: str) -> None:
        """A new parameter set's name: non-empty, printable, not yet used."""
        if not isinstance(name, str) or not name.strip():
            raise FinefitError("a parameter set needs a name (it is empty)", "name")
        check_text(name, "parameter set name")
        if any(ps.name == name for ps in self.parameter_sets):
            raise FinefitError(f"a parameter set named {quote(name)} exists already", name)

    def parameter_set(self, name: str) -> ParameterSet:
        for ps in self.parameter_sets:
            if ps.name == name:
                return ps
        known = ", ".join(ps.name for ps in self.parameter_sets) or "none"
        raise FinefitError(f"no parameter set named {quote(name)} (saved sets: "
                           f"{quote(known, 400)[1:-1]})", name)

    def use_set(self, name: str) -> None:
        """Start from a saved parameter set's values."""
        ps = self.parameter_set(name)
        for n, v in ps.values.items():
            if n in self.parameters:
                self.parameters[n].value = v

    def remove_set(self, name: str) -> ParameterSet:
        ps = self.parameter_set(name)
        self.parameter_sets.remove(ps)
        return ps

    def compare_sets(self, a: str, b: str) -> list[dict]:
        """Per parameter: both values, the change and the change in combined standard errors."""
        pa, pb = self.parameter_set(a), self.parameter_set(b)
        rows = []
        for n in dict.fromkeys(list(pa.values) + list(pb.values)):
            va, vb = pa.values.get(n), pb.values.get(n)
            ea, eb = pa.errors.get(n, 0.0), pb.errors.get(n, 0.0)
            diff = None if va is None or vb is None else vb - va
            comb = math.hypot(ea, eb)
            rows.append({
                "name": n, "a": va, "b": vb, "change": diff,
                "in_errors": (diff / comb) if diff is not None and comb > 0 else None,
            })
        return rows


def load(path: str | Path) -> Session:
    """Read a session file (the CONVENTIONS.md entry point)."""
    return Session.load(path)


def optimise_levels(session: Session, lines, **options):
    """Level energies of ``session`` optimised from a line list (CONVENTIONS.md,
    "Level optimisation"); options as :meth:`Session.optimise_levels`."""
    return session.optimise_levels(lines, **options)
