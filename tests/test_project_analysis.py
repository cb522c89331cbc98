"""The model file's [analysis] table: buckling and frequencies run after the static analysis."""

from __future__ import annotations

import pytest
from _helpers import project_error, project_from_text
from test_project import CANOPY

import spaceframe as sf
from spaceframe.project.analysis import run_analyses

ANALYSIS = """
[analysis.buckling]
results = ["ULS", "SLS"]
modes = 2
min_factor = 3.0
[analysis.frequencies]
modes = 3
mass = "lumped"
min_frequency = "2 Hz"
"""


def _project(tmp_path, extra):
    return project_from_text(tmp_path, CANOPY + extra)


def test_analysis_block_equals_the_library_calls(tmp_path):
    p = _project(tmp_path, ANALYSIS)
    res = p.solve()
    block = run_analyses(p.analysis, p.model, res)
    b = sf.linear_buckling(p.model, res["ULS"], n_modes=2)
    assert block["buckling"]["results"]["ULS"]["factors"] == pytest.approx(list(b.factors))
    low = block["buckling"]["lowest"]
    assert low["factor"] == min(block["buckling"]["results"][n]["factors"][0]
                                for n in ("ULS", "SLS"))
    assert block["buckling"]["results"]["ULS"]["passes"] == (b.factors[0] >= 3.0)
    # EN 1993-1-1 §5.2.1(3): first-order analysis when alpha_cr >= 10 (from memory).
    word = "at least 10" if low["factor"] >= 10 else "below 10"
    assert word in block["buckling"]["reading"]
    f = sf.natural_frequencies(p.model, n_modes=3, mass="lumped")
    assert block["frequencies"]["frequencies_hz"] == pytest.approx(list(f.frequencies))
    assert block["frequencies"]["passes"] == (f.frequencies[0] >= 2.0)


def test_a_result_without_compression_is_reported_not_fatal(tmp_path):
    import numpy as np

    p = _project(tmp_path, '[analysis.buckling]\nresults = ["ULS"]\nmodes = 1\n')
    res = p.solve()
    # Every member in tension: no buckling factor exists, and the block says so.
    tension_only_forces = {"ULS": np.abs(res["ULS"].axial_forces) + 1.0}
    block = run_analyses(p.analysis, p.model, tension_only_forces)
    entry = block["buckling"]["results"]["ULS"]
    assert entry["factors"] == [] and "compression" in entry["note"]
    assert block["buckling"]["lowest"] is None


@pytest.mark.parametrize(
    ("extra", "fragment"),
    [
        ('[analysis.buckling]\nresults = ["NOPE"]\n', "analysis.buckling.results"),
        ("[analysis.buckling]\nmodes = 0\n", "whole number"),
        ('[analysis.frequencies]\nmin_frequency = "3 kN"\n', "frequency"),
        ('[analysis.frequencies]\nmass = "heavy"\n', "analysis.frequencies.mass"),
        ("[analysis.modal]\nmodes = 3\n", "analysis.modal"),
        ("[analysis.nonlinear]\nsteps = 10\n", "analysis.nonlinear.results: missing"),
        ('[analysis.nonlinear]\nresults = ["NOPE"]\n', "analysis.nonlinear.results = 'NOPE'"),
        ('[analysis.nonlinear]\nresults = "ULS"\n', "analysis.nonlinear.results = 'ULS'"),
        ('[analysis.nonlinear]\nresults = ["ULS"]\nsteps = 0\n', "analysis.nonlinear.steps"),
        ('[analysis.nonlinear]\nresults = ["ULS"]\nsteps = 2.5\n', "analysis.nonlinear.steps"),
        ('[analysis.nonlinear]\nresults = ["ULS"]\nmax_load_factor = -1\n',
         "analysis.nonlinear.max_load_factor = -1: must be positive"),
        ('[analysis.nonlinear]\nresults = ["ULS"]\ninitial_increment = 2\n',
         "analysis.nonlinear.initial_increment = 2: must not exceed max_load_factor"),
        ('[analysis.nonlinear]\nresults = ["ULS"]\ntolerance = 0.5\n',
         "analysis.nonlinear.tolerance = 0.5"),
        ('[analysis.nonlinear]\nresults = ["ULS"]\nnodes = "nowhere"\n',
         "analysis.nonlinear.nodes"),
        ('[analysis.nonlinear]\nresults = ["ULS"]\nnodes = [999]\n', "analysis.nonlinear.nodes"),
        ('[analysis.nonlinear]\nresults = ["ULS"]\nstep = 5\n', "analysis.nonlinear.step"),
        ("[analysis.tension_only]\n", "analysis.tension_only.groups: missing"),
        ('[analysis.tension_only]\ngroups = "TOP"\n', "analysis.tension_only.groups = 'TOP'"),
        ('[analysis.tension_only]\ngroups = ["NOPE"]\n',
         "analysis.tension_only.groups: 'NOPE': no member group"),
        ('[analysis.tension_only]\npretension = { NOPE = "1 kN" }\n',
         "analysis.tension_only.pretension: 'NOPE': no member group"),
        ('[analysis.tension_only]\npretension = { TOP = "-1 kN" }\n',
         "analysis.tension_only.pretension.TOP = '-1 kN': a pretension must not be negative"),
        ('[analysis.tension_only]\npretension = { TOP = "2 m" }\n',
         "analysis.tension_only.pretension.TOP = '2 m'"),
        ('[analysis.tension_only]\ngroups = ["TOP"]\nslack = true\n',
         "analysis.tension_only.slack"),
    ],
)
def test_analysis_errors_name_the_key(tmp_path, extra, fragment):
    assert fragment in project_error(tmp_path, CANOPY + extra)


def test_tension_only_groups_and_pretension_reach_the_model(tmp_path):
    import numpy as np

    p = _project(tmp_path, '[analysis.tension_only]\ngroups = ["BOTTOM"]\n'
                           'pretension = { BOTTOM = "5 kN", TOP = 2 }\n'
                           '[analysis.nonlinear]\nresults = ["ULS"]\nnodes = "top"\n')
    m = p.model
    bottom, top = m.groups["BOTTOM"], m.groups["TOP"]
    assert m.tension_only[bottom].all() and np.count_nonzero(m.tension_only) == bottom.size
    # The file's force unit is kN (units.force): 5 kN and a plain 2 are 5000 N and 2000 N.
    assert m.pretension[bottom] == pytest.approx(5000.0)
    assert m.pretension[top] == pytest.approx(2000.0)
    spec = p.analysis.nonlinear
    assert (spec.max_load_factor, spec.steps, spec.tolerance) == (1.0, 500, None)
    # "top" is the plane z = max: nodes 0-8 of the canopy lie at z = 1.
    assert spec.node_ids.tolist() == list(range(9))


def test_run_writes_and_prints_the_analysis_block(tmp_path, capsys):
    import json

    from spaceframe.cli import main

    (tmp_path / "canopy.toml").write_text(CANOPY + ANALYSIS, encoding="utf-8")
    assert main(["run", str(tmp_path / "canopy.toml"), "--no-pictures"]) == 0
    text = capsys.readouterr().out
    summary = json.loads((tmp_path / "out" / "summary.json").read_text())
    low = summary["analysis"]["buckling"]["lowest"]
    assert f"buckling: lowest factor {low['factor']:.3g}" in text
    f1 = summary["analysis"]["frequencies"]["frequencies_hz"][0]
    assert f"frequencies: {f1:.3g}" in text
