"""Starter projects from invented demo scenarios: a drawing or mesh plus a model file.

Every scenario here is fictional (no real project, place or client):

- ``canopy``: a double-layer grid canopy over a fictional bus interchange,
  drawn as DXF centrelines in millimetres on layers for top chords, bottom
  chords and diagonals (chords drawn as continuous lines through the joints,
  as drafters do), POINT markers at the column heads and roof panels as
  3DFACEs; dead, snow and wind cases with ULS/SLS combinations.
- ``mast``: a lattice telecommunication mast as a Gmsh mesh with physical
  groups for legs, bracing and horizontals; wind on a face as nodal loads,
  self-weight and a temperature case.
- ``dome``: a geodesic dome from a triangulated surface mesh whose edges are
  taken as members; snow per plan area on the triangles.

``write_demo(folder, name)`` writes the files; the scripts under examples/
call it, and ``spaceframe new`` does too.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from pathlib import Path

import numpy as np

from spaceframe.errors import ProjectError

__all__ = ["DEMOS", "canopy_geometry", "dome_geometry", "mast_geometry", "write_demo"]

CAUTION_TOML = (
    "# Demo scenario, invented for illustration. Results must be checked by a qualified\n"
    "# engineer; local codes and licensed practice govern.\n"
)


def _tubes(sizes: dict[str, tuple[float, float]], default: str,
           groups: dict[str, str] | None = None) -> str:
    """Model-file text of circular hollow sections and their assignment, S355 throughout.

    ``sizes``: section name -> (outside diameter, wall thickness) in mm;
    ``groups``: group -> section name (the others get ``default``).
    """
    lines = ["[sections]"]
    lines += [f'{name} = {{ shape = "chs", diameter = {d}, thickness = {t} }}'
              for name, (d, t) in sizes.items()]
    lines += ["", "[assign]", f'default = {{ section = "{default}", material = "S355" }}']
    if groups:
        pairs = ", ".join(f'{g} = {{ section = "{name}" }}' for g, name in groups.items())
        lines.append(f"groups = {{ {pairs} }}")
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------- canopy
#: Canopy layout: bays along x and y, bay size and depth in metres.
CANOPY = {"nx": 8, "ny": 5, "bay": 3.0, "depth": 2.0, "height": 6.0}


def canopy_geometry() -> dict[str, np.ndarray]:
    """Centrelines of the canopy as drawn (metres): continuous chords, diagonals, markers."""
    nx, ny, bay, depth, h = (CANOPY[k] for k in ("nx", "ny", "bay", "depth", "height"))
    nx, ny = int(nx), int(ny)
    zt, zb = h + depth, h
    # Top chords: one continuous line per grid line, through every joint.
    xs = np.arange(nx + 1) * bay
    ys = np.arange(ny + 1) * bay
    top_x = np.array([[[0, y, zt], [nx * bay, y, zt]] for y in ys])
    top_y = np.array([[[x, 0, zt], [x, ny * bay, zt]] for x in xs])
    # Bottom chords: offset by half a bay, one line per grid line as well.
    bxs = (np.arange(nx) + 0.5) * bay
    bys = (np.arange(ny) + 0.5) * bay
    bot_x = np.array([[[bxs[0], y, zb], [bxs[-1], y, zb]] for y in bys])
    bot_y = np.array([[[x, bys[0], zb], [x, bys[-1], zb]] for x in bxs])
    bx, by = np.meshgrid(bxs, bys, indexing="ij")
    b = np.c_[bx.ravel(), by.ravel(), np.full(bx.size, zb)]
    corners = np.array([[-0.5, -0.5], [0.5, -0.5], [0.5, 0.5], [-0.5, 0.5]]) * bay
    diag = np.concatenate(
        [np.stack([b, np.c_[b[:, :2] + c, np.full(len(b), zt)]], axis=1) for c in corners]
    )
    # Column heads under bottom nodes in two rows of three.
    cols_i = [0, nx // 2, nx - 1]
    cols_j = [0, ny - 1]
    heads = np.array([[bxs[i], bys[j], zb] for i in cols_i for j in cols_j])
    gx, gy = np.meshgrid(xs[:-1], ys[:-1], indexing="ij")
    g = np.c_[gx.ravel(), gy.ravel()]
    quad = np.array([[0, 0], [bay, 0], [bay, bay], [0, bay]])
    panels = np.concatenate(
        [np.stack([g + q for q in quad], axis=1), np.full((len(g), 4, 1), zt)], axis=2
    )
    return {
        "TOP_CHORD": np.concatenate([top_x, top_y]),
        "BOTTOM_CHORD": np.concatenate([bot_x, bot_y]),
        "DIAGONALS": diag,
        "COLUMN_HEADS": heads,
        "ROOF_PANELS": panels,
    }


def _write_canopy_dxf(path: Path) -> None:
    import ezdxf

    geo = canopy_geometry()
    doc = ezdxf.new("R2013", setup=False)
    doc.header["$INSUNITS"] = 4  # millimetres, as the fictional drafter drew it
    msp = doc.modelspace()
    mm = 1000.0
    colours = {"TOP_CHORD": 1, "BOTTOM_CHORD": 5, "DIAGONALS": 3, "COLUMN_HEADS": 2,
               "ROOF_PANELS": 8}
    for layer, colour in colours.items():
        doc.layers.add(layer, color=colour)
    for layer in ("TOP_CHORD", "BOTTOM_CHORD", "DIAGONALS"):
        for a, b in geo[layer] * mm:
            msp.add_line(tuple(a), tuple(b), dxfattribs={"layer": layer})
    for p in geo["COLUMN_HEADS"] * mm:
        msp.add_point(tuple(p), dxfattribs={"layer": "COLUMN_HEADS"})
    for quad in geo["ROOF_PANELS"] * mm:
        msp.add_3dface([tuple(v) for v in quad], dxfattribs={"layer": "ROOF_PANELS"})
    doc.saveas(path)


CANOPY_TOML = '''title = "Bus interchange canopy (demo scenario)"
output = "canopy-results"

# Drawn in millimetres ($INSUNITS = 4): the reader converts to metres.
[units]
length = "m"
section = "mm"
force = "kN"
pressure = "kN/m^2"

[geometry]
file = "canopy.dxf"
tolerance = "2 mm"                 # joints closer than this are one joint

''' + _tubes({"chord": (114.3, 6.3), "diagonal": (76.1, 4.0)}, "diagonal",
            {"TOP_CHORD": "chord", "BOTTOM_CHORD": "chord"}) + '''
[selections]
column_heads = { markers = "COLUMN_HEADS" }

[[supports]]
nodes = "column_heads"
restrain = "pinned"

[loads.dead]
self_weight = { factor = 1.15 }    # +15 % for node balls, bolts and sleeves
[[loads.dead.area]]
kind = "surface"                   # roof sheeting and purlins
panels = { group = "ROOF_PANELS" }
value = 0.35

[loads.snow]
[[loads.snow.area]]
kind = "plan"
panels = { group = "ROOF_PANELS" }
value = "0.8 kN/m^2"

[loads.wind_uplift]
[[loads.wind_uplift.area]]
kind = "pressure"                  # panel normals point up: negative = suction lifting the roof
panels = { group = "ROOF_PANELS" }
value = -0.6

[combinations]
ULS_snow = { dead = 1.35, snow = 1.5 }
ULS_uplift = { dead = 1.0, wind_uplift = 1.5 }
SLS_snow = { dead = 1.0, snow = 1.0 }

[envelopes]
ULS = ["ULS_snow", "ULS_uplift"]
'''


# ----------------------------------------------------------------------- mast
#: Mast layout: square plan width, panel height and number of panels, metres.
MAST = {"width": 2.0, "panel": 2.5, "panels": 12}


def mast_geometry() -> dict[str, np.ndarray]:
    """Nodes and member lists of the mast (metres): legs, X-bracing, horizontals."""
    w, ph, n = MAST["width"], MAST["panel"], int(MAST["panels"])
    corners = np.array([[0, 0], [w, 0], [w, w], [0, w]]) - w / 2
    levels = np.arange(n + 1) * ph
    nodes = np.concatenate([np.c_[corners, np.full(4, z)] for z in levels])
    node = np.arange(nodes.shape[0]).reshape(n + 1, 4)
    legs = np.concatenate([np.c_[node[:-1, c], node[1:, c]] for c in range(4)])
    horiz = np.concatenate([np.c_[node[1:, c], node[1:, (c + 1) % 4]] for c in range(4)])
    brace = np.concatenate(
        [np.c_[node[:-1, c], node[1:, (c + 1) % 4]] for c in range(4)]
        + [np.c_[node[:-1, (c + 1) % 4], node[1:, c]] for c in range(4)]
    )
    return {"nodes": nodes, "legs": legs, "bracing": brace, "horizontals": horiz}


def _write_mast_msh(path: Path) -> None:
    import meshio

    geo = mast_geometry()
    names = ["legs", "bracing", "horizontals"]
    lines = np.concatenate([geo[k] for k in names])
    tags = np.concatenate([np.full(len(geo[k]), i + 1, dtype=int) for i, k in enumerate(names)])
    mesh = meshio.Mesh(
        geo["nodes"],
        [("line", lines)],
        cell_data={"gmsh:physical": [tags], "gmsh:geometrical": [tags]},
        field_data={k: np.array([i + 1, 1]) for i, k in enumerate(names)},  # (tag, dim)
    )
    # Gmsh's 2.2 text format: meshio writes physical groups there without the
    # per-node entity tags that its 4.1 writer demands.
    mesh.write(path, file_format="gmsh22", binary=False)


MAST_TOML = '''title = "Hilltop telecommunication mast (demo scenario)"
output = "mast-results"

[units]
length = "m"
section = "mm"
force = "kN"
temperature = "K"

[geometry]
file = "mast.msh"

''' + _tubes({"leg": (139.7, 8.0), "brace": (60.3, 4.0), "horizontal": (48.3, 3.2)},
            "brace", {"legs": "leg", "horizontals": "horizontal"}) + '''
[selections]
base = { plane = "z", at = "min" }
windward_face = { difference = [{ plane = "x", at = "min" }, "base"] }
sunny_side = { box = { min = [-1.5, -1.5, -1], max = [-0.5, 1.5, 100] } }

[[supports]]
nodes = "base"
restrain = "pinned"

[loads.dead]
self_weight = { factor = 1.2 }     # +20 % for bolts, gussets, ladder and feeder cables

[loads.wind_x]
[[loads.wind_x.nodal]]
nodes = "windward_face"            # wind along +x on the face x = min, as nodal loads
force = [1.2, 0, 0]

[loads.sun]
[[loads.sun.temperature]]
members = { intersection = ["sunny_side", { group = "legs" }] }   # the two sunny legs, 25 K warmer
change = 25

[combinations]
ULS_wind = { dead = 1.35, wind_x = 1.5 }
ULS_wind_sun = { dead = 1.35, wind_x = 1.5, sun = 0.9 }
SLS_wind = { dead = 1.0, wind_x = 1.0 }

[envelopes]
ULS = ["ULS_wind", "ULS_wind_sun"]
'''


# ----------------------------------------------------------------------- dome
#: Dome: radius in metres and geodesic frequency (edge subdivisions, a power of 2).
DOME = {"radius": 10.0, "frequency": 4}


def dome_geometry() -> tuple[np.ndarray, np.ndarray]:
    """Nodes (metres) and triangles of a geodesic hemisphere cut at its equator.

    Built from an icosahedron with a vertex at the pole, each triangle split
    into four (midpoints pushed onto the sphere) ``log2(frequency)`` times.
    The icosahedron's edges between its two inner rings have their midpoints
    on the equator, so any even frequency gives a flat base ring.
    """
    r, freq = DOME["radius"], int(DOME["frequency"])
    t = np.arctan(0.5)  # latitude of the icosahedron's two rings
    ring = np.arange(5) * 2 * np.pi / 5
    pts = [[0.0, 0.0, 1.0]]
    pts += [[np.cos(t) * np.cos(a), np.cos(t) * np.sin(a), np.sin(t)] for a in ring]
    pts += [[np.cos(t) * np.cos(a + np.pi / 5), np.cos(t) * np.sin(a + np.pi / 5), -np.sin(t)]
            for a in ring]
    pts += [[0.0, 0.0, -1.0]]
    v = np.array(pts)
    k = np.arange(5)
    faces = np.concatenate([
        np.c_[np.zeros(5, int), 1 + k, 1 + (k + 1) % 5],
        np.c_[1 + k, 6 + k, 1 + (k + 1) % 5],
        np.c_[1 + (k + 1) % 5, 6 + k, 6 + (k + 1) % 5],
        np.c_[6 + k, np.full(5, 11), 6 + (k + 1) % 5],
    ])
    while freq > 1:
        edges = np.sort(np.concatenate([faces[:, [0, 1]], faces[:, [1, 2]], faces[:, [2, 0]]]),
                        axis=1)
        uniq, inv = np.unique(edges, axis=0, return_inverse=True)
        mid = v[uniq].mean(axis=1)
        mid /= np.linalg.norm(mid, axis=1)[:, None]
        m = inv.reshape(3, -1).T + len(v)  # midpoints of edges 01, 12, 20 of each face
        v = np.concatenate([v, mid])
        a, b, c = faces.T
        faces = np.concatenate([
            np.c_[a, m[:, 0], m[:, 2]], np.c_[m[:, 0], b, m[:, 1]],
            np.c_[m[:, 2], m[:, 1], c], np.c_[m[:, 0], m[:, 1], m[:, 2]],
        ])
        freq //= 2
    keep = v[faces].mean(axis=1)[:, 2] > 0
    faces = faces[keep]
    used, faces = np.unique(faces, return_inverse=True)
    faces = faces.reshape(-1, 3)
    nodes = v[used] * r
    nodes[np.abs(nodes[:, 2]) < 1e-9 * r, 2] = 0.0  # the equator exactly at z = 0
    # Orient every triangle with its normal pointing outwards (away from the centre).
    n = np.cross(nodes[faces[:, 1]] - nodes[faces[:, 0]], nodes[faces[:, 2]] - nodes[faces[:, 0]])
    inward = np.einsum("ij,ij->i", n, nodes[faces].mean(axis=1)) < 0
    faces[inward] = faces[inward][:, [0, 2, 1]]
    return nodes, faces


def _write_dome_mesh(path: Path) -> None:
    import meshio

    nodes, faces = dome_geometry()
    # Binary (zlib-compressed) VTU: meshio prints a warning to the terminal for
    # text VTU ("only meant for debugging"), and binary keeps every digit.
    meshio.Mesh(nodes, [("triangle", faces)]).write(path, file_format="vtu", binary=True)


DOME_TOML = '''title = "Community garden geodesic dome (demo scenario)"
output = "dome-results"

[units]
length = "m"
section = "mm"
pressure = "kN/m^2"

[geometry]
file = "dome.vtu"
options = { edges_as_members = true }   # every triangle edge is a strut

''' + _tubes({"strut": (48.3, 3.2)}, "strut") + '''
[selections]
base_ring = { plane = "z", at = "min" }

[[supports]]
nodes = "base_ring"
restrain = "pinned"

[loads.dead]
self_weight = { factor = 1.1 }

[loads.snow]
[[loads.snow.area]]
kind = "plan"
panels = "all"
value = 0.6

[combinations]
ULS = { dead = 1.35, snow = 1.5 }
SLS = { dead = 1.0, snow = 1.0 }
'''

#: name -> (drawing file name, writer, model file name, model file text)
DEMOS: dict[str, tuple[str, Callable[[Path], None], str, str]] = {
    "canopy": ("canopy.dxf", _write_canopy_dxf, "canopy.toml", CANOPY_TOML),
    "mast": ("mast.msh", _write_mast_msh, "mast.toml", MAST_TOML),
    "dome": ("dome.vtu", _write_dome_mesh, "dome.toml", DOME_TOML),
}


def write_demo(folder: str | os.PathLike[str], name: str = "canopy", *,
               force: bool = False) -> list[Path]:
    """Write the demo's drawing and model file into ``folder``.

    Each file is written under a temporary name and renamed
    (:func:`spaceframe.files.atomic_write`), so a failure leaves nothing
    half-written.

    Raises
    ------
    ProjectError
        On an unknown demo name, or a target file that exists (without ``force``).
    """
    if name not in DEMOS:
        raise ProjectError(f"unknown demo {name!r}: choose one of {', '.join(DEMOS)}")
    drawing, writer, toml_name, text = DEMOS[name]
    out = Path(folder)
    out.mkdir(parents=True, exist_ok=True)
    targets = [out / drawing, out / toml_name]
    existing = [str(p) for p in targets if p.exists()]
    if existing and not force:
        raise ProjectError(f"{', '.join(existing)} exists already (use --force to overwrite)")
    from spaceframe.files import atomic_write

    atomic_write(targets[0], writer)
    atomic_write(targets[1], lambda tmp: _write_text(tmp, CAUTION_TOML + text))
    return targets


def _write_text(path: Path, text: str) -> None:
    path.write_text(text, encoding="utf-8")
