"""The package layout of docs/architecture.md, read from the code's own imports (issue #25).

Every ``import`` and ``from … import`` in src/trimtab counts, at module level or inside a function,
except those under ``if TYPE_CHECKING:``. A package ``__init__`` that only hands names on counts as
its package (an import of it stands for the imports it makes). Checked: no import circle between
modules; every import runs down the layer order of docs/architecture.md; at most 9 modules at the
package root; no module over 600 lines; the one late-bound lookup is the documented one.
"""

from __future__ import annotations

import ast
import sys
from functools import cache
from pathlib import Path

import pytest

SRC = Path(__file__).resolve().parents[1] / "src" / "trimtab"

#: docs/architecture.md, "Layers": a part may import the parts of lower layers (and itself), nothing
#: above or beside it. The root modules are the foundation and may import one another (no circle).
LAYERS: tuple[frozenset[str], ...] = (
    frozenset({"errors", "_version", "_typing", "_validation", "_format", "_paths", "_output", "demo", "units"}),
    frozenset({"model"}),
    frozenset({"attribution", "stresstest", "hedge"}),
    frozenset({"construct"}),
    frozenset({"report"}),
    frozenset({"scenario"}),
    frozenset({"runs"}),
    frozenset({"app"}),
    frozenset({"trimtab"}),  # the public face (src/trimtab/__init__.py)
    frozenset({"cli"}),
)
#: importlib lookups of a module named by a literal: (from, to). docs/architecture.md, "The one
#: late-bound call": FactorModel.attribute delegates to the attribution package above it.
LATE_BOUND = {("trimtab.model._factor_model", "trimtab.attribution")}
MAX_ROOT_MODULES = 9
MAX_LINES = 600


def module_name(path: Path) -> str:
    parts = list(path.relative_to(SRC.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


@cache
def modules() -> dict[str, Path]:
    return {module_name(p): p for p in sorted(SRC.rglob("*.py"))}


def part(module: str) -> str:
    """The layer unit of a module: its top-level subpackage, the root module's name, or ``trimtab``."""
    parts = module.split(".")
    if len(parts) == 1:
        return "trimtab"
    return parts[1]


def layer(unit: str) -> int:
    return next(i for i, units in enumerate(LAYERS) if unit in units)


def _type_checking_nodes(tree: ast.AST) -> set[int]:
    skip: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            for inner in node.body:
                skip.update(id(n) for n in ast.walk(inner))
    return skip


def _known(target: str) -> str | None:
    """``target`` (a module, or a module plus a name imported from it) as a module of the package."""
    while target and target not in modules():
        target = target.rpartition(".")[0]
    return target or None


@cache
def imports(module: str) -> frozenset[str]:
    """The package's modules that ``module`` imports (any depth in the file, TYPE_CHECKING aside)."""
    path = modules()[module]
    tree = ast.parse(path.read_text(encoding="utf-8"))
    skip = _type_checking_nodes(tree)
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    found: set[str] = set()
    for node in ast.walk(tree):
        if id(node) in skip:
            continue
        targets: list[str] = []
        if isinstance(node, ast.Import):
            targets = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = package.split(".")[: len(package.split(".")) - (node.level - 1)]
                base = ".".join(anchor + ([node.module] if node.module else []))
            targets = [f"{base}.{alias.name}" for alias in node.names]
        for target in targets:
            if target.startswith("trimtab") and (known := _known(target)) and known != module:
                found.add(known)
    return frozenset(found)


def is_face(module: str) -> bool:
    """An ``__init__`` that only hands names on (imports, ``__all__``, a lazy ``__getattr__``)."""
    path = modules()[module]
    if path.name != "__init__.py":
        return False
    body = ast.parse(path.read_text(encoding="utf-8")).body
    allowed = (ast.Import, ast.ImportFrom, ast.Expr, ast.Assign, ast.AnnAssign, ast.If, ast.FunctionDef)
    return all(isinstance(s, allowed) for s in body) and len(path.read_text(encoding="utf-8").splitlines()) < 80


def edges() -> dict[str, set[str]]:
    """Module → modules it imports, with each package face replaced by what it imports."""

    def through(target: str, seen: tuple[str, ...] = ()) -> set[str]:
        if not is_face(target) or target in seen:
            return {target}
        out: set[str] = set()
        for inner in imports(target):
            out |= through(inner, (*seen, target)) if inner.startswith(target + ".") or is_face(inner) else {inner}
        return out or {target}

    return {m: set().union(*(through(t) for t in imports(m))) - {m} for m in modules() if not is_face(m)}


def circles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []
    sys.setrecursionlimit(max(sys.getrecursionlimit(), 10_000))

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in graph.get(v, ()):
            if w not in graph:
                continue
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                found.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def test_every_part_has_a_layer() -> None:
    units = {part(m) for m in modules()}
    missing = sorted(u for u in units if not any(u in layer_units for layer_units in LAYERS))
    assert not missing, f"{', '.join(missing)}: not in the layer order; add it to LAYERS here and to docs/architecture.md"


def test_no_import_circles() -> None:
    found = circles(edges())
    assert not found, "import circles (break each as docs/architecture.md says): " + " | ".join(" <-> ".join(c) for c in found)


def test_imports_run_down_the_layers() -> None:
    wrong = []
    for module in modules():
        here = part(module)
        for target in imports(module):
            there = part(target)
            if there == here or (layer(here) == 0 and layer(there) == 0):
                continue
            if layer(there) >= layer(here):
                wrong.append(f"{module} imports {target} ({here} may not import {there})")
    assert not wrong, "imports against the layer order of docs/architecture.md:\n" + "\n".join(sorted(wrong))


def test_late_bound_lookups_are_the_documented_ones() -> None:
    # importlib.import_module("trimtab.…") with a literal is an import the checks above cannot see
    found = set()
    for module, path in modules().items():
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if (isinstance(node, ast.Call) and ast.unparse(node.func).endswith("import_module") and node.args
                    and isinstance(node.args[0], ast.Constant) and str(node.args[0].value).startswith("trimtab")):
                found.add((module, str(node.args[0].value)))
    assert found == LATE_BOUND, f"late-bound lookups {sorted(found - LATE_BOUND)} are not documented; documented but gone: {sorted(LATE_BOUND - found)}"


def test_few_modules_at_the_package_root() -> None:
    root = sorted(p.name for p in SRC.glob("*.py") if p.name not in ("__init__.py", "__main__.py", "_version.py"))
    assert len(root) <= MAX_ROOT_MODULES, f"{len(root)} modules at the package root (at most {MAX_ROOT_MODULES}): {', '.join(root)}"


def test_no_module_over_600_lines() -> None:
    long = {str(p.relative_to(SRC)): n for p in SRC.rglob("*.py") if (n := len(p.read_text(encoding="utf-8").splitlines())) > MAX_LINES}
    assert not long, "split by concept: " + ", ".join(f"{name} has {n} lines" for name, n in sorted(long.items()))


def test_no_command_module_imports_another() -> None:
    commands = {m for m in modules() if m.startswith("trimtab.cli.") and not m.rpartition(".")[2].startswith("_")}
    crossing = [f"{m} imports {t}" for m in sorted(commands) for t in sorted(imports(m)) if t in commands]
    assert not crossing, "command families must not import one another (share code through cli/_app.py): " + "; ".join(crossing)


@pytest.mark.parametrize(
    ("source", "expected"),
    [
        ({"a": {"b"}, "b": {"c"}, "c": set()}, []),
        ({"a": {"b"}, "b": {"c"}, "c": {"a"}}, [["a", "b", "c"]]),
    ],
    ids=["chain", "circle"],
)
def test_the_circle_finder_finds_circles(source: dict[str, set[str]], expected: list[list[str]]) -> None:
    # the check above must be able to fail: a three-module circle is found, a chain is not
    assert circles(source) == expected
