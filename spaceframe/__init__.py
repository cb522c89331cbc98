"""spaceframe: analysis of three-dimensional pin-jointed frames.

Geometry from CAD drawings or meshes, sparse linear static analysis of every
load case and combination, stability diagnosis, and results for open viewers.

Results must be checked by a qualified engineer; local codes and licensed
practice govern any design.
"""

from __future__ import annotations

import importlib.abc
import importlib.machinery
import sys
from pathlib import Path as _Path
from types import ModuleType as _ModuleType

from spaceframe.analysis.buckling import BucklingResult, linear_buckling, linear_buckling_many
from spaceframe.analysis.nonlinear import LoadPath, solve_nonlinear
from spaceframe.analysis.stability import (
    Determinacy,
    check_stability,
    determinacy,
    solve_determinate,
)
from spaceframe.analysis.vibration import VibrationResult, natural_frequencies
from spaceframe.assembly import equilibrium_matrix, stiffness_matrix
from spaceframe.design import (
    Action,
    buckling_reduction,
    check_deflection,
    check_members,
    check_results,
    generate_combinations,
    size_groups,
)
from spaceframe.errors import (
    MechanismError,
    ModelError,
    ProjectError,
    ReadError,
    SolverError,
    SpaceframeError,
    SpaceframeWarning,
    WriteError,
)
from spaceframe.model import ANALYSES as _ANALYSES
from spaceframe.model import STANDARD_GRAVITY, LoadCase, Model
from spaceframe.results import CaseResult, Envelope, Results


class _SourceTreeIO(importlib.abc.MetaPathFinder):
    """Find ``spaceframe.io`` in the repository's top-level io/ folder.

    Installed, io/ is inside the package (pyproject's package-dir).  Run from a
    source checkout without installing it (``python -m pytest`` or ``python -m
    spaceframe`` from the repository root puts the root first on sys.path), the
    package is this folder and io/ sits beside it; this finder, consulted after
    every other, maps the one name there.
    """

    def __init__(self, root: _Path) -> None:
        self.root = str(root)

    def find_spec(
        self, fullname: str, path: object = None, target: _ModuleType | None = None
    ) -> importlib.machinery.ModuleSpec | None:
        if fullname != "spaceframe.io":
            return None
        return importlib.machinery.PathFinder.find_spec(fullname, [self.root])


_here = _Path(__file__).resolve().parent
if not (_here / "io").is_dir() and (_here.parent / "io" / "__init__.py").is_file():
    sys.meta_path.append(_SourceTreeIO(_here.parent))

__version__ = "0.2.0"

__all__ = [
    "STANDARD_GRAVITY",
    "Action",
    "BucklingResult",
    "CaseResult",
    "Determinacy",
    "Envelope",
    "LoadCase",
    "LoadPath",
    "MechanismError",
    "Model",
    "ModelError",
    "ProjectError",
    "ReadError",
    "Results",
    "SolverError",
    "SpaceframeError",
    "SpaceframeWarning",
    "VibrationResult",
    "WriteError",
    "__version__",
    "buckling_reduction",
    "check_deflection",
    "check_members",
    "check_results",
    "check_stability",
    "determinacy",
    "equilibrium_matrix",
    "generate_combinations",
    "linear_buckling",
    "linear_buckling_many",
    "natural_frequencies",
    "size_groups",
    "solve",
    "solve_determinate",
    "solve_nonlinear",
    "stiffness_matrix",
]


def solve(model: Model, solver: str = "auto") -> Results:
    """Analyse every load case and combination of ``model`` (what ``Model.solve`` runs).

    Linear statics with combinations by superposition; a model with
    tension-only members or pretension is solved load set by load set
    (:mod:`spaceframe.analysis.tension_only`), since superposition does not
    hold there.  ``solver``, the returned :class:`Results` and the errors
    raised are those of :meth:`Model.solve`.
    """
    from spaceframe.analysis.static import solve_static
    from spaceframe.analysis.tension_only import needs_load_sets, solve_tension_only

    if needs_load_sets(model):
        return solve_tension_only(model, solver=solver)
    return solve_static(model, solver=solver)


# Model.solve is late-bound through this registry: the Model imports no analysis.
_ANALYSES["default"] = solve


def __getattr__(name: str) -> object:
    # `spaceframe.io` pulls in file-format libraries only when first used.
    if name == "io":
        import importlib

        return importlib.import_module("spaceframe.io")
    raise AttributeError(f"module 'spaceframe' has no attribute {name!r}")
