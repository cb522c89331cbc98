"""The whole-model check run before analysis."""

from __future__ import annotations

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.model.arrays import _AXES, ModelArrays

__all__ = ["Validation"]


class Validation(ModelArrays):
    """:meth:`validate`: every array of the Model checked again, vectorised."""

    def validate(self) -> None:  # noqa: C901 (one independent check after another)
        """Check the whole model once more before analysis (cheap, vectorised).

        Raises
        ------
        ModelError
            On any inconsistency of shapes, ids or values.
        """
        # Arrays are public and may have been changed in place after add_*:
        # check them all again (vectorised) and drop cached lengths.
        self._invalidate()
        nodes = self.nodes
        if not (isinstance(nodes, np.ndarray) and nodes.ndim == 2 and nodes.shape[1] == 3
                and nodes.dtype.kind == "f"):
            raise ModelError(
                f"nodes must be an (n, 3) float array, got {getattr(nodes, 'shape', nodes)!r}"
            )
        bad = np.argwhere(~np.isfinite(nodes))
        if bad.size:
            i, j = (int(v) for v in bad[0])
            raise ModelError(f"node {i}: coordinate {_AXES[j]} is {float(nodes[i, j])}")
        n = self.n_nodes
        mem = self.members
        if not (isinstance(mem, np.ndarray) and mem.ndim == 2 and mem.shape[1] == 2
                and mem.dtype.kind in "iu"):
            raise ModelError(
                f"members must be a (b, 2) integer array, got {getattr(mem, 'shape', mem)!r}"
            )
        b = self.n_members
        out = np.argwhere((mem < 0) | (mem >= n))
        if out.size:
            i, j = (int(v) for v in out[0])
            raise ModelError(
                f"member {i} refers to node {int(mem[i, j])}, which does not exist "
                f"(the model has nodes 0..{n - 1})"
            )
        for name in ("area", "E", "density", "alpha"):
            arr = getattr(self, name)
            if not isinstance(arr, np.ndarray) or arr.shape != (b,):
                raise ModelError(
                    f"{name} has shape {getattr(arr, 'shape', None)}, expected ({b},)"
                )
        if self.restraint.shape != (n, 3) or self.springs.shape != (n, 3):
            raise ModelError("restraint and springs must be (n, 3) arrays")
        if b == 0:
            raise ModelError("the model has no members")
        same = np.flatnonzero(mem[:, 0] == mem[:, 1])
        if same.size:
            i = int(same[0])
            raise ModelError(f"member {i} runs from node {int(mem[i, 0])} to itself")
        zero = np.flatnonzero(~(self.lengths > 0))
        if zero.size:
            i = int(zero[0])
            raise ModelError(
                f"member {i} between nodes {int(mem[i, 0])} and {int(mem[i, 1])} has zero length"
            )
        for name in ("area", "E"):
            arr = getattr(self, name)
            missing = np.flatnonzero(np.isnan(arr))
            if missing.size:
                i = int(missing[0])
                raise ModelError(
                    f"member {i}{self._group_text(i)} has no {name} assigned "
                    f"({missing.size} members without one)"
                )
            wrong = np.flatnonzero(~(np.isfinite(arr) & (arr > 0)))
            if wrong.size:
                i = int(wrong[0])
                raise ModelError(f"member {i}: {name} = {float(arr[i])} must be a positive "
                                 "finite number")
        for name, lowest in (("density", 0.0), ("alpha", -np.inf)):
            arr = getattr(self, name)
            wrong = np.flatnonzero(~(np.isfinite(arr) & (arr >= lowest)))
            if wrong.size:
                i = int(wrong[0])
                raise ModelError(f"member {i}: {name} = {float(arr[i])} is not allowed")
        bad_k = np.argwhere(~(np.isfinite(self.springs) & (self.springs >= 0)))
        if bad_k.size:
            i, j = (int(v) for v in bad_k[0])
            raise ModelError(
                f"node {i}: spring along {_AXES[j]} is {float(self.springs[i, j])} N/m "
                "(must be finite and not negative)"
            )
        for name, ids in self.groups.items():
            self._member_ids(ids, f"group {name!r}")
        for name, ids in self.node_sets.items():
            self._node_ids(ids, f"node set {name!r}")
        if self.panel_nodes.size:
            self._node_ids(self.panel_nodes, "panels")
        for cname, lc in self.cases.items():
            lc.resize(n, b)
            for what, arr, rows in (
                ("forces", lc.forces, n), ("settlement", lc.settlement, n),
                ("temperature", lc.temperature, b), ("initial_strain", lc.initial_strain, b),
            ):
                if arr.shape[0] != rows:
                    raise ModelError(
                        f"load case {cname!r}: {what} has {arr.shape[0]} rows for {rows} "
                        f"{'nodes' if rows == n else 'members'}"
                    )
                # Two reductions (NaN spreads through both) before any index:
                # a thousand cases of a 100k-member model are 4000 arrays.
                if arr.size and np.isfinite(arr.min()) and np.isfinite(arr.max()):
                    continue
                where = np.argwhere(~np.isfinite(arr))
                if where.size:
                    i = int(where[0][0])
                    raise ModelError(
                        f"load case {cname!r}: {what} of {'node' if rows == n else 'member'} "
                        f"{i} is not finite"
                    )
        for cname, factors in self.combinations.items():
            for case, f in factors.items():
                if case not in self.cases:
                    raise ModelError(f"combination {cname!r} refers to unknown load case {case!r}")
                if not np.isfinite(f):
                    raise ModelError(f"combination {cname!r}: factor for {case!r} is {f!r}")
