"""The design checks of a run: which members can be checked, the checks, their summary.

Called by :func:`spaceframe.run.job.run`.  The checks themselves are the
library's (:mod:`spaceframe.design`); this module picks the results to check,
the members that carry the data a check needs, and turns the outcome into the
JSON block of ``summary.json`` and the one-line warnings of the run.

Only member resistance to axial force is checked.  Joints, connections, local
effects, fatigue, fire and the national annex are the engineer's; results must
be checked by a qualified engineer.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.design.governing import GoverningCheck, check_results
from spaceframe.design.steel import CHECKS, IMPERFECTION_FACTORS
from spaceframe.errors import ModelError

if TYPE_CHECKING:
    from spaceframe.design.deflection import DeflectionCheck
    from spaceframe.design.sizing import SizingResult
    from spaceframe.design.steel import MemberCheck
    from spaceframe.model import Model

__all__ = ["DEFAULT_GAMMAS", "GAMMA_NOTE", "DesignOutcome", "checkable_members", "run_checks"]

#: Partial factors when the model file sets none: the recommended values of
#: EN 1993-1-1 §6.1 Note 2B (γ_M0, γ_M1, γ_M2) and this tool's cable factor
#: (see :func:`spaceframe.design.steel.check_members`).
DEFAULT_GAMMAS: dict[str, float] = {"gamma_M0": 1.0, "gamma_M1": 1.0, "gamma_M2": 1.25,
                                    "gamma_cable": 1.5}

#: Said wherever the partial factors are shown.
GAMMA_NOTE = ("recommended values of EN 1993-1-1 §6.1 Note 2B; national annexes change them")

#: The caution of every design output.
DESIGN_CAUTION = ("The checks cover member resistance to axial force only; joints, "
                  "connections, local effects, fatigue, fire and the national annex are "
                  "the engineer's.")


def ranges(ids: np.ndarray, most: int = 12) -> str:
    """'0-3, 7, 9-11' (at most ``most`` runs, then '...')."""
    ids = np.asarray(ids, dtype=np.int64)
    if ids.size == 0:
        return ""
    breaks = np.flatnonzero(np.diff(ids) != 1)
    starts = np.r_[ids[0], ids[breaks + 1]]
    ends = np.r_[ids[breaks], ids[-1]]
    runs = [f"{a}" if a == b else f"{a}-{b}" for a, b in zip(starts.tolist(), ends.tolist(),
                                                             strict=True)]
    return ", ".join(runs[:most]) + (", ..." if len(runs) > most else "")


def checkable_members(model: Model) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """(b,) bool: members with the data their check needs; and why the others lack it.

    A steel member needs a yield strength, and where it has a second moment a
    buckling curve; a tension-only member (cable) needs a breaking force.
    A member without a second moment is checkable: the check itself reports
    its compression as not checked for buckling.
    """
    b = model.n_members

    def prop(name: str, default: Any) -> np.ndarray:
        v = getattr(model, name, None)
        return np.full(b, default) if v is None or len(v) != b else np.asarray(v)

    t_only = prop("tension_only", False).astype(bool)
    fy = prop("yield_strength", np.nan).astype(float)
    brk = prop("breaking_force", np.nan).astype(float)
    inertia = prop("second_moment", np.nan).astype(float)
    curve = prop("buckling_curve", "").astype(object)
    has_i = np.isfinite(inertia) & (inertia > 0)
    curve_ok = np.isin(curve.astype(str), list(IMPERFECTION_FACTORS))
    reasons = {
        "no yield strength": np.flatnonzero(~t_only & ~np.isfinite(fy)),
        "no buckling curve": np.flatnonzero(~t_only & np.isfinite(fy) & has_i & ~curve_ok),
        "tension-only without a breaking force": np.flatnonzero(t_only & ~np.isfinite(brk)),
    }
    ok = np.ones(b, dtype=bool)
    for ids in reasons.values():
        ok[ids] = False
    return ok, {k: v for k, v in reasons.items() if v.size}


def missing_text(reasons: dict[str, np.ndarray], b: int) -> str:
    """One line naming the members that cannot be checked, and why."""
    n = int(sum(v.size for v in reasons.values()))
    why = "; ".join(f"{k}: member{'s' if v.size > 1 else ''} {ranges(v)}"
                    for k, v in reasons.items())
    return f"{n} of {b} members cannot be checked ({why})"


class _Members:
    """Some members of a model, with exactly the attributes the steel checks read.

    Hand-written instead of a sub-model: the checks read per-member arrays
    only, and building a model of a subset (nodes, loads) is not needed.
    """

    _ARRAYS = ("area", "E", "yield_strength", "ultimate_strength", "second_moment",
               "buckling_length_factor", "net_area_factor", "tension_only", "breaking_force",
               "buckling_curve", "slenderness_limit")

    def __init__(self, model: Model, ids: np.ndarray) -> None:
        self._model, self._ids = model, ids
        self.n_members = int(ids.size)
        self.lengths = model.lengths[ids]
        for name in self._ARRAYS:
            v = getattr(model, name, None)
            setattr(self, name, None if v is None else np.asarray(v)[ids])

    def _group_text(self, k: int) -> str:
        return self._model._group_text(int(self._ids[k]))


class _Forces:
    """One result's axial forces restricted to some members, taken when read.

    A check keeps its result to work out its demands on request; holding the
    full result and the ids, not a copy of the forces, keeps that free.
    """

    def __init__(self, result: Any, ids: np.ndarray) -> None:
        self.name = getattr(result, "name", "")
        self.kind = getattr(result, "kind", "")
        self._result, self._ids = result, ids

    @property
    def axial_forces(self) -> np.ndarray:
        return np.asarray(self._result.axial_forces)[self._ids]


class _EnvelopeForces(_Forces):
    """:class:`_Forces` of an envelope (largest and smallest force)."""

    @property
    def axial_max(self) -> np.ndarray:
        return np.asarray(self._result.axial_max)[self._ids]

    @property
    def axial_min(self) -> np.ndarray:
        return np.asarray(self._result.axial_min)[self._ids]


def _forces(result: Any, ids: np.ndarray) -> _Forces:
    return (_EnvelopeForces if hasattr(result, "axial_max") else _Forces)(result, ids)


class _Utilisations(Mapping[str, np.ndarray]):
    """Result name → (b,) utilisation of every member of the model, NaN where not checked.

    Each is made from the result's check when read (a run checks many
    results and shows a few).
    """

    def __init__(self, check: GoverningCheck, ids: np.ndarray, b: int) -> None:
        self._checks, self._ids, self._b = check.checks, ids, b

    def __getitem__(self, name: str) -> np.ndarray:
        u = self._checks[name].utilisation
        if self._ids.size == self._b:  # every member checked: the check's own array
            return u
        out = np.full(self._b, np.nan)
        out[self._ids] = u
        return out

    def __contains__(self, name: object) -> bool:
        return name in self._checks

    def __iter__(self) -> Iterator[str]:
        return iter(self._checks)

    def __len__(self) -> int:
        return len(self._checks)


@dataclass
class DesignOutcome:
    """The checks of a run, per member of the whole model (NaN where not checked).

    Attributes
    ----------
    check : GoverningCheck
        Over the checked members only (``members`` maps its rows to ids).
    members : (k,) int
        Ids of the checked members.
    utilisation : (b,) float
        Governing utilisation of every member, NaN where not checked.
    per_result : Mapping
        Result name → (b,) utilisation, NaN where not checked (each made
        when read).
    passes : (b,) bool
        False for a failing member (unchecked members count as not failing here;
        they are listed in ``missing``).
    gammas : dict
    missing : str
        One line naming the members that could not be checked ("" for none).
    deflection : list of DeflectionCheck
    sizing : SizingResult or None
    """

    check: GoverningCheck
    members: np.ndarray
    utilisation: np.ndarray
    per_result: Mapping[str, np.ndarray]
    passes: np.ndarray
    gammas: dict[str, float]
    missing: str = ""
    deflection: list[DeflectionCheck] = field(default_factory=list)
    sizing: SizingResult | None = None
    sections: list[str] = field(default_factory=list)
    materials: list[str] = field(default_factory=list)

    @property
    def failing(self) -> np.ndarray:
        """Ids of the members that fail a check."""
        return np.flatnonzero(~self.passes)

    @property
    def buckling_not_checked(self) -> np.ndarray:
        """Ids of members in compression whose buckling could not be checked.

        They have no second moment in some result, and count as failing.
        """
        return self.members[self.check.unchecked]

    def governing(self, j: int) -> tuple[float, float, str, str]:
        """(force N, resistance N, result, check) governing member ``j`` (a model id)."""
        k = int(np.searchsorted(self.members, j))
        if k >= self.members.size or self.members[k] != j:
            return float("nan"), float("nan"), "", "not checked"
        name = self.check.governing_result(k)
        c = self.check.worst if self.check.worst is not None else self.check.checks[name]
        at = c.at([k])
        return float(at["demand"][0]), float(at["resistance"][0]), name, c.check_name(k)

    def columns(self) -> dict[str, np.ndarray]:
        """Per member of the model: governing force, resistance, result, check (arrays)."""
        b = self.utilisation.size
        force = np.full(b, np.nan)
        resistance = np.full(b, np.nan)
        result = np.full(b, "", dtype=object)
        check = np.full(b, "not checked", dtype=object)
        lam = np.full(b, np.nan)
        lam_limit = np.full(b, np.nan)
        g = self.check
        ids = self.members
        if ids.size:
            names = np.array(g.names, dtype=object)
            words = np.array(CHECKS, dtype=object)
            for c, rows in self._governing_parts():
                at = c.at(rows)
                force[ids[rows]] = at["demand"]
                resistance[ids[rows]] = at["resistance"]
                check[ids[rows]] = words[c.governing[rows]]
                lam[ids[rows]] = c.slenderness[rows]
                lam_limit[ids[rows]] = at["slenderness_limit"]
            result[ids] = names[g.result_index]
        lam_limit[~np.isfinite(lam_limit)] = np.nan  # no limit (cables): shown empty
        return {"force": force, "resistance": resistance, "result": result, "check": check,
                "slenderness": lam, "slenderness_limit": lam_limit}

    def _governing_parts(self) -> Iterator[tuple[MemberCheck, np.ndarray]]:
        """(member check, rows of ``check``): the rows, each under its governing result."""
        g = self.check
        if g.worst is not None:  # each member under its governing result, in one check
            yield g.worst, np.arange(self.members.size)
            return
        # The members each result governs, in one sort rather than a pass per result.
        order = np.argsort(g.result_index, kind="stable")
        bounds = np.searchsorted(g.result_index[order], np.arange(len(g.names) + 1))
        for r, name in enumerate(g.names):
            rows = order[bounds[r]:bounds[r + 1]]
            if rows.size:
                yield g.checks[name], rows

    @property
    def too_slender(self) -> np.ndarray:
        """Ids of members whose slenderness L_cr/i exceeds its limit in some result."""
        return self.members[self.check.too_slender]

    def summary(self, model: Model) -> dict[str, Any]:
        """The JSON-able "design" block of summary.json."""
        out: dict[str, Any] = {
            "checked_members": int(self.members.size),
            "members": int(model.n_members),
            "results_checked": list(self.check.names),
            "failing": int(self.failing.size),
            "failing_members": [int(i) for i in self.failing[:200]],
            "gammas": dict(self.gammas),
            "gammas_note": GAMMA_NOTE,
            "not_checked": self.missing,
            "buckling_not_checked": [int(i) for i in self.buckling_not_checked[:200]],
            "too_slender": int(self.too_slender.size),
            "too_slender_members": [int(i) for i in self.too_slender[:200]],
            "caution": DESIGN_CAUTION,
        }
        if self.members.size:
            j = int(self.members[int(np.argmax(self.check.utilisation))])
            force, res, name, chk = self.governing(j)
            out["worst"] = {"member": j, "groups": model.groups_of(j),
                            "utilisation": float(self.utilisation[j]), "result": name,
                            "check": chk, "force": force, "resistance": res}
            order = self.members[np.argsort(-self.check.utilisation, kind="stable")[:10]]
            out["most_utilised"] = [
                {"member": int(k), "groups": model.groups_of(int(k)),
                 "utilisation": float(self.utilisation[k]),
                 "result": self.governing(int(k))[2], "check": self.governing(int(k))[3]}
                for k in order]
            groups = {g: ids for g, ids in model.groups.items()}
            per: dict[str, Any] = {}
            for g, ids in groups.items():
                ids = np.asarray(ids, dtype=np.int64)
                ids = ids[np.isfinite(self.utilisation[ids])]
                if ids.size:
                    k = int(ids[np.argmax(self.utilisation[ids])])
                    per[g] = {"member": k, "utilisation": float(self.utilisation[k]),
                              "result": self.governing(k)[2]}
            out["groups"] = per
        if self.deflection:
            out["deflection"] = [
                {"result": d.result, "node": d.node, "direction": d.direction,
                 "deflection": d.deflection, "span": d.span, "ratio": d.ratio,
                 "limit": d.limit, "passes": bool(d.passes)}
                for d in self.deflection
            ]
            out["deflection_passes"] = all(d.passes for d in self.deflection)
        if self.sizing is not None:
            out["sizing"] = {
                "converged": bool(self.sizing.converged),
                "sections": {g: s.name for g, s in self.sizing.sections.items()},
                # None: too slender for any check (the library's inf), kept valid JSON.
                "iterations": [{g: {"section": sec,
                                    "utilisation": u if np.isfinite(u) else None}
                                for g, (sec, u) in step.items()}
                               for step in self.sizing.iterations],
                "no_section": dict(self.sizing.no_section),
            }
        return out

    def line(self) -> str:
        """One line for the command line."""
        if not self.members.size:
            return "design: no member could be checked; " + self.missing
        w = self.summary_worst
        slender = self.too_slender.size
        text = (f"design: {self.failing.size} of {self.members.size} checked members fail"
                + (f" ({slender} too slender: L_cr/i above its limit)" if slender else "")
                + f"; worst utilisation member {w[0]} at {w[1]:.3g} ({w[2]}, {w[3]})")
        if self.deflection:
            bad = [d for d in self.deflection if not d.passes]
            text += ("; deflection " + ("fails in " + ", ".join(d.result for d in bad)
                                        if bad else "within its limits"))
        return text

    @property
    def summary_worst(self) -> tuple[int, float, str, str]:
        """(member, utilisation, governing result, governing check) of the worst member."""
        j = int(self.members[int(np.argmax(self.check.utilisation))])
        _, _, name, chk = self.governing(j)
        return j, float(self.utilisation[j]), name, chk


def strength_results(project: Any, results: Any, envelopes: dict[str, Any]) -> list[str]:
    """Results the resistance is checked under.

    Combinations (or cases when none), without generated serviceability
    combinations, and the envelopes of what is checked.
    """
    kinds = {n: results[n].kind for n in results}
    generated = set(getattr(getattr(project, "design", None), "generated", []) or [])
    sls = {n for n in generated if n.startswith("SLS")}
    combos = [n for n, k in kinds.items() if k == "combination" and n not in sls]
    names = combos or [n for n, k in kinds.items() if k == "case"]
    env = [e for e, env_ in envelopes.items()
           if not set(getattr(env_, "members", [])) <= sls]
    return names + env


def deflection_results(project: Any, results: Any) -> list[str]:
    """Default results of a deflection check.

    Generated serviceability combinations, else every combination, else every case.
    """
    generated = getattr(getattr(project, "design", None), "generated", []) or []
    sls = [n for n in generated if n.startswith("SLS") and n in results]
    if sls:
        return sls
    combos = [n for n in results if results[n].kind == "combination"]
    return combos or [n for n in results if results[n].kind == "case"]


def run_checks(model: Model, results: Any, envelopes: dict[str, Any], project: Any,
               sizing: SizingResult | None = None) -> DesignOutcome | None:
    """The checks of a run, or None when there is nothing to check with.

    Checks run when the model file has a [design] table, or when every member
    has the data its check needs.  Members without it are named in
    ``DesignOutcome.missing`` (and the run's warnings), never skipped silently.
    """
    spec = getattr(project, "design", None)
    given = bool(spec is not None and spec.given)
    ok, reasons = checkable_members(model)
    b = model.n_members
    if not given and not ok.all():
        return None
    gammas = {**DEFAULT_GAMMAS, **(dict(spec.gammas) if spec is not None else {})}
    names = strength_results(project, results, envelopes)
    pool = {**{n: results[n] for n in results}, **envelopes}
    ids = np.flatnonzero(ok)
    if ids.size == b:
        check = check_results(model, pool, names, **gammas)
    elif ids.size:
        sub = _Members(model, ids)
        check = check_results(sub, {n: _forces(pool[n], ids) for n in names},  # type: ignore[arg-type]
                              names, **gammas)
    else:
        check = GoverningCheck(names=names, utilisation=np.zeros(0),
                               result_index=np.zeros(0, dtype=np.int64), checks={})
    util = np.full(b, np.nan)
    util[ids] = check.utilisation
    per = _Utilisations(check, ids, b)
    passes = np.ones(b, dtype=bool)
    if ids.size:
        passes[ids] = check.passes
    out = DesignOutcome(check=check, members=ids, utilisation=util, per_result=per,
                        passes=passes, gammas=gammas,
                        missing=missing_text(reasons, b) if reasons else "", sizing=sizing)
    out.sections, out.materials = _names(model, sizing)
    if spec is not None and spec.deflection is not None:
        from spaceframe.design.deflection import check_deflection

        d = spec.deflection
        nodes = getattr(d, "node_ids", None)
        for n in d.results or deflection_results(project, results):
            if n not in results:
                from spaceframe.errors import ProjectError

                raise ProjectError(f"{getattr(project, 'path', 'model file')}: "
                                   f"design.deflection.results: no case or combination {n!r}")
            try:
                out.deflection.append(check_deflection(
                    model, results[n], nodes=nodes, span=d.span, ratio=d.ratio,
                    direction=d.direction))
            except ModelError as exc:
                from spaceframe.errors import ProjectError

                where = getattr(project, "path", "model file")
                raise ProjectError(f"{where}: design.deflection: {exc}") from None
    return out


def _names(model: Model, sizing: SizingResult | None) -> tuple[list[str], list[str]]:
    """Section and material name per member (from the model file; sized groups: the choice)."""
    b = model.n_members
    secs = model.meta.get("project:sections")
    sec_of = model.meta.get("project:section_index")
    mats = model.meta.get("project:materials")
    mat_of = model.meta.get("project:material_index")
    sec = (np.array([s.name for s in secs], dtype=object)[sec_of]
           if secs is not None and sec_of is not None and len(sec_of) == b
           else np.full(b, "", dtype=object))
    mat = (np.array([m.name for m in mats], dtype=object)[mat_of]
           if mats is not None and mat_of is not None and len(mat_of) == b
           else np.full(b, "", dtype=object))
    if sizing is not None:
        for g, s in sizing.sections.items():
            sec[model.groups[g]] = s.name
    return sec.tolist(), mat.tolist()


def run_sizing(model: Model, project: Any, solve: Any) -> SizingResult | None:
    """Size the groups of [design.sizing] in place (before the final solve)."""
    spec = getattr(project, "design", None)
    if spec is None or spec.sizing is None:
        return None
    from spaceframe.design.sizing import read_catalogue, size_groups

    s = spec.sizing
    cat = read_catalogue(s.catalogue) if s.catalogue is not None else None
    gammas = {**DEFAULT_GAMMAS, **spec.gammas}
    generated = set(spec.generated or [])
    names = [n for n in model.combinations if not (n in generated and n.startswith("SLS"))]
    return size_groups(model, list(s.groups), cat, solve=solve, names=names or None,
                       fabrication=s.fabrication, max_iterations=s.max_iterations,
                       gamma_M0=gammas["gamma_M0"], gamma_M1=gammas["gamma_M1"])
