"""The governing axial check of every member over many results (EN 1993-1-1, see ``steel``).

:func:`check_results` reads each result's forces once and keeps per member
only what decides the outcome: the largest utilisation, the first result
that reaches it, that result's forces, and whether some result has the
member's tension or its compression check governing.  One check of
:mod:`~spaceframe.design.steel` per result is made only when asked for
(``GoverningCheck.checks[name]``), never for every result at once.

Why the outcome is the one of checking every result in turn: a check works
member by member, with resistances that do not depend on the result.  For
a case or combination with force f (tension positive) and resistances
R_t, R_c > 0 the check's utilisation is f / R_t for f > 0, (-f) / R_c for
f < 0 and 0 for f = 0, which is max(f / R_t, f / (-R_c)) exactly (IEEE
division is symmetric in sign), and its compression check governs exactly
where f < 0.  So that maximum is compared from one result to the next
(strictly greater replaces: the first result wins ties, as argmax), and the
check itself, made once on each member's forces of its governing result,
gives the utilisation, codes, demand and resistance bit for bit.  Envelopes,
and models with a resistance that is not positive, go through the full
check per result (still without keeping it); an error, or a force that is
not finite, repeats the scan that way, so that the first result at fault
raises what it always raised.
"""

from __future__ import annotations

from collections import OrderedDict
from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from types import SimpleNamespace
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.design.steel import (
    _NOT_CHECKED,
    MemberCheck,
    _check,
    _forces_of,
    _Resistances,
    _resistances,
    _scratch,
)
from spaceframe.errors import ModelError

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["GoverningCheck", "check_results"]


class _Checks(Mapping[str, MemberCheck]):
    """Result name → :class:`MemberCheck`, each made from its result's forces when read.

    The last few read are kept, so that reading several attributes of one
    check costs one check; never every result's.
    """

    KEEP = 4

    def __init__(self, model: Model, results: Any, names: list[str], r: _Resistances) -> None:
        self._model, self._results, self._r = model, results, r
        self._names = list(dict.fromkeys(names))
        self._known = set(self._names)
        self._kept: OrderedDict[str, MemberCheck] = OrderedDict()

    def __getitem__(self, name: str) -> MemberCheck:
        if name not in self._known:
            raise KeyError(name)
        c = self._kept.pop(name, None)
        if c is None:
            c = _check(self._model, self._results[name], self._r)
        self._kept[name] = c
        if len(self._kept) > self.KEEP:
            self._kept.popitem(last=False)
        return c

    def __contains__(self, name: object) -> bool:
        return name in self._known

    def __iter__(self) -> Iterator[str]:
        return iter(self._names)

    def __len__(self) -> int:
        return len(self._names)

    def __repr__(self) -> str:
        return f"<checks of {len(self._names)} results, made when read>"


@dataclass
class GoverningCheck:
    """The worst of several results per member.

    Attributes
    ----------
    names : list of str
        The results checked, in order.
    utilisation : (b,) float
        Largest utilisation over the results.
    result_index : (b,) int
        Index into ``names`` of the governing result (the first of equals).
    checks : Mapping
        Result name → :class:`MemberCheck` (from :func:`check_results`:
        made from that result's forces when read).
    worst : MemberCheck or None
        Every member checked under its own governing result: its
        ``utilisation`` is ``utilisation``, its codes, demand and resistance
        those of the governing result.
    in_tension, in_compression : (b,) bool or None
        Some result has the member's tension check (or no force), or its
        compression check, governing.  When None (a check made by hand),
        ``passes``, ``unchecked`` and ``too_slender`` go through ``checks``.
    """

    names: list[str]
    utilisation: np.ndarray
    result_index: np.ndarray
    checks: Mapping[str, MemberCheck]
    worst: MemberCheck | None = field(default=None, repr=False)
    in_tension: np.ndarray | None = field(default=None, repr=False)
    in_compression: np.ndarray | None = field(default=None, repr=False)

    def _sides(self) -> tuple[np.ndarray, np.ndarray, _Resistances | None]:
        """(in_tension, in_compression, resistances), from ``checks`` when not kept."""
        some = self.worst if self.worst is not None else next(iter(self.checks.values()), None)
        r = None if some is None else some._r
        if self.in_tension is not None and self.in_compression is not None:
            return self.in_tension, self.in_compression, r
        t = np.zeros(self.utilisation.shape, dtype=bool)
        c = np.zeros_like(t)
        for chk in self.checks.values():
            comp = chk._compression()
            c |= comp
            t |= ~comp
        return t, c, r

    @property
    def passes(self) -> np.ndarray:
        """(b,) bool: every check of every result passed."""
        t, c, r = self._sides()
        ok = self.utilisation <= 1.0
        if r is not None:
            ok &= ~(t & r.fails_t) & ~(c & r.fails_c)
        return ok

    @property
    def unchecked(self) -> np.ndarray:
        """(b,) bool: in compression with buckling not checked, in some result."""
        _, c, r = self._sides()
        return c & (r.comp_code == _NOT_CHECKED) if r is not None else np.zeros_like(c)

    @property
    def too_slender(self) -> np.ndarray:
        """(b,) bool: λ above its limit for the governing sign, in some result."""
        t, c, r = self._sides()
        if r is None:
            return np.zeros_like(t)
        return (t & r.too_slender_t) | (c & r.too_slender_c)

    @property
    def failing(self) -> np.ndarray:
        """Member ids that fail a check in any result."""
        return np.flatnonzero(~self.passes)

    def governing_result(self, member: int) -> str:
        """Name of the result that governs one member."""
        return self.names[int(self.result_index[member])]

    def governing_check(self, member: int) -> str:
        """The governing check of one member, in words."""
        c = self.worst if self.worst is not None else self.checks[self.governing_result(member)]
        return c.check_name(member)

    def worst_per_group(self, groups: dict[str, np.ndarray]) -> dict[str, tuple[int, float]]:
        """Group name → (member id, utilisation) of the group's most utilised member."""
        out: dict[str, tuple[int, float]] = {}
        for name, ids in groups.items():
            ids = np.asarray(ids, dtype=np.int64)
            if ids.size:
                j = int(ids[np.argmax(self.utilisation[ids])])
                out[name] = (j, float(self.utilisation[j]))
        return out


def _scan(model: Model, results: Any, names: list[str], r: _Resistances,
          quick: bool) -> GoverningCheck | None:
    """One pass over the results; None when a ``quick`` pass met a force that is not finite.

    ``quick``: cases and combinations by the utilisation max(f/R_t, f/(-R_c))
    (the resistances must all be positive); otherwise, and for envelopes,
    the full check of each result, which raises on its own errors.
    """
    b = model.n_members
    best = np.full(b, -np.inf)  # utilisations are finite: the first result sets every member
    which = np.zeros(b, dtype=np.intp)
    better = np.empty(b, dtype=bool)
    high_at = np.zeros(b)  # the forces of each member's governing result so far
    low_at: np.ndarray | None = None  # made at the first envelope
    in_t = np.zeros(b, dtype=bool)
    in_c = np.zeros(b, dtype=bool)
    top = np.full(b, -np.inf)  # force range over the results taken quickly
    bottom = np.full(b, np.inf)
    u, other, comp = np.empty(b), np.empty(b), np.empty(b, dtype=bool)
    scratch = _scratch(b)
    minus_c = -r.res_c
    for j, n in enumerate(names):
        result = results[n]
        high, low = _forces_of(result)
        if quick and low is None:
            if high.shape != (b,):
                return None
            with np.errstate(over="ignore", invalid="ignore"):  # not finite: checked below
                np.maximum(np.divide(high, r.res_t, out=u),
                           np.divide(high, minus_c, out=other), out=u)
            np.maximum(top, high, out=top)
            np.minimum(bottom, high, out=bottom)
            step = u
        else:
            c = _check(model, result, r, scratch, forces=(high, low))
            step = c.utilisation
            c._compression(out=comp)
            in_c |= comp
            in_t |= np.invert(comp, out=comp)
            if low is not None and low_at is None:
                low_at = high_at.copy()
        np.greater(step, best, out=better)
        np.copyto(best, step, where=better)
        np.copyto(which, j, where=better)
        np.copyto(high_at, high, where=better)
        if low_at is not None:
            np.copyto(low_at, high if low is None else low, where=better)
    # NaN spreads through a maximum and a minimum, an infinity stays: a force
    # or a utilisation that is not finite shows in these three.
    if quick and b and not (np.isfinite(best.max()) and np.isfinite(top.max(initial=0.0))
                            and np.isfinite(bottom.min(initial=0.0))):
        return None
    in_t |= top >= 0.0  # a case or combination in compression is f < 0: tension table else
    in_c |= bottom < 0.0
    forces = (SimpleNamespace(name="governing", axial_forces=high_at) if low_at is None else
              SimpleNamespace(name="governing", axial_max=high_at, axial_min=low_at))
    worst = _check(model, forces, r, scratch)
    return GoverningCheck(names=list(names), utilisation=worst.utilisation, result_index=which,
                          checks=_Checks(model, results, names, r), worst=worst,
                          in_tension=in_t, in_compression=in_c)


def check_results(
    model: Model, results: Any, names: list[str] | None = None, **gammas: float
) -> GoverningCheck:
    """Check every member under each named result and keep the governing one.

    Parameters
    ----------
    model : Model
    results : Mapping of name → result
        For example the value of ``model.solve()``.
    names : list of str, optional
        Results to check; default: every combination, or every case when
        the model has no combination.
    **gammas
        Partial factors passed to :func:`~spaceframe.design.steel.check_members`.

    Returns
    -------
    GoverningCheck
        The check of each result is made when read from its ``checks``.
    """
    if names is None:
        combos = [n for n in results if getattr(results[n], "kind", "") == "combination"]
        names = combos or list(results)
    if not names:
        raise ModelError("check_results: no result to check")
    # The resistances once: they depend on the members, not on the result.
    r = _resistances(model, **gammas)
    found = None
    if np.all(r.res_t > 0) and np.all(r.res_c > 0):
        try:
            found = _scan(model, results, names, r, quick=True)
        except Exception:  # the full checks below raise it, in result order
            found = None
    if found is None:
        found = _scan(model, results, names, r, quick=False)
        assert found is not None  # only a quick scan gives up
    return found
