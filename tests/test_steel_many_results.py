"""The governing steel check over many results equals one full check per result.

The reference is worked out here the plain way: ``check_members`` of each
result, the stack of their utilisations and its argmax (the first result
wins ties), and every "in some result" flag as the OR (passes: the AND) of
the per-result ones.  Results are forces made up member by member, so that
exact ties, near ties (forces one unit in the last place apart),
a tension equal in utilisation to a compression, idle members, sign changes,
cables and members without a second moment all occur.
"""

from __future__ import annotations

import math
import re
from types import SimpleNamespace

import numpy as np
import pytest

import spaceframe as sf
from spaceframe.design import governing
from spaceframe.design.steel import CHECKS, _resistances
from spaceframe.errors import ModelError
from spaceframe.run import design as run_design

FY = 355e6  # S355, EN 1993-1-1 Table 3.1 (t <= 40 mm)
FU = 510e6  # S355 hollow sections, EN 1993-1-1 Table 3.1
AREA = 1.0e-3
KINDS = 7  # member kinds, by id modulo 7 (see _model)


def _model(n_members: int = 70, unknown: int = 0, seed: int = 3) -> sf.Model:
    """Members of seven kinds; the last ``unknown`` ones without a yield strength.

    Kinds: λ = 60, 250 (above 180, the strut limit), 450 (above 400, the tie
    limit as well), no second moment (buckling not checked), cable,
    net section (factor 0.7), a user slenderness limit of 50 at λ = 100.
    """
    rng = np.random.default_rng(seed)
    m = sf.Model()
    m.add_nodes(rng.uniform(0.0, 8.0, size=(40, 3)))
    pairs = np.array(np.triu_indices(40, 1)).T  # distinct members
    ends = pairs[rng.choice(len(pairs), size=n_members, replace=False)]
    m.add_members(ends, area=AREA, E=210e9)
    ids = np.arange(n_members)
    kind = ids % KINDS
    steel = ids[(kind != 4) & (ids < n_members - unknown)]
    m.set_member_properties(steel, yield_strength=FY, buckling_curve="a")
    for k, lam in ((0, 60.0), (1, 250.0), (2, 450.0), (5, 100.0), (6, 100.0)):
        rows = ids[kind == k]
        # λ = L / i with i = sqrt(I / A): I = A (L / λ)².
        m.set_member_properties(rows, second_moment=AREA * (m.lengths[rows] / lam) ** 2)
    m.set_member_properties(ids[kind == 4], tension_only=True, breaking_force=3e5)
    m.set_member_properties(ids[kind == 5], net_area_factor=0.7, ultimate_strength=FU,
                            buckling_curve="c")
    m.set_member_properties(ids[kind == 6], slenderness_limit=50.0, buckling_curve="b")
    return m


def _collision(res: float, start: float) -> tuple[float, float]:
    """Two forces one ulp apart with the same utilisation f / res (rounding)."""
    f = start
    for _ in range(10_000):
        g = math.nextafter(f, math.inf)
        if f / res == g / res:
            return f, g
        f = g * 1.000123
    raise AssertionError("no rounding collision found")


def _sign_tie(res_t: float, res_c: float, q: float) -> tuple[float, float]:
    """A tension T and a compression -C with T / res_t == C / res_c exactly."""
    for _ in range(1000):
        u = (q * res_c) / res_c
        t = u * res_t
        for _ in range(8):
            if t / res_t == u:
                return t, -(q * res_c)
            t = math.nextafter(t, math.inf if t / res_t < u else -math.inf)
        q *= 1.001
    raise AssertionError("no exact tie of tension and compression found")


def _forces(m: sf.Model, n_results: int = 12, seed: int = 5) -> np.ndarray:
    """(results, members) forces with ties, near ties, idle members and sign changes."""
    rng = np.random.default_rng(seed)
    b = m.n_members
    r = _resistances(m)
    levels = np.array([-3.0, -2.0, -1.0, -0.5, 0.0, 0.0, 0.5, 1.0, 2.0, 3.0])
    f = rng.choice(levels, size=(n_results, b)) * 110e3  # exact ties across results
    f[:, 0:KINDS] = 0.0  # one idle member of each kind (λ = 450 ones fail even so)
    f[:, KINDS:2 * KINDS] = np.abs(f[:, KINDS:2 * KINDS])  # tension or nothing
    f[:, 2 * KINDS:3 * KINDS] = -np.abs(f[:, 2 * KINDS:3 * KINDS])  # compression or nothing
    f[7] = f[2]  # a repeated result: never governs over the first
    f[:, 3 * KINDS] = -0.0  # negative zeros
    for j in range(3 * KINDS + 1, 4 * KINDS):  # near ties: the smaller force comes first
        lo, hi = _collision(float(r.res_t[j]), 4.1e5 + 977.0 * j)
        f[:, j] = 0.25 * lo
        f[3, j], f[9, j] = lo, hi
    for j in range(4 * KINDS, 5 * KINDS):  # a tension and a compression equally utilised
        t, c = _sign_tie(float(r.res_t[j]), float(r.res_c[j]), 0.4 + 0.01 * j)
        f[:, j] = 0.1 * t
        f[(j % 2) + 4, j], f[5 - (j % 2), j] = t, c
    return f


def _results(f: np.ndarray) -> dict[str, SimpleNamespace]:
    return {f"R{k}": SimpleNamespace(name=f"R{k}", kind="combination", axial_forces=row)
            for k, row in enumerate(f)}


def _reference(m: sf.Model, results: dict, names: list[str], **gammas: float) -> dict:
    """One check_members per result; argmax over the stack (first of equals)."""
    checks = [sf.check_members(m, results[n], **gammas) for n in names]
    stack = np.stack([c.utilisation for c in checks])
    index = np.argmax(stack, axis=0)
    cols = np.arange(stack.shape[1])
    return {"checks": checks, "utilisation": stack[index, cols], "result_index": index,
            "passes": np.logical_and.reduce([c.passes for c in checks]),
            "unchecked": np.logical_or.reduce([c.unchecked for c in checks]),
            "too_slender": np.logical_or.reduce([~c.slenderness_ok for c in checks])}


def _assert_same(g: governing.GoverningCheck, ref: dict) -> None:
    # Bit for bit (the sign of a zero too).
    np.testing.assert_array_equal(g.utilisation.view(np.int64),
                                  ref["utilisation"].view(np.int64))
    np.testing.assert_array_equal(g.result_index, ref["result_index"])
    for key in ("passes", "unchecked", "too_slender"):
        np.testing.assert_array_equal(getattr(g, key), ref[key], err_msg=key)
    codes = np.array([ref["checks"][i].governing[k] for k, i in enumerate(ref["result_index"])])
    assert g.worst is not None
    np.testing.assert_array_equal(g.worst.governing, codes)
    assert [g.governing_check(k) for k in range(codes.size)] == [CHECKS[c] for c in codes]


def test_the_data_holds_the_cases_it_is_meant_to():
    m = _model()
    f = _forces(m)
    ref = _reference(m, _results(f), [f"R{k}" for k in range(len(f))])
    u = np.stack([c.utilisation for c in ref["checks"]])
    # Near ties: results 3 and 9 have different forces, the same utilisation.
    j = 3 * KINDS + 1
    assert f[3, j] != f[9, j] and u[3, j] == u[9, j] and ref["result_index"][j] == 3
    # A tension and a compression tie in utilisation; the earlier result governs.
    j = 4 * KINDS
    assert f[4, j] > 0 > f[5, j] and u[4, j] == u[5, j] and ref["result_index"][j] == 4
    assert ref["checks"][4].governing[j] != ref["checks"][5].governing[j]
    # Idle members of λ = 450 fail (the tie limit applies without force); some
    # members fail by utilisation, some are unchecked for buckling, cables compressed.
    assert not ref["passes"][2] and ref["too_slender"][2] and ref["utilisation"][2] == 0.0
    assert ref["passes"][0] and (ref["utilisation"] > 1.0).any()
    assert ref["unchecked"].any() and (ref["unchecked"] != ~ref["passes"]).any()
    assert any((c.governing == CHECKS.index("cable in compression")).any()
               for c in ref["checks"])
    assert ref["utilisation"][3 * KINDS] == 0.0 and np.signbit(f[:, 3 * KINDS]).all()


@pytest.mark.parametrize("seed", [5, 6, 7])
def test_governing_check_equals_one_check_per_result(seed):
    m = _model()
    f = _forces(m, seed=seed)
    results = _results(f)
    names = list(results)
    g = sf.check_results(m, results, names, gamma_M1=1.1)
    _assert_same(g, _reference(m, results, names, gamma_M1=1.1))
    # Each result's check, made when asked for, is that result's.
    for n in (names[0], names[9], names[4]):
        np.testing.assert_array_equal(g.checks[n].utilisation,
                                      sf.check_members(m, results[n],
                                                       gamma_M1=1.1).utilisation)
    assert list(g.checks) == names and len(g.checks) == len(names) and "nope" not in g.checks


def test_envelopes_among_the_results_and_the_full_scan_agree():
    m = _model()
    f = _forces(m)
    results: dict = _results(f)
    results["env"] = SimpleNamespace(name="env", kind="envelope", axial_max=f[:6].max(axis=0),
                                     axial_min=f[:6].min(axis=0))
    results["late"] = SimpleNamespace(name="late", kind="combination", axial_forces=1.5 * f[1])
    names = ["R0", "R1", "env", *[f"R{k}" for k in range(2, 12)], "late"]
    g = sf.check_results(m, results, names)
    _assert_same(g, _reference(m, results, names))
    # The per-result path (used when a resistance is not positive) gives the same.
    full = governing._scan(m, results, names, _resistances(m), quick=False)
    assert full is not None
    _assert_same(full, _reference(m, results, names))


def test_one_full_check_for_many_cases(monkeypatch):
    m = _model()
    results = _results(_forces(m, n_results=40))
    calls = []
    real = governing._check

    def counted(*args, **kwargs):
        calls.append(getattr(args[1], "name", ""))
        return real(*args, **kwargs)

    monkeypatch.setattr(governing, "_check", counted)
    g = sf.check_results(m, results)
    assert calls == ["governing"]  # the governing forces, checked once
    _ = g.passes, g.unchecked, g.too_slender, g.checks["R3"].utilisation, g.checks["R3"].demand
    assert calls == ["governing", "R3"]  # made when read, kept for the next read


def test_run_design_columns_and_per_result_equal_the_per_result_checks(monkeypatch):
    m = _model(unknown=5)  # 65-69 without a yield strength: 67, a cable, needs none
    f = _forces(_model())  # the same members, all checkable
    results = _results(f)
    names = list(results)
    project = SimpleNamespace(design=SimpleNamespace(given=True, gammas={}, deflection=None,
                                                     generated=[]))
    calls = []
    real = governing._check
    monkeypatch.setattr(governing, "_check", lambda *a, **k: calls.append(1) or real(*a, **k))
    out = run_design.run_checks(m, results, {}, project)
    assert out is not None
    _ = out.summary(m), out.columns(), out.line()
    assert len(calls) == 1  # the governing forces' check serves the table and the summary
    monkeypatch.undo()
    ids = np.r_[0:65, 67]
    np.testing.assert_array_equal(out.members, ids)
    sub = run_design._Members(m, ids)
    ref = _reference(sub, {n: run_design._forces(results[n], ids) for n in names}, names)
    _assert_same(out.check, ref)
    cols = out.columns()
    words = np.array(CHECKS, dtype=object)
    for j in (65, 66, 68, 69):
        assert cols["check"][j] == "not checked" and math.isnan(cols["force"][j])
    for k, j in enumerate(ids):  # row k of the check is member j
        i = int(ref["result_index"][k])
        c = ref["checks"][i]
        at = c.at([k])
        assert (cols["result"][j], cols["check"][j]) == (names[i], words[c.governing[k]])
        np.testing.assert_array_equal(  # NaN slenderness: no second moment
            [cols["force"][j], cols["resistance"][j], cols["slenderness"][j]],
            [at["demand"][0], at["resistance"][0], c.slenderness[k]])
        limit = at["slenderness_limit"][0]
        assert (cols["slenderness_limit"][j] == limit if np.isfinite(limit)
                else math.isnan(cols["slenderness_limit"][j]))
        assert out.governing(int(j)) == (float(at["demand"][0]), float(at["resistance"][0]),
                                         names[i], CHECKS[c.governing[k]])
    for n in ("R2", "R11"):
        u = out.per_result[n]
        np.testing.assert_array_equal(u[ids], ref["checks"][names.index(n)].utilisation)
        assert np.isnan(u[[65, 66, 68, 69]]).all()
    assert list(out.per_result) == names and "R2" in out.per_result
    np.testing.assert_array_equal(out.passes[ids], ref["passes"])


def test_errors_are_those_of_the_first_result_at_fault():
    m = _model()
    f = _forces(m)
    results: dict = _results(f)
    results["R4"].axial_forces = f[4].copy()
    results["R4"].axial_forces[10] = np.nan
    results["R6"].axial_forces = f[6][:-1]  # wrong length, after the NaN
    names = list(results)
    with pytest.raises(ModelError) as first:
        sf.check_members(m, results["R4"])
    with pytest.raises(ModelError, match=re.escape(str(first.value))):
        sf.check_results(m, results, names)
    results["R4"].axial_forces = f[4]
    with pytest.raises(ModelError, match="the result has 69 members, the model 70"):
        sf.check_results(m, results, names)
    results["R6"].axial_forces = f[6].copy()
    results["R6"].axial_forces[0] = -np.inf
    with pytest.raises(ModelError, match="non-finite axial forces"):
        sf.check_results(m, results, names)
