"""The numeric core stays free of HTTP and of the process settings (nothing under service/tailgauge/core,
subpackages included, imports litestar, msgspec, tailgauge.api or tailgauge.settings), and its
modules import one another without circles."""

import ast
import pathlib

CORE = pathlib.Path(__file__).resolve().parents[2] / "service" / "tailgauge" / "core"
ALLOWED_TOP_LEVEL = {"numpy", "scipy", "tailgauge", "__future__"}
# Third-party imports allowed in one module only: sketches.py builds KLL sketches of our own values
# with the library that defines the format (request bytes are parsed in Python, never by it).
ALLOWED_IN = {"sketches.py": {"datasketches"}}


def _imports(path: pathlib.Path) -> set[str]:
    tree = ast.parse(path.read_text(), filename=str(path))
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            names.add(node.module.split(".")[0])
    return names


def _stdlib() -> set[str]:
    import sys

    return set(sys.stdlib_module_names)


def test_core_imports_only_numpy_scipy_and_stdlib():
    files = sorted(CORE.rglob("*.py"))
    assert files, "service/tailgauge/core has no modules"
    allowed = ALLOWED_TOP_LEVEL | _stdlib()
    offenders = {
        str(f.relative_to(CORE)): sorted(_imports(f) - allowed - ALLOWED_IN.get(str(f.relative_to(CORE)), set()))
        for f in files
    }
    offenders = {f: names for f, names in offenders.items() if names}
    assert offenders == {}, f"service/tailgauge/core must not import these: {offenders}"


_OUTSIDE = ("tailgauge.api", "tailgauge.settings", "tailgauge.runtime", "litestar", "msgspec")


def test_core_does_not_import_the_http_layer_or_the_settings():
    for path in CORE.rglob("*.py"):
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom) and node.module:
                assert not node.module.startswith(_OUTSIDE), path
            if isinstance(node, ast.Import):
                for alias in node.names:
                    assert not alias.name.startswith(_OUTSIDE), path


def test_core_public_names_are_exported():
    import tailgauge.core as core

    for name in core.__all__:
        assert hasattr(core, name), name
    assert sorted(core.__all__) == sorted(set(core.__all__))


def _module_name(path: pathlib.Path) -> str:
    parts = ["tailgauge", "core", *path.relative_to(CORE).with_suffix("").parts]
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _core_graph() -> dict[str, set[str]]:
    """Each core module to the core modules it imports at import time (``TYPE_CHECKING`` blocks
    aside); ``from package import name`` counts as importing ``package.name`` when that is a module."""
    modules = {_module_name(path): path for path in CORE.rglob("*.py")}
    graph = {}
    for name, path in modules.items():
        tree = ast.parse(path.read_text())
        skipped = {
            id(inner)
            for node in ast.walk(tree)
            if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test)
            for inner in ast.walk(node)
        }
        targets = set()
        for node in ast.walk(tree):
            if id(node) in skipped:
                continue
            if isinstance(node, ast.ImportFrom) and node.module and node.module in modules:
                for alias in node.names:
                    child = f"{node.module}.{alias.name}"
                    targets.add(child if child in modules else node.module)
            elif isinstance(node, ast.Import):
                targets.update(alias.name for alias in node.names if alias.name in modules)
        graph[name] = targets - {name}
    return graph


def _circle(graph: dict[str, set[str]]) -> list[str] | None:
    """One import circle of ``graph`` (as the modules along it), or ``None``."""
    state: dict[str, int] = {}
    path: list[str] = []

    def visit(node: str) -> list[str] | None:
        state[node] = 1
        path.append(node)
        for child in sorted(graph.get(node, ())):
            if state.get(child) == 1:
                return path[path.index(child):] + [child]
            if child not in state and (found := visit(child)):
                return found
        path.pop()
        state[node] = 2
        return None

    for node in sorted(graph):
        if node not in state and (found := visit(node)):
            return found
    return None


def test_core_modules_import_without_circles():
    graph = _core_graph()
    assert "tailgauge.core.describe.assembly" in graph and "tailgauge.core.registry" in graph
    assert "tailgauge.core.describe.basis" in graph["tailgauge.core.describe.assembly"]
    found = _circle(graph)
    assert found is None, "import circle: " + " -> ".join(found or [])


def test_the_circle_check_finds_a_circle():
    assert _circle({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == ["a", "b", "c", "a"]
    assert _circle({"a": {"b"}, "b": {"c"}, "c": set()}) is None


# The floors of the house, top to bottom: what each part of the package may import of the others.
# The entry point (tailgauge.asgi) builds the app; the api uses the core, the figures (drawn from
# the core's results), the settings and the runtime helpers (logs, metrics files, draining);
# nothing below imports anything above it. The client stands beside the app on the api's wire
# types and operation table (which import without the server's libraries:
# tests/deploy/test_install_profiles.py); the recipes may send through it and name its wire types.
FLOORS = {
    "asgi": {"api", "settings"},
    "client": {"api"},
    "api": {"core", "figures", "settings", "runtime"},
    "figures": {"core"},
    "recipes": {"core", "client", "api"},
    "runtime": set(),
    "settings": set(),
    "core": set(),
}


def _part(module: str) -> str | None:
    parts = module.split(".")
    return parts[1] if parts[0] == "tailgauge" and len(parts) > 1 else None


def test_no_import_runs_back_up_the_floors():
    package = CORE.parent
    offenders = []
    for path in sorted(package.rglob("*.py")):
        relative = path.relative_to(package)
        own = relative.parts[0].removesuffix(".py")
        if own == "__init__":
            continue
        assert own in FLOORS, f"{relative}: a new part of the package needs its floor in FLOORS"
        for node in ast.walk(ast.parse(path.read_text())):
            modules = []
            if isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                modules = [node.module] + [f"{node.module}.{alias.name}" for alias in node.names]
            elif isinstance(node, ast.Import):
                modules = [alias.name for alias in node.names]
            for module in modules:
                part = _part(module)
                if part is not None and part != own and part in FLOORS and part not in FLOORS[own]:
                    offenders.append(f"{relative} imports {module}")
    assert offenders == []
