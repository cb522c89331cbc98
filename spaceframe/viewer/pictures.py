"""Pictures off-screen: one result to a PNG file, or every chosen result and view.

The scene is built once and updated in place for each result; the files are
written through a ``write`` helper (the run and the command line give
``spaceframe.files.atomic_write``).
"""

from __future__ import annotations

import os
import re
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.viewer.scene import Writer, _check_options, build_scene

if TYPE_CHECKING:
    from spaceframe.results import Envelope, Results


def screenshot(
    results: Results,
    case: str,
    path: str | os.PathLike[str],
    *,
    view: str = "iso",
    size: Sequence[int] = (1200, 800),
    color_by: str = "axial_force",
    scale: float | str = "auto",
    utilisation: Mapping[str, Any] | None = None,
    write: Writer | None = None,
) -> Path:
    """Render one result off-screen to a PNG file (no display needed).

    ``write`` puts the file in place (see :meth:`FrameScene.save`).

    Returns
    -------
    Path
        The PNG written.
    """
    scene = build_scene(results, case, color_by=color_by, scale=scale, off_screen=True,
                        window_size=size, view=view, utilisation=utilisation)
    try:
        return scene.save(path, write)
    finally:
        scene.close()


def picture_stem(name: str, prefix: str, used: set[str]) -> str:
    """A file-safe stem for a result's pictures, unique (case-insensitively) within ``used``."""
    safe = re.sub(r"[^A-Za-z0-9_.+-]+", "_", name).strip("._") or "result"
    stem, k = f"{prefix}{safe}", 2
    while stem.lower() in used:
        stem, k = f"{prefix}{safe}_{k}", k + 1
    used.add(stem.lower())
    return stem


def with_envelopes(results: Results, envelopes: Mapping[str, Envelope]) -> Results:
    """``results`` plus one drawable entry per envelope (kind "envelope").

    An envelope's entry carries, per member, the governing force of the
    results it spans (the larger in magnitude of its maximum and minimum),
    no displacements and no loads; ``factors`` lists the results spanned.
    """
    from spaceframe.results import CaseResult, Results

    model = results.model
    items = {name: results[name] for name in results}
    zeros = np.zeros((model.n_nodes, 3))
    for name, env in envelopes.items():
        if name in items:
            raise ModelError(f"envelope {name!r}: a load case or combination has that name")
        governing = np.where(np.abs(env.axial_max) >= np.abs(env.axial_min),
                             env.axial_max, env.axial_min)
        items[name] = CaseResult(
            name=name, kind="envelope", displacements=zeros, axial_forces=governing,
            reactions=zeros, loads=zeros, elongations=np.zeros(model.n_members),
            residual=0.0, area=model.area, factors={m: 1.0 for m in env.members},
        )
    return Results(model, items, results.solver, results.timings, results.info)


#: What :func:`select_cases` accepts besides a list of names.
PICTURE_CHOICES = ("combinations", "all", "none")


def select_cases(results: Results, which: str | Sequence[str] = "combinations") -> list[str]:
    """The results that get pictures.

    Parameters
    ----------
    results : Results
        Possibly with envelopes (:func:`with_envelopes`).
    which : str or sequence of str
        "combinations" (the default): combinations and envelopes, or every
        load case when there are neither; "all"; "none"; or result names
        (a sequence, or one string of names separated by commas).

    Raises
    ------
    ModelError
        Naming the first unknown result.
    """
    kinds = {name: results[name].kind for name in results}
    if isinstance(which, str) and which in PICTURE_CHOICES:
        if which == "none":
            return []
        if which == "all":
            return list(kinds)
        chosen = [n for n, k in kinds.items() if k in ("combination", "envelope")]
        return chosen or [n for n, k in kinds.items() if k == "case"]
    names = [t.strip() for t in which.split(",")] if isinstance(which, str) else list(which)
    names = [n for n in names if n]
    for n in names:
        if n not in kinds:
            raise ModelError(
                f"pictures: no result named {n!r} (have: {', '.join(kinds)}; or one of "
                f"{', '.join(PICTURE_CHOICES)})"
            )
    return names


def screenshots(
    folder: str | os.PathLike[str],
    results: Results,
    *,
    cases: Sequence[str] | None = None,
    views: Sequence[str] = ("iso", "top", "front"),
    size: Sequence[int] = (1200, 800),
    color_by: str = "axial_force",
    scale: float | str = "auto",
    prefix: str = "",
    progress: Callable[[str], None] | None = None,
    utilisation: Mapping[str, Any] | None = None,
    write: Writer | None = None,
) -> list[Path]:
    """One PNG per result and view, ``<prefix><case>_<view>.png``, from one off-screen scene.

    The scene is built once; each result updates it in place and each
    picture is one render.  ``progress`` is called before each picture
    with "pictures k/n"; ``write`` puts each file in place (see
    :meth:`FrameScene.save`).

    Returns
    -------
    list of Path
        In the order of the results, then of ``views``.
    """
    out_dir = Path(folder)
    names = list(results) if cases is None else list(cases)
    for v in views:
        _check_options(color_by, v)
    unknown = [name for name in names if name not in results]
    if unknown:
        raise KeyError(f"no result named {unknown[0]!r} (have: {', '.join(results)})")
    if not names or not views:
        return []
    out_dir.mkdir(parents=True, exist_ok=True)
    scene = build_scene(results, names[0], color_by=color_by, scale=scale, off_screen=True,
                        window_size=size, view=views[0], utilisation=utilisation)
    return render_all(scene, names, views, out_dir, prefix=prefix, progress=progress,
                      write=write)


def render_all(scene: Any, names: Sequence[str], views: Sequence[str], folder: Path, *,
               prefix: str = "", progress: Callable[[str], None] | None = None,
               write: Writer | None = None, counted: str = "pictures") -> list[Path]:
    """Save one PNG per result and view from a built scene, then close it.

    Files are ``<prefix><name>_<view>.png`` (names made safe and unique);
    ``progress`` hears "<counted> k/n" before each picture.
    """
    paths: list[Path] = []
    used: set[str] = set()
    total = len(names) * len(views)
    try:
        for name in names:
            if name != scene.case:
                scene.set_case(name)
            stem = picture_stem(name, prefix, used)
            for v in views:
                if progress is not None:
                    progress(f"{counted} {len(paths) + 1}/{total}")
                scene.set_view(v)
                paths.append(scene.save(folder / f"{stem}_{v}.png", write))
    finally:
        scene.close()
    return paths
