"""One validation of a whole session, without an eigen-solve (pure, no I/O).

The reader runs it on every file, and every writer (command line, workspace, notebook
saves) runs it before anything is written, so finefit never writes a session it would
refuse to read. It checks what can be checked from the settings and the models'
blocks: names, types already parsed, finite values within physical magnitudes,
bounds, link groups, the electron count of every configuration against Z and the
charge, J values and counts of the observed levels, pins, parameter sets and text
fields. Labels are checked against the eigenstates when a fit problem is built.
"""

from __future__ import annotations

import math
import unicodedata
from collections.abc import Iterable, Mapping

from finefit.errors import FinefitError, quote
from finefit.notation.configuration import parse_configuration

# Largest magnitude accepted for an energy, a parameter, a bound or an uncertainty:
# 1e10 cm-1 is about 1.2 MeV, far above any atomic binding energy (the 1s binding
# energy of uranium is about 116 keV; from memory). Larger numbers are typing errors,
# and numbers near 1e300 overflow the eigen-solver.
MAX_MAGNITUDE = 1e10
# Observed Landé g factors of atomic levels lie within about -1..4; 10 leaves room
# (common practice).
MAX_G = 10.0
# scipy's least-squares tolerances must exceed the machine epsilon.
MIN_TOLERANCE = 2.220446049250313e-16
MAX_ITERATIONS = 1_000_000
MAX_ID = 64
MAX_NAME = 200
MAX_TITLE = 1000
MAX_NOTE = 100_000


# ----------------------------------------------------------------------------- numbers
def parse_number(text: str, what: str, *, positive: bool = False, nonnegative: bool = False,
                 limit: float = MAX_MAGNITUDE) -> float:
    """A finite number written with ASCII digits, ``|x| <= limit``; else a FinefitError.

    Python's ``float`` accepts other scripts' digits (``'١٢٣'``), ``nan`` and ``inf``:
    none of them belongs in a session.
    """
    t = str(text).strip()
    if not t or not t.isascii():
        raise FinefitError(f"{what} needs a number written with the digits 0-9, "
                           f"got {quote(text)}", what)
    try:
        v = float(t)
    except ValueError:
        raise FinefitError(f"{what} needs a number, got {quote(text)}", what) from None
    return check_number(v, what, positive=positive, nonnegative=nonnegative, limit=limit)


def check_number(v: float, what: str, *, positive: bool = False, nonnegative: bool = False,
                 limit: float = MAX_MAGNITUDE) -> float:
    """``v`` if finite, within ``limit`` in magnitude and of the asked sign."""
    if isinstance(v, bool) or not isinstance(v, int | float):
        raise FinefitError(f"{what} must be a number, got {quote(v)}", what)
    if not math.isfinite(v):
        raise FinefitError(f"{what} must be a finite number, got {v!r}", what)
    if abs(v) > limit:
        raise FinefitError(f"{what} = {v:g} is beyond {limit:g} in magnitude", what)
    if positive and not v > 0:
        raise FinefitError(f"{what} must be positive, got {v:g}", what)
    if nonnegative and v < 0:
        raise FinefitError(f"{what} must not be negative, got {v:g}", what)
    return float(v)


def check_text(text: str, what: str, *, max_len: int = MAX_NAME, lines: bool = False,
               quotes: bool = True, empty: bool = True) -> str:
    """Text without control characters (tab and newline allowed when ``lines``)."""
    if not isinstance(text, str):
        raise FinefitError(f"{what} must be text, got {quote(text)}", what)
    if not empty and not text.strip():
        raise FinefitError(f"{what} must not be empty", what)
    if len(text) > max_len:
        raise FinefitError(f"{what} is {len(text)} characters long; at most {max_len} "
                           f"are accepted: {quote(text)}", what)
    for ch in text:
        if lines and ch in "\n\t":
            continue
        if unicodedata.category(ch) in ("Cc", "Cs", "Cn", "Co") or ch in "\u2028\u2029":
            raise FinefitError(f"{what} contains the control character U+{ord(ch):04X}: "
                               f"{quote(text)}", what)
        if not quotes and ch in "'\"`\\":
            raise FinefitError(f"{what} must not contain quotes or backslashes: "
                               f"{quote(text)}", what)
    return text


def check_level_id(lid: str) -> str:
    check_text(lid, "level id", max_len=MAX_ID, quotes=False, empty=False)
    if lid != lid.strip():
        raise FinefitError(f"level id {quote(lid)} must not start or end with a space", lid)
    return lid


# ----------------------------------------------------------------------------- the ion
def _subshells(max_n: int = 8) -> list[tuple[int, int]]:
    return [(n, lv) for n in range(1, max_n + 1) for lv in range(n)]


# Closed cores fill subshells in one of two orders: by n + l then n (neutral atoms and
# low charges) or by n then l (highly charged ions, hydrogen-like ordering).
_ORDERS = (
    sorted(_subshells(), key=lambda s: (s[0] + s[1], s[0])),
    sorted(_subshells()),
)


def closed_core_sizes(written: Iterable[tuple[int, int]]) -> list[int]:
    """Electron counts of closed cores made of subshells not written in a configuration."""
    skip = set(written)
    sizes = set()
    for order in _ORDERS:
        total = 0
        sizes.add(0)
        for n, lv in order:
            if (n, lv) in skip:
                continue
            total += 4 * lv + 2
            sizes.add(total)
    return sorted(sizes)


def check_ion(Z: object, charge: object, ionization_limit: object = None,
              name: object = "") -> None:
    """Z in 1..118, charge in 0..Z-1, a positive finite ionization limit, a short name."""
    if isinstance(Z, bool) or not isinstance(Z, int) or not 1 <= Z <= 118:
        raise FinefitError(f"[ion] Z = {quote(Z)} is not a nuclear charge (1..118)", "Z")
    if isinstance(charge, bool) or not isinstance(charge, int) or not 0 <= charge < Z:
        raise FinefitError(f"[ion] charge = {quote(charge)} must be 0 .. Z-1 = {Z - 1}",
                           "charge")
    if ionization_limit is not None:
        check_number(ionization_limit, "[ion] ionization_limit", positive=True)
    check_text(name or "", "[ion] name")


def check_configurations(configurations: list[str], Z: int, charge: int) -> list[str]:
    """The configurations in normal form; each must hold Z - charge electrons with a closed
    core of subshells it does not write. Duplicates are an error."""
    if not configurations:
        raise FinefitError("[model] configurations must not be empty", "configurations")
    n_el = Z - charge
    out: list[str] = []
    for text in configurations:
        check_text(text, "configuration")
        c = parse_configuration(text)
        norm = str(c)
        if norm in out:
            raise FinefitError(f"configuration {quote(norm)} is given twice", norm)
        written = c.n_electrons
        if written > n_el:
            raise FinefitError(
                f"configuration {quote(norm)} has {written} electrons, but Z = {Z} with "
                f"charge {charge} leaves {n_el}", norm)
        cores = closed_core_sizes((s.n, s.l) for s in c.subshells)
        if n_el - written not in cores:
            shown = ", ".join(str(x) for x in cores if x <= n_el) or "0"
            raise FinefitError(
                f"configuration {quote(norm)} has {written} electrons, which leaves "
                f"{n_el - written} of the {n_el} electrons (Z = {Z}, charge {charge}) for a "
                f"core; closed cores without its subshells hold {shown} electrons", norm)
        out.append(norm)
    return out


# ----------------------------------------------------------------------------- settings
def check_parameter(name: str, s, *, known: Iterable[str] | None = None) -> None:
    """Finite value, bounds and ab initio value within MAX_MAGNITUDE; min < value < max."""
    if known is not None and name not in known:
        raise FinefitError(f"parameter {quote(name)} does not exist for the session's "
                           "configurations", name)
    where = f"parameter {quote(name)}"
    check_number(s.value, f"{where}: value")
    for key in ("min", "max", "ab_initio"):
        v = getattr(s, key)
        if v is not None:
            check_number(v, f"{where}: {key}")
    if s.link is not None:
        check_text(s.link, f"{where}: link", empty=False)
    s.check(name)


def check_links(names: list[str], settings: Mapping) -> None:
    """A varying link group needs a non-zero first member: the others keep their ratios
    to it (the fit raises the same error; here it is caught before anything is written)."""
    groups: dict[str, list[str]] = {}
    for n in names:
        s = settings[n]
        if s.link:
            groups.setdefault(s.link, []).append(n)
    for g, members in groups.items():
        if not any(settings[m].vary for m in members):
            continue
        if settings[members[0]].value == 0.0:
            zero = all(settings[m].value == 0.0 for m in members)
            raise FinefitError(
                f"link group {quote(g)}: its first parameter {quote(members[0])} is 0"
                + (" (all its parameters are)" if zero else "")
                + ", so the ratios are undefined; give the parameters values first "
                "(e.g. `finefit abinitio`) or fix the group", g)


def check_options(o) -> None:
    """The [fit] table: choices, a usable tolerance, positive finite numbers."""
    o.check()
    if isinstance(o.max_iterations, bool) or not isinstance(o.max_iterations, int) \
            or not 1 <= o.max_iterations <= MAX_ITERATIONS:
        raise FinefitError(f"[fit] max_iterations must be a whole number in "
                           f"1..{MAX_ITERATIONS}, got {quote(o.max_iterations)}",
                           "max_iterations")
    check_number(o.default_uncertainty, "[fit] default_uncertainty", positive=True)
    t = check_number(o.tolerance, "[fit] tolerance", positive=True)
    if not MIN_TOLERANCE <= t < 1:
        raise FinefitError(f"[fit] tolerance = {t:g} must lie between the machine epsilon "
                           f"({MIN_TOLERANCE:.3g}) and 1", "tolerance")
    check_number(o.correlation_threshold, "[fit] correlation_threshold", positive=True)


# ----------------------------------------------------------------------------- levels
def check_levels(levels: list, models: Mapping, configurations: list[str]) -> None:
    """Ids, numbers, J values and counts per J, configurations, pins of the observed levels."""
    seen: set[str] = set()
    per_block: dict[tuple[str, int], int] = {}
    energies: dict[tuple[str, int, float], str] = {}
    for lv in levels:
        check_level_id(lv.id)
        if lv.id in seen:
            raise FinefitError(f"level id {quote(lv.id)} is used twice", lv.id)
        seen.add(lv.id)
        w = f"level {quote(lv.id)}"
        check_number(lv.energy, f"{w}: energy")
        if lv.uncertainty is not None:
            check_number(lv.uncertainty, f"{w}: uncertainty", positive=True)
        if lv.g is not None:
            check_number(lv.g, f"{w}: g", limit=MAX_G)
        if lv.label is not None:
            check_text(lv.label, f"{w}: label")
        check_text(lv.note or "", f"{w}: note", max_len=MAX_NOTE, lines=True)
        if lv.parity not in ("even", "odd"):
            raise FinefitError(f"{w}: parity must be 'even' or 'odd', got {quote(lv.parity)}",
                               lv.id)
        if lv.parity not in models:
            raise FinefitError(f"{w}: the session has no {lv.parity} configuration", lv.id)
        model = models[lv.parity]
        if not isinstance(lv.J, int | float) or not math.isfinite(lv.J):
            raise FinefitError(f"{w}: J must be a number", lv.id)
        j2 = round(2 * lv.J)
        block = next((b for b in model.blocks if b.J2 == j2), None)
        if block is None:
            raise FinefitError(f"{w}: J = {lv.J:g} is impossible for "
                               f"{', '.join(model.configurations)}", lv.id)
        if lv.configuration is not None:
            check_text(lv.configuration, f"{w}: configuration")
            c = str(parse_configuration(lv.configuration))
            if c not in model.configurations:
                raise FinefitError(f"{w}: configuration {quote(lv.configuration)} is not "
                                   f"among the session's {lv.parity} configurations", lv.id)
            ci = model.configurations.index(c)
            if not (block.state_config == ci).any():
                raise FinefitError(f"{w}: J = {lv.J:g} is impossible for configuration {c}",
                                   lv.id)
        key = (lv.parity, j2)
        per_block[key] = per_block.get(key, 0) + 1
        if per_block[key] > block.size:
            raise FinefitError(f"{w}: more observed levels of J = {lv.J:g} ({lv.parity}) than "
                               f"the {block.size} computed states", lv.id)
        ekey = (lv.parity, j2, round(lv.energy, 6))
        if ekey in energies:
            raise FinefitError(f"levels {quote(energies[ekey])} and {quote(lv.id)} are "
                               "duplicates (same energy, J and parity)", lv.id)
        energies[ekey] = lv.id
        st = lv.state
        if st is not None:
            if isinstance(st, bool) or not isinstance(st, int | str):
                raise FinefitError(f"{w}: state must be a whole number or an LS label", lv.id)
            if isinstance(st, int) and not 1 <= st <= block.size:
                raise FinefitError(f"{w}: state {st} does not exist; J = {lv.J:g} "
                                   f"({lv.parity}) has states 1..{block.size}", lv.id)
            if isinstance(st, str):
                check_text(st, f"{w}: state", empty=False)
    del configurations  # the levels' configurations are checked against the models


# ----------------------------------------------------------------------------- sets
def check_parameter_sets(sets: list, known: Iterable[str]) -> None:
    """Unique names, known parameters, finite values and non-negative errors."""
    known = set(known)
    names: set[str] = set()
    for i, ps in enumerate(sets, start=1):
        check_text(ps.name, f"parameter set {i}: name", empty=False)
        w = f"parameter set {quote(ps.name)}"
        if ps.name in names:
            raise FinefitError(f"{w} is given twice (names must be unique)", ps.name)
        names.add(ps.name)
        check_text(ps.created or "", f"{w}: created")
        check_text(ps.note or "", f"{w}: note", max_len=MAX_NOTE, lines=True)
        for table in ("values", "errors"):
            for n, v in getattr(ps, table).items():
                if n not in known:
                    raise FinefitError(f"{w}: {table} names the unknown parameter {quote(n)}",
                                       n)
                check_number(v, f"{w}: {table} of {quote(n)}",
                             nonnegative=(table == "errors"))
        if ps.sigma is not None:
            check_number(ps.sigma, f"{w}: sigma", nonnegative=True)
        for key in ("n_levels", "n_free"):
            v = getattr(ps, key)
            if isinstance(v, bool) or not isinstance(v, int) or v < 0:
                raise FinefitError(f"{w}: {key} must be a whole number >= 0", ps.name)
        for lid in ps.included:
            check_text(lid, f"{w}: included id", max_len=MAX_ID)


# ----------------------------------------------------------------------------- whole
def validate_session(ion, configurations: list[str], models: Mapping, parameters: Mapping,
                     levels: list, options, parameter_sets: list, title: str = "",
                     note: str = "") -> list[str]:
    """Every check above; returns warnings (things allowed but probably wrong).

    Raises :class:`FinefitError` naming the first offending item.
    """
    check_ion(ion.Z, ion.charge, ion.ionization_limit, ion.name)
    check_configurations(configurations, ion.Z, ion.charge)
    check_text(title or "", "title", max_len=MAX_TITLE, lines=True)
    check_text(note or "", "note", max_len=MAX_NOTE, lines=True)
    check_options(options)
    names = [n for m in models.values() for n in m.parameters]
    for n, s in parameters.items():
        check_parameter(n, s, known=names)
    check_links([n for n in names if n in parameters], parameters)
    check_levels(levels, models, configurations)
    check_parameter_sets(parameter_sets, names)
    warnings = []
    if ion.ionization_limit is not None and levels:
        top = max(levels, key=lambda lv: lv.energy)
        if top.energy >= ion.ionization_limit:
            warnings.append(
                f"the ionization limit {ion.ionization_limit:g} cm-1 is not above the observed "
                f"level {quote(top.id)} at {top.energy:g} cm-1 (autoionizing levels lie "
                "above it; check the limit)")
    return warnings


__all__ = ["MAX_G", "MAX_MAGNITUDE", "check_configurations", "check_ion", "check_level_id",
           "check_number", "check_text", "closed_core_sizes", "parse_number",
           "validate_session"]
