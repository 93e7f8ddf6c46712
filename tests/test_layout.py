"""The house rules of the source tree: stages as subpackages, no import circle, no Qt in the core."""

from __future__ import annotations

import ast
from pathlib import Path

import networkx as nx

ROOT = Path(__file__).resolve().parent.parent
PACKAGES = ("inspector", "ui")


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for pkg in PACKAGES for p in sorted((ROOT / pkg).rglob("*.py"))}


def _imports(path: Path, name: str, known: set[str]) -> set[str]:
    """Every project module ``path`` imports, at module level or inside functions."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    found: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            targets = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = package.split(".")
                anchor = anchor[: len(anchor) - (node.level - 1)]
                base = ".".join([*anchor, base] if base else anchor)
            targets = [
                f"{base}.{alias.name}" if f"{base}.{alias.name}" in known else base for alias in node.names
            ]
        else:
            continue
        found.update(t for t in targets if t in known)
    found.discard(name)
    return found


def import_graph() -> nx.DiGraph:
    modules = _modules()
    graph = nx.DiGraph()
    for name, path in modules.items():
        graph.add_node(name)
        graph.add_edges_from((name, target) for target in _imports(path, name, set(modules)))
    return graph


def test_no_import_circle_among_project_modules():
    """The import graph of inspector and ui (module-level and deferred imports alike) has no cycle.

    Reference: NetworkX ``simple_cycles`` on the graph built from Python's own ``ast`` parse.
    """
    graph = import_graph()
    assert graph.number_of_nodes() > 40  # the walk really found the project
    assert graph.number_of_edges() > 80
    cycles = sorted(nx.simple_cycles(graph), key=len)
    assert cycles == [], f"import circle: {' -> '.join(cycles[0] + cycles[0][:1])}"


def test_the_graph_sees_deferred_imports():
    """The walk also reports imports made inside functions (the old cli circle was one of these).

    Reference: common practice, no source (a self-check of the walker on a module known to defer imports).
    """
    graph = import_graph()
    assert "inspector.checkpoint.loader" in graph.successors("inspector.cli.common")


def test_core_never_imports_qt_and_never_imports_the_window():
    """No module of ``inspector`` imports PySide6 (or any Qt binding) or ``ui``.

    Reference: the project's architecture rule (core testable without a display); common practice, no source.
    """
    offenders = []
    for name, path in _modules().items():
        if not name.startswith("inspector"):
            continue
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            names = (
                [a.name for a in node.names]
                if isinstance(node, ast.Import)
                else [node.module or ""]
                if isinstance(node, ast.ImportFrom)
                else []
            )
            offenders += [
                f"{name}: {n}"
                for n in names
                if n.split(".")[0] in ("PySide6", "PyQt5", "PyQt6", "shiboken6", "ui")
            ]
    assert offenders == []


def test_widgets_never_import_a_page_and_pages_never_import_the_corpus_page():
    """Shared widgets import no page package; the sentence and explain pages do not import the corpus page.

    Reference: the layering stated in the ui subpackages' docstrings; common practice, no source.
    """
    graph = import_graph()
    pages = ("ui.sentence", "ui.explain", "ui.corpus")
    bad = [
        (a, b)
        for a, b in graph.edges
        if (a.startswith("ui.widgets") and b.startswith(pages))
        or (a.startswith(("ui.sentence", "ui.explain")) and b.startswith("ui.corpus"))
        or (a.startswith("ui.sentence") and b.startswith("ui.explain"))
    ]
    assert bad == []


def test_few_modules_at_the_top_and_every_subpackage_says_what_it_holds():
    """At most 8 modules directly in inspector/ and ui/; every subpackage has a docstring of a paragraph or more.

    Reference: the project's layout rule (DEVELOPERS.md); common practice, no source.
    """
    for pkg in PACKAGES:
        top = [p for p in (ROOT / pkg).glob("*.py")]
        assert len(top) <= 8, f"{pkg}/ holds {len(top)} modules"
        subpackages = [p for p in (ROOT / pkg).iterdir() if (p / "__init__.py").is_file()]
        assert len(subpackages) >= 3
        for sub in subpackages:
            doc = ast.get_docstring(ast.parse((sub / "__init__.py").read_text(encoding="utf-8")))
            assert doc and len(doc.split()) >= 25, f"{sub.name}/__init__.py needs a docstring paragraph"
            assert "import" in doc, f"{sub.name}/__init__.py must say what it may import"
