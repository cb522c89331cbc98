"""Option checks every reader shares: the path, unknown options, heal switches, layer filters."""

from __future__ import annotations

import os
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from spaceframe.errors import ReadError

__all__ = [
    "HEAL_OPTIONS",
    "ReadSettings",
    "check_options",
    "check_path",
    "layer_filter",
    "read_settings",
]


#: Healing switches a reader passes through to :func:`spaceframe.geometry.heal`.
HEAL_OPTIONS = frozenset(
    {
        "merge_nodes",
        "split_at_nodes",
        "split_crossings",
        "remove_zero_length",
        "remove_duplicates",
        "drop_unused_nodes",
    }
)


def check_path(path: str | os.PathLike[str]) -> Path:
    """The path as a Path, or ReadError if there is no readable file there."""
    p = Path(path)
    if not p.exists():
        raise ReadError(f"{p}: no such file")
    if not p.is_file():
        raise ReadError(f"{p}: is not a file")
    if not os.access(p, os.R_OK):
        raise ReadError(f"{p}: permission denied")
    return p


def check_options(where: str, options: Mapping[str, Any], allowed: Iterable[str]) -> None:
    """ReadError naming the first option not in ``allowed`` (or not a bool heal switch)."""
    allowed_set = set(allowed)
    for key, value in options.items():
        if key not in allowed_set:
            names = ", ".join(sorted(allowed_set))
            raise ReadError(f"{where}: unknown option {key!r} (options here: {names})")
        if key in HEAL_OPTIONS and not isinstance(value, bool | np.bool_):
            raise ReadError(f"{where}: option {key}={value!r} must be True or False")


def layer_filter(
    where: str, include: Iterable[str] | str | None, exclude: Iterable[str] | str | None
) -> Callable[[str], bool]:
    """Case-insensitive test of a layer (or set) name against include/exclude lists."""

    def names(value: Iterable[str] | str | None, what: str) -> set[str] | None:
        if value is None:
            return None
        items = [value] if isinstance(value, str) else list(value)
        for item in items:
            if not isinstance(item, str):
                raise ReadError(f"{where}: {what} must hold names, got {item!r}")
        return {item.lower() for item in items}

    inc = names(include, "layers")
    exc = names(exclude, "exclude_layers")

    def keep(name: str) -> bool:
        low = name.lower()
        return (inc is None or low in inc) and (exc is None or low not in exc)

    return keep


@dataclass(frozen=True)
class ReadSettings:
    """What every reader is told besides its own options, checked.

    Attributes
    ----------
    path : Path
        The file, known to be readable.
    where : str
        The file name for messages.
    tolerance : float or None
        Healing tolerance in metres (None: GEOMETRY_TOLERANCE).
    heal : bool
        Heal the raw geometry.
    heal_options : dict of str to bool
        Heal step switches.
    edges_as_members : bool
        Also make members of face edges.
    """

    path: Path
    where: str
    tolerance: float | None
    heal: bool
    heal_options: Mapping[str, bool]
    edges_as_members: bool


def read_settings(
    path: str | os.PathLike[str],
    *,
    tolerance: float | None,
    heal: bool,
    edges_as_members: bool,
    heal_options: Mapping[str, Any],
) -> ReadSettings:
    """Check the path and the heal switches of a read; ReadError on the first problem."""
    p = check_path(path)
    where = str(p)
    check_options(where, heal_options, HEAL_OPTIONS)
    return ReadSettings(p, where, tolerance, heal, dict(heal_options), edges_as_members)
