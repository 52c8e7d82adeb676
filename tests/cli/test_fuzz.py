"""Bounded fuzzing of session files and command lines (hypothesis; derandomised under CI).

Whatever the input: no traceback, never exit 3, no file changed when a command fails,
and every file a command wrote with exit 0 reads back. (Level tables and ``import`` are
left to the level-table tests.)"""

import math
import tempfile
import tomllib
from pathlib import Path

import tomli_w
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from finefit.cli import main
from finefit.session import Session

GOOD = """
format = "finefit-session/1"
title = "invented fuzzing session"

[ion]
Z = 6
charge = 0
ionization_limit = 90820.0

[model]
configurations = ["2p2"]

[parameters."2p2: Eav"]
value = 4800.0
vary = true

[parameters."2p2: F2(2p)"]
value = 37000.0
vary = true
link = "F"

[parameters."2p2: zeta(2p)"]
value = 25.0
vary = false

[[level]]
id = "a"
energy = 0.0
J = "0"
parity = "even"
label = "2p2 3P"

[[level]]
id = "b"
energy = 10192.6
J = 2
parity = "even"
label = "2p2 1D"

[[level]]
id = "c"
energy = 21648.0
J = "0"
parity = "even"
label = "2p2 1S"
"""

_NUMBERS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0.0, -0.0, 1e300, -1e300, 1e-320, 5e9, 2e10]),
    st.integers(-(10**20), 10**20),
)
_TEXT = st.one_of(
    st.text(max_size=12),
    st.sampled_from(["", " ", "a\x00b", "it's", 'q"q', "x" * 300, "2p2 3P", "3d7",
                     "١٢٣", "１２", "\u2028", "nan", "inf", "-1", "0"]),
)
_SCALARS = st.one_of(st.none(), st.booleans(), _NUMBERS, _TEXT,
                     st.lists(st.integers(-3, 3), max_size=2),
                     st.dictionaries(st.sampled_from(["x", "2p2: Eav"]), _NUMBERS, max_size=2))

_PATHS = [
    ("ion", "Z"), ("ion", "charge"), ("ion", "ionization_limit"), ("ion", "name"),
    ("model", "configurations"), ("fit", "tolerance"), ("fit", "max_iterations"),
    ("fit", "default_uncertainty"), ("fit", "weighting"), ("fit", "correlation_threshold"),
    ("parameters", "2p2: Eav", "value"), ("parameters", "2p2: Eav", "min"),
    ("parameters", "2p2: F2(2p)", "max"), ("parameters", "2p2: F2(2p)", "link"),
    ("parameters", "2p2: zeta(2p)", "ab_initio"), ("parameters", "2p2: G9(2p)", "value"),
    ("level", 0, "id"), ("level", 1, "energy"), ("level", 2, "J"), ("level", 0, "g"),
    ("level", 1, "uncertainty"), ("level", 2, "state"), ("level", 0, "label"),
    ("level", 1, "note"), ("title",), ("note",),
    ("parameter_set", 0, "values"), ("parameter_set", 0, "name"), ("parameter_set", 0, "sigma"),
]


def _mutate(doc: dict, path: tuple, value) -> None:
    node = doc
    for key in path[:-1]:
        if isinstance(key, int):
            node = node[key]
        else:
            node = node.setdefault(key, {})
    if value is None:
        if isinstance(node, dict):
            node.pop(path[-1], None)
    else:
        node[path[-1]] = value


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in folder.iterdir() if p.is_file()}


def _fits(path: Path) -> bool:
    try:
        Session.load(path).problem()
    except Exception:  # noqa: BLE001 - any failure means "does not fit"
        return False
    return True


def _run(argv: list[str], folder: Path, capsys) -> int:
    before = _snapshot(folder)
    usable = {name for name in before if name.endswith(".toml") and _fits(folder / name)}
    code = main(argv)
    out = capsys.readouterr()
    text = out.err + out.out
    assert "Traceback" not in text
    assert code != 3, text[-2000:]
    assert code in (0, 1, 2), code
    after = _snapshot(folder)
    if code == 2:
        assert after == before, argv
        assert "error" in out.err
        assert len(out.err) < 5000  # long tokens are cut
    else:
        for name, data in after.items():  # every session written reads back ...
            if name.endswith(".toml") and before.get(name) != data:
                s = Session.load(folder / name)
                if name in usable or name not in before:
                    s.problem()  # ... and a session that could be fitted still can
    return code


def _session_dir(text: str) -> tuple[tempfile.TemporaryDirectory, Path]:
    tmp = tempfile.TemporaryDirectory()
    p = Path(tmp.name) / "s.toml"
    p.write_text(text, encoding="utf-8")
    return tmp, p


_BASE = tomllib.loads(GOOD)
_BASE["parameter_set"] = [{"name": "first", "created": "2026-12-01T20:00:00Z", "sigma": 1.0,
                           "n_levels": 3, "n_free": 2, "included": ["a", "b", "c"],
                           "values": {"2p2: Eav": 4800.0}, "errors": {"2p2: Eav": 1.0}}]


@settings(max_examples=70, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(mutations=st.lists(st.tuples(st.sampled_from(_PATHS), _SCALARS), min_size=1,
                          max_size=3),
       command=st.sampled_from(["check", "params", "fit-write", "set", "edit", "export"]))
def test_fuzzed_session_files(capsys, mutations, command):
    import copy

    doc = copy.deepcopy(_BASE)
    for path, value in mutations:
        try:
            _mutate(doc, path, value)
        except (TypeError, IndexError, KeyError, AttributeError):
            pass
    try:
        text = tomli_w.dumps(doc)
    except (TypeError, ValueError):
        return  # not representable in TOML
    tmp, p = _session_dir(text)
    with tmp:
        s = str(p)
        argv = {
            "check": ["check", s], "params": ["params", s, "--json"],
            "fit-write": ["fit", s, "--write", "--keep", "fuzz"],
            "set": ["set", s, "2p2: *", "--vary"],
            "edit": ["edit", s, "b", "uncertainty=0.5"],
            "export": ["export", s, str(p.with_suffix(".csv"))],
        }[command]
        _run(argv, p.parent, capsys)


_ARG = st.one_of(
    _TEXT,
    _NUMBERS.map(lambda x: repr(x) if isinstance(x, float) and not math.isfinite(x)
                 else str(x)),
)


@settings(max_examples=90, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(command=st.sampled_from(["set", "edit", "attach", "exclude", "sets", "fit", "new",
                                "export", "classify", "search", "lines", "levels"]),
       a=_ARG, b=_ARG, option=st.sampled_from(["--value", "--min", "--max", "--link",
                                               "--limit", "--tolerance", "--keep"]))
def test_fuzzed_command_lines(capsys, command, a, b, option):
    tmp, p = _session_dir(GOOD)
    with tmp:
        s = str(p)
        lines = p.parent / "lines.txt"
        lines.write_text("wavenumber\n10192.6\n21648.0\n")
        argv = {
            "set": ["set", s, a or "x", option, b],
            "edit": ["edit", s, "b", f"{a or 'energy'}={b}"],
            "attach": ["attach", s, "a", a or "1"],
            "exclude": ["exclude", s, a or "a"],
            "sets": ["sets", s, "show", a],
            "fit": ["fit", s, "--keep", a],
            "new": ["new", str(p.parent / "n.toml"), "-c", a or "2p2", "--Z", b],
            "export": ["export", s, str(p.parent / ("out-" + a.replace("/", "_")[:100]))],
            "classify": ["classify", s, str(lines), "--tolerance", a],
            "search": ["search", s, str(lines), "--J", "1", "--parity", "even", "--energy", a,
                       "--step", b or "1"],
            "lines": ["lines", s, "--radial", f"2p,3s={a}"],
            "levels": ["levels", s, "--parity", a],
        }[command]
        _run(argv, p.parent, capsys)
