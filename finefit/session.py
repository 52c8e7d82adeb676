"""A term-analysis session: ion, configurations, parameters, observed levels, saved fits.

This is the API the command line, the terminal workspace and notebooks share.

>>> s = Session.new(["2p2"], Z=6)                           # doctest: +SKIP
>>> s.set_parameter("2p2: F2(2p)", 45000.0, vary=True)
>>> s.add_level(energy=43.4, J=2, parity="even", label="2p2 3P")
>>> r = s.fit(); r.sigma
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace
from datetime import UTC, datetime
from functools import lru_cache
from pathlib import Path

from finefit.errors import FinefitError, quote
from finefit.fitting.fit import FitProblem
from finefit.fitting.results import FitResult
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
from finefit.model.hamiltonian import Model
from finefit.notation.configuration import parse_configuration
from finefit.notation.jvalues import parse_j
from finefit.storage.atomic import atomic_write_text, read_text
from finefit.storage.session_file import (
    Ion,
    ParameterSet,
    SessionData,
    dump_session,
    parse_session,
)

# Kinds varied by default in a new session; CI integrals and effective corrections are
# commonly held fixed at scaled ab initio values until the data can carry them.
DEFAULT_VARY = {"Eav", "F", "G", "zeta"}


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
    """The (immutable) model of one interacting set, shared between sessions."""
    return Model(list(configurations))


def group_by_parity(configurations: list[str]) -> dict[str, tuple[str, ...]]:
    """Interacting sets: the configurations of each parity, in the order given."""
    out: dict[str, list[str]] = {}
    for text in configurations:
        c = parse_configuration(text)
        out.setdefault(c.parity, []).append(str(c))
    return {p: tuple(v) for p, v in out.items()}


class Session:
    """Observed levels of one ion and the parametric model fitted to them."""

    def __init__(self, data: SessionData, path: str | Path | None = None) -> None:
        self.path = Path(path) if path else None
        self.ion = data.ion
        self.title = data.title
        self.note = data.note
        self.options = data.options
        self.parameter_sets: list[ParameterSet] = list(data.parameter_sets)
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
                self.parameters[spec.name] = data.parameters.get(spec.name) or ParameterSetting(
                    vary=spec.kind in DEFAULT_VARY
                )
        self.levels: list[ObservedLevel] = []
        for lv in data.levels:
            self._check_level(lv)
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
        return cls(data)

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
    def _check_level(self, lv: ObservedLevel) -> None:
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
    def problem(self) -> FitProblem:
        return FitProblem(self.models, self.parameters, self.levels, self.options)

    def fit(
        self,
        should_stop: Callable[[], bool] | None = None,
        progress: Callable[[int, float], None] | None = None,
    ) -> FitResult:
        """Fit with the session's options; the session's values are not changed."""
        result = self.problem().fit(should_stop=should_stop, progress=progress)
        self.last_result = result
        return result

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
    ):
        """Store Hartree-Fock values as ``ab_initio`` and (optionally) scaled starting values."""
        from finefit.fitting.starting import ab_initio_values

        lowest = {}
        for lv in self.levels:
            lowest[lv.parity] = min(lowest.get(lv.parity, lv.energy), lv.energy)
        res = ab_initio_values(self.models, self.ion.Z, self.ion.charge, scales, lowest,
                               relativistic, progress)
        for name, value in res.ab_initio.items():
            self.parameters[name].ab_initio = value
            if set_values:
                self.parameters[name].value = res.start[name]
        return res

    def predict_lines(
        self,
        radial: dict[tuple[str, str], float] | None = None,
        min_strength: float = 0.0,
        air_range: tuple[float, float] = (2000.0, 20000.0),
    ):
        """E1 lines between the session's even and odd levels at the current values.

        Wavenumbers come from the calculated energies, their uncertainties from the
        covariance of a fit at the current set-up (combined in quadrature for the two
        parities). Radial dipole integrals (bohr) not given in ``radial`` come from
        Hartree-Fock runs. Returns (lines, radial integrals used).
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
            unc[(row.parity, round(2 * row.J), row.state_rank - 1)] = row.calc_uncertainty
        for p in result.predictions:
            unc[(p.parity, round(2 * p.J), p.state_rank - 1)] = p.uncertainty

        def level_uncertainty(level):
            return unc.get((level.parity, level.block, level.position))

        lines = predict_lines(dip, sols["even"], sols["odd"], given, min_strength,
                              level_uncertainty, air_range)
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
            owner = {(row.parity, round(2 * row.J), row.state_rank - 1): row.id
                     for row in result.levels}
            sol = result.solutions[parity]
            cands = [lev for lev in sol.levels if lev.block == round(2 * j)]
            if cands:
                target = min(cands, key=lambda lev: abs(lev.energy - energy))
                key_t = (parity, target.block, target.position)
                weights = {}
                for x in lines:
                    for a, b in ((x.lower, x.upper), (x.upper, x.lower)):
                        if (a.parity, a.block, a.position) == key_t:
                            lid = owner.get((b.parity, b.block, b.position))
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
