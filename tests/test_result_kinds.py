"""Every result kind names the analysis that made it (the ``Result`` protocol of results/)."""

from __future__ import annotations

import numpy as np
from conftest import loaded_tripod

import spaceframe as sf
from spaceframe.results import Result


def test_each_result_kind_names_its_analysis() -> None:
    m = loaded_tripod(density=7850.0)
    res = m.solve()
    made = {
        "static": res["snow"],
        "buckling": sf.linear_buckling(m, res["snow"], n_modes=1),
        "vibration": sf.natural_frequencies(m, n_modes=1),
        "nonlinear": sf.solve_nonlinear(m, "snow", max_load_factor=0.1),
    }
    for kind, result in made.items():
        assert isinstance(result, Result)
        assert result.analysis == kind
    assert {type(r).__name__ for r in made.values()} == {
        "CaseResult", "BucklingResult", "VibrationResult", "LoadPath"}
    # The classes live in results/ and are the ones the package root exports.
    assert sf.BucklingResult is type(made["buckling"])
    assert sf.LoadPath.__module__ == "spaceframe.results.path"
    assert sf.VibrationResult.__module__ == "spaceframe.results.modes"
    # A plain array is no result.
    assert not isinstance(np.zeros(3), Result)
