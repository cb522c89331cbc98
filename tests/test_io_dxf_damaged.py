"""DXF drawings as 2D exporters and damaged files leave them: nothing lost without a warning.

Every drawing is built here with ezdxf and, where ezdxf would refuse to
write the damage, edited as text afterwards.
"""

from __future__ import annotations

import json
import random
import re
import warnings
from pathlib import Path
from typing import Any

import pytest
from _frame_keys import member_keys

import spaceframe as sf
from spaceframe.cli import main
from spaceframe.errors import SpaceframeError
from spaceframe.io import dxf as sfdxf

ezdxf = pytest.importorskip("ezdxf")

pytestmark = pytest.mark.filterwarnings(
    "ignore:healed frame is in:spaceframe.errors.SpaceframeWarning"
)


def _caught(fn: Any, *args: Any, **kwargs: Any) -> tuple[Any, list[str]]:
    """Call fn, returning its result and the texts of the SpaceframeWarnings it raised."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = fn(*args, **kwargs)
    texts = [str(w.message) for w in caught if issubclass(w.category, sf.SpaceframeWarning)]
    return result, texts


def _edit(path: Path, pattern: str, replacement: str, count: int = 1) -> None:
    """Replace ``pattern`` (a regex over the DXF text) ``count`` times; fail if it is absent."""
    text = path.read_text()
    new, n = re.subn(pattern, replacement, text, count=count)
    assert n == count, f"{pattern!r} found {n} times"
    path.write_text(new)


def _zscale_zero_drawing(path: Path, inner_end: tuple[float, float, float]) -> Path:
    """A block of 3 lines holding a nested block of 1 line, inserted with z-scale 0.

    ezdxf refuses to write a z-scale of 0, so 7.0 is written and the
    group-code-43 value replaced in the text.  One loose line besides.
    """
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 6
    inner = doc.blocks.new("INNER")
    inner.add_line((0, 0, 0), inner_end)
    outer = doc.blocks.new("OUTER")
    outer.add_line((0, 0, 0), (1, 0, 0))
    outer.add_line((1, 0, 0), (1, 1, 0))
    outer.add_line((1, 1, 0), (0, 0, 0))
    outer.add_blockref("INNER", (0, 0, 0))
    msp = doc.modelspace()
    msp.add_blockref("OUTER", (10, 20, 3), dxfattribs={"zscale": 7.0, "layer": "BAY"})
    msp.add_line((5, 0, 0), (6, 0, 0), dxfattribs={"layer": "BAY"})
    doc.saveas(path)
    _edit(path, r"\n 43\n7\.0\n", "\n 43\n0.0\n")
    return path


# ---------------------------------------------------------------------------
# Block references with z-scale 0 (issue 8)
# ---------------------------------------------------------------------------


def test_zscale_zero_flat_block_with_nested_block_keeps_all_members(tmp_path: Path) -> None:
    path = _zscale_zero_drawing(tmp_path / "z0.dxf", (0, 1, 0))
    model, texts = _caught(sfdxf.read, path)
    # 3 lines of the block + 1 of the nested block + 1 loose line, as drawn.
    assert model.n_members == 5
    assert member_keys(model) == {
        frozenset({(10.0, 20.0, 3.0), (11.0, 20.0, 3.0)}),
        frozenset({(11.0, 20.0, 3.0), (11.0, 21.0, 3.0)}),
        frozenset({(11.0, 21.0, 3.0), (10.0, 20.0, 3.0)}),
        frozenset({(10.0, 20.0, 3.0), (10.0, 21.0, 3.0)}),
        frozenset({(5.0, 0.0, 0.0), (6.0, 0.0, 0.0)}),
    }
    assert model.meta["dxf:zscale0"] == {"OUTER": 1}
    note = [t for t in texts if "z-scale 0" in t]
    assert len(note) == 1 and "block 'OUTER' x1" in note[0] and "read with z-scale 1" in note[0]
    assert model.meta["io:ignored"] == {}


def test_zscale_zero_block_with_depth_is_skipped_and_named(tmp_path: Path) -> None:
    # The nested line is vertical: z-scale 0 would squash it, so the reference is
    # not guessed at but skipped, counted and named; the loose line is still read.
    path = _zscale_zero_drawing(tmp_path / "z0_3d.dxf", (0, 0, 1))
    model, texts = _caught(sfdxf.read, path)
    assert model.n_members == 1
    kind = "INSERT of block 'OUTER' with z-scale 0 and depth"
    assert model.meta["io:ignored"] == {kind: {"count": 1, "layers": {"BAY": 1}}}
    assert any(t.endswith(f"1 entity skipped (damaged or not expandable): {kind} x1 on 'BAY'")
               for t in texts), texts
    assert "dxf:zscale0" not in model.meta


def test_failed_block_expansion_is_counted_warned_and_rolled_back(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 6
    grid = doc.blocks.new("GRID")
    grid.add_line((0, 0, 0), (1, 0, 0))
    msp = doc.modelspace()
    # A 2 x 2 MINSERT grid whose third cell fails to expand.
    msp.add_blockref("GRID", (0, 0, 0), dxfattribs={"layer": "G"}).grid(
        size=(2, 2), spacing=(5, 5)
    )
    msp.add_line((0, 0, 0), (0, 0, 1), dxfattribs={"layer": "POST"})
    path = tmp_path / "grid.dxf"
    doc.saveas(path)

    from ezdxf.entities import Insert

    real = Insert.virtual_entities
    calls = {"n": 0}

    def flaky(self: Any, *args: Any, **kwargs: Any) -> Any:
        calls["n"] += 1
        if calls["n"] == 3:
            raise ezdxf.DXFStructureError("broken cell")
        return real(self, *args, **kwargs)

    monkeypatch.setattr(Insert, "virtual_entities", flaky)
    model, texts = _caught(sfdxf.read, path)
    # The whole reference is skipped (not two of its four cells), and said so.
    assert model.n_members == 1
    kind = "INSERT of block 'GRID' (DXFStructureError)"
    assert model.meta["io:ignored"][kind] == {"count": 1, "layers": {"G": 1}}
    assert any("1 entity skipped" in t and kind in t for t in texts), texts


def test_unsupported_entities_are_warned_with_counts_and_layers(tmp_path: Path) -> None:
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 6
    msp = doc.modelspace()
    msp.add_line((0, 0, 0), (1, 0, 0), dxfattribs={"layer": "A"})
    for k in range(3):
        msp.add_text(f"note {k}", dxfattribs={"layer": "NOTES"})
    msp.add_mtext("more", dxfattribs={"layer": "NOTES"})
    path = tmp_path / "text.dxf"
    doc.saveas(path)
    _, texts = _caught(sfdxf.read, path)
    assert (
        f"{path}: 4 entities of kinds that are not members were ignored: "
        "TEXT x3 on 'NOTES'; MTEXT x1 on 'NOTES'"
    ) in texts


# ---------------------------------------------------------------------------
# Damaged drawings (issue 9)
# ---------------------------------------------------------------------------


def _grid_drawing(path: Path, lineweight: int | None = None) -> Path:
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 4
    msp = doc.modelspace()
    if lineweight is not None:
        msp.add_line((0, 0, 0), (0, 0, 500), dxfattribs={"layer": "POST", "lineweight": lineweight})
    for i in range(4):
        msp.add_line((i * 1000, 0, 0), ((i + 1) * 1000, 0, 0), dxfattribs={"layer": "CHORD"})
        msp.add_line((i * 1000, 0, 0), (i * 1000 + 500, 0, 800), dxfattribs={"layer": "DIAG"})
    doc.saveas(path)
    return path


def _nth_entity_span(text: str, kind: str, n: int) -> tuple[int, int]:
    """Start and end offsets of the n-th ``kind`` entity of the ENTITIES section."""
    pos = text.index("ENTITIES")
    for _ in range(n + 1):
        pos = text.index(f"\n  0\n{kind}\n", pos + 1)
    return pos, text.index("\n  0\n", pos + 1)


def _edit_entity(path: Path, kind: str, n: int, pattern: str, replacement: str) -> None:
    """Replace ``pattern`` once inside the n-th ``kind`` entity; fail if it is absent there."""
    text = path.read_text()
    start, end = _nth_entity_span(text, kind, n)
    damaged, found = re.subn(pattern, replacement, text[start:end], count=1)
    assert found == 1, f"{pattern!r} not in {kind} #{n}"
    path.write_text(text[:start] + damaged + text[end:])


def test_damaged_entity_type_name_is_skipped_not_a_traceback(tmp_path: Path) -> None:
    path = _grid_drawing(tmp_path / "lxne.dxf")
    text = path.read_text()
    start, _ = _nth_entity_span(text, "LINE", 2)
    path.write_text(text[:start] + "\n  0\nLXNE\n" + text[start + len("\n  0\nLINE\n"):])
    model, texts = _caught(sfdxf.read, path)
    assert model.n_members == 7
    kind = "damaged LXNE (DXFAttributeError)"
    # Its layer is still read from the raw tags.
    assert model.meta["io:ignored"] == {kind: {"count": 1, "layers": {"CHORD": 1}}}
    assert any(f"{kind} x1 on 'CHORD'" in t for t in texts), texts


def test_line_that_lost_its_layer_is_warned_with_its_place(tmp_path: Path) -> None:
    path = _grid_drawing(tmp_path / "nolayer.dxf")
    _edit_entity(path, "LINE", 3, r"\n  8\nDIAG\n", "\n")  # DIAG from (1000, 0, 0)
    model, texts = _caught(sfdxf.read, path)
    assert model.groups["0"].size == 1
    assert (
        f"{path}: 1 of 8 lines are on layer '0' while the others are on named layers "
        "(starting at (1000, 0, 0) mm); a damaged file puts lines that lost their layer "
        "on '0': check the groups of these lines"
    ) in texts


def test_no_layer_zero_warning_when_all_or_none_are_on_layer_zero(tmp_path: Path) -> None:
    _, texts = _caught(sfdxf.read, _grid_drawing(tmp_path / "named.dxf"))
    assert not [t for t in texts if "layer '0'" in t]
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 6
    doc.modelspace().add_line((0, 0, 0), (1, 0, 0))
    doc.modelspace().add_line((1, 0, 0), (1, 1, 0))
    doc.saveas(tmp_path / "zero.dxf")
    _, texts = _caught(sfdxf.read, tmp_path / "zero.dxf")
    assert not [t for t in texts if "layer '0'" in t]


def test_every_repair_of_ezdxf_is_warned(tmp_path: Path) -> None:
    # A duplicated LINE (same handle) and an invalid lineweight: ezdxf reads
    # the file, its audit removes the duplicate and fixes the lineweight.
    path = _grid_drawing(tmp_path / "repair.dxf", lineweight=13)
    text = path.read_text()
    start, end = _nth_entity_span(text, "LINE", 5)
    path.write_text(text[:end] + text[start:end] + text[end:])
    _edit(path, r"\n370\n13\n", "\n370\n7\n")  # 0.07 mm is no DXF lineweight
    model, texts = _caught(sfdxf.read, path)
    assert model.n_members == 9
    audit = model.meta["dxf:audit"]
    assert len(audit["fixes"]) == 2 and "dxf:recover" not in model.meta
    repaired = [t for t in texts if ": ezdxf repaired: " in t]
    assert len(repaired) == 2
    assert "Removed entity LINE" in repaired[0] and "lineweight" in repaired[1]
    assert any("2 repairs (2 of line" in t for t in texts)
    # The removed line is counted among the skipped entities.
    assert model.meta["io:ignored"]["damaged LINE (removed by ezdxf's repair)"]["count"] == 1


def test_ezdxf_log_lines_become_warnings_not_stderr(
    tmp_path: Path, capfd: pytest.CaptureFixture[str]
) -> None:
    path = _grid_drawing(tmp_path / "dup.dxf")
    text = path.read_text()
    start, end = _nth_entity_span(text, "LINE", 5)
    path.write_text(text[:end] + text[start:end] + text[end:])  # non-unique handle
    model, texts = _caught(sfdxf.read, path)
    captured = capfd.readouterr()
    assert captured.err == ""
    assert any("ezdxf reported 1 problem(s): 'Found non-unique entity handle" in t for t in texts)
    assert model.meta["dxf:log"][0].startswith("Found non-unique entity handle")


def test_reader_errors_quoting_ezdxf_are_one_line(tmp_path: Path) -> None:
    path = _grid_drawing(tmp_path / "code.dxf")
    text = path.read_text()
    i = text.index("$DIMGAP")
    # A damaged group code before a header variable: ezdxf's text holds a newline.
    path.write_text(text[: i - 4] + "  X\n" + text[i - 1:])
    with pytest.raises(sf.ReadError) as info:
        sfdxf.read(path)
    message = str(info.value)
    assert "\n" not in message and "\r" not in message
    assert message.startswith(f"{path}: damaged DXF")
    assert 'Invalid group code "  X\\n"' in message


# ---------------------------------------------------------------------------
# Seeded mutations: a model or the project's own one-line error, nothing else
# ---------------------------------------------------------------------------


def _mutations(base: bytes, seed: int, n: int) -> list[bytes]:
    rng = random.Random(seed)
    lines = base.split(b"\n")
    out = []
    for _ in range(n):
        kind = rng.randrange(5)
        pairs = list(lines)
        i = rng.randrange(len(pairs) // 2) * 2
        if kind == 0:
            data = bytearray(base)
            data[rng.randrange(len(data))] = rng.randrange(256)
            out.append(bytes(data))
            continue
        if kind == 1:
            out.append(base[: rng.randrange(len(base))])
            continue
        if kind == 2:
            del pairs[i : i + 2]  # a group-code pair deleted
        elif kind == 3:
            pairs[i:i] = pairs[i : i + 2]  # a pair duplicated
        else:
            value = pairs[i + 1] if i + 1 < len(pairs) else b""
            if value.isalpha() and len(value) > 2:  # a damaged entity or section name
                pairs[i + 1] = value[:1] + b"X" + value[2:]
            else:
                pairs[i + 1] = rng.choice([b"nan", b"1e999", b"-", b"", b"1e20"])
        out.append(b"\n".join(pairs))
    return out


def test_mutated_drawings_read_or_fail_with_one_line(tmp_path: Path) -> None:
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 4
    msp = doc.modelspace()
    bay = doc.blocks.new("BAY")
    bay.add_line((0, 0, 0), (1000, 0, 0))
    for i in range(3):
        msp.add_line((i * 1000, 0, 0), ((i + 1) * 1000, 0, 0), dxfattribs={"layer": "CHORD"})
        msp.add_line((i * 1000, 0, 0), (i * 1000 + 500, 500, 700), dxfattribs={"layer": "DIAG"})
    msp.add_lwpolyline([(0, 2000), (1000, 2000)], dxfattribs={"layer": "TOP"})
    msp.add_blockref("BAY", (0, 5000, 0), dxfattribs={"layer": "BLK"})
    msp.add_3dface([(0, 0, 0), (1000, 0, 0), (1000, 1000, 0)])
    base_path = tmp_path / "base.dxf"
    doc.saveas(base_path)
    base = base_path.read_bytes()
    outcomes = {"model": 0, "error": 0}
    for k, data in enumerate(_mutations(base, seed=20261202, n=40)):
        path = tmp_path / f"m{k}.dxf"
        path.write_bytes(data)
        try:
            _, texts = _caught(sfdxf.read, path)
        except SpaceframeError as exc:
            message = str(exc)
            assert "\n" not in message and len(message) <= 600, (k, message)
            outcomes["error"] += 1
        else:
            assert all("\n" not in t and len(t) <= 600 for t in texts), (k, texts)
            outcomes["model"] += 1
    # Both outcomes occur, so the mutations do reach the reader's both roads.
    assert outcomes["model"] >= 5 and outcomes["error"] >= 5, outcomes


# ---------------------------------------------------------------------------
# On the command line
# ---------------------------------------------------------------------------


def test_check_names_the_zscale_zero_reading_and_skipped_entities(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    flat = _zscale_zero_drawing(tmp_path / "flat.dxf", (0, 1, 0))
    assert main(["check", str(flat)]) in (0, 1)
    out = capsys.readouterr().out
    assert "5 members" in out
    assert re.search(r"warning: .*1 block reference with z-scale 0.*read with z-scale 1", out)
    deep = _zscale_zero_drawing(tmp_path / "deep.dxf", (0, 0, 1))
    main(["check", str(deep)])
    out = capsys.readouterr().out
    assert re.search(r"warning: .*1 entity skipped.*INSERT of block 'OUTER'", out)
    assert "model.meta" not in out


def test_run_names_skipped_entities(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    # A tripod drawn as lines, and a block with a 3D line inserted with z-scale 0.
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 6
    msp = doc.modelspace()
    feet = [(0, 0, 0), (4, 0, 0), (2, 3, 0)]
    for foot in feet:
        msp.add_line(foot, (2, 1, 3), dxfattribs={"layer": "LEGS"})
        msp.add_point(foot, dxfattribs={"layer": "FEET"})
    block = doc.blocks.new("STAY")
    block.add_line((0, 0, 0), (0, 0, 1))
    msp.add_blockref("STAY", (9, 9, 0), dxfattribs={"zscale": 7.0, "layer": "LEGS"})
    drawing = tmp_path / "tripod.dxf"
    doc.saveas(drawing)
    _edit(drawing, r"\n 43\n7\.0\n", "\n 43\n0.0\n")
    toml = tmp_path / "tripod.toml"
    toml.write_text(
        'title = "tripod"\n'
        "[geometry]\nfile = \"tripod.dxf\"\n"
        '[sections]\nleg = { shape = "bar", diameter = 20 }\n'
        '[assign]\ndefault = { section = "leg", material = "S355" }\n'
        '[[supports]]\nnodes = { markers = "FEET" }\nrestrain = "pinned"\n'
        "[loads.p]\n[[loads.p.nodal]]\nnodes = { points = [[2, 1, 3]] }\n"
        "force = [0, 0, -10]\n"
    )
    out_dir = tmp_path / "results"
    code = main(["run", str(toml), "-o", str(out_dir), "--no-pictures", "--json"])
    captured = capsys.readouterr()
    assert code == 0, captured.err
    text = captured.out + captured.err
    assert "1 entity skipped" in text and "INSERT of block 'STAY'" in text
    summary = json.loads((out_dir / "summary.json").read_text())
    assert any("INSERT of block 'STAY'" in w for w in summary["warnings"])


def test_lines_drawn_in_paper_space_are_pointed_at(tmp_path: Path) -> None:
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 6
    doc.paperspace().add_line((0, 0, 0), (1, 0, 0))
    doc.paperspace().add_line((1, 0, 0), (1, 1, 0))
    doc.saveas(tmp_path / "paper.dxf")
    with pytest.raises(sf.ReadError, match=r"no usable entities.*2 entities are in paper space"):
        sfdxf.read(tmp_path / "paper.dxf")


def test_nested_references_with_zscale_zero_follow_the_same_rule(tmp_path: Path) -> None:
    # A block inserted normally holds two references with z-scale 0: one of a
    # flat block (read with z-scale 1, counted) and one of a block with depth
    # (skipped and named, not silently read with z-scale 1).
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 6
    doc.blocks.new("TRI").add_line((0, 0, 0), (2, 0, 0))
    doc.blocks.new("POST").add_line((0, 0, 0), (0, 0, 2))
    frame = doc.blocks.new("FRAME")
    frame.add_blockref("TRI", (0, 0, 0), dxfattribs={"zscale": 7.0})
    frame.add_blockref("POST", (5, 0, 0), dxfattribs={"zscale": 7.0})
    frame.add_line((0, 0, 0), (0, 3, 0))
    doc.modelspace().add_blockref("FRAME", (0, 0, 1), dxfattribs={"layer": "F"})
    path = tmp_path / "nested.dxf"
    doc.saveas(path)
    _edit(path, r"\n 43\n7\.0\n", "\n 43\n0.0\n", count=2)
    model, texts = _caught(sfdxf.read, path)
    assert member_keys(model) == {
        frozenset({(0.0, 0.0, 1.0), (2.0, 0.0, 1.0)}),
        frozenset({(0.0, 0.0, 1.0), (0.0, 3.0, 1.0)}),
    }
    assert model.meta["dxf:zscale0"] == {"TRI": 1}
    kind = "INSERT of block 'POST' with z-scale 0 and depth"
    assert model.meta["io:ignored"] == {kind: {"count": 1, "layers": {"F": 1}}}
    assert any("1 entity skipped" in t and kind in t for t in texts), texts


def test_line_with_a_non_finite_coordinate_is_skipped_and_counted(tmp_path: Path) -> None:
    path = _grid_drawing(tmp_path / "nan.dxf")
    # CHORD from (3000, 0, 0)
    _edit_entity(path, "LINE", 6, r"\n 10\n3000\.0\n", "\n 10\n1e999\n")
    model, texts = _caught(sfdxf.read, path)
    assert model.n_members == 7
    kind = "damaged LINE (coordinate not a finite number)"
    assert model.meta["io:ignored"] == {kind: {"count": 1, "layers": {"CHORD": 1}}}
    assert any(f"{kind} x1 on 'CHORD'" in t for t in texts), texts


def test_drawing_with_a_byte_order_mark_is_read(tmp_path):
    import ezdxf

    import spaceframe.io as sio

    doc = ezdxf.new()
    doc.modelspace().add_line((0, 0, 0), (1, 0, 0), dxfattribs={"layer": "A"})
    doc.modelspace().add_line((1, 0, 0), (1, 1, 0), dxfattribs={"layer": "A"})
    plain = tmp_path / "plain.dxf"
    doc.saveas(plain)
    bom = tmp_path / "bom.dxf"
    bom.write_bytes(b"\xef\xbb\xbf" + plain.read_bytes())
    m = sio.read(bom, units="m")
    assert m.n_members == 2 and m.groups["A"].size == 2
