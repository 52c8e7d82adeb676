"""Bounded fuzzing of level tables given to `finefit import` (hypothesis; derandomised
under CI): tables in the compilations' layout with mutated cells, and column-mapped
tables with random cells. Whatever the table: no traceback, exit 0 or 2 (never 3), the
session file unchanged when the import fails, and a file that reads back when it
succeeds."""

import tempfile
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from finefit.cli import main
from finefit.session import load

DATA = Path(__file__).parent.parent / "data" / "levels"
ROWS = (DATA / "Ti_III.tsv").read_text().splitlines()[:40]

cell = st.one_of(
    st.sampled_from(["", "*", "---", "2?", "3 or 4", "7/2,9/2", "[", "]", "?", "+x",
                     "1234.5+x", "1e300", "nan", "-5", "3p6.3d2", "3p6.3d.(2D<5/2>).5g",
                     "a 3F", "3F2", "2[5/2]*", "(4,5/2)", "3d9.(1D2).4s", "Limit"]),
    st.text(alphabet="0123456789.()<>[]*?/ ,abcdefpdsSPDFGH-+\t\"", max_size=25),
)


def run_import(table_text: str, extra: list[str]) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        session = Path(tmp) / "s.toml"
        table = Path(tmp) / "t.tsv"
        assert main(["new", str(session), "-c", "3d2", "--Z", "22", "--charge", "2"]) == 0
        before = session.read_bytes()
        table.write_text(table_text)
        code = main(["import", str(session), str(table), *extra])
        assert code in (0, 2)
        if code == 2:
            assert session.read_bytes() == before
        else:
            load(session)  # what was written reads back


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(st.lists(st.tuples(st.integers(1, len(ROWS) - 1), st.integers(0, 5), cell),
                max_size=6))
def test_mutated_compilation_tables(mutations):
    rows = [r.split("\t") for r in ROWS]
    for line, col, value in mutations:
        row = rows[line]
        if col < len(row):
            row[col] = f'"{value}"' if "\t" not in value else value
    run_import("\n".join("\t".join(r) for r in rows) + "\n", [])


@settings(max_examples=40, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(st.lists(st.tuples(cell, cell, cell), min_size=1, max_size=6), st.booleans())
def test_random_column_mapped_tables(rows, skip_bad):
    text = "E\tJ\tlabel\n" + "".join(f"{a}\t{b}\t{c}\n" for a, b, c in rows)
    extra = ["--columns", "energy=E,J=J,label=label", "--parity", "even"]
    run_import(text, extra + (["--skip-bad"] if skip_bad else []))
