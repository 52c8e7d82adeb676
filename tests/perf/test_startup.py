"""Start-up stays light: importing finefit or building the command-line parser loads
none of the heavy libraries (checked through sys.modules of a fresh interpreter, not by
timing; the figures are in benchmarks/bench_commands.py)."""

import json
import subprocess
import sys
from pathlib import Path

import finefit

ROOT = Path(__file__).resolve().parents[2]
HEAVY = ["lmfit", "sympy", "matplotlib", "textual", "scipy.stats", "scipy.constants",
         "scipy.optimize"]


def loaded_after(code: str) -> list[str]:
    probe = (
        f"{code}\nimport json, sys\n"
        f"print(json.dumps([m for m in {HEAVY + ['numpy', 'rich.console']!r} "
        "if m in sys.modules]))"
    )
    out = subprocess.run([sys.executable, "-c", probe], cwd=ROOT, capture_output=True,
                         text=True, check=True, env={"PYTHONPATH": str(ROOT), "PATH": ""})
    return json.loads(out.stdout.strip().splitlines()[-1])


def test_import_finefit_loads_no_heavy_library():
    assert loaded_after("import finefit") == []


def test_command_line_help_loads_neither_numpy_nor_rich():
    loaded = loaded_after(
        "from finefit.cli import build_parser\n"
        "try:\n    build_parser().parse_args(['--help'])\nexcept SystemExit:\n    pass"
    )
    assert loaded == []


def test_reading_a_session_loads_no_fitting_or_plotting_library():
    loaded = loaded_after(
        "from finefit.session import Session\n"
        "Session.load('sample_sessions/kestrel_iron_group.toml')"
    )
    assert "numpy" in loaded  # the engine was built
    assert not set(loaded) & {"lmfit", "sympy", "matplotlib", "textual", "scipy.stats"}


def test_public_names_resolve_on_first_use():
    from finefit.model.hamiltonian import Model
    from finefit.session import Session

    assert finefit.Model is Model and finefit.Session is Session
    for name in finefit.__all__:
        assert getattr(finefit, name) is not None
    assert set(finefit.__all__) <= set(dir(finefit))
    try:
        finefit.no_such_name  # noqa: B018
    except AttributeError as exc:
        assert "no_such_name" in str(exc)
    else:
        raise AssertionError("unknown attribute did not raise")
