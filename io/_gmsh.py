"""Gmsh MSH 4.1 and 2.x files (ASCII and binary), read with one logic for groups.

Hand-written because meshio 5.3 fails on 4.1 files in which some entities
have no physical group, drops numeric physical groups of binary 4.1 files as
soon as one group has a name, and fails on partitioned files.  The layout
follows the Gmsh reference manual, section "MSH file format" (format 4.1)
and "MSH file format version 2 (Legacy)".

Both encodings of 4.1 are parsed into the same intermediate record (physical
names, entity -> physical tags, node tags and coordinates, element blocks);
:func:`assemble` then turns that record into cells and groups, so a mesh has
the same groups whether it was saved as text or binary.  2.x files, whose
elements carry their physical tag themselves, are read into meshio's terms
(:class:`Msh2`) and share the meshio adapter's rules in ``io/mesh.py``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from spaceframe.errors import ReadError

__all__ = ["GMSH_TYPES", "GmshMesh", "Msh2", "gmsh_dim", "read_gmsh2", "read_gmsh41"]


def _tri(order: int, complete: bool) -> tuple[str, int]:
    n = (order + 1) * (order + 2) // 2 if complete else 3 * order
    if order == 1:
        return "triangle", n
    return (f"triangle{n}" if complete or order < 3 else f"triangle{n}i"), n


def _quad(order: int, complete: bool) -> tuple[str, int]:
    n = (order + 1) ** 2 if complete else 4 * order
    if order == 1:
        return "quad", n
    return (f"quad{n}" if complete or order < 3 else f"quad{n}i"), n


# Gmsh element type -> (name, nodes per element).  Types and node counts:
# Gmsh reference manual, "MSH file format" (element types) and the
# MSH_* constants of Gmsh's GmshDefines.h; high-order names give the node
# count ("triangle10"), "i" marks incomplete (serendipity) elements whose node
# count equals that of a complete one of another order.
GMSH_TYPES: dict[int, tuple[str, int]] = {
    15: ("vertex", 1),
    1: ("line", 2),
    8: ("line3", 3),
    26: ("line4", 4),
    27: ("line5", 5),
    28: ("line6", 6),
    62: ("line7", 7),
    63: ("line8", 8),
    64: ("line9", 9),
    65: ("line10", 10),
    66: ("line11", 11),
    2: _tri(1, True),
    9: _tri(2, True),
    20: _tri(3, False),
    21: _tri(3, True),
    22: _tri(4, False),
    23: _tri(4, True),
    24: _tri(5, False),
    25: _tri(5, True),
    42: _tri(6, True),
    43: _tri(7, True),
    44: _tri(8, True),
    45: _tri(9, True),
    46: _tri(10, True),
    52: _tri(6, False),
    53: _tri(7, False),
    54: _tri(8, False),
    55: _tri(9, False),
    56: _tri(10, False),
    3: _quad(1, True),
    16: _quad(2, False),
    10: _quad(2, True),
    36: _quad(3, True),
    37: _quad(4, True),
    38: _quad(5, True),
    39: _quad(3, False),
    40: _quad(4, False),
    41: _quad(5, False),
    47: _quad(6, True),
    48: _quad(7, True),
    49: _quad(8, True),
    50: _quad(9, True),
    51: _quad(10, True),
    57: _quad(6, False),
    58: _quad(7, False),
    59: _quad(8, False),
    60: _quad(9, False),
    61: _quad(10, False),
    4: ("tetra", 4),
    5: ("hexahedron", 8),
    6: ("wedge", 6),
    7: ("pyramid", 5),
    11: ("tetra10", 10),
    12: ("hexahedron27", 27),
    13: ("wedge18", 18),
    14: ("pyramid14", 14),
    17: ("hexahedron20", 20),
    18: ("wedge15", 15),
    19: ("pyramid13", 13),
    29: ("tetra20", 20),
    30: ("tetra35", 35),
    31: ("tetra56", 56),
    92: ("hexahedron64", 64),
    93: ("hexahedron125", 125),
}

#: Orders of the high-order surface names above: name -> (corners, order).
HIGH_ORDER_FACES: dict[str, tuple[int, int]] = {}
for _order in range(2, 11):
    for _complete in (True, False):
        HIGH_ORDER_FACES[_tri(_order, _complete)[0]] = (3, _order)
        HIGH_ORDER_FACES[_quad(_order, _complete)[0]] = (4, _order)


@dataclass
class GmshMesh:
    """Cells of a Gmsh file: points, blocks of one kind, groups of cell ids.

    Cell ids run over the blocks in order (block 0 first).
    """

    points: np.ndarray
    blocks: list[tuple[str, np.ndarray]] = field(default_factory=list)
    sets: dict[str, np.ndarray] = field(default_factory=dict)
    unknown: dict[int, tuple[int, list[str]]] = field(default_factory=dict)


@dataclass
class _Msh41:
    """One 4.1 file, as written, before interpretation."""

    names: dict[tuple[int, int], str] = field(default_factory=dict)
    physical: dict[tuple[int, int], list[int]] = field(default_factory=dict)
    node_tags: list[np.ndarray] = field(default_factory=list)
    coords: list[np.ndarray] = field(default_factory=list)
    # (entity dim, entity tag, element type, rows of [element tag, node tags...])
    elements: list[tuple[int, int, int, np.ndarray]] = field(default_factory=list)
    n_nodes: int = 0
    has_nodes: bool = False
    has_elements: bool = False


def _names_from_lines(lines: list[str], out: dict[tuple[int, int], str]) -> None:
    """$PhysicalNames body (text in both encodings): dim tag "name"."""
    for line in lines[1:]:
        parts = line.split(maxsplit=2)
        if len(parts) == 3:
            out[(int(parts[0]), int(parts[1]))] = parts[2].strip().strip('"')


# ---------------------------------------------------------------------------
# 4.1 ASCII
# ---------------------------------------------------------------------------


def _sections(lines: list[str], where: str) -> dict[str, list[tuple[int, int]]]:
    """Section name -> [(first body line, end line)], in file order."""
    out: dict[str, list[tuple[int, int]]] = {}
    i, n = 0, len(lines)
    while i < n:
        line = lines[i].strip()
        if line.startswith("$") and not line.startswith("$End"):
            name = line[1:]
            j = i + 1
            while j < n and lines[j].strip() != f"$End{name}":
                j += 1
            if j == n:
                raise ReadError(f"{where}: section ${name} (line {i + 1}) has no $End{name}")
            out.setdefault(name, []).append((i + 1, j))
            i = j + 1
        else:
            i += 1
    return out


def _numbers(lines: list[str], where: str, what: str, line_no: int) -> np.ndarray:
    try:
        return np.array(" ".join(lines).split(), dtype=np.float64)
    except ValueError:
        raise ReadError(f"{where}: bad number in {what} near line {line_no}") from None


def _as_int(values: np.ndarray, where: str, what: str, line_no: int) -> np.ndarray:
    ints = values.astype(np.int64)
    if not np.array_equal(ints, values):
        raise ReadError(f"{where}: a whole number was expected in {what} near line {line_no}")
    return ints


def _entities_ascii(
    lines: list[str], a: int, b: int, partitioned: bool, physical: dict[tuple[int, int], list[int]]
) -> None:
    tok = [line.split() for line in lines[a:b]]
    k = 0
    if partitioned:
        k = 1  # numPartitions
        n_ghost = int(tok[k][0])
        k += 1 + n_ghost  # one "tag partition" line per ghost entity
    counts = [int(v) for v in tok[k][:4]]
    k += 1
    for dim, count in enumerate(counts):
        for _ in range(count):
            t = tok[k]
            at = 0
            if partitioned:  # tag parentDim parentTag numPartitions partitions...
                at = 4 + int(t[3])
            else:
                at = 1
            at += 3 if dim == 0 else 6  # a point's X Y Z or a bounding box
            n_phys = int(t[at])
            physical[(dim, int(t[0]))] = [int(v) for v in t[at + 1 : at + 1 + n_phys]]
            k += 1


def _int_lines(lines: list[str], start: int, count: int, where: str, section: str) -> np.ndarray:
    """Integers of ``count`` lines from index ``start`` (messages give line ``start + 1``)."""
    rows = lines[start : start + count]
    return _as_int(_numbers(rows, where, section, start + 1), where, section, start + 1)


def _parse41_ascii(lines: list[str], where: str) -> _Msh41:
    sec = _sections(lines, where)
    out = _Msh41()
    for a, b in sec.get("PhysicalNames", []):
        _names_from_lines(lines[a:b], out.names)
    for a, b in sec.get("Entities", []):
        _entities_ascii(lines, a, b, False, out.physical)
    for a, b in sec.get("PartitionedEntities", []):
        _entities_ascii(lines, a, b, True, out.physical)
    for a, _b in sec.get("Nodes", []):
        out.has_nodes = True
        n_blocks, n_nodes = (int(v) for v in lines[a].split()[:2])
        out.n_nodes += n_nodes
        k = a + 1
        for _ in range(n_blocks):  # one pass per entity block, not per node
            dim, _tag, parametric, count = (int(v) for v in lines[k].split()[:4])
            tags = _int_lines(lines, k + 1, count, where, "$Nodes")
            width = 3 + (min(dim, 3) if parametric else 0)
            xyz = _numbers(lines[k + 1 + count : k + 1 + 2 * count], where, "$Nodes", k + 2)
            if tags.size != count or xyz.size != count * width:
                raise ReadError(
                    f"{where}: node block at line {k + 1} announces {count} nodes "
                    f"but holds {tags.size} tags and {xyz.size} coordinates"
                )
            out.node_tags.append(tags)
            out.coords.append(xyz.reshape(count, width)[:, :3])
            k += 1 + 2 * count
    for a, _b in sec.get("Elements", []):
        out.has_elements = True
        n_blocks = int(lines[a].split()[0])
        k = a + 1
        for _ in range(n_blocks):  # one pass per entity block, not per element
            dim, tag, etype, count = (int(v) for v in lines[k].split()[:4])
            data = _int_lines(lines, k + 1, count, where, "$Elements")
            known = GMSH_TYPES.get(etype)
            width = 1 + known[1] if known else (data.size // count if count else 1)
            if data.size != count * width:
                raise ReadError(
                    f"{where}: element block at line {k + 1} (type {etype}) announces "
                    f"{count} elements of {width - 1} nodes but holds {data.size} numbers"
                )
            out.elements.append((dim, tag, etype, data.reshape(count, width)))
            k += 1 + count
    return out


# ---------------------------------------------------------------------------
# 4.1 binary
# ---------------------------------------------------------------------------


class _Binary:
    """Cursor over a binary MSH file (little- or big-endian, size_t of 4 or 8 bytes)."""

    def __init__(self, data: bytes, where: str) -> None:
        self.data, self.pos, self.where = data, 0, where
        self.order = "<"
        self.size_t = "u8"

    def line(self) -> str:
        end = self.data.find(b"\n", self.pos)
        if end < 0:
            end = len(self.data)
        text = self.data[self.pos : end].decode("latin-1").strip()
        self.pos = end + 1
        return text

    def array(self, kind: str, n: int) -> np.ndarray:
        dtype = np.dtype(self.order + kind)
        stop = self.pos + dtype.itemsize * n
        if n < 0 or stop > len(self.data):
            raise ReadError(f"{self.where}: binary Gmsh file ends inside a section (cut short?)")
        out = np.frombuffer(self.data, dtype=dtype, count=n, offset=self.pos)
        self.pos = stop
        return out.astype(np.int64 if kind[0] in "iu" else np.float64)

    def ints(self, n: int) -> np.ndarray:
        return self.array("i4", n)

    def sizes(self, n: int) -> np.ndarray:
        return self.array(self.size_t, n)

    def doubles(self, n: int) -> np.ndarray:
        return self.array("f8", n)

    def one(self, kind: str) -> int:
        return int(self.array(kind, 1)[0])

    def end(self, name: str) -> None:
        """Skip to the line after ``$End<name>``."""
        mark = f"$End{name}".encode()
        at = self.data.find(mark, self.pos)
        if at < 0:
            raise ReadError(f"{self.where}: section ${name} has no $End{name}")
        self.pos = at
        self.line()


def _entities_binary(cur: _Binary, partitioned: bool, physical: dict) -> None:
    if partitioned:
        cur.sizes(1)  # numPartitions
        n_ghost = int(cur.sizes(1)[0])
        cur.ints(2 * n_ghost)
    counts = cur.sizes(4).tolist()
    for dim, count in enumerate(counts):
        for _ in range(int(count)):  # one pass per model entity
            tag = cur.one("i4")
            if partitioned:
                cur.ints(2)  # parent dim and tag
                cur.ints(int(cur.sizes(1)[0]))
            cur.doubles(3 if dim == 0 else 6)
            phys = cur.ints(int(cur.sizes(1)[0]))
            physical[(dim, tag)] = [int(v) for v in phys]
            if dim > 0:
                cur.ints(int(cur.sizes(1)[0]))  # bounding entities


def _parse41_binary(data: bytes, where: str) -> _Msh41:
    cur = _Binary(data, where)
    out = _Msh41()
    while cur.pos < len(data):
        head = cur.line()
        if not head.startswith("$"):
            continue
        name = head[1:]
        if name == "MeshFormat":
            parts = cur.line().split()
            size = int(parts[2]) if len(parts) > 2 else 8
            cur.size_t = {4: "u4", 8: "u8"}.get(size, "")
            if not cur.size_t:
                raise ReadError(f"{where}: Gmsh data size {size} is not 4 or 8")
            one = data[cur.pos : cur.pos + 4]
            if one == (1).to_bytes(4, "big"):
                cur.order = ">"
            elif one != (1).to_bytes(4, "little"):
                raise ReadError(f"{where}: binary Gmsh file lacks the byte-order marker")
            cur.pos += 4
            cur.end(name)
        elif name == "PhysicalNames":
            start = cur.pos
            cur.end(name)
            body = data[start : cur.pos].decode("utf-8", errors="replace").splitlines()
            _names_from_lines([ln for ln in body if not ln.startswith("$End")], out.names)
        elif name in ("Entities", "PartitionedEntities"):
            _entities_binary(cur, name == "PartitionedEntities", out.physical)
            cur.end(name)
        elif name == "Nodes":
            out.has_nodes = True
            n_blocks, n_nodes, _lo, _hi = (int(v) for v in cur.sizes(4))
            out.n_nodes += n_nodes
            for _ in range(n_blocks):  # one pass per entity block, not per node
                dim, _tag, parametric = (int(v) for v in cur.ints(3))
                count = int(cur.sizes(1)[0])
                out.node_tags.append(cur.sizes(count))
                width = 3 + (min(dim, 3) if parametric else 0)
                out.coords.append(cur.doubles(count * width).reshape(count, width)[:, :3])
            cur.end(name)
        elif name == "Elements":
            out.has_elements = True
            n_blocks = int(cur.sizes(4)[0])
            for _ in range(n_blocks):  # one pass per entity block, not per element
                dim, tag, etype = (int(v) for v in cur.ints(3))
                count = int(cur.sizes(1)[0])
                known = GMSH_TYPES.get(etype)
                if known is None:
                    raise ReadError(
                        f"{where}: Gmsh element type {etype} (entity {dim} {tag}) is not known "
                        "here and a binary file cannot be read past it; save as ASCII"
                    )
                rows = cur.sizes(count * (1 + known[1])).reshape(count, 1 + known[1])
                out.elements.append((dim, tag, etype, rows))
            cur.end(name)
        elif not name.startswith("End"):
            cur.end(name)
    return out


# ---------------------------------------------------------------------------
# Interpretation (shared by both encodings)
# ---------------------------------------------------------------------------


def _tag_table(tags: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Sorted node tags and their positions in file order, for :func:`_find_tags`.

    Sorting, not a table as long as the largest tag: tags may be sparse (the
    format allows it) or, in a damaged file, astronomically large.
    """
    order = np.argsort(tags, kind="stable")
    return tags[order], order.astype(np.int64)


def _find_tags(table: tuple[np.ndarray, np.ndarray], query: np.ndarray) -> np.ndarray:
    """Point index of each node tag in ``query``; -1 where the tag is not in $Nodes."""
    ordered, order = table
    out = np.full(query.shape, -1, dtype=np.int64)
    if ordered.size == 0:
        return out
    pos = np.minimum(np.searchsorted(ordered, query), ordered.size - 1)
    hit = ordered[pos] == query
    out[hit] = order[pos[hit]]
    return out


def _assemble(msh: _Msh41, where: str) -> GmshMesh:
    if not msh.has_nodes or not msh.has_elements:
        missing = "$Nodes" if not msh.has_nodes else "$Elements"
        raise ReadError(
            f"{where}: Gmsh file has no {missing} section (no mesh saved: mesh the "
            "model, or give the curves a physical group, before saving)"
        )
    tags = np.concatenate(msh.node_tags) if msh.node_tags else np.zeros(0, dtype=np.int64)
    points = np.concatenate(msh.coords) if msh.coords else np.zeros((0, 3))
    if tags.size != msh.n_nodes:
        raise ReadError(f"{where}: $Nodes announces {msh.n_nodes} nodes but holds {tags.size}")
    if tags.size and tags.min() < 0:
        raise ReadError(f"{where}: negative node tag {int(tags.min())} in $Nodes")
    lookup = _tag_table(tags)

    mesh = GmshMesh(points)
    sets: dict[str, list[np.ndarray]] = {}
    n_cells = 0
    for dim, tag, etype, rows in msh.elements:  # one pass per entity block
        node_tags = rows[:, 1:]
        mapped = _find_tags(lookup, node_tags)
        if np.any(mapped < 0):
            bad = node_tags[mapped < 0]
            raise ReadError(
                f"{where}: element block of entity ({dim}, {tag}) refers to node tag "
                f"{int(bad[0])}, which is not in $Nodes"
            )
        groups = [
            msh.names.get((dim, p), f"physical-{dim}-{p}") for p in msh.physical.get((dim, tag), [])
        ]
        known = GMSH_TYPES.get(etype)
        kind = known[0] if known else f"Gmsh element type {etype}"
        ids = np.arange(n_cells, n_cells + rows.shape[0], dtype=np.int64)
        n_cells += rows.shape[0]
        mesh.blocks.append((kind, mapped))
        for g in groups:
            sets.setdefault(g, []).append(ids)
    mesh.sets = {name: np.concatenate(parts) for name, parts in sets.items()}
    return mesh


def read_gmsh41(path: Path, where: str, binary: bool) -> GmshMesh:
    """Read a Gmsh 4.1 file, ASCII or binary, into cells and groups.

    Raises
    ------
    ReadError
        Unreadable or malformed file, naming the section (and line, in ASCII).
    """
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ReadError(f"{where}: cannot read: {exc}") from exc
    try:
        if binary:
            msh = _parse41_binary(data, where)
        else:
            text = data.decode("utf-8", errors="replace")
            msh = _parse41_ascii(text.splitlines(), where)
    except (ValueError, IndexError, TypeError) as exc:
        # Counts that do not match what follows (a cut or edited file).
        kind = "binary" if binary else "ASCII"
        raise ReadError(
            f"{where}: malformed Gmsh 4.1 {kind} file ({type(exc).__name__}: {str(exc)[:120]})"
        ) from None
    return _assemble(msh, where)


def gmsh_dim(kind: str) -> int:
    """Dimension of a cell name: 0 vertex, 1 line, 2 surface, 3 volume."""
    if kind == "vertex":
        return 0
    if kind.startswith("line"):
        return 1
    if kind.startswith(("triangle", "quad", "polygon")):
        return 2
    return 3


# ---------------------------------------------------------------------------
# 2.x (ASCII and binary)
# ---------------------------------------------------------------------------


@dataclass
class _Block:
    type: str
    data: np.ndarray


@dataclass
class Msh2:
    """A 2.x file in meshio's terms.

    Cells, "gmsh:physical" and "gmsh:geometrical" cell data, field_data
    name -> [tag, dim], so that one adapter gives groups for 2.x files read
    here or by meshio.
    """

    points: np.ndarray
    cells: list[_Block] = field(default_factory=list)
    cell_data: dict[str, list[np.ndarray]] = field(default_factory=dict)
    field_data: dict[str, np.ndarray] = field(default_factory=dict)
    point_sets: dict[str, np.ndarray] = field(default_factory=dict)


def _section_bytes(data: bytes, name: str, where: str) -> tuple[int, int] | None:
    """(start of body, start of $End line) of the first section ``name``."""
    head = data.find(f"${name}\n".encode())
    if head < 0:
        head = data.find(f"${name}\r\n".encode())
        if head < 0:
            return None
    start = data.index(b"\n", head) + 1
    end = data.find(f"$End{name}".encode(), start)
    if end < 0:
        raise ReadError(f"{where}: section ${name} has no $End{name}")
    return start, end


def _runs(toks: np.ndarray, count: int, where: str) -> list[np.ndarray]:
    """Rows "number type ntags tags... nodes..." of 2.x text elements.

    In runs of one type and tag count (one pass per run, not per element).
    """
    out, s, done = [], 0, 0
    while done < count:
        if s + 3 > toks.size:
            raise ReadError(
                f"{where}: $Elements holds fewer than the {count} elements it announces"
            )
        etype, ntags = int(toks[s + 1]), int(toks[s + 2])
        known = GMSH_TYPES.get(etype)
        if known is None:
            raise ReadError(f"{where}: Gmsh element type {etype} in $Elements is not known here")
        width = 3 + ntags + known[1]
        n_max = min(count - done, (toks.size - s) // width)
        starts = s + width * np.arange(n_max)
        same = (toks[starts + 1] == etype) & (toks[starts + 2] == ntags)
        n = int(np.argmin(same)) if not same.all() else n_max
        if n == 0:
            raise ReadError(
                f"{where}: $Elements holds fewer than the {count} elements it announces"
            )
        out.append(toks[s : s + n * width].reshape(n, width))
        s += n * width
        done += n
    return out


def read_gmsh2(path: Path, where: str, binary: bool) -> Msh2:
    """Read a Gmsh 2.x file (ASCII or binary) into cells with physical and elementary tags.

    The layout is that of the Gmsh reference manual, "MSH file format version 2".

    Raises
    ------
    ReadError
        Missing sections, counts that do not match, unknown element types.
    """
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ReadError(f"{where}: cannot read: {exc}") from exc
    nodes_at = _section_bytes(data, "Nodes", where)
    elements_at = _section_bytes(data, "Elements", where)
    if nodes_at is None or elements_at is None:
        missing = "$Nodes" if nodes_at is None else "$Elements"
        raise ReadError(f"{where}: Gmsh file has no {missing} section (no mesh saved)")
    out = Msh2(np.zeros((0, 3)))
    names_at = _section_bytes(data, "PhysicalNames", where)
    if names_at is not None:
        names: dict[tuple[int, int], str] = {}
        text = data[names_at[0] : names_at[1]].decode("utf-8", errors="replace")
        _names_from_lines(text.splitlines(), names)
        out.field_data = {n: np.array([t, d]) for (d, t), n in names.items()}
    order = "<"
    if binary:
        fmt_at = _section_bytes(data, "MeshFormat", where)
        if fmt_at is not None:
            one = data[data.index(b"\n", fmt_at[0]) + 1 :][:4]
            order = ">" if one == (1).to_bytes(4, "big") else "<"
    try:
        tags, xyz = _msh2_nodes(data, nodes_at, binary, order, where)
        rows = _msh2_elements(data, elements_at, binary, order, where)
    except (ValueError, IndexError) as exc:
        raise ReadError(
            f"{where}: malformed Gmsh 2 file ({type(exc).__name__}: {str(exc)[:120]})"
        ) from None
    if tags.size and tags.min() < 0:
        raise ReadError(f"{where}: negative node number {int(tags.min())} in $Nodes")
    lookup = _tag_table(tags)
    out.points = xyz
    physical, elementary = [], []
    for r in rows:  # one pass per run of one element type
        etype, ntags = int(r[0, 1]), int(r[0, 2])
        node_nums = r[:, 3 + ntags :].astype(np.int64)
        mapped = _find_tags(lookup, node_nums)
        if np.any(mapped < 0):
            bad = node_nums[mapped < 0]
            raise ReadError(
                f"{where}: an element refers to node {int(bad[0])}, which is not in $Nodes"
            )
        out.cells.append(_Block(GMSH_TYPES[etype][0], mapped))
        zero = np.zeros(r.shape[0], dtype=np.int64)
        physical.append(r[:, 3].astype(np.int64) if ntags >= 1 else zero)
        elementary.append(r[:, 4].astype(np.int64) if ntags >= 2 else zero)
    out.cell_data = {"gmsh:physical": physical, "gmsh:geometrical": elementary}
    return out


def _msh2_nodes(
    data: bytes, at: tuple[int, int], binary: bool, order: str, where: str
) -> tuple[np.ndarray, np.ndarray]:
    """Node numbers and coordinates of the $Nodes section of a 2.x file."""
    a, b = at
    nl = data.index(b"\n", a)
    n_nodes = int(data[a:nl])
    if binary:
        rec = np.dtype([("tag", order + "i4"), ("xyz", order + "f8", 3)])
        if nl + 1 + rec.itemsize * n_nodes > len(data):
            raise ReadError(f"{where}: binary Gmsh file ends inside $Nodes (cut short?)")
        arr = np.frombuffer(data, dtype=rec, count=n_nodes, offset=nl + 1)
        return arr["tag"].astype(np.int64), arr["xyz"].astype(np.float64)
    vals = np.array(data[nl + 1 : b].split(), dtype=np.float64)
    if vals.size != 4 * n_nodes:
        raise ReadError(f"{where}: $Nodes announces {n_nodes} nodes but holds another count")
    vals = vals.reshape(n_nodes, 4)
    return vals[:, 0].astype(np.int64), vals[:, 1:]


def _msh2_elements(
    data: bytes, at: tuple[int, int], binary: bool, order: str, where: str
) -> list[np.ndarray]:
    """Rows "number type ntags tags... nodes..." of the $Elements section of a 2.x file."""
    a, b = at
    nl = data.index(b"\n", a)
    n_el = int(data[a:nl])
    if not binary:
        return _runs(np.array(data[nl + 1 : b].split(), dtype=np.int64), n_el, where)
    rows, pos, done = [], nl + 1, 0
    while done < n_el:  # one pass per header (block of one type), not per element
        etype, n, ntags = np.frombuffer(data, order + "i4", 3, pos).tolist()
        known = GMSH_TYPES.get(etype)
        if known is None or n <= 0:
            raise ReadError(f"{where}: bad element block header (type {etype}, {n} elements)")
        width = 1 + ntags + known[1]
        block = np.frombuffer(data, order + "i4", n * width, pos + 12).reshape(n, width)
        # Same layout as text rows: number, type, ntags, tags, nodes.
        rows.append(np.column_stack([block[:, :1], np.full((n, 2), (etype, ntags)), block[:, 1:]]))
        pos += 12 + 4 * n * width
        done += n
    return rows
