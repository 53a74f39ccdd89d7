"""Checks on the repository itself: no import circle in the package, no pointer to files it lacks.

Both are invariants of the code base, not of the science: an import circle makes the import order
decide whether a module works, and a pointer to a file outside the repository leaves a reader
with nowhere to go (the project's own pages are docs/design.md and docs/references.md).
"""

from __future__ import annotations

import ast
import functools
import re
import subprocess
from pathlib import Path


ROOT = Path(__file__).resolve().parent.parent
PACKAGE = ROOT / "zoneprofile"


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


@functools.lru_cache(maxsize=None)
def _tree(path: Path) -> ast.Module:
    return ast.parse(path.read_text(encoding="utf-8"))


def _is_type_checking(node: ast.If) -> bool:
    test = node.test
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def _module_level_imports(tree: ast.Module):
    """Import statements run when the module is imported (not in functions, not TYPE_CHECKING)."""
    stack = list(tree.body)
    while stack:
        node = stack.pop()
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            yield node
        elif isinstance(node, ast.If):
            if not _is_type_checking(node):
                stack.extend(node.body + node.orelse)
        elif isinstance(node, ast.Try):
            stack.extend(node.body + node.orelse + node.finalbody)
            for handler in node.handlers:
                stack.extend(handler.body)
        elif isinstance(node, (ast.With,)):
            stack.extend(node.body)


def _all_imports(tree: ast.Module):
    """Every import statement, also those inside functions (deferred), but not under TYPE_CHECKING."""
    skip = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and _is_type_checking(node):
            skip.update(id(n) for n in ast.walk(node))
    for node in ast.walk(tree):
        if isinstance(node, (ast.Import, ast.ImportFrom)) and id(node) not in skip:
            yield node


def import_graph(deferred: bool = False) -> dict[str, set[str]]:
    """Module → package modules it imports at module level (with ``deferred``, anywhere).

    ``from a.b import c`` is an edge to ``a.b`` and, when ``a.b.c`` is a module, to it too.
    Importing ``a.b.c`` also runs the packages ``a`` and ``a.b``; those are edges as well, except
    to the importer's own parent packages (already being imported when it runs).
    """
    modules = _modules()
    graph: dict[str, set[str]] = {}
    for name, path in modules.items():
        is_package = path.name == "__init__.py"
        own_parents = {".".join(name.split(".")[:i]) for i in range(1, name.count(".") + 1)}
        targets: set[str] = set()
        tree = _tree(path)
        for node in (_all_imports(tree) if deferred else _module_level_imports(tree)):
            if isinstance(node, ast.Import):
                candidates = [alias.name for alias in node.names]
            else:
                if node.level:
                    base = name.split(".") if is_package else name.split(".")[:-1]
                    base = base[: len(base) - (node.level - 1)]
                    prefix = ".".join(base + ([node.module] if node.module else []))
                else:
                    prefix = node.module or ""
                candidates = [prefix] + [f"{prefix}.{alias.name}" for alias in node.names]
            for target in candidates:
                if target not in modules:
                    continue
                parts = target.split(".")
                for i in range(1, len(parts) + 1):
                    step = ".".join(parts[:i])
                    if step in modules and step != name and step not in own_parents:
                        targets.add(step)
        graph[name] = targets
    return graph


def import_circles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    circles: list[list[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
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
                circles.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return circles


def test_circle_finder_finds_a_known_circle_and_no_false_one():
    # the checker itself, on small graphs with a known answer
    assert import_circles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert import_circles({"a": {"b"}, "b": {"c"}, "c": set()}) == []


def test_import_graph_sees_a_known_edge():
    # zoneprofile.cli imports zoneprofile._validation at module level (a real edge of the package)
    graph = import_graph()
    assert "zoneprofile._validation" in graph["zoneprofile.cli"]
    assert len(graph) > 50


def test_no_import_circle_in_the_package():
    circles = import_circles(import_graph())
    assert circles == [], "import circles (module-level imports): " + "; ".join(" <-> ".join(c) for c in circles)


def test_no_import_circle_even_through_imports_inside_functions():
    # an import inside a function hides a circle from the interpreter but not from the reader
    circles = import_circles(import_graph(deferred=True))
    assert circles == [], "import circles (any import): " + "; ".join(" <-> ".join(c) for c in circles)


# spelled in pieces so that this file does not match itself
_OUTSIDE = re.compile("|".join([
    re.escape("../" + "shared"),
    re.escape("DESIGN" + ".md"),
    re.escape("REFERENCES" + ".md"),
    re.escape("STYLE" + ".md"),
]))


def _repository_files() -> list[Path]:
    try:
        listed = subprocess.run(["git", "ls-files", "-z"], cwd=ROOT, capture_output=True, check=True).stdout
        files = [ROOT / p for p in listed.decode().split("\0") if p]
    except (OSError, subprocess.CalledProcessError):  # not a git checkout: walk the tree
        skip = {".git", ".venv", "build", "dist", "__pycache__"}
        files = [p for p in ROOT.rglob("*") if p.is_file() and not skip & set(p.relative_to(ROOT).parts)]
    return [p for p in files if p.is_file()]


def test_pattern_matches_what_it_should():
    assert _OUTSIDE.search("see " + "REFERENCES" + ".md §3")
    assert _OUTSIDE.search("../" + "shared/notes")
    assert not _OUTSIDE.search("see docs/references.md §3 and docs/design.md")


def test_no_file_points_outside_the_repository():
    found = []
    for path in _repository_files():
        try:
            text = path.read_text(encoding="utf-8")
        except (UnicodeDecodeError, OSError):
            continue  # binary fixtures
        for lineno, line in enumerate(text.splitlines(), 1):
            if _OUTSIDE.search(line):
                found.append(f"{path.relative_to(ROOT)}:{lineno}")
    assert found == [], f"{len(found)} pointers to files outside the repository, e.g. {found[:5]}"


def test_minimum_constraints_match_the_floors_in_pyproject():
    # tests/constraints-minimum.txt pins each direct dependency to the first release of the series
    # that pyproject.toml names as its floor (so the minimum-versions run tests what pyproject allows)
    import tomllib

    meta = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))["project"]
    floors = {}
    for req in meta["dependencies"] + meta["optional-dependencies"]["test"]:
        m = re.fullmatch(r"([A-Za-z0-9_.-]+)(\[[^\]]*\])?>=([0-9.]+)", req.split("#")[0].strip())
        assert m, req
        floors[m.group(1).lower()] = m.group(3)
    pins = {}
    for line in (ROOT / "tests" / "constraints-minimum.txt").read_text(encoding="utf-8").splitlines():
        line = line.split("#")[0].strip()
        if line:
            name, version = line.split("==")
            pins[name.lower()] = version
    for name, floor in floors.items():
        assert name in pins, f"{name} has no pin in constraints-minimum.txt"
        floor_parts = [int(p) for p in floor.split(".")]
        pin_parts = [int(p) for p in pins[name].split(".")]
        assert pin_parts[: len(floor_parts)] == floor_parts, (name, floor, pins[name])
