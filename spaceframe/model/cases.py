"""Load cases and combinations of a Model.

Nodal forces, self-weight, temperature, initial strain and settlement.
"""

from __future__ import annotations

import numbers
from collections.abc import Mapping
from typing import Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.model.arrays import _AXES, LoadCase, ModelArrays

__all__ = ["STANDARD_GRAVITY", "LoadCases"]

#: Standard acceleration of gravity, m/s² (CGPM 1901, the conventional value).
STANDARD_GRAVITY = 9.80665


class LoadCases(ModelArrays):
    """Load cases and combinations of the Model."""

    def case(self, name: str) -> LoadCase:
        """The load case ``name``, created empty if new."""
        if not isinstance(name, str) or not name:
            raise ModelError(f"load case name must be a non-empty string, got {name!r}")
        if name in self.combinations:
            raise ModelError(f"load case {name!r}: a combination already has that name")
        if name not in self.cases:
            self.cases[name] = LoadCase(name)
        lc = self.cases[name]
        lc.resize(self.n_nodes, self.n_members)
        return lc

    def add_load(self, case: str, node_ids: Any, force: Any) -> None:
        """Add nodal forces, N, to a load case (adds to what is there).

        ``force`` is one (fx, fy, fz) for all nodes or (k, 3), one per node.
        """
        ids = self._node_ids(node_ids, f"add_load({case!r})")
        f = self._vector(force, f"add_load({case!r}): force")
        if f.ndim == 2 and f.shape[0] != ids.size:
            raise ModelError(
                f"add_load({case!r}): {ids.size} nodes but {f.shape[0]} force vectors"
            )
        lc = self.case(case)
        np.add.at(lc.forces, ids, np.broadcast_to(f, (ids.size, 3)))

    def add_self_weight(
        self, case: str, g: float = STANDARD_GRAVITY, factor: float = 1.0, members: Any = None
    ) -> None:
        """Add member self-weight along -z, half of each member's weight to each end.

        Parameters
        ----------
        case : str
            Load case.
        g : float
            Acceleration of gravity, m/s².
        factor : float
            Multiplier, e.g. 1.1 for joints and connections.
        members : (k,) int, optional
            Only these members (default all).
        """
        ids = (
            np.arange(self.n_members)
            if members is None
            else self._member_ids(members, f"add_self_weight({case!r})")
        )
        g_val = float(self._per_item(g, 1, f"add_self_weight({case!r}): g")[0])
        if not g_val > 0:
            raise ModelError(
                f"add_self_weight({case!r}): g = {g_val} m/s² must be positive (self-weight "
                "acts along -z by definition; use nodal loads for another direction)"
            )
        f_val = float(self._per_item(factor, 1, f"add_self_weight({case!r}): factor")[0])
        lc = self.case(case)
        w = 0.5 * f_val * g_val * self.mass[ids]
        fz = np.bincount(self.members[ids, 0], w, self.n_nodes) + np.bincount(
            self.members[ids, 1], w, self.n_nodes
        )
        lc.forces[:, 2] -= fz
        self.self_weight_records.append((case, float(g), float(factor), ids.copy()))

    def add_temperature(self, case: str, member_ids: Any, dT: Any) -> None:
        """Add a uniform temperature change, K, to members (free strain alpha*dT)."""
        ids = self._member_ids(member_ids, f"add_temperature({case!r})")
        t = self._per_item(dT, ids.size, f"add_temperature({case!r}): dT")
        lc = self.case(case)
        np.add.at(lc.temperature, ids, t)

    def add_initial_strain(self, case: str, member_ids: Any, strain: Any) -> None:
        """Add an imposed free strain (lack of fit; positive = member too long)."""
        ids = self._member_ids(member_ids, f"add_initial_strain({case!r})")
        s = self._per_item(strain, ids.size, f"add_initial_strain({case!r}): strain")
        lc = self.case(case)
        np.add.at(lc.initial_strain, ids, s)

    def add_settlement(self, case: str, node_ids: Any, displacement: Any) -> None:
        """Prescribe displacements, m, of restrained directions of support nodes.

        Only directions that are restrained may be given a non-zero value; a
        non-zero component in a free direction raises ModelError.
        """
        ids = self._node_ids(node_ids, f"add_settlement({case!r})")
        u = np.broadcast_to(self._vector(displacement, f"add_settlement({case!r})"), (ids.size, 3))
        given = u != 0.0
        free = given & ~self.restraint[ids]
        if np.any(free):
            i, j = (int(v) for v in np.argwhere(free)[0])
            raise ModelError(
                f"add_settlement({case!r}): node {int(ids[i])} is not restrained along "
                f"{_AXES[j]}, so it cannot be given a settlement of {float(u[i, j])} m there"
            )
        lc = self.case(case)
        np.add.at(lc.settlement, ids, u)
        lc.settlement_mask[ids] |= given

    def add_combination(self, name: str, factors: Mapping[str, float]) -> None:
        """Define a combination: name -> {case: factor}, results by superposition."""
        if not isinstance(name, str) or not name:
            raise ModelError(f"combination name must be a non-empty string, got {name!r}")
        if name in self.cases:
            raise ModelError(f"combination {name!r}: a load case already has that name")
        if not factors:
            raise ModelError(f"combination {name!r} has no cases")
        clean: dict[str, float] = {}
        for case, factor in factors.items():
            if case not in self.cases:
                known = ", ".join(sorted(self.cases)) or "none defined"
                raise ModelError(
                    f"combination {name!r} refers to unknown load case {case!r} (cases: {known})"
                )
            if isinstance(factor, bool) or not isinstance(factor, numbers.Real):
                raise ModelError(
                    f"combination {name!r}: factor for {case!r} is {factor!r}, not a number"
                )
            f = float(factor)
            if not np.isfinite(f):
                raise ModelError(f"combination {name!r}: factor for {case!r} is {factor!r}")
            clean[case] = f
        self.combinations[name] = clean
