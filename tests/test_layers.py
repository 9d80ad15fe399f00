"""The package's layers: imports flow one way, from faces down to the base (a consistency check).

Every module of ``estimator`` and ``estimator_app`` belongs to one layer of :data:`LAYERS`; a module
may import (at run time, anywhere in the module) only from its own layer or a layer below it.
Imports under ``if TYPE_CHECKING:`` are annotations only and do not count. The same picture, drawn,
is in DEVELOPERS.md ("Architecture"). A new module must be given a layer here.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent

#: Layers from the bottom up; each lists module names relative to the ``estimator`` package
#: (``cli*`` for the command line, ``app:*`` for estimator_app).
LAYERS: dict[str, tuple[str, ...]] = {
    "base": (
        "constants",
        "errors",
        "caution",
        "limits",
        "units",
        "jsonout",
        "contracts",
        "fields",
        "properties",
    ),
    "physics": (
        "physiology",
        "site",
        "gas_mixtures",
        "vaporizer",
        "flowmeter",
        "mac",
        "closed_form",
        "circuit",
        "cylinders",
        "cylinder_state",
        "real_gas",
        "real_gas_table",
        "supply_values",
        "liquid_agent",
        "mac_age",
    ),
    "numerics": ("rkc", "dopri5"),
    "accounts": ("accounting", "carbon", "costs"),
    "inputs": (
        "scenario",
        "inventory_file",
        "supply_file",
        "casemix_schema",
        "casemix_files",
        "casemix_draws",
        "casemix_orders",
        "audit_csv",
        "audit_log",
        "cylinder_entry",
        "policy_file",
    ),
    "simulation": (
        "case_site",
        "kernel_parameters",
        "case_setup",
        "engine",
        "assemble",
        "results",
        "batch",
        "spread",
        "totals_table",
    ),
    "planning": (
        "safety",
        "advisories",
        "supply",
        "casemix",
        "casemix_plan",
        "forecast",
        "forecast_size",
        "audit",
        "audit_report",
        "audit_policy",
        "exports",
        "flow_classes",
        "floor_settings",
        "supply_report",
        "supply_demand",
        "supply_allocate",
    ),
    "faces": ("__init__", "__main__", "cli*", "app:*"),
}


def _layer_of(module: str) -> int:
    for rank, (_, members) in enumerate(LAYERS.items()):
        for m in members:
            if m == module or (m.endswith("*") and module.startswith(m[:-1])):
                return rank
    raise KeyError(module)


def _modules() -> dict[str, Path]:
    found = {}
    for path in sorted((ROOT / "estimator").rglob("*.py")):
        rel = path.relative_to(ROOT / "estimator").with_suffix("")
        parts = list(rel.parts)
        if parts[-1] == "__init__" and len(parts) > 1:
            parts = parts[:-1]
        found[".".join(parts)] = path
    for path in sorted((ROOT / "estimator_app").rglob("*.py")):
        found["app:" + ".".join(path.relative_to(ROOT / "estimator_app").with_suffix("").parts)] = path
    return found


def _imports(path: Path) -> set[str]:
    """``estimator`` modules imported at run time by the file (relative to the package)."""
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
        for name in names:
            if name.startswith("estimator.") and not name.startswith("estimator_app"):
                out.add(name[len("estimator.") :])
    return out


MODULES = _modules()


def test_every_module_has_a_layer():
    missing = [m for m in MODULES if not _has_layer(m)]
    assert not missing, f"give these modules a layer in tests/test_layers.py: {missing}"


def _has_layer(module: str) -> bool:
    try:
        _layer_of(module)
    except KeyError:
        return False
    return True


@pytest.mark.parametrize("module", sorted(m for m in MODULES if _has_layer(m)))
def test_imports_flow_down(module):
    rank = _layer_of(module)
    names = list(LAYERS)
    upward = []
    for target in sorted(_imports(MODULES[module])):
        if target not in MODULES:  # a name imported from a module, not a module
            continue
        if _layer_of(target) > rank:
            upward.append(f"{target} ({names[_layer_of(target)]})")
    assert not upward, f"{module} ({names[rank]}) imports from a layer above: {upward}"
