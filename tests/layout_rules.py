"""The layering rules of the package, read from the source with ``ast`` (nothing is imported).

The packages of ``stepper`` follow the data's one-way trip, and :data:`ORDER` is
the one place that says so: a module may import modules of its own package and of
packages earlier in the list, never later ones. ``errors`` (and the package root)
sit at the bottom; ``app`` and ``cli`` are the two edges: they may import
everything below them and nothing else imports them (the command line opens the
app, never the other way round). The pure core (:data:`CORE`) never imports a
terminal library, even lazily. Every import counts: module level, inside a
function, and under ``if TYPE_CHECKING:``.

Used by ``tests/test_layout.py`` on the real tree and on small fixture trees.
"""

from __future__ import annotations

import ast
from dataclasses import dataclass
from pathlib import Path

__all__ = ["ORDER", "EDGES", "CORE", "TERMINAL_LIBRARIES", "Import", "read_imports", "cycles", "layer_faults",
           "core_faults", "longest_chain"]

# The one ordered list: a package may import itself and anything to its left.
ORDER = ("errors", "field", "transcript", "verify", "diagnose", "provers", "compare", "share", "app", "cli")
EDGES = ("app", "cli")  # import anything; nothing imports them
CORE = ("field", "transcript", "verify", "diagnose")  # no terminal libraries, no edges
TERMINAL_LIBRARIES = ("textual", "rich")


@dataclass(frozen=True, slots=True)
class Import:
    """Module ``source`` imports module ``target`` at ``path``:``line``."""

    source: str
    target: str
    path: Path
    line: int

    def where(self) -> str:
        return f"{self.path}:{self.line}"


def _module_names(root: Path) -> dict[str, Path]:
    names: dict[str, Path] = {}
    for path in sorted(root.rglob("*.py")):
        parts = list(path.relative_to(root.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        names[".".join(parts)] = path
    return names


def _resolve(name: str, modules: dict[str, Path]) -> str | None:
    """The module that ``name`` (a module, or a name inside one) lives in."""
    while name:
        if name in modules:
            return name
        name = name.rpartition(".")[0]
    return None


def read_imports(root: Path) -> tuple[dict[str, Path], list[Import], list[Import]]:
    """Modules of the package at ``root``, their imports of each other, and their
    imports of anything outside the package (``target`` is the top-level name)."""
    modules = _module_names(root)
    top = root.name
    inner: list[Import] = []
    outer: list[Import] = []
    for source, path in modules.items():
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        package = source if path.name == "__init__.py" else source.rpartition(".")[0]
        for node in ast.walk(tree):
            targets: list[str] = []
            if isinstance(node, ast.Import):
                targets = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom):
                base = node.module or ""
                if node.level:
                    anchor = package.split(".")
                    anchor = anchor[: len(anchor) - node.level + 1]
                    base = ".".join(anchor + ([base] if base else []))
                targets = [f"{base}.{alias.name}" for alias in node.names] or [base]
            for name in targets:
                if name == top or name.startswith(top + "."):
                    target = _resolve(name, modules)
                    if target is not None and target != source:
                        inner.append(Import(source, target, path, node.lineno))
                else:
                    outer.append(Import(source, name.split(".")[0], path, node.lineno))
    return modules, inner, outer


def _graph(imports: list[Import]) -> dict[str, dict[str, Import]]:
    graph: dict[str, dict[str, Import]] = {}
    for imp in imports:
        graph.setdefault(imp.source, {}).setdefault(imp.target, imp)
    return graph


def cycles(imports: list[Import]) -> list[list[Import]]:
    """One closed path of imports for every strongly connected group of modules
    (Tarjan's algorithm, iterative so that no tree is too deep for it)."""
    graph = _graph(imports)
    nodes = sorted(set(graph) | {t for targets in graph.values() for t in targets})
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    groups: list[list[str]] = []
    counter = 0
    for start in nodes:
        if start in index:
            continue
        work = [(start, iter(sorted(graph.get(start, {}))))]
        index[start] = low[start] = counter
        counter += 1
        stack.append(start)
        on_stack.add(start)
        while work:
            node, successors = work[-1]
            advanced = False
            for succ in successors:
                if succ not in index:
                    index[succ] = low[succ] = counter
                    counter += 1
                    stack.append(succ)
                    on_stack.add(succ)
                    work.append((succ, iter(sorted(graph.get(succ, {})))))
                    advanced = True
                    break
                if succ in on_stack:
                    low[node] = min(low[node], index[succ])
            if advanced:
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                group = []
                while True:
                    member = stack.pop()
                    on_stack.discard(member)
                    group.append(member)
                    if member == node:
                        break
                if len(group) > 1:
                    groups.append(sorted(group))
    return [_closed_path(graph, group) for group in groups]


def _closed_path(graph: dict[str, dict[str, Import]], group: list[str]) -> list[Import]:
    """A shortest path from the group's first module back to itself, inside the group."""
    members = set(group)
    start = group[0]
    came: dict[str, Import] = {}
    frontier = [start]
    while frontier:
        following: list[str] = []
        for node in frontier:
            for target, imp in sorted(graph.get(node, {}).items()):
                if target not in members:
                    continue
                if target == start:
                    path = [imp]
                    while path[0].source != start:
                        path.insert(0, came[path[0].source])
                    return path
                if target not in came:
                    came[target] = imp
                    following.append(target)
        frontier = following
    raise AssertionError(f"no cycle through {start} in {group}")  # Tarjan said there was one


def package_of(module: str) -> str:
    """``stepper.verify.replay`` -> ``verify``; the root package and its loose modules -> ``errors``
    (they sit at the bottom with the error tree)."""
    parts = module.split(".")
    if len(parts) < 2:
        return "errors"
    return parts[1] if parts[1] in ORDER else "errors"


def layer_faults(imports: list[Import], order: tuple[str, ...] = ORDER, edges: tuple[str, ...] = EDGES) -> list[str]:
    """Each import that goes up the order, or into an edge from outside it."""
    rank = {name: i for i, name in enumerate(order)}
    faults = []
    for imp in imports:
        source, target = package_of(imp.source), package_of(imp.target)
        if imp.source.count(".") == 1 and imp.source.endswith("__main__"):
            continue  # ``python -m stepper`` is the command line's own door
        if target in edges and source not in edges:
            faults.append(f"{imp.where()}: {imp.source} imports {imp.target}: nothing imports the edge {target!r}")
        elif rank[target] > rank[source]:
            faults.append(f"{imp.where()}: {imp.source} imports {imp.target}: {source!r} sits below "
                          f"{target!r} in the order {' < '.join(order)}")
    return faults


def core_faults(inner: list[Import], outer: list[Import], core: tuple[str, ...] = CORE,
                libraries: tuple[str, ...] = TERMINAL_LIBRARIES, edges: tuple[str, ...] = EDGES) -> list[str]:
    """Each import of a terminal library or of an edge by a module of the pure core."""
    faults = [f"{imp.where()}: {imp.source} imports {imp.target}: the core ({', '.join(core)}) never "
              f"imports a terminal library, even lazily" for imp in outer
              if package_of(imp.source) in core and imp.target in libraries]
    faults += [f"{imp.where()}: {imp.source} imports {imp.target}: the core never imports an edge"
               for imp in inner if package_of(imp.source) in core and package_of(imp.target) in edges]
    return faults


def longest_chain(imports: list[Import], start: str, goal_prefix: str) -> list[str]:
    """The longest chain of imports from ``start`` to any module under ``goal_prefix``
    (the graph is acyclic once :func:`cycles` is empty)."""
    graph = {source: sorted(targets) for source, targets in _graph(imports).items()}
    best: dict[str, list[str] | None] = {}

    def walk(node: str) -> list[str] | None:
        if node in best:
            return best[node]
        candidates = [[node]] if node.startswith(goal_prefix) else []
        for succ in graph.get(node, []):
            tail = walk(succ)
            if tail is not None:
                candidates.append([node, *tail])
        best[node] = max(candidates, key=len) if candidates else None
        return best[node]

    return walk(start) or []
