"""The folders of the package are layers: a lower one never imports a higher one,
and no module imports another module's private (underscore) name.

The order is the one in DEVELOPERS.md ("Rooms"); every import is read from the
source with :mod:`ast`, including imports inside functions and type-checking
blocks, so a lazy import cannot hide an upward dependency.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parent.parent / "simulator"

# lowest first; the package's __init__ (the public names, imported lazily) may import
# anything
LAYERS = [
    ("errors", "units", "version"),
    ("inputs", "steam"),
    ("physics",),
    ("components",),
    ("plant",),
    ("solve",),
    ("cautions",),
    ("measure",),
    ("store",),
    ("study",),
    ("present",),
    ("api",),
    ("cli",),
]
RANK = {name: k for k, names in enumerate(LAYERS) for name in names}
TOP = len(LAYERS)


def _rank(parts: tuple[str, ...]) -> int:
    """Layer of a module given as its path below the package."""
    if not parts or parts[0] == "__init__":
        return TOP
    return RANK[parts[0]]


def _modules():
    for path in sorted(PACKAGE.rglob("*.py")):
        rel = path.relative_to(PACKAGE).with_suffix("")
        yield path, tuple(rel.parts)


def _imports(path: Path, parts: tuple[str, ...]):
    """``(target module parts, imported names, line)`` of every project import."""
    tree = ast.parse(path.read_text(), filename=str(path))
    package = parts[:-1]  # the folder of this module
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level == 0:
                if not (node.module or "").startswith(("partload", "simulator")):
                    continue
                base = tuple(node.module.split(".")[1:])
            else:
                up = package[:len(package) - (node.level - 1)] if node.level > 1 else package
                base = up + tuple((node.module or "").split(".")) if node.module else up
            yield base, [a.name for a in node.names], node.lineno
        elif isinstance(node, ast.Import):
            for a in node.names:
                if a.name.split(".")[0] in ("partload", "simulator"):
                    yield tuple(a.name.split(".")[1:]), [], node.lineno


def _is_module(parts: tuple[str, ...]) -> bool:
    p = PACKAGE.joinpath(*parts)
    return p.with_suffix(".py").exists() or (p / "__init__.py").exists()


def test_every_folder_has_a_layer():
    folders = {p.name for p in PACKAGE.iterdir() if p.is_dir() and (p / "__init__.py").exists()}
    modules = {p.stem for p in PACKAGE.glob("*.py")} - {"__init__"}
    assert folders | modules == set(RANK), "a new folder needs its place in LAYERS"


@pytest.mark.parametrize("path,parts", list(_modules()),
                         ids=["/".join(p) for _, p in _modules()])
def test_no_upward_import_and_no_private_name(path, parts):
    own = _rank(parts)
    for target, names, line in _imports(path, parts):
        modules = [target + (n,) for n in names if _is_module(target + (n,))]
        for t in modules or [target]:
            assert _rank(t) <= own, (
                f"{'/'.join(parts)}.py:{line} imports {'.'.join(t)} from a higher layer")
        for name in names:
            if name.startswith("_") and not name.startswith("__") and not _is_module(
                    target + (name,)):
                raise AssertionError(f"{'/'.join(parts)}.py:{line} imports the private name "
                                     f"{name!r} of {'.'.join(target)}")


def test_the_checker_sees_an_upward_import(tmp_path):
    # the test above could pass by reading nothing: show that it finds a planted
    # upward import inside a function and a private name
    fake = tmp_path / "physics_fake.py"
    fake.write_text("def f():\n    from ..study.run import _private\n")
    found = list(_imports(fake, ("physics", "fake")))
    assert found == [(("study", "run"), ["_private"], 2)]
    assert _rank(found[0][0]) > _rank(("physics", "fake"))
