"""Pictures, charts and a self-contained HTML report of a run.

The report is one HTML file with inline styles and no scripts or network
resources.  Pictures and charts are embedded as base64 data URIs (the
default), so the one file can be mailed; with ``embed_images=False`` they
are referenced by relative path instead.

Display units in the report: mm for displacements, kN for forces, MPa for
stresses, kg for masses, and for lengths and positions (healing locations
included) one unit throughout, the model file's length unit
(:func:`length_unit`, metres when it sets none); numbers with four
significant figures (:func:`spaceframe.results.summary.format_number`).
"""

from __future__ import annotations

import base64
import datetime as _dt
import html
import os
import re
from collections.abc import Callable, Iterable, Mapping, Sequence
from pathlib import Path
from string import Template
from typing import TYPE_CHECKING, Any
from urllib.parse import quote

import numpy as np

from spaceframe.errors import ModelError, ReadError
from spaceframe.results.summary import format_number, summary
from spaceframe.run.design import DESIGN_CAUTION, GAMMA_NOTE
from spaceframe.tolerances import RESIDUAL_TOLERANCE

if TYPE_CHECKING:
    from spaceframe.results import Results

__all__ = [
    "CAUTION",
    "ZERO_FORCE_FRACTION",
    "force_scale",
    "format_number",
    "length_unit",
    "summary",
    "write_charts",
    "write_pictures",
    "write_report",
]

#: Printed at the top and the foot of every report.
CAUTION = (
    "Results must be checked by a qualified engineer; local codes and licensed "
    "practice govern."
)

#: Member forces below this fraction of the model's force scale
#: (:func:`force_scale`) are drawn as zero: the solve itself is accepted with
#: a relative equilibrium error up to RESIDUAL_TOLERANCE, so a smaller force
#: cannot be told from round-off.
ZERO_FORCE_FRACTION = RESIDUAL_TOLERANCE


def force_scale(results: Results) -> float:
    """The model's force scale, N: the largest force that any of its results involves.

    The largest of |member force|, |applied load| and |reaction| over all
    results, and of the force EA e / L that each member's free elongation e
    (temperature, lack of fit) would cause if it were fully restrained: a
    freely expanding frame carries no force, yet its scale is that of the
    forces its restraint would give.
    """
    model = results.model
    top = 0.0
    ea_l = np.divide(model.E * model.area, model.lengths,
                     out=np.zeros(model.n_members), where=model.lengths > 0)
    for res in results.values():
        elastic = res.axial_forces / np.where(ea_l > 0, ea_l, np.inf)
        free = res.elongations - elastic
        parts = (res.axial_forces, res.loads, res.reactions, ea_l * free)
        top = max(top, *(float(np.abs(np.nan_to_num(a)).max(initial=0.0)) for a in parts))
    return top


def length_unit(model: Any) -> tuple[str, float]:
    """(name, metres per unit) of the report's one length unit: the model file's.

    ``model.meta["project:length_unit"]`` when the model came from a model
    file that sets ``[units] length``, else metres.
    """
    unit = model.meta.get("project:length_unit") if hasattr(model, "meta") else None
    if unit:
        return str(unit["name"]), float(unit["scale"])
    return "m", 1.0


_SAFE = re.compile(r"[^A-Za-z0-9_.+-]+")


def _safe(name: str) -> str:
    return _SAFE.sub("_", name).strip("._") or "result"


def _write_bytes(path: Path, data: bytes) -> Path:
    from spaceframe.files import atomic_write

    def save(tmp: Path) -> None:
        tmp.write_bytes(data)

    return atomic_write(path, save)


def _save_figure(fig: Any, path: Path) -> Path:
    from spaceframe.files import atomic_write

    return atomic_write(path, lambda tmp: fig.savefig(tmp, format="png"))


def _chart(name: str, xlabel: str, ylabel: str, empty: str | None) -> tuple[Any, Any]:
    """A figure and its axes, labelled; when ``empty`` is a note, titled "no member force"."""
    from matplotlib.figure import Figure

    # Figure() without pyplot: no global backend or window state (Agg canvas).
    fig = Figure(figsize=(8, 4.5), dpi=100, layout="constrained")
    ax = fig.add_subplot()
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    if empty is not None:
        _no_force(ax, empty)
        ax.set_title(f"{name}: no member force")
    return fig, ax


# ----------------------------------------------------------------- pictures
def write_pictures(
    folder: str | os.PathLike[str],
    results: Results,
    views: Sequence[str] = ("iso", "top", "front"),
    *,
    cases: Sequence[str] | None = None,
    size: Sequence[int] = (1200, 800),
    color_by: str = "axial_force",
    progress: Callable[[str], None] | None = None,
    utilisation: Mapping[str, Any] | None = None,
    prefix: str = "",
) -> list[Path]:
    """One PNG per result and view, rendered off-screen: ``<result>_<view>.png``.

    Parameters
    ----------
    folder : path-like
        Created if missing.
    results : Results
    views : sequence of {"iso", "top", "front", "side"}
    cases : sequence of str, optional
        Results to draw (default all).
    size : (2,) int
        Picture width and height, pixels.
    color_by : {"axial_force", "stress", "displacement", "group", "utilisation"}
        "utilisation" needs ``utilisation`` (result name -> (b,) values).
    progress : callable, optional
        Called with "pictures k/n" before each picture.

    Returns
    -------
    list of Path
        By result, then by view.
    """
    from spaceframe import viewer

    return viewer.screenshots(folder, results, cases=cases, views=views, size=size,
                              color_by=color_by, progress=progress, utilisation=utilisation,
                              prefix=prefix)


# ------------------------------------------------------------------- charts
def write_charts(
    folder: str | os.PathLike[str],
    results: Results,
    *,
    cases: Sequence[str] | None = None,
    top: int = 15,
) -> list[Path]:
    """Two charts per result (matplotlib, PNG, no display needed).

    - ``<result>_members.png``: bar chart of the ``top`` members with the
      largest absolute axial force, red for tension, blue for compression.
    - ``<result>_groups.png``: histogram of axial forces, stacked by group.

    Forces up to :data:`ZERO_FORCE_FRACTION` of :func:`force_scale` count as
    zero; a result whose members all carry none gets charts that say
    "no member force" instead of bars of round-off.

    Returns
    -------
    list of Path
        By result: the bar chart, then the histogram.
    """
    from matplotlib.ticker import MaxNLocator

    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    model = results.model
    names = list(results) if cases is None else list(cases)
    unknown = [n for n in names if n not in results]
    if unknown:
        raise KeyError(f"no result named {unknown[0]!r} (have: {', '.join(results)})")
    groups: list[tuple[str, np.ndarray]] = list(model.groups.items())
    in_group = np.zeros(model.n_members, dtype=bool)
    for _, ids in groups:
        in_group[ids] = True
    if not in_group.all():
        label = "(no group)" if groups else "all members"
        groups.append((label, np.flatnonzero(~in_group)))
    paths: list[Path] = []
    used: set[str] = set()  # "heat x" and "heat_x" must not share a file
    zero = ZERO_FORCE_FRACTION * force_scale(results)
    for name in names:
        stem, n = _safe(name), 2
        while stem.lower() in used:
            stem, n = f"{_safe(name)}_{n}", n + 1
        used.add(stem.lower())
        res = results[name]
        # Round-off is not a force: below the threshold a member carries none.
        forces = np.where(np.abs(res.axial_forces) <= zero, 0.0, res.axial_forces)
        kn = forces / 1e3
        k = min(int(top), int(np.count_nonzero(kn)))
        order = np.argsort(-np.abs(kn), kind="stable")[:k]
        none_note = (f"no member force (every |N| <= {format_number(zero / 1e3, 2)} kN, "
                     f"{ZERO_FORCE_FRACTION:.0e} of the model's force scale)")
        empty = none_note if k == 0 else None
        fig, ax = _chart(name, "member", "axial force [kN] (tension +)", empty)
        if k:
            colors = np.where(kn[order] >= 0, "#c8281e", "#2a4fbf")
            ax.bar(np.arange(k), kn[order], color=colors)
            ax.set_xticks(np.arange(k), [str(int(i)) for i in order], rotation=90, fontsize=8)
            ax.axhline(0.0, color="black", linewidth=0.8)
            ax.set_title(f"{name}: {k} most loaded members")
        paths.append(_save_figure(fig, out / f"{stem}_members.png"))

        fig, ax = _chart(name, "axial force [kN] (tension +)", "members", empty)
        if k:
            lo, hi = float(kn.min(initial=0.0)), float(kn.max(initial=0.0))
            bins = np.linspace(lo, hi, 31).tolist()
            ax.hist([kn[ids] for _, ids in groups], bins=bins, stacked=True,
                    label=[g for g, _ in groups])
            ax.axvline(0.0, color="black", linewidth=0.8)
            ax.yaxis.set_major_locator(MaxNLocator(integer=True))
            ax.set_title(f"{name}: axial forces by group")
            ax.legend(fontsize=8)
        paths.append(_save_figure(fig, out / f"{stem}_groups.png"))
    return paths


def _no_force(ax: Any, note: str) -> None:
    """An empty chart that says so, with no round-off axis."""
    ax.text(0.5, 0.5, note, ha="center", va="center", transform=ax.transAxes, fontsize=11,
            wrap=True)
    ax.set_xticks([])
    ax.set_yticks([])


# ------------------------------------------------------------------- report
def _design_section(d: Mapping[str, Any], model: Any, unit: str, per_unit: float) -> str:
    """The design checks: failing count, the worst members, factors, deflection, sizing."""
    parts = ["<h2>Design checks</h2>"]
    n = int(d.get("checked_members", 0))
    if not n:
        parts.append(f"<p>No member was checked: {_e(d.get('not_checked', ''))}</p>")
        return "\n".join(parts)
    fail = int(d["failing"])
    w = d["worst"]
    groups = ", ".join(w["groups"]) or "no group"
    slender = int(d.get("too_slender", 0))
    parts.append(
        f"<p><strong>{fail} of {n} checked members fail</strong>"
        + (f" ({slender} of them too slender: L_cr/i above its limit)" if slender else "")
        + (f" (members {_e(', '.join(str(i) for i in d['failing_members'][:20]))}"
           + (", ..." if fail > 20 else "") + ")" if fail else "")
        + f". The most utilised is member {w['member']} ({_e(groups)}) at utilisation "
        f"{format_number(w['utilisation'], 3)} in {_e(w['result'])} ({_e(w['check'])}: "
        f"N = {_kn(w['force'])} kN against {_kn(w['resistance'])} kN).</p>")
    if d.get("most_utilised"):
        parts.append("<h3>Most utilised members</h3>")
        parts.append(_table(
            ["member", "group", "utilisation", "governing result", "governing check"],
            [(v["member"], ", ".join(v["groups"]) or "-", format_number(v["utilisation"], 3),
              v["result"], v["check"]) for v in d["most_utilised"]], text_cols=0))
    if d.get("not_checked"):
        parts.append(f"<p>Not checked: {_e(d['not_checked'])}.</p>")
    if d.get("groups"):
        parts.append("<h3>Worst member per group</h3>")
        parts.append(_table(
            ["group", "worst member", "utilisation", "governing result"],
            [(g, v["member"], format_number(v["utilisation"], 3), v["result"])
             for g, v in sorted(d["groups"].items(), key=lambda kv: -kv[1]["utilisation"])],
            text_cols=1))
    gam = d["gammas"]
    parts.append(
        "<p>Partial factors used: "
        + ", ".join(f"{_e(k.replace('gamma_', 'γ_'))} = {format_number(v, 3)}"
                    for k, v in gam.items())
        + f" (γ_M0, γ_M1, γ_M2 default to the {_e(GAMMA_NOTE)}; γ_cable is this tool's "
        "factor on a cable's breaking force, from memory: check it). Results checked: "
        + _e(", ".join(d["results_checked"])) + ". The member table is member_design.csv.</p>")
    for de in d.get("deflection", []):
        parts.append(
            f"<p>Deflection in {_e(de['result'])}: {format_number(de['deflection'] * 1e3)} mm "
            f"({de['direction']}) at node {de['node']} against span / {format_number(de['ratio'])}"
            f" = {format_number(de['limit'] * 1e3)} mm (span {format_number(de['span'] / per_unit)}"
            f" {_e(unit)}): <strong>{'passes' if de['passes'] else 'FAILS'}</strong>.</p>")
    sz = d.get("sizing")
    if sz:
        rows = [(k + 1, g, v["section"], "too slender" if v["utilisation"] is None
                 else format_number(v["utilisation"], 3))
                for k, step in enumerate(sz["iterations"]) for g, v in step.items()]
        parts.append(
            "<h3>Sizing</h3><p>"
            + ("Converged" if sz["converged"] else "Did not settle")
            + f" after {len(sz['iterations'])} iterations: "
            + _e(", ".join(f"{g}: {s}" for g, s in sz["sections"].items())) + ".</p>"
            + _table(["iteration", "group", "section", "largest utilisation"], rows,
                     text_cols=0))
    parts.append(f'<p class="caution">{_e(DESIGN_CAUTION)}</p>')
    return "\n".join(parts)


_PAGE = Template("""<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<title>$title</title>
<style>
body { font-family: sans-serif; margin: 2em auto; max-width: 72em; color: #222; }
h1 { font-size: 1.6em; } h2 { font-size: 1.25em; border-bottom: 1px solid #aaa; margin-top: 2em; }
table { border-collapse: collapse; margin: 0.6em 0; }
th, td { border: 1px solid #bbb; padding: 0.2em 0.6em; text-align: right; }
th { background: #eee; } td.text, th.text { text-align: left; }
.caution { border: 2px solid #b33; background: #fdf0f0; padding: 0.6em 1em; font-weight: bold; }
figure { display: inline-block; margin: 0.5em; }
figure img { max-width: 34em; border: 1px solid #ccc; }
pre { background: #f6f6f6; padding: 0.6em; overflow-x: auto; }
</style>
</head>
<body>
<h1>$title</h1>
<p class="caution">$caution</p>
$body
<p class="caution">$caution</p>
</body>
</html>
""")


def _analysis_section(a: Mapping[str, Any]) -> str:
    """The [analysis] block: load factors per result, frequencies, and their limits."""
    parts = ["<h2>Buckling and frequencies</h2>"]
    b = a.get("buckling")
    if b:
        rows = []
        for name, entry in b["results"].items():
            factors = entry.get("factors") or []
            passes = entry.get("passes")
            rows.append((name, ", ".join(format_number(f) for f in factors) or "-",
                         "-" if passes is None else ("yes" if passes else "NO"),
                         entry.get("note") or ""))
        low = b.get("lowest")
        parts.append("<p>Lowest buckling load factor: "
                     + (_e(f"{format_number(low['factor'])} ({low['result']})") if low else "none")
                     + (_e(f"; required at least {format_number(b['min_factor'])}")
                        if b.get("min_factor") is not None else "") + ".</p>")
        if b.get("reading"):
            parts.append("<p>" + _e(b["reading"][0].upper() + b["reading"][1:]) + ".</p>")
        parts.append(_table(["result", "load factors", "passes", "note"], rows, text_cols=4))
        parts.append("<p>Linear buckling is a first-order estimate: " + _e(b.get("method", ""))
                     + ". Imperfections, joint flexibility and large displacements are not "
                     "included.</p>")
    f = a.get("frequencies")
    if f:
        freqs = f.get("frequencies_hz") or []
        frows = [(k + 1, format_number(v)) for k, v in enumerate(freqs)]
        head = (f"Natural frequencies ({f.get('mass', '')} mass"
                + (f", total {format_number(f['total_mass_kg'])} kg" if "total_mass_kg" in f
                   else "") + ")")
        if "min_frequency_hz" in f:
            head += (f"; required at least {format_number(f['min_frequency_hz'])} Hz: "
                     + ("passes" if f.get("passes") else "FAILS"))
        parts.append(f"<p>{_e(head)}.</p>")
        parts.append(_table(["mode", "frequency [Hz]"], frows, text_cols=0) if frows else "")
        if f.get("note"):
            parts.append(f"<p>{_e(f['note'])}</p>")
    parts.append("<p>Mode shapes found are written to vtk/modes. " + _e(CAUTION) + "</p>")
    return "\n".join(p for p in parts if p)


def _nonlinear_section(block: Mapping[str, Any], figures: list[str]) -> str:
    """The load paths of [analysis.nonlinear]: limit points in words, the plots, the caution."""
    from spaceframe.project.analysis import path_phrases

    parts = ["<h2>Nonlinear analysis</h2>", f"<p>Large displacements: a {_e(block['method'])}.</p>"]
    for name, r in block["results"].items():
        if "limit_points" not in r:
            parts.append(f"<p>{_e(name)}: no load path: {_e(r['stopped'])}.</p>")
            continue
        said, end = path_phrases(r)
        u, slack = r["max_displacement"], r["slack"]["count"]
        parts.append(f"<p>{_e(name)}: {_e(said)}; {r['steps']} steps, {_e(end)}. Largest "
                     f"displacement at the last step {format_number(u['value'] * 1e3)} mm (node "
                     f"{u['node']}); {slack} members slack there; {r['cutbacks']} cut-backs.</p>")
    return "\n".join([*parts, *figures, f"<p>{_e(CAUTION)}</p>"])


def _e(value: Any) -> str:
    return html.escape(str(value), quote=True)


def _table(header: Sequence[str], rows: Iterable[Sequence[Any]], text_cols: int = 1) -> str:
    def cell(tag: str, k: int, v: Any) -> str:
        cls = ' class="text"' if k < text_cols else ""
        return f"<{tag}{cls}>{_e(v)}</{tag}>"

    head = "".join(cell("th", k, h) for k, h in enumerate(header))
    body = "\n".join(
        "<tr>" + "".join(cell("td", k, v) for k, v in enumerate(row)) + "</tr>" for row in rows
    )
    return f"<table>\n<tr>{head}</tr>\n{body}\n</table>"


def _kn(v: float) -> str:
    return format_number(v / 1e3)


def _vec_kn(v: Sequence[float]) -> str:
    return ", ".join(_kn(x) for x in v)


def _member_cells(entry: Mapping[str, Any] | None) -> list[str]:
    if entry is None:
        return ["-", "-", "-"]
    return [_kn(entry["force"]), str(entry["member"]), ", ".join(entry["groups"]) or "-"]


def _image_src(path: Path, folder: Path, embed: bool, what: str) -> str:
    if not path.is_file():
        raise ReadError(f"report: {what} {path} does not exist")
    if embed:
        data = base64.b64encode(path.read_bytes()).decode("ascii")
        return f"data:image/png;base64,{data}"
    rel = Path(os.path.relpath(path.resolve(), folder.resolve())).as_posix()
    return quote(rel)


def _figure(p: Path, folder: Path, embed: bool, what: str) -> str:
    src = _image_src(p, folder, embed, what)
    return (f'<figure><img src="{_e(src)}" alt="{_e(p.stem)}">'
            f"<figcaption>{_e(p.stem)}</figcaption></figure>")


def _heal_section(heal: Any, unit: str, scale: float) -> str:
    """The healing steps as a table, locations in the report's length unit."""
    if heal is None:
        return "<p>No healing report: the geometry was used as given.</p>"
    steps = getattr(heal, "steps", None)
    if not steps:
        return f"<pre>{_e(heal)}</pre>"
    rows = [
        [st.name, "skipped" if getattr(st, "skipped", False) else st.count,
         st.format(scale=scale, unit=unit).split(": ", 1)[-1]]
        for st in steps
    ]
    return _table(["step", "count", f"what was done (locations in {unit})"], rows)


def write_report(
    path: str | os.PathLike[str],
    results: Results,
    *,
    title: str = "Space frame analysis",
    heal_report: Any = None,
    warnings: Iterable[Any] = (),
    pictures: Sequence[str | os.PathLike[str]] = (),
    charts: Sequence[str | os.PathLike[str]] = (),
    job: Mapping[str, Any] | None = None,
    embed_images: bool = True,
    n_critical: int = 10,
    design: Mapping[str, Any] | None = None,
    analysis: Mapping[str, Any] | None = None,
    nonlinear: Mapping[str, Any] | None = None,
    path_plots: Sequence[str | os.PathLike[str]] = (),
) -> Path:
    """Write a self-contained HTML report of the run.

    Parameters
    ----------
    path : path-like
        The ``.html`` file.
    results : Results
    title : str
    heal_report : object, optional
        What geometry healing did, shown as a table of its steps with locations
        in the report's length unit (:func:`length_unit`); default
        ``model.meta["heal:report"]``.
    warnings : iterable
        Warning texts or ``warnings.WarningMessage`` objects to list.
    pictures, charts : sequence of path-like
        PNG files to show.
    job : mapping, optional
        Extra lines for the job table (e.g. project, engineer, revision).
    embed_images : bool
        Embed the images as data URIs (default), so that the report is one
        self-contained file; False references them by relative path.
    n_critical : int
        How many governing members to list.
    design : mapping, optional
        The "design" block of ``summary.json`` (design checks of the run):
        shown first, with the partial factors used and the design caution.
    analysis : mapping, optional
        The "analysis" block of ``summary.json`` ([analysis] buckling and
        frequencies): a "Buckling and frequencies" section after the
        equilibrium check.
    nonlinear, path_plots : mapping, sequence of path-like, optional
        The "nonlinear" block of ``summary.json`` and its plots (PNG).

    Returns
    -------
    Path
        The report written.

    Raises
    ------
    ReadError
        If a picture or chart file does not exist.
    ModelError
        If there are no results.

    Notes
    -----
    Sections: the job; the model in numbers (nodes, members, groups with
    counts, supports, loads per case with totals, combinations); healing
    actions; a summary table per load case and combination (max |u| with
    node and position, max tension and max compression with member and
    group, max stress); the equilibrium check (applied and reaction totals,
    imbalance, residual); the critical members; warnings; pictures and
    charts; and the engineering caution, at the top and the foot.
    """
    final = Path(path)
    if len(results) == 0:
        raise ModelError(f"report {final}: there are no load cases or combinations to report")
    folder = final.parent
    model = results.model
    s = summary(results, n_critical=n_critical)
    m = s["model"]
    heal = heal_report if heal_report is not None else model.meta.get("heal:report")
    unit, per_unit = length_unit(model)

    def ln(v: float) -> str:
        return format_number(v / per_unit)

    sections: list[str] = []
    if design is not None:
        sections.append(_design_section(design, model, unit, per_unit))

    from spaceframe import __version__

    job_rows: list[tuple[str, Any]] = [
        ("generated", _dt.datetime.now().astimezone().strftime("%Y-%m-%d %H:%M %Z")),
        ("program", f"spaceframe {__version__}"),
        ("linear solver", results.solver or "-"),
    ]
    source = model.meta.get("source")
    if source:
        job_rows.append(("model source", source))
    job_rows += [(str(k), v) for k, v in (job or {}).items()]
    sections.append("<h2>Job</h2>\n" + _table(["item", "value"], job_rows, text_cols=2))

    rd = m["restrained_directions"]
    numbers = [
        ("nodes", m["nodes"]),
        ("members", m["members"]),
        ("supported nodes", m["supported_nodes"]),
        ("restrained directions x / y / z", f"{rd['x']} / {rd['y']} / {rd['z']}"),
        ("nodes on springs", m["sprung_nodes"]),
        ("load panels", m["panels"]),
        (f"size (bounding-box diagonal) [{unit}]", ln(m["size"])),
        (f"total member length [{unit}]", ln(m["total_length"])),
        ("total member mass [kg]", format_number(m["total_mass"])),
    ]
    parts = ["<h2>Model</h2>", _table(["quantity", "value"], numbers)]
    if m["groups"]:
        parts.append("<h3>Member groups</h3>")
        parts.append(_table(
            ["group", "members", f"length [{unit}]", "mass [kg]"],
            [(g, v["members"], ln(v["length"]), format_number(v["mass"]))
             for g, v in m["groups"].items()],
        ))
    if m["node_sets"]:
        parts.append("<h3>Node sets</h3>")
        parts.append(_table(["node set", "nodes"], m["node_sets"].items()))
    sections.append("\n".join(parts))

    res_s = s["results"]
    loads = [
        (name, r["kind"], r["loaded_nodes"], *(_kn(v) for v in r["applied_total"]))
        for name, r in res_s.items()
    ]
    parts = ["<h2>Loads</h2>",
             _table(["load case / combination", "kind", "loaded nodes",
                     "total Fx [kN]", "total Fy [kN]", "total Fz [kN]"], loads, text_cols=2)]
    if m["combinations"]:
        parts.append("<h3>Combinations</h3>")
        parts.append(_table(
            ["combination", "factors"],
            [(c, " + ".join(f"{format_number(f)} x {k}" for k, f in fac.items()))
             for c, fac in m["combinations"].items()],
            text_cols=2,
        ))
    sections.append("\n".join(parts))

    sections.append(
        "<h2>Model healing</h2>\n" + _heal_section(heal, unit, per_unit)
    )

    rows = []
    for name, r in res_s.items():
        d = r["max_displacement"]
        rows.append([
            name,
            r["kind"],
            format_number(d["value"] * 1e3),
            d["node"],
            ", ".join(ln(v) for v in d["position"]),
            *_member_cells(r["max_tension"]),
            *_member_cells(r["max_compression"]),
            format_number(r["max_abs_stress"]["value"] / 1e6),
        ])
    sections.append("<h2>Results summary</h2>\n" + _table(
        ["result", "kind", "max |u| [mm]", "node", f"at (x, y, z) [{unit}]",
         "max tension [kN]", "member", "group", "max compression [kN]", "member", "group",
         "max |stress| [MPa]"],
        rows, text_cols=2,
    ))

    rows = []
    for name, r in res_s.items():
        ok = r["equilibrium_ok"]
        rows.append([
            name,
            _vec_kn(r["applied_total"]),
            _vec_kn(r["reaction_total"]),
            ", ".join(format_number(v, 3) for v in r["imbalance"]),
            f"{r['residual']:.2e}",
            "OK" if ok else "FAILED",
        ])
    sections.append(
        "<h2>Equilibrium check</h2>\n"
        f"<p>Reactions must balance the applied loads along each axis, and the relative "
        f"equilibrium residual must stay below {RESIDUAL_TOLERANCE:.0e}.</p>\n"
        + _table(["result", "applied total x, y, z [kN]", "reaction total x, y, z [kN]",
                  "imbalance x, y, z [N]", "residual", "check"], rows)
    )

    crit = [
        (c["member"], f"{c['nodes'][0]}-{c['nodes'][1]}", ", ".join(c["groups"]) or "-",
         ln(c["length"]), c["result"], _kn(c["force"]),
         format_number(c["stress"] / 1e6))
        for c in s["critical_members"]
    ]
    if analysis:
        sections.append(_analysis_section(analysis))
    if nonlinear:
        sections.append(_nonlinear_section(nonlinear, [_figure(Path(f), folder, embed_images,
                                                               "plot") for f in path_plots]))

    sections.append(
        "<h2>Critical members</h2>\n<p>Members with the largest absolute axial force over "
        "all load cases and combinations.</p>\n"
        + _table(["member", "nodes", "group", f"length [{unit}]", "governing result",
                  "N [kN]", "stress [MPa]"], crit, text_cols=0)
    )

    texts = [str(getattr(w, "message", w)) for w in warnings]
    sections.append(
        "<h2>Warnings</h2>\n"
        + ("<ul>\n" + "\n".join(f"<li>{_e(t)}</li>" for t in texts) + "\n</ul>"
           if texts else "<p>None.</p>")
    )

    for heading, files, what in (("Pictures", pictures, "picture"), ("Charts", charts, "chart")):
        if not files:
            continue
        figs = [_figure(Path(f), folder, embed_images, what) for f in files]
        sections.append(f"<h2>{heading}</h2>\n" + "\n".join(figs))

    caution = _e(CAUTION)
    if design is not None and design.get("checked_members"):
        caution += "<br>" + _e(DESIGN_CAUTION)
    page = _PAGE.substitute(title=_e(title), caution=caution, body="\n".join(sections))
    folder.mkdir(parents=True, exist_ok=True)
    return _write_bytes(final, page.encode("utf-8"))
