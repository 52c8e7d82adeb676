"""Commands ``finefit sequence`` and ``finefit resample`` (many fits, serial or on dask).

Both run their fits as dask tasks on a LocalCluster of this machine by default (workers
= cores, one BLAS thread each), on an existing cluster with ``--scheduler ADDRESS``, or
in this process with ``--serial``.
"""

from __future__ import annotations

import argparse
import sys
from contextlib import contextmanager
from pathlib import Path

from finefit.errors import FinefitError

EXIT_OK, EXIT_NOT_CONVERGED = 0, 1


def _where(args) -> str | None:
    if args.serial:
        return None
    return args.scheduler or "local"


@contextmanager
def _progress(args, what: str):
    """A progress bar on stderr (only on a terminal and without --json)."""
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn

    from finefit.cli import _err_console

    show = not args.json and sys.stderr.isatty()
    with Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                  console=_err_console(), transient=True, disable=not show) as prog:
        task = prog.add_task(what, total=None)

        def update(done: int, total: int) -> None:
            prog.update(task, completed=done, total=total)

        yield update


def _figures(args) -> tuple[Path, list[str]] | None:
    if not args.figures:
        return None
    return Path(args.figures), list(args.format)


def cmd_sequence(args) -> int:
    from finefit.cli import _console, _json, _load
    from finefit.reports import sequence as rep
    from finefit.reports.tables import print_table
    from finefit.sequence import fit_sequence, new_member

    if args.charge is not None and args.Z is None:
        raise FinefitError("--charge needs --Z of the new member", "--charge")
    if args.write and args.Z is None:
        raise FinefitError("--write needs --Z of the new member", "--write")
    if args.degree < 0:
        raise FinefitError("--degree must be 0 or more", "--degree")
    if args.write and Path(args.write).exists() and not args.force:
        raise FinefitError(f"{args.write} exists already (use --force to overwrite)",
                           args.write)
    sessions = [_load(p) for p in args.sessions]
    with _progress(args, "fitting the members") as update:
        analysis = fit_sequence(sessions, args.degree, _where(args), args.workers, update)
    ref = analysis.members[0]
    electrons = ref["Z"] - ref["charge"]
    new = r = None
    if args.Z is not None:
        charge = args.Z - electrons if args.charge is None else args.charge
        new = new_member(analysis, args.Z, charge, name=args.name or "")
        r = new.report()
        if args.write:
            new.save(args.write)
    at = []  # values of the laws at other Z (each with its Hartree-Fock run)
    for z in args.at or []:
        if z - electrons < 0:
            raise FinefitError(f"--at {z}: fewer protons than the sequence's {electrons} "
                               "electrons", "--at")
        other = new_member(analysis, z, z - electrons)
        ps = next(x for x in other.parameter_sets if x.name == "sequence trends")
        at.append((z, {n: (p.value, ps.errors.get(n)) for n, p in other.parameters.items()}))
    written = []
    fig = _figures(args)
    if fig:
        for ext in fig[1]:
            written.append(str(rep.sequence_figure(analysis, fig[0] / f"sequence.{ext}", new)))
    if args.json:
        out = analysis.to_dict()
        if new is not None:
            ps = next(x for x in new.parameter_sets if x.name == "sequence trends")
            out["prediction"] = {
                "Z": new.ion.Z, "charge": new.ion.charge, "name": new.ion.name,
                "parameters": [{"name": n, "value": p.value, "uncertainty": ps.errors.get(n),
                                "ab_initio": p.ab_initio, "vary": p.vary}
                               for n, p in new.parameters.items()],
                "levels": r.to_dict()["predictions"],
            }
        out["at"] = [{"Z": z, "charge": z - electrons,
                      "parameters": [{"name": n, "value": v, "uncertainty": u}
                                     for n, (v, u) in vals.items()]} for z, vals in at]
        out["figures"] = written
        out["session_written"] = args.write
        _json(out)
        return EXIT_OK
    con = _console(args)
    con.print(rep.member_table(analysis))
    con.print(rep.trend_table(analysis))
    if at:
        con.print(rep.values_at_table(at))
    if new is not None:
        con.print(rep.prediction_table(new))
        print_table(con, rep.predicted_levels_table(r))
    for w in analysis.warnings:
        con.print(f"[yellow]warning: {w}[/yellow]")
    if args.write:
        con.print(f"wrote {args.write}: starting values and ab initio values of the new ion")
    if written:
        con.print("wrote " + ", ".join(written))
    return EXIT_OK


def cmd_resample(args) -> int:
    from finefit.cli import _console, _json, _load
    from finefit.refits import resample
    from finefit.reports import sequence as rep
    from finefit.reports.tables import print_table

    if args.runs < 2:
        raise FinefitError("--runs must be at least 2", "--runs")
    s = _load(args.session)
    with _progress(args, f"{args.method}: refits") as update:
        res = resample(s, args.runs, args.method, args.seed, _where(args), args.workers, update)
    written = []
    fig = _figures(args)
    if fig:
        for ext in fig[1]:
            written.append(str(rep.histogram_figure(res, fig[0] / f"{args.method}.{ext}")))
            written.append(str(rep.level_spread_figure(
                res, fig[0] / f"{args.method}_levels.{ext}")))
    if args.json:
        out = res.to_dict()
        out["figures"] = written
        _json(out)
        return EXIT_OK
    con = _console(args)
    con.print(f"{args.method}: {res.n_ok} of {res.runs} refits used (seed {res.seed}); "
              f"{res.perturbation}")
    con.print(rep.spread_table(res.parameters, "Parameters: refit spread against the "
                               "covariance error (cm-1)"))
    if args.levels or any(x.flagged for x in res.levels):
        print_table(con, rep.spread_table(
            res.levels, "Levels: refit spread against the propagated error (cm-1)"
            + ("" if args.levels else "; only those that differ"), flagged_only=not args.levels))
    for w in res.warnings:
        con.print(f"[yellow]warning: {w}[/yellow]")
    if written:
        con.print("wrote " + ", ".join(written))
    return EXIT_OK


def _cluster_options(sp: argparse.ArgumentParser) -> None:
    g = sp.add_mutually_exclusive_group()
    g.add_argument("--scheduler", metavar="ADDRESS",
                   help="run the fits on an existing dask scheduler, e.g. tcp://host:8786 "
                   "(default: a LocalCluster of this machine)")
    g.add_argument("--serial", action="store_true", help="run the fits in this process")
    sp.add_argument("--workers", type=int, help="workers of the LocalCluster (default: cores)")
    sp.add_argument("--figures", metavar="DIR", help="write figures into DIR")
    sp.add_argument("--format", nargs="+", default=["png", "pdf"], choices=("png", "pdf", "svg"),
                    help="figure formats (default png pdf)")
    sp.add_argument("--json", action="store_true", help="print JSON for scripts")


def register(sub) -> None:
    """Add the two commands to the ``finefit`` sub-command parser."""
    help_ = ("fit the members of an isoelectronic sequence, follow each parameter and its "
             "ratio to Hartree-Fock against Z, and predict a new member")
    sp = sub.add_parser("sequence", help=help_, description=help_)
    sp.add_argument("sessions", nargs="+", help="session files of one sequence (same "
                    "configurations, different Z)")
    sp.add_argument("--Z", type=int, help="nuclear charge of the member to predict")
    sp.add_argument("--charge", type=int, help="its ion charge (default: from the "
                    "sequence's number of electrons)")
    sp.add_argument("--at", type=int, nargs="+", metavar="Z",
                    help="also give the parameters interpolated or extrapolated to these Z")
    sp.add_argument("--name", help="its name for reports, e.g. 'Cr V'")
    sp.add_argument("--degree", type=int, default=1,
                    help="degree of the polynomial law in Z (default 1; lowered when fewer "
                    "members determine a parameter)")
    sp.add_argument("--write", metavar="FILE", help="save the new member's session")
    sp.add_argument("--force", action="store_true", help="overwrite the file of --write")
    _cluster_options(sp)
    sp.set_defaults(func=cmd_sequence)

    help_ = ("uncertainties from refits of perturbed (Monte Carlo) or resampled (bootstrap) "
             "levels, against the covariance errors")
    sp = sub.add_parser("resample", help=help_, description=help_)
    sp.add_argument("session", help="session file (TOML)")
    sp.add_argument("--runs", type=int, default=100, help="number of refits (default 100)")
    sp.add_argument("--method", choices=("montecarlo", "bootstrap"), default="montecarlo")
    sp.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    sp.add_argument("--levels", action="store_true",
                    help="list every level (default: only levels whose spread differs)")
    _cluster_options(sp)
    sp.set_defaults(func=cmd_resample)
