"""Supports of a Model: restrained directions and elastic springs."""

from __future__ import annotations

from typing import Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.model.arrays import _AXES, ModelArrays, _real_array

__all__ = ["Supports"]


class Supports(ModelArrays):
    """Restraints and springs of the Model's nodes."""

    def add_support(self, node_ids: Any, x: Any = True, y: bool = True, z: bool = True) -> None:
        """Restrain translations of nodes (a roller restrains fewer directions).

        ``x``, ``y``, ``z`` say which directions are held; ``x`` may instead be
        the three flags at once, ``add_support(ids, (False, True, True))``.
        """
        ids = self._node_ids(node_ids, "add_support")
        flags = np.asarray(x, dtype=object)
        if flags.ndim == 0:
            flags = np.array([x, y, z], dtype=object)
        elif flags.shape != (3,):
            raise ModelError(f"add_support: expected three flags (x, y, z), got {x!r}")
        for axis, f in zip(_AXES, flags, strict=True):
            if not isinstance(f, bool | np.bool_ | int | np.integer) or f not in (0, 1):
                raise ModelError(f"add_support: flag {axis} is {f!r}; use True or False")
        self.restraint[ids] |= flags.astype(bool)

    def add_spring(self, node_ids: Any, kx: Any = 0.0, ky: Any = 0.0, kz: Any = 0.0) -> None:
        """Add elastic supports, N/m, to nodes (adds to any spring already there).

        Either ``kx``, ``ky``, ``kz`` (each a number or one per node), or the
        stiffnesses as one array-like in ``kx``: ``(kx, ky, kz)`` for every
        node or ``(k, 3)``, one row per node, as :meth:`add_load` takes forces.
        """
        ids = self._node_ids(node_ids, "add_spring")
        kx_a = _real_array(kx, "add_spring: kx")
        if kx_a.ndim >= 1 and kx_a.shape[-1] == 3 and kx_a.ndim <= 2 and kx_a.size != 1:
            if np.any(_real_array(ky, "add_spring: ky")) or np.any(
                _real_array(kz, "add_spring: kz")
            ):
                raise ModelError(
                    "add_spring: give the stiffness either as (kx, ky, kz) in one argument or "
                    "as kx=, ky=, kz=, not both"
                )
            k = self._vector(kx_a, "add_spring: stiffness")
        else:
            k = np.stack(
                [self._per_item(v, ids.size, f"add_spring: {a}") for a, v in
                 zip(("kx", "ky", "kz"), (kx, ky, kz), strict=True)],
                axis=1,
            )
        if k.ndim == 2 and k.shape[0] != ids.size:
            raise ModelError(f"add_spring: {ids.size} nodes but {k.shape[0]} stiffness rows")
        if np.any(k < 0):
            i = tuple(int(v) for v in np.argwhere(k < 0)[0])
            raise ModelError(f"add_spring: stiffness component {i} = {float(k[i])} must not "
                             "be negative")
        np.add.at(self.springs, ids, np.broadcast_to(k, (ids.size, 3)))
