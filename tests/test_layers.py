"""The package's import graph, read with ``ast``: imports point down the layers, no module
imports itself back through a cycle, and no private name crosses a module boundary.

Layers, bottom to top (docs/design.md, "Layout"): shapes → boxes → measures → scene (and
fusion, beside it) → points → tiles → tables → frames → evaluation → warmup → distributed →
demo → cli. ``errors``, ``progress`` and ``_kernels`` sit below all of them and may be used
by all; the package root (``obbiou``, the public names) sits just above ``scene``. A module
may import from its own layer and from any layer below, never from one above. Imports
inside functions count: a deferred import still ties the lower module to the higher one.

The checks are plain functions of ``{module name: source text}`` so that the tests below can
also show them failing on small invented packages.
"""

from __future__ import annotations

import ast
from collections.abc import Iterable
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "obbiou"

LAYERS = (
    "errors _kernels progress",
    "shapes",
    "boxes",
    "measures",
    "scene fusion",
    "",  # the package root: obbiou/__init__.py
    "points",
    "tiles",
    "tables",
    "frames",
    "evaluation",
    "warmup",
    "distributed",
    "demo",
    "cli __main__",
)
RANK = {name: i for i, names in enumerate(LAYERS) for name in (names.split() or [""])}

# Private names one module may import from another: none. (Kept as a parameter of the
# check so that the tests below can show it on invented packages.)
ALLOWED_PRIVATE: set[tuple[str, str, str]] = set()


def package_sources(root: Path = PACKAGE) -> dict[str, str]:
    """``{"obbiou.evaluation.result": source, "obbiou.evaluation": source of __init__, …}``."""
    out = {}
    for path in sorted(root.rglob("*.py")):
        parts = list(path.relative_to(root.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        out[".".join(parts)] = path.read_text(encoding="utf-8")
    return out


def imports(sources: dict[str, str]) -> Iterable[tuple[str, str, str | None, int]]:
    """Every import of a package module: (importer, imported module, name or None, line).

    ``from obbiou.x import y`` names the module ``obbiou.x.y`` when that is a module, else
    the name ``y`` of ``obbiou.x``; relative imports are resolved.
    """
    for module, text in sources.items():
        is_package = any(m.startswith(module + ".") for m in sources)
        for node in ast.walk(ast.parse(text)):
            if isinstance(node, ast.Import):
                for alias in node.names:
                    if alias.name.split(".")[0] == "obbiou":
                        yield module, alias.name, None, node.lineno
            elif isinstance(node, ast.ImportFrom):
                base = node.module or ""
                if node.level:
                    here = module.split(".") if is_package else module.split(".")[:-1]
                    here = here[: len(here) - (node.level - 1)]
                    base = ".".join(here + ([base] if base else []))
                if base.split(".")[0] != "obbiou":
                    continue
                for alias in node.names:
                    sub = f"{base}.{alias.name}"
                    if sub in sources:
                        yield module, sub, None, node.lineno
                    else:
                        yield module, base, alias.name, node.lineno


def layer(module: str) -> str:
    """The layer of a module: the first name below ``obbiou`` ("" for the root)."""
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else ""


def upward_imports(sources: dict[str, str]) -> list[str]:
    """Imports from a higher layer into a lower one, and modules in no known layer."""
    found = []
    for importer, imported, _, line in imports(sources):
        for m in (importer, imported):
            if layer(m) not in RANK:
                found.append(f"{m}: not in any layer of LAYERS")
        if layer(importer) in RANK and layer(imported) in RANK:
            if RANK[layer(imported)] > RANK[layer(importer)]:
                found.append(f"{importer} (line {line}) imports {imported}, a higher layer")
    return sorted(set(found))


def private_imports(sources: dict[str, str], allowed=ALLOWED_PRIVATE) -> list[str]:
    """Private names (``_name``) imported from another module, beyond ``allowed``."""
    return sorted(
        f"{importer} (line {line}) imports {name} from {imported}"
        for importer, imported, name, line in imports(sources)
        if name is not None
        and name.startswith("_")
        and not name.startswith("__")
        and imported != importer
        and (importer, imported, name) not in allowed
    )


def cycles(sources: dict[str, str]) -> list[list[str]]:
    """Groups of modules that import each other (strongly connected, more than one module,
    or one importing itself), by Tarjan's algorithm (Tarjan, SIAM J. Comput. 1972)."""
    graph: dict[str, set[str]] = {m: set() for m in sources}
    for importer, imported, _, _ in imports(sources):
        if imported in graph and imported != importer:
            graph[importer].add(imported)
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                group.append(w)
                if w == v:
                    break
            if len(group) > 1:
                found.append(sorted(group))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


# -- the package --------------------------------------------------------------------------------


def test_the_package_has_modules_in_every_known_layer():
    sources = package_sources()
    assert "obbiou.shapes" in sources and "obbiou.cli" in sources  # the walk found the tree
    assert {layer(m) for m in sources} <= set(RANK)


def test_imports_point_down_the_layers():
    assert upward_imports(package_sources()) == []


def test_no_import_cycle():
    assert cycles(package_sources()) == []


def test_no_private_name_crosses_a_module_boundary():
    assert private_imports(package_sources()) == []


# -- the checks themselves, on invented packages (hand-worked cases) -------------------------------


def test_checks_find_an_upward_import_a_cycle_and_a_private_name():
    sources = {
        "obbiou": "",
        "obbiou.shapes": "from obbiou.tables import read_table\n",  # up: shapes < tables
        "obbiou.tables": "from obbiou.shapes import _secret\nimport obbiou.evaluation.a\n",
        "obbiou.evaluation": "",
        "obbiou.evaluation.a": "def f():\n    from obbiou.evaluation import b\n",
        "obbiou.evaluation.b": "from . import a\n",  # relative, and a cycle with a
    }
    assert upward_imports(sources) == [
        "obbiou.shapes (line 1) imports obbiou.tables, a higher layer",
        "obbiou.tables (line 2) imports obbiou.evaluation.a, a higher layer",
    ]
    assert cycles(sources) == [
        ["obbiou.evaluation.a", "obbiou.evaluation.b"],
        ["obbiou.shapes", "obbiou.tables"],
    ]
    assert private_imports(sources) == ["obbiou.tables (line 1) imports _secret from obbiou.shapes"]
    assert private_imports(sources, {("obbiou.tables", "obbiou.shapes", "_secret")}) == []


def test_checks_pass_a_clean_invented_package():
    sources = {
        "obbiou": "from obbiou.scene import suppress\n",
        "obbiou.errors": "",
        "obbiou.scene": "from obbiou.errors import InvalidInput\nfrom obbiou._kernels import x\n",
        "obbiou._kernels": "",
        "obbiou._kernels.x": "",
        "obbiou.cli": "import obbiou\nfrom obbiou import __version__\n",
    }
    assert upward_imports(sources) == [] and cycles(sources) == []
    assert private_imports(sources) == []
