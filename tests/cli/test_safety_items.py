"""One test per item of the file-safety issue: bad input ends with exit 2, a message that
names the item, and no file changed; every exit-0 write can be read back."""

import shutil
import tomllib
from pathlib import Path

import pytest
import tomli_w

from finefit import FinefitError
from finefit.cli import main
from finefit.fitting.validation import closed_core_sizes
from finefit.session import Session, load

SAMPLES = Path(__file__).resolve().parents[2] / "sample_sessions"


@pytest.fixture
def neon(tmp_path):
    p = tmp_path / "neon.toml"
    shutil.copy(SAMPLES / "kestrel_neon_like.toml", p)
    return p


def _files(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()}


def _refused(argv, folder: Path, capsys, *names: str) -> str:
    """Run argv; it must exit 2 naming every one of ``names`` and change no file."""
    before = _files(folder)
    code = main([str(a) for a in argv])
    err = capsys.readouterr().err
    assert code == 2, err
    assert "Traceback" not in err and "internal error" not in err
    for n in names:
        assert n in err, (n, err)
    assert _files(folder) == before
    return err


# ---------------------------------------------------------------- 1. writers that exit 0
@pytest.mark.parametrize("option, value", [("--min", "nan"), ("--max", "inf"),
                                           ("--value", "nan"), ("--max", "-inf")])
@pytest.mark.parametrize("name", ["2p5 3p: zeta(2p)", "2p5 3p: *"])
def test_set_rejects_non_finite_bounds(neon, capsys, option, value, name):
    _refused(["set", neon, name, option, value], neon.parent, capsys, option)


@pytest.mark.parametrize("change, item", [("uncertainty=inf", "uncertainty"),
                                          ("g=nan", "g"), ("uncertainty=0", "uncertainty"),
                                          ("g=1e300", "g"), ("energy=", "energy")])
def test_edit_rejects_non_finite_fields(neon, capsys, change, item):
    _refused(["edit", neon, "L001", change], neon.parent, capsys, item)


@pytest.mark.parametrize("limit", ["nan", "-5", "inf", "0"])
def test_new_rejects_bad_ionization_limit(tmp_path, capsys, limit):
    _refused(["new", tmp_path / "x.toml", "-c", "3d7", "--Z", "26", "--charge", "1",
              "--limit", limit], tmp_path, capsys, "--limit")
    assert not (tmp_path / "x.toml").exists()


def test_link_on_all_zero_parameters_is_refused(tmp_path, capsys):
    s = tmp_path / "c.toml"
    assert main(["new", str(s), "-c", "2p2", "--Z", "6"]) == 0  # a fresh session: all 0
    capsys.readouterr()
    err = _refused(["set", s, "2p2: F*", "--link", "Fk"], tmp_path, capsys, "Fk", "0")
    assert "abinitio" in err
    # with values the same link is accepted, and the file reloads and fits
    assert main(["set", str(s), "2p2: F2(2p)", "--value", "45000"]) == 0
    assert main(["set", str(s), "2p2: F*", "--link", "Fk"]) == 0
    assert load(s).parameters["2p2: F2(2p)"].link == "Fk"


def test_reader_and_writers_agree_on_non_finite_values(neon):
    s = load(neon)
    with pytest.raises(FinefitError, match="finite"):
        s.set_parameter("2p5 3p: Eav", max=float("nan"))
    s.parameters["2p5 3p: Eav"].max = float("inf")  # set behind the API's back
    with pytest.raises(FinefitError, match="finite"):
        s.save()
    assert load(neon).parameters["2p5 3p: Eav"].max is None


# ---------------------------------------------------------------- 2. outputs
def test_export_onto_the_session_is_refused(neon, capsys):
    _refused(["export", neon, neon], neon.parent, capsys, "session file", "--force")


def test_outputs_onto_existing_files(neon, tmp_path, capsys):
    _refused(["publish", neon, neon], neon.parent, capsys, "is a file")
    _refused(["figures", neon, neon, "--format", "png"], neon.parent, capsys, "is a file")
    mine = tmp_path / "notes.csv"
    mine.write_text("my own notes\n")
    _refused(["export", neon, mine], tmp_path, capsys, "not written by finefit")
    assert main(["export", str(neon), str(mine), "--force"]) == 0
    assert (tmp_path / "notes.csv.bak").read_text() == "my own notes\n"  # kept
    # finefit's own unchanged output is replaced without --force ...
    assert main(["export", str(neon), str(mine)]) == 0
    # ... but not once someone edited it
    mine.write_text(mine.read_text() + "# a remark\n")
    _refused(["export", neon, mine], tmp_path, capsys, "not written by finefit")


def test_publish_twice_and_refuses_a_foreign_table(neon, tmp_path, capsys):
    out = tmp_path / "tables"
    assert main(["publish", str(neon), str(out)]) == 0
    assert main(["publish", str(neon), str(out)]) == 0  # its own files: no --force needed
    (out / "levels.csv").write_text("edited by hand\n")
    _refused(["publish", neon, out], out, capsys, "levels.csv")
    assert (out / "levels.csv").read_text() == "edited by hand\n"


# ---------------------------------------------------------------- 5. internal errors -> 2
def _edit_file(path: Path, change) -> None:
    doc = tomllib.loads(path.read_text())
    change(doc)
    path.write_text(tomli_w.dumps(doc))


@pytest.mark.parametrize("tol", [0.0, -1e-8, 1e-300, 2.0])
def test_tolerance_out_of_range(neon, capsys, tol):
    _edit_file(neon, lambda d: d["fit"].__setitem__("tolerance", tol))
    _refused(["fit", neon], neon.parent, capsys, "tolerance")


@pytest.mark.parametrize("where", ["energy", "value", "min", "ab_initio"])
@pytest.mark.parametrize("big", [1e300, -1e300])
def test_huge_numbers_in_the_file(neon, capsys, where, big):
    def change(d):
        if where == "energy":
            d["level"][0]["energy"] = big
        else:
            d["parameters"]["2p5 3p: Eav"][where] = big
            d["parameters"]["2p5 3p: Eav"].pop("max", None)
            if where == "min":
                d["parameters"]["2p5 3p: Eav"]["min"] = -abs(big)
    _edit_file(neon, change)
    _refused(["fit", neon], neon.parent, capsys, where)


def test_deeply_nested_toml(neon, capsys):
    neon.write_text("x = " + "[" * 100_000 + "]" * 100_000 + "\n")
    _refused(["check", neon], neon.parent, capsys, "nested too deeply")


@pytest.mark.parametrize("opts, item", [(["--step", "1e-9"], "--step"),
                                        (["--window", "1e9"], "--window"),
                                        (["--energy", "nan"], "--energy"),
                                        (["--step", "0"], "--step"),
                                        (["--tolerance", "-1"], "--tolerance")])
def test_search_sizes_and_numbers(capsys, tmp_path, opts, item):
    s = tmp_path / "two.toml"
    shutil.copy(SAMPLES / "kestrel_two_parity.toml", s)
    lines = SAMPLES / "kestrel_two_parity_lines.txt"
    base = {"--energy": "40000"}
    argv = ["search", s, lines, "--J", "1", "--parity", "odd"]
    for k, v in base.items():
        if k not in opts:
            argv += [k, v]
    _refused(argv + opts, tmp_path, capsys, item)


def test_output_paths_under_proc(neon, capsys):
    _refused(["export", neon, "/proc/finefit-test.csv"], neon.parent, capsys, "/proc")
    _refused(["publish", neon, "/proc/finefit-tables"], neon.parent, capsys, "/proc")


@pytest.mark.parametrize("argv, item", [
    (["classify", "{s}", "{lines}", "--tolerance", "nan"], "--tolerance"),
    (["lines", "{s}", "--radial", "2p,3s=nan"], "--radial"),
    (["lines", "{s}", "--limit", "-1"], "--limit"),
    (["classify", "{s}", "{lines}", "--limit", "-1"], "--limit"),
    (["fit", "{s}", "--keep", ""], "name"),
    (["fit", "{s}", "--keep", "a\x00b"], "U+0000"),
    (["new", "{new}", "-c", "3d7", "--Z", "26", "--limit", "-1"], "--limit"),
    (["lines", "{s}", "--air-range", "3000", "2000"], "--air-range"),
    (["abinitio", "{s}", "--scale", "F=nan"], "--scale"),
])
def test_command_line_numbers(neon, capsys, argv, item):
    lines = SAMPLES / "kestrel_two_parity_lines.txt"
    argv = [a.format(s=neon, lines=lines, new=neon.parent / "new.toml") for a in argv]
    _refused(argv, neon.parent, capsys, item)


def test_memory_error_is_a_message(neon, capsys, monkeypatch):
    import finefit.session

    def boom(self, *a, **k):
        raise MemoryError

    monkeypatch.setattr(finefit.session.Session, "report", boom)
    _refused(["check", neon], neon.parent, capsys, "not enough memory")


# ---------------------------------------------------------------- 6. accepted without a word
def test_too_few_electrons(tmp_path, capsys):
    _refused(["new", tmp_path / "a.toml", "-c", "3d6 4s", "--Z", "2"], tmp_path, capsys,
             "3d6 4s", "7 electrons")
    _refused(["new", tmp_path / "a.toml", "-c", "3d6 4s", "--Z", "26", "--charge", "25"],
             tmp_path, capsys, "3d6 4s")


def test_core_must_be_closed(tmp_path, capsys):
    # Fe II has 25 electrons: 3d6 4s leaves 18 for the [Ar] core, 3d6 4s2 leaves 17
    _refused(["new", tmp_path / "a.toml", "-c", "3d6 4s2", "--Z", "26", "--charge", "1"],
             tmp_path, capsys, "17")
    assert main(["new", str(tmp_path / "b.toml"), "-c", "3d6 4s", "-c", "3d7", "--Z", "26",
                 "--charge", "1"]) == 0


def test_closed_core_sizes_match_noble_gas_cores():
    # noble-gas cores: He 2, Ne 10, Ar 18, Kr 36, Xe 54, Rn 86 (standard periodic table)
    sizes = closed_core_sizes([(3, 2), (4, 0)])
    for core in (2, 10, 18):
        assert core in sizes
    assert 36 in closed_core_sizes([(4, 3), (6, 0)])  # [Kr] below 4f 6s
    assert 54 in closed_core_sizes([(4, 3), (6, 0)])  # [Xe] below 4f 6s (Sm II 4f6 6s)
    assert 86 in closed_core_sizes([(5, 3), (6, 2), (7, 0)])  # [Rn] below 5f 6d 7s (U I)
    assert 17 not in sizes


def test_ionization_limit_below_levels_warns(neon, capsys):
    _edit_file(neon, lambda d: d["ion"].__setitem__("ionization_limit", 1000.0))
    assert main(["check", str(neon)]) == 0
    err = capsys.readouterr().err
    assert "warning" in err and "ionization limit" in err


@pytest.mark.parametrize("change, item", [
    (lambda d: d["parameter_set"].append(dict(d["parameter_set"][0])), "given twice"),
    (lambda d: d["parameter_set"][0]["values"].__setitem__("2p5 3p: Eav", float("inf")),
     "finite"),
    (lambda d: d["parameter_set"][0]["values"].__setitem__("2p5 9p: Eav", 1.0), "unknown"),
    (lambda d: d["parameter_set"][0]["errors"].__setitem__("2p5 3p: Eav", -1.0), "negative"),
])
def test_parameter_sets_are_checked(neon, capsys, change, item):
    assert main(["fit", str(neon), "--keep", "first"]) == 0
    capsys.readouterr()
    _edit_file(neon, change)
    _refused(["params", neon], neon.parent, capsys, item)


@pytest.mark.parametrize("lid", ["a\x00b", 'say "hi"', "it's", " padded"])
def test_level_ids_with_nul_or_quotes(neon, capsys, lid):
    _edit_file(neon, lambda d: d["level"][0].__setitem__("id", lid))
    _refused(["check", neon], neon.parent, capsys, "level id")


@pytest.mark.parametrize("digits", ["١٢٣", "１２３", "१२३"])
def test_digits_other_than_ascii(neon, capsys, digits):
    _refused(["edit", neon, "L001", f"energy={digits}"], neon.parent, capsys, "0-9")
    _refused(["set", neon, "2p5 3p: Eav", "--value", digits], neon.parent, capsys, "0-9")
    _refused(["new", neon.parent / "n.toml", "-c", "2p2", "--Z", digits], neon.parent,
             capsys, "--Z")


# ---------------------------------------------------------------- 7. long tokens
def test_messages_quote_at_most_about_80_characters(neon, capsys):
    label = "x" * 5_000_000
    err = _refused(["edit", neon, "L001", f"label={label}"], neon.parent, capsys, "label")
    assert len(err) < 1000
    err = _refused(["set", neon, "y" * 100_000, "--value", "1"], neon.parent, capsys)
    assert len(err) < 3000  # the known names are listed, the token is cut
    assert "100000 characters" in err


def test_every_successful_write_reloads(neon):
    for argv in (["set", neon, "2p5 3p: zeta(2p)", "--min", "0", "--max", "1000"],
                 ["edit", neon, "L001", "g=1.5", "uncertainty=0.1"],
                 ["fit", neon, "--write", "--keep", "k"],
                 ["sets", neon, "use", "k"], ["exclude", neon, "L002"]):
        assert main([str(a) for a in argv]) == 0
        Session.load(neon).problem()
