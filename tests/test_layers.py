"""The package's import structure (DEVELOPERS.md, "Layout"): imports go one way,
down the layer order below; no import cycle; only report/ imports matplotlib;
no module grows past about 800 lines.

Every import statement counts, wherever it is (module level, inside functions),
because a lazy import is still a dependency; only imports under
``if TYPE_CHECKING:`` (annotations, never run) are left out.
Layered modules with a one-way dependency order are common practice (no outside
reference value: the order itself is the project's design, written down here).
"""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "characterize"

#: Lowest layer first. A module may import modules of its own layer or of a
#: lower one, never of a higher one. A name covers the module and, for a
#: package, everything inside it.
LAYERS: list[tuple[str, ...]] = [
    # no project imports (or only each other)
    ("characterize._version", "characterize.errors", "characterize.dsp",
     "characterize.longfft", "characterize.stats", "characterize.clock"),
    # unit parsing and file handling at the edges
    ("characterize.units", "characterize.fileio"),
    # physics (air, geometry, predictions) and signals in and out
    ("characterize.physics", "characterize.audio", "characterize.excitation",
     "characterize.calibration", "characterize.batchdata"),
    # object files, transfer functions, fits, the simulator
    ("characterize.objectfile", "characterize.transfer", "characterize.transfer_csv",
     "characterize.fitting", "characterize.simulate"),
    # data-quality flags
    ("characterize.checks",),
    # the main job and what builds on results
    ("characterize.pipeline", "characterize.takechecks", "characterize.tuning",
     "characterize.selftest"),
    # reports: the only matplotlib user
    ("characterize.report",),
    # batches and comparisons write reports
    ("characterize.batch", "characterize.compare", "characterize.live"),
    # the command line
    ("characterize.commands", "characterize.cli", "characterize.__main__"),
    # the package face (re-exports the main calls)
    ("characterize",),
]

MAX_LINES = 800


def _modules() -> dict[str, Path]:
    out = {}
    for p in sorted(PACKAGE.rglob("*.py")):
        parts = p.relative_to(PACKAGE.parent).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        out[name] = p
    return out


MODULES = _modules()


def _imports(name: str, path: Path) -> set[str]:
    """Project modules imported anywhere in ``path`` (resolved to module names)."""
    is_pkg = path.name == "__init__.py"
    found: set[str] = set()
    tree = ast.parse(path.read_text(encoding="utf-8"))
    # imports under "if TYPE_CHECKING:" are for annotations only and never run
    typing_only = {id(n) for block in ast.walk(tree) if isinstance(block, ast.If)
                   and getattr(block.test, "id", getattr(block.test, "attr", "")) == "TYPE_CHECKING"
                   for stmt in block.body for n in ast.walk(stmt)}
    for node in ast.walk(tree):
        if id(node) in typing_only:
            continue
        targets: list[str] = []
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = name.split(".") if is_pkg else name.split(".")[:-1]
                base = base[:len(base) - (node.level - 1)]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            # "from pkg import submodule" imports the submodule
            targets = [f"{mod}.{a.name}" if f"{mod}.{a.name}" in MODULES else mod
                       for a in node.names]
        for t in targets:
            if t == "characterize" or t.startswith("characterize."):
                while t not in MODULES:
                    t = t.rsplit(".", 1)[0]
                if t != name:
                    found.add(t)
    return found


GRAPH = {name: _imports(name, path) for name, path in MODULES.items()}


def _layer(module: str) -> int:
    best, where = -1, -1
    for i, group in enumerate(LAYERS):
        for prefix in group:
            if (module == prefix or module.startswith(prefix + ".")) and len(prefix) > best:
                best, where = len(prefix), i
    return where


def test_every_module_has_a_layer() -> None:
    missing = sorted(m for m in MODULES if _layer(m) < 0)
    assert not missing, f"add these modules to LAYERS in {__file__}: {missing}"


def test_imports_go_down_the_layers() -> None:
    upward = sorted(f"{a} (layer {_layer(a)}) imports {b} (layer {_layer(b)})"
                    for a, deps in GRAPH.items() for b in deps if _layer(b) > _layer(a))
    assert not upward, "\n".join(upward)


def test_no_module_imports_the_package_face() -> None:
    # the package face imports the library; a module importing it back would be a cycle
    offenders = sorted(a for a, deps in GRAPH.items() if "characterize" in deps)
    assert not offenders, offenders


def test_no_import_cycle() -> None:
    # Tarjan's strongly connected components over the module graph
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    cycles: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(GRAPH[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                cycles.append(sorted(comp))

    for v in sorted(GRAPH):
        if v not in index:
            visit(v)
    assert not cycles, cycles


def test_the_graph_is_read() -> None:
    # the checks above pass vacuously on an empty graph: make sure known edges are seen
    assert "characterize.transfer.core" in GRAPH["characterize.transfer.sweep"]
    assert "characterize.pipeline" in GRAPH["characterize.batch.runner"]  # inside a function
    assert _layer("characterize.physics.geometry") < _layer("characterize.objectfile")
    assert _layer("characterize.report.plots") < _layer("characterize.batch.runner")


def test_only_report_imports_matplotlib() -> None:
    users = set()
    for name, path in MODULES.items():
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            mods = ([a.name for a in node.names] if isinstance(node, ast.Import) else
                    [node.module or ""] if isinstance(node, ast.ImportFrom) and not node.level
                    else [])
            if any(m == "matplotlib" or m.startswith("matplotlib.") for m in mods):
                users.add(name)
    assert users, "no matplotlib import found at all: the scan is broken"
    outside = sorted(u for u in users if not u.startswith("characterize.report."))
    assert not outside, outside


def test_no_module_over_the_line_limit() -> None:
    long = sorted((len(p.read_text(encoding="utf-8").splitlines()), name)
                  for name, p in MODULES.items())
    over = [f"{name}: {n} lines" for n, name in long if n > MAX_LINES]
    assert not over, f"split by idea (one idea per module): {over}"
