"""The numeric core stays free of HTTP: nothing under service/tailgauge/core imports litestar or msgspec."""

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


def test_core_does_not_import_the_http_layer():
    for path in CORE.rglob("*.py"):
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom) and node.module:
                assert not node.module.startswith(("tailgauge.api", "litestar", "msgspec")), path
            if isinstance(node, ast.Import):
                for alias in node.names:
                    assert not alias.name.startswith(("tailgauge.api", "litestar", "msgspec")), path


def test_core_public_names_are_exported():
    import tailgauge.core as core

    for name in core.__all__:
        assert hasattr(core, name), name
    assert sorted(core.__all__) == sorted(set(core.__all__))
