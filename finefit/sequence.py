"""Isoelectronic sequences: fit the known members, follow each parameter against Z, and
start a new ion from the trends (CONVENTIONS.md, "Sequences").

>>> new = predict_member([s1, s2, s3], Z=24, charge=4)     # doctest: +SKIP
>>> new.report().predictions                                # levels with trend uncertainties

Each parameter follows the law documented in :mod:`finefit.fitting.trends`: its ratio
to Hartree-Fock (F^k, G^k, R^k, zeta, where every member has an ab initio value) or its
value (E_av, effective operators) as a weighted polynomial in Z. A new ion gets its
Hartree-Fock values, the law's ratio times them as starting values, and the full
covariance of those values; its predicted levels carry the uncertainty propagated
through the Hellmann-Feynman gradients, sqrt(g^T C g).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from datetime import UTC, datetime

import numpy as np

from finefit.errors import FinefitError
from finefit.fitting.results import FitResult
from finefit.fitting.trends import Law, fit_law, propagate
from finefit.parallel import fit_member_task, run_tasks
from finefit.session import Session
from finefit.storage.session_file import ParameterSet
from finefit.threads import with_engine_threads

RATIO_KINDS = ("F", "G", "R", "zeta")
TREND_SET = "sequence trends"


@dataclass
class SequenceAnalysis:
    """Fitted members of one isoelectronic sequence and one law per parameter."""

    members: list[dict]  # plain results of fit_member_task, sorted by Z
    names: list[str]
    kinds: dict[str, str]
    laws: dict[str, Law]
    degree: int
    fixed: dict[str, float] = field(default_factory=dict)  # fixed in every member
    warnings: list[str] = field(default_factory=list)

    @property
    def Z(self) -> list[int]:
        return [m["Z"] for m in self.members]

    def member_y(self, m: dict, name: str, kind: str) -> tuple[float, float | None]:
        """(y, error) of one member for a law of ``kind``."""
        i = m["names"].index(name)
        v, e, ab = m["values"][i], m["errors"][i], m["ab_initio"][i]
        if kind == "ratio":
            return v / ab, (None if e is None else e / abs(ab))
        return v, e

    def predict(self, Z: int, ab_initio: dict[str, float] | None = None):
        """Values, standard uncertainties and covariance (names order) at ``Z``.

        Ratio laws are multiplied by ``ab_initio`` (the new ion's Hartree-Fock values);
        without them the ratios themselves are returned for those parameters.
        """
        names = [n for n in self.names if n in self.laws]
        laws = [self.laws[n] for n in names]
        cov_members = []
        for m in self.members:
            idx = [m["names"].index(n) for n in names]
            c = np.asarray(m["covariance"], dtype=float)[np.ix_(idx, idx)]
            scale = np.array([abs(m["ab_initio"][i]) if self.laws[n].kind == "ratio" else 1.0
                              for n, i in zip(names, idx, strict=True)])
            cov_members.append(c / np.outer(scale, scale))
        cov = propagate(laws, float(Z), cov_members, len(self.members))
        values = {}
        factor = np.ones(len(names))
        for k, (n, law) in enumerate(zip(names, laws, strict=True)):
            y, _ = law(float(Z))
            if law.kind == "ratio" and ab_initio is not None:
                if not ab_initio.get(n):
                    raise FinefitError(f"{n}: no Hartree-Fock value for Z = {Z} to scale the "
                                       "ratio law with", n)
                factor[k] = ab_initio[n]
            values[n] = y * factor[k]
        cov = cov * np.outer(factor, factor)
        for n, v in self.fixed.items():
            if self.kinds[n] in RATIO_KINDS and self._fixed_is_ratio(n):
                if ab_initio and ab_initio.get(n):
                    values[n] = v * ab_initio[n]
                else:  # no Hartree-Fock value to scale with: the members' mean value
                    values[n] = float(np.mean([m["values"][m["names"].index(n)]
                                               for m in self.members]))
            else:
                values[n] = v
        errors = {n: float(math.sqrt(max(cov[k, k], 0.0))) for k, n in enumerate(names)}
        errors.update({n: 0.0 for n in self.fixed})
        return values, errors, (names, cov)

    def _fixed_is_ratio(self, name: str) -> bool:
        return all(m["ab_initio"][m["names"].index(name)] for m in self.members)

    def table(self) -> list[dict]:
        """Per parameter and member: value, error, ratio to Hartree-Fock and its error."""
        rows = []
        for n in self.names:
            for m in self.members:
                i = m["names"].index(n)
                v, e, ab = m["values"][i], m["errors"][i], m["ab_initio"][i]
                rows.append({
                    "parameter": n, "Z": m["Z"], "charge": m["charge"], "ion": m["name"],
                    "value": v, "error": e, "status": m["status"][i], "ab_initio": ab,
                    "ratio": (v / ab) if ab else None,
                    "ratio_error": (e / abs(ab)) if ab and e is not None else None,
                })
        return rows

    def to_dict(self) -> dict:
        return {
            "members": [
                {k: m[k] for k in ("Z", "charge", "name", "configurations", "converged",
                                   "sigma", "n_levels", "n_free", "warnings")}
                for m in self.members
            ],
            "parameters": self.table(),
            "laws": [
                {"parameter": n, "law": law.kind, "degree": law.degree, "x0": law.x0,
                 "coefficients": [float(c) for c in law.coefficients], "chi2": law.chi2,
                 "dof": law.dof, "scale": law.scale, "Z": [int(z) for z in law.x]}
                for n, law in self.laws.items()
            ],
            "fixed": dict(self.fixed),
            "warnings": list(self.warnings),
        }


def _check_sequence(sessions: list[Session]) -> None:
    if len(sessions) < 2:
        raise FinefitError("a sequence needs at least two sessions", "sessions")
    first = sessions[0]
    electrons = {s.ion.Z - s.ion.charge for s in sessions}
    if len(electrons) > 1:
        raise FinefitError(
            "the sessions are not one isoelectronic sequence: electrons (Z - charge) = "
            + ", ".join(f"{s.ion.Z - s.ion.charge} (Z = {s.ion.Z})" for s in sessions),
            "charge")
    for s in sessions[1:]:
        if s.configurations != first.configurations:
            raise FinefitError(
                f"the session of Z = {s.ion.Z} has configurations {s.configurations}, the one "
                f"of Z = {first.ion.Z} {first.configurations}: a sequence needs the same ones",
                "configurations")
    zs = [s.ion.Z for s in sessions]
    if len(set(zs)) != len(zs):
        raise FinefitError(f"two sessions have the same Z ({sorted(zs)})", "Z")


def fit_sequence(
    sessions: list[Session],
    degree: int = 1,
    scheduler: str | None = None,
    workers: int | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> SequenceAnalysis:
    """Fit every member (as tasks: in this process, or ``scheduler="local"`` for a
    LocalCluster, or a scheduler address) and one law per parameter against Z."""
    _check_sequence(sessions)
    members = run_tasks(fit_member_task, [(s.to_toml(),) for s in sessions],
                        serial=scheduler is None,
                        scheduler=None if scheduler in (None, "local") else scheduler,
                        workers=workers, progress=progress)
    return analyse_members(members, degree)


def analyse_members(members: list[dict], degree: int = 1) -> SequenceAnalysis:
    """Laws from the plain member results (see :func:`fit_member_task`)."""
    members = sorted(members, key=lambda m: m["Z"])
    names = list(members[0]["names"])
    kinds = dict(zip(names, members[0]["kinds"], strict=True))
    laws: dict[str, Law] = {}
    fixed: dict[str, float] = {}
    warnings = []
    for m in members:
        if not m["converged"]:
            warnings.append(f"the fit of Z = {m['Z']} did not converge; its values enter the "
                            "trends as they are")
    for n in names:
        ratio = kinds[n] in RATIO_KINDS and all(
            m["ab_initio"][m["names"].index(n)] for m in members)
        kind = "ratio" if ratio else "value"
        xs, ys, es, idx = [], [], [], []
        for k, m in enumerate(members):
            i = m["names"].index(n)
            if m["status"][i] not in ("varied", "linked"):
                continue
            y = m["values"][i] / m["ab_initio"][i] if ratio else m["values"][i]
            e = m["errors"][i]
            if e is None or not e > 0:
                continue
            e = e / abs(m["ab_initio"][i]) if ratio else e
            xs.append(m["Z"])
            ys.append(y)
            es.append(e)
            idx.append(k)
        if not xs:
            vals = [m["values"][m["names"].index(n)] for m in members]
            if ratio:
                vals = [m["values"][m["names"].index(n)] / m["ab_initio"][m["names"].index(n)]
                        for m in members]
            fixed[n] = float(np.mean(vals))
            continue
        laws[n] = fit_law(n, kind, xs, ys, es, idx, degree)
        # one configuration: E_av only sets the origin, which the prediction removes
        origin_only = kinds[n] == "Eav" and len(members[0]["configurations"]) == 1
        if laws[n].dof > 0 and laws[n].scale > 4.0 and not origin_only:
            warnings.append(f"{n}: the members scatter about the law (chi2/dof = "
                            f"{laws[n].chi2 / laws[n].dof:.3g}); uncertainties widened by "
                            f"{math.sqrt(laws[n].scale):.3g}")
        if len(xs) < len(members):
            left = [members[k]["Z"] for k in range(len(members)) if k not in idx]
            warnings.append(f"{n}: fixed or undetermined for Z = {left}; the law uses the "
                            "other members")
    return SequenceAnalysis(members, names, kinds, laws, degree, fixed, warnings)


class PredictedSession(Session):
    """A session started from sequence trends; while its values are the predicted ones,
    :meth:`report` gives every level the uncertainty propagated from the trends."""

    trend_names: list[str]
    trend_covariance: np.ndarray
    trend_values: dict[str, float]
    analysis: SequenceAnalysis | None = None

    @with_engine_threads
    def report(self) -> FitResult:
        r = super().report()
        if not getattr(self, "trend_values", None) or any(
            abs(self.parameters[n].value - v) > 1e-9 * max(1.0, abs(v))
            for n, v in self.trend_values.items()
        ):
            return r
        index = {n: k for k, n in enumerate(self.trend_names)}
        grads = {}
        for parity, sol in r.solutions.items():
            names = self.models[parity].parameters
            for lev in sol.levels:
                g = np.zeros(len(self.trend_names))
                for j, gj in enumerate(sol.gradient(lev)):
                    if names[j] in index:
                        g[index[names[j]]] = gj
                grads[(parity, lev.block, lev.position)] = (lev.energy, g)
        # energies are relative to the predicted ground level (the compilations' origin):
        # the uncertainty is that of E_i - E_ground
        g0 = min(grads.values(), key=lambda t: t[0])[1]
        C = self.trend_covariance
        table = {k: float(math.sqrt(max((g - g0) @ C @ (g - g0), 0.0)))
                 for k, (_, g) in grads.items()}
        preds = [replace(p, uncertainty=table[(p.parity, round(2 * p.J), p.state_rank - 1)])
                 for p in r.predictions]
        rows = [replace(x, calc_uncertainty=table[(x.parity, round(2 * x.J), x.state_rank - 1)])
                for x in r.levels]
        result = replace(r, predictions=preds, levels=rows,
                         covariance_note="uncertainties propagated from the sequence trends")
        self.last_result = result
        return result


@with_engine_threads
def new_member(
    analysis: SequenceAnalysis,
    Z: int,
    charge: int,
    name: str = "",
    title: str = "",
) -> PredictedSession:
    """A session for a new ion of the sequence: configurations, Z, charge, Hartree-Fock
    ab initio values, starting values and their covariance from the trends."""
    ref = analysis.members[0]
    if Z - charge != ref["Z"] - ref["charge"]:
        raise FinefitError(
            f"Z = {Z}, charge = {charge} has {Z - charge} electrons; the sequence has "
            f"{ref['Z'] - ref['charge']}", "charge")
    base = Session.new(ref["configurations"], Z=Z, charge=charge, name=name,
                       title=title or f"{name or f'Z = {Z}'} predicted from the sequence "
                       + ", ".join(str(z) for z in analysis.Z))
    s = PredictedSession(base.data())
    res = s.fill_ab_initio(set_values=False)
    values, errors, (names, cov) = analysis.predict(Z, res.ab_initio)
    for n, v in values.items():
        vary = n in analysis.laws and any(
            m["status"][m["names"].index(n)] in ("varied", "linked") for m in analysis.members)
        s.set_parameter(n, v, vary=vary)
    # the compilations' origin: the lowest predicted level at 0 (E_av shifted together)
    eav = [n for n in s.parameters if analysis.kinds[n] == "Eav"]
    lowest = min(lev.energy for sol in s.solve().values() for lev in sol.levels)
    for n in eav:
        s.set_parameter(n, s.parameters[n].value - lowest)
        values[n] -= lowest
    s.trend_names = names
    s.trend_covariance = cov
    s.trend_values = {n: s.parameters[n].value for n in s.parameters}
    s.analysis = analysis
    s.note = ("starting values from the trends of Z = " + ", ".join(str(z) for z in analysis.Z)
              + f" ({'degree ' + str(analysis.degree)} laws in Z); not fitted")
    s.parameter_sets.append(ParameterSet(
        name=TREND_SET, created=datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        values={n: float(v) for n, v in values.items()},
        errors={n: float(e) for n, e in errors.items()}, sigma=None, n_levels=0, n_free=0,
        included=[], converged=False,
        note="predicted from the sequence trends; errors are the trends' standard uncertainties",
    ))
    return s


def predict_member(
    sessions: list[Session],
    Z: int,
    charge: int,
    degree: int = 1,
    name: str = "",
    scheduler: str | None = None,
    workers: int | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> PredictedSession:
    """Fit the members, follow the trends and start a session for (Z, charge).

    ``new.parameters`` hold the starting values from the trends and the Hartree-Fock
    ab initio values; ``new.report().predictions`` every level with its uncertainty from
    the trends. ``scheduler``: None runs the member fits in this process, ``"local"``
    on a LocalCluster, an address on an existing dask scheduler.
    """
    analysis = fit_sequence(sessions, degree, scheduler, workers, progress)
    return new_member(analysis, Z, charge, name=name)
