"""Observed levels from and to CSV, TSV and whitespace tables.

The first non-comment line names the columns. Column names are matched to the
level fields case-insensitively (``energy``, ``uncertainty``, ``J``, ``parity``,
``configuration``, ``label``, ``include``, ``g``, ``note``, ``id``) unless a
mapping ``{field: column}`` is given. Whitespace tables may quote fields that
contain spaces (``"3d6(5D)4s 6D"``). Lines starting with ``#`` are comments.
"""

from __future__ import annotations

import csv
import io
import math
import shlex
from pathlib import Path

from finefit.errors import FinefitError
from finefit.fitting.settings import ObservedLevel
from finefit.notation.compilation import COMPILATION_HEADER, CompilationRow, read_row
from finefit.notation.jvalues import format_j, parse_j
from finefit.storage.atomic import atomic_write_text, read_text

FIELDS = ("id", "energy", "uncertainty", "J", "parity", "configuration", "label", "include",
          "g", "note")
_TRUE = {"1", "true", "yes", "y", "+"}
_FALSE = {"0", "false", "no", "n", "-"}


def detect_format(path: str | Path, text: str) -> str:
    suffix = Path(path).suffix.lower()
    if suffix == ".csv":
        return "csv"
    if suffix in (".tsv", ".tab"):
        return "tsv"
    first = next((ln for ln in text.splitlines() if ln.strip() and not ln.startswith("#")), "")
    if "\t" in first:
        return "tsv"
    if "," in first and " " not in first.replace(", ", ","):
        return "csv"
    return "txt"


def _rows(text: str, fmt: str) -> list[tuple[int, list[str]]]:
    lines = [(i, ln) for i, ln in enumerate(text.splitlines(), start=1)
             if ln.strip() and not ln.lstrip().startswith("#")]
    out = []
    if fmt in ("csv", "tsv"):
        delim = "," if fmt == "csv" else "\t"
        for lineno, ln in lines:
            try:
                row = next(csv.reader([ln], delimiter=delim))
            except csv.Error as exc:
                raise FinefitError(
                    f"line {lineno}: cannot split the row into columns ({exc})", f"line {lineno}"
                ) from None
            out.append((lineno, [c.strip() for c in row]))
    else:
        for lineno, ln in lines:
            try:
                out.append((lineno, shlex.split(ln, comments=False)))
            except ValueError as exc:
                raise FinefitError(f"line {lineno}: {exc}", f"line {lineno}") from None
    return out


def read_levels(
    path: str | Path,
    columns: dict[str, str] | None = None,
    fmt: str | None = None,
    defaults: dict | None = None,
    id_start: int = 1,
    skip_bad: bool = False,
    bad_rows: list | None = None,
) -> list[ObservedLevel]:
    """Read observed levels from a table; errors name the file, line and column.

    Every bad row is listed in one error; with ``skip_bad`` they are left out instead
    and appended to ``bad_rows`` as (line, reason).
    """
    p = Path(path)
    text = read_text(p, "level table")
    return parse_levels(
        text, fmt or detect_format(p, text), columns, defaults, str(p), id_start, skip_bad,
        bad_rows,
    )


def parse_levels(
    text: str,
    fmt: str,
    columns: dict[str, str] | None = None,
    defaults: dict | None = None,
    source: str = "table",
    id_start: int = 1,
    skip_bad: bool = False,
    bad_rows: list | None = None,
) -> list[ObservedLevel]:
    """Levels from the text of a table. A column mapped to "" is switched off."""
    if fmt not in ("csv", "tsv", "txt"):
        raise FinefitError(f"unknown table format {fmt!r}: use csv, tsv or txt", fmt)
    rows = _rows(text, fmt)
    if not rows:
        raise FinefitError(f"{source}: the table is empty", source)
    header_line, header = rows[0]
    lower = [h.lower() for h in header]
    mapping: dict[str, int] = {}
    switched_off: set[str] = set()
    if columns:
        for fld, col in columns.items():
            if fld not in FIELDS:
                raise FinefitError(
                    f"column mapping names unknown field {fld!r}; fields: {', '.join(FIELDS)}",
                    fld,
                )
            if col == "":
                switched_off.add(fld)
                continue
            if col.lower() not in lower:
                raise FinefitError(
                    f"{source}: no column {col!r} in the header (line {header_line}): "
                    f"{', '.join(header)}",
                    col,
                )
            mapping[fld] = lower.index(col.lower())
    for fld in FIELDS:
        if fld not in mapping and fld not in switched_off and fld.lower() in lower:
            mapping[fld] = lower.index(fld.lower())
    defaults = dict(defaults or {})
    for need in ("energy", "J"):
        if need not in mapping:
            raise FinefitError(
                f"{source}: the table needs a column for {need!r} (header line {header_line}: "
                f"{', '.join(header)}); give a column mapping",
                need,
            )
    if "parity" not in mapping and "parity" not in defaults:
        raise FinefitError(
            f"{source}: the table has no 'parity' column; give the parity for all levels",
            "parity",
        )
    out = []
    problems: list[tuple[int, str]] = []
    for lineno, row in rows[1:]:
        try:
            out.append(_row_level(row, lineno, mapping, defaults, header, source,
                                  f"L{id_start + len(out):03d}"))
        except FinefitError as exc:
            problems.append((lineno, str(exc)))
    if problems and not skip_bad:
        listed = "\n".join(f"  {msg}" for _, msg in problems[:50])
        more = f"\n  … and {len(problems) - 50} more" if len(problems) > 50 else ""
        raise FinefitError(
            f"{source}: {len(problems)} bad row(s) (nothing imported; --skip-bad imports the "
            f"rest):\n{listed}{more}",
            f"line {problems[0][0]}",
        )
    if bad_rows is not None:
        bad_rows.extend(problems)
    return out


def _row_level(row, lineno, mapping, defaults, header, source, default_id) -> ObservedLevel:
    """One level from one row; a FinefitError names the line and column."""

    def cell(fld: str, lineno=lineno, row=row):
        if fld not in mapping:
            return defaults.get(fld)
        i = mapping[fld]
        if i >= len(row):
            raise FinefitError(
                f"{source} line {lineno}: missing column {header[i]!r}", f"line {lineno}"
            )
        v = row[i].strip()
        return v if v != "" else defaults.get(fld)

    def number(fld: str, lineno=lineno, cell=cell) -> float | None:
        v = cell(fld)
        if v is None:
            return None
        try:
            x = float(v)
        except ValueError:
            raise FinefitError(
                f"{source} line {lineno}, column {fld!r}: {v!r} is not a number",
                f"line {lineno}",
            ) from None
        if not math.isfinite(x):
            raise FinefitError(
                f"{source} line {lineno}, column {fld!r}: {v!r} is not finite",
                f"line {lineno}",
            )
        return x

    energy = number("energy")
    if energy is None:
        raise FinefitError(f"{source} line {lineno}: no energy", f"line {lineno}")
    jraw = cell("J")
    try:
        J = parse_j(jraw, field=f"{source} line {lineno}, column 'J'")
    except FinefitError as exc:
        raise FinefitError(str(exc), f"line {lineno}") from None
    parity = str(cell("parity") or "").lower()
    parity = {"e": "even", "o": "odd", "0": "even", "1": "odd"}.get(parity, parity)
    if parity not in ("even", "odd"):
        raise FinefitError(
            f"{source} line {lineno}, column 'parity': {cell('parity')!r} is not even/odd",
            f"line {lineno}",
        )
    inc = cell("include")
    if inc is None:
        include = True
    elif str(inc).lower() in _TRUE:
        include = True
    elif str(inc).lower() in _FALSE:
        include = False
    else:
        raise FinefitError(
            f"{source} line {lineno}, column 'include': {inc!r} is not yes/no",
            f"line {lineno}",
        )
    unc = number("uncertainty")
    if unc is not None and not unc > 0:
        raise FinefitError(
            f"{source} line {lineno}, column 'uncertainty' must be positive", f"line {lineno}"
        )
    return (
        ObservedLevel(
            id=str(cell("id") or default_id),
            energy=energy,
            J=J,
            parity=parity,
            uncertainty=unc,
            configuration=cell("configuration"),
            label=cell("label"),
            include=include,
            g=number("g"),
            note=str(cell("note") or ""),
        )
    )


def format_levels(levels: list[ObservedLevel], fmt: str) -> str:
    """The levels as a CSV, TSV or whitespace table (all fields, fixed column order)."""
    if fmt not in ("csv", "tsv", "txt"):
        raise FinefitError(f"unknown table format {fmt!r}: use csv, tsv or txt", fmt)
    rows = [list(FIELDS)]
    for lv in levels:
        rows.append([
            lv.id, repr(float(lv.energy)), "" if lv.uncertainty is None else repr(lv.uncertainty),
            format_j(lv.J), lv.parity, lv.configuration or "", lv.label or "",
            "yes" if lv.include else "no", "" if lv.g is None else repr(lv.g), lv.note or "",
        ])
    if fmt in ("csv", "tsv"):
        buf = io.StringIO()
        csv.writer(buf, delimiter="," if fmt == "csv" else "\t", lineterminator="\n").writerows(
            rows
        )
        return buf.getvalue()
    quoted = [[shlex.quote(c) if c else "''" for c in r] for r in rows]
    widths = [max(len(r[i]) for r in quoted) for i in range(len(FIELDS))]
    return "".join(
        "  ".join(c.ljust(w) for c, w in zip(r, widths, strict=True)).rstrip() + "\n"
        for r in quoted
    )


def write_levels(levels: list[ObservedLevel], path: str | Path, fmt: str | None = None) -> Path:
    p = Path(path)
    if fmt is None:
        fmt = {".csv": "csv", ".tsv": "tsv"}.get(p.suffix.lower(), "txt")
    return atomic_write_text(p, format_levels(levels, fmt), backup=True)


def _header_cells(text: str) -> list[str]:
    first = next((ln for ln in text.splitlines() if ln.strip() and not ln.startswith("#")), "")
    delim = "\t" if "\t" in first else ","
    try:
        cells = next(csv.reader([first], delimiter=delim))
    except (csv.Error, StopIteration):
        return []
    return [c.strip().strip('"').strip().lower() for c in cells]


def is_compilation_table(text: str) -> bool:
    """True when the header is the compilations' (Configuration, Term, J, Prefix, Level, Suffix)."""
    cells = [c for c in _header_cells(text) if c]
    return tuple(cells[:6]) == COMPILATION_HEADER


def read_compilation(path: str | Path) -> list[CompilationRow]:
    """The data rows of a table in the compilations' layout, with their line numbers.

    Cells may be quoted; a trailing tab is allowed. A row that cannot be split into
    cells is returned with an unreadable configuration (its reason names the line).
    """
    p = Path(path)
    text = read_text(p, "level table")
    if not is_compilation_table(text):
        raise FinefitError(
            f"{p}: the header is not the compilations' layout "
            f"({', '.join(COMPILATION_HEADER)})",
            str(p),
        )
    lines = text.splitlines()
    header_at = next(i for i, ln in enumerate(lines) if ln.strip() and not ln.startswith("#"))
    delim = "\t" if "\t" in lines[header_at] else ","
    rows = []
    for i in range(header_at + 1, len(lines)):
        ln = lines[i]
        if not ln.strip() or ln.lstrip().startswith("#"):
            continue
        try:
            cells = next(csv.reader([ln], delimiter=delim))
        except csv.Error as exc:
            rows.append(read_row(i + 1, [f"<unreadable row: {exc}>"]))
            continue
        while cells and cells[-1].strip() == "" and len(cells) > 6:
            cells.pop()
        rows.append(read_row(i + 1, cells))
    return rows
