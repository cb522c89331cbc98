"""spaceframe: analysis of three-dimensional pin-jointed frames.

Geometry from CAD drawings or meshes, sparse linear static analysis of every
load case and combination, stability diagnosis, and results for open viewers.

Results must be checked by a qualified engineer; local codes and licensed
practice govern any design.
"""

from __future__ import annotations

from spaceframe.analysis.stability import (
    Determinacy,
    check_stability,
    determinacy,
    solve_determinate,
)
from spaceframe.assembly import equilibrium_matrix, stiffness_matrix
from spaceframe.errors import (
    MechanismError,
    ModelError,
    ProjectError,
    ReadError,
    SolverError,
    SpaceframeError,
    SpaceframeWarning,
)
from spaceframe.model import STANDARD_GRAVITY, LoadCase, Model
from spaceframe.results import CaseResult, Envelope, Results

__version__ = "0.1.0"

__all__ = [
    "STANDARD_GRAVITY",
    "CaseResult",
    "Determinacy",
    "Envelope",
    "LoadCase",
    "MechanismError",
    "Model",
    "ModelError",
    "ProjectError",
    "ReadError",
    "Results",
    "SolverError",
    "SpaceframeError",
    "SpaceframeWarning",
    "__version__",
    "check_stability",
    "determinacy",
    "equilibrium_matrix",
    "solve_determinate",
    "stiffness_matrix",
]


def __getattr__(name: str) -> object:
    # `spaceframe.io` pulls in file-format libraries only when first used.
    if name == "io":
        import importlib

        return importlib.import_module("spaceframe.io")
    raise AttributeError(f"module 'spaceframe' has no attribute {name!r}")
