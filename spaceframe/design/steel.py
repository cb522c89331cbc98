"""Axial resistance of steel members to EN 1993-1-1:2005 (tension, compression, buckling).

Every formula names its clause.  The partial factors default to the
recommended values of EN 1993-1-1 §6.1 Note 2B (γ_M0 = γ_M1 = 1.00,
γ_M2 = 1.25); national annexes change them, so they are arguments and every
report states the values used.

Only member resistance to axial force is checked.  Joints, connections, local
effects, fatigue, fire and the national annex are the engineer's, and the
results must be checked by a qualified engineer.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ModelError

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = [
    "IMPERFECTION_FACTORS",
    "SLENDERNESS_COMPRESSION",
    "SLENDERNESS_TENSION",
    "MemberCheck",
    "buckling_curve_for",
    "buckling_reduction",
    "check_members",
]

#: Imperfection factor α per buckling curve, EN 1993-1-1 Table 6.1.
IMPERFECTION_FACTORS: dict[str, float] = {"a0": 0.13, "a": 0.21, "b": 0.34, "c": 0.49, "d": 0.76}

#: Default slenderness limits λ = L_cr/i (common practice, not a clause of
#: EN 1993-1-1): struts 180, ties and tension-only members 400.
SLENDERNESS_COMPRESSION = 180.0
SLENDERNESS_TENSION = 400.0

#: Check names, in the order of the ``governing`` codes.
CHECKS = (
    "none",
    "tension (6.6)",
    "net section (6.7)",
    "compression (6.10)",
    "flexural buckling (6.47)",
    "cable tension",
    "cable in compression",
    "compression, buckling not checked: no second moment",
)
#: Codes of the two checks that fail whatever the utilisation.
_CABLE_COMPRESSION = CHECKS.index("cable in compression")
_NOT_CHECKED = CHECKS.index("compression, buckling not checked: no second moment")


def _imperfection(curve: Any) -> tuple[np.ndarray, np.ndarray]:
    """The distinct curve names, and alpha (Table 6.1) per entry, NaN for an unknown name.

    Curves are compared as text once per distinct name, not once per member.
    """
    text = np.asarray(curve, dtype=object).astype(str)
    names, inverse = np.unique(text, return_inverse=True)
    table = np.array([IMPERFECTION_FACTORS.get(n, np.nan) for n in names.tolist()])
    return names, table[inverse].reshape(text.shape) if names.size else np.zeros(text.shape)


def buckling_reduction(lambda_bar: Any, curve: Any) -> np.ndarray:
    """Reduction factor χ for flexural buckling, EN 1993-1-1 Eq. (6.49).

    χ = 1 / (Φ + sqrt(Φ² − λ̄²)) with Φ = 0.5 [1 + α (λ̄ − 0.2) + λ̄²] and
    χ ≤ 1, α from Table 6.1 for the curve.

    Parameters
    ----------
    lambda_bar : float or array
        Non-dimensional slenderness λ̄ ≥ 0.
    curve : str or array of str
        Buckling curve "a0", "a", "b", "c" or "d" (one, or one per λ̄).

    Returns
    -------
    chi : ndarray
        Same shape as ``lambda_bar`` broadcast against ``curve``.

    Raises
    ------
    ModelError
        On an unknown curve or a negative or non-finite slenderness.
    """
    lam = np.asarray(lambda_bar, dtype=float)
    names, alpha = _imperfection(curve)
    unknown = names[~np.isin(names, list(IMPERFECTION_FACTORS))]
    if unknown.size:
        raise ModelError(
            f"buckling curve {str(unknown[0])!r} is not one of "
            f"{', '.join(IMPERFECTION_FACTORS)} (EN 1993-1-1 Table 6.1)"
        )
    bad = ~np.isfinite(lam) | (lam < 0)
    if np.any(bad):
        raise ModelError(
            f"slenderness {float(lam[bad].ravel()[0])!r} must be a non-negative finite number"
        )
    phi = 0.5 * (1.0 + alpha * (lam - 0.2) + lam**2)
    chi = 1.0 / (phi + np.sqrt(np.maximum(phi**2 - lam**2, 0.0)))
    return np.minimum(chi, 1.0)


def buckling_curve_for(shape: str, fabrication: str = "hot", yield_strength: float = 355e6) -> str:
    """Buckling curve of a section, EN 1993-1-1 Table 6.2 (shapes this tool builds).

    Hollow sections (chs, rhs, shs): hot finished "a" for S235 to S420 and
    "a0" for S460; cold formed "c" for any grade.  Solid bars: "c".

    Raises
    ------
    ModelError
        For a shape Table 6.2 does not cover here (user sections, cables):
        the user states the curve.
    """
    if shape in ("chs", "rhs", "shs"):
        if fabrication == "cold":
            return "c"
        if fabrication != "hot":
            raise ModelError(
                f"fabrication {fabrication!r} must be 'hot' (hot finished) or 'cold' (cold formed)"
            )
        return "a0" if yield_strength >= 460e6 else "a"
    if shape == "bar":
        return "c"
    raise ModelError(
        f"no buckling curve for a {shape!r} section from EN 1993-1-1 Table 6.2: give one "
        "of a0, a, b, c, d"
    )


class MemberCheck:
    """Axial checks of every member for one result (SI, tension positive).

    A check keeps only its utilisation and governing-check codes; the other
    per-member figures are worked out when asked for, from the resistances
    shared by every result of the model and the result's axial forces (the
    result is referenced, not copied: change its forces and they follow).

    Attributes
    ----------
    result : str
        Name of the result checked.
    utilisation : (b,) float
        Demand over design resistance of the governing check.
    governing : (b,) int8
        Index into :data:`CHECKS` of the governing check.
    resistance : (b,) float
        Design resistance, N, for the member's governing force sign
        (N_t,Rd or N_b,Rd; the cable resistance for tension-only members).
    demand : (b,) float
        The governing axial force, N (signed).
    chi : (b,) float
        Buckling reduction χ (NaN where I is unknown).
    lambda_bar : (b,) float
        Non-dimensional slenderness λ̄ (§6.3.1.3 (6.50)).
    slenderness : (b,) float
        λ = L_cr / i.
    slenderness_limit : (b,) float
        The limit applied for the governing force sign.
    gamma : dict
        Partial factors used.
    """

    def __init__(self, result: str, utilisation: np.ndarray, governing: np.ndarray,
                 resistances: _Resistances, forces: Any) -> None:
        self.result = result
        self.utilisation = utilisation
        self.governing = governing
        self.gamma = dict(resistances.gamma)
        self._r = resistances
        self._forces = forces

    def __repr__(self) -> str:
        return f"MemberCheck(result={self.result!r}, members={self.utilisation.size})"

    def _compression(self, rows: Any = None, out: np.ndarray | None = None) -> np.ndarray:
        """(b,) bool (or at ``rows``; all into ``out`` if given): the compression check governs.

        A member's tension and compression codes differ, and an idle member's
        code (0) is neither, so the code tells the sign.
        """
        if rows is None:
            return np.equal(self.governing, self._r.comp_code, out=out)
        return self.governing[rows] == self._r.comp_code[rows]

    @property
    def chi(self) -> np.ndarray:
        """(b,) float: buckling reduction χ, shared by every result (NaN without I)."""
        return self._r.chi

    @property
    def lambda_bar(self) -> np.ndarray:
        """(b,) float: non-dimensional slenderness λ̄, shared by every result."""
        return self._r.lambda_bar_shown

    @property
    def slenderness(self) -> np.ndarray:
        """(b,) float: λ = L_cr / i, shared by every result."""
        return self._r.slenderness_shown

    @property
    def resistance(self) -> np.ndarray:
        """(b,) float: design resistance for the governing sign, N."""
        return self.at()["resistance"]

    @property
    def demand(self) -> np.ndarray:
        """(b,) float: the governing axial force, N (signed)."""
        return self.at()["demand"]

    @property
    def slenderness_limit(self) -> np.ndarray:
        """(b,) float: the slenderness limit for the governing sign."""
        return self.at()["slenderness_limit"]

    def at(self, rows: Any = None) -> dict[str, np.ndarray]:
        """Resistance, demand and slenderness limit of the members ``rows`` (default all).

        Returns
        -------
        dict
            ``resistance``, ``demand`` and ``slenderness_limit``, each an
            array with one value per row, as the attributes of those names.
        """
        r = self._r
        comp = self._compression(rows)
        high, low = _forces_of(self._forces)
        if rows is not None:
            high, low = high[rows], None if low is None else low[rows]
        tension, compression = _demands(high, low)

        def pick(c_value: np.ndarray, t_value: np.ndarray) -> np.ndarray:
            if rows is None:
                return np.where(comp, c_value, t_value)
            return np.where(comp, c_value[rows], t_value[rows])

        return {
            "resistance": pick(r.res_c, r.res_t),
            "demand": np.where(comp, -compression, tension),
            # Slenderness λ = L_cr/i against the limit for the governing sign.
            "slenderness_limit": pick(r.lim_c, r.lim_t),
        }

    def _by_sign(self, table_t: np.ndarray, table_c: np.ndarray,
                 scratch: tuple[np.ndarray, np.ndarray] | None = None) -> np.ndarray:
        """(b,) bool: per member ``table_c`` where compression governs, else ``table_t``.

        Into the second of the two (b,) bool ``scratch`` arrays, if given.
        """
        comp, out = scratch if scratch is not None else (None, None)
        comp = self._compression(out=comp)
        if out is None:
            return np.where(comp, table_c, table_t)
        np.copyto(out, table_t)
        np.copyto(out, table_c, where=comp)
        return out

    @property
    def slenderness_ok(self) -> np.ndarray:
        """(b,) bool: λ within its limit (members with no limit pass)."""
        return ~self._by_sign(self._r.too_slender_t, self._r.too_slender_c)

    @property
    def unchecked(self) -> np.ndarray:
        """(b,) bool: members in compression whose buckling could not be checked."""
        return self.governing == _NOT_CHECKED

    @property
    def passes(self) -> np.ndarray:
        """(b,) bool: every check passed (unchecked buckling and cable compression fail)."""
        return self._and_passes(np.ones(self.utilisation.shape, dtype=bool))

    def _and_passes(self, ok: np.ndarray, scratch: tuple[np.ndarray, np.ndarray] | None = None
                    ) -> np.ndarray:
        """``ok &= passes`` in place, through two (b,) bool ``scratch`` arrays if given."""
        if scratch is None:
            scratch = (np.empty_like(ok), np.empty_like(ok))
        fail = self._by_sign(self._r.fails_t, self._r.fails_c, scratch)
        ok &= np.invert(fail, out=fail)
        ok &= np.less_equal(self.utilisation, 1.0, out=fail)
        return ok

    @property
    def failing(self) -> np.ndarray:
        """Member ids that fail any check."""
        return np.flatnonzero(~self.passes)

    def check_name(self, member: int) -> str:
        """The governing check of one member, in words."""
        return CHECKS[int(self.governing[member])]


def _forces_of(result: Any) -> tuple[np.ndarray, np.ndarray | None]:
    """(axial force or largest force, None or smallest force) of a result or an envelope.

    Each attribute is read once: it may be worked out when read.
    """
    high = getattr(result, "axial_max", None)
    if high is not None:
        return np.asarray(high, dtype=float), np.asarray(result.axial_min, dtype=float)
    forces = getattr(result, "axial_forces", None)
    if forces is not None:
        return np.asarray(forces, dtype=float), None
    raise ModelError(
        f"check_members: {type(result).__name__} is not a static result or an envelope"
    )


def _demands(high: np.ndarray, low: np.ndarray | None,
             out: tuple[np.ndarray, np.ndarray] | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Largest tension and largest compression (both ≥ 0) per member.

    From the forces ``high`` and ``low`` of :func:`_forces_of`; into the two
    arrays ``out``, if given.
    """
    t_out, c_out = out if out is not None else (None, None)
    tension = np.maximum(high, 0.0, out=t_out)
    compression = np.negative(high if low is None else low, out=c_out)
    np.maximum(compression, 0.0, out=compression)
    # Both are ≥ 0 or NaN, and a maximum keeps a NaN: two reductions, no mask.
    if not (np.isfinite(tension.max(initial=0.0))
            and np.isfinite(compression.max(initial=0.0))):
        raise ModelError("check_members: the result holds non-finite axial forces")
    return tension, compression


def _member_property(model: Model, name: str, default: float) -> np.ndarray:
    value = getattr(model, name, None)
    if value is None:
        return np.full(model.n_members, default)
    return np.asarray(value)


def _require(model: Model, missing: np.ndarray, kind: str, what: str, fix: str) -> None:
    """Raise ModelError naming the first member in ``missing`` ((b,) bool) and the count."""
    if missing.any():
        i = int(np.argmax(missing))  # the first member flagged
        raise ModelError(f"check_members: {kind} {i}{model._group_text(i)} has no {what} "
                         f"({int(missing.sum())} members without one); {fix}")


@dataclass
class _Resistances:
    """A model's member resistances (those of :func:`check_members`), shared by its results.

    Per member, for a member in tension (t) or in compression (c): the
    resistance, the code of the governing check (:data:`CHECKS`) and the
    slenderness limit; then χ, λ̄ and λ as shown (NaN without a second moment).
    """

    res_t: np.ndarray
    res_c: np.ndarray
    ten_code: np.ndarray
    comp_code: np.ndarray
    lim_t: np.ndarray
    lim_c: np.ndarray
    chi: np.ndarray
    lambda_bar_shown: np.ndarray
    slenderness_shown: np.ndarray
    gamma: dict[str, float]
    too_slender_t: np.ndarray = field(init=False, repr=False)
    too_slender_c: np.ndarray = field(init=False, repr=False)
    fails_t: np.ndarray = field(init=False, repr=False)
    fails_c: np.ndarray = field(init=False, repr=False)

    def __post_init__(self) -> None:
        # Per member and governing sign: λ above its limit; and any check
        # failing whatever the utilisation (the slenderness, a cable in
        # compression, buckling not checked).  Every result reads them.
        with np.errstate(invalid="ignore"):
            self.too_slender_t = self.slenderness_shown > self.lim_t
            self.too_slender_c = self.slenderness_shown > self.lim_c
        self.fails_t = self.too_slender_t
        self.fails_c = self.too_slender_c | np.isin(
            self.comp_code, [_CABLE_COMPRESSION, _NOT_CHECKED])
        for name in ("chi", "lambda_bar_shown", "slenderness_shown", "res_t", "res_c",
                     "ten_code", "comp_code", "lim_t", "lim_c", "too_slender_t",
                     "too_slender_c", "fails_c"):
            getattr(self, name).flags.writeable = False  # shared by every result's check


def _resistances(model: Model, gamma_M0: float = 1.0, gamma_M1: float = 1.0,
                 gamma_M2: float = 1.25, gamma_cable: float = 1.5) -> _Resistances:
    """Every member's resistances: they do not depend on the result checked."""
    for label, g in (("gamma_M0", gamma_M0), ("gamma_M1", gamma_M1), ("gamma_M2", gamma_M2),
                     ("gamma_cable", gamma_cable)):
        if not (np.isfinite(g) and g > 0):
            raise ModelError(f"check_members: {label} = {g!r} must be a positive number")
    b = model.n_members
    area = np.asarray(model.area, dtype=float)
    e_mod = np.asarray(model.E, dtype=float)
    length = model.lengths
    fy = _member_property(model, "yield_strength", np.nan).astype(float)
    fu = _member_property(model, "ultimate_strength", np.nan).astype(float)
    inertia = _member_property(model, "second_moment", np.nan).astype(float)
    factor = _member_property(model, "buckling_length_factor", 1.0).astype(float)
    net = _member_property(model, "net_area_factor", 1.0).astype(float)
    tension_only = _member_property(model, "tension_only", 0.0).astype(bool)
    breaking = _member_property(model, "breaking_force", np.nan).astype(float)
    curve = _member_property(model, "buckling_curve", np.nan).astype(object)
    limit_c = _member_property(model, "slenderness_limit", np.nan).astype(float)

    steel = ~tension_only
    _require(model, steel & ~np.isfinite(fy), "member", "yield strength",
             "set it with set_member_properties(yield_strength=...) or a material with a "
             "yield strength")
    _require(model, tension_only & ~np.isfinite(breaking), "tension-only member",
             "breaking force", "set breaking_force")

    with np.errstate(invalid="ignore", divide="ignore"):
        # Tension: (6.6) and, with a net-area factor below 1, (6.7).
        n_pl = area * fy / gamma_M0
        n_u = 0.9 * net * area * fu / gamma_M2
        use_net = steel & (net < 1.0) & np.isfinite(n_u)
        n_t = np.where(use_net, np.minimum(n_pl, n_u), n_pl)
        net_governs = use_net & (n_u < n_pl)
        # Compression: (6.10) cross-section and (6.47) flexural buckling.
        radius = np.sqrt(inertia / area)
        l_cr = factor * length
        lam = l_cr / radius
        lambda_1 = np.pi * np.sqrt(e_mod / fy)
        lam_bar = lam / lambda_1
    has_i = np.isfinite(inertia) & (inertia > 0) & steel
    chi = np.full(b, np.nan)
    if np.any(has_i):
        curves_known = np.isfinite(_imperfection(curve[has_i])[1])
        if not np.all(curves_known):
            i = int(np.flatnonzero(has_i)[np.flatnonzero(~curves_known)[0]])
            raise ModelError(
                f"check_members: member {i}{model._group_text(i)} has no buckling curve "
                f"(got {curve[i]!r}); set buckling_curve to one of a0, a, b, c, d"
            )
        chi[has_i] = buckling_reduction(lam_bar[has_i], curve[has_i])
    n_b = chi * area * fy / gamma_M1
    n_c = np.where(has_i, np.minimum(n_b, n_pl), n_pl)
    buckling_governs = has_i & (n_b < n_pl)
    f_rd = breaking / gamma_cable

    code = CHECKS.index
    # The limits for the governing sign (common-practice defaults where the
    # user gave none); cables and members without a second moment are exempt.
    exempt = tension_only | ~has_i
    return _Resistances(
        res_t=np.where(tension_only, f_rd, n_t),
        res_c=np.where(tension_only, f_rd, n_c),
        ten_code=np.where(
            tension_only, code("cable tension"),
            np.where(net_governs, code("net section (6.7)"), code("tension (6.6)")),
        ).astype(np.int8),
        comp_code=np.where(
            tension_only, code("cable in compression"),
            np.where(~has_i, code("compression, buckling not checked: no second moment"),
                     np.where(buckling_governs, code("flexural buckling (6.47)"),
                              code("compression (6.10)"))),
        ).astype(np.int8),
        lim_t=np.where(exempt, np.inf, SLENDERNESS_TENSION),
        lim_c=np.where(exempt, np.inf, np.where(np.isfinite(limit_c), limit_c,
                                                SLENDERNESS_COMPRESSION)),
        chi=chi,
        lambda_bar_shown=np.where(has_i, lam_bar, np.nan),
        slenderness_shown=np.where(has_i, lam, np.nan),
        gamma={"gamma_M0": gamma_M0, "gamma_M1": gamma_M1, "gamma_M2": gamma_M2,
               "gamma_cable": gamma_cable})


def check_members(
    model: Model,
    result: Any,
    *,
    gamma_M0: float = 1.0,
    gamma_M1: float = 1.0,
    gamma_M2: float = 1.25,
    gamma_cable: float = 1.5,
) -> MemberCheck:
    """Check every member's axial resistance for one result.

    Tension, §6.2.3: N_t,Rd = A f_y / γ_M0 (6.6), and where the member has a
    net-area factor below 1, N_u,Rd = 0.9 A_net f_u / γ_M2 (6.7); the smaller.
    Compression, §6.2.4 (6.10): N_c,Rd = A f_y / γ_M0, and flexural buckling
    §6.3.1.1 (6.47): N_b,Rd = χ A f_y / γ_M1 with χ from (6.49) and
    λ̄ = L_cr / (i λ_1), λ_1 = π sqrt(E / f_y) (§6.3.1.3 (6.50)); L_cr is the
    member's buckling-length factor times its length.  Tension-only members
    and cables: tension only, against breaking force / γ_cable (γ_cable = 1.5
    by default, from memory of EN 1993-1-11 §6.2 with γ_R = 1.0: check it);
    compression in one of them is its own failure, "cable in compression".

    Parameters
    ----------
    model : Model
        With area, E and, per member, yield strength (and second moment for
        members that may be in compression), set by
        :meth:`Model.set_member_properties` or the model file.
    result : CaseResult or Envelope
        One case, combination or envelope result of ``model``.
    gamma_M0, gamma_M1, gamma_M2 : float
        Partial factors; defaults are the recommended values of EN 1993-1-1
        §6.1 Note 2B, which national annexes change.
    gamma_cable : float
        Factor on a cable's breaking force.

    Returns
    -------
    MemberCheck

    Raises
    ------
    ModelError
        When a member lacks the yield strength (or a cable its breaking force),
        naming it, or the result does not belong to the model.
    """
    return _check(model, result, _resistances(model, gamma_M0, gamma_M1, gamma_M2,
                                              gamma_cable))


def _scratch(b: int) -> dict[str, np.ndarray]:
    """Work arrays for :func:`_check`, reused from one result to the next."""
    return {"tension": np.empty(b), "compression": np.empty(b), "u_c": np.empty(b),
            "comp": np.empty(b, dtype=bool), "active": np.empty(b, dtype=bool),
            "above": np.empty(b, dtype=bool)}


def _nan_to_zero(u: np.ndarray) -> np.ndarray:
    """NaN (no demand against no resistance) as 0, in two reductions when all is finite.

    Infinities stay: a demand against a zero resistance fails the check
    closed (numpy's nan_to_num would make it the largest float, a pass of
    the finiteness test).
    """
    if np.isfinite(u.min(initial=0.0)) and np.isfinite(u.max(initial=0.0)):
        return u
    return np.nan_to_num(u, nan=0.0, posinf=np.inf, neginf=-np.inf, copy=False)


def _check(model: Model, result: Any, r: _Resistances,
           scratch: dict[str, np.ndarray] | None = None,
           forces: tuple[np.ndarray, np.ndarray | None] | None = None) -> MemberCheck:
    """:func:`check_members` of one result against resistances computed before.

    ``scratch`` (from :func:`_scratch`) holds the intermediate arrays, so that
    a result leaves only its utilisation and codes behind; ``forces`` are the
    result's :func:`_forces_of` when read already.
    """
    b = model.n_members
    high, low = _forces_of(result) if forces is None else forces
    if high.shape != (b,):
        raise ModelError(f"check_members: the result has {high.size} members, the model {b}")
    w = scratch if scratch is not None else _scratch(b)
    tension, compression = _demands(high, low, out=(w["tension"], w["compression"]))
    active = np.greater(tension, 0.0, out=w["active"])
    comp = np.greater(compression, 0.0, out=w["comp"])
    # Compression governs where there is compression and no tension, or u_c > u_t.
    np.greater(comp, active, out=comp)
    active |= comp
    with np.errstate(invalid="ignore", divide="ignore"):
        u_t = _nan_to_zero(np.divide(tension, r.res_t, out=tension))
        u_c = _nan_to_zero(np.divide(compression, r.res_c, out=w["u_c"]))
    comp |= np.greater(u_c, u_t, out=w["above"])
    utilisation = np.where(comp, u_c, u_t)
    governing = np.where(comp, r.comp_code, r.ten_code)
    governing *= active  # idle members: code 0, "none"
    if not (np.isfinite(utilisation.min(initial=0.0))
            and np.isfinite(utilisation.max(initial=0.0))):
        i = int(np.flatnonzero(~np.isfinite(utilisation))[0])
        res = r.res_c[i] if comp[i] else r.res_t[i]
        raise ModelError(f"check_members: member {i}{model._group_text(i)}: the utilisation "
                         f"is not finite (a resistance of {float(res):.6g} N): check its "
                         "area, yield strength or breaking force")
    return MemberCheck(str(getattr(result, "name", "")), utilisation, governing, r, result)

