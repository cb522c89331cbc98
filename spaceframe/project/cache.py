"""Cache of imported, healed drawing geometry beside the model file.

A model file that reads a drawing or mesh (``geometry.file``) re-reads and
re-heals it on every run.  With the cache on, the healed geometry arrays are
kept in ``.spaceframe-cache/`` beside the model file, one entry per key:
``<key>.npz`` (the arrays, compressed, read with ``allow_pickle=False``) and
``<key>.json`` (the reader's metadata, the healing report and the reader's
warnings, replayed on a cached read).  The key is the SHA-256 of the
drawing's bytes, the reader's suffix, units, tolerance, healing switch and
options, the cache format number and the tool's version: a changed drawing
(or any of those) gets a new key and is read afresh.

A damaged, unreadable or mismatched entry is ignored (and rewritten by the
fresh read); a folder that cannot be written means no cache, never an error.
Only files the cache wrote (named by a key) are ever removed, and only in a
folder that holds the cache's marker file.
"""

from __future__ import annotations

import builtins
import hashlib
import json
import re
import warnings
from pathlib import Path
from typing import Any

import numpy as np

from spaceframe import errors as sf_errors
from spaceframe.model import Model

#: Bump when what an entry holds, or how it is read back, changes.
FORMAT = 1
FOLDER = ".spaceframe-cache"
MARKER = "SPACEFRAME-CACHE"
_MARKER_TEXT = ("Geometry cache written by spaceframe: imported, healed drawings, keyed by "
                "content.\nSafe to delete; it is rebuilt on the next run.\n")
#: Entries kept per folder; the oldest beyond this are removed.
MAX_ENTRIES = 8
_ENTRY = re.compile(r"^[0-9a-f]{64}\.(npz|json)$")
_DICTS = ("groups", "node_sets", "panel_groups")
_TEXT_ARRAYS = ("buckling_curve", "marker_layers")
#: What must be empty after a read for the entry to describe the whole model.
_EMPTY_AFTER_READ = ("self_weight_records", "cases", "combinations")


def cache_key(drawing: Path, *, units: str | None, tolerance: float, heal: bool,
              options: dict[str, Any]) -> str | None:
    """SHA-256 key of the drawing's bytes and every reader argument (None: unreadable)."""
    from spaceframe import __version__

    h = hashlib.sha256()
    try:
        with open(drawing, "rb") as f:
            for block in iter(lambda: f.read(1 << 20), b""):
                h.update(block)
    except OSError:
        return None
    args = {"format": FORMAT, "version": __version__, "suffix": drawing.suffix.lower(),
            "units": units, "tolerance": repr(float(tolerance)), "heal": bool(heal),
            "options": options}
    h.update(json.dumps(args, sort_keys=True, default=repr).encode())
    return h.hexdigest()


def _category_name(cat: type[Warning]) -> str | None:
    if getattr(sf_errors, cat.__name__, None) is cat:
        return "spaceframe:" + cat.__name__
    if getattr(builtins, cat.__name__, None) is cat:
        return "builtins:" + cat.__name__
    return None


def _category(name: str) -> type[Warning]:
    where, _, cls = name.partition(":")
    found = getattr(sf_errors if where == "spaceframe" else builtins, cls)
    if not (isinstance(found, type) and issubclass(found, Warning)):
        raise TypeError(name)
    return found


def load(folder: Path, key: str) -> Model | None:
    """The cached Model of ``key``, its warnings replayed; None if absent or damaged."""
    try:
        side = json.loads((folder / f"{key}.json").read_text(encoding="utf-8"))
        if side.get("key") != key or side.get("format") != FORMAT:
            return None
        with np.load(folder / f"{key}.npz", allow_pickle=False) as z:
            arrays = {name: z[name] for name in z.files}
        model = _restore(arrays, side)
        replay = [(_category(c), str(m)) for c, m in side["warnings"]]
    except Exception:  # any damage means: read the drawing again
        return None
    for cat, message in replay:
        warnings.warn(message, cat, stacklevel=3)
    return model


def _restore(arrays: dict[str, np.ndarray], side: dict[str, Any]) -> Model:
    from spaceframe.geometry.reports import HealReport, StepReport

    model = Model()
    model.nodes = arrays.pop("a:nodes")
    model.members = arrays.pop("a:members")
    for name, arr in arrays.items():
        kind, _, attr = name.partition(":")
        if kind == "a":
            if attr not in side["attrs"]:
                raise ValueError(attr)
            setattr(model, attr, arr.astype(object) if attr in _TEXT_ARRAYS else arr)
        else:
            getattr(model, {"g": "groups", "s": "node_sets", "p": "panel_groups"}[kind])[
                side["names"][name]] = arr
    if any(f"a:{a}" not in side["arrays"] for a in side["attrs"]):
        raise ValueError("missing array")
    model.meta = dict(side["meta"])
    rep = side.get("heal_report")
    if rep is not None:
        steps = [StepReport(name=s["name"], count=s["count"],
                            locations=np.asarray(s["locations"], dtype=np.float64).reshape(-1, 3),
                            detail=s["detail"], skipped=s["skipped"], seconds=s["seconds"],
                            lengths=tuple(s["lengths"]), template=s["template"])
                 for s in rep["steps"]]
        model.meta["heal:report"] = HealReport(steps=steps, n_components=rep["n_components"])
    # Keep the keys in the order a fresh read gives.
    model.meta = {k: model.meta[k] for k in side["meta_order"] if k in model.meta}
    return model


def save(folder: Path, key: str, model: Model, caught: list[warnings.WarningMessage]) -> bool:
    """Write the entry of ``key``; False (and nothing written) when it cannot be cached."""
    from spaceframe.geometry.reports import HealReport

    if any(getattr(model, name) for name in _EMPTY_AFTER_READ):
        return False
    warned = []
    for w in caught:
        cat = _category_name(w.category)
        if cat is None:
            return False
        warned.append([cat, str(w.message)])
    arrays: dict[str, np.ndarray] = {}
    attrs: list[str] = []
    for attr, value in vars(model).items():
        if attr == "_cache" or not isinstance(value, np.ndarray):
            continue
        name = attr.lstrip("_")
        if value.dtype == object:
            if name not in _TEXT_ARRAYS or not all(isinstance(v, str) for v in value.tolist()):
                return False
            value = np.asarray(value.tolist(), dtype=str)
        arrays[f"a:{name}"] = value
        attrs.append(name)
    names: dict[str, str] = {}
    for kind, attr in zip("gsp", _DICTS, strict=True):
        for i, (gname, ids) in enumerate(getattr(model, attr).items()):
            arrays[f"{kind}:{i}"] = np.asarray(ids)
            names[f"{kind}:{i}"] = gname
    meta = {k: v for k, v in model.meta.items() if k != "heal:report"}
    report = model.meta.get("heal:report")
    if report is not None and not isinstance(report, HealReport):
        return False
    side = {
        "format": FORMAT, "key": key, "attrs": attrs, "arrays": sorted(arrays), "names": names,
        "meta": meta, "meta_order": list(model.meta), "warnings": warned,
        "heal_report": None if report is None else _report_dict(report),
    }
    return _write(folder, key, arrays, side, meta)


def _report_dict(report: Any) -> dict[str, Any]:
    """Everything of a HealReport, timings and length templates included."""
    return {
        "n_components": int(report.n_components),
        "steps": [{"name": s.name, "count": int(s.count),
                   "locations": np.asarray(s.locations, dtype=float).reshape(-1, 3).tolist(),
                   "detail": s.detail, "skipped": bool(s.skipped),
                   "seconds": float(s.seconds), "lengths": [float(x) for x in s.lengths],
                   "template": s.template} for s in report.steps],
    }


def _write(folder: Path, key: str, arrays: dict[str, np.ndarray], side: dict[str, Any],
           meta: dict[str, Any]) -> bool:
    from spaceframe.files import atomic_write

    try:
        text = json.dumps(side, allow_nan=True)
        # Round-trips exactly, or the entry would not reproduce the fresh read.
        if json.loads(text)["meta"] != meta:
            return False
    except (TypeError, ValueError):
        return False
    try:
        folder.mkdir(exist_ok=True)
        marker = folder / MARKER
        if not marker.is_file():
            if any(folder.iterdir()):
                return False  # a folder of that name the tool did not make: leave it alone
            atomic_write(marker, lambda p: _text(p, _MARKER_TEXT))
        # The arrays first: a sidecar names only a complete array file.
        atomic_write(folder / f"{key}.npz", lambda p: _savez(p, arrays))
        atomic_write(folder / f"{key}.json", lambda p: _text(p, text))
        _prune(folder, key)
    except (OSError, sf_errors.SpaceframeError):
        return False
    return True


def _text(path: Path, text: str) -> None:
    path.write_text(text, encoding="utf-8")


def _savez(path: Path, arrays: dict[str, np.ndarray]) -> None:
    with open(path, "wb") as f:
        np.savez_compressed(f, **arrays)  # type: ignore[arg-type]


def _prune(folder: Path, keep: str) -> None:
    """Remove the oldest entries beyond MAX_ENTRIES (only files named like an entry)."""
    stamps: dict[str, float] = {}
    for p in folder.iterdir():
        if _ENTRY.match(p.name) and p.stem != keep:
            try:
                stamps[p.stem] = max(stamps.get(p.stem, 0.0), p.stat().st_mtime)
            except OSError:
                continue
    old = sorted(stamps, key=stamps.__getitem__, reverse=True)[MAX_ENTRIES - 1:]
    for stem in old:
        for suffix in (".npz", ".json"):
            (folder / f"{stem}{suffix}").unlink(missing_ok=True)
