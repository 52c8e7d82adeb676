"""The command line as a user runs it: exit codes, JSON, edits that persist."""

import json
import shutil
from pathlib import Path

import pytest

from finefit.cli import main
from finefit.session import load

SAMPLES = Path(__file__).resolve().parents[2] / "sample_sessions"


@pytest.fixture
def neon(tmp_path):
    p = tmp_path / "neon.toml"
    shutil.copy(SAMPLES / "kestrel_neon_like.toml", p)
    return p


def test_fit_json_and_exit_code(neon, capsys):
    assert main(["fit", str(neon), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["converged"] is True
    assert out["n_levels"] == 20
    assert 0.2 < out["sigma"] < 1.0  # invented data made with 0.5 cm-1 noise
    assert {p["name"] for p in out["parameters"]} >= {"2p5 3p: G0(2p,3p)"}


def test_fit_does_not_touch_the_file_unless_asked(neon):
    before = neon.read_text()
    assert main(["fit", str(neon)]) == 0
    assert neon.read_text() == before
    assert main(["fit", str(neon), "--write", "--keep", "first"]) == 0
    s = load(neon)
    assert s.parameter_set("first").n_levels == 20
    assert (neon.parent / "neon.toml.bak").read_text() == before


def test_not_converged_exit_code(neon, capsys):
    text = neon.read_text().replace("max_iterations = 200", "max_iterations = 1")
    neon.write_text(text)
    assert main(["fit", str(neon)]) == 1


def test_set_edit_attach_and_sets(neon, capsys):
    assert main(["set", str(neon), "2p5 4p: G*", "--fix"]) == 0
    s = load(neon)
    assert not s.parameters["2p5 4p: G0(2p,4p)"].vary
    assert main(["edit", str(neon), "L003", "uncertainty=0.05", "include=no"]) == 0
    lv = load(neon).level("L003")
    assert lv.uncertainty == 0.05 and lv.include is False
    assert main(["attach", str(neon), "L004", "2"]) == 0
    assert load(neon).level("L004").state == 2
    assert main(["fit", str(neon), "--keep", "a"]) == 0
    assert main(["set", str(neon), "2p5 4p: G*", "--vary"]) == 0
    assert main(["fit", str(neon), "--keep", "b"]) == 0
    capsys.readouterr()
    assert main(["sets", str(neon), "compare", "a", "b", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert any(r["name"] == "2p5 4p: G0(2p,4p)" for r in rows)
    assert main(["sets", str(neon), "use", "a"]) == 0


@pytest.mark.parametrize(
    "argv",
    [
        ["set", "{s}", "no such parameter", "--value", "1"],
        ["set", "{s}", "2p5 3p: Eav", "--value", "lots"],
        ["edit", "{s}", "L999", "energy=1"],
        ["edit", "{s}", "L001", "energy=abc"],
        ["edit", "{s}", "L001", "J=99"],
        ["attach", "{s}", "L001", "77"],
        ["sets", "{s}", "show", "missing"],
        ["import", "{s}", "/nonexistent/table.csv"],
    ],
)
def test_bad_input_exit_2_and_file_unchanged(neon, capsys, argv):
    before = neon.read_text()
    code = main([a.format(s=neon) for a in argv])
    err = capsys.readouterr().err
    assert code == 2
    assert "finefit: error:" in err and "Traceback" not in err
    assert neon.read_text() == before


def test_new_import_export(tmp_path, capsys):
    s = tmp_path / "c.toml"
    assert main(["new", str(s), "-c", "2p2", "--Z", "6"]) == 0
    assert main(["new", str(s), "-c", "2p2", "--Z", "6"]) == 2  # exists
    table = tmp_path / "lev.txt"
    table.write_text('energy J label\n0 0 "2p2 3P"\n16.4 1 "2p2 3P"\n43.4 2 "2p2 3P"\n')
    assert main(["import", str(s), str(table), "--parity", "even"]) == 0
    assert len(load(s).levels) == 3
    out = tmp_path / "out.csv"
    assert main(["export", str(s), str(out)]) == 0
    assert out.read_text().splitlines()[0].startswith("id,energy")
    assert main(["levels", str(s), "--json"]) == 0
