"""The main job as functions the command line calls: check a model, run it, start a project.

Floor 5: this module ties the project file, the analysis and the writers
together.  It prints nothing; it returns what the command line shows.
"""

from __future__ import annotations

import os
import shutil
import tempfile
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import MechanismError, SpaceframeWarning

if TYPE_CHECKING:
    from spaceframe.model import Model
    from spaceframe.results import Results

__all__ = ["CheckReport", "Progress", "RunOutcome", "check", "load", "run"]

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


def load(path: str | os.PathLike[str], units: str | None = None) -> Loaded:
    """Load a model file (.toml) or, for checking, a bare drawing or mesh.

    ``units`` is the length unit of a bare drawing that declares none (a model
    file says it under ``geometry.file_units``).

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
            from spaceframe.project import load_project

            proj = load_project(p)
            loaded = Loaded(proj.model, p, proj.title, Path(proj.output), proj,
                            list(proj.warnings))
        else:
            import spaceframe.io as sio

            model = sio.read(p, units=units)
            loaded = Loaded(model, p, p.stem, p.with_name(p.stem + "-results"))
    caught = [str(x.message) for x in w if issubclass(x.category, SpaceframeWarning)]
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


def check(
    path: str | os.PathLike[str], progress: Progress = _noop, units: str | None = None
) -> CheckReport:
    """Read, heal, validate and diagnose stability without solving.

    A bare drawing or mesh has no supports and no sections: its stability is
    reported as not checked, and sections missing from a model are replaced by
    EA = 1 for the (purely geometric) mechanism search, never for a solve.
    """
    import copy

    from spaceframe.analysis.stability import check_stability

    progress("read")
    loaded = load(path, units=units)
    m = loaded.model
    progress("check")
    lo, hi = m.extents()
    heal = m.meta.get("heal:report")
    drawn: dict[str, Any] = m.meta.get("units") or {"name": "m", "scale": 1.0}
    # One length unit per report: the model file's (metres for a bare drawing).
    from spaceframe.report import length_unit

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
            probe.area = np.where(np.isfinite(m.area), m.area, 1.0)
            probe.E = np.where(np.isfinite(m.E), m.E, 1.0)
            probe._cache = {}
        try:
            probe.validate()
            check_stability(probe)
        except MechanismError as exc:
            stable, mechanism, nodes = False, str(exc), [int(i) for i in exc.nodes[:50]]
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
        supports={
            "supported nodes": int(restrained.any(axis=1).sum()),
            "restrained directions": int(restrained.sum()),
            "sprung directions": int((m.springs > 0).sum()),
        },
        cases=cases,
        healing=healing,
        units=(f"{drawn['name']} ({drawn.get('source', 'given')})"
               if m.meta.get("units") else "m (model file)"),
        stable=stable,
        mechanism=mechanism,
        mechanism_nodes=nodes,
        warnings=loaded.warnings,
    )


@dataclass
class RunOutcome:
    """What `run` produced."""

    results: Results
    summary: dict[str, Any]
    output: Path
    files: list[Path]
    timings: dict[str, float]


def _replace_folder(tmp: Path, final: Path) -> None:
    """Move a finished folder into place; an old one is removed only afterwards."""
    # mkdtemp makes the folder private (0700); give it the mode a new folder
    # gets under the user's umask, as a plain mkdir would.
    mask = os.umask(0)
    os.umask(mask)
    os.chmod(tmp, 0o777 & ~mask)
    old = None
    if final.exists():
        old = final.with_name(f".{final.name}.old-{os.getpid()}")
        final.rename(old)
    tmp.rename(final)
    if old is not None:
        shutil.rmtree(old, ignore_errors=True)


def run(
    path: str | os.PathLike[str],
    output: str | os.PathLike[str] | None = None,
    *,
    solver: str = "auto",
    pictures: bool | str = True,
    progress: Progress = _noop,
) -> RunOutcome:
    """Solve a model file and write every result into an output folder.

    ``pictures``: False for no pictures and no report; True for pictures of
    the combinations and envelopes (or of the load cases when there are
    neither); or a choice of :func:`spaceframe.viewer.select_cases`
    ("all", "none", names separated by commas).

    The folder is built under a temporary name beside the final one and
    renamed when complete: a failed run leaves no half-written folder.
    """
    timings: dict[str, float] = {}
    t = time.perf_counter()
    progress("read")
    loaded = load(path)
    timings["read"] = time.perf_counter() - t
    progress("solve")
    t = time.perf_counter()
    results = loaded.solve(solver=solver)
    timings["solve"] = time.perf_counter() - t
    from spaceframe.io import tables
    from spaceframe.summary import summary as make_summary

    summ = make_summary(results)
    from spaceframe.io.tables import envelope_summary

    envelopes = loaded.project.envelope_results(results) if loaded.project is not None else {}
    summ["envelopes"] = envelope_summary(results, envelopes)
    summ["source"] = str(loaded.path.resolve())
    summ["title"] = loaded.title
    summ["warnings"] = loaded.warnings
    final = Path(output) if output is not None else loaded.output
    final.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{final.name}.tmp-", dir=final.parent))
    files: list[Path] = []
    try:
        progress("write tables")
        t = time.perf_counter()
        extra = {k: summ[k] for k in ("source", "title", "warnings", "envelopes")}
        files += _write_outputs(tmp, results, loaded, pictures, progress, extra)
        files += tables.write_envelopes(tmp, results, envelopes)
        timings["write"] = time.perf_counter() - t
        _replace_folder(tmp, final)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    files = [final / f.relative_to(tmp) for f in files]
    return RunOutcome(results, summ, final, files, timings)


def _write_outputs(
    folder: Path,
    results: Results,
    loaded: Loaded,
    pictures: bool | str,
    progress: Progress,
    extra: dict[str, Any],
) -> list[Path]:
    """Every writer that is installed; tables always."""
    import importlib.util

    from spaceframe.io import tables

    files = [Path(p) for p in tables.write(folder, results, extra=extra)]
    if importlib.util.find_spec("ezdxf") is not None:
        from spaceframe.io import dxf_results

        progress("write DXF")
        files.append(Path(dxf_results.write_results(folder / "results.dxf", results)))
    if importlib.util.find_spec("pyvista") is not None:
        from spaceframe.io import vtk

        progress("write VTK")
        files.append(Path(vtk.write(folder / "vtk", results)))
        if pictures:
            from spaceframe import report, viewer

            envelopes = (loaded.project.envelope_results(results)
                         if loaded.project is not None else {})
            drawable = viewer.with_envelopes(results, envelopes)
            chosen = viewer.select_cases(drawable, "combinations" if pictures is True
                                         else str(pictures))
            progress("render pictures")
            pics = [Path(p) for p in report.write_pictures(
                folder / "pictures", drawable, cases=chosen, progress=progress)]
            charts = [Path(p) for p in report.write_charts(folder / "pictures", drawable,
                                                           cases=chosen)]
            progress("write report")
            files += pics + charts
            files.append(
                Path(
                    report.write_report(
                        folder / "report.html",
                        results,
                        title=loaded.title,
                        heal_report=loaded.model.meta.get("heal:report"),
                        warnings=loaded.warnings,
                        pictures=pics,
                        charts=charts,
                    )
                )
            )
    return files
