"""What goes into a results folder: tables, member design, DXF, VTK, pictures, report.

Each writer runs when its library is installed; the tables always.
"""

from __future__ import annotations

import importlib.util
import threading
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    from spaceframe.results import Results
    from spaceframe.run.job import Loaded, Progress


#: Above this many results (load cases and combinations), only some of them
#: get files of their own -- columns of the CSV tables, VTK files, DXF layers,
#: pictures (:func:`results_with_files`); every result is in results.npz.  A
#: thousand cases of a 100k-member model would otherwise be a thousand VTK
#: files and 100 million DXF lines, more than anyone opens.
PER_RESULT_LIMIT = 50


def results_with_files(figures: dict[str, Any],
                       every: bool = False) -> tuple[list[str], str | None]:
    """The results that get files of their own, and a note when that is not all of them.

    ``figures``: each result's figures, the "results" of
    :func:`spaceframe.results.summary.summary` (kind, largest displacement,
    tension and compression).  Up to :data:`PER_RESULT_LIMIT` results (or with
    ``every``): all.  Above: the combinations (the first
    :data:`PER_RESULT_LIMIT`) and the cases that give the largest
    displacement, the largest tension and the largest compression of all.
    """
    names = list(figures)
    if every or len(names) <= PER_RESULT_LIMIT:
        return names, None
    chosen = [n for n in names if figures[n]["kind"] == "combination"][:PER_RESULT_LIMIT]

    def force(entry: dict[str, Any] | None) -> float:
        return 0.0 if entry is None else abs(float(entry["force"]))

    # None where no member is in tension (or compression): no case of the largest.
    peaks = np.array([[float(f["max_displacement"]["value"]), force(f["max_tension"]),
                       force(f["max_compression"])] for f in figures.values()])
    for j, peak in zip(np.argmax(peaks, axis=0), peaks.max(axis=0), strict=True):
        if peak > 0 and names[j] not in chosen:
            chosen.append(names[j])
    note = (f"{len(names)} results: the CSV tables, VTK files, DXF layers and pictures hold "
            f"{len(chosen)} of them (the combinations and the cases of the largest "
            "displacement, tension and compression); every result is in results.npz; "
            "--every-result writes them all")
    return chosen, note


class InBackground:
    """A call run on a thread of its own: :meth:`result` waits for it and re-raises.

    As a context manager, an error inside the block waits for the call to
    finish before it goes on (whatever the call gives: the block's error is
    the one reported), so that nothing removes a folder the thread still
    writes into.
    """

    def __init__(self, fn: Callable[[], list[Path]], name: str) -> None:
        self._fn = fn
        self._out: list[Path] = []
        self._exc: BaseException | None = None
        self._thread = threading.Thread(target=self._run, name=name, daemon=True)
        self._thread.start()

    def _run(self) -> None:
        try:
            self._out = self._fn()
        except BaseException as exc:  # handed to the caller by result()
            self._exc = exc

    def result(self) -> list[Path]:
        """The call's return value, once it has finished; its exception raised here."""
        self._thread.join()
        if self._exc is not None:
            raise self._exc
        return self._out

    @property
    def running(self) -> bool:
        """True while the call has not finished."""
        return self._thread.is_alive()

    def __enter__(self) -> InBackground:
        return self

    def __exit__(self, kind: type[BaseException] | None, *_: object) -> None:
        if kind is not None:
            self._thread.join()


def arrays_in_background(folder: Path, results: Results) -> InBackground:
    """results.npz of every result, written on a thread while the caller goes on.

    At a thousand cases of a 100k-member model it is gigabytes, written at
    the disk's speed: the checks, the summary and the other files are made
    meanwhile.  The caller uses it as a context manager around its own work
    and calls ``result()`` before the folder is swapped in.
    """
    from spaceframe.io import tables

    return InBackground(lambda: tables.write_arrays(folder, results), "write results.npz")


def write_outputs(
    folder: Path,
    results: Results,
    loaded: Loaded,
    pictures: bool | str,
    progress: Progress,
    extra: dict[str, Any],
    design: Any = None,
    dxf_options: dict[str, Any] | None = None,
    *,
    envelopes: dict[str, Any] | None = None,
    modes: list[Any] | None = None,
    paths: list[Any] | None = None,
    shown: list[str] | None = None,
    summary_data: dict[str, Any] | None = None,
    arrays: InBackground | None = None,
) -> list[Path]:
    """Every writer that is installed into ``folder``; tables always; the paths written.

    ``extra`` goes into the summary (its "warnings" list gets what the writers
    say); ``dxf_options``: "requested" (None, True or False) and "deformed";
    ``paths``: the load paths of [analysis.nonlinear]
    (:class:`spaceframe.project.analysis.TracedPath`), written as
    ``paths/<result>.csv``, ``vtk/paths/<result>.pvd`` and, with pictures,
    ``pictures/paths/<result>.png``; ``shown``: the results that get files of
    their own (:func:`results_with_files`; default all), the summary and
    results.npz hold every result; ``summary_data``: the results' summary
    when the caller has it (:func:`spaceframe.results.summary.summary`);
    ``arrays``: the writing of results.npz when the caller has started it
    (:func:`arrays_in_background`), else it is started here.
    """
    envelopes = envelopes or {}
    every = results
    if shown is not None and len(shown) < len(results):
        results = results.subset(shown)
    dxf_opt = dxf_options or {}
    has_ezdxf = importlib.util.find_spec("ezdxf") is not None
    has_pyvista = importlib.util.find_spec("pyvista") is not None
    if has_ezdxf:
        from spaceframe.io.dxf_results import dxf_wanted

        note = dxf_wanted(results.model.n_members, "results.dxf", dxf_opt.get("requested"))[1]
        if note is not None:  # said in the summary and by the command
            extra["warnings"].append(note)
    # Mode shapes first, so that summary.json can list their files.
    files = _write_modes(folder, results, modes or [], pictures, progress, has_pyvista, extra)
    # results.npz is what `view RESULTS_DIR` reads back.
    if arrays is None:
        arrays = arrays_in_background(folder, every)
    with arrays:
        files += _write_files(folder, every, results, loaded, pictures, progress, extra, design,
                              dxf_opt, envelopes, paths or [], summary_data, has_ezdxf,
                              has_pyvista)
    if arrays.running:  # said, as every step that can take seconds is
        progress("write results.npz (every result)")
    return files + arrays.result()


def _write_files(folder: Path, every: Results, results: Results, loaded: Loaded,
                 pictures: bool | str, progress: Progress, extra: dict[str, Any], design: Any,
                 dxf_opt: dict[str, Any], envelopes: dict[str, Any], paths: list[Any],
                 summary_data: dict[str, Any] | None, has_ezdxf: bool,
                 has_pyvista: bool) -> list[Path]:
    """The files of :func:`write_outputs` after the mode shapes, but results.npz."""
    from spaceframe.io import tables

    files = [Path(p) for p in tables.write(folder, every, extra=extra, columns=list(results),
                                           summary_data=summary_data)]
    if design is not None:
        files += _write_member_design(folder, results, design)
    if has_ezdxf:
        files += _write_dxf(folder, results, design, dxf_opt, progress)
    path_files = _write_paths(folder, results.model, paths, pictures, progress, has_pyvista)
    files += path_files
    plots = [f for f in path_files if f.suffix == ".png"]
    if has_pyvista:
        from spaceframe.io import vtk

        vtk_kw = ({"utilisation": design.per_result, "governing_utilisation": design.utilisation}
                  if design is not None else {})
        files.append(Path(vtk.write(folder / "vtk", results, progress=progress, **vtk_kw)))
        if pictures:
            files += _write_pictures_and_report(folder, _pictured(every, results, pictures),
                                                loaded, pictures, progress,
                                                extra, design, envelopes, plots)
    files += tables.write_envelopes(folder, every, envelopes)
    return files


def _pictured(every: Results, shown: Results, pictures: bool | str) -> Results:
    """The results pictures are drawn from: those with files, and any asked for by name."""
    from spaceframe.viewer.pictures import PICTURE_CHOICES

    if not isinstance(pictures, str) or pictures in PICTURE_CHOICES:
        return shown
    asked = [n for n in (t.strip() for t in pictures.split(",")) if n in every
             and n not in shown]
    return every.subset([*shown, *asked]) if asked else shown


#: Mode shapes pictured per buckling result and for the frequencies: the lowest few.
PICTURED_MODES = 3


def _mode_label(mode: Any) -> str:
    if mode.kind == "buckling":
        return f"buckling {mode.result} mode {mode.number} (factor {mode.value:.3g})"
    return f"frequency mode {mode.number} ({mode.value:.3g} Hz)"


def _write_modes(folder: Path, results: Results, modes: list[Any], pictures: bool | str,
                 progress: Progress, has_pyvista: bool, extra: dict[str, Any]) -> list[Path]:
    """``vtk/modes/`` and, with pictures, ``pictures/modes/`` (the lowest few of each kind).

    Their paths, relative to the folder, go into the summary as ``"mode_files"``.
    """
    if not modes or not has_pyvista:
        return []
    from spaceframe.io import vtk

    progress("write mode shapes")
    files = [Path(p) for p in vtk.write_modes(folder / "vtk" / "modes", results, modes)]
    shown = [m for m in modes if m.number <= PICTURED_MODES]
    pics: list[Path] = []
    if pictures and shown:
        from spaceframe import viewer

        pics = viewer.mode_pictures(folder / "pictures" / "modes", results,
                                    [(_mode_label(m), m.shape) for m in shown],
                                    progress=progress)
    extra["mode_files"] = {
        "vtk": [p.relative_to(folder).as_posix() for p in files],
        "pictures": [p.relative_to(folder).as_posix() for p in pics],
    }
    return files + pics


def _write_member_design(folder: Path, results: Results, design: Any) -> list[Path]:
    from spaceframe.io import tables

    checked = np.zeros(results.model.n_members, dtype=bool)
    checked[design.members] = True
    return list(tables.write_member_design(folder, results, {
        **design.columns(), "section": design.sections, "material": design.materials,
        "utilisation": design.utilisation, "passes": design.passes, "checked": checked}))


def _write_dxf(folder: Path, results: Results, design: Any, dxf_opt: dict[str, Any],
               progress: Progress) -> list[Path]:
    from spaceframe.io import dxf_results

    progress("write DXF")
    dxf_kw: dict[str, Any] = {"failing": design.failing} if design is not None else {}
    if dxf_opt.get("deformed"):
        dxf_kw["deformed_scale"] = "auto"
    dxf, _ = dxf_results.write_if_wanted(folder / "results.dxf", results,
                                         requested=dxf_opt.get("requested"), **dxf_kw)
    return [dxf] if dxf is not None else []


def _write_pictures_and_report(folder: Path, results: Results, loaded: Loaded,
                               pictures: bool | str, progress: Progress, extra: dict[str, Any],
                               design: Any, envelopes: dict[str, Any],
                               plots: list[Path]) -> list[Path]:
    """Pictures of the chosen results, utilisation pictures, charts, then the report."""
    from spaceframe import viewer
    from spaceframe.run import report

    drawable = viewer.with_envelopes(results, envelopes)
    chosen = viewer.select_cases(drawable, "combinations" if pictures is True
                                 else str(pictures))
    progress("render pictures")
    pics = [Path(p) for p in report.write_pictures(
        folder / "pictures", drawable, cases=chosen, progress=progress)]
    if design is not None and design.members.size:
        # Utilisation of each checked result that gets pictures (iso view).
        # Each utilisation is made when read: only those of the results shown.
        checked = [n for n in design.per_result if n in drawable]
        shown = [n for n in chosen if n in design.per_result and n in drawable] or checked[:1]
        util = {n: design.per_result[n] for n in shown}
        pics += [Path(p) for p in report.write_pictures(
            folder / "pictures" / "utilisation", drawable, views=("iso",), cases=shown,
            color_by="utilisation", utilisation=util, prefix="utilisation_",
            progress=lambda text: progress("utilisation " + text))]
    charts = [Path(p) for p in report.write_charts(folder / "pictures", drawable,
                                                   cases=chosen)]
    progress("write report")
    page = report.write_report(
        folder / "report.html",
        results,
        title=loaded.title,
        heal_report=loaded.model.meta.get("heal:report"),
        warnings=extra.get("warnings", loaded.warnings),
        pictures=pics,
        charts=charts,
        design=extra.get("design"),
        analysis=extra.get("analysis"),
        nonlinear=extra.get("nonlinear"),
        path_plots=plots,
    )
    return [*pics, *charts, Path(page)]


def _write_paths(folder: Path, model: Any, paths: list[Any], pictures: bool | str,
                 progress: Progress, has_pyvista: bool) -> list[Path]:
    """Each load path as CSV, as a VTK series (with pyvista) and a plot (with pictures)."""
    from spaceframe.io import tables
    from spaceframe.run.report import _safe

    out: list[Path] = []
    drawn = bool(pictures) and importlib.util.find_spec("matplotlib") is not None
    for t in paths:
        progress(f"write load path {t.name}")
        stem = _safe(t.name)
        (folder / "paths").mkdir(parents=True, exist_ok=True)
        out.append(tables.write_path(folder / "paths" / f"{stem}.csv", t.path, t.nodes))
        if has_pyvista:
            from spaceframe.io import vtk

            out.append(vtk.write_path(folder / "vtk" / "paths" / f"{stem}.pvd", model, t.path))
        if drawn:
            (folder / "pictures" / "paths").mkdir(parents=True, exist_ok=True)
            out.append(path_plot(folder / "pictures" / "paths" / f"{stem}.png", t))
    return out


#: Curves drawn in one load-displacement plot (the CSV has every node given).
PLOTTED_NODES = 8


def path_plot(png: Path, traced: Any) -> Path:
    """The load-displacement curve of a traced path, limit points marked; the PNG written.

    Each node's displacement is drawn along the direction in which it moved
    most at the last step (so that the curve runs to the right), in mm,
    against the load factor.
    """
    from spaceframe.run.report import _chart, _save_figure

    p = traced.path
    lam = np.asarray(p.load_factors)
    nodes = [int(i) for i in traced.nodes][:PLOTTED_NODES]
    title = f"{traced.name}: load factor against displacement"
    fig, ax = _chart(title, "displacement [mm]", "load factor [-]", None)
    ax.set_title(title + (" (stopped early)" if traced.stopped else ""))
    for i in nodes:
        u = np.asarray(p.displacements[:, i, :])
        axis = int(np.argmax(np.abs(u[-1])))
        sign = -1.0 if u[-1, axis] < 0 else 1.0
        x = sign * u[:, axis] * 1e3
        ax.plot(x, lam, marker=".", markersize=3,
                label=f"node {i}, {'-' if sign < 0 else '+'}{'xyz'[axis]}")
        for k in p.limit_points:
            ax.plot(x[k], lam[k], "o", color="tab:red", markersize=7, fillstyle="none")
            ax.annotate(f"limit {lam[k]:.4g} (step {int(k)})", (x[k], lam[k]),
                        textcoords="offset points", xytext=(6, 6), fontsize=8)
    ax.axhline(0.0, color="0.6", linewidth=0.8)
    ax.grid(True, alpha=0.3)
    if nodes:
        ax.legend(fontsize=8)
    return _save_figure(fig, png)
