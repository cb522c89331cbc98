"""Results as VTK XML files: one ``.vtu`` per load case and combination, and a ``.pvd`` series.

Members are VTK line cells; load panels are polygon cells in a separate file
per result, so that a viewer can hide them.  The ``.pvd`` collection lists the
results as consecutive time steps (part 0 the members, part 1 the panels),
so ParaView opens them as one series and steps through the cases.

Arrays (SI units, tension positive):

- point data: ``displacement`` (m), ``reaction`` (N), ``load`` (N),
  ``restraint`` (0/1 per axis), ``node_id``
- cell data (members): ``member_id``, ``axial_force`` (N), ``stress`` (Pa),
  ``strain`` (elastic, N/(EA)), ``group`` (an integer per member, -1 for
  none), ``length`` (m); after design checks ``utilisation`` (demand /
  design resistance, for the checked results; NaN where a member was not
  checked) and ``utilisation_governing`` (the largest over every result checked)
- cell data (panels): ``panel_id``, ``panel_group`` (an integer per panel)
- field data, the legends: one integer array per group whose *name* is the
  legend entry and whose value is the group's number, ``group 0: chords``
  = [0], ``group 1: diagonals`` = [1] ... (``panel_group 0: roof`` for
  panels), and ``result: <name> (<kind>)`` = [case index]; any viewer that
  lists arrays shows them as text.  :func:`group_legend` reads them back.
- field data for scripts: ``case_name``, ``result_kind``, ``factors``
  (combinations only) and ``units`` as UTF-8 text (below), ``case_index``
  and ``auto_scale`` (the factor that draws the largest displacement at 5 %
  of the model size, for a warp filter).

Text for scripts is stored as UTF-8 bytes in a ``uint8`` array, lists
joined by NUL; :func:`decode_text` turns it back into strings.  VTK's own
string arrays would show in ParaView, but meshio's VTU reader rejects them
("Illegal data type 'String'"), and the files must open with every common
reader: hence the legends carry their text in array names.
"""

from __future__ import annotations

import errno
import os
import re
import sys
import uuid
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import WriteError
from spaceframe.results.summary import auto_scale, member_group_index, panel_group_index

if TYPE_CHECKING:
    import pyvista

    from spaceframe.model import Model
    from spaceframe.results import Results

__all__ = ["UNITS", "decode_text", "encode_text", "group_legend", "member_grid", "panel_grid",
           "write", "write_determinacy", "write_modes", "write_path"]

#: Units of the arrays written, also stored in each file's field data.
UNITS: dict[str, str] = {
    "displacement": "m",
    "reaction": "N",
    "load": "N",
    "axial_force": "N",
    "stress": "Pa",
    "strain": "1",
    "length": "m",
    "utilisation": "1",
    "utilisation_governing": "1",
}

_UNSAFE = re.compile(r"[^A-Za-z0-9_.+-]+")


def encode_text(items: str | Sequence[str]) -> np.ndarray:
    """(k,) uint8: UTF-8 bytes of a string, or of a list of strings joined by NUL."""
    text = items if isinstance(items, str) else "\0".join(items)
    return np.frombuffer(text.encode("utf-8"), dtype=np.uint8).copy()


def decode_text(array: Any) -> list[str]:
    """The strings stored by :func:`encode_text` (an empty array gives ``[]``)."""
    raw = bytes(np.asarray(array, dtype=np.uint8).ravel())
    return raw.decode("utf-8").split("\0") if raw else []


def _set_text(grid: pyvista.DataSet, key: str, items: str | Sequence[str]) -> None:
    data = encode_text(items)
    # An empty array is left out: meshio's reader fails on zero-length
    # compressed arrays, and "absent" reads as "none" just as well.
    if data.size:
        grid.field_data[key] = data


#: Characters kept out of legend array names: XML markup and separators
#: that some readers split array names on.
_LEGEND_UNSAFE = re.compile(r'[<>&"\x00-\x1f]')


def _set_legend(grid: pyvista.DataSet, prefix: str, names: Sequence[str]) -> None:
    for k, name in enumerate(names):
        grid.field_data[f"{prefix} {k}: {_LEGEND_UNSAFE.sub('_', name)}"] = np.array(
            [k], dtype=np.int64)


def group_legend(field_data: Any, prefix: str = "group") -> list[str]:
    """Group names by number from the legend arrays (``"<prefix> <k>: <name>"``).

    Parameters
    ----------
    field_data : mapping
        Field data of a grid written here (PyVista's ``field_data`` or
        meshio's ``field_data``).
    prefix : {"group", "panel_group"}

    Returns
    -------
    list of str
        Name of group 0, 1, ... (characters ``<>&"`` and control characters
        shown as ``_``).
    """
    pattern = re.compile(rf"^{re.escape(prefix)} (\d+): (.*)$", re.DOTALL)
    found: dict[int, str] = {}
    for key in field_data.keys():
        hit = pattern.match(str(key))
        if hit:
            found[int(hit.group(1))] = hit.group(2)
    return [found[k] for k in sorted(found)]


def _safe_name(name: str) -> str:
    cleaned = _UNSAFE.sub("_", name).strip("._")
    return cleaned or "result"


def member_grid(results: Results, name: str) -> pyvista.UnstructuredGrid:
    """The members of the model with the result ``name`` attached, as a VTK grid.

    Parameters
    ----------
    results : Results
    name : str
        A load case or combination of ``results``.

    Returns
    -------
    pyvista.UnstructuredGrid
        One line cell per member (cell k is member k, point i is node i) with
        the point, cell and field data listed in the module docstring.
    """
    model = results.model
    res = results[name]
    b = model.n_members
    grid = _line_grid(model)
    _add_point_data(grid, results, name)
    group, group_names = member_group_index(model)
    grid.cell_data["member_id"] = np.arange(b, dtype=np.int64)
    grid.cell_data["axial_force"] = res.axial_forces
    grid.cell_data["stress"] = res.stress
    grid.cell_data["strain"] = res.axial_forces / (model.E * model.area)
    grid.cell_data["group"] = group
    grid.cell_data["length"] = model.lengths
    _set_legend(grid, "group", group_names)
    return grid


def _line_grid(model: Model) -> pyvista.UnstructuredGrid:
    """One line cell per member (cell k is member k) over the drawn nodes (point i is node i)."""
    import pyvista as pv

    b = model.n_members
    cells = np.empty((b, 3), dtype=np.int64)
    cells[:, 0] = 2
    cells[:, 1:] = model.members
    return pv.UnstructuredGrid(
        cells.ravel(), np.full(b, pv.CellType.LINE, dtype=np.uint8), model.nodes.astype(float)
    )


def panel_grid(results: Results, name: str) -> pyvista.UnstructuredGrid:
    """The load panels as polygon cells, with the nodal results of ``name``.

    Returns
    -------
    pyvista.UnstructuredGrid
        One polygon cell per panel (cell k is panel k), all model nodes as
        points, so the panels warp with the same ``displacement`` as the members.
    """
    import pyvista as pv

    model = results.model
    n_pan = model.n_panels
    sizes = np.diff(model.panel_offsets)
    # VTK's flat cell array: each polygon's node count, then its node ids.
    cells = np.empty(model.panel_nodes.size + n_pan, dtype=np.int64)
    count_at = model.panel_offsets[:-1] + np.arange(n_pan)
    is_count = np.zeros(cells.size, dtype=bool)
    is_count[count_at] = True
    cells[is_count] = sizes
    cells[~is_count] = model.panel_nodes
    grid = pv.UnstructuredGrid(
        cells, np.full(n_pan, pv.CellType.POLYGON, dtype=np.uint8), model.nodes.astype(float)
    )
    _add_point_data(grid, results, name)
    group, group_names = panel_group_index(model)
    grid.cell_data["panel_id"] = np.arange(n_pan, dtype=np.int64)
    grid.cell_data["panel_group"] = group
    _set_legend(grid, "panel_group", group_names)
    return grid


def _add_point_data(grid: pyvista.UnstructuredGrid, results: Results, name: str) -> None:
    model = results.model
    res = results[name]
    grid.point_data["displacement"] = res.displacements
    grid.point_data["reaction"] = res.reactions
    grid.point_data["load"] = res.loads
    grid.point_data["restraint"] = model.restraint.astype(np.uint8)
    grid.point_data["node_id"] = np.arange(model.n_nodes, dtype=np.int64)
    _set_text(grid, "case_name", name)
    _set_text(grid, "result_kind", res.kind)
    _set_text(grid, "factors", [f"{k}={v!r}" for k, v in res.factors.items()])
    _set_text(grid, "units", [f"{k}={v}" for k, v in UNITS.items()])
    index = list(results).index(name)
    grid.field_data["case_index"] = np.array([index], dtype=np.int64)
    label = _LEGEND_UNSAFE.sub("_", f"result: {name} ({res.kind})")
    grid.field_data[label] = np.array([index], dtype=np.int64)
    grid.field_data["auto_scale"] = np.array([auto_scale(model, res.displacements)])


def _add_utilisation(grid: pyvista.UnstructuredGrid, results: Results, name: str,
                     utilisation: Mapping[str, Any] | None, governing: Any) -> None:
    """Design utilisation as cell data (demand / resistance, NaN where not checked)."""
    b = results.model.n_members
    for key, values in (("utilisation", (utilisation or {}).get(name)),
                        ("utilisation_governing", governing)):
        if values is None:
            continue
        arr = np.asarray(values, dtype=float)
        if arr.shape != (b,):
            raise WriteError(f"VTK output: {key} of {name!r} has {arr.size} values, the model "
                             f"{b} members")
        grid.cell_data[key] = arr


def _save(grid: Any, path: Path, binary: bool) -> None:
    """Write one ``.vtu``: binary with zlib at level 1, or ASCII.

    Level 1 writes a 100k-member result in 0.07 s against 0.12 s at VTK's
    default level, for files 1-2 % larger; it is still zlib, which every VTK
    reader, ParaView and meshio read.
    """
    if not binary:
        grid.save(path, binary=False)
        return
    from vtkmodules.vtkIOCore import vtkZLibDataCompressor
    from vtkmodules.vtkIOXML import vtkXMLUnstructuredGridWriter

    compressor = vtkZLibDataCompressor()
    compressor.SetCompressionLevel(1)
    writer = vtkXMLUnstructuredGridWriter()
    writer.SetFileName(str(path))
    writer.SetInputData(grid)
    writer.SetDataModeToBinary()
    writer.SetCompressor(compressor)
    import pyvista as pv

    # VTK reports a failed write on its own output window (stderr, many
    # lines); caught here and turned into one OSError the caller words.
    with pv.vtk_verbosity("off"), pv.VtkErrorCatcher(send_to_logging=False) as caught:
        ok = writer.Write()
    if ok != 1 or caught.events:
        why = caught.events[0].alert if caught.events else "the VTK writer failed"
        raise OSError(errno.EIO, f"{path.name}: {why}")


def _temp_beside(final: Path) -> Path:
    # Same folder as the target so os.replace is a rename, never a copy; the
    # real suffix last because VTK picks its writer from it.  Only a name: the
    # writer creates the file, so it gets the usual permissions.
    return final.with_name(f".{final.stem}.{os.getpid()}-{uuid.uuid4().hex[:12]}{final.suffix}")


def _discard(done: list[tuple[Path, Path]]) -> None:
    """Remove the temporary files of a set that failed part-way."""
    for tmp, _ in done:
        tmp.unlink(missing_ok=True)


def _commit_all(done: list[tuple[Path, Path]]) -> None:
    """Rename every finished temporary file onto its target; drop any left over."""
    try:
        for tmp, final in done:
            os.replace(tmp, final)
    finally:
        _discard(done)


class _Series:
    """VTK files staged under temporary names, with a ``.pvd`` series over them.

    Used as ``with _Series(pvd) as series``: :meth:`stage` names each file's
    temporary, ``series.entries`` lists the ``.pvd`` datasets.  On leaving
    without an error the ``.pvd`` is written and every file renamed onto its
    target; on any failure every temporary file is removed.
    """

    def __init__(self, pvd: Path) -> None:
        self.pvd = pvd
        self.used: set[str] = {pvd.name.lower()}
        self.done: list[tuple[Path, Path]] = []
        self.entries: list[tuple[int, int, str, str]] = []

    def unique(self, base: str) -> str:
        """``<base>.vtu``, or ``<base>_2.vtu``, ... if taken (compared without case)."""
        candidate, k = f"{base}.vtu", 2
        while candidate.lower() in self.used:
            candidate, k = f"{base}_{k}.vtu", k + 1
        self.used.add(candidate.lower())
        return candidate

    def stage(self, final: Path) -> Path:
        """The temporary file to write for ``final``."""
        tmp = _temp_beside(final)
        self.done.append((tmp, final))
        return tmp

    def __enter__(self) -> _Series:
        return self

    def __exit__(self, exc_type: type[BaseException] | None, *_: object) -> None:
        if exc_type is not None:
            _discard(self.done)
            return
        try:
            _write_pvd(self.stage(self.pvd), self.entries)
        except BaseException:
            _discard(self.done)
            raise
        _commit_all(self.done)


def _write_pvd(path: Path, entries: list[tuple[int, int, str, str]]) -> None:
    import xml.etree.ElementTree as ET

    # Neither VTK nor PyVista writes .pvd (it is read by ParaView's own
    # reader); the format is a short XML list of datasets, written here with
    # the standard library, which also escapes the case names.
    root = ET.Element(
        "VTKFile",
        type="Collection",
        version="0.1",
        byte_order="LittleEndian" if sys.byteorder == "little" else "BigEndian",
    )
    collection = ET.SubElement(root, "Collection")
    for step, part, file, name in entries:
        ET.SubElement(
            collection,
            "DataSet",
            timestep=str(step),
            group="",
            part=str(part),
            name=name,
            file=file,
        )
    tree = ET.ElementTree(root)
    ET.indent(tree)
    tree.write(path, encoding="utf-8", xml_declaration=True)


def write(
    path: str | os.PathLike[str],
    results: Results,
    *,
    prefix: str | None = None,
    panels: bool = True,
    binary: bool = True,
    utilisation: Mapping[str, Any] | None = None,
    governing_utilisation: Any = None,
    progress: Callable[[str], Any] | None = None,
) -> Path:
    """Write every load case and combination as VTK files plus a ``.pvd`` series.

    Parameters
    ----------
    path : path-like
        Either the ``.pvd`` file to write (the ``.vtu`` files go beside it) or
        a folder (created if missing; the series is then ``<prefix>.pvd``).
    results : Results
        From :meth:`Model.solve`.
    prefix : str, optional
        Start of every file name; default the stem of the ``.pvd`` or "results".
    panels : bool
        Also write the load panels (when the model has any) as a second file per result.
    binary : bool
        Base64-encoded, zlib-compressed arrays (default) or ASCII.
    utilisation : mapping, optional
        Result name -> (b,) design utilisation of each member (NaN where not
        checked): cell data ``utilisation`` of that result's file.
    governing_utilisation : (b,) float, optional
        The largest utilisation over every result checked: cell data
        ``utilisation_governing`` of every file.
    progress : callable, optional
        Told "writing VTK k/n results" before each result.

    Returns
    -------
    Path
        The ``.pvd`` file.

    Raises
    ------
    WriteError
        If there are no results or ``prefix`` is not a plain file name.

    Notes
    -----
    Each file is written under a temporary name in the target folder and
    renamed when all are complete, the ``.pvd`` last; a failure removes the
    temporary files and leaves any earlier series untouched.
    """
    target = Path(path)
    if target.suffix.lower() == ".pvd":
        folder, pvd = target.parent, target
        stem = prefix if prefix is not None else target.stem
    else:
        stem = prefix if prefix is not None else "results"
        folder, pvd = target, target / f"{stem}.pvd"
    if not stem or Path(stem).name != stem or stem in (".", ".."):
        raise WriteError(f"VTK output {target}: prefix {stem!r} must be a plain file name")
    names = list(results)
    if not names:
        raise WriteError(f"VTK output {pvd}: there are no load cases or combinations to write")
    folder.mkdir(parents=True, exist_ok=True)

    with_panels = panels and results.model.n_panels > 0
    with _Series(pvd) as series:
        for step, name in enumerate(names):
            if progress is not None:
                progress(f"writing VTK {step + 1}/{len(names)} results")
            base = f"{stem}_{_safe_name(name)}"
            jobs = [(0, series.unique(base), member_grid)]
            if with_panels:
                jobs.append((1, series.unique(f"{base}_panels"), panel_grid))
            for part, file, build in jobs:
                tmp = series.stage(folder / file)
                grid = build(results, name)
                if part == 0:
                    _add_utilisation(grid, results, name, utilisation, governing_utilisation)
                _save(grid, tmp, binary)
                series.entries.append((step, part, file, name))
    return pvd


def write_modes(
    folder: str | os.PathLike[str],
    results: Results,
    modes: Sequence[Any],
    *,
    binary: bool = True,
) -> list[Path]:
    """Write buckling and vibration mode shapes, one ``.vtu`` per mode.

    Parameters
    ----------
    folder : path-like
        Created if missing (the run writes ``vtk/modes``).
    results : Results
        Gives the members and the first result's point data (the grid of
        :func:`member_grid`, so a mode file opens like a result file).
    modes : sequence
        Objects with ``kind`` ("buckling" or "frequency"), ``result`` (the
        case or combination buckled, empty for frequencies), ``number`` (from
        1), ``value`` (load factor, or frequency in Hz) and ``shape``
        ((n_nodes, 3), largest nodal amplitude 1) - what
        :func:`spaceframe.project.analysis.run_analyses_with_modes` returns.

    Returns
    -------
    list of Path
        The files written: ``buckling_<result>_mode<k>.vtu`` and
        ``frequency_mode<k>.vtu``, names made safe and unique.  Each holds
        point data ``mode_shape`` (3 components, no unit) and field data
        ``mode_kind``, ``mode_result`` (text, :func:`decode_text`),
        ``mode_number`` and ``load_factor`` or ``frequency_hz``.

    Notes
    -----
    Written under temporary names and renamed when all are complete, as
    :func:`write` does; a failure leaves no partial file.
    """
    target = Path(folder)
    if not modes:
        return []
    names = list(results)
    if not names:
        raise WriteError(f"VTK output {target}: there are no load cases or combinations to write")
    n = results.model.n_nodes
    target.mkdir(parents=True, exist_ok=True)
    # One series of every mode, so that open viewers step (animate) through them.
    with _Series(target / "modes.pvd") as series:
        for m in modes:
            shape = np.asarray(m.shape, dtype=float)
            if shape.shape != (n, 3) or not np.isfinite(shape).all():
                raise WriteError(f"VTK output {target}: {m.kind} mode {m.number} of "
                                 f"{m.result!r} is not {n} finite 3-vectors")
            base = (f"buckling_{_safe_name(m.result)}_mode{m.number}" if m.kind == "buckling"
                    else f"frequency_mode{m.number}")
            file = series.unique(base)
            tmp = series.stage(target / file)
            grid = member_grid(results, m.result if m.result in results else names[0])
            grid.point_data["mode_shape"] = shape
            _set_text(grid, "mode_kind", m.kind)
            _set_text(grid, "mode_result", m.result)
            grid.field_data["mode_number"] = np.array([m.number], dtype=np.int64)
            key = "load_factor" if m.kind == "buckling" else "frequency_hz"
            grid.field_data[key] = np.array([float(m.value)])
            _save(grid, tmp, binary)
            series.entries.append((len(series.entries), 0, file,
                                   f"{m.kind} {m.result} mode {m.number}".strip()))
    return [final for _, final in series.done]


def write_path(
    path: str | os.PathLike[str],
    model: Model,
    load_path: Any,
    *,
    binary: bool = True,
) -> Path:
    """Write a load path as a VTK series: one ``.vtu`` per step and a ``.pvd`` over them.

    Parameters
    ----------
    path : path-like
        The ``.pvd`` file (its folder is created if missing); the steps go
        beside it as ``<stem>_step<k>.vtu``.
    model : Model
        The model the path was traced on (members and drawn nodes).
    load_path : LoadPath
        From :func:`spaceframe.solve_nonlinear`: step 0 is the unloaded state.

    Returns
    -------
    Path
        The ``.pvd`` file; the series' time step k is step k of the path.

    Raises
    ------
    WriteError
        If the path does not fit the model or ``path`` is not a ``.pvd``.

    Notes
    -----
    Each step's grid is drawn on the undeformed nodes with point data
    ``displacement`` (m) and ``node_id``, cell data ``member_id``,
    ``axial_force`` (N, tension positive) and ``slack`` (1 where a
    tension-only member is slack), field data ``load_factor``, ``step`` and
    ``case_name`` (text, :func:`decode_text`).  Staged and renamed as
    :func:`write` does: a failure leaves no partial series.
    """
    pvd = Path(path)
    if pvd.suffix.lower() != ".pvd":
        raise WriteError(f"VTK output {pvd}: a load path is written as a .pvd series")
    lam = np.asarray(load_path.load_factors, dtype=float)
    disp = np.asarray(load_path.displacements, dtype=float)
    forces = np.asarray(load_path.axial_forces, dtype=float)
    s, n, b = lam.shape[0], model.n_nodes, model.n_members
    if disp.shape != (s, n, 3) or forces.shape != (s, b):
        raise WriteError(f"VTK output {pvd}: the path of {load_path.name!r} has "
                         f"{disp.shape[1:2]} nodes and {forces.shape[1:2]} members per step, "
                         f"the model {n} nodes and {b} members")
    slack = np.asarray(load_path.slack, dtype=bool)
    if slack.shape != (s, b):
        slack = np.zeros((s, b), dtype=bool)
    pvd.parent.mkdir(parents=True, exist_ok=True)
    grid = _line_grid(model)
    grid.point_data["node_id"] = np.arange(n, dtype=np.int64)
    grid.cell_data["member_id"] = np.arange(b, dtype=np.int64)
    _set_text(grid, "case_name", load_path.name)
    with _Series(pvd) as series:
        for k in range(s):
            file = series.unique(f"{pvd.stem}_step{k}")
            tmp = series.stage(pvd.parent / file)
            grid.point_data["displacement"] = disp[k]
            grid.cell_data["axial_force"] = forces[k]
            grid.cell_data["slack"] = slack[k].astype(np.int8)
            grid.field_data["load_factor"] = np.array([lam[k]])
            grid.field_data["step"] = np.array([k], dtype=np.int64)
            _save(grid, tmp, binary)
            series.entries.append((k, 0, file, f"{load_path.name} step {k}"))
    return pvd


def write_determinacy(
    folder: str | os.PathLike[str], model: Model, det: Any, *, binary: bool = True
) -> list[Path]:
    """Write the mechanisms and states of self-stress of a frame as two VTK series.

    ``det`` is :func:`spaceframe.determinacy`'s result with its bases.
    ``mechanisms.pvd`` steps through ``mechanism_mode<k>.vtu`` (point data
    ``mode_shape``, largest nodal movement 1, no unit: warp by it, or animate
    its amplitude, to see the frame move without any member changing length);
    ``self_stress.pvd`` through ``self_stress_state<k>.vtu`` (cell data
    ``self_stress``, member forces in equilibrium with no load, largest 1, no
    unit: colour the members by it).  Field data ``mode_kind`` and
    ``mode_number`` in each.  Either series is left out when there is nothing
    in it.

    Raises
    ------
    WriteError
        When the bases were not computed (``det.note`` says why) or do not fit
        the model.
    """
    target = Path(folder)
    mech, states = det.mechanism_modes, det.self_stress_states
    if (det.mechanisms and mech is None) or (det.self_stress and states is None):
        raise WriteError(f"VTK output {target}: the mechanisms and states of self-stress were "
                         f"counted but not computed ({det.note or 'bases not asked for'})")
    n, b = model.n_nodes, model.n_members
    mech = np.zeros((0, n, 3)) if mech is None else np.asarray(mech, dtype=float)
    states = np.zeros((0, b)) if states is None else np.asarray(states, dtype=float)
    if mech.shape[1:] != (n, 3) or states.shape[1:] != (b,):
        raise WriteError(f"VTK output {target}: the bases do not fit a model of {n} nodes "
                         f"and {b} members")
    target.mkdir(parents=True, exist_ok=True)
    written: list[Path] = []
    for pvd, kind, base, arrays in (
        ("mechanisms.pvd", "mechanism", "mechanism_mode", mech),
        ("self_stress.pvd", "self-stress state", "self_stress_state", states),
    ):
        if not arrays.shape[0]:
            continue
        with _Series(target / pvd) as series:
            for k, values in enumerate(arrays, start=1):
                file = series.unique(f"{base}{k}")
                tmp = series.stage(target / file)
                grid = _line_grid(model)
                if kind == "mechanism":
                    grid.point_data["mode_shape"] = values
                else:
                    grid.cell_data["self_stress"] = values
                _set_text(grid, "mode_kind", kind)
                grid.field_data["mode_number"] = np.array([k], dtype=np.int64)
                _save(grid, tmp, binary)
                series.entries.append((k - 1, 0, file, f"{kind} {k}"))
        written += [final for _, final in series.done]
    return written
