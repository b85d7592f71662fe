"""The package's shape: no import circles between its modules, and the command layer only parses,
calls and prints."""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "polarflux"


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _imports() -> dict[str, set[str]]:
    """Every polarflux module -> the polarflux modules it imports (at top level or inside functions)."""
    modules = {_module_name(p): p for p in PACKAGE.rglob("*.py")}
    graph: dict[str, set[str]] = {name: set() for name in modules}
    for name, path in modules.items():
        package = name if path.name == "__init__.py" else name.rpartition(".")[0]
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            targets = []
            if isinstance(node, ast.ImportFrom):
                if node.level:
                    base = package.split(".")
                    base = base[: len(base) - node.level + 1]
                    stem = ".".join(base + ([node.module] if node.module else []))
                else:
                    stem = node.module or ""
                targets = [stem] + [f"{stem}.{a.name}" for a in node.names]
            elif isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            for target in targets:
                if target in modules and target != name:
                    graph[name].add(target)
    return graph


def _cycle(graph: dict[str, set[str]]) -> list[str] | None:
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        stack.append(node)
        for nxt in sorted(graph[node]):
            if state.get(nxt) == 1:
                return stack[stack.index(nxt):] + [nxt]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        stack.pop()
        state[node] = 2
        return None

    for node in sorted(graph):
        if node not in state:
            found = visit(node)
            if found:
                return found
    return None


def test_the_cycle_finder_finds_a_planted_circle():
    assert _cycle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert _cycle({"a": {"b"}, "b": set()}) is None


def test_no_import_circles():
    graph = _imports()
    assert len(graph) > 20 and graph["polarflux.events"], "the import graph was not read"
    package_init = "polarflux"
    graph = {k: {t for t in v if t != package_init} for k, v in graph.items()}  # `from . import x` names
    assert _cycle(graph) is None, f"import circle: {' -> '.join(_cycle(graph))}"


def test_library_modules_do_not_import_the_command_layer():
    graph = _imports()
    offenders = sorted(m for m, targets in graph.items()
                       if not m.startswith(("polarflux.cli", "polarflux.__main__")) and any(t.startswith("polarflux.cli") for t in targets))
    assert offenders == []


def test_no_module_passes_the_size_limit():
    long = {str(p.relative_to(PACKAGE)): n for p in PACKAGE.rglob("*.py")
            if (n := len(p.read_text(encoding="utf-8").splitlines())) > 650}
    assert long == {}
