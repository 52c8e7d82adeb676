"""The documented layer table (DEVELOPERS.md, "Architecture") holds for every module.

Each finefit module belongs to a layer; a module may import only from its own layer
or lower ones, the pure layers import no file I/O, terminal or plotting library, and
no module imports a private (underscore) name from another package.
"""

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "finefit"

# lowest first, as in DEVELOPERS.md
LAYERS = [
    ("base", ["finefit.errors", "finefit.threads", "finefit"]),
    ("notation", ["finefit.notation"]),
    ("angular", ["finefit.angular"]),
    ("model", ["finefit.model"]),
    ("radial", ["finefit.radial"]),
    ("lines", ["finefit.lines"]),
    ("fitting", ["finefit.fitting"]),
    ("storage", ["finefit.storage"]),
    ("session", ["finefit.session", "finefit.level_import", "finefit.workspace",
                 "finefit.parallel", "finefit.sequence", "finefit.refits"]),
    ("reports", ["finefit.reports"]),
    ("ui", ["finefit.ui"]),
    # the command line starts the workspace, so it sits above ui
    ("cli", ["finefit.cli", "finefit.cli_sequence", "finefit.__main__"]),
]
PURE = {"notation", "angular", "model", "radial", "lines", "fitting"}
FORBIDDEN_IN_PURE = ("rich", "textual", "matplotlib", "finefit.storage", "finefit.ui",
                     "finefit.reports", "finefit.cli", "tomllib", "tomli_w", "csv")


def layer_of(module: str) -> int:
    best, rank = -1, None
    for i, (_, prefixes) in enumerate(LAYERS):
        for p in prefixes:
            if (module == p or module.startswith(p + ".")) and len(p) > best:
                best, rank = len(p), i
    if rank is None:
        # a new top-level module must be placed in the table first
        raise AssertionError(f"{module} is in no layer of the table")
    return rank


def modules():
    for path in sorted(ROOT.rglob("*.py")):
        rel = path.relative_to(ROOT.parent).with_suffix("")
        name = ".".join(rel.parts)
        if name.endswith(".__init__"):
            name = name[: -len(".__init__")]
        yield name, path


def imports(path: Path):
    tree = ast.parse(path.read_text())
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for a in node.names:
                yield a.name, None, node.lineno
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            for a in node.names:
                yield node.module, a.name, node.lineno


def package_of(module: str) -> str:
    """The package a module belongs to (a package is its own)."""
    parts = module.split(".")
    if (ROOT.parent.joinpath(*parts) / "__init__.py").exists():
        return module
    return ".".join(parts[:-1])


@pytest.mark.parametrize("name, path", list(modules()), ids=lambda x: str(x))
def test_layers(name, path):
    own = layer_of(name)
    own_layer = LAYERS[own][0]
    for mod, item, line in imports(path):
        if mod.startswith("finefit") and name != "finefit":
            target = layer_of(mod)
            assert target <= own, f"{name}:{line} imports {mod} from a higher layer"
        if own_layer in PURE:
            assert not any(mod == f or mod.startswith(f + ".") for f in FORBIDDEN_IN_PURE), (
                f"{name}:{line} (pure layer) imports {mod}"
            )
        if (mod.startswith("finefit") and item and item.startswith("_")
                and not item.startswith("__") and package_of(mod) != package_of(name)):
            raise AssertionError(f"{name}:{line} imports the private {item} from {mod}")
