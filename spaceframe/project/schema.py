"""The model file's table reader: key paths, typed getters, numbers, quantities and id lists.

Every reader of the model file (this package's ``parse``, ``loads``, ``selectors``,
``design`` and ``analysis``) goes through :class:`_Ctx` and :class:`_Table`, so every
problem raises :class:`~spaceframe.errors.ProjectError` naming the file, the key path
(e.g. ``loads.snow.area[0].value``) and the offending value.
"""

from __future__ import annotations

import difflib
import math
import re
from collections.abc import Callable
from pathlib import Path
from typing import Any, NoReturn, TypeVar

import numpy as np

from spaceframe.errors import ModelError, ProjectError
from spaceframe.units import InputUnits

_MISSING: Any = object()
_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def _key(path: str, key: str | int) -> str:
    if isinstance(key, int):
        return f"{path}[{key}]"
    k = key if _BARE_KEY.match(key) else '"' + key.replace('"', '\\"') + '"'
    return f"{path}.{k}" if path else k


def _show(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


class _Ctx:
    """What every reader needs: the file (for messages), units, warnings."""

    def __init__(self, path: Path) -> None:
        self.path = path
        self.units = InputUnits()
        self.warnings: list[str] = []
        #: Design data of sections (buckling curve, fabrication, breaking force) by name.
        self.section_extras: dict[str, dict[str, Any]] = {}

    def fail(self, where: str, value: Any, problem: str) -> NoReturn:
        if value is _MISSING:
            raise ProjectError(f"{self.path.name}: {where}: {problem}")
        raise ProjectError(f"{self.path.name}: {where} = {_show(value)}: {problem}")

    def warn(self, message: str) -> None:
        self.warnings.append(f"{self.path.name}: {message}")


class _Table:
    """A TOML table being read: typed getters that know their key path; unknown keys rejected."""

    def __init__(self, ctx: _Ctx, data: Any, where: str) -> None:
        if not isinstance(data, dict):
            ctx.fail(where or "(top level)", data, "expected a table")
        self.ctx = ctx
        self.data: dict[str, Any] = data
        self.where = where
        self.used: set[str] = set()

    def path(self, key: str | int) -> str:
        return _key(self.where, key)

    def has(self, key: str) -> bool:
        """Whether ``key`` is given; it counts as known either way (for did-you-mean)."""
        self.used.add(key)
        return key in self.data

    def raw(self, key: str, default: Any = _MISSING) -> Any:
        self.used.add(key)
        if key in self.data:
            return self.data[key]
        if default is _MISSING:
            # A misspelt key is the likeliest reason a required one is missing.
            spare = [k for k in self.data if k not in self.used]
            close = difflib.get_close_matches(key, spare, n=1, cutoff=0.6)
            if close:
                self.ctx.fail(self.path(close[0]), self.data[close[0]],
                              f"unknown key; did you mean {key!r}?")
            self.ctx.fail(self.path(key), _MISSING, "missing required key")
        return default

    def expect(self, allowed: set[str]) -> None:
        """Reject unknown keys now, before reading, so a typo is named as such."""
        self.used |= allowed
        self.done(allowed)

    def done(self, allowed: set[str] | None = None) -> None:
        """Reject keys that were not read (or are not in ``allowed``), with a did-you-mean."""
        known = self.used if allowed is None else allowed
        for key, value in self.data.items():
            if key not in known:
                choices = sorted(known)
                close = difflib.get_close_matches(key, choices, n=3, cutoff=0.6)
                hint = f"did you mean {' or '.join(repr(c) for c in close)}? " if close else ""
                self.ctx.fail(
                    self.path(key), value,
                    f"unknown key; {hint}(allowed here: {', '.join(choices) or 'none'})",
                )

    # ------------------------------------------------------------- getters
    def table(self, key: str, default: Any = _MISSING) -> _Table | None:
        value = self.raw(key, None if default is not _MISSING else _MISSING)
        if value is None:
            return None
        return _Table(self.ctx, value, self.path(key))

    def sub(self, key: str) -> _Table:
        """A required sub-table."""
        return _Table(self.ctx, self.raw(key), self.path(key))

    def text(self, key: str, default: Any = _MISSING, choices: tuple[str, ...] = ()) -> Any:
        value = self.raw(key, default)
        if value is default and default is not _MISSING:
            return value
        if not isinstance(value, str):
            self.ctx.fail(self.path(key), value, "expected a string")
        if choices and value not in choices:
            close = difflib.get_close_matches(value, choices, n=1)
            hint = f"did you mean {close[0]!r}? " if close else ""
            self.ctx.fail(self.path(key), value, f"{hint}expected one of {', '.join(choices)}")
        return value

    def flag(self, key: str, default: bool) -> bool:
        value = self.raw(key, default)
        if not isinstance(value, bool):
            self.ctx.fail(self.path(key), value, "expected true or false")
        return value

    def number(self, key: str, default: Any = _MISSING) -> Any:
        value = self.raw(key, default)
        if value is default and default is not _MISSING:
            return value
        return _plain_number(self.ctx, self.path(key), value)

    def quantity(self, key: str, role: str, default: Any = _MISSING) -> Any:
        value = self.raw(key, default)
        if value is default and default is not _MISSING:
            return value
        return _quantity(self.ctx, self.path(key), value, role)

    def vector(self, key: str, role: str, default: Any = _MISSING) -> Any:
        value = self.raw(key, default)
        if value is default and default is not _MISSING:
            return value
        return _vector(self.ctx, self.path(key), value, role)


_T = TypeVar("_T")


def _named_tables(t: _Table | None, read: Callable[[_Ctx, str, _Table], _T]) -> dict[str, _T]:
    """Each sub-table of ``t`` read by ``read(ctx, name, table)``, by name (none without ``t``)."""
    return {} if t is None else {name: read(t.ctx, name, t.sub(name)) for name in t.data}


def _plain_number(ctx: _Ctx, where: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float):
        ctx.fail(where, value, "expected a number")
    if not math.isfinite(value):
        ctx.fail(where, value, "expected a finite number")
    return float(value)


def _quantity(ctx: _Ctx, where: str, value: Any, role: str) -> float:
    try:
        return ctx.units.to_si(value, role)
    except ModelError as exc:
        ctx.fail(where, value, str(exc))


def _vector(ctx: _Ctx, where: str, value: Any, role: str) -> np.ndarray:
    if not isinstance(value, list) or len(value) != 3:
        ctx.fail(where, value, "expected a list of 3 components [x, y, z]")
    return np.array([_quantity(ctx, _key(where, i), v, role) for i, v in enumerate(value)])


def _names(ctx: _Ctx, where: str, value: Any) -> tuple[str, ...]:
    items = [value] if isinstance(value, str) else value
    if not isinstance(items, list) or not items or not all(isinstance(v, str) for v in items):
        ctx.fail(where, value, "expected a name or a non-empty list of names")
    return tuple(items)


def _id_list(ctx: _Ctx, where: str, value: Any) -> np.ndarray:
    if not isinstance(value, list) or not all(
        isinstance(v, int) and not isinstance(v, bool) for v in value
    ):
        ctx.fail(where, value, "expected a list of integer ids")
    arr = np.asarray(value, dtype=np.int64)
    neg = np.flatnonzero(arr < 0)
    if neg.size:
        ctx.fail(_key(where, int(neg[0])), int(arr[neg[0]]), "ids start at 0")
    return arr

