"""Short fuzz run of the drawing and mesh readers (the long run: tests/benchmarks/
fuzz_readers.py).  Each seeded mutant of a demo file is read in a child process with a
time limit: it gives a model or a one-line SpaceframeError, never another exception,
a crash or a hang."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

import spaceframe as sf

sys.path.insert(0, str(Path(__file__).resolve().parent / "benchmarks"))
import fuzz_readers as fz

sf.io.read  # noqa: B018 - import the readers once, so every forked child starts warm



@pytest.mark.parametrize(("suffix", "k", "data"),
                         [pytest.param(*m, id=f"{m[0]}-{m[1]}") for m in fz.mutants(16, 3)])
def test_mutant_reads_or_fails_cleanly(suffix: str, k: int, data: bytes,
                                       tmp_path: Path) -> None:
    assert fz.check(data, suffix, tmp_path, timeout=20.0) == "ok"


def test_damaged_line_name_in_demo_drawing(tmp_path: Path) -> None:
    text = fz.DXF_DEMO.read_text()
    i = text.index("\nLINE\n", text.index("ENTITIES"))
    data = (text[:i] + "\nLXNE\n" + text[i + 6:]).encode()
    assert fz.check(data, "dxf", tmp_path) == "ok"


def test_harness_catches_foreign_exceptions_and_hangs(tmp_path: Path,
                                                    monkeypatch: pytest.MonkeyPatch) -> None:
    """The harness can fail: a reader raising a non-project error, printing a multi-line
    message or hanging is reported (the forked child inherits the patched reader)."""
    import time

    from spaceframe.errors import SpaceframeError

    class Loud(SpaceframeError):
        def __str__(self) -> str:
            return "line one\nline two"

    def boom(*_a: object, **_k: object) -> None:
        raise ValueError("not ours")

    def two_lines(*_a: object, **_k: object) -> None:
        raise Loud()

    def hang(*_a: object, **_k: object) -> None:
        time.sleep(30)

    monkeypatch.setattr(sf.io, "read", boom)
    assert fz.check(b"x", "msh", tmp_path) == "ValueError: not ours"
    monkeypatch.setattr(sf.io, "read", two_lines)
    assert fz.check(b"x", "msh", tmp_path).startswith("multi-line or long message")
    monkeypatch.setattr(sf.io, "read", hang)
    assert fz.check(b"x", "msh", tmp_path, timeout=0.5) == "hang (> 0.5 s)"
