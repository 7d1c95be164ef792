"""The shape of the package: imports point one way (no cycle, counting imports inside functions;
``TYPE_CHECKING`` blocks aside), nothing imports the command line and no command imports another,
no module over MAX_LINES lines, no function over MAX_COMPLEXITY (cyclomatic, as radon counts it).

The allow-lists below name what is known to break a rule today. Each entry must still break it
(a stale entry fails, so the lists only shrink); empty them as the code is split.
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "planner"
MAX_LINES = 400
MAX_COMPLEXITY = 15

#: Import cycles allowed, each as the set of modules on it (none: keep it that way).
KNOWN_CYCLES: frozenset[frozenset[str]] = frozenset()
#: Command modules known to import another command: (importer, imported).
KNOWN_COMMAND_IMPORTS: frozenset[tuple[str, str]] = frozenset()
#: Modules known to be longer than MAX_LINES (path under planner/).
KNOWN_LONG_MODULES: frozenset[str] = frozenset()
#: Functions known to be more complex than MAX_COMPLEXITY ("path:qualified name").
KNOWN_COMPLEX_FUNCTIONS: frozenset[str] = frozenset()


def modules() -> dict[str, Path]:
    """Dotted name -> file, for every module of the package."""
    out = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = path.relative_to(ROOT).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        out[name] = path
    return out


def _is_type_checking(node: ast.If) -> bool:
    test = node.test
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def _imports(tree: ast.AST) -> Iterator[ast.Import | ast.ImportFrom]:
    """Every import statement, at any depth (inside functions too), except under TYPE_CHECKING."""
    for node in ast.iter_child_nodes(tree):
        if isinstance(node, ast.If) and _is_type_checking(node):
            for child in node.orelse:
                yield from _imports(ast.Module(body=[child], type_ignores=[]))
            continue
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            yield node
        yield from _imports(node)


def imported_modules(name: str, path: Path, known: set[str]) -> set[str]:
    """The package's modules that ``name`` imports (``from pkg import mod`` counts ``pkg.mod``)."""
    is_package = path.name == "__init__.py"
    out: set[str] = set()
    for node in _imports(ast.parse(path.read_text(), str(path))):
        if isinstance(node, ast.Import):
            out |= {a.name for a in node.names if a.name in known}
            continue
        if node.level:  # relative: from the importing module's package
            base = name.split(".") if is_package else name.split(".")[:-1]
            base = base[: len(base) - (node.level - 1)]
            source = ".".join(base + ([node.module] if node.module else []))
        else:
            source = node.module or ""
        if source in known:
            out.add(source)
        out |= {f"{source}.{a.name}" for a in node.names if f"{source}.{a.name}" in known}
    out.discard(name)
    return out


def import_graph() -> dict[str, set[str]]:
    mods = modules()
    known = set(mods)
    return {name: imported_modules(name, path, known) for name, path in mods.items()}


def cycles(graph: dict[str, set[str]]) -> list[frozenset[str]]:
    """Strongly connected components with more than one module (Tarjan).

    >>> sorted(sorted(c) for c in cycles({"a": {"b"}, "b": {"a"}, "c": {"a"}}))
    [['a', 'b']]
    """
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[frozenset[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = set()
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.add(w)
                if w == v:
                    break
            if len(component) > 1:
                found.append(frozenset(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def _check_against(found: set, known: frozenset, what: str) -> None:
    new, stale = found - known, known - found
    assert not new, f"{what}: {sorted(map(str, new))}"
    assert not stale, f"no longer {what} (remove from the allow-list): {sorted(map(str, stale))}"


def test_no_import_cycle() -> None:
    found = set(cycles(import_graph()))
    _check_against(found, KNOWN_CYCLES, "import cycles")


def test_nothing_imports_the_command_line_and_no_command_imports_another() -> None:
    graph = import_graph()
    shared = {"planner.cli", "planner.cli._common", "planner.cli.options"}
    into_cli = {(a, b) for a, bs in graph.items() for b in bs  # __main__ is `python -m planner`
                if b.startswith("planner.cli") and not a.startswith(("planner.cli", "planner.__main__"))}
    assert not into_cli, f"library modules importing the command line: {sorted(into_cli)}"
    commands = {(a, b) for a, bs in graph.items() for b in bs
                if a.startswith("planner.cli.") and b.startswith("planner.cli.") and a not in shared
                and b not in shared}
    _check_against(commands, KNOWN_COMMAND_IMPORTS, "commands importing another command")


def test_the_import_graph_counts_function_level_imports_not_type_checking(tmp_path: Path) -> None:
    """An import inside a function (the usual way round a cycle) counts; one under TYPE_CHECKING
    does not; ``from pkg import mod`` and relative imports name the module."""
    path = tmp_path / "mod.py"
    path.write_text("from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n    import p.typing_only\n"
                    "from . import sibling\nfrom p.pkg import sub, NAME\n"
                    "def f():\n    if True:\n        from p.late import x\n")
    known = {"p.typing_only", "p.sibling", "p.pkg", "p.pkg.sub", "p.late", "p.mod"}
    assert imported_modules("p.mod", path, known) == {"p.sibling", "p.pkg", "p.pkg.sub", "p.late"}


def test_no_module_over_max_lines() -> None:
    long = {str(p.relative_to(PACKAGE)): n for p in PACKAGE.rglob("*.py")
            if (n := len(p.read_text().splitlines())) > MAX_LINES}
    _check_against(set(long), KNOWN_LONG_MODULES, f"modules over {MAX_LINES} lines ({long})")


def test_no_function_over_max_complexity() -> None:
    radon = pytest.importorskip("radon.complexity", reason="radon is in the test extras")
    from radon.visitors import Function

    found: dict[str, int] = {}

    def walk(blocks: list, path: str) -> None:
        for b in blocks:
            if isinstance(b, Function) and b.complexity > MAX_COMPLEXITY:
                found[f"{path}:{b.fullname}"] = b.complexity
            walk(getattr(b, "closures", []) or [], path)

    for p in sorted(PACKAGE.rglob("*.py")):
        walk(radon.cc_visit(p.read_text()), str(p.relative_to(PACKAGE)))
    _check_against(set(found), KNOWN_COMPLEX_FUNCTIONS, f"functions over complexity {MAX_COMPLEXITY} ({found})")


#: The stages of ../shared/design.md in the order data flows; a module may import only its own
#: stage and those to its left. ``target_circuit`` (a target's circuit at one grid point) reads
#: the sweep's defaults, so it stands after ``sweep``; ``errors`` is shared by every stage.
STAGES = ("errors", "config", "noise", "circuits", "sweep", "target_circuit", "devicedata", "sampling", "store",
          "fits", "planning", "jobs", "reports", "cli")


def stage_of(module: str) -> str | None:
    """The stage a module belongs to (its first name under ``planner``).

    >>> stage_of("planner.store.shards"), stage_of("planner.fits"), stage_of("planner")
    ('store', 'fits', None)
    """
    parts = module.split(".")
    return parts[1] if len(parts) > 1 and parts[1] in STAGES else None


def test_layers_point_one_way() -> None:
    rank = {s: i for i, s in enumerate(STAGES)}
    backwards = sorted((a, b) for a, bs in import_graph().items() for b in bs
                       if stage_of(a) and stage_of(b) and rank[stage_of(b)] > rank[stage_of(a)])
    assert not backwards, f"modules importing a stage to their right: {backwards}"
