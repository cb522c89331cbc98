"""The model file's design tables: per-member design data, generated combinations, errors."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from _helpers import project_error, project_from_text
from test_project import CANOPY

import spaceframe as sf
from spaceframe.project import parse_project

DESIGN = """
[design]
gamma_M1 = 1.1
[design.groups.TOP]
buckling_length_factor = 0.9
[design.deflection]
ratio = 200
[design.combinations]
ultimate = "6.10"
serviceability = ["characteristic"]

[actions.dead]
kind = "permanent"
[actions.snow]
kind = "variable"
psi0 = 0.5
psi1 = 0.2
psi2 = 0.0
[actions.service]
kind = "variable"
psi0 = 0.7
psi1 = 0.5
psi2 = 0.3
"""


def _project(tmp_path: Path, extra: str = DESIGN, base: str = CANOPY):
    return project_from_text(tmp_path, base + extra)


def test_sections_and_materials_give_every_member_its_design_data(tmp_path):
    p = _project(tmp_path)
    m = p.model
    chord = p.sections["chord"]
    top = m.groups["TOP"]
    np.testing.assert_allclose(m.second_moment[top], chord.second_moment)
    np.testing.assert_allclose(m.yield_strength, 355e6)  # S355, EN 1993-1-1 Table 3.1
    assert set(m.buckling_curve.tolist()) == {"a"}  # hot-finished CHS, Table 6.2
    np.testing.assert_allclose(m.buckling_length_factor[top], 0.9)
    rest = np.setdiff1d(np.arange(m.n_members), top)
    np.testing.assert_allclose(m.buckling_length_factor[rest], 1.0)
    # The whole model checks from Python as from the file.
    res = p.solve()
    g = sf.check_results(m, res, gamma_M1=p.design.gammas["gamma_M1"])
    assert g.utilisation.shape == (m.n_members,) and np.all(np.isfinite(g.utilisation))


def test_generated_combinations_join_the_hand_typed_ones(tmp_path):
    p = _project(tmp_path)
    combos = p.model.combinations
    assert "ULS" in combos and "SLS" in combos  # hand-typed stay
    gen = [c for c in combos if c.startswith("ULS ")]
    # 1 permanent (2 ways) x (none + snow leading [service 0 or 1.05] + service
    # leading [snow 0 or 0.75]) = 2 x 5 = 10, EN 1990 Eq. (6.10), Table A1.2(B).
    assert len(gen) == 10
    assert {"dead": 1.35, "snow": 1.5, "service": 1.05} in [combos[c] for c in gen]
    assert p.envelopes["ULS envelope"] == gen
    sls = [c for c in combos if c.startswith("SLS-char")]
    assert {"dead": 1.0, "snow": 1.0, "service": 0.7} in [combos[c] for c in sls]


def test_cable_sections_are_tension_only_with_their_breaking_force(tmp_path):
    text = CANOPY.replace(
        'brace = { shape = "chs", diameter = 60.3, thickness = 3.2 }',
        'brace = { shape = "cable", diameter = 20, breaking_force = "300 kN" }',
    )
    path = tmp_path / "c.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.warns(sf.SpaceframeWarning, match="tension-only"):
        p = parse_project(text, path)
    m = p.model
    braces = np.setdiff1d(np.arange(m.n_members), np.r_[m.groups["TOP"], m.groups["BOTTOM"]])
    assert np.all(m.tension_only[braces]) and not np.any(m.tension_only[m.groups["TOP"]])
    np.testing.assert_allclose(m.breaking_force[braces], 300e3)


@pytest.mark.parametrize(
    ("extra", "fragment"),
    [
        ("[design]\ngamma_M0 = -1\n", "design.gamma_M0 = -1: must be positive"),
        ("[design]\ngama_M1 = 1\n", "design.gama_M1"),
        ("[design.groups.NOPE]\nbuckling_length_factor = 1\n", "design.groups.NOPE"),
        ("[design.groups.TOP]\nnet_area_factor = 1.5\n", "at most 1"),
        ("[design.combinations]\nultimate = '6.10'\n", "needs [actions.CASE]"),
        ("[actions.wind]\nkind = 'variable'\n", "actions.wind: no load case"),
        ("[actions.snow]\nkind = 'variable'\npsi0 = 2\n", "psi0 = 2"),
        ("[design.sizing]\ngroups = []\n", "design.sizing.groups"),
    ],
)
def test_design_table_errors_name_the_key(tmp_path, extra, fragment):
    assert fragment in project_error(tmp_path, CANOPY + extra)
