"""The model file's [analysis] table: linear buckling and natural frequencies after the static run.

```toml
[analysis.buckling]
results = ["ULS"]          # cases or combinations (default: every combination)
modes = 3
min_factor = 3.0           # optional: report pass/fail against this factor
[analysis.frequencies]
modes = 6
mass = "consistent"        # or "lumped"
mass_from = "dead"         # optional: a case or combination's downward loads / g
min_frequency = "3 Hz"     # optional: report pass/fail (a plain number is Hz)
[analysis.nonlinear]
results = ["ULS"]          # cases or combinations: one load path each
max_load_factor = 1.0
initial_increment = 0.05   # optional: load factor of the first step
steps = 500                # steps allowed
tolerance = 1e-9           # optional: relative equilibrium residual per step
nodes = "apex"             # optional: a selection or node ids whose curve is drawn
[analysis.tension_only]
groups = ["BRACING"]       # members of these groups carry tension only
pretension = { BRACING = "5 kN" }   # optional, per group, in the drawn geometry
```

Results must be checked by a qualified engineer.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from spaceframe.errors import SpaceframeError, one_line
from spaceframe.project.schema import _MISSING

__all__ = ["NONLINEAR_METHOD", "AnalysisSpec", "Mode", "NonlinearSpec", "TensionOnlySpec",
           "TracedPath", "apply_analysis", "parse_analysis", "run_analyses",
           "run_analyses_with_modes", "run_nonlinear"]


@dataclass
class NonlinearSpec:
    """What [analysis.nonlinear] asks for (``node_ids`` resolved when the model is built)."""

    results: list[str]
    max_load_factor: float = 1.0
    initial_increment: float | None = None
    steps: int = 500
    tolerance: float | None = None
    nodes: Any = None
    nodes_where: str = ""
    node_ids: Any = None


@dataclass
class TensionOnlySpec:
    """What [analysis.tension_only] asks for: groups made tension-only, pretension in N."""

    groups: list[str]
    pretension: dict[str, float]


@dataclass
class AnalysisSpec:
    """What [analysis] asks for."""

    buckling: bool = False
    buckling_results: list[str] | None = None
    buckling_modes: int = 3
    min_factor: float | None = None
    frequencies: bool = False
    frequency_modes: int = 6
    mass: str = "consistent"
    mass_from: str | None = None
    min_frequency: float | None = None
    nonlinear: NonlinearSpec | None = None
    tension_only: TensionOnlySpec | None = None


def _frequency(ctx: Any, t: Any, key: str) -> float | None:
    value = t.raw(key, None)
    if value is None:
        return None
    if isinstance(value, str):
        text = value.strip()
        if not text.lower().endswith("hz"):
            ctx.fail(t.path(key), value, "expected a frequency such as \"3 Hz\"")
        try:
            f = float(text[:-2])
        except ValueError:
            ctx.fail(t.path(key), value, "expected a frequency such as \"3 Hz\"")
    elif isinstance(value, int | float) and not isinstance(value, bool):
        f = float(value)
    else:
        ctx.fail(t.path(key), value, "expected a frequency such as \"3 Hz\"")
    if not f > 0:
        ctx.fail(t.path(key), value, "must be positive")
    return f


def parse_analysis(ctx: Any, t: Any, cases: Any, combinations: Any) -> AnalysisSpec:
    """Read [analysis] with the model file's table reader (names checked against the file)."""
    spec = AnalysisSpec()
    if t is None:
        return spec
    t.expect({"buckling", "frequencies", "nonlinear", "tension_only"})
    known = set(cases) | set(combinations)
    b = t.table("buckling", None)
    if b is not None:
        b.expect({"results", "modes", "min_factor"})
        spec.buckling = True
        spec.buckling_results = _result_names(ctx, b, known)
        spec.buckling_modes = _count(ctx, b, "modes", 3)
        spec.min_factor = b.number("min_factor", None)
        if spec.min_factor is not None and spec.min_factor <= 0:
            ctx.fail(b.path("min_factor"), b.data["min_factor"], "must be positive")
    f = t.table("frequencies", None)
    if f is not None:
        f.expect({"modes", "mass", "mass_from", "min_frequency"})
        spec.frequencies = True
        spec.frequency_modes = _count(ctx, f, "modes", 6)
        spec.mass = f.text("mass", "consistent", choices=("consistent", "lumped"))
        spec.mass_from = f.text("mass_from", None)
        if spec.mass_from is not None and spec.mass_from not in known:
            ctx.fail(f.path("mass_from"), spec.mass_from,
                     "no load case or combination of that name")
        spec.min_frequency = _frequency(ctx, f, "min_frequency")
    spec.nonlinear = _parse_nonlinear(ctx, t.table("nonlinear", None), known)
    spec.tension_only = _parse_tension_only(ctx, t.table("tension_only", None))
    return spec


def _result_names(ctx: Any, t: Any, known: set[str], required: bool = False) -> list[str] | None:
    """``results``: a non-empty list of names of the file's cases and combinations."""
    res = t.raw("results", None)
    if res is None:
        if required:
            ctx.fail(t.path("results"), _MISSING, "missing: name the cases or combinations")
        return None
    if not isinstance(res, list) or not res or not all(isinstance(r, str) for r in res):
        ctx.fail(t.path("results"), res, "expected a list of case or combination names")
    for r in res:
        if r not in known:
            ctx.fail(t.path("results"), r, "no load case or combination of that name")
    return list(res)


def _positive_number(ctx: Any, t: Any, key: str, default: float | None) -> float | None:
    value = t.number(key, default)
    if value is not None and not value > 0:
        ctx.fail(t.path(key), t.data[key], "must be positive")
    return value


def _parse_nonlinear(ctx: Any, t: Any, known: set[str]) -> NonlinearSpec | None:
    """[analysis.nonlinear]: the load paths to trace and how."""
    if t is None:
        return None
    t.expect({"results", "max_load_factor", "initial_increment", "steps", "tolerance",
              "nodes"})
    spec = NonlinearSpec(results=_result_names(ctx, t, known, required=True) or [])
    spec.max_load_factor = float(_positive_number(ctx, t, "max_load_factor", 1.0) or 1.0)
    spec.initial_increment = _positive_number(ctx, t, "initial_increment", None)
    if spec.initial_increment is not None and spec.initial_increment > spec.max_load_factor:
        ctx.fail(t.path("initial_increment"), t.data["initial_increment"],
                 f"must not exceed max_load_factor ({spec.max_load_factor:g})")
    steps = t.raw("steps", 500)
    if isinstance(steps, bool) or not isinstance(steps, int) or not 1 <= steps <= 100_000:
        ctx.fail(t.path("steps"), steps, "expected a whole number from 1 to 100000")
    spec.steps = int(steps)
    spec.tolerance = _positive_number(ctx, t, "tolerance", None)
    if spec.tolerance is not None and spec.tolerance >= 1e-2:
        ctx.fail(t.path("tolerance"), t.data["tolerance"],
                 "expected a relative residual below 0.01 (such as 1e-9)")
    if t.has("nodes"):
        from spaceframe.project.selectors import _selector

        spec.nodes = _selector(ctx, t.path("nodes"), t.raw("nodes"))
        spec.nodes_where = t.path("nodes")
    return spec


def _parse_tension_only(ctx: Any, t: Any) -> TensionOnlySpec | None:
    """[analysis.tension_only]: member groups that carry tension only, and their pretension."""
    if t is None:
        return None
    t.expect({"groups", "pretension"})
    groups = t.raw("groups", [])
    if not isinstance(groups, list) or not all(isinstance(g, str) and g for g in groups):
        ctx.fail(t.path("groups"), groups, "expected a list of member group names")
    pre = t.table("pretension", None)
    forces: dict[str, float] = {}
    if pre is not None:
        for g in pre.data:
            forces[g] = pre.quantity(g, "force")
            if not forces[g] >= 0:
                ctx.fail(pre.path(g), pre.data[g], "a pretension must not be negative")
    if not groups and not forces:
        ctx.fail(t.path("groups"), _MISSING, "missing: name the tension-only groups")
    return TensionOnlySpec(groups=list(groups), pretension=forces)


def apply_analysis(spec: AnalysisSpec | None, model: Any, pick: Any, file: str) -> None:
    """Make [analysis.tension_only]'s groups tension-only with their pretension; resolve nodes.

    Called when the model is built, after the cable sections have set
    ``model.tension_only``.  ``pick(selector, target, where)`` evaluates a
    selection on the model.

    Raises
    ------
    ProjectError
        On a group the model does not have, naming the key.
    """
    from spaceframe.errors import ProjectError

    if spec is None:
        return
    t = spec.tension_only
    if t is not None:
        for key, names in (("groups", t.groups), ("pretension", list(t.pretension))):
            for g in names:
                if g not in model.groups:
                    raise ProjectError(f"{file}: analysis.tension_only.{key}: {g!r}: no member "
                                       "group of that name")
        for g in t.groups:
            model.set_member_properties(model.groups[g], tension_only=True)
        for g, force in t.pretension.items():
            model.set_member_properties(model.groups[g], pretension=force)
    n = spec.nonlinear
    if n is not None and n.nodes is not None:
        n.node_ids = pick(n.nodes, "nodes", n.nodes_where)


def _count(ctx: Any, t: Any, key: str, default: int) -> int:
    value = t.raw(key, default)
    if isinstance(value, bool) or not isinstance(value, int) or not 1 <= value <= 100:
        ctx.fail(t.path(key), value, "expected a whole number from 1 to 100")
    return int(value)


@dataclass
class Mode:
    """One mode shape found by [analysis], for the VTK writer.

    ``kind`` is "buckling" (``value`` the load factor, ``result`` the case or
    combination) or "frequency" (``value`` in Hz, ``result`` empty);
    ``number`` counts from 1; ``shape`` is (n_nodes, 3) as the solver gave it.
    """

    kind: str
    result: str
    number: int
    value: float
    shape: Any


#: EN 1993-1-1 §5.2.1(3), Eq. (5.1): first-order elastic global analysis may be
#: used when alpha_cr >= 10 (from memory: check the clause and the national annex).
ALPHA_CR_FIRST_ORDER = 10.0


def _reading(factor: float) -> str:
    """The lowest factor in plain words, against EN 1993-1-1 §5.2.1(3)."""
    if factor >= ALPHA_CR_FIRST_ORDER:
        return (f"the lowest buckling factor {factor:.3g} is at least {ALPHA_CR_FIRST_ORDER:g}: "
                "EN 1993-1-1 §5.2.1(3) (alpha_cr >= 10, from memory) lets a first-order elastic "
                "analysis stand for the design loads")
    return (f"the lowest buckling factor {factor:.3g} is below {ALPHA_CR_FIRST_ORDER:g}: "
            "EN 1993-1-1 §5.2.1(3) (alpha_cr >= 10, from memory) asks for second-order "
            "effects to be accounted for (a geometrically nonlinear analysis)")


def run_analyses(spec: AnalysisSpec, model: Any, results: Any,
                 solver: str = "auto") -> dict[str, Any]:
    """Run what [analysis] asks for; a summary block of plain numbers (SI, Hz).

    A result that cannot be analysed (no compression, a mechanism) is reported
    in the block with its one-line reason; it does not stop the run.
    """
    return run_analyses_with_modes(spec, model, results, solver)[0]


def run_analyses_with_modes(spec: AnalysisSpec, model: Any, results: Any,
                            solver: str = "auto") -> tuple[dict[str, Any], list[Mode]]:
    """:func:`run_analyses` and the mode shapes found, in the block's order."""
    from spaceframe.analysis.buckling import linear_buckling_many
    from spaceframe.analysis.vibration import natural_frequencies

    out: dict[str, Any] = {}
    found: list[Mode] = []
    if spec.buckling:
        names = spec.buckling_results or [
            n for n in results if getattr(results[n], "kind", "") == "combination"
        ] or list(results)
        block: dict[str, Any] = {}
        # One factorisation of the elastic stiffness for every result asked for.
        every = linear_buckling_many(model, [results[n] for n in names],
                                     n_modes=spec.buckling_modes, solver=solver, errors="keep")
        for name, b in zip(names, every, strict=True):
            if isinstance(b, SpaceframeError):
                block[name] = {"factors": [], "note": one_line(b)}
                continue
            entry: dict[str, Any] = {"factors": [float(x) for x in b.factors],
                                     "note": "; ".join(b.notes)}
            if spec.min_factor is not None and b.factors.size:
                entry["passes"] = bool(b.factors[0] >= spec.min_factor)
            block[name] = entry
            found += [Mode("buckling", name, k + 1, float(b.factors[k]), b.modes[k])
                      for k in range(b.factors.size)]
        lowest = [(v["factors"][0], n) for n, v in block.items() if v["factors"]]
        out["buckling"] = {
            "results": block,
            "lowest": None if not lowest else {"factor": min(lowest)[0], "result": min(lowest)[1]},
            "min_factor": spec.min_factor,
            "reading": _reading(min(lowest)[0]) if lowest else "",
            "method": "linear (eigenvalue) buckling on the undeformed geometry: a first-order "
                      "estimate that can overestimate shallow, imperfection-sensitive frames",
        }
    if spec.frequencies:
        try:
            f = natural_frequencies(model, n_modes=spec.frequency_modes, mass=spec.mass,
                                    mass_from=spec.mass_from, solver=solver)
            entry = {"frequencies_hz": [float(x) for x in f.frequencies],
                     "total_mass_kg": float(f.total_mass), "mass": spec.mass,
                     "note": "; ".join(f.notes)}
            if spec.min_frequency is not None and f.frequencies.size:
                entry["min_frequency_hz"] = spec.min_frequency
                entry["passes"] = bool(f.frequencies[0] >= spec.min_frequency)
            found += [Mode("frequency", "", k + 1, float(f.frequencies[k]), f.modes[k])
                      for k in range(f.frequencies.size)]
        except SpaceframeError as exc:
            entry = {"frequencies_hz": [], "note": one_line(exc)}
        out["frequencies"] = entry
    return out, found


#: Said of every load path in the summary and the report.
NONLINEAR_METHOD = ("co-rotational bar analysis with engineering strain N = EA (l - L0)/L0, "
                    "followed by the cylindrical arc-length method; results must be checked "
                    "by a qualified engineer")

#: Slack members and curve nodes listed by id in the summary (the counts are always given).
SLACK_SHOWN = 10


@dataclass
class TracedPath:
    """One load path of [analysis.nonlinear] with what the outputs need.

    ``path`` is None when the analysis could not start; ``nodes`` are the
    nodes whose load-displacement curve is drawn; ``stopped`` is the one-line
    reason the path ended early ("" when it reached ``max_load_factor``).
    """

    name: str
    path: Any
    nodes: Any
    stopped: str = ""


def _path_entry(t: TracedPath, chosen: str) -> dict[str, Any]:
    """The summary of one traced path: plain numbers, SI units."""
    import numpy as np

    p = t.path
    last = np.linalg.norm(p.displacements[-1], axis=1)
    peak = int(np.argmax(last)) if last.size else 0
    slack = np.flatnonzero(p.slack[-1]) if p.slack.size else np.zeros(0, dtype=int)
    return {
        "kind": p.kind,
        "strain_measure": p.strain_measure,
        "steps": p.n_steps - 1,
        "max_load_factor": float(p.max_load_factor),
        "final_load_factor": float(p.load_factors[-1]),
        "limit_points": [{"step": int(k), "load_factor": float(p.load_factors[k])}
                         for k in p.limit_points],
        "bifurcation_points": [{"step": int(k), "load_factor": float(p.load_factors[k])}
                               for k in p.bifurcation_points],
        "nodes": [int(i) for i in t.nodes[:SLACK_SHOWN]],
        "node_count": len(t.nodes),
        "nodes_chosen": chosen,
        "max_displacement": {"value": float(last[peak]) if last.size else 0.0, "node": peak},
        "slack": {"count": int(slack.size), "members": [int(i) for i in slack[:SLACK_SHOWN]]},
        "cutbacks": int(p.cutbacks),
        "max_residual": float(np.max(p.residuals)) if p.residuals.size else 0.0,
        "stopped": t.stopped,
    }


def run_nonlinear(spec: AnalysisSpec, model: Any,
                  progress: Any = None) -> tuple[dict[str, Any], list[TracedPath]]:
    """Trace the load paths of [analysis.nonlinear]; the summary block and the paths.

    ``progress(text)`` is told every converged step ("nonlinear ULS: step
    12, load factor 0.84").  A path that stops early (``PathError``) keeps
    the steps converged up to there, with the one-line reason; one that
    cannot start (a mechanism, a refused load case) is reported with its
    reason and no path.  Neither stops the run.
    """
    import numpy as np

    from spaceframe.analysis.nonlinear import PathError, solve_nonlinear

    n = spec.nonlinear
    if n is None:
        return {}, []
    options: dict[str, Any] = {"max_steps": n.steps}
    if n.initial_increment is not None:
        options["initial_increment"] = n.initial_increment
    if n.tolerance is not None:
        options["tolerance"] = n.tolerance
    block: dict[str, Any] = {}
    traced: list[TracedPath] = []
    path: Any
    for name in n.results:
        def told(step: int, lam: float, name: str = name) -> None:
            if progress is not None:
                progress(f"nonlinear {name}: step {step}, load factor {lam:.3g}")

        stopped = ""
        try:
            path = solve_nonlinear(model, name, n.max_load_factor, progress=told, **options)
        except PathError as exc:
            path, stopped = exc.path, one_line(exc)
        except SpaceframeError as exc:
            path, stopped = None, one_line(exc)
        if path is None:
            block[name] = {"steps": 0, "stopped": stopped}
            continue
        if n.node_ids is not None:
            nodes, chosen = np.asarray(n.node_ids, dtype=np.int64), "given"
        else:
            moved = np.linalg.norm(path.displacements[-1], axis=1)
            nodes = np.array([int(np.argmax(moved))] if moved.size else [], dtype=np.int64)
            chosen = "largest displacement at the last step"
        t = TracedPath(name, path, nodes, stopped)
        block[name] = _path_entry(t, chosen)
        traced.append(t)
    return {"method": NONLINEAR_METHOD, "results": block}, traced


def path_phrases(entry: dict[str, Any]) -> tuple[str, str]:
    """A load path's summary entry in words: its limit points, and where it ended.

    For the command line and the report alike, e.g. ("a limit load factor of
    1.23 at step 5; then -1.23 at step 9", "reached load factor 1").
    """
    from spaceframe.results.summary import format_number

    said = "; then ".join(f"{format_number(x['load_factor'])} at step {x['step']}"
                          for x in entry["limit_points"])
    said = f"a limit load factor of {said}" if said else "no limit point"
    at = f"load factor {format_number(entry['final_load_factor'])}"
    end = f"stopped early at {at}: {entry['stopped']}" if entry["stopped"] else f"reached {at}"
    return said, end

