"""The model file: one readable TOML file that describes a whole analysis.

Reading happens in two separate stages:

1. **Parse** (:mod:`~spaceframe.project.parse`): the TOML text becomes plain, validated
   dataclasses with every value already in SI.  Unknown keys, wrong types,
   wrong dimensions, missing files, references to unknown sections,
   materials, selections or cases are all found here, before any array is
   built.
2. **Build** (:mod:`~spaceframe.project.build`): the geometry is read or listed, sections and
   materials are assigned, selections are evaluated against the model and
   the loads are turned into arrays.  What can only be known from the
   geometry (an unknown layer, an empty selection, a marker with no node near
   it, members left without a section) is found here.

Every problem raises :class:`~spaceframe.errors.ProjectError` whose message
starts with the model file's name and names the key path (e.g.
``loads.snow.area[0].value``) and the offending value.  The schema is
documented, with a complete example, in ``examples/MODEL_FILE.md``.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from spaceframe.errors import ProjectError
from spaceframe.materials import PRESETS, Material
from spaceframe.model import Model
from spaceframe.project.build import _build
from spaceframe.project.parse import RESTRAINT_ALIASES, _parse
from spaceframe.sections import Section

if TYPE_CHECKING:
    from spaceframe.results import Envelope, Results

__all__ = ["RESTRAINT_ALIASES", "Project", "load_project", "parse_project"]


# ===================================================================== Project
@dataclass
class Project:
    """A model file read and built: the model ready to solve, and what goes with it.

    Attributes
    ----------
    model : Model
        Arrays in SI, every member with a section and a material.
    path : Path
        The model file.
    output : Path
        Default output folder (``output`` key, relative to the model file).
    envelopes : dict
        Envelope name -> names of the combinations (or cases) it spans.
    title : str
    warnings : list of str
        Everything that was warned about while reading and building.
    heal_report : object or None
        The reader's healing report (``model.meta["heal:report"]``) if any.
    sections, materials : dict
        The section and material tables by name.
    """

    model: Model
    path: Path
    output: Path
    envelopes: dict[str, list[str]]
    title: str
    warnings: list[str] = field(default_factory=list)
    heal_report: Any = None
    sections: dict[str, Section] = field(default_factory=dict)
    materials: dict[str, Material] = field(default_factory=dict)
    design: Any = None
    analysis: Any = None

    def solve(self, solver: str = "auto") -> Results:
        """Linear static analysis of every case and combination; see :meth:`Model.solve`."""
        return self.model.solve(solver=solver)

    def envelope_results(self, results: Results) -> dict[str, Envelope]:
        """The envelopes of the model file, computed from ``results``."""
        return {name: results.envelope(name, members) for name, members in self.envelopes.items()}


def load_project(path: str | os.PathLike[str], *, cache: bool = False) -> Project:
    """Read a model file and build its model.

    Parameters
    ----------
    path : str or path-like
        The ``.toml`` model file.
    cache : bool
        Keep the imported, healed ``geometry.file`` in ``.spaceframe-cache/``
        beside the model file and reuse it while the drawing, reader options
        and tolerance are unchanged (see :mod:`spaceframe.project.cache`).
        Off by default: a library call writes nothing unless asked.

    Returns
    -------
    Project

    Raises
    ------
    ProjectError
        On any problem with the file, naming the file, the key path and the value.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ProjectError(f"{p}: model file not found") from None
    except UnicodeDecodeError as exc:
        raise ProjectError(f"{p}: not a UTF-8 text file ({exc})") from None
    except OSError as exc:
        raise ProjectError(f"{p}: cannot read the model file ({exc.strerror or exc})") from None
    return parse_project(text, p, cache=cache)


def parse_project(text: str, path: Path, *, cache: bool = False) -> Project:
    """Build a project from model-file text; ``path`` locates relative files and names errors.

    Raises
    ------
    ProjectError
        As :func:`load_project`.
    """
    path = Path(path)
    # A byte-order mark, written by some Windows editors, is not part of TOML.
    text = text.removeprefix("\ufeff")
    try:
        spec = _parse(text, path)
        model, envelopes, notes = _build(spec, cache)
    except RecursionError:
        raise ProjectError(
            f"{path.name}: arrays or tables are nested too deeply to read "
            "(hundreds of levels; a model file needs a few)"
        ) from None
    return Project(
        model=model,
        path=spec.path,
        output=spec.output,
        envelopes=envelopes,
        title=spec.title,
        warnings=notes,
        heal_report=model.meta.get("heal:report"),
        sections=spec.sections,
        materials={**PRESETS, **spec.materials},
        design=spec.design,
        analysis=spec.analysis,
    )
