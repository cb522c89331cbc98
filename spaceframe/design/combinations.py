"""Load combinations generated from actions, EN 1990:2002 §6.4.3.2 and §6.5.3.

The partial factors default to the recommended values of EN 1990 Annex A1
Table A1.2(B) (buildings, set B): γ_G,sup = 1.35, γ_G,inf = 1.00,
γ_Q = 1.50 (0 where favourable), ξ = 0.85 for Eq. (6.10b).  National annexes
change them, so every one is an argument.  The ψ factors are the user's, per
action (EN 1990 Table A1.1 gives recommended values for buildings).
"""

from __future__ import annotations

import itertools
from collections.abc import Iterable
from dataclasses import dataclass

from spaceframe.errors import ModelError

__all__ = ["Action", "GeneratedCombination", "generate_combinations"]


@dataclass(frozen=True)
class Action:
    """A load case declared as an action, with its ψ factors."""

    #: The load case holding the action's characteristic value.
    case: str
    #: "permanent" or "variable".
    kind: str = "permanent"
    #: Combination factor ψ0 of a variable action.
    psi0: float = 1.0
    #: Frequent factor ψ1 of a variable action.
    psi1: float = 1.0
    #: Quasi-permanent factor ψ2 of a variable action.
    psi2: float = 1.0

    def __post_init__(self) -> None:
        if self.kind not in ("permanent", "variable"):
            raise ModelError(
                f"action {self.case!r}: kind {self.kind!r} must be 'permanent' or 'variable'"
            )
        for label in ("psi0", "psi1", "psi2"):
            v = getattr(self, label)
            if isinstance(v, bool) or not isinstance(v, int | float) or not 0.0 <= v <= 1.0:
                raise ModelError(f"action {self.case!r}: {label} = {v!r} must lie in 0..1")


@dataclass(frozen=True)
class GeneratedCombination:
    """One generated combination: its name, case factors, set and leading action."""

    name: str
    factors: dict[str, float]
    kind: str
    leading: str | None


def _variable_patterns(
    variables: list[Action], lead: float | str, other: str, unled: bool = False
) -> Iterable[tuple[str | None, dict[str, float]]]:
    """Leading action (or none) and factors of every variable-action pattern.

    ``lead`` is the leading action's factor (a number) or the name of its ψ;
    ``other`` names the ψ of the accompanying actions ("" for no accompanying
    actions at all).  Each accompanying action is present or absent (an
    action is left out where it is favourable).  Without a leading action
    only the pattern with no variable action is made, unless ``unled``
    (Eq. 6.10a, where every variable action takes its combination value).
    """
    leads: list[Action | None] = [None, *variables]
    for leading in leads:
        rest = [v for v in variables if v is not leading]
        if leading is None and not unled:
            yield None, {}
            continue
        for present in itertools.product((False, True), repeat=len(rest)):
            f: dict[str, float] = {}
            if leading is not None:
                f[leading.case] = float(getattr(leading, lead)) if isinstance(lead, str) else lead
            for v, on in zip(rest, present, strict=True):
                if on and other:
                    f[v.case] = float(getattr(v, other))
            yield (None if leading is None else leading.case), f


def generate_combinations(
    actions: Iterable[Action],
    *,
    ultimate: str = "6.10",
    serviceability: Iterable[str] = ("characteristic", "frequent", "quasi-permanent"),
    gamma_G_sup: float = 1.35,
    gamma_G_inf: float = 1.0,
    gamma_Q: float = 1.5,
    xi: float = 0.85,
    prefix: str = "",
) -> list[GeneratedCombination]:
    """Every combination of the ultimate and serviceability sets, without duplicates.

    Ultimate (persistent and transient, EN 1990 §6.4.3.2):

    - "6.10": Σ γ_G G_j + γ_Q Q_1 + Σ γ_Q ψ_0,i Q_i
    - "6.10ab": the pair (6.10a) Σ γ_G G_j + Σ γ_Q ψ_0,i Q_i and
      (6.10b) Σ ξ γ_G,sup G_j + γ_Q Q_1 + Σ γ_Q ψ_0,i Q_i (favourable
      permanent actions keep γ_G,inf).

    Each permanent action takes γ_G,sup or γ_G,inf (unfavourable or
    favourable, Table A1.2(B) Note 3, treated as independent sources); each
    variable action leads in turn, accompanies, or is left out where
    favourable (factor 0); the permanent-only combination is included.

    Serviceability (§6.5.3): "characteristic" (6.14b) G + Q_1 + Σ ψ_0,i Q_i;
    "frequent" (6.15b) G + ψ_1,1 Q_1 + Σ ψ_2,i Q_i; "quasi-permanent"
    (6.16b) G + Σ ψ_2,i Q_i.

    Returns
    -------
    list of GeneratedCombination
        Named ``ULS 1``, ``ULS 2``, … and ``SLS-char 1``, … (with ``prefix``).

    Raises
    ------
    ModelError
        On no actions, a repeated case, an unknown set or a bad factor.
    """
    acts = list(actions)
    _check_inputs(acts, ultimate, gamma_G_sup=gamma_G_sup, gamma_G_inf=gamma_G_inf,
                  gamma_Q=gamma_Q, xi=xi)
    perm = [a for a in acts if a.kind == "permanent"]
    var = [a for a in acts if a.kind == "variable"]
    out = _Combinations(prefix)
    _ultimate(out, ultimate, perm, var, gamma_G_sup=gamma_G_sup, gamma_G_inf=gamma_G_inf,
              gamma_Q=gamma_Q, xi=xi)
    _serviceability(out, serviceability, perm, var)
    return out.combinations


def _check_inputs(acts: list[Action], ultimate: str, **factors: float) -> None:
    """Raise ModelError on no actions, a repeated case, a bad factor or ultimate set."""
    if not acts:
        raise ModelError("generate_combinations: no actions given")
    cases = [a.case for a in acts]
    if len(set(cases)) != len(cases):
        dup = next(c for c in cases if cases.count(c) > 1)
        raise ModelError(f"generate_combinations: case {dup!r} is declared twice")
    for label, v in factors.items():
        if not (isinstance(v, int | float) and v >= 0):
            raise ModelError(f"generate_combinations: {label} = {v!r} must be a number >= 0")
    if ultimate not in ("6.10", "6.10ab", ""):
        raise ModelError(
            f"generate_combinations: ultimate = {ultimate!r} must be '6.10', '6.10ab' or ''"
        )


class _Combinations:
    """The combinations made so far, numbered per label, each set of factors once."""

    def __init__(self, prefix: str) -> None:
        self.prefix = prefix
        self.combinations: list[GeneratedCombination] = []
        self.seen: set[tuple[str, tuple[tuple[str, float], ...]]] = set()

    def add(self, kind: str, label: str, factors: dict[str, float], leading: str | None) -> None:
        clean = {c: round(f, 12) for c, f in factors.items() if f != 0.0}
        key = (label, tuple(sorted(clean.items())))
        if not clean or key in self.seen:
            return
        self.seen.add(key)
        prefix = self.prefix
        count = sum(1 for g in self.combinations if g.name.startswith(f"{prefix}{label} "))
        self.combinations.append(
            GeneratedCombination(f"{prefix}{label} {count + 1}", clean, kind, leading)
        )


def _permanents(perm: list[Action], sup: float, inf: float) -> Iterable[dict[str, float]]:
    """Factors of every permanent action, each unfavourable (``sup``) or favourable."""
    for choice in itertools.product((sup, inf), repeat=len(perm)):
        yield {a.case: g for a, g in zip(perm, choice, strict=True)}


def _led(out: _Combinations, kind: str, perm: list[Action], var: list[Action], sup: float,
         inf: float, gamma_Q: float) -> None:
    """Eq. (6.10) / (6.10b): each variable action leads at γ_Q, the others at γ_Q ψ_0."""
    for g in _permanents(perm, sup, inf):
        for lead, f in _variable_patterns(var, gamma_Q, "psi0"):
            q = {c: (v * gamma_Q if c != lead else v) for c, v in f.items()}
            out.add(kind, "ULS", {**g, **q}, lead)


def _ultimate(out: _Combinations, ultimate: str, perm: list[Action], var: list[Action], *,
              gamma_G_sup: float, gamma_G_inf: float, gamma_Q: float, xi: float) -> None:
    """The ultimate set "6.10" or "6.10ab" ("" for none)."""
    if ultimate == "6.10":
        _led(out, "ULS 6.10", perm, var, gamma_G_sup, gamma_G_inf, gamma_Q)
    elif ultimate == "6.10ab":
        for g in _permanents(perm, gamma_G_sup, gamma_G_inf):
            for _lead, f in _variable_patterns(var, 0.0, "psi0", unled=True):
                q = {c: v * gamma_Q for c, v in f.items()}
                out.add("ULS 6.10a", "ULS", {**g, **q}, None)
        _led(out, "ULS 6.10b", perm, var, xi * gamma_G_sup, gamma_G_inf, gamma_Q)


#: Serviceability set -> (leading factor or its ψ, ψ of the others, label).
_SERVICEABILITY: dict[str, tuple[float | str, str, str]] = {
    "characteristic": (1.0, "psi0", "SLS-char"),
    "frequent": ("psi1", "psi2", "SLS-freq"),
    "quasi-permanent": (0.0, "psi2", "SLS-qp"),
}


def _serviceability(out: _Combinations, serviceability: Iterable[str], perm: list[Action],
                    var: list[Action]) -> None:
    """The serviceability sets named, in order (§6.5.3)."""
    for name in serviceability:
        if name not in _SERVICEABILITY:
            raise ModelError(
                f"generate_combinations: serviceability set {name!r} must be one of "
                f"{', '.join(_SERVICEABILITY)}"
            )
        lead_f, other, label = _SERVICEABILITY[name]
        g1 = {a.case: 1.0 for a in perm}
        for lead, f in _variable_patterns(var, lead_f, other, unled=(name == "quasi-permanent")):
            out.add(f"SLS {name}", label, {**g1, **f}, lead)
