"""File readers and writers, installed as the subpackage ``spaceframe.io``.

The folder is named ``io/`` in the repository but is mapped to
``spaceframe.io`` by pyproject.toml, so it never shadows the standard
library's :mod:`io`.

Each format module offers ``read(path, **options) -> Model`` and/or
``write(path, model, **options)``.  The tables below map file suffixes to
modules; they are the one place to register a format, and a suffix can be
registered only once.  Format modules import their libraries (ezdxf, meshio,
pyvista) only when a file is read or written.

Examples
--------
>>> import spaceframe.io as sfio
>>> sorted(sfio.READERS)[:3]
['.dxf', '.inp', '.msh']
"""

from __future__ import annotations

import importlib
import os
from pathlib import Path
from typing import Any

from spaceframe.errors import ReadError, SpaceframeError
from spaceframe.io._common import INSUNITS, WriteError, read_report
from spaceframe.model import Model

__all__ = [
    "INSUNITS",
    "READERS",
    "WRITERS",
    "WriteError",
    "read",
    "read_report",
    "register_reader",
    "register_writer",
    "write",
]

#: Readers: file suffix -> module in spaceframe.io offering ``read``.
_READER_TABLE: tuple[tuple[str, str], ...] = (
    (".dxf", "dxf"),
    (".msh", "mesh"),  # Gmsh 4.1 and 2.x (text or binary) read here, 4.0 through meshio
    (".vtu", "mesh"),  # VTK XML unstructured grid, through VTK
    (".vtk", "mesh"),  # VTK legacy, through VTK
    (".vtp", "mesh"),  # VTK XML polydata, through VTK
    (".obj", "mesh"),  # Wavefront OBJ, read here (keeps "l" lines and groups)
    (".inp", "mesh"),  # Abaqus input, through meshio (element and node sets)
    (".stl", "mesh"),  # STL surface, through meshio (panels; edges_as_members=True)
)

#: Writers: file suffix -> module in spaceframe.io offering ``write``.
_WRITER_TABLE: tuple[tuple[str, str], ...] = ((".dxf", "dxf"),)

READERS: dict[str, str] = {}
WRITERS: dict[str, str] = {}


def _register(table: dict[str, str], kind: str, suffix: str, module: str) -> None:
    if not isinstance(suffix, str) or not suffix.startswith(".") or len(suffix) < 2:
        raise SpaceframeError(f"{kind} suffix must look like '.dxf', got {suffix!r}")
    key = suffix.lower()
    if key in table:
        raise SpaceframeError(
            f"{kind} for {key!r} is already registered (module {table[key]!r}); "
            f"refusing to register module {module!r} for it too"
        )
    table[key] = module


def register_reader(suffix: str, module: str) -> None:
    """Register ``spaceframe.io.<module>.read`` for files ending in ``suffix``.

    Raises
    ------
    SpaceframeError
        If the suffix is malformed or already registered.
    """
    _register(READERS, "reader", suffix, module)


def register_writer(suffix: str, module: str) -> None:
    """Register ``spaceframe.io.<module>.write`` for ``suffix`` (errors as for readers)."""
    _register(WRITERS, "writer", suffix, module)


for _suffix, _module in _READER_TABLE:
    register_reader(_suffix, _module)
for _suffix, _module in _WRITER_TABLE:
    register_writer(_suffix, _module)


def _lookup(table: dict[str, str], kind: str, path: Path, fmt: str | None) -> Any:
    suffix = (fmt if fmt is not None else path.suffix).lower()
    if fmt is not None and not suffix.startswith("."):
        suffix = "." + suffix
    if suffix not in table:
        known = ", ".join(sorted(table))
        what = f"format {fmt!r}" if fmt is not None else f"suffix {path.suffix or '(none)'!r}"
        message = f"{path}: no {kind} for {what}; supported: {known}"
        raise (ReadError(message) if kind == "reader" else WriteError(message))
    return importlib.import_module(f"spaceframe.io.{table[suffix]}")


def read(
    path: str | os.PathLike[str],
    *,
    units: str | None = None,
    tolerance: float | None = None,
    heal: bool = True,
    format: str | None = None,
    **options: Any,
) -> Model:
    """Read a drawing or mesh into a Model, choosing the reader by file suffix.

    Parameters
    ----------
    path : str or path-like
        The file.
    units : str, optional
        Length unit of the file ("mm", "m", "inch", "ft", ...).  Needed for
        a DXF without ``$INSUNITS``; overrides the header when given.  Mesh
        files carry no units and are taken as metres unless given.
    tolerance : float, optional
        Healing tolerance in metres (after unit conversion); default
        :data:`spaceframe.tolerances.GEOMETRY_TOLERANCE`.
    heal : bool
        Heal the raw geometry (merge near nodes, split members at nodes,
        remove zero-length and duplicate members); the report is in
        ``model.meta["heal:report"]``.
    format : str, optional
        Suffix to use instead of the file's own (e.g. ``"dxf"``).
    **options
        Options of the format's reader (see :func:`spaceframe.io.dxf.read`,
        :func:`spaceframe.io.mesh.read`) and the healing step switches
        (``split_crossings=True``, ``merge_nodes=False``, ...).

    Returns
    -------
    Model
        Members have no area or E yet (NaN); groups come from layers or sets.

    Raises
    ------
    ReadError
        Unknown suffix (the message lists the supported ones), a missing,
        damaged or unsuitable file, or a bad option.
    """
    p = Path(path)
    module = _lookup(READERS, "reader", p, format)
    model: Model = module.read(p, units=units, tolerance=tolerance, heal=heal, **options)
    return model


def write(
    path: str | os.PathLike[str], model: Model, *, format: str | None = None, **options: Any
) -> Path:
    """Write a model, choosing the writer by file suffix; return the written file.

    Parameters
    ----------
    path : str or path-like
        Output file; written atomically (temporary file, then rename).
    model : Model
    format : str, optional
        Suffix to use instead of the file's own.
    **options
        Options of the format's writer (see :func:`spaceframe.io.dxf.write`).

    Raises
    ------
    WriteError
        Unknown suffix (the message lists the supported ones) or a failed write.
    """
    p = Path(path)
    module = _lookup(WRITERS, "writer", p, format)
    written: Path = module.write(p, model, **options)
    return written
