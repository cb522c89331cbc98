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
```

Results must be checked by a qualified engineer.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from spaceframe.errors import SpaceframeError, one_line

__all__ = ["AnalysisSpec", "Mode", "parse_analysis", "run_analyses", "run_analyses_with_modes"]


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
    t.expect({"buckling", "frequencies"})
    known = set(cases) | set(combinations)
    b = t.table("buckling", None)
    if b is not None:
        b.expect({"results", "modes", "min_factor"})
        spec.buckling = True
        res = b.raw("results", None)
        if res is not None:
            if not isinstance(res, list) or not res or not all(isinstance(r, str) for r in res):
                ctx.fail(b.path("results"), res, "expected a list of case or combination names")
            for r in res:
                if r not in known:
                    ctx.fail(b.path("results"), r, "no load case or combination of that name")
            spec.buckling_results = list(res)
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
    return spec


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
    from spaceframe.analysis.buckling import linear_buckling
    from spaceframe.analysis.vibration import natural_frequencies

    out: dict[str, Any] = {}
    found: list[Mode] = []
    if spec.buckling:
        names = spec.buckling_results or [
            n for n in results if getattr(results[n], "kind", "") == "combination"
        ] or list(results)
        block: dict[str, Any] = {}
        for name in names:
            try:
                b = linear_buckling(model, results[name], n_modes=spec.buckling_modes,
                                    solver=solver)
            except SpaceframeError as exc:
                block[name] = {"factors": [], "note": one_line(exc)}
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
