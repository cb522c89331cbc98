"""Parameter studies: many variants of one model, in one process or on a Dask cluster.

A study is a base Model plus a table of variations.  Each variant is a pure
function of (base model, parameters) that returns one row of numbers, so a
task can run (and be retried) on any worker.  The base model is built once
(drawing read and healed once) and sent to every worker once; what travels
per task is the parameters of a few variants and their rows.

Parameters (keys of ``vary``), each with its list of values:

- ``section.<group>``: a section name (the model file's [sections] or the
  shipped circular hollow sections such as ``"CHS 168.3x8"``) for the group;
- ``case.<case>``: a factor on every load of the load case;
- ``combination.<combination>.<case>``: the case's factor in a combination;
- ``scale.<x|y|z>``: stretch the geometry along an axis about its lowest
  coordinate (e.g. the depth of a grid); self-weight follows, other loads
  stay as built;
- ``restraint.<node set>``: the translations held at those nodes, "xyz",
  "z", …, or "none".

Results must be checked by a qualified engineer.
"""

from __future__ import annotations

import copy
import hashlib
import itertools
import json
import logging
import math
import os
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from spaceframe import memory
from spaceframe.errors import ModelError, SpaceframeError, one_line
from spaceframe.model import Model
from spaceframe.sections import Section

__all__ = ["StudyTable", "evaluate_variant", "run_study", "variants"]

_AXES = {"x": 0, "y": 1, "z": 2}
#: Columns of every row after the parameters.
SUMMARY_COLUMNS = (
    "mass_kg", "max_displacement_m", "max_tension_N", "max_compression_N",
    "max_utilisation", "passes", "error",
)


def variants(vary: Mapping[str, list[Any]], mode: str = "product") -> list[dict[str, Any]]:
    """Every variant of a table of variations.

    ``mode="product"`` takes every combination of values; ``"zip"`` takes the
    i-th value of every parameter (lists of equal length).

    Raises
    ------
    ModelError
        On an empty list, unequal lengths in zip mode or an unknown mode.
    """
    keys = list(vary)
    for k in keys:
        if not isinstance(vary[k], list | tuple) or not vary[k]:
            raise ModelError(f"study: vary.{k} must be a non-empty list of values")
    if mode == "product":
        return [dict(zip(keys, vals, strict=True))
                for vals in itertools.product(*(vary[k] for k in keys))]
    if mode == "zip":
        sizes = {len(vary[k]) for k in keys}
        if len(sizes) > 1:
            raise ModelError(
                "study: mode = 'zip' needs lists of one length, got "
                + ", ".join(f"{k}: {len(vary[k])}" for k in keys)
            )
        return [dict(zip(keys, vals, strict=True)) for vals in zip(*(vary[k] for k in keys),
                                                                      strict=True)]
    raise ModelError(f"study: mode = {mode!r} must be 'product' or 'zip'")


def variant_key(params: Mapping[str, Any]) -> str:
    """A stable short key of a variant's parameters (for resuming)."""
    text = json.dumps(params, sort_keys=True, default=str)
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _apply_section(model: Model, key: str, rest: str, value: Any,
                   sections: Mapping[str, Section]) -> None:
    if rest not in model.groups:
        raise ModelError(f"study: {key}: no member group {rest!r}")
    if value not in sections:
        raise ModelError(f"study: {key} = {value!r}: no section of that name")
    sec = sections[value]
    ids = model.groups[rest]
    if math.isfinite(sec.second_moment):
        model.set_member_properties(ids, area=sec.area, second_moment=sec.second_moment)
    else:
        model.set_member_properties(ids, area=sec.area)


def _apply_case(model: Model, key: str, rest: str, value: Any,
                sections: Mapping[str, Section]) -> None:
    if rest not in model.cases:
        raise ModelError(f"study: {key}: no load case {rest!r}")
    f = _factor(key, value)
    lc = model.cases[rest]
    for name in ("forces", "temperature", "initial_strain", "settlement"):
        setattr(lc, name, getattr(lc, name) * f)


def _apply_combination(model: Model, key: str, rest: str, value: Any,
                       sections: Mapping[str, Section]) -> None:
    combo, _, case = rest.partition(".")
    if combo not in model.combinations or case not in model.cases:
        raise ModelError(f"study: {key}: no combination {combo!r} or load case {case!r}")
    model.combinations[combo] = {**model.combinations[combo], case: _factor(key, value)}


def _apply_scale(model: Model, key: str, rest: str, value: Any,
                 sections: Mapping[str, Section]) -> None:
    if rest not in _AXES:
        raise ModelError(f"study: {key}: the axis must be x, y or z")
    f = _factor(key, value)
    if f <= 0:
        raise ModelError(f"study: {key} = {value!r} must be positive")
    old_mass = model.mass.copy()
    ax = _AXES[rest]
    nodes = model.nodes.copy()
    low = nodes[:, ax].min()
    nodes[:, ax] = low + (nodes[:, ax] - low) * f
    model.nodes = nodes
    model._invalidate()
    model._follow_self_weight(old_mass)


def _apply_restraint(model: Model, key: str, rest: str, value: Any,
                     sections: Mapping[str, Section]) -> None:
    if rest not in model.node_sets:
        raise ModelError(f"study: {key}: no node set {rest!r}")
    text = str(value).lower()
    if text != "none" and (not text or set(text) - set("xyz")):
        raise ModelError(f"study: {key} = {value!r} must be letters of 'xyz' or 'none'")
    ids = model.node_sets[rest]
    held = np.array([c in text for c in "xyz"])
    restraint = model.restraint.copy()
    restraint[ids] = held
    model.restraint = restraint


#: Parameter kind (the part of a ``vary`` key before the first dot) -> its step.
_APPLY: dict[str, Callable[[Model, str, str, Any, Mapping[str, Section]], None]] = {
    "section": _apply_section,
    "case": _apply_case,
    "combination": _apply_combination,
    "scale": _apply_scale,
    "restraint": _apply_restraint,
}


def _apply(model: Model, key: str, value: Any, sections: Mapping[str, Section]) -> None:
    kind, _, rest = key.partition(".")
    step = _APPLY.get(kind)
    if step is None:
        raise ModelError(
            f"study: parameter {key!r} must start with section., case., combination., "
            "scale. or restraint."
        )
    step(model, key, rest, value, sections)


def _factor(key: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        raise ModelError(f"study: {key} = {value!r} must be a finite number")
    return float(value)


def _one_line(exc: BaseException) -> str:
    """A row's reason: the project's one-line form of the message, 300 characters at most."""
    return one_line(exc, 300) or type(exc).__name__


def evaluate_variant(
    model: Model,
    params: Mapping[str, Any],
    sections: Mapping[str, Section] | None = None,
    solver: str = "auto",
) -> dict[str, Any]:
    """Solve one variant and return its row (never raises for the variant's own failure).

    The base model is copied, never changed.
    """
    from spaceframe.design import check_results

    row: dict[str, Any] = dict(params)
    row.update({c: math.nan for c in SUMMARY_COLUMNS})
    row["passes"] = False
    row["error"] = ""
    row["key"] = variant_key(params)
    try:
        m = copy.deepcopy(model)
        for k, v in params.items():
            _apply(m, k, v, sections or {})
        results = m.solve(solver=solver)
        names = list(results)
        disp = max(float(np.max(np.linalg.norm(results[n].displacements, axis=1)))
                   for n in names)
        forces = np.stack([results[n].axial_forces for n in names])
        row["mass_kg"] = float(m.mass.sum())
        row["max_displacement_m"] = disp
        row["max_tension_N"] = float(max(forces.max(), 0.0))
        row["max_compression_N"] = float(max(-forces.min(), 0.0))
        if np.all(np.isfinite(m.yield_strength) | m.tension_only):
            g = check_results(m, results)
            row["max_utilisation"] = float(g.utilisation.max())
            row["passes"] = bool(np.all(g.passes))
        else:
            row["passes"] = True
    except SpaceframeError as exc:
        row["error"] = _one_line(exc)
        row["passes"] = False
    return row


@dataclass
class StudyTable:
    """The rows of a study, in variant order."""

    rows: list[dict[str, Any]]
    parameters: list[str]
    skipped: int = 0
    failed: list[int] = field(default_factory=list)

    @property
    def columns(self) -> list[str]:
        """Parameter columns then the summary columns."""
        return [*self.parameters, *SUMMARY_COLUMNS]

    def to_csv(self, path: str | Path) -> None:
        """Write the table (parameters, then results in SI units) atomically."""
        import csv
        import io

        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(self.columns)
        for r in self.rows:
            w.writerow([_cell(r.get(c)) for c in self.columns])
        from spaceframe.files import atomic_write

        def save(tmp: Path) -> None:
            tmp.write_text(buf.getvalue(), encoding="utf-8")

        atomic_write(path, save)


def _cell(v: Any) -> str:
    if isinstance(v, float):
        return "" if math.isnan(v) else f"{v:.6g}"
    return str(v)


def _read_journal(path: Path | None) -> dict[str, dict[str, Any]]:
    done: dict[str, dict[str, Any]] = {}
    if path is None or not path.exists():
        return done
    for line in path.read_text(encoding="utf-8").splitlines():
        try:
            row = json.loads(line)
        except json.JSONDecodeError:
            continue  # a line cut short by an interruption: that variant runs again
        if isinstance(row, dict) and "key" in row:
            done[str(row["key"])] = row
    return done


def run_study(
    model: Model,
    vary: Mapping[str, list[Any]],
    *,
    mode: str = "product",
    sections: Mapping[str, Section] | None = None,
    scheduler: str | None = None,
    workers: int | None = None,
    journal: str | Path | None = None,
    progress: Callable[[int, int], None] | None = None,
    solver: str = "auto",
    client: Any = None,
) -> StudyTable:
    """Run every variant and gather the table.

    Parameters
    ----------
    model : Model
        The base model (not changed).
    vary : mapping
        Parameter → list of values (see the module's text).
    mode : {"product", "zip"}
    sections : mapping, optional
        Section name → Section for ``section.*`` parameters.
    scheduler : str, optional
        ``None``: a local Dask cluster of processes on this machine;
        ``"serial"``: one after the other in this process; otherwise the
        address of a running Dask scheduler (``tcp://host:8786``).
    workers : int, optional
        Processes of the local cluster (default: every core).
    journal : path, optional
        A file of finished rows (JSON lines); a study run again with the same
        journal skips the variants it already holds.
    progress : callable, optional
        Called with (finished, total) after each variant.
    client : dask.distributed.Client, optional
        A client already connected (then ``scheduler`` and ``workers`` are
        not used, and the client stays open).

    Raises
    ------
    ModelError
        On a bad table of variations (before anything runs).
    """
    from spaceframe.design.sizing import chs_catalogue

    table = variants(vary, mode)
    secs = {s.name: s for s in chs_catalogue()}
    secs.update(sections or {})
    for params in table:  # refuse bad names before sending any work
        for k, v in params.items():
            if k.startswith("section.") and v not in secs:
                raise ModelError(f"study: {k} = {v!r}: no section of that name")
    jpath = Path(journal) if journal is not None else None
    done = _read_journal(jpath)
    keys = [variant_key(p) for p in table]
    todo = [i for i, k in enumerate(keys) if k not in done]
    rows: dict[int, dict[str, Any]] = {i: done[k] for i, k in enumerate(keys) if k in done}
    total, count = len(table), len(rows)

    def finished(i: int, row: dict[str, Any]) -> None:
        nonlocal count
        rows[i] = row
        count += 1
        if jpath is not None:
            with jpath.open("a", encoding="utf-8") as fh:
                fh.write(json.dumps(row, default=str) + "\n")
        if progress is not None:
            progress(count, total)

    if todo:
        if scheduler == "serial":
            for i in todo:
                finished(i, evaluate_variant(model, table[i], secs, solver))
        else:
            _run_dask(model, [table[i] for i in todo], todo, secs, solver, scheduler,
                      workers, finished, client)
    ordered = [rows[i] for i in range(total)]
    return StudyTable(rows=ordered, parameters=list(vary), skipped=total - len(todo),
                      failed=[i for i, r in enumerate(ordered) if r.get("error")])


#: Environment of the local cluster's worker processes, set before they start (so before
#: numpy loads).  One BLAS/OpenMP thread per worker: a worker is one core.  glibc malloc:
#: Dask's nanny sets MALLOC_TRIM_THRESHOLD_=65536, and setting any of these variables also
#: fixes glibc's mmap threshold at 128 kB, so every array above that is mapped afresh and
#: freed back to the system: a 10k-member variant then faults in about 12 000 pages (about
#: 6 000 in a plain process).  With the trim threshold at 1 GB, the mmap threshold at
#: 32 MB (as far as glibc raises it by itself; ``spaceframe.memory``, which the command
#: line sets for its own process) and one malloc arena (the task runs on a thread of its
#: own), a worker reuses its memory and a variant faults in a few hundred pages.
WORKER_ENVIRON: dict[str, int] = {
    "OMP_NUM_THREADS": 1, "OPENBLAS_NUM_THREADS": 1, "MKL_NUM_THREADS": 1,
    "MALLOC_TRIM_THRESHOLD_": memory.TRIM_THRESHOLD,
    "MALLOC_MMAP_THRESHOLD_": memory.MMAP_THRESHOLD,
    "MALLOC_ARENA_MAX": 1,
}

#: Dask settings of the local cluster.  Its defaults suit a dashboard: a sampling profiler
#: in every worker every 10 ms, an event-loop tick every 20 ms, memory polled every 100 ms,
#: about 4.5 % of a core per worker and 6-7 % in this process while idle, measured; here
#: about 0.5 % and 1.5 %.  There is no dashboard (``dashboard_address=None``).
CLUSTER_CONFIG: dict[str, Any] = {
    "distributed.worker.profile.enabled": False,
    "distributed.admin.tick.interval": "200ms",
    "distributed.admin.system-monitor.interval": "2s",
    "distributed.worker.memory.monitor-interval": "500ms",
}


def local_cluster(workers: int | None = None) -> Any:
    """The local Dask cluster of a study: one single-threaded process per core.

    The workers get :data:`WORKER_ENVIRON` and :data:`CLUSTER_CONFIG`, and import
    this module when they start, so the first variant does not wait for numpy,
    scipy and spaceframe to load.
    """
    import dask
    from dask.distributed import LocalCluster

    env = {f"distributed.nanny.pre-spawn-environ.{k}": v for k, v in WORKER_ENVIRON.items()}
    with dask.config.set({**env, **CLUSTER_CONFIG}):
        return LocalCluster(n_workers=workers or os.cpu_count() or 1, threads_per_worker=1,
                            processes=True, dashboard_address=None,
                            silence_logs=logging.WARNING, preload=[__name__])


#: Most variants in one Dask task.  A task costs the scheduler, this process and the worker
#: a few milliseconds; a batch shares that cost (a 10k-member variant is 80-100 ms).
MAX_BATCH = 8


def batch_size(variants: int, slots: int) -> int:
    """Variants per task: at least four tasks per worker thread, at most :data:`MAX_BATCH`."""
    return max(1, min(MAX_BATCH, variants // (4 * max(slots, 1))))


def evaluate_batch(
    model: Model, batch: list[dict[str, Any]], sections: Mapping[str, Section] | None = None,
    solver: str = "auto",
) -> list[dict[str, Any]]:
    """The rows of several variants, one :func:`evaluate_variant` each, in order."""
    return [evaluate_variant(model, params, sections, solver) for params in batch]


def _run_dask(
    model: Model, params: list[dict[str, Any]], index: list[int],
    sections: Mapping[str, Section], solver: str, scheduler: str | None,
    workers: int | None, finished: Callable[[int, dict[str, Any]], None],
    client: Any = None,
) -> None:
    try:
        from dask.distributed import Client, as_completed
    except ImportError:
        raise ModelError(
            "a study on Dask needs the 'study' extra: pip install 'spaceframe[study]' "
            "(or run it with scheduler = 'serial')"
        ) from None
    cluster = None
    own = client is None
    if client is not None:
        pass
    elif scheduler is None:
        cluster = local_cluster(workers)
        client = Client(cluster)
    else:
        try:
            client = Client(scheduler, timeout="10s")
        except (OSError, TimeoutError) as exc:
            raise ModelError(f"study: cannot reach the scheduler {scheduler}: {exc}") from None
    try:
        # The base model goes to every worker once; each task carries the parameters
        # of a few variants and brings back their rows.
        base = client.scatter(model, broadcast=True)
        secs = client.scatter(dict(sections), broadcast=True)
        size = batch_size(len(params), sum(client.nthreads().values()))
        starts = range(0, len(params), size)
        futures = client.map(evaluate_batch, [base] * len(starts),
                             [params[k:k + size] for k in starts], [secs] * len(starts),
                             [solver] * len(starts), pure=False)
        where = {f.key: k for f, k in zip(futures, starts, strict=True)}
        for fut in as_completed(futures):
            k = where[fut.key]
            for i, row in zip(index[k:k + size], fut.result(), strict=True):
                finished(i, row)
    finally:
        if own:
            client.close()
        if cluster is not None:
            cluster.close()


def read_study(path: str | Path) -> tuple[Path, dict[str, list[Any]], str, Path]:
    """Read a study file: (model file, vary, mode, output folder).

    The file holds a ``[study]`` table with ``model`` (the model file,
    relative to the study file), optional ``mode`` and ``output``, and a
    ``[study.vary]`` table of parameter → list of values.

    Raises
    ------
    ModelError
        Naming the file and key.
    """
    import tomllib

    p = Path(path)
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8-sig"))
    except OSError as exc:
        raise ModelError(f"{p}: cannot read the study file ({exc.strerror})") from None
    except (tomllib.TOMLDecodeError, RecursionError) as exc:
        raise ModelError(f"{p.name}: not valid TOML: {_one_line(exc)}") from None
    st = data.get("study")
    if not isinstance(st, dict):
        raise ModelError(f"{p.name}: needs a [study] table")
    unknown = set(st) - {"model", "mode", "output", "vary"}
    if unknown:
        raise ModelError(f"{p.name}: study.{sorted(unknown)[0]}: unknown key")
    model = st.get("model")
    if not isinstance(model, str):
        raise ModelError(f"{p.name}: study.model must name the model file")
    vary = st.get("vary")
    if not isinstance(vary, dict) or not vary:
        raise ModelError(f"{p.name}: study.vary must list at least one parameter")
    mode = st.get("mode", "product")
    out = st.get("output", f"{p.stem}-results")
    if not isinstance(mode, str) or not isinstance(out, str):
        raise ModelError(f"{p.name}: study.mode and study.output must be text")
    return (p.parent / model), {str(k): list(v) if isinstance(v, list) else v
                                for k, v in vary.items()}, mode, (p.parent / out)


def summary_lines(table: StudyTable) -> Iterable[str]:
    """A few lines for the terminal: counts and the lightest passing variant."""
    ok = [r for r in table.rows if r.get("passes") and not r.get("error")]
    yield (f"{len(table.rows)} variants: {len(ok)} pass, {len(table.failed)} failed to solve"
           + (f", {table.skipped} taken from the journal" if table.skipped else ""))
    if ok:
        best = min(ok, key=lambda r: r["mass_kg"])
        params = ", ".join(f"{k} = {best[k]}" for k in table.parameters)
        yield f"lightest passing: {params} ({best['mass_kg']:.0f} kg)"
