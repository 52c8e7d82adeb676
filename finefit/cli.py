"""The ``finefit`` command line.

Exit status: 0 ok, 1 fit not converged, 2 bad input (a message names the item; nothing
was written), 3 internal error (a defect of finefit: please report it).
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from pathlib import Path
from typing import TYPE_CHECKING

from finefit.errors import FinefitError, clip_message, quote
from finefit.fitting.validation import MAX_G, MAX_MAGNITUDE, parse_number
from finefit.notation.jvalues import format_j
from finefit.storage.atomic import check_path

if TYPE_CHECKING:
    from rich.console import Console

EXIT_OK, EXIT_NOT_CONVERGED, EXIT_BAD_INPUT, EXIT_INTERNAL = 0, 1, 2, 3

CAUTION = (
    "Calculated energies, compositions and predictions come from a parametric model: "
    "check them against the spectrum before using them as identifications."
)


# numpy, rich and the engine are imported when a command runs, not for `--help`
def Table(*args, **kwargs):  # noqa: N802 - stands in for rich.table.Table
    from rich.table import Table as _Table

    return _Table(*args, **kwargs)


def Text(*args, **kwargs):  # noqa: N802 - stands in for rich.text.Text
    from rich.text import Text as _Text

    return _Text(*args, **kwargs)


def _console(args) -> Console:
    from rich.console import Console

    return Console(no_color=bool(os.environ.get("NO_COLOR")) or getattr(args, "json", False))


def _err_console() -> Console:
    from rich.console import Console

    return Console(stderr=True, no_color=bool(os.environ.get("NO_COLOR")))


def _load(path: str):
    from finefit.session import Session

    with _err_console().status("reading the session and building the energy matrices"):
        s = Session.load(path)
    for w in s.warnings:
        _err_console().print(Text("finefit: warning: " + w, style="yellow"))
    return s


# Largest grid a level search may score (a few arrays of this many float64 each).
MAX_SEARCH_POINTS = 10_000_001


class _Parser(argparse.ArgumentParser):
    """argparse with messages that quote at most about 80 characters of a token."""

    def error(self, message: str):  # type: ignore[override]
        super().error(clip_message(message))


def _number_arg(what: str, *, positive: bool = False, nonnegative: bool = False,
                limit: float = MAX_MAGNITUDE):
    """An argparse type: a finite number in ASCII digits (no nan, inf, other scripts)."""

    def convert(text: str) -> float:
        try:
            return parse_number(text, what, positive=positive, nonnegative=nonnegative,
                                limit=limit)
        except FinefitError as exc:
            raise argparse.ArgumentTypeError(str(exc)) from None

    convert.__name__ = "number"
    return convert


def _int_arg(what: str, lo: int, hi: int):
    """An argparse type: a whole number lo..hi written with ASCII digits."""

    def convert(text: str) -> int:
        t = text.strip()
        if not t.isascii() or not t.lstrip("+-").isdigit():
            raise argparse.ArgumentTypeError(f"{what} needs a whole number, got {quote(text)}")
        v = int(t)
        if not lo <= v <= hi:
            raise argparse.ArgumentTypeError(f"{what} must be in {lo}..{hi}, got {v}")
        return v

    convert.__name__ = "whole number"
    return convert


def _write_session(s) -> None:
    """Save the session (validated as the reader will read it) and show its warnings."""
    s.save()
    for w in s.warnings:
        _err_console().print(Text("finefit: warning: " + w, style="yellow"))


def _guard(args):
    from finefit.storage.outputs import OutputGuard, session_companions

    return OutputGuard(session_companions(args.session), force=bool(args.force))


def _json(obj) -> None:
    print(json.dumps(obj, indent=2, ensure_ascii=False, allow_nan=False))


# ----------------------------------------------------------------------------- commands
def cmd_new(args) -> int:
    from finefit.session import Session

    path = Path(args.session)
    if path.exists() and not args.force:
        raise FinefitError(f"{path} exists already (use --force to overwrite)", str(path))
    with _err_console().status("building the energy matrices"):
        s = Session.new(args.config, Z=args.Z, charge=args.charge,
                        ionization_limit=args.limit, name=args.name or "", title=args.title or "")
    s.save(path)
    for w in s.warnings:
        _err_console().print(Text("finefit: warning: " + w, style="yellow"))
    con = _console(args)
    n = sum(len(m.parameters) for m in s.models.values())
    con.print(f"created {path}: {', '.join(s.configurations)}; {n} parameters")
    return EXIT_OK


def cmd_params(args) -> int:
    s = _load(args.session)
    if args.json:
        _json([
            {"name": n, "value": p.value, "vary": p.vary, "min": p.min, "max": p.max,
             "link": p.link, "ab_initio": p.ab_initio}
            for n, p in s.parameters.items()
        ])
        return EXIT_OK
    tab = Table(title=f"Parameters of {args.session} (cm-1)", title_justify="left")
    for c in ("parameter", "value", "vary", "link", "min", "max", "ab initio"):
        tab.add_column(c, justify="right" if c in ("value", "min", "max", "ab initio") else "left")
    for n, p in s.parameters.items():
        tab.add_row(Text(n), f"{p.value:.2f}", "vary" if p.vary else "fixed", p.link or "",
                    "" if p.min is None else f"{p.min:g}", "" if p.max is None else f"{p.max:g}",
                    "" if p.ab_initio is None else f"{p.ab_initio:.1f}")
    _console(args).print(tab)
    return EXIT_OK


def cmd_set(args) -> int:
    s = _load(args.session)
    vary = True if args.vary else (False if args.fix else None)
    kw = {}
    if args.link is not None:
        kw["link"] = args.link
    if args.unlink:
        kw["link"] = None
    if args.min is not None:
        kw["min"] = None if args.min.lower() == "none" else _float(args.min, "--min")
    if args.max is not None:
        kw["max"] = None if args.max.lower() == "none" else _float(args.max, "--max")
    names = _match_parameters(s, args.name)
    for n in names:
        s.set_parameter(n, None if args.value is None else _float(args.value, "--value"),
                        vary, **kw)
    _write_session(s)
    _console(args).print(f"changed {len(names)} parameter(s): {', '.join(names)}")
    return EXIT_OK


def _match_parameters(s, pattern: str) -> list[str]:
    import fnmatch

    if pattern in s.parameters:
        return [pattern]
    hits = [n for n in s.parameters if fnmatch.fnmatchcase(n, pattern)]
    if not hits:
        raise FinefitError(f"no parameter matches {quote(pattern)}", pattern)
    return hits


def _float(text: str, what: str, **kw) -> float:
    """A finite number in ASCII digits within physical magnitudes (else exit 2)."""
    return parse_number(text, what, **kw)


def _print_result(con: Console, s, r, args) -> None:
    from finefit.reports import tables

    con.print(tables.summary_text(r))
    con.print(tables.parameter_table(r, s.parameters, width=con.width))
    tables.print_table(con, tables.level_table(r, width=con.width))
    corr = tables.correlation_table(r)
    if corr is not None:
        con.print(corr)
    if getattr(args, "predictions", False):
        tables.print_table(con, tables.prediction_table(r))
    for w in r.warnings:
        con.print(Text("warning: " + w, style="yellow"))
    if r.next_steps:
        con.print(Text("What to check next:", style="bold"))
        for step in r.next_steps:
            con.print(Text("  - " + step))
    con.print(Text(CAUTION, style="dim"))


def cmd_fit(args) -> int:
    from rich.progress import Progress, SpinnerColumn, TextColumn

    s = _load(args.session)
    if args.keep is not None:
        s.check_set_name(args.keep)  # before the fit: a bad name must not cost a fit
    con = _console(args)
    show = not args.json and sys.stderr.isatty()
    with Progress(SpinnerColumn(), TextColumn("{task.description}"), console=_err_console(),
                  transient=True, disable=not show) as prog:
        task = prog.add_task("fitting", total=None)

        def progress(it: int, rms: float) -> None:
            prog.update(task, description=f"fitting: evaluation {it}, rms {rms:.3f} cm-1")

        r = s.fit(progress=progress, starts=args.starts, seed=args.seed)
    if (args.write or args.keep) and not r.converged and not args.force:
        if args.json:
            _json(r.to_dict())
        else:
            _print_result(con, s, r, args)
        raise FinefitError(
            "the fit did not converge: nothing written (give --force to store it anyway)",
            "--write" if args.write else "--keep",
        )
    if args.write:
        s.apply(r)
    if args.keep is not None:
        s.keep(r, args.keep)
    if args.write or args.keep is not None:
        _write_session(s)
    if args.json:
        _json(r.to_dict())
    else:
        _print_result(con, s, r, args)
        if args.write or args.keep is not None:
            con.print(f"saved {s.path}")
    return EXIT_OK if r.converged or not r.fitted else EXIT_NOT_CONVERGED


def cmd_check(args) -> int:
    s = _load(args.session)
    r = s.report()
    if args.json:
        _json(r.to_dict())
    else:
        _print_result(_console(args), s, r, args)
    return EXIT_OK


def cmd_levels(args) -> int:
    s = _load(args.session)
    sols = s.solve(args.parity)
    rows = []
    for parity, sol in sols.items():
        for lev in sol.levels:
            scheme = sol.best_scheme(lev)
            comps = sol.composition(lev, scheme, top=3)
            rows.append((parity, lev, scheme, comps))
    if args.json:
        _json([
            {"parity": p, "J": lev.J, "energy": lev.energy, "label": lev.label,
             "configuration": lev.configuration, "purity_LS": lev.purity, "g": lev.g,
             "best_scheme": sch,
             "components": [{"label": c.label, "fraction": c.fraction} for c in comps]}
            for p, lev, sch, comps in rows
        ])
        return EXIT_OK
    tab = Table(title=f"Computed levels of {args.session} (cm-1)", title_justify="left")
    for c, j in (("parity", "left"), ("J", "right"), ("energy", "right"), ("label", "left"),
                 ("LS purity", "right"), ("leading components", "left"), ("g", "right")):
        tab.add_column(c, justify=j)
    for p, lev, _sch, comps in rows:
        tab.add_row(p, format_j(lev.J), f"{lev.energy:.2f}", Text(lev.label),
                    f"{100 * lev.purity:.0f}%",
                    Text("  ".join(f"{100 * c.fraction:.0f}% {c.label}" for c in comps)),
                    f"{lev.g:.4f}")
    from finefit.reports.tables import print_table

    con = _console(args)
    print_table(con, tab)
    con.print(Text(CAUTION, style="dim"))
    return EXIT_OK


def cmd_attach(args) -> int:
    s = _load(args.session)
    state = args.state
    if state.lower() == "none":
        value = None
    elif state.strip().isascii() and state.strip().isdigit():
        value = int(state)
    else:
        value = state
    s.attach(args.level, value)
    s.problem()  # the state must exist before anything is written
    _write_session(s)
    _console(args).print(f"level {args.level} attached to {state}")
    return EXIT_OK


def cmd_edit(args) -> int:
    s = _load(args.session)
    changes = {}
    for item in args.changes:
        if "=" not in item:
            raise FinefitError(f"{quote(item)} must look like field=value, e.g. label='3d7 4F'",
                               item)
        key, value = item.split("=", 1)
        key = key.strip()
        if key in ("energy", "uncertainty", "g"):
            if key == "energy" and value.lower() in ("", "none"):
                raise FinefitError("energy cannot be removed: a level needs one", key)
            changes[key] = None if value.lower() in ("", "none") else _float(
                value, key, positive=(key == "uncertainty"),
                limit=MAX_G if key == "g" else MAX_MAGNITUDE)
        elif key == "include":
            if value.lower() not in ("yes", "no", "true", "false"):
                raise FinefitError(f"include must be yes or no, got {quote(value)}", key)
            changes[key] = value.lower() in ("yes", "true")
        elif key == "state":
            changes[key] = None if value.lower() in ("", "none") else (
                int(value) if value.isascii() and value.isdigit() else value)
        else:
            changes[key] = value or None
    lv = s.update_level(args.level, **changes)
    s.problem()  # labels, J counts and attachments must still make sense
    _write_session(s)
    _console(args).print(f"level {lv.id}: "
                         + ", ".join(f"{k} = {quote(v)}" for k, v in changes.items()))
    return EXIT_OK


def cmd_include(args, include: bool) -> int:
    s = _load(args.session)
    for lid in args.level:
        s.update_level(lid, include=include)
    _write_session(s)
    _console(args).print(f"{'included' if include else 'excluded'}: {', '.join(args.level)}")
    return EXIT_OK


def _columns(spec: str | None) -> dict[str, str] | None:
    if not spec:
        return None
    out = {}
    for part in spec.split(","):
        if "=" not in part:
            raise FinefitError(
                f"column mapping {part!r} must look like field=column, e.g. energy=E", part
            )
        k, v = part.split("=", 1)
        out[k.strip()] = v.strip()
    return out


def cmd_import(args) -> int:
    from finefit.storage.atomic import read_text
    from finefit.storage.level_tables import is_compilation_table, read_levels

    s = _load(args.session)
    con = _console(args)
    text = read_text(args.table, "level table")
    if args.columns is None and args.format is None and is_compilation_table(text):
        # the compilations' layout, taken as it is
        if args.replace:
            s.levels = []
        rep = s.import_levels(args.table, include_derived=args.use_derived)
        s.problem()  # validates J counts and labels before anything is written
        s.save()
        if args.json:
            _json(rep.as_dict())
            return EXIT_OK
        for line in rep.summary():
            con.print(line, highlight=False, markup=False)
        if args.verbose:
            for ln, why in rep.skipped:
                con.print(f"  line {ln}: {why}", highlight=False, markup=False)
            for lid, why in rep.unlabelled:
                con.print(f"  {lid}: no label ({why})", highlight=False, markup=False)
        con.print(f"saved {s.path}", highlight=False)
        return EXIT_OK
    defaults = {}
    if args.parity:
        defaults["parity"] = args.parity
    if args.configuration:
        defaults["configuration"] = args.configuration
    bad: list[tuple[int, str]] = []
    levels = read_levels(args.table, _columns(args.columns), args.format, defaults,
                         id_start=1 if args.replace else len(s.levels) + 1,
                         skip_bad=args.skip_bad, bad_rows=bad)
    if args.replace:
        s.levels = []
    used = {lv.id for lv in s.levels}
    kept = []
    for lv in levels:
        try:
            if lv.id in used:
                raise FinefitError(f"level id {lv.id!r} exists in the session", lv.id)
            s._check_level(lv)
        except FinefitError as exc:
            if not args.skip_bad:
                raise FinefitError(f"{args.table}: {exc}", lv.id) from None
            bad.append((0, f"{lv.id}: {exc}"))
            continue
        used.add(lv.id)
        kept.append(lv)
    s.levels.extend(kept)
    s.problem()  # validates J counts and labels before anything is written
    s.save()
    if args.json:
        _json({"imported": len(kept), "skipped": [{"line": ln, "reason": r} for ln, r in bad]})
        return EXIT_OK
    con.print(f"imported {len(kept)} levels into {s.path}", highlight=False)
    for ln, why in bad:
        con.print(f"  skipped{f' line {ln}' if ln else ''}: {why}", highlight=False,
                  markup=False)
    return EXIT_OK


def cmd_export(args) -> int:
    from finefit.storage.level_tables import format_levels

    s = _load(args.session)
    guard = _guard(args)
    guard.check([args.output])
    fmt = args.format or {".csv": "csv", ".tsv": "tsv"}.get(Path(args.output).suffix.lower(),
                                                           "txt")
    p = guard.write(args.output, format_levels(s.levels, fmt))
    _console(args).print(f"wrote {len(s.levels)} levels to {p}")
    return EXIT_OK


def cmd_sets(args) -> int:
    s = _load(args.session)
    con = _console(args)
    action = args.action
    if action == "list":
        if args.json:
            _json([{"name": ps.name, "created": ps.created, "sigma": ps.sigma,
                    "n_levels": ps.n_levels, "n_free": ps.n_free, "converged": ps.converged}
                   for ps in s.parameter_sets])
            return EXIT_OK
        tab = Table(title="Saved parameter sets", title_justify="left")
        for c in ("name", "created", "sigma", "N levels", "N free", "converged"):
            tab.add_column(c)
        for ps in s.parameter_sets:
            tab.add_row(Text(ps.name), ps.created,
                        "—" if ps.sigma is None else f"{ps.sigma:.3f}",
                        str(ps.n_levels), str(ps.n_free), "yes" if ps.converged else "no")
        con.print(tab)
        return EXIT_OK
    if not args.names:
        raise FinefitError(f"'sets {action}' needs a set name", "name")
    if action == "show":
        ps = s.parameter_set(args.names[0])
        if args.json:
            _json({"name": ps.name, "created": ps.created, "sigma": ps.sigma,
                   "values": ps.values, "errors": ps.errors, "included": ps.included})
            return EXIT_OK
        tab = Table(title=f"Parameter set {ps.name!r} ({ps.created})", title_justify="left")
        tab.add_column("parameter")
        tab.add_column("value", justify="right")
        tab.add_column("error", justify="right")
        for n, v in ps.values.items():
            e = ps.errors.get(n)
            tab.add_row(Text(n), f"{v:.2f}", "" if not e else f"{e:.2f}")
        con.print(tab)
        return EXIT_OK
    if action == "compare":
        if len(args.names) != 2:
            raise FinefitError("'sets compare' needs two set names", "name")
        rows = s.compare_sets(*args.names)
        if args.json:
            _json(rows)
            return EXIT_OK
        a, b = args.names
        tab = Table(title=f"{a!r} → {b!r}", title_justify="left")
        for c in ("parameter", a, b, "change", "in std. errors"):
            tab.add_column(c, justify="left" if c == "parameter" else "right")
        for row in rows:
            z = row["in_errors"]
            tab.add_row(Text(row["name"]),
                        "—" if row["a"] is None else f"{row['a']:.2f}",
                        "—" if row["b"] is None else f"{row['b']:.2f}",
                        "—" if row["change"] is None else f"{row['change']:+.2f}",
                        Text("—" if z is None else f"{z:+.1f}",
                             style="bold" if z is not None and abs(z) > 2 else ""))
        con.print(tab)
        return EXIT_OK
    if action == "use":
        s.use_set(args.names[0])
        _write_session(s)
        con.print(f"values of set {quote(args.names[0])} are now the session's starting values")
        return EXIT_OK
    if action == "remove":
        s.remove_set(args.names[0])
        _write_session(s)
        con.print(f"removed set {quote(args.names[0])}")
        return EXIT_OK
    raise FinefitError(f"unknown sets action {quote(action)}", action)


def cmd_abinitio(args) -> int:
    from rich.progress import Progress, SpinnerColumn, TextColumn

    s = _load(args.session)
    if args.zeta not in ("blume-watson", "central-field"):
        raise FinefitError(
            f"--zeta {args.zeta!r}: use 'blume-watson' or 'central-field'", args.zeta
        )
    scales = {}
    for item in args.scale or []:
        if "=" not in item:
            raise FinefitError(f"--scale {quote(item)} must look like F=0.85", item)
        k, v = item.split("=", 1)
        if k not in ("F", "G", "R", "zeta"):
            raise FinefitError(f"--scale {quote(k)}: use F, G, R or zeta", k)
        scales[k] = _float(v, f"--scale {k}", positive=True, limit=10.0)
    show = sys.stderr.isatty()
    with Progress(SpinnerColumn(), TextColumn("{task.description}"), console=_err_console(),
                  transient=True, disable=not show) as prog:
        task = prog.add_task("ab initio values", total=None)
        res = s.fill_ab_initio(scales, set_values=not args.keep_values,
                               relativistic=args.relativistic,
                               progress=lambda msg: prog.update(task, description=msg),
                               zeta_method=args.zeta)
    _write_session(s)
    con = _console(args)
    tab = Table(title="Ab initio values (cm-1; configuration-average Hartree-Fock)",
                title_justify="left")
    for c in ("parameter", "ab initio", "start"):
        tab.add_column(c, justify="left" if c == "parameter" else "right")
    for n, v in res.ab_initio.items():
        tab.add_row(Text(n), f"{v:.1f}", "" if args.keep_values else f"{res.start[n]:.1f}")
    con.print(tab)
    for n, why in res.skipped.items():
        con.print(Text(f"no ab initio value for {n}: {why}", style="yellow"))
    con.print(f"saved {s.path}")
    return EXIT_OK


def cmd_lines(args) -> int:
    s = _load(args.session)
    radial = {}
    for item in args.radial or []:
        try:
            pair, value = item.split("=", 1)
            a, b = (x.strip() for x in pair.split(","))
        except ValueError:
            raise FinefitError(f"--radial {quote(item)} must look like 3s,3p=4.5", item) from None
        # radial dipole integrals are a few bohr; 1e4 bohr is far beyond any bound orbital
        radial[(a, b)] = _float(value, f"--radial {quote(pair)}", limit=1e4)
    air_range = (0.0, 0.0) if args.vacuum else tuple(args.air_range)
    if not args.vacuum and not air_range[0] < air_range[1]:
        raise FinefitError(f"--air-range {air_range[0]:g} {air_range[1]:g}: FROM must be below "
                           "TO", "--air-range")
    opt = None
    if args.optimise:
        opt = s.optimise_levels(args.optimise)  # for the Ritz covariance; nothing stored
    with _err_console().status("line strengths (Hartree-Fock for missing radial integrals)"):
        lines, used = s.predict_lines(radial, air_range=air_range,
                                      observed=not args.calculated, optimised=opt)
    lines = [x for x in lines if x.gf >= args.min_gf][: args.limit]
    if args.json:
        _json({
            "radial_integrals": [{"a": a, "b": b, "bohr": v} for (a, b), v in used.items()],
            "lines": [
                {"lower": {"J": x.lower.J, "energy": x.lower.energy, "label": x.lower.label},
                 "upper": {"J": x.upper.J, "energy": x.upper.energy, "label": x.upper.label},
                 "wavenumber": x.wavenumber, "vacuum_wavelength": x.vacuum_wavelength,
                 "air_wavelength": x.air_wavelength, "S": x.S, "gf": x.gf, "A": x.A,
                 "wavenumber_uncertainty": x.wavenumber_uncertainty,
                 "wavelength_uncertainty": x.wavelength_uncertainty, "from": x.source,
                 "lower_id": x.lower_id, "upper_id": x.upper_id}
                for x in lines
            ],
        })
        return EXIT_OK
    con = _console(args)
    tab = Table(title="Predicted electric-dipole lines (strongest first)", title_justify="left")
    for c in ("λ air (Å)", "λ vac (Å)", "σ (cm-1)", "±", "from", "lower", "J", "upper", "J'",
              "gf", "A (s-1)"):
        tab.add_column(c, justify="left" if c in ("lower", "upper", "from") else "right")
    from finefit.reports.levelopt import decimals

    for x in lines:
        d = min(decimals(x.wavenumber_uncertainty, 2), 4)  # two digits of the uncertainty
        dl = min(decimals(x.wavelength_uncertainty, 3), 5)
        tab.add_row("" if x.air_wavelength is None else f"{x.air_wavelength:.{dl}f}",
                    f"{x.vacuum_wavelength:.{dl}f}", f"{x.wavenumber:.{d}f}",
                    "" if x.wavenumber_uncertainty is None else
                    f"{x.wavenumber_uncertainty:.{d}f}", x.source,
                    Text(x.lower_id or x.lower.label), format_j(x.lower.J),
                    Text(x.upper_id or x.upper.label), format_j(x.upper.J),
                    f"{x.gf:.3g}", f"{x.A:.3g}")
    con.print(tab)
    con.print("from: Ritz = both levels observed (their ids shown); obs/calc = one observed; "
              "calc = calculated energies (labels shown)")
    con.print("radial integrals (bohr): " + ", ".join(
        f"<{a}|r|{b}> = {v:.4f}" for (a, b), v in used.items()))
    con.print(Text(CAUTION + " Ab initio gf values are typically good to tens of per cent.",
                   style="dim"))
    return EXIT_OK


def cmd_classify(args) -> int:
    import numpy as np

    from finefit.lines.classify import classify_lines
    from finefit.storage.line_tables import read_lines

    s = _load(args.session)
    ll = read_lines(args.lines, args.medium)
    c = classify_lines(s.known_levels(), ll.wavenumber, args.tolerance, ll.uncertainty
                       if ll.uncertainty is not None and np.all(np.isfinite(ll.uncertainty))
                       else None)
    if args.json:
        _json({
            "n_lines": int(ll.wavenumber.size), "n_classified": c.n_classified,
            "lines": [{"line": int(ll.source_lines[i]), "wavenumber": float(ll.wavenumber[i]),
                       "matches": [{"lower": a, "upper": b, "obs_minus_ritz": d}
                                   for a, b, d in c.matches[i]]}
                      for i in range(ll.wavenumber.size)],
            "unclassified": [int(ll.source_lines[i]) for i in c.unclassified],
            "disagreeing_levels": c.disagreeing,
        })
        return EXIT_OK
    con = _console(args)
    con.print(f"{c.n_classified} of {ll.wavenumber.size} lines classified within "
              f"{args.tolerance} cm-1; {len(c.unclassified)} unclassified")
    tab = Table(title="Levels and their lines", title_justify="left")
    for col in ("level", "lines", "mean (obs-Ritz)/u"):
        tab.add_column(col, justify="left" if col == "level" else "right")
    for lid, (n, mean) in sorted(c.level_offsets.items()):
        tab.add_row(Text(lid + (" (disagrees)" if lid in c.disagreeing else "")), str(n),
                    f"{mean:+.2f}")
    con.print(tab)
    if len(c.unclassified):
        un = Table(title="Unclassified lines", title_justify="left")
        for col in ("file line", "wavenumber (cm-1)", "intensity"):
            un.add_column(col, justify="right")
        for i in c.unclassified[: args.limit]:
            inten = "" if ll.intensity is None or not np.isfinite(ll.intensity[i]) else \
                f"{ll.intensity[i]:g}"
            un.add_row(str(ll.source_lines[i]), f"{ll.wavenumber[i]:.4f}", inten)
        con.print(un)
    if c.disagreeing:
        con.print(Text("levels whose lines disagree: " + ", ".join(c.disagreeing),
                       style="yellow"))
    return EXIT_OK


def cmd_search(args) -> int:
    from finefit.notation.jvalues import parse_j
    from finefit.storage.line_tables import read_lines

    s = _load(args.session)
    points = 2 * args.window / args.step + 1
    if points > MAX_SEARCH_POINTS:
        raise FinefitError(
            f"--window {args.window:g} with --step {args.step:g} makes {points:.3g} trial "
            f"energies; at most {MAX_SEARCH_POINTS - 1:.0e} are scored (a wider step or a "
            "narrower window)", "--step")
    ll = read_lines(args.lines, args.medium)
    parse_j(args.J, "--J")
    with _err_console().status("searching (predicted strengths need line strengths)"):
        cands, weights = s.search_level(ll.wavenumber, args.J, args.parity, args.energy,
                                        args.tolerance, args.window, args.step,
                                        weighted=not args.unweighted, top=args.top)
    if args.json:
        _json([{"energy": x.energy, "score": x.score,
                "lines": [{"wavenumber": a, "level": b, "weight": w} for a, b, w in x.lines]}
               for x in cands])
        return EXIT_OK
    con = _console(args)
    if weights is None:
        con.print("lines counted alike (no predicted strengths)")
    else:
        con.print("lines weighted by predicted gf relative to the strongest")
    tab = Table(title=f"Candidate positions for J = {args.J} ({args.parity}) near "
                f"{args.energy} cm-1", title_justify="left")
    for col in ("energy", "score", "lines explained (wavenumber -> known level)"):
        tab.add_column(col, justify="left" if col.startswith("lines") else "right")
    for x in cands:
        tab.add_row(f"{x.energy:.3f}", f"{x.score:.2f}",
                    Text("  ".join(f"{a:.3f}→{b}" for a, b, _ in x.lines)))
    con.print(tab)
    con.print(Text("A candidate is only a suggestion: confirm it with intensities, g-factors "
                   "or isotope structure before adopting the level.", style="dim"))
    return EXIT_OK


def cmd_optimise(args) -> int:
    from finefit.reports import levelopt as rep
    from finefit.storage.atomic import atomic_write_text
    from finefit.storage.line_tables import read_lines

    s = _load(args.session)
    ll = read_lines(args.lines, args.medium)
    opt = s.optimise_levels(ll, args.tolerance, args.reference, args.blends,
                            uncertainty=args.uncertainty, source=args.lines,
                            exclude=args.exclude or ())
    labels = {lv.id: lv.label or "" for lv in s.levels}
    shown = opt.lines
    if args.level:
        lid = s.resolve_level(args.level, "--level")
        shown = opt.lines_of(lid)
    if args.flagged:
        shown = [x for x in shown if x.flags and x.flags != ("defines level",)]
    written = []
    if args.export:
        out = Path(args.export)
        for name, text in rep.publication_tables(opt, labels, s.ion.name).items():
            written.append(atomic_write_text(out / name, text, backup=True))
    record = None
    if args.write:
        record = s.apply_levels(opt, args.name)
        s.save()
    if args.json:
        d = opt.to_dict()
        d["unclassified"] = [{"line": int(ll.source_lines[i]),
                              "wavenumber": float(ll.wavenumber[i])} for i in opt.unclassified]
        d["level_set"] = None if record is None else record.name
        _json(d)
        return EXIT_OK
    con = _console(args)
    con.print(rep.summary_text(opt, ll.wavenumber.size))
    con.print(rep.level_table(opt, labels))
    title = "Classified lines with Ritz values"
    if args.level:
        title = f"Lines of {args.level}"
    if args.flagged:
        title += " (flagged only)"
    con.print(rep.line_table(opt, shown[: args.limit], title, width=con.width))
    if len(shown) > args.limit:
        con.print(f"... {len(shown) - args.limit} more (--limit)")
    if len(opt.unclassified):
        con.print(f"{len(opt.unclassified)} unclassified line(s) stay for the level search: "
                  + ", ".join(f"{ll.wavenumber[i]:.3f}" for i in opt.unclassified[:20])
                  + (" ..." if len(opt.unclassified) > 20 else ""))
    if opt.unconnected:
        con.print(f"levels without classified lines (unchanged): {', '.join(opt.unconnected)}")
    for w in opt.warnings:
        con.print(Text("warning: " + w, style="yellow"))
    n_out = sum(1 for x in opt.lines if "outlier" in x.flags)
    if n_out:
        con.print(Text(f"{n_out} line(s) more than 3 standard deviations from their Ritz "
                       "value: misclassified, blended or mismeasured?", style="yellow"))
    if written:
        con.print("wrote " + ", ".join(str(p) for p in written))
    if record is not None:
        con.print(f"updated {record.n_levels} levels of {s.path} (level set {record.name!r})")
    return EXIT_OK


def cmd_publish(args) -> int:
    from finefit.reports.publication import publication_tables
    from finefit.storage.outputs import check_output_folder

    s = _load(args.session)
    out = check_output_folder(args.output)
    guard = _guard(args)
    names = ("parameters.tex", "parameters.csv", "levels.tex", "levels.csv")
    guard.check([out / n for n in names])
    r = s.fit() if args.fit else s.report()
    tables_ = publication_tables(r, s.ion.name)
    guard.check([out / n for n in tables_])
    written = []
    for name, text in tables_.items():
        written.append(guard.write(out / name, text))
    _console(args).print("wrote " + ", ".join(str(p) for p in written))
    return EXIT_OK if r.converged or not r.fitted else EXIT_NOT_CONVERGED


def cmd_figures(args) -> int:
    from finefit.reports import figures
    from finefit.storage.outputs import check_output_folder

    s = _load(args.session)
    out = check_output_folder(args.output)
    guard = _guard(args)
    stems = ["oc", "levels"] + (["lines"] if set(s.models) == {"even", "odd"} else [])
    guard.check([out / f"{stem}.{ext}" for stem in stems for ext in args.format])
    r = s.fit() if args.fit else s.report()
    written = []
    for ext in args.format:
        written.append(figures.oc_figure(r, out / f"oc.{ext}", guard.write))
        written.append(figures.level_diagram_figure(r, out / f"levels.{ext}", guard.write))
    if set(s.models) == {"even", "odd"}:
        observed = None
        if args.lines:
            from finefit.storage.line_tables import read_lines

            observed = read_lines(args.lines).wavenumber
        lines, _ = s.predict_lines()
        for ext in args.format:
            written.append(figures.stick_spectrum_figure(lines, observed, out / f"lines.{ext}",
                                                         guard.write))
    _console(args).print("wrote " + ", ".join(str(p) for p in written))
    return EXIT_OK


def cmd_workspace(args) -> int:
    from finefit.ui.app import make_app

    app = make_app(args.session, deferred=True)  # levels on screen before the models
    app.run()
    return app.return_code or EXIT_OK  # 2 when the models could not be built


# ----------------------------------------------------------------------------- parser
def build_parser() -> argparse.ArgumentParser:
    p = _Parser(
        prog="finefit",
        description="Term analysis of atomic spectra: fit radial parameters of an "
        "intermediate-coupling Hamiltonian to observed levels.",
    )
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    sub.required = True

    def add(name: str, help_: str, json_flag: bool = True):
        sp = sub.add_parser(name, help=help_, description=help_)
        sp.add_argument("session", help="session file (TOML)")
        if json_flag:
            sp.add_argument("--json", action="store_true", help="print JSON for scripts")
        return sp

    sp = add("new", "create a session from configurations", json_flag=False)
    sp.add_argument("--config", "-c", action="append", required=True,
                    help="a configuration such as '3d6 4s' (repeat for several)")
    sp.add_argument("--Z", type=_int_arg("--Z", 1, 118), required=True, help="nuclear charge")
    sp.add_argument("--charge", type=_int_arg("--charge", 0, 117), default=0,
                    help="ion charge (0 = neutral)")
    sp.add_argument("--limit", type=_number_arg("--limit", positive=True),
                    help="ionization limit in cm-1")
    sp.add_argument("--name", help="ion name for reports, e.g. 'Fe II'")
    sp.add_argument("--title", help="a title for the session")
    sp.add_argument("--force", action="store_true", help="overwrite an existing file")
    sp.set_defaults(func=cmd_new)

    sp = add("abinitio", "Hartree-Fock values of the parameters; scaled starting values",
             json_flag=False)
    sp.add_argument("--scale", action="append", metavar="KIND=FACTOR",
                    help="scale factor per kind (defaults F=0.85 G=0.85 R=0.85 zeta=1.0)")
    sp.add_argument("--keep-values", action="store_true",
                    help="store the ab initio values only; leave the starting values")
    sp.add_argument("--relativistic", action="store_true",
                    help="add mass-velocity and Darwin corrections to E_av")
    sp.add_argument("--zeta", default="blume-watson", metavar="METHOD",
                    help="spin-orbit parameters: Blume-Watson (default) or the central-field "
                         "formula")
    sp.set_defaults(func=cmd_abinitio)

    sp = add("lines", "predicted E1 lines between the session's even and odd levels")
    sp.add_argument("--radial", action="append", metavar="A,B=BOHR",
                    help="radial dipole integral <A|r|B>, e.g. 3s,3p=4.5 (others from "
                    "Hartree-Fock)")
    sp.add_argument("--min-gf", type=_number_arg("--min-gf", nonnegative=True), default=0.0,
                    help="omit weaker lines")
    sp.add_argument("--limit", type=_int_arg("--limit", 0, 10**9), default=50,
                    help="at most this many lines")
    sp.add_argument("--air-range", nargs=2, type=_number_arg("--air-range", positive=True),
                    default=[2000.0, 20000.0],
                    metavar=("FROM", "TO"), help="air wavelengths inside this range, angstrom "
                    "(default 2000 20000, common practice)")
    sp.add_argument("--vacuum", action="store_true", help="vacuum wavelengths only")
    sp.add_argument("--calculated", action="store_true",
                    help="calculated energies throughout (default: Ritz values of the observed "
                    "levels where both are observed)")
    sp.add_argument("--optimise", metavar="LINES",
                    help="optimise the levels from this line list first (not stored) and take "
                    "the Ritz values and their uncertainties from its covariance")
    sp.set_defaults(func=cmd_lines)

    sp = add("classify", "classify an observed line list by Ritz combinations of the levels")
    sp.add_argument("lines", help="line list (wavenumber or wavelength column)")
    sp.add_argument("--tolerance", type=_number_arg("--tolerance", positive=True, limit=1e6),
                    default=0.05, help="cm-1 (default 0.05)")
    sp.add_argument("--medium", choices=("air", "vacuum"), help="medium of the wavelengths")
    sp.add_argument("--limit", type=_int_arg("--limit", 0, 10**9), default=200,
                    help="list at most this many unclassified lines")
    sp.set_defaults(func=cmd_classify)

    sp = add("optimise", "optimise the level energies from a classified line list (Ritz)")
    sp.add_argument("lines", help="line list; 'lower' and 'upper' columns (ids or labels) "
                    "classify it, otherwise it is classified here by Ritz combinations")
    sp.add_argument("--tolerance", type=float, help="classification window, cm-1 (default: "
                    "3 x the line and two level uncertainties combined, at least 0.05)")
    sp.add_argument("--uncertainty", type=float, help="cm-1, for lines without one")
    sp.add_argument("--reference", help="level held fixed (default: the lowest with a line)")
    sp.add_argument("--blends", choices=("exclude", "share"), default="exclude",
                    help="lines with two classifications: left out of the fit (default) or "
                    "shared between them")
    sp.add_argument("--medium", choices=("air", "vacuum"), help="medium of the wavelengths")
    sp.add_argument("--exclude", type=int, action="append", metavar="FILE_LINE",
                    help="keep the line on this file line out of the fit (repeatable)")
    sp.add_argument("--level", help="list only the lines of this level")
    sp.add_argument("--flagged", action="store_true", help="list only flagged lines")
    sp.add_argument("--limit", type=int, default=200, help="list at most this many lines")
    sp.add_argument("--export", metavar="FOLDER",
                    help="write LaTeX and CSV tables of the levels and the Ritz lines")
    sp.add_argument("--write", action="store_true",
                    help="store the optimised energies and uncertainties in the session")
    sp.add_argument("--name", help="name of the level-set record (default: the line list)")
    sp.set_defaults(func=cmd_optimise)

    sp = add("search", "search a missing level among the unclassified lines")
    sp.add_argument("lines", help="line list (wavenumber or wavelength column)")
    sp.add_argument("--J", required=True, help="J of the missing level, e.g. 5/2")
    sp.add_argument("--parity", required=True, choices=("even", "odd"))
    sp.add_argument("--energy", type=_number_arg("--energy"), required=True,
                    help="predicted energy, cm-1")
    sp.add_argument("--window", type=_number_arg("--window", positive=True), default=500.0,
                    help="+- cm-1 (default 500)")
    sp.add_argument("--step", type=_number_arg("--step", positive=True), default=0.01,
                    help="cm-1 (default 0.01)")
    sp.add_argument("--tolerance", type=_number_arg("--tolerance", positive=True, limit=1e6),
                    default=0.05, help="cm-1 (default 0.05)")
    sp.add_argument("--top", type=_int_arg("--top", 1, 100_000), default=10)
    sp.add_argument("--medium", choices=("air", "vacuum"))
    sp.add_argument("--unweighted", action="store_true",
                    help="count every explained line as 1 instead of its predicted gf")
    sp.set_defaults(func=cmd_search)

    sp = add("publish", "LaTeX (booktabs) and CSV tables of parameters and levels",
             json_flag=False)
    sp.add_argument("output", help="folder for parameters.tex/.csv and levels.tex/.csv")
    sp.add_argument("--fit", action="store_true", help="fit first (default: current values)")
    sp.add_argument("--force", action="store_true",
                    help="overwrite files finefit did not write (kept as .bak)")
    sp.set_defaults(func=cmd_publish)

    sp = add("figures", "O-C, level diagram and stick-spectrum figures (PNG and PDF)",
             json_flag=False)
    sp.add_argument("output", help="folder for the figures")
    sp.add_argument("--fit", action="store_true", help="fit first (default: current values)")
    sp.add_argument("--lines", help="observed line list to draw under the predicted lines")
    sp.add_argument("--format", nargs="+", default=["png", "pdf"], choices=("png", "pdf"))
    sp.add_argument("--force", action="store_true",
                    help="overwrite files finefit did not write (kept as .bak)")
    sp.set_defaults(func=cmd_figures)

    sp = add("workspace", "open the interactive terminal workspace on a session",
             json_flag=False)
    sp.set_defaults(func=cmd_workspace)

    sp = add("fit", "fit the varied parameters to the included levels")
    sp.add_argument("--write", action="store_true", help="store the fitted values in the session")
    sp.add_argument("--keep", metavar="NAME", help="save the fit as a named parameter set")
    sp.add_argument("--predictions", action="store_true", help="also list unobserved levels")
    sp.add_argument("--starts", type=int, default=1, metavar="N",
                    help="also refit from the ab initio values and random starts (±30 %%); "
                    "keep the best and say how many starts reached it")
    sp.add_argument("--seed", type=int, default=0, help="seed of the random starts")
    sp.add_argument("--force", action="store_true",
                    help="with --write/--keep: store the values even if the fit did not converge")
    sp.set_defaults(func=cmd_fit)

    sp = add("check", "observed vs calculated at the current values (no fit)")
    sp.add_argument("--predictions", action="store_true", help="also list unobserved levels")
    sp.set_defaults(func=cmd_check)

    sp = add("levels", "computed levels at the current values, with compositions")
    sp.add_argument("--parity", choices=("even", "odd"))
    sp.set_defaults(func=cmd_levels)

    sp = add("params", "list the parameters and their settings")
    sp.set_defaults(func=cmd_params)

    sp = add("set", "change parameters (name or a pattern such as '3d7: F*')", json_flag=False)
    sp.add_argument("name")
    sp.add_argument("--value")
    g = sp.add_mutually_exclusive_group()
    g.add_argument("--vary", action="store_true")
    g.add_argument("--fix", action="store_true")
    g2 = sp.add_mutually_exclusive_group()
    g2.add_argument("--link", metavar="GROUP", help="vary together with fixed ratios")
    g2.add_argument("--unlink", action="store_true")
    sp.add_argument("--min", help="lower bound (or 'none')")
    sp.add_argument("--max", help="upper bound (or 'none')")
    sp.set_defaults(func=cmd_set)

    sp = add("attach", "pin an observed level to a computed state (rank or LS label)",
             json_flag=False)
    sp.add_argument("level", help="level id")
    sp.add_argument("state", help="rank of the state within its J (1 = lowest), an LS label, "
                    "or 'none' to let the fit choose")
    sp.set_defaults(func=cmd_attach)

    sp = add("edit", "change fields of an observed level: label, energy, uncertainty, J, ...",
             json_flag=False)
    sp.add_argument("level", help="level id")
    sp.add_argument("changes", nargs="+", metavar="FIELD=VALUE",
                    help="e.g. label='3d6(3H)4s 4H' uncertainty=0.05 include=no")
    sp.set_defaults(func=cmd_edit)

    sp = add("include", "include levels in the fit", json_flag=False)
    sp.add_argument("level", nargs="+")
    sp.set_defaults(func=lambda a: cmd_include(a, True))
    sp = add("exclude", "exclude levels from the fit", json_flag=False)
    sp.add_argument("level", nargs="+")
    sp.set_defaults(func=lambda a: cmd_include(a, False))

    sp = add("import", "read observed levels: a published level list as it is, or a CSV, "
             "TSV or whitespace table with a column mapping")
    sp.add_argument("table")
    sp.add_argument("--columns", help="field=column pairs, e.g. 'energy=E,J=Jval,label=desig'; "
                    "'configuration=' switches a column off")
    sp.add_argument("--format", choices=("csv", "tsv", "txt"))
    sp.add_argument("--parity", choices=("even", "odd"), help="parity of levels without one")
    sp.add_argument("--configuration", help="configuration of levels without one")
    sp.add_argument("--replace", action="store_true", help="replace the session's levels")
    sp.add_argument("--skip-bad", action="store_true",
                    help="import the good rows of a table with bad ones (each is listed)")
    sp.add_argument("--use-derived", action="store_true",
                    help="published lists: fit levels given in brackets (derived, not observed)")
    sp.add_argument("--verbose", action="store_true",
                    help="published lists: list every skipped row and unlabelled level")
    sp.set_defaults(func=cmd_import)

    sp = add("export", "write the observed levels as a table", json_flag=False)
    sp.add_argument("output")
    sp.add_argument("--format", choices=("csv", "tsv", "txt"))
    sp.add_argument("--force", action="store_true",
                    help="overwrite a file finefit did not write (kept as .bak)")
    sp.set_defaults(func=cmd_export)

    sp = add("sets", "saved parameter sets: list, show, compare, use, remove")
    sp.add_argument("action", nargs="?", default="list",
                    choices=("list", "show", "compare", "use", "remove"))
    sp.add_argument("names", nargs="*")
    sp.set_defaults(func=cmd_sets)

    from finefit.cli_sequence import register  # sequence, resample

    register(sub)
    return p


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # usage errors (exit 2) and --help (exit 0) end here
        return int(exc.code or 0) if isinstance(exc.code, int | None) else EXIT_BAD_INPUT
    try:
        for attr in ("session", "output", "lines", "table"):  # file names from the user
            value = getattr(args, attr, None)
            if isinstance(value, str):
                check_path(value)
        from finefit.threads import engine_threads

        with engine_threads():
            return int(args.func(args))
    except FinefitError as exc:
        print(f"finefit: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        _err_console().print("finefit: interrupted")
        return 130
    except MemoryError:
        print("finefit: error: not enough memory for this request (the model or the "
              "requested grid is too large for this machine)", file=sys.stderr)
        return EXIT_BAD_INPUT
    except OSError as exc:  # the system refused a file operation: not a defect of finefit
        if os.environ.get("FINEFIT_DEBUG"):
            raise
        where = f" {quote(exc.filename)}" if getattr(exc, "filename", None) else ""
        print(clip_message(f"finefit: error: cannot access{where}: {exc.strerror or exc}"),
              file=sys.stderr)
        return EXIT_BAD_INPUT
    except Exception as exc:  # noqa: BLE001 - last line of defence: no tracebacks for users
        if os.environ.get("FINEFIT_DEBUG"):
            raise
        print(clip_message(f"finefit: internal error: {type(exc).__name__}: {exc} "
                           "(set FINEFIT_DEBUG=1 for details; please report it)"),
              file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":
    sys.exit(main())
