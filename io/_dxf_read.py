"""Opening a DXF (with ezdxf's recover and audit) and the words of its warnings."""

from __future__ import annotations

import contextlib
import logging
import math
import re
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ReadError, SpaceframeWarning
from spaceframe.io._common import Units, parse_units, units_from_insunits
from spaceframe.io._dxf_blocks import _ENTITY_ERRORS, CURVE_KINDS
from spaceframe.io._raw import RawGeometry, count_ignored, describe_ignored

if TYPE_CHECKING:
    from ezdxf.document import Drawing

# Ignored-table kinds that mean "an entity was lost" rather than "an entity
# of a kind that is not a member": they start with these words.
_SKIPPED_PREFIXES = ("damaged ", "INSERT of block ")

# At most this many items of a list are named in a warning; the rest are counted.
_SHOW = 5


def _open(path: Path) -> tuple[Drawing, dict[str, Any] | None]:
    """The document, and what ezdxf.recover did (None when the file read cleanly)."""
    try:
        import ezdxf
        from ezdxf import recover
        from ezdxf.lldxf import validator
    except ImportError as exc:
        raise ReadError(f"{path}: reading DXF needs the ezdxf package ({exc})") from exc

    if validator.is_dwg_file(str(path)):
        raise ReadError(f"{path}: is a DWG drawing, not DXF; save it as DXF from the CAD program")
    if not (validator.is_dxf_file(str(path)) or validator.is_binary_dxf_file(str(path))):
        with open(path, "rb") as fh:
            head = fh.read(40)
        if head.startswith(b"\xef\xbb\xbf") and head[3:].lstrip()[:1] == b"0":
            # A UTF-8 byte-order mark (some editors add one): read what follows it.
            import io as _io

            try:
                doc, auditor = recover.read(_io.BytesIO(path.read_bytes()[3:]))
            except Exception as exc:
                raise ReadError(f"{path}: DXF after a UTF-8 byte-order mark could not be "
                                f"read ({_exc_text(exc)})") from exc
            rep = _repairs(auditor, "the file starts with a UTF-8 byte-order mark")
            return doc, rep
        raise ReadError(
            f"{path}: is not a DXF file (a DXF starts with group code 0 and SECTION; "
            f"this one starts with {head!r})"
        )
    # Any exception of ezdxf's parser means a damaged file here (the file is
    # known to exist and to look like DXF): it goes to the recover reader.
    try:
        doc = ezdxf.readfile(str(path))
    except Exception as exc:
        first = exc
    else:
        # A file that parses may still hold broken structure (pointers to
        # missing layers or blocks, invalid values): ezdxf's audit repairs
        # it, and every repair is reported.
        try:
            auditor = doc.audit()
        except Exception as exc:
            raise ReadError(
                f"{path}: damaged DXF: ezdxf's audit failed ({_exc_text(exc)})"
            ) from exc
        if auditor.fixes or auditor.errors:
            return doc, _repairs(auditor, None)
        return doc, None
    try:
        doc, auditor = recover.readfile(str(path))
    except Exception as exc:
        raise ReadError(
            f"{path}: damaged DXF that ezdxf.recover could not read either "
            f"({_exc_text(first)}; then {_exc_text(exc)})"
        ) from exc
    return doc, _repairs(auditor, _exc_text(first))


def _exc_text(exc: BaseException) -> str:
    """Text 'Type: message' of an exception, without the type twice (as ezdxf writes some)."""
    name, text = type(exc).__name__, str(exc).strip()
    while text.startswith(name + ":"):
        text = text[len(name) + 1 :].strip()
    return f"{name}: {text}" if text else name


def _repairs(auditor: Any, reason: str | None) -> dict[str, Any]:
    """What ezdxf's recover (``reason`` given) or audit (None) did, for ``model.meta``."""
    return {
        "reason": reason,
        "fixes": [str(entry.message) for entry in auditor.fixes],
        "errors": [str(entry.message) for entry in auditor.errors],
    }


class _LogRecords(logging.Handler):
    """Keeps ezdxf's log records (warnings and worse) of one read."""

    def __init__(self) -> None:
        super().__init__(logging.WARNING)
        self.messages: list[str] = []

    def emit(self, record: logging.LogRecord) -> None:
        with contextlib.suppress(Exception):
            self.messages.append(record.getMessage())


@contextlib.contextmanager
def _ezdxf_log() -> Iterator[_LogRecords]:
    """Collect what ezdxf logs while reading, so it does not reach stderr bare.

    A handler on the "ezdxf" logger means Python's last-resort handler (which
    prints to stderr) is no longer used; an application that set up its own
    logging still gets the records.
    """
    logger = logging.getLogger("ezdxf")
    handler = _LogRecords()
    logger.addHandler(handler)
    try:
        yield handler
    finally:
        logger.removeHandler(handler)


# ezdxf log messages that say nothing about the drawing's members (ezdxf
# copying dimension associations while expanding a block, for example).
_LOG_NOISE = ("copy process ignored",)


def _paper_space_count(doc: Drawing) -> int:
    """Entities drawn in the paper-space layouts (0 when they cannot be counted)."""
    try:
        return sum(
            1
            for layout in doc.layouts
            if not layout.is_modelspace
            for e in layout
            if e.dxftype() != "VIEWPORT"  # every layout has one; it is no drawing
        )
    except _ENTITY_ERRORS:
        return 0


def _count(n: int, noun: str) -> str:
    """'1 entity', '3 entities', '2 block references'."""
    if n == 1:
        return f"1 {noun}"
    return f"{n} {noun[:-1]}ies" if noun.endswith("y") else f"{n} {noun}s"


def _items(texts: list[str], show: int = _SHOW) -> str:
    """'3 problems: "a"; "b" and 1 more' for a list of messages."""
    shown = "; ".join(repr(t) for t in texts[:show])
    more = f" and {len(texts) - show} more" if len(texts) > show else ""
    return f"{len(texts)} problem(s): {shown}{more}"


def _named(counts: dict[str, int], show: int = _SHOW) -> str:
    """Text "block 'A' x2, block 'B' x1" of a name -> count table."""
    parts = [f"block {k!r} x{v}" for k, v in list(counts.items())[:show]]
    more = f", {len(counts) - show} more blocks" if len(counts) > show else ""
    return ", ".join(parts) + more


def _describe(ignored: dict[str, dict[str, Any]], show: int = _SHOW) -> str:
    """Like :func:`describe_ignored`, naming at most a few kinds and layers each."""
    kinds = list(ignored)
    text = describe_ignored({k: _few_layers(ignored[k], show) for k in kinds[:show]}, kinds[:show])
    if len(kinds) > show:
        rest = sum(ignored[k]["count"] for k in kinds[show:])
        text += f"; {rest} more of {len(kinds) - show} other kinds"
    return text


def _few_layers(entry: dict[str, Any], show: int) -> dict[str, Any]:
    layers = dict(entry["layers"])
    if len(layers) <= show:
        return entry
    kept = dict(list(layers.items())[:show])
    kept[f"{len(layers) - show} more layers"] = 0
    return {"count": entry["count"], "layers": kept}


# A repair message of ezdxf that concerns an entity that can become a
# member, a marker or a panel, e.g. "Removed entity LINE(#10) with a
# conflicting handle ...": such repairs are named first.
_MEMBER_REPAIR = re.compile(r"\b(LINE|LWPOLYLINE|POLYLINE|VERTEX|INSERT|POINT|3DFACE|MESH)\(#")
_REMOVED = re.compile(r"^Removed (?:entity )?([A-Z0-9_]+)\(#")


def _repair_notes(where: str, recovered: dict[str, Any]) -> list[str]:
    """One warning per repair ezdxf made (the first few), then a count of the rest.

    Repairs of entities that could be members come first, so that a removed
    LINE is never hidden behind repairs of the layer table.
    """
    fixes = sorted(recovered["fixes"], key=lambda t: not _MEMBER_REPAIR.search(t))
    errors = recovered["errors"]
    how = (
        f"damaged DXF ({recovered['reason']}), read with ezdxf.recover"
        if recovered["reason"]
        else "ezdxf's audit found damage in the DXF"
    )
    on_members = sum(1 for t in fixes if _MEMBER_REPAIR.search(t))
    notes = [
        f"{where}: {how}: {len(fixes)} repairs ({on_members} of line, polyline, block reference, "
        f"point or face entities), {len(errors)} unrepaired errors; check the model"
    ]
    notes += [f"{where}: ezdxf repaired: {text}" for text in fixes[:_SHOW]]
    notes += [f"{where}: ezdxf could not repair: {text}" for text in errors[:_SHOW]]
    rest = max(len(fixes) - _SHOW, 0) + max(len(errors) - _SHOW, 0)
    if rest:
        notes.append(f"{where}: ... and {rest} more repairs or errors reported by ezdxf")
    return notes


def _removed_by_repair(recovered: dict[str, Any]) -> dict[str, int]:
    """Entities ezdxf's repair removed, by type ("Removed entity LINE(#10) ...")."""
    removed: dict[str, int] = {}
    for text in recovered["fixes"]:
        found = _REMOVED.match(text)
        if found:
            removed[found.group(1)] = removed.get(found.group(1), 0) + 1
    return removed


def _layer_zero_note(where: str, raw: RawGeometry, unit: str) -> str:
    """A warning when some lines are on layer 0 and all the others on named layers.

    A damaged file that lost an entity's layer (group code 8) puts it on
    layer 0, where it silently gets another group, hence another section.
    """
    if "0" not in raw.sets or len(raw.sets) < 2 or raw.segments.shape[0] == 0:
        return ""
    owners0 = np.asarray(raw.sets["0"], dtype=np.int64)
    on_zero = np.zeros(1 + max(int(raw.segment_owner.max()), int(owners0.max())), dtype=bool)
    on_zero[owners0] = True
    seg_on = on_zero[raw.segment_owner]
    n0, n = int(seg_on.sum()), int(seg_on.size)
    if n0 == 0 or n0 == n:
        return ""
    first = raw.points[raw.segments[np.flatnonzero(seg_on)[:3], 0]]
    at = "; ".join("(" + ", ".join(f"{c:.6g}" for c in p) + ")" for p in first.tolist())
    more = ", ..." if n0 > 3 else ""
    return (
        f"{where}: {n0} of {n} lines are on layer '0' while the others are on named layers "
        f"(starting at {at}{more} {unit}); a damaged file puts lines that lost their "
        "layer on '0': check the groups of these lines"
    )


def _file_units(code: int, where: str, units: str | None, raw: RawGeometry) -> Units:
    """The drawing's unit from its ``$INSUNITS`` code, or from ``units=``."""
    header = units_from_insunits(code, where=where)
    if units is not None:
        name, scale = parse_units(units, where=where)
        if header is not None and not math.isclose(header.scale, scale, rel_tol=1e-12):
            warnings.warn(
                f"{where}: units={units!r} overrides the header ({header.source}, {header.name})",
                SpaceframeWarning,
                stacklevel=3,
            )
        return Units(name, scale, "units= option")
    if header is None:
        extent = ""
        if raw.points.shape[0]:
            lo, hi = raw.points.min(axis=0), raw.points.max(axis=0)
            extent = (
                "; its extents are "
                + ", ".join(f"{a} {lo[i]:.6g}..{hi[i]:.6g}" for i, a in enumerate("xyz"))
                + " drawing units"
            )
        raise ReadError(
            f"{where}: the drawing is unitless ($INSUNITS = 0); pass units= (e.g. "
            f"units='mm' or units='m'){extent}"
        )
    return header



def read_notes(
    where: str, raw: RawGeometry, recovered: dict[str, Any] | None, logged: list[str],
    collector: Any,
) -> tuple[dict[str, Any], list[str]]:
    """The ``model.meta`` entries of a read and its warnings, in the order they are issued.

    Repairs first, then ezdxf's log, z-scale-0 block references, skipped
    entities, curves and other kinds not read.  Entities that ezdxf's repair
    removed are counted in ``raw.ignored`` as skipped.
    """
    meta: dict[str, Any] = {}
    notes: list[str] = []
    if recovered is not None:
        # A file that needed the recover reader is "dxf:recover" (with the
        # reason); one that only needed the audit's repairs is "dxf:audit".
        meta["dxf:recover" if recovered["reason"] else "dxf:audit"] = recovered
        notes += _repair_notes(where, recovered)
        for kind, n in _removed_by_repair(recovered).items():
            # Gone from the drawing before it was read: counted as skipped.
            count_ignored(raw.ignored, f"damaged {kind} (removed by ezdxf's repair)", "unknown", n)
    logged = [m for m in logged if not m.startswith(_LOG_NOISE)]
    if logged:
        meta["dxf:log"] = logged
        notes.append(f"{where}: ezdxf reported {_items(logged, 3)} while reading")
    if collector.filtered:
        meta["dxf:filtered_layers"] = dict(collector.filtered)
    if collector.zscale0:
        meta["dxf:zscale0"] = dict(collector.zscale0)
        n = sum(collector.zscale0.values())
        notes.append(
            f"{where}: {_count(n, 'block reference')} with z-scale 0, as 2D exporters write them "
            f"({_named(collector.zscale0)}): their blocks are flat and were read with z-scale 1"
        )
    return meta, notes + _ignored_notes(where, raw.ignored)


def _ignored_notes(where: str, ignored: dict[str, dict[str, Any]]) -> list[str]:
    """Warnings for skipped entities, curves, and other kinds that are not members."""
    notes = []
    skipped = {k: v for k, v in ignored.items() if k.startswith(_SKIPPED_PREFIXES)}
    if skipped:
        notes.append(
            f"{where}: {_count(sum(v['count'] for v in skipped.values()), 'entity')} skipped "
            f"(damaged or not expandable): {_describe(skipped)}"
        )
    curves = {k: v for k, v in ignored.items() if k in CURVE_KINDS}
    if curves:
        notes.append(f"{where}: curves are not members and were ignored: {_describe(curves)}")
    other = {k: v for k, v in ignored.items() if k not in skipped and k not in curves}
    if other:
        n_other = sum(v["count"] for v in other.values())
        notes.append(
            f"{where}: {_count(n_other, 'entity')} of kinds that are not members were ignored: "
            f"{_describe(other)}"
        )
    return notes


def no_member_hint(
    doc: Drawing | None, raw: RawGeometry, recovered: dict[str, Any] | None, collector: Any,
    edges_as_members: bool,
) -> str:
    """What to say when nothing became a member: damage, faces, filters, paper space."""
    hints = []
    if recovered is not None and recovered["reason"]:
        hints.append(f"the file is damaged ({recovered['reason']})")
    if raw.n_faces and not edges_as_members:
        hints.append("the drawing has faces: read with edges_as_members=True")
    if collector.filtered:
        hints.append(f"layers filtered out: {', '.join(sorted(collector.filtered))}")
    if not raw.segments.shape[0] and doc is not None:
        paper = _paper_space_count(doc)
        if paper:
            hints.append(
                f"only the model space is read, and {_count(paper, 'entity')} "
                f"{'is' if paper == 1 else 'are'} in paper space"
            )
    return "; ".join(hints)
