"""The package's layers: one folder a layer, imports flow one way, faces down to the base.

A consistency check of the layout (not validation). Every module of ``estimator`` and
``estimator_app`` belongs to one layer: its folder (``estimator/physics/...``), the base (the
modules listed in :data:`BASE`, at the top of the package) or the faces (the command line, the API
entry points and the app). A module may import, at run time and anywhere in the module, only from
its own layer or a layer below it; imports under ``if TYPE_CHECKING:`` are annotations only and do
not count. The same picture, drawn, is in DEVELOPERS.md ("Architecture").
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent

#: Layers from the bottom up; each but the base and the faces is a folder of ``estimator``.
LAYERS = ("base", "physics", "numerics", "accounts", "inputs", "simulation", "planning", "faces")
#: The base: modules every layer may use, at the top of the package (a new one must be named here).
BASE = (
    "constants",
    "errors",
    "choices",
    "caution",
    "limits",
    "units",
    "jsonout",
    "contracts",
    "fields",
    "properties",
    "display",
)
#: Face modules of the package itself (the app's modules are faces too).
FACES = ("__init__", "__main__", "cli")


def layer_of(module: str) -> str:
    """Layer of a module named relative to ``estimator`` (``app:`` prefix for estimator_app)."""
    head = module.split(".")[0]
    if module.startswith("app:") or head in FACES:
        return "faces"
    if head in LAYERS:
        return head
    if module in BASE:
        return "base"
    raise KeyError(module)


def _modules() -> dict[str, Path]:
    found = {}
    for path in sorted((ROOT / "estimator").rglob("*.py")):
        parts = list(path.relative_to(ROOT / "estimator").with_suffix("").parts)
        if parts[-1] == "__init__" and len(parts) > 1:
            parts = parts[:-1]
        found[".".join(parts)] = path
    for path in sorted((ROOT / "estimator_app").rglob("*.py")):
        found["app:" + ".".join(path.relative_to(ROOT / "estimator_app").with_suffix("").parts)] = path
    return found


def _imports(path: Path) -> set[str]:
    """``estimator`` modules and packages imported at run time by the file (relative to ``estimator``)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    skip = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            skip.update(id(n) for n in ast.walk(node))
    pkg = path.relative_to(ROOT).with_suffix("").parts[:-1]
    out = set()
    for node in ast.walk(tree):
        if id(node) in skip:
            continue
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = list(pkg[: len(pkg) - node.level + 1])
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            names = [target] + [f"{target}.{a.name}" for a in node.names]
        elif isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        else:
            continue
        out.update(n[len("estimator.") :] for n in names if n.startswith("estimator."))
    return out


MODULES = _modules()


def _known(module: str) -> bool:
    try:
        layer_of(module)
    except KeyError:
        return False
    return True


def test_every_module_has_a_layer():
    missing = [m for m in MODULES if not _known(m)]
    assert not missing, f"put these modules in a layer folder, or name them in BASE: {missing}"


@pytest.mark.parametrize("module", sorted(m for m in MODULES if _known(m)))
def test_imports_flow_down(module):
    rank = LAYERS.index(layer_of(module))
    upward = sorted(
        f"{t} ({layer_of(t)})" for t in _imports(MODULES[module]) if t in MODULES and LAYERS.index(layer_of(t)) > rank
    )
    assert not upward, f"{module} ({LAYERS[rank]}) imports from a layer above: {upward}"


def test_layer_folders_exist():
    for layer in LAYERS[1:-1]:
        assert (ROOT / "estimator" / layer / "__init__.py").is_file(), layer
