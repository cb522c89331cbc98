"""The main job as functions the command line calls: check a model, run it, start a project.

Floor 5: this module ties the project file, the analysis and the writers
together.  It prints nothing; it returns what the command line shows.
"""

from __future__ import annotations

import ctypes
import errno
import json
import os
import re
import shutil
import signal
import sys
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


def check(
    path: str | os.PathLike[str], progress: Progress = _noop, units: str | None = None,
    edges_as_members: bool = False,
    override_units: bool = False,
    quick: bool = False,
    cache: bool = False,
) -> CheckReport:
    """Read, heal, validate and diagnose stability without solving.

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
            d = determinacy(m, modes=False)
            det = {"mechanisms": int(d.mechanisms), "self_stress": int(d.self_stress),
                   "method": d.method}
        except SpaceframeError as exc:
            det = {"note": str(exc)}
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


#: Marker file the tool writes inside every results folder (and every temporary or old
#: copy of one): a JSON list of the paths it wrote.  Only a folder with this marker
#: is ever replaced, and only the paths it lists are ever removed.
MARKER = ".spaceframe-results"

#: Environment variable for the fault tests, a comma-separated list: a point of the
#: writer ("after-mkdtemp", "after-write", "before-swap", "mid-swap", "after-swap",
#: "mid-merge") makes the process kill itself there (SIGKILL); "disk-full" fails the
#: writing as a full disk would; "no-exchange" takes the two-rename swap.
FAULT_ENV = "SPACEFRAME_FAULT"


def _faults() -> list[str]:
    return os.environ.get(FAULT_ENV, "").split(",")


def _fault(point: str) -> None:
    if point in _faults():
        os.kill(os.getpid(), getattr(signal, "SIGKILL", signal.SIGTERM))


def _write_marker(folder: Path, paths: Any) -> None:
    """Write the marker (atomically: a reader never sees half a list)."""
    from spaceframe import __version__

    text = json.dumps({"written_by": "spaceframe", "version": __version__,
                       "paths": sorted(paths)}, indent=1)
    tmp = folder / f"{MARKER}.{os.getpid()}.tmp"
    tmp.write_text(text + "\n", encoding="utf-8")
    os.replace(tmp, folder / MARKER)


def _read_marker(folder: Path) -> set[str] | None:
    """The paths the tool wrote in ``folder``, or None when it is not the tool's folder."""
    try:
        data = json.loads((folder / MARKER).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(data, dict) or data.get("written_by") != "spaceframe":
        return None
    paths = data.get("paths")
    if not isinstance(paths, list) or not all(isinstance(x, str) for x in paths):
        return None
    return set(paths)


def _tree(folder: Path) -> list[str]:
    """Every path under ``folder`` (files, folders, links), relative, '/'-separated."""
    out: list[str] = []
    for root, dirs, files in os.walk(folder):
        rel = Path(root).relative_to(folder)
        for name in dirs + files:
            out.append((rel / name).as_posix())
    return sorted(p for p in out if Path(p).name != MARKER and not (
        Path(p).name.startswith(MARKER + ".") and Path(p).suffix == ".tmp"))


def _pid_alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # another user's process (PermissionError): alive
        return True
    return True


_LEFTOVER = re.compile(r"^\.(?P<name>.+)\.(?P<kind>tmp|old)-(?P<pid>\d+)(?:-[^/]*)?$")


def _clean_leftovers(final: Path, notes: list[str]) -> None:
    """Remove what killed runs of the tool left beside ``final``.

    Only ``.NAME.tmp-PID-*`` and ``.NAME.old-PID`` folders of a process that no
    longer runs, holding the tool's marker (or empty), are touched.  When the
    results folder itself is missing (a run killed between the two renames of
    the fallback swap), the old copy is put back instead of removed.
    """
    try:
        entries = list(final.parent.iterdir())
    except OSError:
        return
    for entry in sorted(entries):
        m = _LEFTOVER.match(entry.name)
        if m is None or m["name"] != final.name or _pid_alive(int(m["pid"])):
            continue
        if entry.is_symlink() or not entry.is_dir():
            continue
        if _read_marker(entry) is None:
            try:
                entry.rmdir()  # an empty folder made just before a kill; never a full one
            except OSError:
                pass
            continue
        try:
            if m["kind"] == "old" and not os.path.lexists(final):
                entry.rename(final)
                notes.append(f"{final}: restored the results of an interrupted run")
                continue
            errors = _rmtree_marked(entry)
        except OSError as exc:
            errors = [str(exc.strerror or exc)]
        if errors:
            notes.append(f"{entry}: could not remove this leftover of an interrupted run "
                         f"({errors[0]}); remove it by hand")


@dataclass
class _Target:
    """Where results go and how: "new" (nothing there), "swap" (a results folder of
    the tool, replaced whole) or "merge" (a folder that also holds other files,
    which are kept: only the tool's own paths are replaced)."""

    final: Path
    mode: str
    ours: set[str]
    foreign: list[str]


def _inputs(loaded: Loaded) -> list[Path]:
    found = [loaded.path]
    src = loaded.model.meta.get("source")
    if src:
        found.append(Path(str(src)))
    return [Path(os.path.realpath(p)) for p in found]


def _target(output: Path, loaded: Loaded, force: bool) -> _Target:
    """Check the output folder and decide how to write it.

    Raises
    ------
    ProjectError
        For a folder that must never be written: the model file's own folder or
        one above it, one that holds an input, one that is not a folder, or a
        folder of other files (unless ``force``).
    """
    from spaceframe.errors import ProjectError, WriteError

    # realpath: '-o .' gets its real name, and a symlinked folder is followed to
    # its target (replacing the link itself would leave the target stale).
    final = Path(os.path.realpath(output))
    model_dir = Path(os.path.realpath(loaded.path)).parent
    if final == model_dir or final in model_dir.parents:
        raise ProjectError(
            f"output folder {output}: is the model file's folder or one above it "
            f"({final}); results need a folder of their own, e.g. {loaded.output.name}")
    for inp in _inputs(loaded):
        if final in inp.parents:
            raise ProjectError(f"output folder {output}: holds the input {inp}; "
                               "choose a folder of its own")
    if os.path.lexists(final) and not final.is_dir():
        raise ProjectError(f"output folder {output}: exists and is not a folder")
    if not final.exists():
        return _Target(final, "new", set(), [])
    have = _tree(final)
    ours = _read_marker(final)
    if ours is None:
        if not have and not (final / MARKER).exists():
            return _Target(final, "new", set(), [])
        if not force:
            raise ProjectError(
                f"output folder {output}: holds {len(have)} files or folders that spaceframe "
                f"did not write (e.g. {have[0] if have else MARKER}); choose another folder, "
                "or --force to add the results beside them (they are kept)")
        ours = set()
    foreign = [p for p in have if p not in ours]
    mode = "merge" if foreign else "swap"
    if mode == "merge":
        tops = {p.split("/")[0] for p in ours}
        nested = [p for p in foreign if "/" in p and p.split("/")[0] in tops]
        if nested:
            raise ProjectError(
                f"output folder {output}: {nested[0]} was not written by spaceframe but is "
                "inside a folder of its results; move it out first")
    # A read-only old folder could be renamed but never removed: say so before
    # anything changes (root is not stopped by permissions; then removal
    # failures are reported after the run).
    for d in [final, *(final / p for p in sorted(ours) if (final / p).is_dir())]:
        if not os.access(d, os.W_OK | os.X_OK):
            raise WriteError(f"output folder {output}: {d} is read-only, so the old results "
                             "could not be replaced; make it writable or choose another folder")
    return _Target(final, mode, ours, foreign)


# Linux renameat2(2) flag swapping two paths in one step.  Python's os module has
# no binding for it (os.rename/os.replace only), hence ctypes.
_AT_FDCWD, _RENAME_EXCHANGE = -100, 2


def _exchange(a: Path, b: Path) -> bool:
    """Swap two existing paths atomically; False when the system cannot."""
    if not sys.platform.startswith("linux") or "no-exchange" in _faults():
        return False
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        fn = libc.renameat2
    except (OSError, AttributeError):
        return False
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    fn.restype = ctypes.c_int
    if fn(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE) == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.ENOSYS, errno.EINVAL, errno.ENOTSUP):
        return False
    raise OSError(err, os.strerror(err), str(b))


def _rmtree_marked(folder: Path) -> list[str]:
    """Remove a folder of the tool's, its marker last (what cannot be removed stays
    recognisable as the tool's, for a later run to try again); the errors."""
    errors: list[str] = []

    def onerror(_f: Any, path: str, exc: Any) -> None:
        err = exc[1] if isinstance(exc, tuple) else exc
        errors.append(f"{path}: {getattr(err, 'strerror', None) or err}")

    for entry in sorted(folder.iterdir()):
        if entry.name == MARKER:
            continue
        if entry.is_dir() and not entry.is_symlink():
            shutil.rmtree(entry, onerror=onerror)
        else:
            try:
                entry.unlink()
            except OSError as exc:
                onerror(None, str(entry), exc)
    if not errors:
        try:
            (folder / MARKER).unlink(missing_ok=True)
            folder.rmdir()
        except OSError as exc:
            onerror(None, str(folder), exc)
    return errors


def _remove(folder: Path, final: Path, notes: list[str]) -> None:
    """Remove a copy of the tool's own results; a failure is reported, not ignored."""
    errors = _rmtree_marked(folder)
    if errors and folder.exists():
        notes.append(f"{final}: the old results could not all be removed ({errors[0]}); "
                     f"what is left is in {folder}: remove it by hand")


def _replace_folder(tmp: Path, target: _Target, notes: list[str]) -> None:
    """Put a finished folder in place so that the old or the new results are always there."""
    final = target.final
    # mkdtemp makes the folder private (0700); give it the mode a new folder
    # gets under the user's umask, as a plain mkdir would.
    mask = os.umask(0)
    os.umask(mask)
    os.chmod(tmp, 0o777 & ~mask)
    _fault("before-swap")
    if target.mode == "merge":
        _merge(tmp, target, notes)
        return
    if target.mode == "new":
        try:
            tmp.rename(final)  # onto nothing, or onto an empty folder
            return
        except OSError as exc:
            if exc.errno not in (errno.EEXIST, errno.ENOTEMPTY) or _read_marker(final) is None:
                raise
            # Another run got there first: its folder is the tool's; replace it.
    if _exchange(tmp, final):
        _fault("after-swap")
        _remove(tmp, final, notes)  # tmp now holds the old results
        return
    old = final.with_name(f".{final.name}.old-{os.getpid()}")
    final.rename(old)
    _fault("mid-swap")  # a later run puts `old` back if this one dies here
    tmp.rename(final)
    _fault("after-swap")
    _remove(old, final, notes)


def _merge(tmp: Path, target: _Target, notes: list[str]) -> None:
    """Replace only the tool's own entries of a folder that holds other files too."""
    from spaceframe.errors import WriteError

    final = target.final
    new = [p.name for p in sorted(tmp.iterdir()) if p.name != MARKER]
    foreign_tops = {p.split("/")[0] for p in target.foreign}
    clash = [n for n in new if n in foreign_tops]
    if clash:
        raise WriteError(f"{final / clash[0]}: exists and was not written by spaceframe; "
                         "move it or choose another folder")
    old = final.with_name(f".{final.name}.old-{os.getpid()}")
    old.mkdir()
    _write_marker(old, [])
    new_paths = _tree(tmp)
    # The marker covers old and new paths while they move: whatever a kill leaves
    # is still known to be the tool's.
    _write_marker(final, target.ours | set(new_paths))
    for name in sorted({p.split("/")[0] for p in target.ours}):
        if os.path.lexists(final / name):
            (final / name).rename(old / name)
    _fault("mid-merge")
    for name in new:
        (tmp / name).rename(final / name)
    _write_marker(final, new_paths)
    _remove(old, final, notes)
    _remove(tmp, final, notes)


def _write_error(exc: OSError, tmp: Path, final: Path) -> Exception:
    """The error of a failed write, naming the user's folder, never the temporary one."""
    from spaceframe.errors import WriteError

    what = ""
    if getattr(exc, "filename", None):
        try:
            rel = Path(os.fsdecode(exc.filename)).relative_to(tmp)
            # A hidden name is a writer's own temporary file: name its folder instead.
            parts: list[str] = []
            for part in rel.parts:
                if part.startswith("."):
                    break
                parts.append(part)
            what = f" (writing {Path(*parts).as_posix()})" if parts else ""
        except ValueError:
            what = ""
    reason = exc.strerror or str(exc).replace(str(tmp), str(final))
    if isinstance(exc, WriteError) or not exc.strerror:
        reason = str(exc).replace(str(tmp), str(final))
        return WriteError(reason if reason.startswith(str(final)) else f"{final}: {reason}")
    return WriteError(f"{final}: could not write the results{what}: {reason}; "
                      "the old results are kept")


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
) -> RunOutcome:
    """Solve a model file and write every result into an output folder.

    ``pictures``: False for no pictures and no report; True for pictures of
    the combinations and envelopes (or of the load cases when there are
    neither); or a choice of :func:`spaceframe.viewer.select_cases`
    ("all", "none", names separated by commas).
    ``dxf``: None writes the results drawing up to
    ``spaceframe.io.dxf_results.MEMBER_LIMIT`` members (and says so above
    it), True always, False never; ``dxf_deformed`` adds deformed shapes.

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
    t = time.perf_counter()
    progress("read")
    loaded = load(path, cache=cache)
    timings["read"] = time.perf_counter() - t
    from spaceframe.run import design as run_design

    solve_notes: list[str] = []
    sizing = None
    # Warnings of the solves (a displacement beyond the linear range, ...) go
    # into the run's warning list, as the reader's do.
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", SpaceframeWarning)
        if loaded.project is not None and loaded.project.design is not None \
                and loaded.project.design.sizing is not None:
            progress("size")
            t = time.perf_counter()
            with warnings.catch_warnings(record=True) as trial:
                warnings.simplefilter("always", SpaceframeWarning)
                sizing = run_design.run_sizing(loaded.model, loaded.project,
                                               lambda mm: mm.solve(solver=solver))
            # Said of a trial choice of sections, not of the final model: marked so.
            for w in trial:
                text = f"during sizing: {w.message}"
                if issubclass(w.category, SpaceframeWarning) and text not in solve_notes:
                    solve_notes.append(text)
            timings["size"] = time.perf_counter() - t
        progress("solve")
        t = time.perf_counter()
        results = loaded.solve(solver=solver)
        timings["solve"] = time.perf_counter() - t
    for w in caught:
        if issubclass(w.category, SpaceframeWarning):
            text = str(w.message)
            if text not in solve_notes and text not in loaded.warnings:
                solve_notes.append(text)
        else:
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    from spaceframe.io import tables
    from spaceframe.results.summary import summary as make_summary

    summ = make_summary(results)
    from spaceframe.io.tables import envelope_summary

    envelopes = loaded.project.envelope_results(results) if loaded.project is not None else {}
    summ["envelopes"] = envelope_summary(results, envelopes)
    summ["source"] = str(loaded.path.resolve())
    summ["title"] = loaded.title
    summ["warnings"] = [*loaded.warnings, *solve_notes]
    design = None
    if loaded.model.n_members:
        progress("check members")
        t = time.perf_counter()
        design = run_design.run_checks(loaded.model, results, envelopes, loaded.project,
                                       sizing=sizing)
        timings["design"] = time.perf_counter() - t
        if design is None:
            _, reasons = run_design.checkable_members(loaded.model)
            line = ("design checks not run: " + run_design.missing_text(
                reasons, loaded.model.n_members)
                    + "; give the materials a yield strength (cables a breaking force) "
                    "or add a [design] table to check the others")
            summ["warnings"].append(line)
            summ["design"] = {"checked_members": 0, "not_checked": line}
        else:
            summ["design"] = design.summary(loaded.model)
            if design.missing:
                summ["warnings"].append("design checks: " + design.missing)
            nb = design.buckling_not_checked
            if nb.size:
                summ["warnings"].append(
                    f"design checks: {nb.size} members in compression have no second moment, "
                    f"so their buckling is not checked and they count as failing (members "
                    f"{run_design.ranges(nb)}); give their sections a second moment")
            if sizing is not None and not sizing.converged:
                summ["warnings"].append(
                    f"design sizing did not settle in {len(sizing.iterations)} iterations; "
                    "the last choice is used")
            if sizing is not None and sizing.no_section:
                g, n = next(iter(sizing.no_section.items()))
                summ["warnings"].append(
                    f"design sizing: no catalogue section makes every member of group {g!r} "
                    f"pass ({n} members fail with the largest)")
    analysis_spec = getattr(loaded.project, "analysis", None)
    modes: list[Any] = []  # mode shapes of [analysis], written to vtk/modes
    if analysis_spec is not None and (analysis_spec.buckling or analysis_spec.frequencies):
        from spaceframe.project.analysis import run_analyses_with_modes

        progress("buckling and frequencies")
        t = time.perf_counter()
        summ["analysis"], modes = run_analyses_with_modes(analysis_spec, loaded.model, results,
                                                          solver=solver)
        timings["analysis"] = time.perf_counter() - t
    target = _target(Path(output) if output is not None else loaded.output, loaded, force)
    final = target.final
    notes: list[str] = []
    _clean_leftovers(final, notes)
    summ["warnings"] = [*summ["warnings"], *notes]
    notes = []
    if target.mode == "new" and final.exists():
        target = _target(final, loaded, force)  # a leftover was put back
    try:
        final.parent.mkdir(parents=True, exist_ok=True)
        tmp = Path(tempfile.mkdtemp(prefix=f".{final.name}.tmp-{os.getpid()}-",
                                    dir=final.parent))
    except OSError as exc:
        from spaceframe.errors import WriteError

        raise WriteError(f"{final}: cannot create the results folder in {final.parent}: "
                         f"{exc.strerror or exc}") from None
    files: list[Path] = []
    try:
        _write_marker(tmp, [])
        _fault("after-mkdtemp")
        progress("write tables")
        t = time.perf_counter()
        keys = ("source", "title", "warnings", "envelopes", "design", "analysis")
        extra: dict[str, Any] = {k: summ[k] for k in keys if k in summ}
        files += _write_outputs(tmp, results, loaded, pictures, progress, extra, design,
                                dxf_options={"requested": dxf, "deformed": dxf_deformed})
        files += tables.write_envelopes(tmp, results, envelopes)
        import importlib.util

        if modes and importlib.util.find_spec("pyvista") is not None:
            from spaceframe.io import vtk

            progress("write mode shapes")
            files += vtk.write_modes(tmp / "vtk" / "modes", results, modes)
        _fault("after-write")
        if "disk-full" in _faults():
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC),
                          str(tmp / "vtk" / f".results.{os.getpid()}-0123456789ab.vtu"))
        _write_marker(tmp, _tree(tmp))
        timings["write"] = time.perf_counter() - t
        _replace_folder(tmp, target, notes)
    except OSError as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        raise _write_error(exc, tmp, final) from None
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    summ["warnings"] = [*summ["warnings"], *notes]
    files = [final / f.relative_to(tmp) for f in files]
    return RunOutcome(results, summ, final, files, timings, design)


def _write_outputs(
    folder: Path,
    results: Results,
    loaded: Loaded,
    pictures: bool | str,
    progress: Progress,
    extra: dict[str, Any],
    design: Any = None,
    dxf_options: dict[str, Any] | None = None,
) -> list[Path]:
    """Every writer that is installed; tables always."""
    import importlib.util

    from spaceframe.io import tables

    dxf_opt = dxf_options or {}
    if importlib.util.find_spec("ezdxf") is not None:
        from spaceframe.io.dxf_results import dxf_wanted

        note = dxf_wanted(results.model.n_members, "results.dxf", dxf_opt.get("requested"))[1]
        if note is not None:  # said in the summary and by the command
            extra["warnings"].append(note)
    files = [Path(p) for p in tables.write(folder, results, extra=extra)]
    if design is not None:
        cols = design.columns()
        checked = np.zeros(results.model.n_members, dtype=bool)
        checked[design.members] = True
        files += tables.write_member_design(folder, results, {
            **cols, "section": design.sections, "material": design.materials,
            "utilisation": design.utilisation, "passes": design.passes, "checked": checked})
    if importlib.util.find_spec("ezdxf") is not None:
        from spaceframe.io import dxf_results

        progress("write DXF")
        dxf_kw: dict[str, Any] = {"failing": design.failing} if design is not None else {}
        if dxf_opt.get("deformed"):
            dxf_kw["deformed_scale"] = "auto"
        dxf, _ = dxf_results.write_if_wanted(folder / "results.dxf", results,
                                             requested=dxf_opt.get("requested"), **dxf_kw)
        if dxf is not None:
            files.append(dxf)
    if importlib.util.find_spec("pyvista") is not None:
        from spaceframe.io import vtk

        progress("write VTK")
        vtk_kw = ({"utilisation": design.per_result, "governing_utilisation": design.utilisation}
                  if design is not None else {})
        files.append(Path(vtk.write(folder / "vtk", results, **vtk_kw)))
        if pictures:
            from spaceframe import viewer
            from spaceframe.run import report

            envelopes = (loaded.project.envelope_results(results)
                         if loaded.project is not None else {})
            drawable = viewer.with_envelopes(results, envelopes)
            chosen = viewer.select_cases(drawable, "combinations" if pictures is True
                                         else str(pictures))
            progress("render pictures")
            pics = [Path(p) for p in report.write_pictures(
                folder / "pictures", drawable, cases=chosen, progress=progress)]
            if design is not None and design.members.size:
                # Utilisation of each checked result that gets pictures (iso view).
                util = {n: u for n, u in design.per_result.items() if n in drawable}
                shown = [n for n in chosen if n in util] or list(util)[:1]
                pics += [Path(p) for p in report.write_pictures(
                    folder / "pictures" / "utilisation", drawable, views=("iso",), cases=shown,
                    color_by="utilisation", utilisation=util, prefix="utilisation_",
                    progress=lambda text: progress("utilisation " + text))]
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
                        warnings=extra.get("warnings", loaded.warnings),
                        pictures=pics,
                        charts=charts,
                        design=extra.get("design"),
                        analysis=extra.get("analysis"),
                    )
                )
            )
    return files
