"""The report package has no import circles: the binary and general halves share lower modules
(``_common``, ``_html_parts``) instead of importing each other (invariant of the package's
structure, read from the source with ``ast``)."""

import ast
from pathlib import Path

import probwrap.report


def _graph():
    root = Path(probwrap.report.__file__).parent
    graph = {}
    for path in root.glob("*.py"):
        name = path.stem
        deps = set()
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom) and node.level == 1 and node.module:
                deps.add(node.module.split(".")[0])
        graph[name] = deps
    return graph


def test_no_import_circles_in_the_report_package():
    graph = _graph()
    assert {"_content", "_general", "_html", "_general_html", "_common"} <= set(graph)
    state = {}

    def visit(node, stack):
        state[node] = "open"
        for dep in graph.get(node, ()):
            if state.get(dep) == "open":
                raise AssertionError(f"import circle: {' -> '.join([*stack, node, dep])}")
            if dep not in state:
                visit(dep, [*stack, node])
        state[node] = "done"

    for node in graph:
        if node not in state:
            visit(node, [])
    # the shared lower modules import neither half
    assert not graph["_common"] & {"_content", "_general"}
    assert not graph["_html_parts"] & {"_html", "_general_html"}
