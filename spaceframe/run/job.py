"""The main job as functions the command line calls: check a model, run it, start a project.

Floor 5: this module ties the project file, the analysis and the writers
together.  It prints nothing; it returns what the command line shows.
"""

from __future__ import annotations

import os
import re
import time
import warnings
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import MechanismError, SpaceframeWarning
from spaceframe.run.folder import FAULT_ENV, MARKER, write_folder
from spaceframe.run.outputs import arrays_in_background, results_with_files, write_outputs

if TYPE_CHECKING:
    from spaceframe.model import Model
    from spaceframe.results import Results

__all__ = ["FAULT_ENV", "MARKER", "CheckReport", "Progress", "RunOutcome", "check", "load", "run"]

#: Called with the name of each phase as it starts ("read", "solve", ...).
Progress = Callable[[str], None]


def _noop(_: str) -> None:
    return None


@dataclass
class Loaded:
    """A model with where it came from."""

    model: Model
    path: Path
    title: str
    output: Path
    project: Any = None
    warnings: list[str] = field(default_factory=list)

    def solve(self, solver: str = "auto") -> Results:
        """Solve through the project when there is one (it knows its envelopes)."""
        if self.project is not None:
            return self.project.solve(solver=solver)
        return self.model.solve(solver=solver)


def load(path: str | os.PathLike[str], units: str | None = None,
         edges_as_members: bool = False, override_units: bool = False,
         cache: bool = False) -> Loaded:
    """Load a model file (.toml) or, for checking, a bare drawing or mesh.

    ``units`` is the length unit of a bare drawing that declares none (a model
    file says it under ``geometry.file_units``).  ``cache``: reuse the model
    file's imported, healed drawing (see :mod:`spaceframe.project.cache`).

    Raises
    ------
    ProjectError, ReadError
        On bad input, naming the file, key and value.
    """
    p = Path(path)
    caught: list[str] = []
    with warnings.catch_warnings(record=True) as w:
        warnings.simplefilter("always", SpaceframeWarning)
        if p.suffix.lower() == ".toml":
            from spaceframe.project.core import load_project

            if edges_as_members:
                from spaceframe.errors import ProjectError

                raise ProjectError(f"{p}: --edges-as-members is for a bare drawing or mesh; "
                                   "a model file says it under geometry.options")

            proj = load_project(p, cache=cache)
            loaded = Loaded(proj.model, p, proj.title, Path(proj.output), proj,
                            list(proj.warnings))
        else:
            import spaceframe.io as sio

            opts: dict[str, Any] = {"edges_as_members": True} if edges_as_members else {}
            model = sio.read(p, units=units, **opts)
            loaded = Loaded(model, p, p.stem, p.with_name(p.stem + "-results"))
    caught = [str(x.message) for x in w if issubclass(x.category, SpaceframeWarning)]
    # The reader warns when units= differs from the units a drawing declares; a
    # drawing 1000 times too large is no warning's matter: refuse unless asked.
    clash = next((re.search(r"overrides the header \((.*)\)", c) for c in caught
                  if "overrides the header" in c), None)
    if units is not None and clash is not None and not override_units:
        from spaceframe.errors import ProjectError

        raise ProjectError(
            f"{p}: --units {units} differs from the units the drawing declares "
            f"({clash.group(1)}); --units is for drawings that declare none: leave it out, "
            f"or add --override-units to read the drawing in {units} anyway")
    loaded.warnings.extend(m for m in caught if m not in loaded.warnings)
    return loaded


@dataclass
class CheckReport:
    """What `check` found: geometry in numbers, healing, supports, stability."""

    title: str
    source: str
    counts: dict[str, int]
    extents: tuple[list[float], list[float]]
    groups: dict[str, int]
    components: int
    supports: dict[str, int]
    cases: dict[str, dict[str, float]]
    healing: list[str]
    units: str
    stable: bool | None
    mechanism: str
    mechanism_nodes: list[int]
    warnings: list[str]
    determinacy: dict[str, Any] | None = None

    def as_dict(self) -> dict[str, Any]:
        """JSON-able form."""
        return dict(self.__dict__)


def _components(model: Model) -> int:
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    n = model.n_nodes
    used = np.unique(model.members)
    adj = coo_matrix(
        (np.ones(model.n_members), (model.members[:, 0], model.members[:, 1])), shape=(n, n)
    )
    _, labels = connected_components(adj, directed=False)
    return int(np.unique(labels[used]).size)


#: Mechanisms that ``check --write-modes`` also writes as animated GIF pictures.
ANIMATED_MECHANISMS = 3


#: Names ``check --write-modes`` writes (and the temporary names of its writes).
_MODE_FILES = re.compile(r"(mechanisms|self_stress)\.pvd|mechanism_mode\d+(_\d+)?\.(vtu|gif)"
                         r"|self_stress_state\d+(_\d+)?\.vtu|\..+\.tmp|\..+\.vtu")


def _check_modes_folder(folder: Path) -> None:
    """Refuse a folder holding anything ``check --write-modes`` does not write itself.

    Its own files it replaces; a user's file, whatever its name, is never
    overwritten or mixed with them.
    """
    from spaceframe.errors import ProjectError

    if folder.exists() and not folder.is_dir():
        raise ProjectError(f"--write-modes {folder}: is a file, not a folder")
    if folder.is_dir():
        foreign = sorted(p.name for p in folder.iterdir() if not _MODE_FILES.fullmatch(p.name))
        if foreign:
            raise ProjectError(f"--write-modes {folder}: holds {foreign[0]!r}, which check does "
                               "not write; name a new or empty folder")


def _write_determinacy(folder: Path, model: Model, d: Any) -> dict[str, Any]:
    """The mechanism and self-stress files of ``check --write-modes``, or why there are none."""
    if (d.mechanisms and d.mechanism_modes is None) or (
            d.self_stress and d.self_stress_states is None):
        return {"files": [], "files_note": f"not written: {d.note}"}
    if not (d.mechanisms or d.self_stress):
        return {"files": [], "files_note": "no mechanism and no state of self-stress to write"}
    _check_modes_folder(folder)
    from spaceframe.io import vtk

    files = [str(p) for p in vtk.write_determinacy(folder, model, d)]
    if d.mechanism_modes is not None:
        # A mechanism is best seen moving: the first few as animated pictures.
        from spaceframe import viewer

        for k, shape in enumerate(d.mechanism_modes[:ANIMATED_MECHANISMS], start=1):
            files.append(str(viewer.mode_animation(folder / f"mechanism_mode{k}.gif", model,
                                                   (f"mechanism {k}", shape))))
    return {"files": files}


def check(
    path: str | os.PathLike[str], progress: Progress = _noop, units: str | None = None,
    edges_as_members: bool = False,
    override_units: bool = False,
    quick: bool = False,
    cache: bool = False,
    modes_folder: str | os.PathLike[str] | None = None,
) -> CheckReport:
    """Read, heal, validate and diagnose stability without solving.

    ``modes_folder``: also write the mechanisms and states of self-stress
    found (:func:`spaceframe.io.vtk.write_determinacy`) into that folder;
    their files are listed in the report's ``determinacy["files"]``.

    The stability test is the one a run relies on (cheap checks, stiffness
    ratio, factorisation of the stiffness); ``quick`` keeps to the cheap
    checks and says so.  A bare drawing or mesh has no supports and no
    sections: its stability is reported as not checked, and when sections are
    missing every member gets EA = 1 for the (purely geometric) mechanism
    search, never for a solve.
    """
    import copy

    from spaceframe.analysis.stability import full_stability
    from spaceframe.errors import SolverError
    from spaceframe.results.summary import support_counts

    progress("read")
    loaded = load(path, units=units, edges_as_members=edges_as_members, cache=cache,
                  override_units=override_units)
    m = loaded.model
    progress("check")
    lo, hi = m.extents()
    heal = m.meta.get("heal:report")
    drawn: dict[str, Any] = m.meta.get("units") or {"name": "m", "scale": 1.0}
    # One length unit per report: the model file's (metres for a bare drawing).
    from spaceframe.run.report import length_unit

    unit_name, unit_scale = length_unit(m)
    healing = (
        [s.format(scale=unit_scale, unit=unit_name) for s in heal.steps]
        if heal is not None
        else []
    )
    restrained = m.restraint
    mechanism, nodes = "", []
    stable: bool | None = True
    unassigned = int(np.count_nonzero(~np.isfinite(m.area) | ~np.isfinite(m.E)))
    if not restrained.any() and not (m.springs > 0).any() and loaded.project is None:
        stable = None
        mechanism = "not checked: a bare drawing or mesh has no supports (use a model file)"
    else:
        probe = m
        if unassigned:
            # Mechanisms depend on geometry and supports only: any positive EA shows them.
            probe = copy.copy(m)
            probe.area = np.ones(m.n_members)
            probe.E = np.ones(m.n_members)
            probe._cache = {}
        try:
            probe.validate()
            full_stability(probe, quick=quick)
        except MechanismError as exc:
            stable, mechanism, nodes = False, str(exc), [int(i) for i in exc.nodes[:50]]
        except SolverError as exc:
            stable, mechanism = False, str(exc)
        else:
            if quick:
                mechanism = ("quick checks only (no factorisation): no mechanism found by "
                             "them; run check without --quick for the full test")
    det = None
    if stable is not None and m.n_members and not quick:
        from spaceframe.analysis.stability import determinacy
        from spaceframe.errors import SpaceframeError

        try:
            d = determinacy(m, modes=modes_folder is not None)
            det = {"mechanisms": int(d.mechanisms), "self_stress": int(d.self_stress),
                   "method": d.method}
        except SpaceframeError as exc:
            det = {"note": str(exc)}
        else:
            if modes_folder is not None:
                det.update(_write_determinacy(Path(modes_folder), m, d))
    cases = {
        name: {"Fx": float(lc.forces[:, 0].sum()), "Fy": float(lc.forces[:, 1].sum()),
               "Fz": float(lc.forces[:, 2].sum())}
        for name, lc in m.cases.items()
    }
    return CheckReport(
        title=loaded.title,
        source=str(loaded.path),
        counts={"nodes": m.n_nodes, "members": m.n_members, "panels": m.n_panels,
                "markers": int(m.markers.shape[0]), "cases": len(m.cases),
                "combinations": len(m.combinations),
                "members without a section": unassigned},
        extents=(lo.tolist(), hi.tolist()),
        groups={g: int(ids.size) for g, ids in m.groups.items()},
        components=_components(m) if m.n_members else 0,
        supports=support_counts(m),
        cases=cases,
        healing=healing,
        units=(f"{drawn['name']} ({drawn.get('source', 'given')})"
               if m.meta.get("units") else "m (model file)"),
        stable=stable,
        mechanism=mechanism,
        mechanism_nodes=nodes,
        warnings=loaded.warnings,
        determinacy=det,
    )


@dataclass
class RunOutcome:
    """What `run` produced."""

    results: Results
    summary: dict[str, Any]
    output: Path
    files: list[Path]
    timings: dict[str, float]
    design: Any = None  # spaceframe.run.design.DesignOutcome when checks ran


def run(
    path: str | os.PathLike[str],
    output: str | os.PathLike[str] | None = None,
    *,
    solver: str = "auto",
    pictures: bool | str = True,
    progress: Progress = _noop,
    force: bool = False,
    cache: bool = False,
    dxf: bool | None = None,
    dxf_deformed: bool = False,
    every_result: bool = False,
) -> RunOutcome:
    """Solve a model file and write every result into an output folder.

    ``pictures``: False for no pictures and no report; True for pictures of
    the combinations and envelopes (or of the load cases when there are
    neither); or a choice of :func:`spaceframe.viewer.select_cases`
    ("all", "none", names separated by commas).
    ``dxf``: None writes the results drawing up to
    ``spaceframe.io.dxf_results.MEMBER_LIMIT`` members (and says so above
    it), True always, False never; ``dxf_deformed`` adds deformed shapes.
    ``every_result``: files of their own (CSV columns, VTK, DXF layers,
    pictures) for every result, even above
    :data:`spaceframe.run.outputs.PER_RESULT_LIMIT` of them (the summary and
    results.npz always hold every result).

    The folder is built under a temporary name beside the final one and
    swapped in when complete: a failed or killed run leaves the old results or
    the new ones, never a mixture and never nothing.  Only a folder that holds
    the tool's marker file is replaced; any other existing non-empty folder is
    refused unless ``force``, and then only the tool's own files are written
    into it (the others are kept).  The model file's folder (or one above it)
    and a folder holding an input are always refused.  Leftovers of killed runs
    beside the folder are removed; removal failures are added to the warnings.
    """
    timings: dict[str, float] = {}
    with _timed(timings, "read"):
        progress("read")
        loaded = load(path, cache=cache)
    results, sizing, solve_notes = _solve(loaded, solver, progress, timings)
    envelopes = loaded.project.envelope_results(results) if loaded.project is not None else {}
    notes = [*loaded.warnings, *solve_notes]  # the summary's warnings, the folder's notes too
    made: dict[str, Any] = {}

    def fill(folder: Path) -> list[Path]:
        # results.npz is written from here on, while the checks, the
        # summary, the other analyses and the other files are made.
        with arrays_in_background(folder, results) as arrays:
            summ, design, base, modes, paths, shown = _post_process(
                loaded, results, envelopes, notes, sizing, solver, every_result, progress,
                timings)
            made.update(summary=summ, design=design)
            with _timed(timings, "write"):
                progress("write tables")
                keys = ("source", "title", "warnings", "envelopes", "design", "analysis",
                        "nonlinear")
                extra: dict[str, Any] = {k: summ[k] for k in keys if k in summ}
                return write_outputs(folder, results, loaded, pictures, progress, extra, design,
                                     dxf_options={"requested": dxf, "deformed": dxf_deformed},
                                     envelopes=envelopes, modes=modes, paths=paths,
                                     shown=shown, summary_data=base, arrays=arrays)

    final, files = write_folder(Path(output) if output is not None else loaded.output,
                                loaded, force, fill, notes)
    return RunOutcome(results, made["summary"], final, files, timings, made["design"])


def _post_process(loaded: Loaded, results: Results, envelopes: dict[str, Any],
                  notes: list[str], sizing: Any, solver: str, every_result: bool,
                  progress: Progress, timings: dict[str, float]
                  ) -> tuple[dict[str, Any], Any, dict[str, Any], Any, Any, list[str]]:
    """The summary, design checks, other analyses and load paths of a solved run.

    Returns (summary, design, the results' own figures, modes, load paths,
    the results with files of their own).
    """
    from spaceframe.results.summary import summary as make_summary

    # The results' own figures, summarised once (seconds at 1000 results) and
    # written into summary.json as they are.
    base = make_summary(results)
    summ = _summary(loaded, results, base, envelopes, notes)
    design = _check_members(loaded, results, envelopes, sizing, summ, progress, timings)
    modes = _analyses(loaded, results, solver, summ, progress, timings)
    paths = _load_paths(loaded, summ, progress, timings)
    shown, note = results_with_files(summ["results"], every_result)
    if note is not None:  # said in the summary and by the command
        summ["warnings"].append(note)
        summ["results_with_files"] = shown
    return summ, design, base, modes, paths, shown


@contextmanager
def _timed(timings: dict[str, float], phase: str) -> Iterator[None]:
    """Time the block into ``timings[phase]`` (seconds) when it completes."""
    t = time.perf_counter()
    yield
    timings[phase] = time.perf_counter() - t


def _solve(loaded: Loaded, solver: str, progress: Progress,
           timings: dict[str, float]) -> tuple[Results, Any, list[str]]:
    """Size the sections when the model file asks for it, then solve; with the warnings.

    Warnings of the solves (a displacement beyond the linear range, ...) go
    into the run's warning list, as the reader's do; those of sizing are
    marked as said of a trial choice of sections.
    """
    from spaceframe.run import design as run_design

    solve_notes: list[str] = []
    sizing = None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", SpaceframeWarning)
        if loaded.project is not None and loaded.project.design is not None \
                and loaded.project.design.sizing is not None:
            progress("size")
            with _timed(timings, "size"), warnings.catch_warnings(record=True) as trial:
                warnings.simplefilter("always", SpaceframeWarning)
                sizing = run_design.run_sizing(loaded.model, loaded.project,
                                               lambda mm: mm.solve(solver=solver))
                # Said of a trial choice of sections, not of the final model: marked so.
                for w in trial:
                    text = f"during sizing: {w.message}"
                    if issubclass(w.category, SpaceframeWarning) and text not in solve_notes:
                        solve_notes.append(text)
        progress("solve")
        with _timed(timings, "solve"):
            results = loaded.solve(solver=solver)
    for w in caught:
        if issubclass(w.category, SpaceframeWarning):
            text = str(w.message)
            if text not in solve_notes and text not in loaded.warnings:
                solve_notes.append(text)
        else:
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    return results, sizing, solve_notes


def _summary(loaded: Loaded, results: Results, base: dict[str, Any],
             envelopes: dict[str, Any], notes: list[str]) -> dict[str, Any]:
    """The run's summary: the results' figures ``base``, the envelopes, source, title, warnings.

    ``notes`` (the reader's and the solve's warnings) becomes the summary's
    warning list itself, so that what is added to it later is in the summary.
    """
    from spaceframe.io.tables import envelope_summary

    summ = dict(base)
    summ["envelopes"] = envelope_summary(results, envelopes)
    summ["source"] = str(loaded.path.resolve())
    summ["title"] = loaded.title
    summ["warnings"] = notes
    return summ


def _check_members(loaded: Loaded, results: Results, envelopes: dict[str, Any], sizing: Any,
                   summ: dict[str, Any], progress: Progress, timings: dict[str, float]) -> Any:
    """The design checks (None when none could run), said in ``summ``."""
    from spaceframe.run import design as run_design

    if not loaded.model.n_members:
        return None
    progress("check members")
    with _timed(timings, "design"):
        design = run_design.run_checks(loaded.model, results, envelopes, loaded.project,
                                       sizing=sizing)
    if design is None:
        _, reasons = run_design.checkable_members(loaded.model)
        line = ("design checks not run: " + run_design.missing_text(
            reasons, loaded.model.n_members)
                + "; give the materials a yield strength (cables a breaking force) "
                "or add a [design] table to check the others")
        summ["warnings"].append(line)
        summ["design"] = {"checked_members": 0, "not_checked": line}
        return None
    summ["design"] = design.summary(loaded.model)
    summ["warnings"] += _design_warnings(design, sizing)
    return design


def _design_warnings(design: Any, sizing: Any) -> list[str]:
    """What the checks and the sizing could not do."""
    from spaceframe.run import design as run_design

    out = []
    if design.missing:
        out.append("design checks: " + design.missing)
    nb = design.buckling_not_checked
    if nb.size:
        out.append(
            f"design checks: {nb.size} members in compression have no second moment, "
            f"so their buckling is not checked and they count as failing (members "
            f"{run_design.ranges(nb)}); give their sections a second moment")
    if sizing is not None and not sizing.converged:
        out.append(
            f"design sizing did not settle in {len(sizing.iterations)} iterations; "
            "the last choice is used")
    if sizing is not None and sizing.no_section:
        g, n = next(iter(sizing.no_section.items()))
        out.append(
            f"design sizing: no catalogue section makes every member of group {g!r} "
            f"pass ({n} members fail with the largest)")
    return out


def _analyses(loaded: Loaded, results: Results, solver: str, summ: dict[str, Any],
              progress: Progress, timings: dict[str, float]) -> list[Any]:
    """Buckling and frequencies of ``[analysis]`` into ``summ``; their mode shapes."""
    spec = getattr(loaded.project, "analysis", None)
    if spec is None or not (spec.buckling or spec.frequencies):
        return []
    from spaceframe.project.analysis import run_analyses_with_modes

    progress("buckling and frequencies")
    with _timed(timings, "analysis"):
        summ["analysis"], modes = run_analyses_with_modes(spec, loaded.model, results,
                                                          solver=solver)
    return list(modes)


def _load_paths(loaded: Loaded, summ: dict[str, Any], progress: Progress,
                timings: dict[str, float]) -> list[Any]:
    """The load paths of ``[analysis.nonlinear]``, said in ``summ["nonlinear"]``."""
    spec = getattr(loaded.project, "analysis", None)
    if spec is None or spec.nonlinear is None:
        return []
    from spaceframe.project.analysis import run_nonlinear

    progress("nonlinear")
    with _timed(timings, "nonlinear"):
        summ["nonlinear"], paths = run_nonlinear(spec, loaded.model, progress)
    for name, entry in summ["nonlinear"]["results"].items():
        if entry.get("stopped"):
            summ["warnings"].append(f"nonlinear {name}: the path stopped early: "
                                    f"{entry['stopped']}")
    return list(paths)
