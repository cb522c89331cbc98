"""One atomic-write helper (spaceframe.files.atomic_write) and the umask it reads."""

from __future__ import annotations

import os
import stat
from pathlib import Path

import pytest

import spaceframe as sf
from spaceframe import files
from spaceframe.study import StudyTable


def test_umask_is_read_without_setting_it(monkeypatch: pytest.MonkeyPatch) -> None:
    if not Path("/proc/self/status").is_file():
        pytest.skip("no /proc: os.umask under a lock is the fallback")
    old = os.umask(0o027)
    try:
        def no_set(mask: int) -> int:  # setting it would race with other threads
            raise AssertionError("os.umask called")

        monkeypatch.setattr(os, "umask", no_set)
        assert files._umask() == 0o027
    finally:
        monkeypatch.undo()
        os.umask(old)


def test_atomic_write_gives_the_umask_mode(tmp_path: Path) -> None:
    old = os.umask(0o077)
    try:
        files.atomic_write(tmp_path / "a.txt", lambda p: p.write_text("x"))
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "a.txt").stat().st_mode) == 0o600


def test_study_table_writes_through_the_helper(tmp_path: Path) -> None:
    table = StudyTable(rows=[{"case.Q": 1.0}], parameters=["case.Q"])
    with pytest.raises(sf.WriteError, match="missing"):
        table.to_csv(tmp_path / "missing" / "study.csv")
    table.to_csv(tmp_path / "study.csv")
    assert (tmp_path / "study.csv").read_text().startswith("case.Q,")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["study.csv"]  # no temporary left
