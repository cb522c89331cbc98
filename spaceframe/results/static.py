"""Results of an analysis: one :class:`CaseResult` per load case and combination."""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, ClassVar

import numpy as np

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["CaseResult", "Envelope", "LinearElongations", "NodeRows", "Results"]


class NodeRows:
    """An (n, 3) node array held as its rows that are not all zero.

    ``rows`` (k,) node ids, ascending, and ``values`` (k, 3) their rows.  A
    result's reactions exist at supports and springs only, and a point-load
    case loads one node: a thousand results of a 100k-member model hold 1.8
    MB of them instead of 0.6 GB of zeros per array.
    """

    __slots__ = ("n", "rows", "values")

    def __init__(self, n: int, rows: np.ndarray, values: np.ndarray) -> None:
        self.n, self.rows, self.values = n, rows, values

    @classmethod
    def of(cls, full: np.ndarray, rows: np.ndarray) -> NodeRows:
        """The ``rows`` of ``full`` (n, 3), copied; every other row of ``full`` must be 0."""
        return cls(full.shape[0], rows, full[rows])

    def expand(self) -> np.ndarray:
        """The full (n, 3) array (a new one on every call)."""
        out = np.zeros((self.n, 3))
        out[self.rows] = self.values
        return out


class LinearElongations:
    """A linear result's member elongations, A^T u, made each time they are read.

    ``A`` the equilibrium matrix (3n, b) and ``u`` the displacements (3n,):
    instead of a second (b,) array per result (0.8 GB at a thousand results
    of a 100k-member model), the product when asked (2 ms at 100k members).
    """

    __slots__ = ("A", "u")

    def __init__(self, A: Any, u: np.ndarray) -> None:
        self.A, self.u = A, u

    def expand(self) -> np.ndarray:
        """The (b,) elongations (a new array on every call)."""
        return np.asarray(self.A.T @ self.u)


class _Held:
    """A result array given as an ndarray, :class:`NodeRows` or :class:`LinearElongations`.

    Reading it gives an ndarray; a compact one is expanded into a new array
    on each read, so changing that array in place changes nothing held.
    """

    def __set_name__(self, owner: type, name: str) -> None:
        self.slot = "_" + name

    def __get__(self, obj: Any, owner: type | None = None) -> np.ndarray:
        if obj is None:  # no class-level default: the field stays required
            raise AttributeError(self.slot)
        v = obj.__dict__[self.slot]
        return v if isinstance(v, np.ndarray) else v.expand()

    def __set__(self, obj: Any, value: np.ndarray | NodeRows | LinearElongations) -> None:
        obj.__dict__[self.slot] = value


@dataclass
class CaseResult:
    """Result of one load case or combination (SI units, tension positive).

    Attributes
    ----------
    name : str
    kind : {"case", "combination"}
    displacements : (n, 3) float
        Nodal displacements, m.
    axial_forces : (b,) float
        Member axial forces, N, tension positive.
    reactions : (n, 3) float
        Forces that supports and springs exert on the nodes, N; zero elsewhere.
        May be given as a :class:`NodeRows` (read back as the full array).
    loads : (n, 3) float
        Applied nodal forces, N.  May be given as a :class:`NodeRows`.
    elongations : (b,) float
        Total member elongations (elastic plus free thermal/initial), m.  May
        be given as :class:`LinearElongations` (made from the displacements
        when read).
    residual : float
        Relative equilibrium residual ||A t - f - R|| / (|| |A| |t| || + ||f|| + ||R||).
    factors : dict
        For a combination, its case factors.
    slack : (b,) bool or None
        Tension-only members carrying no force in this result (None when the
        model has none).
    """

    #: The analysis that made the result (every result kind has one).
    analysis: ClassVar[str] = "static"

    name: str
    kind: str
    displacements: np.ndarray
    axial_forces: np.ndarray
    if TYPE_CHECKING:  # read as ndarrays; may be given compactly (_Held)
        reactions: np.ndarray
        loads: np.ndarray
        elongations: np.ndarray
    else:
        reactions: np.ndarray = _Held()
        loads: np.ndarray = _Held()
        elongations: np.ndarray = _Held()
    residual: float
    area: np.ndarray = field(repr=False)
    factors: dict[str, float] = field(default_factory=dict)
    slack: np.ndarray | None = field(default=None, repr=False)

    def __post_init__(self) -> None:
        # The result owns its areas: changing the model's after a solve must
        # not change the stresses of an earlier result.  A read-only float
        # array is already a snapshot nobody can change (the solve shares one
        # among all its results): kept as it is.
        a = self.area
        if not (isinstance(a, np.ndarray) and a.dtype == np.float64 and not a.flags.writeable):
            self.area = np.array(a, dtype=float, copy=True)

    @property
    def stress(self) -> np.ndarray:
        """(b,) float: axial stress N/A, Pa."""
        return self.axial_forces / self.area

    @property
    def applied_total(self) -> np.ndarray:
        """(3,) float: sum of applied nodal forces, N."""
        return self.loads.sum(axis=0)

    @property
    def reaction_total(self) -> np.ndarray:
        """(3,) float: sum of reactions, N."""
        return self.reactions.sum(axis=0)

    def max_displacement(self) -> tuple[int, float]:
        """Node id and value of the largest displacement magnitude, m."""
        mag = np.linalg.norm(self.displacements, axis=1)
        i = int(np.argmax(mag)) if mag.size else 0
        return i, float(mag[i]) if mag.size else 0.0

    def max_tension(self) -> tuple[int, float]:
        """Member id and value of the largest axial force, N."""
        i = int(np.argmax(self.axial_forces))
        return i, float(self.axial_forces[i])

    def nonzero_rows(self, name: str) -> tuple[np.ndarray, np.ndarray]:
        """The nodes where ``name`` ("loads" or "reactions") is not 0, and their (k, 3) rows.

        Read from what the result holds, without making the full array of a
        compact one (:class:`NodeRows`).  NaN counts as not 0.
        """
        held = self.__dict__["_" + name]
        if isinstance(held, NodeRows):
            rows, values = held.rows, held.values
        else:
            values = np.asarray(held)
            rows = np.arange(values.shape[0])
        keep = np.any(values != 0.0, axis=1)
        return rows[keep], values[keep]

    def max_compression(self) -> tuple[int, float]:
        """Member id and value of the most negative axial force, N."""
        i = int(np.argmin(self.axial_forces))
        return i, float(self.axial_forces[i])


@dataclass
class Envelope:
    """Max and min of each result over a set of combinations or cases."""

    name: str
    members: list[str]
    axial_max: np.ndarray
    axial_min: np.ndarray
    displacement_max: np.ndarray
    displacement_min: np.ndarray
    reaction_max: np.ndarray
    reaction_min: np.ndarray


class Results(Mapping[str, CaseResult]):
    """Mapping from case or combination name to :class:`CaseResult`.

    Attributes
    ----------
    model : Model
        The analysed model.
    solver : str
        Back-end that factorised the stiffness matrix.
    timings : dict
        Seconds spent per phase.
    """

    def __init__(
        self,
        model: Model,
        items: dict[str, CaseResult],
        solver: str = "",
        timings: dict[str, float] | None = None,
        info: dict[str, Any] | None = None,
    ) -> None:
        self.model = model
        self._items = items
        self.solver = solver
        self.timings = dict(timings or {})
        self.info = dict(info or {})

    def __getitem__(self, name: str) -> CaseResult:
        try:
            return self._items[name]
        except KeyError:
            known = ", ".join(self._items) or "none"
            raise KeyError(f"no result named {name!r} (have: {known})") from None

    def __iter__(self) -> Iterator[str]:
        return iter(self._items)

    def __len__(self) -> int:
        return len(self._items)

    def __repr__(self) -> str:
        return f"Results({', '.join(self._items)}; solver={self.solver})"

    def subset(self, names: list[str]) -> Results:
        """The same results (shared, not copied) of ``names`` only, in that order."""
        return Results(self.model, {n: self[n] for n in names}, solver=self.solver,
                       timings=self.timings, info=self.info)

    @property
    def cases(self) -> list[str]:
        """Names of the load-case results."""
        return [k for k, v in self._items.items() if v.kind == "case"]

    @property
    def combinations(self) -> list[str]:
        """Names of the combination results."""
        return [k for k, v in self._items.items() if v.kind == "combination"]

    def envelope(self, name: str, members: list[str]) -> Envelope:
        """Max and min over the named results, per member, node and axis."""
        rs = [self[m] for m in members]
        axial = np.stack([r.axial_forces for r in rs])
        disp = np.stack([r.displacements for r in rs])
        reac = np.stack([r.reactions for r in rs])
        return Envelope(
            name=name,
            members=list(members),
            axial_max=axial.max(axis=0),
            axial_min=axial.min(axis=0),
            displacement_max=disp.max(axis=0),
            displacement_min=disp.min(axis=0),
            reaction_max=reac.max(axis=0),
            reaction_min=reac.min(axis=0),
        )
