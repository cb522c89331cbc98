"""Files written past the page cache (files.unbuffered_file), as results.npz is."""

from __future__ import annotations

import errno
import os
import zipfile
from pathlib import Path

import numpy as np
import pytest

from spaceframe import files


def _write(path: Path, chunks: list[bytes]) -> None:
    with files.unbuffered_file(path) as fh:
        for c in chunks:
            assert fh.write(c) == len(c)


@pytest.mark.parametrize("sizes", [[1], [4095, 1, 4097], [files.DIRECT_BUFFER - 3, 10, 5000],
                                   [2 * files.DIRECT_BUFFER + 123]])
def test_the_bytes_written_are_the_bytes_read_back(tmp_path: Path, sizes: list[int]) -> None:
    rng = np.random.default_rng(len(sizes))
    chunks = [rng.integers(0, 256, n, dtype=np.uint8).tobytes() for n in sizes]
    p = tmp_path / "f.bin"
    _write(p, chunks)
    assert p.read_bytes() == b"".join(chunks)  # length cut back after the padded last block


def test_a_zip_of_npy_files_through_it_loads_with_numpy(tmp_path: Path) -> None:
    a = np.arange(300_001, dtype=np.float64).reshape(-1, 1) * 0.5
    p = tmp_path / "r.npz"
    with files.unbuffered_file(p) as raw, zipfile.ZipFile(raw, "w", allowZip64=True) as zf:
        with zf.open("a.npy", "w", force_zip64=True) as fh:
            np.lib.format.write_array(fh, a)
        with zf.open("b.npy", "w") as fh:
            np.lib.format.write_array(fh, np.array(["x", "yz"]))
    with zipfile.ZipFile(p) as z:
        assert z.testzip() is None  # every CRC right
    with np.load(p) as z:
        np.testing.assert_array_equal(z["a"], a)
        assert z["b"].tolist() == ["x", "yz"]


def test_without_o_direct_an_ordinary_file(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delattr(os, "O_DIRECT", raising=False)
    p = tmp_path / "f.bin"
    with files.unbuffered_file(p) as fh:
        assert not isinstance(fh, files._Unbuffered)
        fh.write(b"abc")
    assert p.read_bytes() == b"abc"


@pytest.mark.skipif(not hasattr(os, "O_DIRECT"), reason="O_DIRECT is Linux's")
def test_a_file_system_refusing_direct_writes_gets_a_buffered_file(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    real = os.write
    refused = []

    def write(fd: int, data: bytes) -> int:
        if files._direct(fd):
            refused.append(fd)
            raise OSError(errno.EINVAL, "Invalid argument")
        return real(fd, data)

    monkeypatch.setattr(os, "write", write)
    p = tmp_path / "f.bin"
    data = bytes(range(256)) * 100_000  # more than one buffer
    _write(p, [data, b"tail"])
    assert refused and p.read_bytes() == data + b"tail"


def test_an_error_inside_closes_the_file_and_atomic_write_leaves_nothing(tmp_path: Path) -> None:
    target = tmp_path / "out.bin"

    def save(tmp: Path) -> None:
        with files.unbuffered_file(tmp) as fh:
            fh.write(b"partial")
            raise OSError(errno.ENOSPC, "No space left on device")

    with pytest.raises(files.WriteError, match="No space left on device"):
        files.atomic_write(target, save)
    assert list(tmp_path.iterdir()) == []


def test_text_goes_out_as_utf8_with_its_newlines_as_given(tmp_path: Path) -> None:
    p = tmp_path / "t.dxf"
    with files.unbuffered_text(p) as fh:
        assert fh.write("  0\nLINE\n  8\nSTÜTZE_Ø\r\n") == 23  # characters
    assert p.read_bytes() == "  0\nLINE\n  8\nSTÜTZE_Ø\r\n".encode()
