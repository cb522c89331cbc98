"""Results back into a DXF drawing: members coloured by axial force, one layer per result.

For every load case or combination written, the drawing gets:

- ``N_<result>``: each member as a LINE, coloured by its force band: five
  tension bands (light to dark red) and five compression bands (light to
  dark blue), each a fifth of the largest absolute force of that result,
  plus grey for members without force.  Colours are true colours, with the
  nearest ACI index as well for programs that read only ACI.
- ``KEY_<result>``: the band legend (coloured strokes and their limits in kN).
- ``L_<result>`` (on request, ``labels=True``): the force of each member in
  kN, tension positive, as TEXT at its midpoint.
- ``D_<result>`` (on request, ``deformed_scale="auto"`` or a number): the
  deformed shape, displacements multiplied by the scale given in the layer
  description and in a note on the layer.

plus ``FRAME`` (the undeformed members) and ``SUPPORTS`` (a POINT at each
supported node).  Only the first result's layers are on when the drawing
opens; a drafter switches the others on as needed.

Coordinates are in the units of the drawing the model was read from
(``model.meta["units"]``), so that the results overlay it; for a model
given inline in a model file, in that file's length unit
(``model.meta["project:length_unit"]``); else metres.  ``$INSUNITS``,
``$MEASUREMENT`` and the extents (``$EXTMIN``, ``$EXTMAX``) are set to match.

Above :data:`MEMBER_LIMIT` members, :func:`write_if_wanted` writes the drawing
only on request and returns a note saying so.

ezdxf writes the header, tables, layers and the few small entities (legend,
support points, labels, notes); the member LINEs, the bulk of the file, are
streamed as DXF text by :func:`stream_lines` (see there why).
"""

from __future__ import annotations

import io
import math
import os
import re
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import SpaceframeError, WriteError
from spaceframe.files import TextSink, atomic_write, unbuffered_text
from spaceframe.results.summary import auto_scale, format_number, supported_nodes

if TYPE_CHECKING:
    from spaceframe.results import Results

__all__ = [
    "BANDS",
    "COMPRESSION_COLORS",
    "MEMBER_LIMIT",
    "TENSION_COLORS",
    "ZERO_COLOR",
    "LineLayer",
    "drawing_units",
    "dxf_wanted",
    "force_bands",
    "layer_names",
    "stream_lines",
    "write_if_wanted",
    "write_results",
]

#: Above this many members the results drawing is written only on request
#: (:func:`write_if_wanted`): with one force layer per result it is then
#: hundreds of MB that few CAD programs open comfortably.
MEMBER_LIMIT = 200_000

#: LINEs formatted per chunk by :func:`stream_lines` (bounds the memory).
CHUNK = 20_000

#: Number of force bands on each side of zero.
BANDS = 5

#: The band colours as RGB, lightest (smallest force) first: (tension, compression) per band.
_BAND_RGB: tuple[tuple[tuple[int, int, int], tuple[int, int, int]], ...] = (
    ((255, 185, 165), (170, 200, 255)),
    ((248, 135, 105), (115, 160, 245)),
    ((232, 80, 55), (60, 110, 225)),
    ((200, 30, 25), (25, 60, 185)),
    ((140, 0, 15), (5, 20, 125)),
)
#: Tension bands, lightest (smallest force) first, as RGB.
TENSION_COLORS: tuple[tuple[int, int, int], ...] = tuple(t for t, _ in _BAND_RGB)
#: Compression bands, lightest (smallest force) first, as RGB.
COMPRESSION_COLORS: tuple[tuple[int, int, int], ...] = tuple(c for _, c in _BAND_RGB)
#: Members carrying (numerically) no force.
ZERO_COLOR = (150, 150, 150)

#: Forces below this fraction of the result's largest are shown as zero:
#: round-off leaves ~1e-16 relative on members that carry nothing, while a
#: real force this small is of no engineering consequence.
_ZERO_FRACTION = 1.0e-9

_BAD_LAYER_CHARS = re.compile(r'[<>/\\":;?*|=`,\x00-\x1f]+')


def force_bands(forces: np.ndarray) -> tuple[np.ndarray, float]:
    """Band of each member force: -5..-1 compression, 0 none, 1..5 tension.

    Parameters
    ----------
    forces : (b,) float
        Axial forces, N, tension positive.

    Returns
    -------
    bands : (b,) int
        Band k (|k| in 1..5) holds forces with (|k|-1)/5 < |N|/Nmax <= |k|/5.
    top : float
        Nmax, the largest absolute force, N.
    """
    t = np.asarray(forces, dtype=float)
    top = float(np.abs(t).max(initial=0.0))
    if top == 0.0:
        return np.zeros(t.shape, dtype=np.int64), 0.0
    ratio: np.ndarray = BANDS * np.abs(t) / top
    level = np.clip(np.ceil(ratio).astype(np.int64), 1, BANDS)
    level[np.abs(t) <= _ZERO_FRACTION * top] = 0
    return np.sign(t).astype(np.int64) * level, top


def _nearest_aci(rgb: tuple[int, int, int]) -> int:
    from ezdxf.colors import aci2rgb

    # 1..255 without 7, which flips between black and white with the background.
    candidates = [i for i in range(1, 256) if i != 7]
    table = np.array([tuple(aci2rgb(i)) for i in candidates], dtype=float)
    k = int(np.argmin(((table - np.asarray(rgb, dtype=float)) ** 2).sum(axis=1)))
    return candidates[k]


def _band_color(band: int) -> tuple[int, int, int]:
    if band > 0:
        return TENSION_COLORS[band - 1]
    if band < 0:
        return COMPRESSION_COLORS[-band - 1]
    return ZERO_COLOR


def layer_names(results: Results, cases: Sequence[str] | None = None) -> dict[str, str]:
    """Result name -> the ``<result>`` part of its layer names (DXF-safe and unique).

    Characters that DXF forbids in layer names become ``_``; names that then
    clash (compared without case, as CAD programs do) get ``_2``, ``_3``...
    """
    names = list(results) if cases is None else list(cases)
    out: dict[str, str] = {}
    used: set[str] = set()
    for name in names:
        base = _BAD_LAYER_CHARS.sub("_", name).strip() or "result"
        candidate, k = base, 2
        while candidate.upper() in used:
            candidate, k = f"{base}_{k}", k + 1
        used.add(candidate.upper())
        out[name] = candidate
    return out


def _text_rotation(d: np.ndarray) -> np.ndarray:
    # Along the member in plan, turned so text never reads upside down.
    angle = np.degrees(np.arctan2(d[:, 1], d[:, 0]))
    angle = np.where(angle > 90.0, angle - 180.0, angle)
    return np.where(angle <= -90.0, angle + 180.0, angle)


def _resolve_scale(option: float | str | None, results: Results, name: str) -> float:
    if option is None:
        return 0.0
    if isinstance(option, str):
        if option != "auto":
            raise WriteError(f"deformed_scale={option!r}: expected 'auto', a number >= 0 or None")
        return auto_scale(results.model, results[name].displacements)
    value = float(option)
    if not math.isfinite(value) or value < 0:
        raise WriteError(f"deformed_scale={option!r}: expected 'auto', a number >= 0 or None")
    return value


#: Units written as imperial in ``$MEASUREMENT`` (0); all others metric (1).
_IMPERIAL = frozenset({"inch", "ft", "mi", "microinch", "mil", "yd", "us_ft", "us_inch",
                       "us_yd", "us_mi"})


def drawing_units(results: Results, units: str | None = None,
                  where: str = "results DXF") -> tuple[str, float, int]:
    """(name, metres per unit, ``$INSUNITS`` code) the results drawing is written in.

    ``units`` if given; else the source drawing's unit (``model.meta["units"]``);
    else the model file's length unit (``model.meta["project:length_unit"]``);
    else metres.
    """
    from spaceframe.io._common import INSUNITS, insunits_code

    meta = results.model.meta
    chosen = units
    if chosen is None:
        for key in ("units", "project:length_unit"):
            entry = meta.get(key)
            if entry and entry.get("name"):
                chosen = str(entry["name"])
                break
    code, scale = insunits_code(chosen or "m", where=where)
    return INSUNITS[code][0], scale, code



@dataclass(frozen=True)
class LineLayer:
    """A layer of LINEs to stream into the results drawing.

    segments : (k, 2, 3) float, start and end of each line in drawing units.
    aci : ACI colour of each line, (k,) int, or None for BYLAYER.
    true_color : 24-bit RGB of each line, (k,) int, or None for none.
    color : the layer's own ACI colour; description : the layer's description;
    on : whether the layer is on when the drawing opens.
    """

    name: str
    segments: np.ndarray
    aci: np.ndarray | None = None
    true_color: np.ndarray | None = None
    color: int = 7
    description: str = ""
    on: bool = True


def stream_lines(stream: TextSink, segments: np.ndarray, layer: str, first_handle: int,
                 owner: str, aci: np.ndarray | None = None,
                 true_color: np.ndarray | None = None, chunk: int = CHUNK) -> int:
    """Write ``segments`` as DXF R2000+ LINE entities on ``layer``; return the count.

    Hand-written on purpose: a LINE in ezdxf is a Python object of ~720 bytes
    that costs 45-60 us to create and write, the floor of any per-entity
    library, and a results drawing holds a line per member and result.  The
    text of a LINE is fixed apart from its handle, colour and six coordinates,
    so it is formatted here from numpy arrays, ``chunk`` lines at a time, at
    a small fraction of that cost and memory.  Everything else in the drawing
    is left to ezdxf, and the tests read the file back with ezdxf and audit it.

    Parameters
    ----------
    stream : text stream positioned inside the ENTITIES section
    segments : (k, 2, 3) float
        Start and end points in drawing units; must be finite.
    layer : str
        A layer that exists in the drawing (DXF-safe name).
    first_handle : int
        Handles ``first_handle .. first_handle + k - 1`` (hex in the file) are
        used; the caller reserves them so that no other entity has them.
    owner : str
        Handle of the block record that owns the lines (model space).
    aci, true_color : (k,) int or None
        Per-line ACI and true colour; None writes BYLAYER.
    """
    seg = np.asarray(segments, dtype=float).reshape(-1, 6)
    if not np.all(np.isfinite(seg)):
        bad = int(np.flatnonzero(~np.all(np.isfinite(seg), axis=1))[0])
        raise SpaceframeError(f"layer {layer}: line {bad} has a coordinate that is not finite")
    k = seg.shape[0]
    head = f"  0\nLINE\n  5\n%X\n330\n{owner}\n100\nAcDbEntity\n  8\n{layer}\n"
    colour = ""
    if aci is not None:
        colour += " 62\n%d\n"
    if true_color is not None:
        colour += "420\n%d\n"
    # %r: repr(float), the shortest text that reads back to the same double (as
    # ezdxf writes coordinates), formatted inside the one %-operation below.
    fmt = head + colour + "100\nAcDbLine\n 10\n%r\n 20\n%r\n 30\n%r\n 11\n%r\n 21\n%r\n 31\n%r\n"
    columns: list[np.ndarray] = [np.arange(first_handle, first_handle + k, dtype=np.int64)]
    if aci is not None:
        columns.append(np.broadcast_to(np.asarray(aci, dtype=np.int64), (k,)))
    if true_color is not None:
        columns.append(np.broadcast_to(np.asarray(true_color, dtype=np.int64), (k,)))
    for lo in range(0, k, chunk):
        hi = min(k, lo + chunk)
        fields: list[list[Any]] = [c[lo:hi].tolist() for c in columns]
        fields += [seg[lo:hi, j].tolist() for j in range(6)]
        # One %-format over the whole chunk: rows interleaved column by column.
        flat = [v for row in zip(*fields, strict=True) for v in row]
        stream.write((fmt * (hi - lo)) % tuple(flat))
    return k


def write_if_wanted(path: str | os.PathLike[str], results: Results, *,
                    requested: bool | None = None, limit: int | None = None,
                    **options: object) -> tuple[Path | None, str | None]:
    """Write the results drawing unless it was declined or the model is too big.

    ``requested`` True always writes, False never; None (the default) writes
    up to ``limit`` members (default :data:`MEMBER_LIMIT`).  Returns (the file
    written or None, a note for the user or None): when the drawing is left
    out because of its size the note says so and how to get it.
    """
    wanted, note = dxf_wanted(int(results.model.n_members), Path(path), requested, limit)
    if not wanted:
        return None, note
    return write_results(path, results, **options), None  # type: ignore[arg-type]


def dxf_wanted(n_members: int, path: str | os.PathLike[str] = "results.dxf",
               requested: bool | None = None,
               limit: int | None = None) -> tuple[bool, str | None]:
    """Whether :func:`write_if_wanted` writes the drawing, and its note if it does not.

    ``limit`` defaults to :data:`MEMBER_LIMIT`.
    """
    limit = MEMBER_LIMIT if limit is None else limit
    if requested is False:
        return False, None
    if requested is None and n_members > limit:
        return False, (f"{Path(path)}: results DXF not written: {n_members} members is above "
                       f"{limit}; ask for it with --dxf yes (write_if_wanted(requested=True))")
    return True, None


def write_results(
    path: str | os.PathLike[str],
    results: Results,
    *,
    cases: Sequence[str] | None = None,
    labels: bool = False,
    deformed_scale: float | str | None = None,
    dxfversion: str = "R2010",
    units: str | None = None,
    extra: Sequence[LineLayer] = (),
    failing: Sequence[int] | None = None,
) -> Path:
    """Write a DXF drawing of the results (layers as in the module docstring).

    Parameters
    ----------
    path : path-like
        The ``.dxf`` file to write.
    results : Results
    cases : sequence of str, optional
        Results to draw (default all load cases and combinations).
    labels : bool
        Add each member's force in kN as text at its midpoint (on request:
        a TEXT per member and result is slow to write and to open).
    deformed_scale : "auto", float or None
        Multiplier of displacements for the deformed-shape layers; "auto"
        draws the largest at 5 % of the model size, per result; None (the
        default) or 0 leaves the deformed layers out.
    dxfversion : str
        DXF release, R2004 or later (true colour needs it).
    units : str, optional
        Length unit of the drawing ("mm", "m", "ft", ...); default as in
        :func:`drawing_units` (the source drawing's, else the model file's).
    extra : sequence of LineLayer
        Further layers of lines (in drawing units) streamed like the others.
    failing : sequence of int, optional
        Members that fail a design check: drawn on a layer ``FAILING`` (red).

    Returns
    -------
    Path
        The file written.

    Raises
    ------
    WriteError
        If a name in ``cases`` is not a result, there is nothing to draw or
        ``deformed_scale`` is invalid.

    Notes
    -----
    The drawing is generated here from scratch, so it is not audited before
    saving (the tests audit what this writes).  It is saved under a temporary
    name in the target folder that is renamed on success.
    """
    import ezdxf

    final = Path(path)
    names = _checked_names(final, results, cases)
    scales = {name: _resolve_scale(deformed_scale, results, name) for name in names}
    unit_name, per_unit, code = drawing_units(results, units, where=str(final))
    model = results.model
    # Everything drawn is in drawing units from here on.
    nodes = model.nodes / per_unit
    ends = model.members
    lengths = model.lengths / per_unit
    text_height = 0.04 * float(np.median(lengths))
    lo, hi = nodes.min(axis=0), nodes.max(axis=0)
    box = _Extents(lo.copy(), hi.copy())

    doc = ezdxf.new(dxfversion, setup=False)
    doc.header["$INSUNITS"] = code
    doc.header["$MEASUREMENT"] = 0 if unit_name in _IMPERIAL else 1
    msp = doc.modelspace()
    colours = _BandColours.make()

    frame = np.stack([nodes[ends[:, 0]], nodes[ends[:, 1]]], axis=1)
    streamed: list[LineLayer] = [LineLayer("FRAME", frame, color=8)]
    doc.layers.add("SUPPORTS", color=3)
    for i in supported_nodes(model).tolist():
        msp.add_point(nodes[i], dxfattribs={"layer": "SUPPORTS"})
    if failing is not None:  # design checks: the failing members on a layer of their own
        bad = np.unique(np.asarray(failing, dtype=np.int64))
        streamed.append(LineLayer("FAILING", frame[bad], color=1,
                                  description=f"{bad.size} members that fail a design check"))

    tags = layer_names(results, names)
    for step, name in enumerate(names):
        res = results[name]
        tag = tags[name]
        bands, top = force_bands(res.axial_forces)
        streamed.append(LineLayer(
            f"N_{tag}", frame, aci=colours.aci[bands + BANDS],
            true_color=colours.rgb[bands + BANDS],
            description=f"axial force bands of {name}, max |N| = {top / 1e3:.3f} kN",
            on=step == 0))
        x0 = float(lo[0])
        y0 = float(lo[1]) - 3.0 * text_height
        z0 = float(lo[2])
        new_layers = [_legend(doc, name, tag, top, (x0, y0, z0), text_height, colours, box)]
        if labels:
            new_layers.append(_labels(doc, name, tag, nodes, ends, res.axial_forces, bands,
                                      text_height, colours))
        scale = scales[name]
        if scale > 0:
            moved = nodes + scale * res.displacements / per_unit
            box.grow(moved.min(axis=0), moved.max(axis=0))
            # The note above the frame: ~60 characters.
            box.hi = np.maximum(box.hi, (x0 + 60 * 0.8 * text_height,
                                         float(hi[1]) + 3.0 * text_height, z0))
            streamed.append(LineLayer(
                f"D_{tag}", np.stack([moved[ends[:, 0]], moved[ends[:, 1]]], axis=1), color=6,
                description=f"deformed shape of {name}, displacements x {scale:.6g}",
                on=step == 0))
            new_layers.append(_deformed_note(doc, name, tag, streamed[-1].description, scale,
                                             (x0, float(hi[1]) + 2.0 * text_height, z0),
                                             text_height))
        if step > 0:
            for lay in new_layers:
                lay.off()

    streamed += list(extra)
    _add_line_layers(doc, streamed, box)
    _save(final, doc, streamed, box)
    return final


def _checked_names(final: Path, results: Results, cases: Sequence[str] | None) -> list[str]:
    """The results to draw, each checked to be one of ``results``."""
    names = list(results) if cases is None else list(cases)
    for name in names:
        if name not in results:
            raise WriteError(f"{final}: no result named {name!r} (have: {', '.join(results)})")
    if not names:
        raise WriteError(f"{final}: there are no load cases or combinations to draw")
    return names


@dataclass
class _Extents:
    """The drawing's extents, grown by everything drawn."""

    lo: np.ndarray
    hi: np.ndarray

    def grow(self, lo: Any, hi: Any) -> None:
        self.lo = np.minimum(self.lo, lo)
        self.hi = np.maximum(self.hi, hi)


@dataclass(frozen=True)
class _BandColours:
    """ACI and 24-bit colour per band (index band + BANDS), and DXF attributes per band."""

    aci: np.ndarray
    rgb: np.ndarray
    attribs: dict[int, dict[str, int]]

    @classmethod
    def make(cls) -> _BandColours:
        from ezdxf.colors import rgb2int

        band_values = np.arange(-BANDS, BANDS + 1)
        colors = {int(b): _band_color(int(b)) for b in band_values}
        return cls(
            np.array([_nearest_aci(colors[int(b)]) for b in band_values], dtype=np.int64),
            np.array([rgb2int(colors[int(b)]) for b in band_values], dtype=np.int64),
            {b: {"true_color": rgb2int(c), "color": _nearest_aci(c)} for b, c in colors.items()},
        )


def _legend_rows(name: str, top: float) -> list[tuple[int, str]]:
    """(band, text) of each legend line, the title first (band 0)."""
    rows = [
        (
            b,
            f"T{b}  {format_number(top * (b - 1) / BANDS / 1e3)} < N <= "
            f"{format_number(top * b / BANDS / 1e3)} kN",
        )
        for b in range(BANDS, 0, -1)
    ]
    rows.append((0, "0   no force"))
    rows += [
        (
            -b,
            f"C{b}  {format_number(-top * b / BANDS / 1e3)} <= N < "
            f"{format_number(-top * (b - 1) / BANDS / 1e3)} kN",
        )
        for b in range(1, BANDS + 1)
    ]
    rows.insert(0, (0, f"{name}: axial force, tension positive"))
    return rows


def _legend(doc: Any, name: str, tag: str, top: float, origin: tuple[float, float, float],
            text_height: float, colours: _BandColours, box: _Extents) -> Any:
    """Layer ``KEY_<tag>`` with the band legend at ``origin``; returns the layer."""
    from ezdxf.enums import TextEntityAlignment

    msp = doc.modelspace()
    x0, y0, z0 = origin
    key = doc.layers.add(f"KEY_{tag}", color=7)
    key.description = f"force band legend of {name}"
    rows = _legend_rows(name, top)
    # The legend's box: strokes, then text of at most ~45 characters.
    box.grow((x0, y0 - 1.6 * text_height * len(rows), z0),
             (x0 + 5 * text_height + 45 * 0.8 * text_height, y0, z0))
    for k, (band, text) in enumerate(rows):
        y = y0 - 1.6 * text_height * k
        if k > 0:
            msp.add_line(
                (x0, y, z0),
                (x0 + 4 * text_height, y, z0),
                dxfattribs={"layer": f"KEY_{tag}", **colours.attribs[band]},
            )
        note = msp.add_text(text, height=text_height, dxfattribs={"layer": f"KEY_{tag}"})
        note.set_placement((x0 + 5 * text_height, y, z0), align=TextEntityAlignment.MIDDLE_LEFT)
    return key


def _labels(doc: Any, name: str, tag: str, nodes: np.ndarray, ends: np.ndarray,
            forces: np.ndarray, bands: np.ndarray, text_height: float,
            colours: _BandColours) -> Any:
    """Layer ``L_<tag>`` with each member's force in kN at its midpoint; returns the layer."""
    from ezdxf.enums import TextEntityAlignment

    msp = doc.modelspace()
    lab = doc.layers.add(f"L_{tag}", color=7)
    lab.description = f"axial forces of {name} in kN, tension positive"
    mids = 0.5 * (nodes[ends[:, 0]] + nodes[ends[:, 1]])
    rot = _text_rotation(nodes[ends[:, 1]] - nodes[ends[:, 0]])
    kn = np.round(forces / 1e3, 2)
    kn[kn == 0.0] = 0.0  # no "-0.00"
    for mid, r, value, band in zip(
        mids.tolist(), rot.tolist(), kn.tolist(), bands.tolist(), strict=True
    ):
        label = msp.add_text(
            f"{value:.2f}",
            height=text_height,
            rotation=r,
            dxfattribs={"layer": f"L_{tag}", **colours.attribs[band]},
        )
        label.set_placement(mid, align=TextEntityAlignment.MIDDLE_CENTER)
    return lab


def _deformed_note(doc: Any, name: str, tag: str, description: str, scale: float,
                   at: tuple[float, float, float], text_height: float) -> Any:
    """Layer ``D_<tag>`` with the note of the deformed shape's scale; returns the layer."""
    from ezdxf.enums import TextEntityAlignment

    dnote = doc.layers.add(f"D_{tag}", color=6)
    dnote.description = description
    doc.modelspace().add_text(
        f"{name}: deformed shape, displacements x {format_number(scale, 3)}",
        height=text_height,
        dxfattribs={"layer": f"D_{tag}"},
    ).set_placement(at, align=TextEntityAlignment.MIDDLE_LEFT)
    return dnote


def _add_line_layers(doc: Any, streamed: Sequence[LineLayer], box: _Extents) -> None:
    """Grow the extents by the streamed lines and add their layers not made yet."""
    for ll in streamed:
        seg = np.asarray(ll.segments, dtype=float).reshape(-1, 2, 3)
        if seg.size:
            box.grow(seg.min(axis=(0, 1)), seg.max(axis=(0, 1)))
        if ll.name in doc.layers:
            continue  # the deformed layer, made above with its note
        lay = doc.layers.add(ll.name, color=ll.color)
        if ll.description:
            lay.description = ll.description
        if not ll.on:
            lay.off()


def _save(final: Path, doc: Any, streamed: Sequence[LineLayer], box: _Extents) -> None:
    """Write ezdxf's drawing with the streamed lines in its ENTITIES, atomically."""
    msp = doc.modelspace()
    # ezdxf copies the model space's extents into the header when saving.
    msp.dxf.extmin = tuple(float(v) for v in box.lo)
    msp.dxf.extmax = tuple(float(v) for v in box.hi)
    # Reserve the handles of the streamed lines so that $HANDSEED, which
    # ezdxf writes from its handle generator, lies above all of them.
    total = sum(int(np.asarray(ll.segments).reshape(-1, 6).shape[0]) for ll in streamed)
    handles = doc.entitydb.handles
    first = int(str(handles), 16)
    handles.reset("%X" % (first + total))
    owner = msp.block_record_handle
    buffer = io.StringIO()
    doc.write(buffer)
    body = buffer.getvalue()
    del buffer
    at = body.index("  2\nENTITIES\n")
    cut = body.index("  0\nENDSEC\n", at)

    final.parent.mkdir(parents=True, exist_ok=True)

    def save(tmp: Path) -> None:
        # Past the page cache: the drawing is 120 MB at 100k members (files.unbuffered_file).
        with unbuffered_text(tmp) as fh:
            fh.write(body[:cut])
            handle = first
            for ll in streamed:
                handle += stream_lines(fh, ll.segments, ll.name, handle, owner,
                                       aci=ll.aci, true_color=ll.true_color)
            fh.write(body[cut:])

    atomic_write(final, save)
