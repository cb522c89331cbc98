"""Wavefront OBJ, read here.

meshio drops its ``l`` (line) statements and VTK keeps the lines but not their groups.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from spaceframe.errors import ReadError
from spaceframe.io._cells import _Cells
from spaceframe.io._raw import count_ignored

# Statement keywords of the Wavefront OBJ format (Wavefront Technologies,
# "Object Files (.obj)", Advanced Visualizer manual, appendix B1); those not
# read here are counted as ignored.  A line starting with anything else is
# not OBJ at all.
_OBJ_KEYWORDS = frozenset(
    "v vt vn vp l f p g o s mg usemtl mtllib usemap maplib cstype deg bmat step curv "
    "curv2 surf parm trim hole scrv sp end con bevel c_interp d_interp lod shadow_obj "
    "trace_obj ctech stech call csh".split()
)


def _short(text: str, n: int = 40) -> str:
    """``text`` quoted, cut to ``n`` characters (messages stay one short line)."""
    return repr(text if len(text) <= n else text[:n] + "...")


def _obj_index(token: str, n_vertices: int, where: str, line_no: int) -> int:
    head = token.split("/", 1)[0]
    try:
        i = int(head)
    except ValueError:
        raise ReadError(f"{where}: line {line_no}: bad vertex index {_short(token)}") from None
    # OBJ indices start at 1; negative ones count back from the latest vertex.
    j = n_vertices + i if i < 0 else i - 1
    if not 0 <= j < n_vertices:
        raise ReadError(
            f"{where}: line {line_no}: vertex index {i} refers to no vertex "
            f"({n_vertices} defined so far)"
        )
    return j


def _not_obj(where: str, first_foreign: tuple[int, str] | None) -> None:
    """ReadError saying the file is no OBJ file, when a foreign line was seen."""
    if first_foreign is not None:
        line_no, key = first_foreign
        raise ReadError(
            f"{where}: not a Wavefront OBJ file: line {line_no} starts with {_short(key)}"
        )


def _logical_lines(text: str) -> Iterator[tuple[int, list[str], str]]:
    """(line number, tokens, text) of each statement: comments cut, continued lines joined."""
    pending = ""
    for line_no, raw_line in enumerate(text.splitlines(), start=1):
        line = pending + raw_line.split("#", 1)[0]
        if line.endswith("\\"):
            pending = line[:-1] + " "
            continue
        pending = ""
        tok = line.split()
        if tok:
            yield line_no, tok, line


@dataclass
class _ObjStatements:
    """What the statements of an OBJ file said, in file order."""

    where: str
    xyz: list[list[str]] = field(default_factory=list)
    xyz_lines: list[int] = field(default_factory=list)
    polylines: list[list[int]] = field(default_factory=list)
    faces: list[list[int]] = field(default_factory=list)
    line_owner: list[int] = field(default_factory=list)
    face_owner: list[int] = field(default_factory=list)
    owner_groups: list[tuple[str, ...]] = field(default_factory=list)
    current: tuple[str, ...] = ()
    obj_name: tuple[str, ...] = ()
    ignored: dict[str, dict[str, Any]] = field(default_factory=dict)
    first_foreign: tuple[int, str] | None = None

    def add(self, line_no: int, tok: list[str], line: str) -> None:
        """Take in one statement."""
        key = tok[0]
        if key == "v":
            if len(tok) < 4:
                _not_obj(self.where, self.first_foreign)
                raise ReadError(
                    f"{self.where}: line {line_no}: vertex needs x y z, got {_short(line.strip())}"
                )
            self.xyz.append(tok[1:4])
            self.xyz_lines.append(line_no)
        elif key in ("l", "f"):
            self._element(key, tok, line_no)
        elif key == "g":
            self.current = tuple(t for t in tok[1:] if t != "default")
        elif key == "o":
            self.obj_name = tuple(tok[1:2])
        elif key in ("vt", "vn", "vp", "s", "usemtl", "mtllib"):
            return
        elif key in _OBJ_KEYWORDS:
            count_ignored(
                self.ignored, f"OBJ statement {key!r}", " ".join(self.current) or "(no group)"
            )
        else:
            if self.first_foreign is None:
                self.first_foreign = (line_no, key)
            count_ignored(self.ignored, "lines that are no OBJ statement", "(no group)")

    def _element(self, key: str, tok: list[str], line_no: int) -> None:
        """An ``l`` polyline or ``f`` face, owned by the current group and object."""
        try:
            ids = [_obj_index(t, len(self.xyz), self.where, line_no) for t in tok[1:]]
        except ReadError:
            _not_obj(self.where, self.first_foreign)
            raise
        owner = len(self.owner_groups)
        self.owner_groups.append(self.current + self.obj_name)
        if key == "l":
            if len(ids) >= 2:
                self.polylines.append(ids)
                self.line_owner.append(owner)
        elif len(ids) >= 3:
            self.faces.append(ids)
            self.face_owner.append(owner)

    def points(self) -> np.ndarray:
        """(n, 3) vertices; ReadError naming the line of the first bad one."""
        try:
            return np.array(self.xyz, dtype=np.float64).reshape(-1, 3)
        except ValueError:
            for values, line_no in zip(self.xyz, self.xyz_lines, strict=True):
                try:
                    [float(v) for v in values]
                except ValueError:
                    raise ReadError(
                        f"{self.where}: line {line_no}: bad vertex {_short(' '.join(values))}"
                    ) from None
            raise


def _read_obj(path: Path, where: str) -> _Cells:
    """Vertices, ``l`` polylines, ``f`` faces and ``g``/``o`` groups of an OBJ file."""
    try:
        text = path.read_text(encoding="utf-8", errors="replace")
    except OSError as exc:
        raise ReadError(f"{where}: cannot read: {exc}") from exc
    if "\x00" in text[:65536]:
        raise ReadError(f"{where}: binary data, not a Wavefront OBJ (text) file")
    st = _ObjStatements(where)
    for line_no, tok, line in _logical_lines(text):
        st.add(line_no, tok, line)
    points = st.points()
    if st.first_foreign is not None and not (st.polylines or st.faces):
        line_no, key = st.first_foreign
        n_foreign = st.ignored["lines that are no OBJ statement"]["count"]
        raise ReadError(
            f"{where}: not a Wavefront OBJ file: line {line_no} starts with {_short(key)} "
            f"({n_foreign} lines are no OBJ statement, and there are no lines or faces)"
        )
    return _cells(st, points)


def _cells(st: _ObjStatements, points: np.ndarray) -> _Cells:
    """Cells of the statements: one block per polyline or face length, sets by group."""
    cells = _Cells(points)
    cells.ignored = st.ignored
    for kind, items, owners in (
        ("poly_line", st.polylines, st.line_owner),
        ("polygon", st.faces, st.face_owner),
    ):
        by_size: dict[int, list[int]] = {}
        for k, ids in enumerate(items):
            by_size.setdefault(len(ids), []).append(k)
        for size, ks in by_size.items():
            conn = np.array([items[k] for k in ks], dtype=np.int64).reshape(-1, size)
            cells.add(kind, conn, np.asarray([owners[k] for k in ks], dtype=np.int64))
    cells.n_cells = len(st.owner_groups)
    sets: dict[str, list[int]] = {}
    for owner, names in enumerate(st.owner_groups):
        for name in names:
            sets.setdefault(name, []).append(owner)
    cells.sets = {name: np.asarray(ids, dtype=np.int64) for name, ids in sets.items()}
    return cells
