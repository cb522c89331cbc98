"""The command line: parses arguments, calls the library, prints.

Subcommands:

- ``check MODEL``: read, heal, validate; report geometry and stability, no solve.
- ``run MODEL``: solve every case and combination, write the results folder,
  print a summary table (``--json`` for scripts).
- ``new FOLDER``: write a starter project (model file and drawing) from a demo.
- ``view MODEL``: open the 3D viewer, or ``--screenshot out.png`` off-screen.

Bad input gives one line on stderr and exit code 2; an unstable frame (a
mechanism found by ``check``, or one that stops ``run`` or ``study``) gives
exit code 1.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
from collections.abc import Sequence
from contextlib import AbstractContextManager, nullcontext
from pathlib import Path
from typing import Any

CAUTION = (
    "Results must be checked by a qualified engineer; local codes and licensed "
    "practice govern."
)

EXIT_UNSTABLE = 1
EXIT_BAD_INPUT = 2


def build_parser() -> argparse.ArgumentParser:
    """The argument parser."""
    from spaceframe import __version__

    parser = argparse.ArgumentParser(
        prog="spaceframe",
        description="Analyse three-dimensional pin-jointed frames. " + CAUTION,
    )
    parser.add_argument("--version", action="version", version=f"spaceframe {__version__}")
    # -q/-v work before or after the subcommand; SUPPRESS keeps a subcommand's
    # unset flag from overwriting one given before it.
    common = argparse.ArgumentParser(add_help=False)
    verbosity = common.add_mutually_exclusive_group()
    verbosity.add_argument("-q", "--quiet", action="store_true", default=argparse.SUPPRESS,
                           help="print only errors")
    verbosity.add_argument("-v", "--verbose", action="store_true", default=argparse.SUPPRESS,
                           help="print more detail (timings)")
    for action in common._actions:
        parser._add_action(action)
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    def command(name: str, text: str, model: str | None = None) -> argparse.ArgumentParser:
        """A subcommand with the common flags and, when ``model`` says what it is, a model."""
        sub_parser = sub.add_parser(name, parents=[common], help=text)
        if model is not None:
            sub_parser.add_argument("model", type=Path, help=model)
        return sub_parser

    def no_cache(sub_parser: argparse.ArgumentParser) -> None:
        sub_parser.add_argument(
            "--no-cache", action="store_true",
            help="read the drawing afresh, without the geometry cache beside the model file")

    p = command("check", "read, heal and check a model without solving",
                "model file (.toml) or a drawing/mesh")
    p.add_argument("--units", help="length unit of a bare drawing that declares none, e.g. mm "
                   "(one that differs from the units a drawing declares is refused)")
    p.add_argument("--override-units", action="store_true",
                   help="read the drawing in --units even though it declares other units")
    p.add_argument("--edges-as-members", action="store_true",
                   help="make members of the edges of a bare drawing's or mesh's faces")
    p.add_argument("--json", action="store_true", help="print the report as JSON")
    p.add_argument("--quick", action="store_true",
                   help="cheap stability checks only, without factorising the stiffness")
    p.add_argument("--write-modes", type=Path, metavar="DIR",
                   help="write the mechanisms and states of self-stress found as VTK series "
                        "into DIR (mechanisms.pvd, self_stress.pvd)")
    no_cache(p)

    p = command("run", "solve a model file and write the results folder", "model file (.toml)")
    p.add_argument("-o", "--output", type=Path, help="results folder (default from the file)")
    p.add_argument("--solver", default="auto", choices=["auto", "scipy", "pardiso"],
                   help="sparse solver: auto (PARDISO when installed, else SciPy), scipy or "
                   "pardiso (default: auto)")
    p.add_argument("--force", action="store_true",
                   help="write into an existing folder that spaceframe did not write (its "
                   "other files are kept; the model file's own folder is always refused)")
    p.add_argument("--json", action="store_true", help="print the summary as JSON")
    p.add_argument("--no-pictures", action="store_true", help="skip pictures and report")
    p.add_argument("--dxf", choices=["auto", "yes", "no"], default="auto",
                   help="results drawing: auto writes it up to 200,000 members and says so "
                        "above (default), yes always, no never")
    p.add_argument("--dxf-deformed", action="store_true",
                   help="add the deformed shape of each result to the results drawing")
    p.add_argument("--every-result", action="store_true",
                   help="CSV columns, VTK files, DXF layers and pictures for every result "
                        "(above 50 results the default is the combinations and the cases of "
                        "the largest displacement, tension and compression; results.npz "
                        "always holds all)")
    no_cache(p)
    p.add_argument("--pictures", default="combinations", metavar="WHICH",
                   help="results that get pictures: combinations (default: the combinations "
                        "and envelopes, or the load cases when there are none), all, none, "
                        "or result names separated by commas")

    from spaceframe.demos import DEMOS

    p = command("new", "write a starter project from a demo scenario")
    p.add_argument("folder", type=Path)
    p.add_argument("--demo", default="canopy", metavar="NAME",
                   help=f"demo scenario: {', '.join(DEMOS)} (default: canopy)")
    p.add_argument("--force", action="store_true", help="write into a non-empty folder")

    p = command("study",
                "run every variant of a study file (a parameter sweep) and write one table")
    p.add_argument("study", type=Path, help="study file (.toml) with a [study] table")
    p.add_argument("--scheduler", metavar="ADDRESS",
                   help="a running Dask scheduler, e.g. tcp://host:8786 "
                        "(default: a local cluster of processes on every core)")
    p.add_argument("--workers", type=int, help="processes of the local cluster")
    p.add_argument("--serial", action="store_true",
                   help="run the variants one after the other in this process (no Dask)")
    p.add_argument("--restart", action="store_true",
                   help="ignore the journal of an earlier run and solve every variant again")

    p = command("view", "show a model's results in 3D, or save a screenshot",
                "model file (.toml) or a results folder")
    p.add_argument("--case", help="load case or combination to show first")
    p.add_argument("--color-by", default="axial_force",
                   choices=["axial_force", "displacement", "stress", "group", "utilisation"])
    p.add_argument("--screenshot", type=Path, help="render off-screen to this PNG")
    p.add_argument("--view", default="iso", choices=["iso", "top", "front", "side"])
    p.add_argument("--size", default="1600x1000", help="picture size, WIDTHxHEIGHT")
    return parser


class _Printer:
    """Terminal output: rich tables on a terminal, plain text when piped."""

    def __init__(self, quiet: bool, verbose: bool) -> None:
        self.quiet = quiet
        self.verbose = verbose
        self.tty = sys.stdout.isatty()

    def line(self, text: str = "") -> None:
        if not self.quiet:
            print(text)

    def table(self, title: str, header: list[str], rows: list[list[str]]) -> None:
        if self.quiet:
            return
        try:
            from rich.console import Console
            from rich.markup import escape
            from rich.table import Table
        except ImportError:  # rich is an optional extra: fall back to plain columns
            self._plain(title, header, rows)
            return
        t = Table(title=title, title_justify="left")
        # Units in square brackets would read as rich markup: escape all text.
        for i, h in enumerate(header):
            t.add_column(escape(h), justify="left" if i == 0 else "right", no_wrap=True)
        for r in rows:
            t.add_row(*(escape(c) for c in r))
        # Piped output (logs, CI) is not cut to a terminal's width.
        Console(soft_wrap=False, width=None if self.tty else 250).print(t)

    @staticmethod
    def _plain(title: str, header: list[str], rows: list[list[str]]) -> None:
        widths = [max(len(str(c)) for c in col) for col in zip(header, *rows, strict=True)]
        print(title)
        for r in [header, *rows]:
            print("  ".join(str(c).rjust(w) for c, w in zip(r, widths, strict=True)))

    def progress(self) -> tuple[AbstractContextManager[Any], Any]:
        """A progress reporter for phases: a rich status on a terminal, silent otherwise."""
        if self.quiet or not sys.stderr.isatty():
            return nullcontext(), lambda phase: None
        try:
            from rich.console import Console
        except ImportError:
            return nullcontext(), lambda phase: None
        status = Console(stderr=True).status("starting")
        return status, lambda phase: status.update(f"{phase} ...")


def _fmt(v: float, unit: str, scale: float = 1.0, digits: int = 4) -> str:
    return f"{v / scale:.{digits}g} {unit}"


def _print_check(out: _Printer, rep: Any, as_json: bool) -> None:
    from spaceframe.results.summary import supports_text

    if as_json:
        print(json.dumps(rep.as_dict(), indent=2))
        return
    out.line(f"{rep.title}  ({rep.source})")
    c = rep.counts
    out.line(
        f"{c['nodes']} nodes, {c['members']} members, {c['panels']} panels, "
        f"{c['markers']} markers; {c['cases']} load cases, {c['combinations']} combinations"
    )
    lo, hi = rep.extents
    out.line(
        "extents: x {0:.4g} .. {3:.4g} m, y {1:.4g} .. {4:.4g} m, z {2:.4g} .. {5:.4g} m".format(
            *lo, *hi
        )
    )
    out.line(f"drawing units: {rep.units}")
    if c["members without a section"]:
        out.line(f"members without a section: {c['members without a section']}")
    out.line(f"connected parts: {rep.components}")
    if rep.groups:
        out.table("groups", ["group", "members"], [[g, str(n)] for g, n in rep.groups.items()])
    out.line("supports: " + supports_text(rep.supports))
    if rep.healing:
        out.line("healing:")
        for h in rep.healing:
            out.line("  " + h)
    if rep.cases:
        out.table(
            "applied load totals",
            ["case", "Fx [kN]", "Fy [kN]", "Fz [kN]"],
            [[n, *(f"{v / 1e3:.4g}" for v in f.values())] for n, f in rep.cases.items()],
        )
    for w in rep.warnings:
        out.line(f"warning: {w}")
    d = rep.determinacy
    if d is not None and "mechanisms" in d:
        from spaceframe.results.summary import plural

        out.line(f"determinacy: {plural(d['mechanisms'], 'mechanism')}, "
                 f"{plural(d['self_stress'], 'state')} of self-stress (supports only; springs "
                 "do not count)")
        if "files" in d:
            out.line(f"determinacy: wrote {len(d['files'])} files" if d["files"]
                     else f"determinacy: {d['files_note']}")
    if rep.stable is None:
        out.line(f"stability: {rep.mechanism}")
    elif rep.stable:
        out.line(f"stability: {rep.mechanism or 'no mechanism found'}")
    else:
        out.line("stability: UNSTABLE")
        print(f"mechanism: {rep.mechanism}", file=sys.stderr)


def _triple(v: list[float], scale: float) -> str:
    """'0.0 / 0.0 / 254.2': one decimal, and never a '-0.0' from round-off."""
    shown = [round(x / scale, 1) for x in v]
    return " / ".join(f"{(x if x != 0 else 0.0):.1f}" for x in shown)


def _print_summary(out: _Printer, summ: dict[str, Any]) -> None:
    def member(e: dict[str, Any] | None) -> list[str]:
        if not e:
            return ["-", "-"]
        groups = ",".join(e["groups"]) or "-"
        return [f"{e['force'] / 1e3:.1f}", f"{e['member']} ({groups})"]

    rows = []
    listed = summ.get("results_with_files") or list(summ["results"])
    for name in listed:
        r = summ["results"][name]
        md = r["max_displacement"]
        pos = ", ".join(f"{x:.3g}" for x in md["position"])
        rows.append([
            name,
            f"{md['value'] * 1e3:.2f}",
            f"{md['node']} ({pos})",
            *member(r["max_tension"]),
            *member(r["max_compression"]),
            _triple(r["reaction_total"], 1e3),
            _triple(r["applied_total"], 1e3),
            f"{r['residual']:.1e}",
        ])
    out.table(
        "results per load case and combination (tension +)",
        ["case", "max |u| [mm]", "at node (x, y, z m)", "max N+ [kN]", "member (group)",
         "max N- [kN]", "member (group)", "reactions x/y/z [kN]", "loads x/y/z [kN]",
         "residual"],
        rows,
    )
    if len(listed) < len(summ["results"]):
        out.line(f"... and {len(summ['results']) - len(listed)} more results: every one is in "
                 "summary.json and results.npz")


def _cmd_check(args: argparse.Namespace, out: _Printer) -> int:
    from spaceframe.run import job

    ctx, progress = out.progress()
    with ctx:
        rep = job.check(args.model, progress=progress, units=args.units,
                          edges_as_members=args.edges_as_members,
                          override_units=args.override_units, quick=args.quick,
                          cache=not args.no_cache, modes_folder=args.write_modes)
    # Readers advise the Python keyword; on the command line it is an option.
    rep.warnings = [w.replace("edges_as_members=True", "--edges-as-members")
                    for w in rep.warnings]
    rep.mechanism = rep.mechanism.replace("edges_as_members=True", "--edges-as-members")
    _print_check(out, rep, args.json)
    return EXIT_UNSTABLE if rep.stable is False else 0


def _cmd_run(args: argparse.Namespace, out: _Printer) -> int:
    from spaceframe.run import job

    ctx, progress = out.progress()
    with ctx:
        outcome = job.run(args.model, args.output, solver=args.solver,
                            pictures=False if args.no_pictures else args.pictures,
                            progress=progress, force=args.force, cache=not args.no_cache,
                            dxf={"auto": None, "yes": True, "no": False}[args.dxf],
                            dxf_deformed=args.dxf_deformed, every_result=args.every_result)
    if args.json:
        print(json.dumps(outcome.summary, indent=2))
        return 0
    m = outcome.summary["model"]
    out.line(f"{outcome.summary.get('title', '')}: {m['nodes']} nodes, {m['members']} members, "
             f"solver {outcome.summary['solver']}")
    _print_summary(out, outcome.summary)
    for name, env in outcome.summary.get("envelopes", {}).items():
        t, c = env["max_tension"], env["max_compression"]
        out.line(
            f"envelope {name} ({', '.join(env['of'])}): max tension {t['force'] / 1e3:.1f} kN "
            f"(member {t['member']}), max compression {c['force'] / 1e3:.1f} kN "
            f"(member {c['member']})"
        )
    if outcome.design is not None:
        out.line(outcome.design.line())
    for text in (_analysis_lines(outcome.summary.get("analysis", {}))
                 + _nonlinear_lines(outcome.summary.get("nonlinear", {}))):
        out.line(text)
    for w in outcome.summary.get("warnings", []):
        out.line(f"warning: {w}")
    out.line(f"results written to {outcome.output} ({len(outcome.files)} files)")
    if out.verbose:
        out.line("timings: " + ", ".join(f"{k} {v:.2f} s" for k, v in outcome.timings.items()))
    out.line(CAUTION)
    return 0


def _analysis_lines(block: dict[str, Any]) -> list[str]:
    """One line each for the buckling and frequency results of a run."""
    lines = []
    b = block.get("buckling")
    if b is not None:
        low = b.get("lowest")
        if low is None:
            lines.append("buckling: no buckling factor (" + "; ".join(
                v["note"] for v in b["results"].values() if v.get("note")) + ")")
        else:
            limit = b.get("min_factor")
            verdict = "" if limit is None else (
                f", {'above' if low['factor'] >= limit else 'BELOW'} the limit {limit:g}")
            lines.append(f"buckling: lowest factor {low['factor']:.3g} under "
                         f"{low['result']!r}{verdict} (linear, first-order estimate)")
            if b.get("reading"):
                lines.append(f"buckling: {b['reading']}")
    f = block.get("frequencies")
    if f is not None:
        if f["frequencies_hz"]:
            hz = ", ".join(f"{x:.3g}" for x in f["frequencies_hz"][:6])
            verdict = "" if "passes" not in f else (
                f"; lowest {'above' if f['passes'] else 'BELOW'} {f['min_frequency_hz']:g} Hz")
            lines.append(f"frequencies: {hz} Hz{verdict}")
        else:
            lines.append(f"frequencies: none ({f['note']})")
    return lines


def _nonlinear_lines(block: dict[str, Any]) -> list[str]:
    """One line per load path of a run: limit points, where it ended, slack members."""
    from spaceframe.project.analysis import path_phrases

    lines = []
    for name, r in block.get("results", {}).items():
        if "limit_points" not in r:
            lines.append(f"nonlinear {name}: no load path ({r['stopped']})")
            continue
        said, end = path_phrases(r)
        lines.append(f"nonlinear {name}: {said}; {end} in {r['steps']} steps; "
                     f"{r['slack']['count']} members slack at the end")
    return lines


def _cmd_new(args: argparse.Namespace, out: _Printer) -> int:
    from spaceframe import demos

    files = demos.write_demo(args.folder, args.demo, force=args.force)
    out.line(f"wrote the {args.demo} demo to {args.folder}:")
    for f in files:
        out.line(f"  {f}")
    toml = next((f for f in files if f.suffix == ".toml"), None)
    if toml is not None:
        out.line(f"next: spaceframe check {toml}  then  spaceframe run {toml}")
    return 0


def _folder_results(folder: Path, loaded: Any, out: _Printer) -> Any:
    """The results a run wrote into ``folder`` (its ``results.npz``), not solved again.

    A folder written before the tool wrote ``results.npz`` is solved again, and
    the command says so; results of a model that changed since the run are
    refused (ReadError: run it again).
    """
    from spaceframe.io import tables

    arrays = folder / tables.ARRAYS_FILE
    if not arrays.exists():
        out.line(f"{folder}: no {tables.ARRAYS_FILE} (written by an older version): "
                 "solving the model again")
        return loaded.solve()
    return tables.read_arrays(arrays, loaded.model)


def _cmd_view(args: argparse.Namespace, out: _Printer) -> int:
    from spaceframe import viewer
    from spaceframe.errors import ProjectError
    from spaceframe.run import job

    path: Path = args.model
    if not args.screenshot and not _has_display():
        # Before pyvista starts: VTK would print X-server warnings and show nothing.
        raise ProjectError("no display to open a window on (DISPLAY and WAYLAND_DISPLAY are "
                           "not set); use --screenshot out.png to render a picture off-screen")
    if args.screenshot and not args.screenshot.parent.is_dir():
        raise ProjectError(f"--screenshot {args.screenshot}: folder {args.screenshot.parent} "
                           "does not exist")
    folder = path if path.is_dir() else None
    if folder is not None:
        summ = folder / "summary.json"
        if not summ.exists():
            raise ProjectError(f"{path}: not a results folder (no summary.json)")
        path = Path(json.loads(summ.read_text())["source"])
    try:
        w, h = (int(v) for v in args.size.lower().split("x"))
    except ValueError:
        raise ProjectError(f"--size {args.size!r}: expected WIDTHxHEIGHT, e.g. 1600x1000") from None
    loaded = job.load(path)
    results = _folder_results(folder, loaded, out) if folder is not None else loaded.solve()
    if loaded.project is not None:  # envelopes too, as in the results folder's pictures
        results = viewer.with_envelopes(results, loaded.project.envelope_results(results))
    case = args.case or next(iter(results))
    if case not in results:
        raise ProjectError(f"--case {case!r}: no such case (have: {', '.join(results)})")
    options: dict[str, Any] = {}
    if args.color_by == "utilisation":
        from spaceframe.run import design as run_design

        envelopes = loaded.project.envelope_results(results) if loaded.project else {}
        design = run_design.run_checks(loaded.model, results, envelopes, loaded.project)
        if design is None or case not in design.per_result:
            raise ProjectError(
                f"--color-by utilisation: no design check of {case!r} (checks need a yield "
                "strength per member, or a [design] table; checked results: "
                + (", ".join(design.per_result) if design else "none") + ")")
        options["utilisation"] = design.per_result
    if args.screenshot:
        viewer.screenshot(results, case, args.screenshot, view=args.view, size=(w, h),
                          color_by=args.color_by, **options)
        out.line(f"wrote {args.screenshot}")
        return 0
    viewer.show(results, case, color_by=args.color_by, **options)
    return 0


def _cmd_study(args: argparse.Namespace, out: _Printer) -> int:
    from spaceframe.run import job
    from spaceframe.study import read_study, run_study, summary_lines

    model_file, vary, mode, folder = read_study(args.study)
    ctx, progress = out.progress()
    with ctx:
        progress("read")
        # The base model is read and healed once; every variant starts from it.
        loaded = job.load(model_file)
        sections = dict(loaded.project.sections) if loaded.project is not None else {}
        if folder.exists() and not folder.is_dir():
            raise OSError(f"{folder}: the study's output is a file, not a folder")
        folder.mkdir(parents=True, exist_ok=True)
        journal = folder / "study.jsonl"
        if args.restart and journal.exists():
            journal.unlink()  # the tool's own journal, nothing else
        table = run_study(
            loaded.model, vary, mode=mode, sections=sections,
            scheduler="serial" if args.serial else args.scheduler, workers=args.workers,
            journal=journal, progress=lambda k, n: progress(f"variants {k}/{n}"),
        )
        table.to_csv(folder / "study.csv")
    for text in loaded.warnings:
        out.line(f"warning: {text}")
    for text in summary_lines(table):
        out.line(text)
    for i in table.failed[:10]:
        out.line(f"variant {i + 1} failed: {table.rows[i]['error']}")
    out.line(f"table: {folder / 'study.csv'}")
    out.line("Results must be checked by a qualified engineer; local codes and licensed "
             "practice govern.")
    return 0


def _has_display() -> bool:
    """Whether a window can be opened.

    On Linux and other X11/Wayland systems an X or Wayland display must be
    named in the environment.
    """
    if sys.platform in ("win32", "darwin"):
        return True
    return bool(os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the `spaceframe` command; returns the exit code."""
    from spaceframe.errors import MechanismError, SpaceframeError

    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command in ("run", "check", "study"):
        from spaceframe.memory import keep_freed_memory

        keep_freed_memory()  # this process's allocator: freed blocks reused, not paged in again
    out = _Printer(getattr(args, "quiet", False), getattr(args, "verbose", False))
    commands = {"check": _cmd_check, "run": _cmd_run, "new": _cmd_new, "view": _cmd_view,
                "study": _cmd_study}
    if args.command is None:
        parser.print_help(sys.stdout)
        return EXIT_BAD_INPUT
    try:
        return commands[args.command](args, out)
    except MechanismError as exc:  # the frame, not the input: what `check` reports as 1
        print(f"spaceframe {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_UNSTABLE
    except SpaceframeError as exc:
        msg = str(exc)
        if args.command == "check":  # readers advise the Python keyword
            msg = msg.replace("edges_as_members=True", "--edges-as-members")
        print(f"spaceframe {args.command}: error: {msg}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except OSError as exc:  # a file we could not open or write
        print(f"spaceframe {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except KeyboardInterrupt:
        print("spaceframe: interrupted", file=sys.stderr)
        return 130
