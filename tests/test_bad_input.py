"""The bad-input corpus: every case gives the project's own error, one capped line, and
exit code 2 from the command line without a traceback (or is read, where it is valid).

The cases are generated in code (tests/_bad_cases.py); invented data, error paths only.
"""

from __future__ import annotations

import subprocess
import sys
import warnings
from collections.abc import Callable
from pathlib import Path
from typing import Any

import _bad_cases as bc
import pytest

import spaceframe as sf
from spaceframe.cli import main
from spaceframe.errors import ModelError, ProjectError, ReadError, SpaceframeError
from spaceframe.project import load_project

# Longest message accepted from a reader or the command line (characters).
MESSAGE_CAP = 1000
ROOT = Path(__file__).resolve().parents[1]

# Cases that still fail because their fix has not reached main; a strict xfail flags
# the day the fix lands (then remove the entry).
H2 = "H2 analysis/model (API input checks, validate() re-checks, g, panels)"
AWAITING: dict[str, str] = {}


def _cases() -> list[Any]:
    out: list[Any] = []
    for cid, text, frag in bc.TOML:
        expect = None if cid == "toml-bom" else ProjectError
        out.append((cid, "toml", text, expect, frag))
    for cid, text, frag in bc.DXF:
        out.append((cid, "dxf", text, None if frag is None else ReadError, frag or ""))
    for cid, suffix, text, frag in bc.MESH:
        if cid == "msh41-zero-node-block":
            out.append((cid, suffix, bc.MSH41_ZERO_BLOCK, None, ""))
        else:
            out.append((cid, suffix, text, ReadError, frag))
    for cid, fn, frag in bc.API:
        out.append((cid, "api", fn, None if frag is None else ModelError, frag or ""))
    params = []
    for case in out:
        marks = ()
        if case[0] in AWAITING:
            marks = (pytest.mark.xfail(strict=True, reason=f"awaiting fix: {AWAITING[case[0]]}"),)
        params.append(pytest.param(*case, id=case[0], marks=marks))
    return params


CASES = _cases()


def _write(tmp_path: Path, kind: str, payload: Any) -> Path:
    text = payload() if callable(payload) else payload
    path = tmp_path / f"case.{kind}"
    path.write_bytes(text.encode("utf-8", "surrogateescape"))
    return path


def _read(kind: str, path: Path) -> Any:
    if kind == "toml":
        return load_project(path)
    units = "m" if kind == "dxf" and b"$INSUNITS" not in path.read_bytes() else None
    return sf.io.read(path, units=units)


def _check_message(exc: BaseException, frag: str) -> None:
    msg = str(exc)
    assert "\n" not in msg and "\r" not in msg, msg[:300]
    assert 0 < len(msg) <= MESSAGE_CAP, len(msg)
    assert frag.lower() in msg.lower(), (frag, msg)


@pytest.mark.parametrize(("cid", "kind", "payload", "expect", "frag"), CASES)
def test_bad_input(cid: str, kind: str, payload: Any, expect: type[BaseException] | None,
                   frag: str, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if kind == "api":
            fn: Callable[[], Any] = payload
            if expect is None:
                fn()
                return
            with pytest.raises(SpaceframeError) as info:
                fn()
            assert isinstance(info.value, expect), repr(info.value)[:300]
            _check_message(info.value, frag)
            return
        path = _write(tmp_path, kind, payload)
        if expect is None:
            assert _read(kind, path) is not None
        else:
            with pytest.raises(SpaceframeError) as info:
                _read(kind, path)
            assert isinstance(info.value, expect), repr(info.value)[:300]
            _check_message(info.value, frag)
            if kind != "toml":
                assert path.name in str(info.value), str(info.value)[:300]
        argv = ["check", str(path), "-q"]
        if kind == "dxf" and b"$INSUNITS" not in path.read_bytes():
            argv += ["--units", "m"]
        capsys.readouterr()
        rc = main(argv)
    err = capsys.readouterr().err
    if expect is None:
        assert rc in (0, 1), err[:300]
        return
    assert rc == 2, err[:300]
    lines = err.strip().splitlines()
    assert len(lines) == 1, err[:500]
    assert "Traceback" not in err
    assert len(lines[0]) <= MESSAGE_CAP + 100


def test_corpus_size() -> None:
    assert len(CASES) >= 100


@pytest.mark.parametrize("cid", [
    "toml-nested-1000",
    "dxf-LXNE",
    "obj-not-wavefront",
])
def test_bad_input_by_subprocess(cid: str, tmp_path: Path) -> None:
    """The real command: exit 2 (or a clean read), one stderr line, no traceback."""
    case = next(c for c in CASES if c.id == cid)
    _, kind, payload, expect, _frag = case.values
    path = _write(tmp_path, kind, payload)
    argv = [sys.executable, "-m", "spaceframe", "check", str(path), "-q"]
    if kind == "dxf":
        argv += ["--units", "m"]
    proc = subprocess.run(argv, capture_output=True, text=True, timeout=120, cwd=ROOT,
                          env={"PYTHONPATH": str(ROOT), "PATH": "/usr/bin:/bin",
                               "MPLBACKEND": "Agg"})
    assert "Traceback" not in proc.stderr
    if expect is None:
        assert proc.returncode in (0, 1), proc.stderr[:300]
    else:
        assert proc.returncode == 2, proc.stderr[:300]
        assert len(proc.stderr.strip().splitlines()) == 1, proc.stderr[:500]
        assert len(proc.stderr) <= MESSAGE_CAP + 100, len(proc.stderr)
