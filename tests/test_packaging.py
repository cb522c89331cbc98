"""Packaging: the io/ folder installs as spaceframe.io and never shadows io."""

from __future__ import annotations

import os
import subprocess
import sys
import sysconfig
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _run(args: list[str], cwd: Path, env: dict[str, str] | None = None) -> str:
    proc = subprocess.run(args, cwd=cwd, capture_output=True, text=True, env=env, check=False)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    return proc.stdout


def test_import_io_is_stdlib_from_repo_root() -> None:
    out = _run([sys.executable, "-c", "import io, sys; print(io.__file__ or 'builtin')"], ROOT)
    assert not out.strip().startswith(str(ROOT)), out
    out = _run([sys.executable, "-c", "import io; print(hasattr(io, 'BytesIO'))"], ROOT)
    assert out.strip() == "True"


def test_import_spaceframe_stays_light() -> None:
    code = (
        "import sys, spaceframe; heavy = [m for m in ('pyvista', 'vtk', 'vtkmodules', 'ezdxf', "
        "'meshio', 'matplotlib', 'pint') if m in sys.modules]; print(heavy)"
    )
    assert _run([sys.executable, "-c", code], ROOT).strip() == "[]"


@pytest.mark.slow
@pytest.mark.parametrize("editable", [False, True])
def test_install_gives_spaceframe_io(tmp_path: Path, editable: bool) -> None:
    venv = tmp_path / "venv"
    # No pip or setuptools of its own: the .pth below lends it this
    # environment's (the project's build requirements are installed here).
    _run([sys.executable, "-m", "venv", "--without-pip", str(venv)], tmp_path)
    py = venv / "bin" / "python"
    # Let the fresh venv see this environment's numpy/scipy/setuptools so the
    # test needs no network: a .pth file adds the running site-packages.
    site = subprocess.run(
        [str(py), "-c", "import sysconfig; print(sysconfig.get_paths()['purelib'])"],
        capture_output=True, text=True, check=True,
    ).stdout.strip()
    # Lend everything but spaceframe itself (links in a folder of their own), so the
    # copy under test is the one this install makes, not one installed outside.
    lent = tmp_path / "lent"
    lent.mkdir()
    for entry in Path(sysconfig.get_paths()["purelib"]).iterdir():
        name = entry.name.lower()
        if not (name.startswith(("spaceframe", "__editable__", "_spaceframe"))
                or name.endswith(".pth")):
            (lent / entry.name).symlink_to(entry)
    Path(site, "outer.pth").write_text(f"{lent}\n")
    cmd = [str(py), "-m", "pip", "install", "-q", "--no-deps", "--no-build-isolation"]
    cmd += ["-e", str(ROOT)] if editable else [str(ROOT)]
    env = {**os.environ, "PIP_DISABLE_PIP_VERSION_CHECK": "1"}
    _run(cmd, tmp_path, env=env)
    code = (
        "import io, spaceframe.io as sio, spaceframe; "
        "print(sio.__name__, hasattr(io, 'StringIO'), spaceframe.__file__)"
    )
    out = _run([str(py), "-c", code], tmp_path).split()
    assert out[0] == "spaceframe.io" and out[1] == "True"
    # A regular install copies the package; an editable one points at the repo.
    assert out[2].startswith(str(ROOT)) == editable
