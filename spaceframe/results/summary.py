"""Figures drawn from a set of results, shared by the writers, the viewer and the report.

Everything here is a pure function of a :class:`~spaceframe.results.Results`
(or of a Model and arrays) and returns plain numbers, lists and dicts, so the
same figures appear in the JSON summary, the HTML report, the CSV tables and
on the command line.  Values are SI (m, N, Pa, kg); conversion to display
units happens in the modules that print them.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.tolerances import BALANCE_TOLERANCE, RESIDUAL_TOLERANCE

if TYPE_CHECKING:
    from spaceframe.model import Model
    from spaceframe.results import CaseResult, Results

__all__ = [
    "DEFORMED_FRACTION",
    "SCHEMA",
    "UNITS",
    "auto_scale",
    "case_summary",
    "critical_members",
    "format_number",
    "member_group_index",
    "member_group_labels",
    "panel_group_index",
    "plural",
    "summary",
    "support_counts",
    "supported_nodes",
    "supports_text",
]

#: Version tag of the dictionary returned by :func:`summary`; bump it when a
#: key is renamed or removed so that scripts reading the JSON can tell.
SCHEMA = "spaceframe-summary/1"

#: Units of every value in :func:`summary` (SI throughout).
UNITS = {
    "length": "m",
    "displacement": "m",
    "force": "N",
    "stress": "Pa",
    "mass": "kg",
}

#: Fraction of the model size at which the largest displacement is drawn by
#: default.  Common practice: a few per cent makes the shape readable without
#: members visibly crossing each other.
DEFORMED_FRACTION = 0.05


def auto_scale(
    model: Model, displacements: np.ndarray, fraction: float = DEFORMED_FRACTION
) -> float:
    """Scale factor that draws the largest displacement at ``fraction`` of the model size.

    Parameters
    ----------
    model : Model
        Supplies the size (diagonal of the bounding box of the nodes).
    displacements : (n, 3) float
        Nodal displacements, m.
    fraction : float
        Target length of the largest drawn displacement, as a fraction of the size.

    Returns
    -------
    scale : float
        Multiplier for the displacements; 1.0 when nothing moves.
    """
    u = np.asarray(displacements, dtype=float).reshape(-1, 3)
    biggest = float(np.sqrt(np.einsum("ij,ij->i", u, u)).max(initial=0.0))
    if biggest <= 0.0 or not np.isfinite(biggest):
        return 1.0
    return fraction * model.size / biggest


def format_number(value: float, sig: int = 4) -> str:
    """Fixed-point text with about ``sig`` significant figures and no exponent.

    Examples
    --------
    >>> format_number(12.3456), format_number(-0.0123456), format_number(123456.7)
    ('12.35', '-0.01235', '123457')
    """
    v = float(value)
    if not np.isfinite(v):
        return str(v)
    if v == 0.0:
        return "0"
    magnitude = int(np.floor(np.log10(abs(v))))
    decimals = min(max(0, sig - 1 - magnitude), 9)
    text = f"{v:.{decimals}f}"
    # A value that rounds to zero prints as plain 0, never "-0.000000".
    return "0" if float(text) == 0.0 else text


def member_group_index(model: Model) -> tuple[np.ndarray, list[str]]:
    """One integer group id per member, for colouring and cell data.

    A member in several groups takes the first of them in the order of
    ``model.groups``; a member in none gets -1.

    Returns
    -------
    index : (b,) int32
        Position in ``names`` of each member's group, or -1.
    names : list of str
        Group names in the order of ``model.groups``.
    """
    names = list(model.groups)
    index = np.full(model.n_members, -1, dtype=np.int32)
    # Assign in reverse so that the first listed group wins for shared members.
    for k in range(len(names) - 1, -1, -1):
        index[model.groups[names[k]]] = k
    return index, names


def panel_group_index(model: Model) -> tuple[np.ndarray, list[str]]:
    """As :func:`member_group_index`, for load panels and ``model.panel_groups``."""
    names = list(model.panel_groups)
    index = np.full(model.n_panels, -1, dtype=np.int32)
    for k in range(len(names) - 1, -1, -1):
        index[model.panel_groups[names[k]]] = k
    return index, names


def member_group_labels(model: Model, sep: str = ";") -> np.ndarray:
    """(b,) object: names of every group of each member, joined by ``sep`` ("" for none)."""
    labels = np.full(model.n_members, "", dtype=object)
    for name, ids in model.groups.items():
        if ids.size == 0:
            continue
        current = labels[ids]
        joined = np.where(current == "", name, current + sep + name)
        labels[ids] = joined
    return labels


def supported_nodes(model: Model) -> np.ndarray:
    """(k,) int: ids of nodes with a restrained direction or a spring."""
    return np.flatnonzero(model.restraint.any(axis=1) | (model.springs > 0).any(axis=1))


def support_counts(model: Model) -> dict[str, int]:
    """Supports in numbers: nodes held (restrained or sprung), restrained and sprung directions.

    A node on a spring only is a supported node: it is held, elastically.
    """
    return {
        "supported nodes": int(supported_nodes(model).size),
        "restrained directions": int(model.restraint.sum()),
        "sprung directions": int((model.springs > 0).sum()),
    }


def plural(count: int, singular: str, plural_form: str | None = None) -> str:
    """'1 sprung direction', '2 sprung directions' (``plural_form`` for irregular words)."""
    word = singular if count == 1 else (plural_form or singular + "s")
    return f"{count} {word}"


def supports_text(counts: dict[str, int]) -> str:
    """One line from :func:`support_counts`, each count with its word in the right number.

    >>> supports_text({"supported nodes": 4, "restrained directions": 5, "sprung directions": 1})
    '4 supported nodes, 5 restrained directions, 1 sprung direction'
    """
    parts = []
    for key, n in counts.items():
        words = key[:-1] if key.endswith("s") else key
        parts.append(plural(int(n), words, key))
    return ", ".join(parts)


def _vec(a: np.ndarray) -> list[float]:
    return [float(v) for v in np.asarray(a, dtype=float).ravel()]


class _GroupsOf:
    """``model.groups_of`` by binary search in each group's sorted ids, sorted once.

    ``groups_of`` compares a member with every id of every group; a summary of
    a thousand results asks for seven members each.
    """

    def __init__(self, model: Model) -> None:
        self.sorted = {g: np.sort(np.asarray(ids, dtype=np.int64)) for g, ids in
                       model.groups.items()}

    def __call__(self, member: int) -> list[str]:
        out = []
        for g, ids in self.sorted.items():
            i = int(np.searchsorted(ids, member))
            if i < ids.size and ids[i] == member:
                out.append(g)
        return out


def _member_entry(model: Model, result: CaseResult, member: int,
                  groups_of: Any = None) -> dict[str, Any]:
    return {
        "member": int(member),
        "nodes": [int(v) for v in model.members[member]],
        "groups": (groups_of or model.groups_of)(int(member)),
        "force": float(result.axial_forces[member]),
        "stress": float(result.axial_forces[member] / model.area[member]),
        "length": float(model.lengths[member]),
    }


def critical_members(model: Model, result: CaseResult, n: int = 5, *,
                     groups_of: Any = None) -> list[dict[str, Any]]:
    """The ``n`` members with the largest absolute axial force in one result.

    Returns
    -------
    list of dict
        Keys ``member``, ``nodes``, ``groups``, ``force`` (N, tension positive),
        ``stress`` (Pa) and ``length`` (m), largest first.
    """
    return _critical(model, result, n, groups_of, np.negative(np.abs(result.axial_forces)))


def _critical(model: Model, result: CaseResult, n: int, groups_of: Any,
              neg: np.ndarray) -> list[dict[str, Any]]:
    """:func:`critical_members`, given ``neg`` = -|axial force|."""
    k = min(int(n), neg.size)
    if k <= 0:
        return []
    top = _smallest(neg, k)
    a = np.abs(result.axial_forces[top])
    # Stable order: by decreasing |N|, ties by member id; forces equal to 12
    # significant digits are ties (equal in closed form, apart in round-off).
    top = top[np.lexsort((top, -_tie_key(a, -float(neg.min()))))]
    return [_member_entry(model, result, int(i), groups_of) for i in top]


def _smallest(values: np.ndarray, k: int) -> np.ndarray:
    """The ids ``np.argpartition(values, k - 1)[:k]`` picks (in any order), 0 < k <= size.

    That partition is a pass with an id array as large as ``values``.  Here
    the candidates are those at or below the k-th smallest of every 16th
    value (a bound no lower than the k-th smallest of all); when exactly k
    values lie at or below the k-th smallest, they are the only set the
    partition can give.  A tie across the k-th place (or too many
    candidates) falls back to the partition itself, so the pick never changes.
    """
    sample = values[::16]
    if sample.size >= k:
        candidates = np.flatnonzero(values <= np.partition(sample, k - 1)[k - 1])
        if k <= candidates.size <= values.size // 8:
            v = values[candidates]
            inside = v <= np.partition(v, k - 1)[k - 1]
            if np.count_nonzero(inside) == k:
                return candidates[inside]
    return np.argpartition(values, k - 1)[:k]


def _tie_key(a: np.ndarray, peak: float | None = None) -> np.ndarray:
    """|values| rounded to 12 significant digits of the largest, for ordering with ties.

    ``peak``: the largest of all the values, when ``a`` holds some of them.
    """
    peak = float(a.max(initial=0.0)) if peak is None else peak
    if not (peak > 0 and np.isfinite(peak)):
        return a
    return np.round(a / peak, 12)


def _node_totals(f: np.ndarray) -> tuple[int, np.ndarray, float]:
    """Of an (n, 3) array: rows with a non-zero entry, the column sums, the largest |column| sum.

    Exactly ``np.count_nonzero(np.any(f != 0, axis=1))``, ``f.sum(axis=0)`` and
    ``np.abs(f).sum(axis=0).max(initial=0.0)``: when few rows are non-zero,
    of those rows only (an axis-0 sum of a row-major array adds row after
    row from +0, and a zero row changes nothing), else of every row.
    """
    nonzero = f != 0.0
    if not f.flags.c_contiguous or np.count_nonzero(nonzero) * 8 > f.size:
        return (int(np.count_nonzero(np.any(nonzero, axis=1))), f.sum(axis=0),
                float(np.abs(f).sum(axis=0).max(initial=0.0)))
    rows = np.unique(np.flatnonzero(nonzero) // f.shape[1])
    part = f[rows]
    return int(rows.size), part.sum(axis=0), float(np.abs(part).sum(axis=0).max(initial=0.0))


class _Work:
    """Arrays reused from one result's summary to the next (one per member or node)."""

    def __init__(self, model: Model) -> None:
        self.member = np.empty(model.n_members)
        self.node = np.empty(model.n_nodes)


def case_summary(model: Model, result: CaseResult, n_critical: int = 5, *,
                 groups_of: Any = None) -> dict[str, Any]:
    """The figures of one load case or combination (see :func:`summary`).

    ``groups_of``: a callable member -> group names (default ``model.groups_of``).
    """
    return _case_summary(model, result, n_critical, groups_of, _Work(model))


def _case_summary(model: Model, result: CaseResult, n_critical: int, groups_of: Any,
                  work: _Work) -> dict[str, Any]:
    """:func:`case_summary`, its per-member and per-node arrays in ``work``."""
    u = result.displacements
    mag = np.sqrt(np.einsum("ij,ij->i", u, u, out=work.node), out=work.node)
    node = int(np.argmax(mag)) if mag.size else 0
    t = result.axial_forces
    i_t = int(np.argmax(t))
    i_c = int(np.argmin(t))
    stress = np.abs(np.divide(t, model.area, out=work.member), out=work.member)
    i_s = int(np.argmax(stress))
    s_max = float(stress[i_s])
    loaded, applied, ref_f = _node_totals(result.loads)
    _, reacted, ref_r = _node_totals(result.reactions)
    imbalance = applied + reacted
    ref = max(ref_f, ref_r)
    balance_ok = bool(ref == 0.0 or np.abs(imbalance).max() <= BALANCE_TOLERANCE * ref)
    residual_ok = bool(result.residual <= RESIDUAL_TOLERANCE)
    return {
        "kind": result.kind,
        "factors": {k: float(v) for k, v in result.factors.items()},
        "loaded_nodes": loaded,
        "max_displacement": {
            "value": float(mag[node]) if mag.size else 0.0,
            "node": node,
            "position": _vec(model.nodes[node]) if mag.size else [0.0, 0.0, 0.0],
            "vector": _vec(u[node]) if mag.size else [0.0, 0.0, 0.0],
        },
        # None when no member is in tension (or in compression): a stable key
        # with a null value rather than a misleading zero-force member.
        "max_tension": _member_entry(model, result, i_t, groups_of) if t[i_t] > 0 else None,
        "max_compression": (_member_entry(model, result, i_c, groups_of) if t[i_c] < 0
                            else None),
        "max_abs_stress": {"value": s_max, "member": i_s},
        "applied_total": _vec(applied),
        "reaction_total": _vec(reacted),
        "imbalance": _vec(imbalance),
        "residual": float(result.residual),
        "equilibrium_ok": balance_ok and residual_ok,
        "critical_members": _critical(model, result, n_critical, groups_of,
                                      np.negative(np.abs(t, out=work.member), out=work.member)),
    }


def _governing(results: Results, n: int, groups_of: Any = None) -> list[dict[str, Any]]:
    model = results.model
    best = np.full(model.n_members, -1.0)
    which = np.full(model.n_members, -1, dtype=np.int64)
    a = np.empty(model.n_members)
    better = np.empty(model.n_members, dtype=bool)
    names = list(results)
    # Running maximum over results, so memory stays at two arrays of b.
    for j, name in enumerate(names):
        np.abs(results[name].axial_forces, out=a)
        np.greater(a, best, out=better)
        np.copyto(best, a, where=better)
        np.copyto(which, j, where=better)
    k = min(int(n), best.size)
    if k <= 0 or not names:
        return []
    top = _smallest(-best, k)
    top = top[np.lexsort((top, -_tie_key(best[top], float(best.max(initial=0.0)))))]
    out = []
    for i in top:
        name = names[int(which[i])]
        entry = _member_entry(model, results[name], int(i), groups_of)
        entry["result"] = name
        out.append(entry)
    return out


def summary(results: Results, n_critical: int = 5) -> dict[str, Any]:
    """JSON-able summary of a run: the model in numbers and the figures of every result.

    Parameters
    ----------
    results : Results
    n_critical : int
        How many of the most loaded members to list, per result and overall.

    Returns
    -------
    dict
        ``schema`` (:data:`SCHEMA`), ``units`` (:data:`UNITS`), ``solver``,
        ``model`` (nodes, members, supported nodes, restrained directions per
        axis, sprung nodes, panels, size, extents, total length and mass,
        groups with member count, length and mass, node sets with counts,
        case names, combinations with factors), ``results`` (name -> the
        dict of :func:`case_summary`: kind, factors, loaded nodes,
        max displacement with node, position and vector, max tension and max
        compression with member, nodes, groups, force, stress and length (or
        None), max absolute stress, applied and reaction totals, imbalance,
        residual, equilibrium_ok, critical members) and ``critical_members``
        (the members with the largest force over all results, each with the
        governing ``result``).  All values SI, tension positive.
    """
    model = results.model
    groups_of = _GroupsOf(model)
    work = _Work(model)
    lo, hi = model.extents()
    lengths = model.lengths
    mass = model.mass
    groups = {
        name: {
            "members": int(ids.size),
            "length": float(lengths[ids].sum()),
            "mass": float(mass[ids].sum()),
        }
        for name, ids in model.groups.items()
    }
    model_part = {
        "nodes": model.n_nodes,
        "members": model.n_members,
        "supported_nodes": int(supported_nodes(model).size),
        "restrained_directions": {
            axis: int(model.restraint[:, j].sum()) for j, axis in enumerate("xyz")
        },
        "sprung_nodes": int(np.count_nonzero((model.springs > 0).any(axis=1))),
        "panels": model.n_panels,
        "size": float(model.size),
        "extents": {"min": _vec(lo), "max": _vec(hi)},
        "total_length": float(lengths.sum()),
        "total_mass": float(mass.sum()),
        "groups": groups,
        "node_sets": {name: int(ids.size) for name, ids in model.node_sets.items()},
        "cases": list(model.cases),
        "combinations": {
            name: {k: float(v) for k, v in f.items()} for name, f in model.combinations.items()
        },
    }
    return {
        "schema": SCHEMA,
        "units": dict(UNITS),
        "solver": results.solver,
        "model": model_part,
        "results": {
            name: _case_summary(model, results[name], n_critical, groups_of, work)
            for name in results
        },
        "critical_members": _governing(results, n_critical, groups_of),
    }
