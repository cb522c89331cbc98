"""What every reader and writer shares: file units, atomic writes and the read report.

A format module turns its file into a :class:`RawGeometry` (points in file
units, straight segments, faces, markers, sets keyed by "owner" = the source
entity or cell; in ``_raw``) and hands it to :func:`build_model` (in
``_build``), which converts units, heals, carries groups, node sets and
panels through healing, and fills the Model and its ``meta``.  Option checks
are in ``_options``.  The length-unit table and the pint registry are
:mod:`spaceframe.units`'; this module adds the file side (:class:`Units`,
``$INSUNITS`` codes and their messages).  Nothing here imports a file-format
library.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from spaceframe.errors import ReadError, WriteError
from spaceframe.files import atomic_write
from spaceframe.io._build import build_model
from spaceframe.io._options import HEAL_OPTIONS, check_options, check_path, layer_filter
from spaceframe.io._raw import RawGeometry, count_ignored, describe_ignored, require_members
from spaceframe.model import Model
from spaceframe.units import INSUNITS, UNIT_CODES, length_unit

__all__ = [
    "HEAL_OPTIONS",
    "INSUNITS",
    "UNIT_CODES",
    "RawGeometry",
    "Units",
    "WriteError",
    "atomic_write",
    "build_model",
    "check_options",
    "check_path",
    "count_ignored",
    "describe_ignored",
    "insunits_code",
    "layer_filter",
    "parse_units",
    "read_report",
    "require_members",
    "units_from_insunits",
]


# ---------------------------------------------------------------------------
# Units
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Units:
    """Length unit of a file.

    Attributes
    ----------
    name : str
        Unit name as shown to the user ("mm", "inch", ...).
    scale : float
        Metres per file unit.
    source : str
        Where it came from: "$INSUNITS = 4", "units= option", "assumed".
    """

    name: str
    scale: float
    source: str

    def as_dict(self) -> dict[str, Any]:
        """The form stored in ``model.meta["units"]``."""
        return {"name": self.name, "scale": self.scale, "source": self.source}


def parse_units(units: str, *, where: str) -> tuple[str, float]:
    """Name and metres per unit of a length unit given by name.

    Parameters
    ----------
    units : str
        "mm", "m", "inch", "ft", any name of :data:`INSUNITS`, a common
        spelling ("millimetre", "feet"), or any length unit pint knows.
    where : str
        Prefix for error messages (the file being read or written).

    Returns
    -------
    name : str
    scale : float
        Metres per unit.

    Raises
    ------
    ReadError
        If the name is not a known length unit.
    """
    if not isinstance(units, str) or not units.strip():
        raise ReadError(f"{where}: units must be a unit name such as 'mm' or 'm', got {units!r}")
    found = length_unit(units.strip())
    if found is None:
        known = ", ".join(n for n, _ in INSUNITS.values())
        raise ReadError(
            f"{where}: units={units!r} is not a known length unit (use one of {known}, "
            "or any length unit name pint understands)"
        )
    return found


def units_from_insunits(code: Any, *, where: str) -> Units | None:
    """Units for a ``$INSUNITS`` value; None for 0 (unitless).

    Raises
    ------
    ReadError
        If the value is not one of the codes of :data:`INSUNITS`.
    """
    try:
        icode = int(code)
    except (TypeError, ValueError):
        raise ReadError(f"{where}: header $INSUNITS = {code!r} is not an integer") from None
    if icode == 0:
        return None
    if icode not in INSUNITS:
        raise ReadError(
            f"{where}: header $INSUNITS = {icode} is not a known unit code (0..{max(INSUNITS)})"
        )
    name, scale = INSUNITS[icode]
    return Units(name, scale, f"$INSUNITS = {icode}")


def insunits_code(units: str, *, where: str) -> tuple[int, float]:
    """``$INSUNITS`` code and metres per unit for a unit name (for writers).

    Raises
    ------
    WriteError
        If the unit has no ``$INSUNITS`` code.
    """
    try:
        name, scale = parse_units(units, where=where)
    except ReadError as exc:
        raise WriteError(str(exc)) from None
    if name in UNIT_CODES:
        return UNIT_CODES[name], scale
    for code, (_, s) in INSUNITS.items():
        if math.isclose(s, scale, rel_tol=1e-12):
            return code, s
    raise WriteError(f"{where}: units={units!r} has no DXF $INSUNITS code")


# ---------------------------------------------------------------------------
# Writing
# ---------------------------------------------------------------------------


# ---------------------------------------------------------------------------
# Report
# ---------------------------------------------------------------------------


def read_report(model: Model) -> str:
    """Plain-text account of how a model was read: units, extents, counts, ignored, healing.

    Parameters
    ----------
    model : Model
        A model returned by :func:`spaceframe.io.read`.

    Returns
    -------
    str
        Several lines; extents are given in metres and in file units so that
        a millimetre/metre slip shows at a glance.
    """
    meta = model.meta
    units = meta.get("units", {"name": "m", "scale": 1.0, "source": "assumed"})
    scale, uname = float(units["scale"]), str(units["name"])
    lines = [f"Read {meta.get('source', '(not from a file)')}"]
    lines.append(f"  units: {uname} ({units.get('source', '')}), 1 {uname} = {scale:.6g} m")
    lo, hi = model.extents()
    span = hi - lo
    axes = ", ".join(
        f"{a} {lo[i]:.6g}..{hi[i]:.6g} m ({lo[i] / scale:.6g}..{hi[i] / scale:.6g} {uname})"
        for i, a in enumerate("xyz")
    )
    lines.append(f"  extents: {axes}")
    lines.append(f"  size: {span[0]:.6g} x {span[1]:.6g} x {span[2]:.6g} m")
    lines.append(
        f"  {model.n_nodes} nodes, {model.n_members} members, {len(model.groups)} groups, "
        f"{len(model.node_sets)} node sets, {model.n_panels} panels, "
        f"{model.markers.shape[0]} markers"
    )
    if model.groups:
        shown = ", ".join(f"{k!r} ({v.size})" for k, v in list(model.groups.items())[:20])
        more = ", ..." if len(model.groups) > 20 else ""
        lines.append(f"  groups: {shown}{more}")
    ignored = meta.get("io:ignored") or {}
    if ignored:
        lines.append("  ignored: " + describe_ignored(ignored, ignored))
    if meta.get("dxf:streamed"):
        lines.append(f"  {meta['dxf:streamed']}")
    recover = meta.get("dxf:recover")
    if recover:
        lines.append(
            f"  damaged file, read by ezdxf.recover ({recover['reason']}); "
            f"{len(recover['fixes'])} fixes, {len(recover['errors'])} unfixed errors"
        )
        lines += [f"    fixed: {text}" for text in recover["fixes"][:10]]
        lines += [f"    error: {text}" for text in recover["errors"][:10]]
    mid = meta.get("mesh:mid_member_nodes")
    if mid:
        verb = "merged away" if mid.get("merged") else "found (merge_mid_nodes=True merges them)"
        lines.append(f"  mid-member nodes: {mid['count']} {verb}")
    dropped = meta.get("io:dropped_panels")
    if dropped:
        lines.append(f"  panels dropped: {dropped['count']}")
    report = meta.get("heal:report")
    if report is not None:
        lines += ["  " + line for line in report.format(scale, uname).splitlines()]
    return "\n".join(lines)
