"""The command line's allocator settings (spaceframe.memory)."""

from __future__ import annotations

import platform
import sys

import pytest

from spaceframe import memory, study


def test_the_study_workers_and_the_command_line_keep_freed_memory_alike() -> None:
    assert study.WORKER_ENVIRON["MALLOC_TRIM_THRESHOLD_"] == memory.TRIM_THRESHOLD
    assert study.WORKER_ENVIRON["MALLOC_MMAP_THRESHOLD_"] == memory.MMAP_THRESHOLD


@pytest.mark.skipif(not (sys.platform.startswith("linux") and platform.libc_ver()[0] == "glibc"),
                    reason="glibc only")
def test_keep_freed_memory_is_taken_by_glibc() -> None:
    assert memory.keep_freed_memory() is True


def test_elsewhere_nothing_changes(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(sys, "platform", "darwin")
    assert memory.keep_freed_memory() is False
