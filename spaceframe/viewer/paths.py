"""A load path in the viewer: one drawable result per step, stepped with the keys and slider.

The displacements of a large-displacement analysis are real, so a path is
drawn at true scale (``scale=1``) by default: the frame as it stands at each
step, coloured by its axial forces at that step.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.viewer.scene import FrameScene

if TYPE_CHECKING:
    from spaceframe.model import Model
    from spaceframe.results import LoadPath, Results

__all__ = ["path_results", "show_path"]


def path_results(model: Model, path: LoadPath) -> Results:
    """Every step of ``path`` (from :func:`spaceframe.solve_nonlinear`) as a result of kind "step".

    Named "step k: load factor λ"; each carries that step's displacements,
    axial forces and reactions, and the reference load times λ as its loads.
    """
    from spaceframe.results import CaseResult, Results

    if path.displacements.shape[1:] != (model.n_nodes, 3) or path.axial_forces.shape[1:] != (
            model.n_members,):
        raise ModelError(f"viewer: the load path {path.name!r} is not of this model "
                         f"({model.n_nodes} nodes, {model.n_members} members)")
    items = {}
    for k, lam in enumerate(path.load_factors.tolist()):
        name = f"step {k}: load factor {lam:.4g}"
        items[name] = CaseResult(
            name=name, kind="step", displacements=path.displacements[k],
            axial_forces=path.axial_forces[k], reactions=path.reactions[k],
            loads=lam * np.asarray(path.loads, dtype=float),
            elongations=np.zeros(model.n_members), residual=float(path.residuals[k]),
            area=model.area,
        )
    return Results(model, items)


def show_path(model: Model, path: LoadPath, **options: Any) -> None:
    """Open a window on a load path: ``n``/``b`` and the slider step through it."""
    options.setdefault("scale", 1.0)
    scene = FrameScene(path_results(model, path), **options)
    scene.plotter.show()
