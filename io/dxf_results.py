"""Results back into a DXF drawing: members coloured by axial force, one layer per result.

For every load case or combination written, the drawing gets:

- ``N_<result>``: each member as a LINE, coloured by its force band: five
  tension bands (light to dark red) and five compression bands (light to
  dark blue), each a fifth of the largest absolute force of that result,
  plus grey for members without force.  Colours are true colours, with the
  nearest ACI index as well for programs that read only ACI.
- ``KEY_<result>``: the band legend (coloured strokes and their limits in kN).
- ``L_<result>`` (with ``labels=True``): the force of each member in kN,
  tension positive, as TEXT at its midpoint.
- ``D_<result>``: the deformed shape, displacements multiplied by the scale
  given in the layer description and in a note on the layer.

plus ``FRAME`` (the undeformed members) and ``SUPPORTS`` (a POINT at each
supported node).  Only the first result's layers are on when the drawing
opens; a drafter switches the others on as needed.

Coordinates are in the units of the drawing the model was read from
(``model.meta["units"]``), so that the results overlay it; for a model
given inline in a model file, in that file's length unit
(``model.meta["project:length_unit"]``); else metres.  ``$INSUNITS``,
``$MEASUREMENT`` and the extents (``$EXTMIN``, ``$EXTMAX``) are set to match.
"""

from __future__ import annotations

import math
import os
import re
import uuid
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from spaceframe.errors import SpaceframeError, WriteError
from spaceframe.summary import auto_scale, format_number, supported_nodes

if TYPE_CHECKING:
    from spaceframe.results import Results

__all__ = [
    "BANDS",
    "COMPRESSION_COLORS",
    "TENSION_COLORS",
    "ZERO_COLOR",
    "drawing_units",
    "force_bands",
    "layer_names",
    "write_results",
]

#: Number of force bands on each side of zero.
BANDS = 5

#: Tension bands, lightest (smallest force) first, as RGB.
TENSION_COLORS: tuple[tuple[int, int, int], ...] = (
    (255, 185, 165),
    (248, 135, 105),
    (232, 80, 55),
    (200, 30, 25),
    (140, 0, 15),
)
#: Compression bands, lightest (smallest force) first, as RGB.
COMPRESSION_COLORS: tuple[tuple[int, int, int], ...] = (
    (170, 200, 255),
    (115, 160, 245),
    (60, 110, 225),
    (25, 60, 185),
    (5, 20, 125),
)
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


def write_results(
    path: str | os.PathLike[str],
    results: Results,
    *,
    cases: Sequence[str] | None = None,
    labels: bool = False,
    deformed_scale: float | str | None = "auto",
    dxfversion: str = "R2010",
    units: str | None = None,
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
        Add each member's force in kN as text at its midpoint.
    deformed_scale : "auto", float or None
        Multiplier of displacements for the deformed-shape layers; "auto"
        draws the largest at 5 % of the model size, per result; None or 0
        leaves the deformed layers out.
    dxfversion : str
        DXF release, R2004 or later (true colour needs it).
    units : str, optional
        Length unit of the drawing ("mm", "m", "ft", ...); default as in
        :func:`drawing_units` (the source drawing's, else the model file's).

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
    The drawing is checked with ezdxf's auditor before it is saved, under a
    temporary name in the target folder that is renamed on success.
    """
    import ezdxf
    from ezdxf.colors import rgb2int
    from ezdxf.enums import TextEntityAlignment

    final = Path(path)
    names = list(results) if cases is None else list(cases)
    for name in names:
        if name not in results:
            raise WriteError(f"{final}: no result named {name!r} (have: {', '.join(results)})")
    if not names:
        raise WriteError(f"{final}: there are no load cases or combinations to draw")
    scales = {name: _resolve_scale(deformed_scale, results, name) for name in names}
    unit_name, per_unit, code = drawing_units(results, units, where=str(final))
    model = results.model
    # Everything drawn is in drawing units from here on.
    nodes = model.nodes / per_unit
    ends = model.members
    lengths = model.lengths / per_unit
    text_height = 0.04 * float(np.median(lengths))
    lo, hi = nodes.min(axis=0), nodes.max(axis=0)
    ext_lo, ext_hi = lo.copy(), hi.copy()

    doc = ezdxf.new(dxfversion, setup=False)
    doc.header["$INSUNITS"] = code
    doc.header["$MEASUREMENT"] = 0 if unit_name in _IMPERIAL else 1
    msp = doc.modelspace()
    colors = {b: _band_color(b) for b in range(-BANDS, BANDS + 1)}
    attribs = {b: {"true_color": rgb2int(c), "color": _nearest_aci(c)} for b, c in colors.items()}

    doc.layers.add("FRAME", color=8)
    for a, b in ends.tolist():
        msp.add_line(nodes[a], nodes[b], dxfattribs={"layer": "FRAME"})
    doc.layers.add("SUPPORTS", color=3)
    for i in supported_nodes(model).tolist():
        msp.add_point(nodes[i], dxfattribs={"layer": "SUPPORTS"})

    tags = layer_names(results, names)
    for step, name in enumerate(names):
        res = results[name]
        tag = tags[name]
        bands, top = force_bands(res.axial_forces)
        layer = doc.layers.add(f"N_{tag}", color=7)
        layer.description = f"axial force bands of {name}, max |N| = {top / 1e3:.3f} kN"
        new_layers = [layer]
        for (a, b), band in zip(ends.tolist(), bands.tolist(), strict=True):
            msp.add_line(nodes[a], nodes[b], dxfattribs={"layer": f"N_{tag}", **attribs[band]})

        key = doc.layers.add(f"KEY_{tag}", color=7)
        key.description = f"force band legend of {name}"
        new_layers.append(key)
        x0 = float(lo[0])
        y0 = float(lo[1]) - 3.0 * text_height
        z0 = float(lo[2])
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
        # The legend's box: strokes, then text of at most ~45 characters.
        ext_lo = np.minimum(ext_lo, (x0, y0 - 1.6 * text_height * len(rows), z0))
        ext_hi = np.maximum(ext_hi, (x0 + 5 * text_height + 45 * 0.8 * text_height, y0, z0))
        for k, (band, text) in enumerate(rows):
            y = y0 - 1.6 * text_height * k
            if k > 0:
                msp.add_line(
                    (x0, y, z0),
                    (x0 + 4 * text_height, y, z0),
                    dxfattribs={"layer": f"KEY_{tag}", **attribs[band]},
                )
            note = msp.add_text(text, height=text_height, dxfattribs={"layer": f"KEY_{tag}"})
            note.set_placement((x0 + 5 * text_height, y, z0), align=TextEntityAlignment.MIDDLE_LEFT)

        if labels:
            lab = doc.layers.add(f"L_{tag}", color=7)
            lab.description = f"axial forces of {name} in kN, tension positive"
            new_layers.append(lab)
            mids = 0.5 * (nodes[ends[:, 0]] + nodes[ends[:, 1]])
            rot = _text_rotation(nodes[ends[:, 1]] - nodes[ends[:, 0]])
            kn = np.round(res.axial_forces / 1e3, 2)
            kn[kn == 0.0] = 0.0  # no "-0.00"
            for mid, r, value, band in zip(
                mids.tolist(), rot.tolist(), kn.tolist(), bands.tolist(), strict=True
            ):
                label = msp.add_text(
                    f"{value:.2f}",
                    height=text_height,
                    rotation=r,
                    dxfattribs={"layer": f"L_{tag}", **attribs[band]},
                )
                label.set_placement(mid, align=TextEntityAlignment.MIDDLE_CENTER)

        scale = scales[name]
        if scale > 0:
            dlay = doc.layers.add(f"D_{tag}", color=6)
            dlay.description = f"deformed shape of {name}, displacements x {scale:.6g}"
            new_layers.append(dlay)
            moved = nodes + scale * res.displacements / per_unit
            ext_lo = np.minimum(ext_lo, moved.min(axis=0))
            ext_hi = np.maximum(ext_hi, moved.max(axis=0))
            # The note above the frame: ~60 characters.
            ext_hi = np.maximum(ext_hi, (x0 + 60 * 0.8 * text_height,
                                         float(hi[1]) + 3.0 * text_height, z0))
            for a, b in ends.tolist():
                msp.add_line(moved[a], moved[b], dxfattribs={"layer": f"D_{tag}"})
            msp.add_text(
                f"{name}: deformed shape, displacements x {format_number(scale, 3)}",
                height=text_height,
                dxfattribs={"layer": f"D_{tag}"},
            ).set_placement(
                (x0, float(hi[1]) + 2.0 * text_height, z0), align=TextEntityAlignment.MIDDLE_LEFT
            )
        if step > 0:
            for lay in new_layers:
                lay.off()

    # ezdxf copies the model space's extents into the header when saving.
    msp.dxf.extmin = tuple(float(v) for v in ext_lo)
    msp.dxf.extmax = tuple(float(v) for v in ext_hi)
    auditor = doc.audit()
    if auditor.has_errors:
        first = auditor.errors[0]
        raise SpaceframeError(f"{final}: the drawing failed the DXF audit: {first.message}")
    final.parent.mkdir(parents=True, exist_ok=True)
    tmp = final.with_name(f".{final.stem}.{os.getpid()}-{uuid.uuid4().hex[:12]}.dxf")
    try:
        doc.saveas(tmp)
        os.replace(tmp, final)
    finally:
        tmp.unlink(missing_ok=True)
    return final
