"""Layout rules of the code base: no import cycles, no module over 400 lines, a docstring naming each module's job.

These are consistency checks of the source tree, not validation: they read the files with
:mod:`ast` and never import them.

* **Import graph.** Every ``import`` and ``from ... import`` among the ``estimator`` and
  ``estimator_app`` modules counts, at module level and inside functions (a lazy import still ties
  two modules together). Imports under ``if TYPE_CHECKING:`` are left out: they never run.
  ``from . import x`` (or ``from .pkg import x``) imports the submodule ``x`` when ``x`` is a module,
  otherwise the package; importing a submodule also imports its package's ``__init__``, but that
  edge is not counted (every package ``__init__`` re-exports its submodules by design).
  Cycles are the strongly connected components of more than one module (Tarjan 1972).
* **Size.** Physical lines per module (``len(text.splitlines())``).
* **Docstring.** Each module opens with a docstring whose first line is a sentence of its own.

References
----------
.. [1] Tarjan RE. Depth-first search and linear graph algorithms. SIAM J Comput 1972;1:146.
"""

from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = ("estimator", "estimator_app")
MAX_LINES = 400


def module_files() -> dict[str, Path]:
    """Dotted module name -> file, for every module of the packages and the app entry point."""
    out = {"app": ROOT / "app.py"}
    for pkg in PACKAGES:
        for path in sorted((ROOT / pkg).rglob("*.py")):
            parts = path.relative_to(ROOT).with_suffix("").parts
            if parts[-1] == "__init__":
                parts = parts[:-1]
            out[".".join(parts)] = path
    return out


def _is_type_checking(test: ast.expr) -> bool:
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING"
    )


def _imports(tree: ast.AST) -> list[ast.Import | ast.ImportFrom]:
    """Every import statement, at any depth, except those under ``if TYPE_CHECKING:``."""
    found: list[ast.Import | ast.ImportFrom] = []

    def visit(node: ast.AST) -> None:
        if isinstance(node, ast.If) and _is_type_checking(node.test):
            for child in node.orelse:
                visit(child)
            return
        if isinstance(node, ast.Import | ast.ImportFrom):
            found.append(node)
        for child in ast.iter_child_nodes(node):
            visit(child)

    visit(tree)
    return found


def import_graph() -> dict[str, set[str]]:
    """Module -> the package modules it imports (see the module docstring for the rules)."""
    files = module_files()
    graph: dict[str, set[str]] = {name: set() for name in files}
    for name, path in files.items():
        is_pkg = path.name == "__init__.py"
        package = name if is_pkg else name.rpartition(".")[0]
        for node in _imports(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            else:
                if node.level:
                    base = package.split(".")
                    base = base[: len(base) - (node.level - 1)]
                    mod = ".".join(base + ([node.module] if node.module else []))
                else:
                    mod = node.module or ""
                targets = [f"{mod}.{a.name}" if f"{mod}.{a.name}" in files else mod for a in node.names]
            for target in targets:
                while target and target not in files:  # `import a.b.c` of a non-module attribute
                    target = target.rpartition(".")[0]
                if target and target != name:
                    graph[name].add(target)
    return graph


def strongly_connected(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components of a directed graph (Tarjan 1972), iterative.

    >>> sorted(map(sorted, strongly_connected({"a": {"b"}, "b": {"a"}, "c": {"a"}})))
    [['a', 'b'], ['c']]
    """
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    out: list[list[str]] = []
    for root in graph:
        if root in index:
            continue
        work = [(root, iter(sorted(graph[root])))]
        index[root] = low[root] = len(index)
        stack.append(root)
        on_stack.add(root)
        while work:
            node, children = work[-1]
            child = next(children, None)
            if child is not None:
                if child not in index:
                    index[child] = low[child] = len(index)
                    stack.append(child)
                    on_stack.add(child)
                    work.append((child, iter(sorted(graph.get(child, ())))))
                elif child in on_stack:
                    low[node] = min(low[node], index[child])
                continue
            work.pop()
            if work:
                parent = work[-1][0]
                low[parent] = min(low[parent], low[node])
            if low[node] == index[node]:
                comp = []
                while True:
                    top = stack.pop()
                    on_stack.discard(top)
                    comp.append(top)
                    if top == node:
                        break
                out.append(comp)
    return out


def test_tarjan_finds_a_three_module_cycle_and_leaves_a_chain_alone():
    comps = strongly_connected({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}, "e": set()})
    assert sorted(map(sorted, comps)) == [["a", "b", "c"], ["d"], ["e"]]


def test_lazy_imports_count_and_type_checking_imports_do_not():
    tree = ast.parse(
        "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    import a\nelse:\n    import b\n"
        "def f():\n    import c\n"
    )
    names = sorted(alias.name for node in _imports(tree) if isinstance(node, ast.Import) for alias in node.names)
    assert names == ["b", "c"]


def test_relative_submodule_import_points_at_the_submodule():
    graph = import_graph()
    assert "estimator.accounts.carbon" in graph["estimator.planning.audit"]  # `from . import carbon`
    assert "estimator" not in graph["estimator.planning.audit"]


def test_no_import_cycles():
    graph = import_graph()
    cycles = [sorted(c) for c in strongly_connected(graph) if len(c) > 1]
    assert cycles == [], f"import cycles: {cycles}"


def test_no_module_over_the_line_limit():
    long = {}
    for path in module_files().values():
        rel = path.relative_to(ROOT).as_posix()
        n = len(path.read_text(encoding="utf-8").splitlines())
        if n > MAX_LINES:
            long[rel] = n
    assert long == {}, f"modules over {MAX_LINES} lines: {long}"


def test_every_module_says_its_job_in_its_first_docstring_line():
    missing = []
    for path in module_files().values():
        doc = ast.get_docstring(ast.parse(path.read_text(encoding="utf-8")))
        first = doc.strip().splitlines()[0].strip() if doc and doc.strip() else ""
        if len(first) < 15 or not first.endswith((".", ":")):
            missing.append(path.relative_to(ROOT).as_posix())
    assert missing == [], f"modules without a one-line job in their docstring: {missing}"
