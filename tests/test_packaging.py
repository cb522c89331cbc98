"""Packaging: the io/ folder installs as spaceframe.io and never shadows io."""

from __future__ import annotations

import os
import subprocess
import sys
import sysconfig
from pathlib import Path

import pytest

import spaceframe as sf

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
    # Without PYTHONPATH (a checkout on it would be found before the install).
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    env["PIP_DISABLE_PIP_VERSION_CHECK"] = "1"
    _run(cmd, tmp_path, env=env)
    code = (
        "import io, spaceframe.io as sio, spaceframe; "
        "print(sio.__name__, hasattr(io, 'StringIO'), spaceframe.__file__)"
    )
    out = _run([str(py), "-c", code], tmp_path, env=env).split()
    assert out[0] == "spaceframe.io" and out[1] == "True"
    # A regular install copies the package; an editable one points at the repo.
    assert out[2].startswith(str(ROOT)) == editable


def _source_files(folder: Path, prefix: str) -> set[str]:
    """Wheel names of the .py files of every package (folder with __init__.py) under ``folder``."""
    out = set()
    for f in folder.rglob("*.py"):
        if "__pycache__" in f.parts or not (f.parent / "__init__.py").is_file():
            continue
        out.add(f"{prefix}/{f.relative_to(folder).as_posix()}")
    return out


@pytest.mark.slow
def test_wheel_holds_every_subpackage(tmp_path: Path) -> None:
    import zipfile

    env = {**os.environ, "PIP_DISABLE_PIP_VERSION_CHECK": "1"}
    _run([sys.executable, "-m", "pip", "wheel", "-q", "--no-deps", "--no-build-isolation",
          "-w", str(tmp_path), str(ROOT)], tmp_path, env=env)
    (wheel,) = tmp_path.glob("spaceframe-*.whl")
    names = set(zipfile.ZipFile(wheel).namelist())
    # Subpackages are found, not listed: design/ (no list ever named it) ships too.
    design = {n for n in names if n.startswith("spaceframe/design/") and n.endswith(".py")}
    assert "spaceframe/design/__init__.py" in design and len(design) >= 2, sorted(names)
    assert "spaceframe/io/__init__.py" in names and "spaceframe/io/dxf.py" in names
    expected = _source_files(ROOT / "spaceframe", "spaceframe") | _source_files(
        ROOT / "io", "spaceframe/io"
    )
    assert expected - names == set()
    # Nothing lands outside the package (a top-level io/ would shadow the standard library).
    dist_info = f"spaceframe-{sf.__version__}.dist-info"
    assert {n.split("/")[0] for n in names} == {"spaceframe", dist_info}


@pytest.mark.skipif(not os.environ.get("SPACEFRAME_EXPECT_INSTALLED"),
                    reason="set by .ci/run, which installs the package first")
def test_ci_tests_the_installed_package() -> None:
    import spaceframe
    import spaceframe.io

    for mod in (spaceframe, spaceframe.io):
        assert not Path(str(mod.__file__)).resolve().is_relative_to(ROOT), mod.__file__
