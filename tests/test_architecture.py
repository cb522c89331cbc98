"""The house rules of the package, checked on its source.

Floors: a unit (a subpackage of spaceframe, a top-level module, or io/) imports only units on
floors below it, at module level or inside a function (imports under ``if TYPE_CHECKING:`` are
for the type checker only and do not count).  No file imports one that imports it back.  No
source file is over 700 lines.  The core never imports a file-format or drawing library.
These are the project's own rules (DEVELOPERS.md, "The house"); nothing here is a check value.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

#: The floors of DEVELOPERS.md's picture, lowest first.
FLOORS: dict[str, int] = {
    "errors": 1, "tolerances": 1, "memory": 1,
    "units": 2, "sections": 2, "materials": 2, "model": 2, "files": 2,
    "geometry": 3, "assembly": 3, "solvers": 3, "results": 3, "design": 3,
    "analysis": 4, "io": 4, "viewer": 4,
    "project": 5,
    "run": 6, "study": 6, "demos": 6,
    "cli": 7,
}
#: The core computes; it reads and writes no files of any format.
CORE = ("model", "geometry", "assembly", "solvers", "results", "design", "analysis")
EDGE_LIBRARIES = ("ezdxf", "meshio", "pyvista", "vtk", "dask", "distributed", "matplotlib")
MAX_LINES = 700
#: Files allowed over MAX_LINES, with their length: none left (the last were split in
#: issue 10).  A file that must stay long goes here with its length and reason.
KNOWN_LONG: dict[str, int] = {}
#: Import circles still allowed, as (module, module) pairs: none left.
KNOWN_CIRCLES: set[tuple[str, str]] = set()


def _modules() -> dict[str, Path]:
    found = {}
    for base, package in ((ROOT / "spaceframe", "spaceframe"), (ROOT / "io", "spaceframe.io")):
        for path in base.rglob("*.py"):
            parts = [package, *path.relative_to(base).with_suffix("").parts]
            if parts[-1] == "__init__":
                parts = parts[:-1]
            found[".".join(parts)] = path
    return found


MODULES = _modules()


def _imports(name: str, path: Path) -> list[str]:
    """Every module a file imports when it runs (TYPE_CHECKING blocks left out)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    typing_only = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            typing_only.update(id(sub) for sub in ast.walk(node))
    package = name.split(".") if path.name == "__init__.py" else name.split(".")[:-1]
    out = []
    for node in ast.walk(tree):
        if id(node) in typing_only:
            continue
        if isinstance(node, ast.Import):
            out += [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - node.level + 1]
                module = ".".join(base + ([node.module] if node.module else []))
            else:
                module = node.module or ""
            for alias in node.names:
                full = f"{module}.{alias.name}"
                out.append(full if full in MODULES else module)
    return out


def _project_imports(name: str) -> set[str]:
    deps = set()
    for dep in _imports(name, MODULES[name]):
        while dep not in MODULES and "." in dep:
            dep = dep.rsplit(".", 1)[0]
        if dep in MODULES and dep not in (name, "spaceframe"):
            deps.add(dep)
    return deps


GRAPH = {name: _project_imports(name) for name in MODULES}


def _unit(module: str) -> str | None:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 and parts[1] != "__main__" else None


def test_every_unit_has_a_floor():
    units = {_unit(m) for m in MODULES} - {None}
    assert units - set(FLOORS) == set(), "add the new unit to FLOORS and to DEVELOPERS.md"
    assert max(FLOORS.values()) <= 7


@pytest.mark.parametrize("module", sorted(m for m in MODULES if _unit(m)))
def test_imports_run_down_the_floors(module):
    unit = _unit(module)
    assert unit is not None
    wrong = sorted(
        dep for dep in GRAPH[module]
        if (_unit(dep) or unit) != unit and FLOORS[_unit(dep) or unit] >= FLOORS[unit]
    )
    assert wrong == [], f"{module} (floor {FLOORS[unit]}) imports from its floor or above"


def test_no_import_circle():
    state: dict[str, int] = {}
    path: list[str] = []

    def visit(module: str) -> None:
        state[module] = 1
        path.append(module)
        for dep in sorted(GRAPH[module]):
            if dep == "spaceframe.__main__":
                continue
            if state.get(dep) == 1 and (dep, module) not in KNOWN_CIRCLES:
                cycle = [*path[path.index(dep):], dep]
                pytest.fail("import circle: " + " -> ".join(cycle))
            if dep not in state:
                visit(dep)
        path.pop()
        state[module] = 2

    for module in sorted(MODULES):
        if module not in state and module != "spaceframe":
            visit(module)


@pytest.mark.parametrize("module", sorted(m for m in MODULES if _unit(m) in CORE))
def test_the_core_imports_no_file_format_library(module):
    bad = sorted(
        name for name in _imports(module, MODULES[module])
        if name.split(".")[0] in EDGE_LIBRARIES or name.startswith("spaceframe.io")
    )
    assert bad == []


def test_no_source_file_is_over_the_limit():
    long = {
        str(path.relative_to(ROOT)): n
        for path in MODULES.values()
        if (n := len(path.read_text(encoding="utf-8").splitlines())) > MAX_LINES
    }
    grown = {f: n for f, n in long.items() if n > KNOWN_LONG.get(f, MAX_LINES)}
    assert grown == {}
