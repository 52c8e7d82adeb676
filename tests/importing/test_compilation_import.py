"""Import of published level lists (evaluated level compilations) as they are.

The tables in tests/data/levels are exports of the evaluated level compilations (see
that folder's README.md); expected row counts were counted in the files with grep.
"""

import json
from pathlib import Path

import pytest

import finefit
from finefit.cli import main
from finefit.errors import FinefitError

DATA = Path(__file__).parent.parent / "data" / "levels"

# table -> (Z, charge, configurations chosen for the session)
TABLES = {
    "Al_II": (13, 1, ["3s2", "3s 3d", "3p2", "3s 3p"]),
    "Co_III": (27, 2, ["3d7", "3d6 4s", "3d6 4p"]),
    "Mg_I": (12, 0, ["3s2", "3s 4s", "3s 3p", "3s 4p"]),
    "Mn_II": (25, 1, ["3d5 4s", "3d6", "3d4 4s2"]),
    "Nd_IV": (60, 3, ["4f3"]),
    "Ne_I": (10, 0, ["2p5 3p", "2p5 3s", "2p5 3d"]),
    "Pr_IV": (59, 3, ["4f2", "4f 5d", "4f 6s"]),
    "Sc_II": (21, 1, ["3d 4s", "3d2", "4s2", "3d 4p"]),
    "Si_I": (14, 0, ["3p2", "3p 4s"]),
    "Ti_III": (22, 2, ["3d2", "3d 4s", "3d 4p"]),
    "V_IV": (23, 3, ["3d2", "3d 4s"]),
}


def data_rows(name: str) -> int:
    lines = (DATA / f"{name}.tsv").read_text().splitlines()
    return sum(1 for ln in lines[1:] if ln.strip())


@pytest.mark.parametrize("name", sorted(TABLES))
def test_every_table_imports_as_published(name):
    Z, charge, configs = TABLES[name]
    s = finefit.Session.new(configs, Z=Z, charge=charge)
    rep = s.import_levels(DATA / f"{name}.tsv")
    # every row is accounted for: imported, or skipped with its line and reason
    assert rep.rows == data_rows(name)
    assert rep.imported + rep.updated + len(rep.skipped) == rep.rows
    assert rep.imported == len(s.levels) > 0
    assert all(isinstance(ln, int) and ln > 1 and why for ln, why in rep.skipped)
    # the session is fit-ready: labels read strictly, J counts within the model
    s.problem()
    assert rep.ionization_limit is not None  # every table ends with its limit row
    assert any(why == "ionization limit" for _, why in rep.skipped)


def test_counts_match_the_rows_of_the_configurations():
    # Co III: 19 rows of 3d7 and 58 of 3d6(parent)4s (counted with grep), none without
    # an energy or J
    s = finefit.Session.new(["3d7", "3d6 4s"], Z=27, charge=2)
    rep = s.import_levels(DATA / "Co_III.tsv")
    assert rep.imported == 19 + 58
    assert rep.skipped_by_reason()["other configuration"] == data_rows("Co_III") - 77 - 1


def test_labels_in_the_trades_notation():
    s = finefit.Session.new(["3d7", "3d6 4s"], Z=27, charge=2)
    s.import_levels(DATA / "Co_III.tsv")
    by_note = {lv.note.split("; ")[0]: lv.label for lv in s.levels}
    assert by_note["as published: 3d7 a 2D2"] == "3d7 2D2"
    assert by_note["as published: 3d7 b 2D1"] == "3d7 2D1"
    assert by_note["as published: 3d6.(3P2).4s b 4P"] == "3d6(3P2)4s 4P"
    assert by_note["as published: 3d6.(5D).4s a 6D"] == "3d6(5D)4s 6D"


def test_pair_and_j1j_labels():
    s = finefit.Session.new(["2p5 3p"], Z=10, charge=0)
    s.import_levels(DATA / "Ne_I.tsv")
    labels = {lv.label for lv in s.levels}
    assert "2p5(2P°3/2)3p 2[1/2]" in labels
    assert "2p5(2P°1/2)3p 2[3/2]" in labels
    p = finefit.Session.new(["4f 6s"], Z=59, charge=3)
    rep = p.import_levels(DATA / "Pr_IV.tsv")
    assert rep.imported == 4  # 4f.(2F*<5/2>).6s<1/2> and <7/2>: J 2, 3 and 4, 3
    assert {lv.label for lv in p.levels} == {"4f(2F°5/2)6s(1/2)", "4f(2F°7/2)6s(1/2)"}


def test_odd_rows_never_abort_the_import():
    # Mg I has an unresolved J '3 or 4', rows without a configuration, doubtful rows;
    # Pr IV a doubtful J '2?' and a doubtful term '3F?'; Nd IV levels in brackets
    s = finefit.Session.new(["3s 9g"], Z=12, charge=0)
    rep = s.import_levels(DATA / "Mg_I.tsv")
    assert any(why.startswith("J not resolved") for _, why in rep.skipped)
    pr = finefit.Session.new(["5d2"], Z=59, charge=3)
    rep = pr.import_levels(DATA / "Pr_IV.tsv")
    doubtful = [lv for lv in pr.levels if "doubtful J" in lv.note]
    assert len(doubtful) == 1 and not doubtful[0].include  # '5d2 3F? 2?' at 139711.8
    assert any(why == "no energy" for _, why in rep.skipped)  # '5d2 3F? 3' has none
    assert {why for _, why in rep.unlabelled} == {"doubtful designation"}  # '3F?'
    nd = finefit.Session.new(["4f3"], Z=60, charge=3)
    rep = nd.import_levels(DATA / "Nd_IV.tsv")
    assert sum(lv.include for lv in nd.levels) == 1  # only the ground level is observed
    assert len(rep.excluded) == 17
    # the row with only '*' as its term is imported without a label
    assert any("no term given" in why for _, why in rep.unlabelled)
    nd2 = finefit.Session.new(["4f3"], Z=60, charge=3)
    nd2.import_levels(DATA / "Nd_IV.tsv", include_derived=True)
    assert all(lv.include for lv in nd2.levels)


def test_importing_again_updates_instead_of_duplicating():
    s = finefit.Session.new(["3d2"], Z=22, charge=2)
    first = s.import_levels(DATA / "Ti_III.tsv")
    s.level("L003").include = False  # the user's choice survives a new import
    again = s.import_levels(DATA / "Ti_III.tsv")
    assert again.imported == 0 and again.updated == first.imported
    assert len(s.levels) == first.imported
    assert s.level("L003").include is False


def test_repeated_terms_without_index_are_imported_unlabelled():
    # Mn II writes '3d5.(2D).4s': 3d5 has three 2D terms, the table gives no index
    s = finefit.Session.new(["3d5 4s", "3d6"], Z=25, charge=1)
    rep = s.import_levels(DATA / "Mn_II.tsv")
    reasons = {why for _, why in rep.unlabelled}
    assert "repeated term without its index" in reasons
    assert all(lv.label is None for lv in s.levels if "(2D).4s" in lv.note)


def test_cli_import_report(tmp_path, capsys):
    path = tmp_path / "co.toml"
    assert main(["new", str(path), "-c", "3d7", "--Z", "27", "--charge", "2"]) == 0
    assert main(["import", str(path), str(DATA / "Co_III.tsv")]) == 0
    out = capsys.readouterr().out
    assert "19 levels imported" in out and "skipped" in out
    assert main(["import", str(path), str(DATA / "Co_III.tsv"), "--json"]) == 0
    rep = json.loads(capsys.readouterr().out)
    assert rep["updated"] == 19 and rep["imported"] == 0
    assert len(rep["skipped"]) == rep["rows"] - 19


def test_not_a_compilation_needs_the_columns(tmp_path):
    bad = tmp_path / "x.tsv"
    bad.write_text("a\tb\n1\t2\n")
    s = finefit.Session.new(["3d2"], Z=22, charge=2)
    with pytest.raises(FinefitError, match="compilations' layout"):
        s.import_levels(bad)


def test_column_mapping_lists_every_bad_row_and_can_skip_them(tmp_path, capsys):
    table = tmp_path / "mine.csv"
    table.write_text(
        "E,J,configuration,label\n"
        "0.0,9/2,3d6 4s,3d6(5D)4s 6D\n"
        "abc,7/2,3d6 4s,\n"
        "415.9,7/3,3d6 4s,\n"
        "668.0,5/2,3d6 4s,\n"
    )
    session = tmp_path / "s.toml"
    assert main(["new", str(session), "-c", "3d6 4s", "--Z", "26", "--charge", "1"]) == 0
    before = session.read_text()
    code = main(["import", str(session), str(table), "--columns", "energy=E,J=J",
                 "--parity", "even"])
    err = capsys.readouterr().err
    assert code == 2 and "line 3" in err and "line 4" in err and "2 bad row" in err
    assert session.read_text() == before  # nothing imported
    code = main(["import", str(session), str(table), "--columns", "energy=E,J=J",
                 "--parity", "even", "--skip-bad"])
    out = capsys.readouterr().out
    assert code == 0 and "imported 2 levels" in out and "line 3" in out
    # the configuration column mapped automatically can be switched off
    code = main(["import", str(session), str(table), "--columns",
                 "energy=E,J=J,configuration=,label=", "--parity", "even", "--skip-bad",
                 "--replace"])
    assert code == 0
    s = finefit.load(session)
    assert all(lv.configuration is None and lv.label is None for lv in s.levels)


def test_a_huge_csv_field_is_bad_input(tmp_path, capsys):
    table = tmp_path / "big.csv"
    table.write_text('energy,J,parity\n0,"' + "4" * 2_000_000 + '",even\n')
    session = tmp_path / "s.toml"
    assert main(["new", str(session), "-c", "3d6 4s", "--Z", "26", "--charge", "1"]) == 0
    assert main(["import", str(session), str(table)]) == 2
    err = capsys.readouterr().err
    assert "line 2" in err and len(err) < 1000
