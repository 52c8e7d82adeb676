"""Many independent fits at once: serially here, or as tasks on dask.distributed.

Tasks receive sessions as TOML text (``Session.to_toml``) and return plain dictionaries
of floats and strings: nothing is shared between tasks, so a task runs the same on a
worker process of this machine, on a remote cluster, or in this process. Every task
holds BLAS to the engine's thread count (one; ``finefit.threads``), and a LocalCluster
is started with one thread per worker and as many workers as cores, so the workers do
not oversubscribe the machine. Results come back in submission order, so the numbers
are those of a serial run with the same inputs.
"""

from __future__ import annotations

import logging
import math
import os
import time
from collections.abc import Callable, Sequence
from dataclasses import replace

import numpy as np

from finefit.errors import FinefitError
from finefit.threads import engine_threads


def default_workers() -> int:
    """Workers of a LocalCluster: the cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


class TaskRunner:
    """Runs a task function over payloads: in this process (``serial``), on an existing
    dask scheduler (``scheduler`` address), or on a LocalCluster started on entry and
    closed on exit (``workers`` processes, default the cores, one thread each).

    ``warm(fn, *args)`` sends ``fn`` to every worker without waiting, so that the
    workers import the engine and build its matrices while the caller does other work
    (its results are dropped). ``map`` returns results in submission order.
    """

    def __init__(self, serial: bool = False, scheduler: str | None = None,
                 workers: int | None = None) -> None:
        self.serial = serial
        self.scheduler = scheduler
        self.workers = workers
        self.client = None
        self.cluster = None
        self._warming: list = []

    def __enter__(self) -> TaskRunner:
        if self.serial:
            return self
        try:
            from distributed import Client, LocalCluster
        except ImportError as exc:  # pragma: no cover - a declared dependency
            raise FinefitError(f"dask.distributed is not installed ({exc})",
                               "distributed") from None
        if self.scheduler:
            _reachable(self.scheduler)
            try:
                self.client = Client(self.scheduler, timeout="10s")
            except (OSError, TimeoutError, ValueError) as exc:
                raise FinefitError(f"cannot reach the dask scheduler at {self.scheduler!r}: "
                                   f"{exc}", "scheduler") from None
            return self
        n = self.workers or default_workers()
        if n < 1:
            raise FinefitError("the number of workers must be at least 1", "workers")
        self.cluster = LocalCluster(
            n_workers=n, threads_per_worker=1, processes=True, dashboard_address=None,
            silence_logs=logging.ERROR,
            # one BLAS thread per worker process (the tasks also cap it themselves)
            env={"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1",
                 "MKL_NUM_THREADS": "1", "FINEFIT_BLAS_THREADS": "1"},
        )
        try:
            self.client = Client(self.cluster)
        except Exception:
            self.cluster.close()
            raise
        return self

    def __exit__(self, *exc) -> None:
        if self.client is not None:
            self.client.close()
        if self.cluster is not None:
            self.cluster.close()

    def warm(self, fn: Callable, *args) -> None:
        if self.client is None:
            return
        for w in self.client.scheduler_info()["workers"]:
            self._warming.append(self.client.submit(fn, *args, workers=[w], pure=False,
                                                    allow_other_workers=False))

    def map(self, fn: Callable, payloads: Sequence[tuple],
            progress: Callable[[int, int], None] | None = None) -> list:
        total = len(payloads)
        if self.client is None:
            out = []
            with engine_threads():
                for k, p in enumerate(payloads):
                    out.append(fn(*p))
                    if progress:
                        progress(k + 1, total)
            return out
        from distributed import as_completed

        futures = [self.client.submit(fn, *p, pure=False) for p in payloads]
        done = 0
        for _ in as_completed(futures):
            done += 1
            if progress:
                progress(done, total)
        out = self.client.gather(futures)
        self._warming.clear()  # warm-up results are not needed
        return out


def run_tasks(
    fn: Callable,
    payloads: Sequence[tuple],
    *,
    serial: bool = False,
    scheduler: str | None = None,
    workers: int | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> list:
    """``[fn(*p) for p in payloads]``, serially or as dask tasks (same order, same numbers).

    ``scheduler`` is the address of an existing dask scheduler (``tcp://host:8786``);
    without it a LocalCluster of ``workers`` processes (default: the cores) with one
    thread each is started for this call and closed afterwards. ``progress(done, total)``
    is called as tasks finish.
    """
    with TaskRunner(serial, scheduler, workers) as runner:
        return runner.map(fn, payloads, progress)


def _reachable(address: str) -> None:
    """Fail fast with a clear message when nothing listens at a tcp:// address (the
    client itself would retry until its timeout)."""
    import socket
    from urllib.parse import urlsplit

    parts = urlsplit(address if "://" in address else "tcp://" + address)
    if parts.scheme not in ("tcp", "tls") or not parts.hostname or not parts.port:
        return  # other transports: let the client decide
    try:
        socket.create_connection((parts.hostname, parts.port), timeout=5).close()
    except OSError as exc:
        raise FinefitError(f"cannot reach the dask scheduler at {address!r}: {exc}",
                           "scheduler") from None


def chunks(n: int, parts: int) -> list[range]:
    """``range(n)`` cut into at most ``parts`` contiguous pieces of near-equal size."""
    parts = max(1, min(parts, n))
    edges = np.linspace(0, n, parts + 1).round().astype(int)
    return [range(int(a), int(b)) for a, b in zip(edges[:-1], edges[1:], strict=True) if b > a]


# ----------------------------------------------------------------------------- tasks
def _num(x) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


def parameter_covariance(result, settings) -> np.ndarray:
    """Covariance of all parameters (result.values order) from a fit's errors and
    correlation matrix; linked members follow their group's leader (fully correlated)."""
    names = list(result.values)
    var_names, corr = result.correlation
    corr = np.asarray(corr, dtype=float)
    index = {}
    for j, vn in enumerate(var_names):
        if vn.endswith("]") and " [" in vn:
            index["[" + vn.rsplit(" [", 1)[1]] = j
        else:
            index[vn] = j
    where, sign = [], []
    for n in names:
        s = settings.get(n)
        key = ("[" + s.link + "]") if s is not None and s.link else n
        where.append(index.get(key))
        sign.append(1.0 if result.values[n] >= 0 else -1.0)
    err = np.array([result.errors[n] if math.isfinite(result.errors[n]) else 0.0
                    for n in names])
    cov = np.zeros((len(names), len(names)))
    for a in range(len(names)):
        for b in range(len(names)):
            ja, jb = where[a], where[b]
            if ja is None or jb is None or err[a] == 0 or err[b] == 0:
                continue
            lead_sign = 1.0
            if settings.get(names[a]) is not None and settings[names[a]].link:
                lead_sign *= sign[a]
            if settings.get(names[b]) is not None and settings[names[b]].link:
                lead_sign *= sign[b]
            cov[a, b] = corr[ja, jb] * err[a] * err[b] * lead_sign
    return cov


def fit_member_task(session_toml: str) -> dict:
    """Fit one member of a sequence (Hartree-Fock values computed where none are stored)."""
    from finefit.session import Session
    from finefit.storage.session_file import parse_session

    with engine_threads():
        s = Session(parse_session(session_toml))
        kinds = {sp.name: sp.kind for m in s.models.values() for sp in m.parameter_specs}
        missing = [n for n, p in s.parameters.items()
                   if p.ab_initio is None and kinds[n] in ("F", "G", "R", "zeta")]
        if missing:
            s.fill_ab_initio(set_values=False)
        r = s.fit()
        cov = parameter_covariance(r, s.parameters)
        names = list(r.values)
        values = np.array([r.values[n] for n in names])
        # E_av measured from the member's lowest computed level (the compilations' origin
        # differs between ions); its covariance through the Hellmann-Feynman gradient g0
        # of that level: y = E_av - E_0, T = I - e_Eav g0^T
        lowest = min(((p, lev) for p, sol in r.solutions.items() for lev in sol.levels),
                     key=lambda t: t[1].energy)
        g0 = np.zeros(len(names))
        model_names = s.models[lowest[0]].parameters
        for j, gj in enumerate(r.solutions[lowest[0]].gradient(lowest[1])):
            g0[names.index(model_names[j])] = gj
        T = np.eye(len(names))
        for i, n in enumerate(names):
            if kinds[n] == "Eav":
                T[i] -= g0
                values[i] -= lowest[1].energy
        cov = T @ cov @ T.T
        err = [_num(r.errors[n]) for n in names]
        for i, n in enumerate(names):
            if kinds[n] == "Eav" and err[i] is not None and err[i] > 0:
                err[i] = float(np.sqrt(max(cov[i, i], 0.0)))
        return {
            "Z": s.ion.Z, "charge": s.ion.charge, "name": s.ion.name,
            "configurations": list(s.configurations),
            "converged": bool(r.converged), "sigma": _num(r.sigma),
            "n_levels": r.n_levels, "n_free": r.n_free,
            "names": names,
            "values": [float(v) for v in values],
            "errors": err,
            "status": [r.status[n] for n in r.values],
            "kinds": [kinds[n] for n in r.values],
            "ab_initio": [_num(s.parameters[n].ab_initio) if s.parameters[n].ab_initio
                          else None for n in r.values],
            "covariance": cov.tolist(),
            "warnings": list(r.warnings),
        }


def warm_task(session_toml: str) -> bool:
    """Read a session and report it: imports the engine and builds (and caches) its
    matrices and coupling data in this worker before the real tasks arrive."""
    from finefit.session import Session
    from finefit.storage.session_file import parse_session

    with engine_threads():
        Session(parse_session(session_toml)).report()
    return True


def state_keys(solutions) -> list[tuple[str, int, int]]:
    """(parity, 2J, position) of every computed state, in energy order per parity."""
    return [(p, lev.block, lev.position) for p, sol in solutions.items() for lev in sol.levels]


def refit_task(session_toml: str, level_ids: list[str], draws: list[dict]) -> list[dict]:
    """Refit a session once per draw; a draw gives ``energies`` (Monte Carlo) or
    ``counts`` (bootstrap multiplicities) for the levels ``level_ids``."""
    from finefit.session import Session
    from finefit.storage.session_file import parse_session

    out = []
    with engine_threads():
        data = parse_session(session_toml)
        base = Session(data)
        keys = state_keys(base.solve())
        weighted = base.options.weighting == "uncertainty"
        for draw in draws:
            s = Session(parse_session(session_toml))
            pos = {lv.id: i for i, lv in enumerate(s.levels)}
            if draw.get("counts") is not None:
                s.options = replace(s.options, weighting="uncertainty", scale_covariance=True)
            for k, lid in enumerate(level_ids):
                i = pos[lid]
                lv = s.levels[i]
                if draw.get("energies") is not None:
                    s.levels[i] = replace(lv, energy=float(draw["energies"][k]))
                else:
                    c = int(draw["counts"][k])
                    u = (lv.uncertainty or s.options.default_uncertainty) if weighted else 1.0
                    s.levels[i] = (replace(lv, include=False) if c == 0
                                   else replace(lv, uncertainty=u / math.sqrt(c)))
            cpu = time.process_time()
            try:
                r = s.fit()
            except FinefitError as exc:
                out.append({"ok": False, "message": str(exc),
                            "cpu_seconds": time.process_time() - cpu})
                continue
            undetermined = [n for n, st in r.status.items() if st == "undetermined"]
            energies = {(p, lev.block, lev.position): lev.energy
                        for p, sol in r.solutions.items() for lev in sol.levels}
            out.append({
                "ok": bool(r.converged) and not undetermined,
                "message": r.message if not undetermined else
                "undetermined: " + ", ".join(undetermined),
                "sigma": _num(r.sigma),
                "values": [float(v) for v in r.values.values()],
                "energies": [float(energies.get(k, math.nan)) for k in keys],
                "cpu_seconds": time.process_time() - cpu,  # of this refit, for benchmarks
            })
    return out
