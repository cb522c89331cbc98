"""Results as CSV tables and a JSON summary, for spreadsheets and scripts.

Four files, SI units throughout, the unit in every column name (``[-]``
for ids and text):

- ``nodes.csv``: node, x/y/z [m], then per result ``<result>: ux [m]``, ``uy``,
  ``uz``, ``Rx [N]``, ``Ry``, ``Rz``
- ``members.csv``: member, node_i, node_j, group (all of the member's groups,
  joined by ``;``), length [m], area [m2], E [Pa], then per result
  ``<result>: N [N]`` (tension positive) and ``<result>: stress [Pa]``
- ``reactions.csv``: supported and sprung nodes only: node, x/y/z, the
  restrained directions, then per result ``<result>: Rx [N]``, ``Ry``, ``Rz``
- ``summary.json``: :func:`spaceframe.results.summary.summary`, plus ``"tables"``
  stating the precision of the CSV files
- ``results.npz`` (:func:`write_arrays`; the run writes it): the same numbers as
  binary arrays, full float64 precision, for big runs and for scripts
- ``member_design.csv`` (:func:`write_member_design`, when design checks ran):
  per member its section, material, governing force, resistance, utilisation,
  governing result and check

Precision: the model's own numbers (coordinates, lengths, areas, moduli)
with :data:`INPUT_DIGITS` = 15 significant digits, so every value that was
given with up to 15 digits (typed in a model file, drawn in a CAD program)
reads back as given (ISO C ``DBL_DIG``: a decimal of 15 digits survives the
trip through float64), without binary noise such as 0.30000000000000004;
results with :data:`RESULT_DIGITS` = 7 significant digits by default (the
solve is accepted at a relative equilibrium residual up to 1e-8, so further
digits carry no information), or as many as asked for with ``digits=``
(17 round-trips every float64 exactly).
"""

from __future__ import annotations

import json
import os
import uuid
from collections.abc import Callable, Iterable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, overload

import numpy as np

from spaceframe.errors import WriteError
from spaceframe.files import atomic_write, unbuffered_file
from spaceframe.results.summary import member_group_labels, summary, supported_nodes

if TYPE_CHECKING:
    from spaceframe.model import Model
    from spaceframe.results import Envelope, Results

__all__ = ["ARRAYS_FILE", "FILES", "INPUT_DIGITS", "RESULT_DIGITS", "read_arrays", "write",
           "write_arrays", "write_path"]

#: Names of the files written, in the order returned by :func:`write`.
FILES = ("nodes.csv", "members.csv", "reactions.csv", "summary.json")

#: Significant digits of the model's own numbers (coordinates, lengths, areas, E).
INPUT_DIGITS = 15
#: Default significant digits of results (displacements, forces, stresses, reactions).
RESULT_DIGITS = 7

#: Rows formatted per chunk: bounded memory at any size.
_CHUNK = 20_000


class _Col:
    """One table column: its values and how each is printed."""

    def __init__(self, values: Any, kind: str, digits: int = INPUT_DIGITS) -> None:
        arr = np.asarray(values)
        self.kind = kind
        self.values: np.ndarray
        if kind == "int":
            self.values, self.code = arr.astype(np.int64), "%d"
        elif kind == "formatted":  # text already formatted that needs no quoting (numbers)
            self.values, self.code = arr.astype(object), "%s"
        elif kind == "float":
            # + 0.0 turns -0.0 into 0.0: no "-0" in a table.
            self.values, self.code = arr.astype(np.float64) + 0.0, f"%.{int(digits)}g"
        else:
            # Quote each distinct text once (groups, sections: a few values
            # repeated over every member), then spread them back by index.
            distinct, index = np.unique(arr.astype(str), return_inverse=True)
            quoted = np.array([_quote(v) for v in distinct.tolist()], dtype=object)
            self.values, self.code = quoted[index.reshape(-1)], "%s"


def _quote(text: str) -> str:
    """A CSV field as the csv module writes it (RFC 4180 quoting when needed)."""
    if any(c in text for c in ',"\r\n'):
        return '"' + text.replace('"', '""') + '"'
    return text


def _ints(values: Any) -> _Col:
    return _Col(values, "int")


def _inputs(values: Any) -> _Col:
    return _Col(values, "float", INPUT_DIGITS)


def _texts(values: Any) -> _Col:
    return _Col(values, "text")


def _write_csv(path: Path, header: list[str], columns: list[_Col]) -> None:
    # One printf-style format per row, applied to a chunk of rows at once:
    # the formatting runs in C ("%" on one long format string), not in a
    # Python loop per value, and memory stays bounded by the chunk.
    row = ",".join(c.code for c in columns) + "\n"
    n = len(columns[0].values) if columns else 0
    with path.open("w", newline="", encoding="utf-8") as fh:
        fh.write(",".join(_quote(h) for h in header) + "\n")
        for start in range(0, n, _CHUNK):
            stop = min(start + _CHUNK, n)
            parts = [c.values[start:stop].tolist() for c in columns]
            flat = [v for rec in zip(*parts, strict=True) for v in rec]
            fh.write((row * (stop - start)) % tuple(flat))


def _node_table(results: Results, digits: int,
                names: Sequence[str]) -> tuple[list[str], list[_Col]]:
    model = results.model
    header = ["node [-]", "x [m]", "y [m]", "z [m]"]
    cols = [_ints(np.arange(model.n_nodes)), *(_inputs(c) for c in model.nodes.T)]
    for name in names:
        res = results[name]
        header += [f"{name}: u{a} [m]" for a in "xyz"] + [f"{name}: R{a} [N]" for a in "xyz"]
        cols += [_Col(c, "float", digits) for c in (*res.displacements.T, *res.reactions.T)]
    return header, cols


def _member_table(results: Results, digits: int,
                  names: Sequence[str]) -> tuple[list[str], list[_Col]]:
    model = results.model
    header = ["member [-]", "node_i [-]", "node_j [-]", "group [-]", "length [m]",
              "area [m2]", "E [Pa]"]
    cols = [
        _ints(np.arange(model.n_members)),
        _ints(model.members[:, 0]),
        _ints(model.members[:, 1]),
        _texts(member_group_labels(model)),
        _inputs(model.lengths),
        _inputs(model.area),
        _inputs(model.E),
    ]
    for name in names:
        res = results[name]
        header += [f"{name}: N [N]", f"{name}: stress [Pa]"]
        cols += [_Col(res.axial_forces, "float", digits), _Col(res.stress, "float", digits)]
    return header, cols


def _reaction_table(results: Results, digits: int,
                    names: Sequence[str]) -> tuple[list[str], list[_Col]]:
    model = results.model
    held = supported_nodes(model)
    header = ["node [-]", "x [m]", "y [m]", "z [m]", "restrained [-]"]
    fixed = np.where(model.restraint[held], np.array(list("xyz"), dtype=object), "")
    restrained = fixed[:, 0] + fixed[:, 1] + fixed[:, 2]
    cols = [_ints(held), *(_inputs(c) for c in model.nodes[held].T), _texts(restrained)]
    for name in names:
        res = results[name]
        header += [f"{name}: R{a} [N]" for a in "xyz"]
        cols += [_Col(c, "float", digits) for c in res.reactions[held].T]
    return header, cols


def _check_request(what: str, prefix: str, results: Results) -> None:
    """WriteError naming ``what`` for a prefix with a folder in it, or no results."""
    if Path(prefix).name != prefix and prefix:
        raise WriteError(f"{what}: prefix {prefix!r} must not contain a folder")
    if len(results) == 0:
        raise WriteError(f"{what}: there are no load cases or combinations to write")


def _temp_name(final: Path) -> Path:
    return final.with_name(f".{final.name}.{os.getpid()}-{uuid.uuid4().hex[:12]}.tmp")


def _write_one(final: Path, header: list[str], cols: list[_Col]) -> None:
    """One CSV table under a temporary name, renamed onto ``final`` when complete."""
    atomic_write(final, lambda tmp: _write_csv(tmp, header, cols))


def _commit(pairs: Iterable[tuple[Path, Path]]) -> None:
    for tmp, final in pairs:
        os.replace(tmp, final)


def write(
    folder: str | os.PathLike[str],
    results: Results,
    *,
    prefix: str = "",
    extra: Mapping[str, Any] | None = None,
    digits: int = RESULT_DIGITS,
    columns: Sequence[str] | None = None,
    summary_data: Mapping[str, Any] | None = None,
) -> list[Path]:
    """Write the node, member and reaction tables and the JSON summary.

    Parameters
    ----------
    folder : path-like
        Output folder, created if missing.
    results : Results
    prefix : str
        Put in front of each file name (e.g. ``"canopy_"``).
    extra : mapping, optional
        More JSON-able top-level entries for ``summary.json`` (e.g. the model
        file as ``"source"``, a ``"title"``, ``"warnings"``); they may not
        replace a key of :func:`spaceframe.results.summary.summary`.
    digits : int
        Significant digits of the results in the CSV files (1 to 17; 17
        round-trips every float64).
    columns : sequence of str, optional
        The results that get columns in the CSV tables (default: all); the
        summary covers every result and lists these as
        ``tables.results`` when they are not all.
    summary_data : mapping, optional
        :func:`spaceframe.results.summary.summary` of these results when the
        caller has it already (a thousand results of a large model take
        seconds to summarise); default: computed here.

    Returns
    -------
    list of Path
        ``nodes.csv``, ``members.csv``, ``reactions.csv``, ``summary.json``
        (with the prefix), in that order.

    Raises
    ------
    WriteError
        If there are no results, ``prefix`` holds a path separator or
        ``extra`` would replace a summary key.

    Notes
    -----
    All four files are written under temporary names first and renamed
    only when all are complete; a failure leaves earlier tables untouched.
    """
    out = Path(folder)
    _check_request(f"tables in {out}", prefix, results)
    if not 1 <= int(digits) <= 17:
        raise WriteError(f"tables in {out}: digits={digits!r} must be 1 to 17")
    data = dict(summary(results) if summary_data is None else summary_data)
    data["tables"] = {"significant_digits": {"model": INPUT_DIGITS, "results": int(digits)},
                      "units": "SI, in each column name"}
    names = list(results) if columns is None else list(columns)
    unknown = [n for n in names if n not in results]
    if unknown:
        raise WriteError(f"tables in {out}: no result named {unknown[0]!r}")
    if len(names) < len(results):
        data["tables"]["results"] = names
    clash = sorted(set(extra or {}) & set(data))
    if clash:
        raise WriteError(f"tables in {out}: extra summary key {clash[0]!r} is already a "
                         "summary entry")
    data.update(extra or {})
    out.mkdir(parents=True, exist_ok=True)
    finals = [out / f"{prefix}{name}" for name in FILES]
    pairs = [(_temp_name(f), f) for f in finals]
    try:
        for (tmp, _), build in zip(
            pairs, (_node_table, _member_table, _reaction_table), strict=False
        ):
            header, cols = build(results, int(digits), names)
            _write_csv(tmp, header, cols)
        # allow_nan=False: a NaN would make the file unreadable as strict JSON.
        pairs[3][0].write_text(json.dumps(data, indent=2, allow_nan=False) + "\n", encoding="utf-8")
        _commit(pairs)
    finally:
        for tmp, _ in pairs:
            tmp.unlink(missing_ok=True)
    return finals


#: File of :func:`write_arrays`.
ARRAYS_FILE = "results.npz"

#: Units of the arrays in :data:`ARRAYS_FILE` (stored in the file as ``units``).
ARRAY_UNITS = {
    "nodes": "m", "members": "-", "groups": "-", "lengths": "m", "area": "m2", "E": "Pa",
    "result_names": "-", "result_kinds": "-", "displacements": "m", "reaction_nodes": "-",
    "reactions": "N",
    "axial_forces": "N", "load_counts": "-", "load_nodes": "-", "load_values": "N",
    "elongations": "m", "residuals": "-",
    "slack": "-", "result_factors": "-",
}


def write_arrays(
    folder: str | os.PathLike[str], results: Results, *, prefix: str = ""
) -> list[Path]:
    """Write ``results.npz``: the model and every result as binary arrays.

    The file opens with ``numpy.load(path)`` (no pickles: every text is a
    fixed-width unicode array).  Arrays: ``nodes`` (n, 3) [m], ``members``
    (b, 2) node ids, ``groups`` (b,) the member's groups joined by ``;``,
    ``lengths`` [m], ``area`` [m2], ``E`` [Pa], ``result_names`` (r,) and
    ``result_kinds`` (r,) ("case" or "combination"), ``displacements`` (r, n,
    3) [m], ``reaction_nodes`` (k,) the nodes where some result has a
    reaction (supports and springs), ``reactions`` (r, k, 3) [N] at those
    nodes (zero at every other node), ``axial_forces`` (r, b) [N, tension
    positive], the applied nodal forces at the nodes that have any, result
    after result: ``load_counts`` (r,) how many nodes each result loads,
    ``load_nodes`` (k,) those nodes and ``load_values`` (k, 3) their forces
    [N] (zero at every other node), ``elongations``
    (r, b) [m], ``residuals`` (r,) relative equilibrium residuals, ``slack``
    (r, b) tension-only members carrying nothing (present only when the model
    has tension-only members) and ``result_factors`` the combinations' case
    factors as JSON; ``units`` holds this table as JSON.  Stresses are not
    stored: they are ``axial_forces / area`` (a thousand results of a
    100k-member model would add 0.8 GB, written at the disk's speed).
    :func:`read_arrays` turns the file back into
    :class:`~spaceframe.results.Results` of the model.
    Full float64 precision, and about 6 times faster to write than the CSV
    tables (a million members, 3 results: 0.43 s against 2.7 s).

    Returns
    -------
    list of Path
        ``[results.npz]`` (with the prefix).

    Raises
    ------
    WriteError
        If there are no results or ``prefix`` holds a path separator, or the
        file cannot be written (nothing is left half-written).
    """
    out = Path(folder)
    _check_request(f"{ARRAYS_FILE} in {out}", prefix, results)
    model = results.model
    items = list(results.values())
    held = np.zeros(model.n_nodes, dtype=bool)
    held[supported_nodes(model)] = True
    for r in items:
        held[r.nonzero_rows("reactions")[0]] = True
    reaction_nodes = np.flatnonzero(held)
    loads = [r.nonzero_rows("loads") for r in items]  # (nodes, rows) each
    arrays: dict[str, Any] = {
        "nodes": np.asarray(model.nodes, dtype=np.float64),
        "members": np.asarray(model.members, dtype=np.int64),
        "groups": np.asarray(member_group_labels(model), dtype=str),
        "lengths": np.asarray(model.lengths, dtype=np.float64),
        "area": np.asarray(model.area, dtype=np.float64),
        "E": np.asarray(model.E, dtype=np.float64),
        "result_names": np.array(list(results.keys()), dtype=str),
        "result_kinds": np.array([r.kind for r in items], dtype=str),
        # Per result, stacked as the file is written (never in memory as one
        # array: a thousand results of a 100k-member model are gigabytes).
        "displacements": _Stack([r.displacements for r in items]),
        # Reactions only where some result has one (supports and springs): zero
        # elsewhere, and a thousand results of a 100k-member model are 0.6 GB of it.
        "reaction_nodes": reaction_nodes,
        "reactions": _Stack(_Each(items, lambda r: r.reactions[reaction_nodes])),
        "axial_forces": _Stack([r.axial_forces for r in items]),
        # Loads only at the nodes each result loads: a load moved over a roof in
        # a thousand cases is one node per case, and the full stack would be 0.6
        # GB of zeros at 100k members.
        "load_counts": np.array([k.size for k, _ in loads], dtype=np.int64),
        "load_nodes": _Rows([k for k, _ in loads], np.int64),
        "load_values": _Rows([v for _, v in loads], np.float64),
        "elongations": _Stack(_Each(items, lambda r: r.elongations)),
        "residuals": np.array([r.residual for r in items], dtype=np.float64),
        "result_factors": np.array(json.dumps([r.factors for r in items])),
        "solver": np.array(str(results.solver)),
        "units": np.array(json.dumps(ARRAY_UNITS)),
    }
    if any(r.slack is not None for r in items):
        arrays["slack"] = _Stack([np.zeros(model.n_members, dtype=bool) if r.slack is None
                                  else np.asarray(r.slack, dtype=bool) for r in items])
    out.mkdir(parents=True, exist_ok=True)
    final = out / f"{prefix}{ARRAYS_FILE}"

    def save(tmp: Path) -> None:
        _save_npz(tmp, arrays)

    atomic_write(final, save)
    return [final]


class _Each(Sequence[np.ndarray]):
    """``make(item)`` of each item, made when read: the parts of a stack written one by one.

    Arrays a result makes when asked (its elongations, its reactions) are
    then made one at a time as the file is written, never all together.
    """

    def __init__(self, items: list[Any], make: Callable[[Any], np.ndarray]) -> None:
        self.items, self.make = items, make

    def __len__(self) -> int:
        return len(self.items)

    @overload
    def __getitem__(self, i: int) -> np.ndarray: ...
    @overload
    def __getitem__(self, i: slice) -> list[np.ndarray]: ...

    def __getitem__(self, i: int | slice) -> np.ndarray | list[np.ndarray]:
        if isinstance(i, slice):
            return [self.make(x) for x in self.items[i]]
        return self.make(self.items[i])


class _Stack:
    """Equal arrays to be stored as one array of one more dimension (the first)."""

    def __init__(self, parts: Sequence[np.ndarray]) -> None:
        self.parts = parts
        first = np.asarray(parts[0])
        self.dtype, self.shape = first.dtype, (len(parts), *first.shape)
        self.each = first.shape


class _Rows(_Stack):
    """Arrays of equal rows (and ``dtype``) to be stored one after another, as one array."""

    def __init__(self, parts: list[np.ndarray], dtype: Any) -> None:
        self.parts = parts
        first = np.asarray(parts[0])
        self.dtype = np.dtype(dtype)
        self.shape = (sum(int(np.shape(p)[0]) for p in parts), *first.shape[1:])
        self.each = first.shape[1:]


def _save_npz(path: Path, arrays: Mapping[str, Any]) -> None:
    """What ``numpy.savez`` writes (an uncompressed zip of .npy files), stacks streamed.

    Written here because savez takes whole arrays: a stack of a thousand
    results would be copied into one array first (gigabytes, and as long as
    the writing).  Each ``_Stack`` is written part after part behind one
    .npy header; ``numpy.load`` reads the file as it reads savez's.
    """
    import zipfile

    with unbuffered_file(path) as raw, zipfile.ZipFile(
            raw, "w", compression=zipfile.ZIP_STORED, allowZip64=True) as zf:
        for name, value in arrays.items():
            rows = isinstance(value, _Rows)
            parts: Sequence[np.ndarray]
            if not isinstance(value, _Stack):  # one array: a stack of one, no new axis
                value = np.asarray(value)
                parts, dtype, shape, each = [value], value.dtype, value.shape, value.shape
            else:
                parts, dtype, shape, each = value.parts, value.dtype, value.shape, value.each
            with zf.open(f"{name}.npy", "w", force_zip64=True) as fh:
                np.lib.format.write_array_header_2_0(
                    fh, {"descr": np.lib.format.dtype_to_descr(dtype),
                         "fortran_order": False, "shape": shape})
                for part in parts:
                    arr = np.require(part, dtype=dtype, requirements="C")
                    if (arr.shape[1:] if rows else arr.shape) != each:
                        raise WriteError(f"{path}: {name}: a part of shape {arr.shape} in a "
                                         f"stack of {shape}")
                    # Large parts as they lie in memory, no copy.
                    fh.write(arr.data if arr.ndim and arr.nbytes > 2**20 else arr.tobytes())


def read_arrays(path: str | os.PathLike[str], model: Model) -> Results:
    """The results in a ``results.npz`` of :func:`write_arrays`, as Results of ``model``.

    Raises
    ------
    ReadError
        If the file is missing or not such a file, or if ``model`` is not the
        model the results were computed for (its nodes or members differ:
        the model changed since the run).
    """
    from spaceframe.errors import ReadError
    from spaceframe.results import CaseResult
    from spaceframe.results import Results as _Results

    where = Path(path)
    try:
        with np.load(where) as z:
            data = {k: z[k] for k in z.files}
    except (OSError, ValueError) as exc:
        raise ReadError(f"{where}: cannot be read as a results file ({exc})") from None
    missing = [k for k in ("nodes", "members", "result_names", "result_kinds", "displacements",
                           "reactions", "axial_forces", "elongations", "residuals",
                           "result_factors", "area") if k not in data]
    if "loads" not in data and "load_values" not in data:
        missing.append("load_values")
    if missing:
        raise ReadError(f"{where}: not a results file of spaceframe (no {missing[0]!r} array)")
    if (data["nodes"].shape != model.nodes.shape or data["members"].shape != model.members.shape
            or not np.array_equal(data["members"], model.members)
            or not np.allclose(data["nodes"], model.nodes, rtol=0.0, atol=1e-9)):
        raise ReadError(
            f"{where}: the results are of another model ({data['nodes'].shape[0]} nodes, "
            f"{data['members'].shape[0]} members; the model now has {model.n_nodes} nodes, "
            f"{model.n_members} members, or they moved): the model changed since the run, "
            "so run it again")
    factors = json.loads(str(data["result_factors"]))
    slack = data.get("slack")
    reactions = data["reactions"]
    if "reaction_nodes" in data:  # only the nodes that have any (zero elsewhere)
        full = np.zeros((reactions.shape[0], model.n_nodes, 3))
        full[:, data["reaction_nodes"]] = reactions
        reactions = full
    loads = data.get("loads")  # files of earlier versions: every node of every result
    if loads is None:
        loads = np.zeros((len(data["result_names"]), model.n_nodes, 3))
        which = np.repeat(np.arange(loads.shape[0]), data["load_counts"])
        loads[which, data["load_nodes"]] = data["load_values"]
    items = {}
    for i, name in enumerate(data["result_names"].tolist()):
        items[name] = CaseResult(
            name=name, kind=str(data["result_kinds"][i]),
            displacements=data["displacements"][i], axial_forces=data["axial_forces"][i],
            reactions=reactions[i], loads=loads[i],
            elongations=data["elongations"][i], residual=float(data["residuals"][i]),
            area=data["area"], factors={k: float(v) for k, v in factors[i].items()},
            slack=None if slack is None else slack[i])
    return _Results(model, items, solver=str(data.get("solver", "")),
                    info={"read_from": str(where)})


def write_envelopes(
    folder: str | os.PathLike[str], results: Results, envelopes: Mapping[str, Envelope],
    *, digits: int = RESULT_DIGITS,
) -> list[Path]:
    """Write ``envelopes.csv``: per member and envelope the largest and smallest force.

    Parameters
    ----------
    folder : path-like
        Output folder (must exist).
    results : Results
        For the model (ids, groups, lengths).
    envelopes : mapping
        Name -> :class:`~spaceframe.results.Envelope` (max and min over its results).

    Returns
    -------
    list of Path
        ``[envelopes.csv]``, or ``[]`` when there are no envelopes.
    """
    if not envelopes:
        return []
    model = results.model
    header = ["member [-]", "node_i [-]", "node_j [-]", "group [-]", "length [m]"]
    cols = [_ints(np.arange(model.n_members)), _ints(model.members[:, 0]),
            _ints(model.members[:, 1]), _texts(member_group_labels(model)),
            _inputs(model.lengths)]
    for name, env in envelopes.items():
        header += [f"{name}: N max [N]", f"{name}: N min [N]",
                   f"{name}: stress max [Pa]", f"{name}: stress min [Pa]"]
        cols += [_Col(v, "float", digits) for v in (env.axial_max, env.axial_min,
                                                     env.axial_max / model.area,
                                                     env.axial_min / model.area)]
    final = Path(folder) / "envelopes.csv"
    _write_one(final, header, cols)
    return [final]


def envelope_summary(results: Results, envelopes: Mapping[str, Envelope]) -> dict[str, Any]:
    """JSON-able governing values of each envelope: max tension and max compression."""
    model = results.model
    out: dict[str, Any] = {}
    for name, env in envelopes.items():
        it, ic = int(np.argmax(env.axial_max)), int(np.argmin(env.axial_min))
        disp = np.maximum(np.abs(env.displacement_max), np.abs(env.displacement_min))
        node = int(np.argmax(np.linalg.norm(disp, axis=1)))
        out[name] = {
            "of": list(env.members),
            "max_tension": {"member": it, "force": float(env.axial_max[it]),
                            "groups": model.groups_of(it)},
            "max_compression": {"member": ic, "force": float(env.axial_min[ic]),
                                "groups": model.groups_of(ic)},
            "max_displacement_component": {"node": node, "value": float(disp[node].max())},
        }
    return out


#: File of :func:`write_member_design`.
DESIGN_FILE = "member_design.csv"


def _maybe(values: Any, digits: int) -> _Col:
    """A float column printed with ``digits`` significant digits, empty where NaN."""
    v = np.asarray(values, dtype=np.float64).ravel() + 0.0
    # One %-format over the column (numpy's char.mod loops in Python: 4x slower).
    code = f"%.{int(digits)}g\x00"
    text = np.array(((code * v.size) % tuple(v.tolist())).split("\x00")[:-1], dtype=object)
    text[~np.isfinite(v)] = ""
    return _Col(text, "formatted")


def write_member_design(
    folder: str | os.PathLike[str],
    results: Results,
    columns: Mapping[str, Any],
    *,
    digits: int = RESULT_DIGITS,
) -> list[Path]:
    """Write ``member_design.csv``: per member its governing design check.

    Columns: member [-], group [-], section [-], material [-], governing
    force [N] (tension positive), resistance [N], utilisation [-], passes
    [-] (yes / no / empty when not checked), governing result [-], governing
    check [-], slenderness [-] (L_cr / i in the governing result) and its
    limit [-].  Numbers of members that were not checked (and limits that do
    not apply) are left empty.

    Parameters
    ----------
    folder : path-like
        Output folder (must exist).
    results : Results
        For the model (ids, groups).
    columns : mapping
        (b,) arrays under "section", "material", "force", "resistance",
        "utilisation", "passes" (bool, checked members), "checked" (bool),
        "result", "check".

    Returns
    -------
    list of Path
        ``[member_design.csv]``.
    """
    model = results.model
    b = model.n_members
    for key in ("section", "material", "force", "resistance", "utilisation", "passes",
                "checked", "result", "check"):
        if len(columns[key]) != b:
            raise WriteError(f"{DESIGN_FILE}: column {key!r} has {len(columns[key])} values, "
                             f"the model {b} members")
    checked = np.asarray(columns["checked"], dtype=bool)
    passes = np.where(checked, np.where(np.asarray(columns["passes"], dtype=bool), "yes", "no"),
                      "")
    header = ["member [-]", "group [-]", "section [-]", "material [-]", "governing force [N]",
              "resistance [N]", "utilisation [-]", "passes [-]", "governing result [-]",
              "governing check [-]", "slenderness [-]", "slenderness limit [-]"]
    cols = [_ints(np.arange(b)), _texts(member_group_labels(model)),
            _texts(columns["section"]), _texts(columns["material"]),
            _maybe(columns["force"], digits), _maybe(columns["resistance"], digits),
            _maybe(columns["utilisation"], digits), _texts(passes),
            _texts(columns["result"]), _texts(columns["check"]),
            _maybe(columns.get("slenderness", np.full(b, np.nan)), digits),
            _maybe(columns.get("slenderness_limit", np.full(b, np.nan)), digits)]
    final = Path(folder) / DESIGN_FILE
    _write_one(final, header, cols)
    return [final]


def write_path(
    path: str | os.PathLike[str],
    load_path: Any,
    nodes: Sequence[int],
    *,
    digits: int = RESULT_DIGITS,
) -> Path:
    """Write a load path's curve as CSV: one row per step.

    Columns: step [-], load factor [-], ux, uy, uz [m] of each node in
    ``nodes`` (headed ``ux node 3 [m]``, ...), residual [-] (the relative
    equilibrium residual of the step, :class:`spaceframe.results.LoadPath`).

    Parameters
    ----------
    path : path-like
        The ``.csv`` file (its folder must exist).
    load_path : LoadPath
        From :func:`spaceframe.solve_nonlinear`.
    nodes : sequence of int
        Nodes of the curve.

    Returns
    -------
    Path

    Raises
    ------
    WriteError
        On a node id the path does not have.
    """
    final = Path(path)
    disp = np.asarray(load_path.displacements, dtype=float)
    ids = np.asarray(nodes, dtype=np.int64).reshape(-1)
    bad = ids[(ids < 0) | (ids >= disp.shape[1])]
    if bad.size:
        raise WriteError(f"{final}: node {int(bad[0])} is not in the model "
                         f"({disp.shape[1]} nodes)")
    steps = disp.shape[0]
    header = ["step [-]", "load factor [-]"]
    cols = [_ints(np.arange(steps)), _Col(load_path.load_factors, "float", digits)]
    for i in ids.tolist():
        for axis, label in enumerate(("ux", "uy", "uz")):
            header.append(f"{label} node {i} [m]")
            cols.append(_Col(disp[:, i, axis], "float", digits))
    header.append("residual [-]")
    cols.append(_Col(load_path.residuals, "float", 3))
    _write_one(final, header, cols)
    return final
