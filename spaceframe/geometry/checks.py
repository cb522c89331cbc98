"""Input checks of raw geometry: arrays, ids, tolerance and coordinate range."""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike

from spaceframe.errors import ModelError
from spaceframe.geometry._types import FloatArray, IntArray
from spaceframe.geometry.reports import _fmt_length, _positive_float
from spaceframe.tolerances import GEOMETRY_TOLERANCE


def _as_nodes(nodes: ArrayLike) -> FloatArray:
    try:
        arr = np.asarray(nodes, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise ModelError(f"nodes must be an (n, 3) array of numbers: {exc}") from None
    if arr.ndim != 2 or arr.shape[1] != 3:
        raise ModelError(f"nodes must have shape (n, 3); got shape {arr.shape}")
    bad = np.flatnonzero(~np.isfinite(arr).all(axis=1))
    if bad.size:
        i = int(bad[0])
        raise ModelError(
            f"node {i} has non-finite coordinates {arr[i].tolist()} "
            f"({bad.size} node(s) with non-finite coordinates)"
        )
    return arr


def _as_int_array(values: ArrayLike, what: str) -> IntArray:
    """Integer array from ints or integral floats, else ModelError naming the index."""
    arr = np.asarray(values)
    if arr.dtype.kind in "iu":
        return arr.astype(np.int64, copy=False)
    if arr.dtype.kind == "f":
        flat = arr.reshape(-1)
        ok = np.isfinite(flat) & (flat == np.round(flat))
        if not ok.all():
            j = int(np.flatnonzero(~ok)[0])
            idx = np.unravel_index(j, arr.shape)
            where = idx[0] if len(idx) else j
            raise ModelError(
                f"{what} must be integer ids; {what}[{where}] has value {float(flat[j])!r}"
            )
        return arr.astype(np.int64)
    if arr.size == 0 and arr.dtype.kind == "O":
        return np.zeros(arr.shape, dtype=np.int64)
    raise ModelError(f"{what} must be integer ids; got an array of dtype {arr.dtype}")


def _as_members(members: ArrayLike, n_nodes: int) -> IntArray:
    arr = np.asarray(members)
    if arr.ndim == 1 and arr.size == 0:
        arr = arr.reshape(0, 2)
    if arr.ndim != 2 or arr.shape[1] != 2:
        raise ModelError(f"members must have shape (b, 2); got shape {arr.shape}")
    ids = _as_int_array(arr, "members")
    bad = np.flatnonzero(((ids < 0) | (ids >= n_nodes)).any(axis=1))
    if bad.size:
        i = int(bad[0])
        raise ModelError(
            f"member {i} has node ids {ids[i].tolist()}, outside 0..{n_nodes - 1} "
            f"({bad.size} member(s) out of range)"
        )
    return ids


def _as_ids(values: ArrayLike, upper: int, what: str) -> IntArray:
    """1-D ids in ``0..upper-1`` (``upper < 0``: no upper check)."""
    arr = np.asarray(values)
    if arr.ndim == 0:
        arr = arr.reshape(1)
    if arr.ndim != 1:
        raise ModelError(f"{what} must be a 1-D array of ids; got shape {arr.shape}")
    ids = _as_int_array(arr, what)
    bad = ids < 0
    if upper >= 0:
        bad |= ids >= upper
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        limit = f"0..{upper - 1}" if upper >= 0 else "0 or more"
        raise ModelError(f"{what}[{i}] = {int(ids[i])} is outside {limit}")
    return ids


def _check_tolerance(tolerance: float, what: str = "tolerance") -> float:
    return _positive_float(tolerance, f"{what} must be a number", f"{what} must be finite and > 0")


#: Float64 coordinates carry a round-off of about ``eps * |x|``; healing
#: needs it to be this many times smaller than the tolerance, or distances
#: compared with the tolerance are round-off (and squared distances in the
#: k-d tree overflow long before the coordinates do).
_RESOLUTION = 1.0e3


def _check_resolution(nodes: FloatArray, tol: float) -> None:
    """ModelError when coordinates are too large to resolve the tolerance."""
    if len(nodes) == 0:
        return
    big = float(np.abs(nodes).max())
    with np.errstate(over="ignore", invalid="ignore"):
        span = float(np.max(nodes.max(axis=0) - nodes.min(axis=0)))
    limit = tol / (_RESOLUTION * float(np.finfo(np.float64).eps))
    if not (math.isfinite(span) and big <= limit):
        raise ModelError(
            f"coordinates reach {big:.3g} m (the frame is {span:.3g} m across): at that size "
            f"a tolerance of {_fmt_length(tol)} cannot be resolved (coordinates must stay "
            f"within {limit:.3g} m of the origin): are the units right?"
        )


def check_coordinate_range(nodes: ArrayLike, tolerance: float = GEOMETRY_TOLERANCE) -> None:
    """Refuse coordinates too large for ``tolerance`` (m) to be resolved in float64.

    Raises
    ------
    ModelError
        When some coordinate exceeds ``tolerance / (1000 eps)`` (4.5e9 m at
        1 mm) or the frame's extent is not finite, naming both.
    """
    _check_resolution(_as_nodes(nodes), _check_tolerance(tolerance))
