"""Level tables: CSV/TSV/whitespace import and export."""

import pytest

from finefit import FinefitError
from finefit.storage.level_tables import format_levels, parse_levels, read_levels


def test_csv_with_column_mapping(tmp_path):
    p = tmp_path / "lev.csv"
    p.write_text("# invented levels\nE,Jval,desig,par\n0.0,9/2,3d6(5D)4s 6D,e\n384.8,3.5,,e\n")
    levels = read_levels(p, columns={"energy": "E", "J": "Jval", "label": "desig",
                                     "parity": "par"})
    assert [lv.energy for lv in levels] == [0.0, 384.8]
    assert [lv.J for lv in levels] == [4.5, 3.5]
    assert levels[0].label == "3d6(5D)4s 6D" and levels[1].label is None
    assert levels[0].parity == "even"


def test_whitespace_table_with_quotes_and_default_parity():
    text = 'energy J label\n0.0 0 "2p2 3P"\n16.40 1 "2p2 3P"\n'
    levels = parse_levels(text, "txt", defaults={"parity": "even"})
    assert [lv.label for lv in levels] == ["2p2 3P", "2p2 3P"]


@pytest.mark.parametrize("fmt", ["csv", "tsv", "txt"])
def test_export_import_round_trip(fmt):
    text = (
        'energy J label parity uncertainty include\n0.0 0 "2p2 3P" even 0.1 yes\n'
        '5 1 "" odd "" no\n'
    )
    levels = parse_levels(text, "txt")
    assert parse_levels(format_levels(levels, fmt), fmt) == levels


@pytest.mark.parametrize(
    "text, where",
    [
        ("energy J parity\nabc 1 even\n", "line 2"),
        ("energy J parity\n1.0 1/3 even\n", "line 2"),
        ("energy J parity\n1.0 1 sideways\n", "line 2"),
        ("energy J parity\n1.0 1 even\n2.0\n", "line 3"),
        ("E J parity\n1.0 1 even\n", "energy"),
    ],
)
def test_bad_tables_name_the_line(text, where):
    with pytest.raises(FinefitError) as err:
        parse_levels(text, "txt")
    assert where in str(err.value) or err.value.item == where
