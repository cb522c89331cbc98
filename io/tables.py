"""Results as CSV tables and a JSON summary, for spreadsheets and scripts.

Four files, SI units throughout, the unit in each column name:

- ``nodes.csv``: node, x/y/z [m], then per result ``<result>: ux [m]``, ``uy``,
  ``uz``, ``Rx [N]``, ``Ry``, ``Rz``
- ``members.csv``: member, node_i, node_j, group (all of the member's groups,
  joined by ``;``), length [m], area [m2], E [Pa], then per result
  ``<result>: N [N]`` (tension positive) and ``<result>: stress [Pa]``
- ``reactions.csv``: supported and sprung nodes only: node, x/y/z, the
  restrained directions, then per result ``<result>: Rx [N]``, ``Ry``, ``Rz``
- ``summary.json``: :func:`spaceframe.summary.summary`

Numbers are written with Python's shortest round-trip repr, so reading a
file back gives the same float64 values.
"""

from __future__ import annotations

import csv
import json
import os
import uuid
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.summary import member_group_labels, summary, supported_nodes

if TYPE_CHECKING:
    from spaceframe.results import Envelope, Results

__all__ = ["FILES", "write"]

#: Names of the files written, in the order returned by :func:`write`.
FILES = ("nodes.csv", "members.csv", "reactions.csv", "summary.json")


def _columns(header: Sequence[str], columns: Sequence[Any]) -> tuple[list[str], list[list[Any]]]:
    return list(header), [np.asarray(c).tolist() for c in columns]


def _write_csv(path: Path, header: list[str], columns: list[list[Any]]) -> None:
    with path.open("w", newline="", encoding="utf-8") as fh:
        writer = csv.writer(fh)
        writer.writerow(header)
        # zip over whole columns keeps the per-row work inside C (csv, zip).
        writer.writerows(zip(*columns, strict=True))


def _node_table(results: Results) -> tuple[list[str], list[list[Any]]]:
    model = results.model
    header = ["node", "x [m]", "y [m]", "z [m]"]
    cols: list[Any] = [np.arange(model.n_nodes), *model.nodes.T]
    for name, res in results.items():
        header += [f"{name}: u{a} [m]" for a in "xyz"] + [f"{name}: R{a} [N]" for a in "xyz"]
        cols += [*res.displacements.T, *res.reactions.T]
    return _columns(header, cols)


def _member_table(results: Results) -> tuple[list[str], list[list[Any]]]:
    model = results.model
    header = ["member", "node_i", "node_j", "group", "length [m]", "area [m2]", "E [Pa]"]
    cols: list[Any] = [
        np.arange(model.n_members),
        model.members[:, 0],
        model.members[:, 1],
        member_group_labels(model),
        model.lengths,
        model.area,
        model.E,
    ]
    for name, res in results.items():
        header += [f"{name}: N [N]", f"{name}: stress [Pa]"]
        cols += [res.axial_forces, res.stress]
    return _columns(header, cols)


def _reaction_table(results: Results) -> tuple[list[str], list[list[Any]]]:
    model = results.model
    held = supported_nodes(model)
    header = ["node", "x [m]", "y [m]", "z [m]", "restrained"]
    fixed = np.where(model.restraint[held], np.array(list("xyz"), dtype=object), "")
    restrained = fixed[:, 0] + fixed[:, 1] + fixed[:, 2]
    cols: list[Any] = [held, *model.nodes[held].T, restrained]
    for name, res in results.items():
        header += [f"{name}: R{a} [N]" for a in "xyz"]
        cols += [*res.reactions[held].T]
    return _columns(header, cols)


def _temp_name(final: Path) -> Path:
    return final.with_name(f".{final.name}.{os.getpid()}-{uuid.uuid4().hex[:12]}.tmp")


def _commit(pairs: Iterable[tuple[Path, Path]]) -> None:
    for tmp, final in pairs:
        os.replace(tmp, final)


def write(
    folder: str | os.PathLike[str],
    results: Results,
    *,
    prefix: str = "",
    extra: Mapping[str, Any] | None = None,
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
        replace a key of :func:`spaceframe.summary.summary`.

    Returns
    -------
    list of Path
        ``nodes.csv``, ``members.csv``, ``reactions.csv``, ``summary.json``
        (with the prefix), in that order.

    Raises
    ------
    ModelError
        If there are no results, ``prefix`` holds a path separator or
        ``extra`` would replace a summary key.

    Notes
    -----
    All four files are written under temporary names first and renamed
    only when all are complete; a failure leaves earlier tables untouched.
    """
    out = Path(folder)
    if Path(prefix).name != prefix and prefix:
        raise ModelError(f"tables in {out}: prefix {prefix!r} must not contain a folder")
    if len(results) == 0:
        raise ModelError(f"tables in {out}: there are no load cases or combinations to write")
    data = summary(results)
    clash = sorted(set(extra or {}) & set(data))
    if clash:
        raise ModelError(f"tables in {out}: extra summary key {clash[0]!r} is already a "
                         "summary entry")
    data.update(extra or {})
    out.mkdir(parents=True, exist_ok=True)
    finals = [out / f"{prefix}{name}" for name in FILES]
    pairs = [(_temp_name(f), f) for f in finals]
    try:
        for (tmp, _), build in zip(
            pairs, (_node_table, _member_table, _reaction_table), strict=False
        ):
            header, cols = build(results)
            _write_csv(tmp, header, cols)
        # allow_nan=False: a NaN would make the file unreadable as strict JSON.
        pairs[3][0].write_text(json.dumps(data, indent=2, allow_nan=False) + "\n", encoding="utf-8")
        _commit(pairs)
    finally:
        for tmp, _ in pairs:
            tmp.unlink(missing_ok=True)
    return finals


def write_envelopes(
    folder: str | os.PathLike[str], results: Results, envelopes: Mapping[str, Envelope]
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
    header = ["member", "node_i", "node_j", "group", "length [m]"]
    cols: list[Any] = [np.arange(model.n_members), model.members[:, 0], model.members[:, 1],
                       member_group_labels(model), model.lengths]
    for name, env in envelopes.items():
        header += [f"{name}: N max [N]", f"{name}: N min [N]",
                   f"{name}: stress max [Pa]", f"{name}: stress min [Pa]"]
        cols += [env.axial_max, env.axial_min, env.axial_max / model.area,
                 env.axial_min / model.area]
    final = Path(folder) / "envelopes.csv"
    tmp = _temp_name(final)
    try:
        _write_csv(tmp, *_columns(header, cols))
        _commit([(tmp, final)])
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
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
