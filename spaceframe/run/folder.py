"""The results folder: built under a temporary name, swapped in whole, never a stranger's.

The tool writes a marker file (:data:`MARKER`) into every results folder it
makes; only a folder holding it is ever replaced, and only the paths it lists
are ever removed.  :func:`write_folder` checks the output folder, fills a
temporary one beside it and puts it in place so that a failed or killed run
leaves the old results or the new ones, never a mixture and never nothing.
"""

from __future__ import annotations

import ctypes
import errno
import json
import os
import re
import shutil
import signal
import sys
import uuid
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from spaceframe.run.job import Loaded

__all__ = ["FAULT_ENV", "MARKER", "write_folder"]

#: Marker file the tool writes inside every results folder (and every temporary or old
#: copy of one): a JSON list of the paths it wrote.  Only a folder with this marker
#: is ever replaced, and only the paths it lists are ever removed.
MARKER = ".spaceframe-results"

#: Environment variable for the fault tests, a comma-separated list: a point of the
#: writer ("after-mkdtemp", "after-write", "before-swap", "mid-swap", "after-swap",
#: "mid-merge") makes the process kill itself there (SIGKILL); "disk-full" fails the
#: writing as a full disk would; "no-exchange" takes the two-rename swap.
FAULT_ENV = "SPACEFRAME_FAULT"


def _faults() -> list[str]:
    return os.environ.get(FAULT_ENV, "").split(",")


def _fault(point: str) -> None:
    if point in _faults():
        os.kill(os.getpid(), getattr(signal, "SIGKILL", signal.SIGTERM))


def _write_marker(folder: Path, paths: Any) -> None:
    """Write the marker (atomically: a reader never sees half a list)."""
    from spaceframe import __version__
    from spaceframe.files import atomic_write

    text = json.dumps({"written_by": "spaceframe", "version": __version__,
                       "paths": sorted(paths)}, indent=1)
    atomic_write(folder / MARKER, lambda tmp: _write_text(tmp, text + "\n"))


def _write_text(path: Path, text: str) -> None:
    path.write_text(text, encoding="utf-8")


def _is_marker(name: str) -> bool:
    """The marker, or a temporary copy of it that a kill left (this or an older version's)."""
    return name == MARKER or (name.endswith(".tmp") and (
        name.startswith(f".{MARKER}.") or name.startswith(f"{MARKER}.")))


def _read_marker(folder: Path) -> set[str] | None:
    """The paths the tool wrote in ``folder``, or None when it is not the tool's folder."""
    try:
        data = json.loads((folder / MARKER).read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(data, dict) or data.get("written_by") != "spaceframe":
        return None
    paths = data.get("paths")
    if not isinstance(paths, list) or not all(isinstance(x, str) for x in paths):
        return None
    return set(paths)


def _tree(folder: Path) -> list[str]:
    """Every path under ``folder`` (files, folders, links), relative, '/'-separated."""
    out: list[str] = []
    for root, dirs, files in os.walk(folder):
        rel = Path(root).relative_to(folder)
        for name in dirs + files:
            out.append((rel / name).as_posix())
    return sorted(p for p in out if not _is_marker(Path(p).name))


def _pid_alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # another user's process (PermissionError): alive
        return True
    return True


_LEFTOVER = re.compile(r"^\.(?P<name>.+)\.(?P<kind>tmp|old)-(?P<pid>\d+)(?:-[^/]*)?$")


def _clean_leftovers(final: Path, notes: list[str]) -> None:
    """Remove what killed runs of the tool left beside ``final``.

    Only ``.NAME.tmp-PID-*`` and ``.NAME.old-PID`` folders of a process that no
    longer runs, holding the tool's marker (or empty), are touched.  When the
    results folder itself is missing (a run killed between the two renames of
    the fallback swap), the old copy is put back instead of removed.
    """
    try:
        entries = list(final.parent.iterdir())
    except OSError:
        return
    for entry in sorted(entries):
        m = _LEFTOVER.match(entry.name)
        if m is None or m["name"] != final.name or _pid_alive(int(m["pid"])):
            continue
        if entry.is_symlink() or not entry.is_dir():
            continue
        if _read_marker(entry) is None:
            try:
                entry.rmdir()  # an empty folder made just before a kill; never a full one
            except OSError:
                pass
            continue
        try:
            if m["kind"] == "old" and not os.path.lexists(final):
                entry.rename(final)
                notes.append(f"{final}: restored the results of an interrupted run")
                continue
            errors = _rmtree_marked(entry)
        except OSError as exc:
            errors = [str(exc.strerror or exc)]
        if errors:
            notes.append(f"{entry}: could not remove this leftover of an interrupted run "
                         f"({errors[0]}); remove it by hand")


@dataclass
class _Target:
    """Where results go and how.

    ``mode`` is "new" (nothing there), "swap" (a results folder of the tool,
    replaced whole) or "merge" (a folder that also holds other files, which
    are kept: only the tool's own paths are replaced).
    """

    final: Path
    mode: str
    ours: set[str]
    foreign: list[str]


def _inputs(loaded: Loaded) -> list[Path]:
    found = [loaded.path]
    src = loaded.model.meta.get("source")
    if src:
        found.append(Path(str(src)))
    return [Path(os.path.realpath(p)) for p in found]


def _target(output: Path, loaded: Loaded, force: bool) -> _Target:
    """Check the output folder and decide how to write it.

    Raises
    ------
    ProjectError
        For a folder that must never be written: the model file's own folder or
        one above it, one that holds an input, one that is not a folder, or a
        folder of other files (unless ``force``).
    """
    from spaceframe.errors import ProjectError, WriteError

    # realpath: '-o .' gets its real name, and a symlinked folder is followed to
    # its target (replacing the link itself would leave the target stale).
    final = Path(os.path.realpath(output))
    model_dir = Path(os.path.realpath(loaded.path)).parent
    if final == model_dir or final in model_dir.parents:
        raise ProjectError(
            f"output folder {output}: is the model file's folder or one above it "
            f"({final}); results need a folder of their own, e.g. {loaded.output.name}")
    for inp in _inputs(loaded):
        if final in inp.parents:
            raise ProjectError(f"output folder {output}: holds the input {inp}; "
                               "choose a folder of its own")
    if os.path.lexists(final) and not final.is_dir():
        raise ProjectError(f"output folder {output}: exists and is not a folder")
    if not final.exists():
        return _Target(final, "new", set(), [])
    have = _tree(final)
    ours = _read_marker(final)
    if ours is None:
        if not have and not (final / MARKER).exists():
            return _Target(final, "new", set(), [])
        if not force:
            raise ProjectError(
                f"output folder {output}: holds {len(have)} files or folders that spaceframe "
                f"did not write (e.g. {have[0] if have else MARKER}); choose another folder, "
                "or --force to add the results beside them (they are kept)")
        ours = set()
    foreign = [p for p in have if p not in ours]
    mode = "merge" if foreign else "swap"
    if mode == "merge":
        tops = {p.split("/")[0] for p in ours}
        nested = [p for p in foreign if "/" in p and p.split("/")[0] in tops]
        if nested:
            raise ProjectError(
                f"output folder {output}: {nested[0]} was not written by spaceframe but is "
                "inside a folder of its results; move it out first")
    # A read-only old folder could be renamed but never removed: say so before
    # anything changes (root is not stopped by permissions; then removal
    # failures are reported after the run).
    for d in [final, *(final / p for p in sorted(ours) if (final / p).is_dir())]:
        if not os.access(d, os.W_OK | os.X_OK):
            raise WriteError(f"output folder {output}: {d} is read-only, so the old results "
                             "could not be replaced; make it writable or choose another folder")
    return _Target(final, mode, ours, foreign)


# Linux renameat2(2) flag swapping two paths in one step.  Python's os module has
# no binding for it (os.rename/os.replace only), hence ctypes.
_AT_FDCWD, _RENAME_EXCHANGE = -100, 2


def _exchange(a: Path, b: Path) -> bool:
    """Swap two existing paths atomically; False when the system cannot."""
    if not sys.platform.startswith("linux") or "no-exchange" in _faults():
        return False
    try:
        libc = ctypes.CDLL(None, use_errno=True)
        fn = libc.renameat2
    except (OSError, AttributeError):
        return False
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    fn.restype = ctypes.c_int
    if fn(_AT_FDCWD, os.fsencode(a), _AT_FDCWD, os.fsencode(b), _RENAME_EXCHANGE) == 0:
        return True
    err = ctypes.get_errno()
    if err in (errno.ENOSYS, errno.EINVAL, errno.ENOTSUP):
        return False
    raise OSError(err, os.strerror(err), str(b))


def _rmtree_marked(folder: Path) -> list[str]:
    """Remove a folder of the tool's, its marker last; the errors.

    What cannot be removed stays recognisable as the tool's, for a later run
    to try again.
    """
    errors: list[str] = []

    def onerror(_f: Any, path: str, exc: Any) -> None:
        err = exc[1] if isinstance(exc, tuple) else exc
        errors.append(f"{path}: {getattr(err, 'strerror', None) or err}")

    for entry in sorted(folder.iterdir()):
        if entry.name == MARKER:
            continue
        if entry.is_dir() and not entry.is_symlink():
            shutil.rmtree(entry, onerror=onerror)
        else:
            try:
                entry.unlink()
            except OSError as exc:
                onerror(None, str(entry), exc)
    if not errors:
        try:
            (folder / MARKER).unlink(missing_ok=True)
            folder.rmdir()
        except OSError as exc:
            onerror(None, str(folder), exc)
    return errors


def _remove(folder: Path, final: Path, notes: list[str]) -> None:
    """Remove a copy of the tool's own results; a failure is reported, not ignored."""
    errors = _rmtree_marked(folder)
    if errors and folder.exists():
        notes.append(f"{final}: the old results could not all be removed ({errors[0]}); "
                     f"what is left is in {folder}: remove it by hand")


def _replace_folder(tmp: Path, target: _Target, notes: list[str]) -> None:
    """Put a finished folder in place so that the old or the new results are always there."""
    final = target.final
    _fault("before-swap")
    if target.mode == "merge":
        _merge(tmp, target, notes)
        return
    if target.mode == "new":
        try:
            tmp.rename(final)  # onto nothing, or onto an empty folder
            return
        except OSError as exc:
            if exc.errno not in (errno.EEXIST, errno.ENOTEMPTY) or _read_marker(final) is None:
                raise
            # Another run got there first: its folder is the tool's; replace it.
    if _exchange(tmp, final):
        _fault("after-swap")
        _remove(tmp, final, notes)  # tmp now holds the old results
        return
    old = final.with_name(f".{final.name}.old-{os.getpid()}")
    final.rename(old)
    _fault("mid-swap")  # a later run puts `old` back if this one dies here
    tmp.rename(final)
    _fault("after-swap")
    _remove(old, final, notes)


def _merge(tmp: Path, target: _Target, notes: list[str]) -> None:
    """Replace only the tool's own entries of a folder that holds other files too."""
    from spaceframe.errors import WriteError

    final = target.final
    new = [p.name for p in sorted(tmp.iterdir()) if p.name != MARKER]
    foreign_tops = {p.split("/")[0] for p in target.foreign}
    clash = [n for n in new if n in foreign_tops]
    if clash:
        raise WriteError(f"{final / clash[0]}: exists and was not written by spaceframe; "
                         "move it or choose another folder")
    old = final.with_name(f".{final.name}.old-{os.getpid()}")
    old.mkdir()
    _write_marker(old, [])
    new_paths = _tree(tmp)
    # The marker covers old and new paths while they move: whatever a kill leaves
    # is still known to be the tool's.
    _write_marker(final, target.ours | set(new_paths))
    for name in sorted({p.split("/")[0] for p in target.ours}):
        if os.path.lexists(final / name):
            (final / name).rename(old / name)
    _fault("mid-merge")
    for name in new:
        (tmp / name).rename(final / name)
    _write_marker(final, new_paths)
    _remove(old, final, notes)
    _remove(tmp, final, notes)


def _write_error(exc: OSError, tmp: Path, final: Path) -> Exception:
    """The error of a failed write, naming the user's folder, never the temporary one."""
    from spaceframe.errors import WriteError

    what = ""
    if getattr(exc, "filename", None):
        try:
            rel = Path(os.fsdecode(exc.filename)).relative_to(tmp)
            # A hidden name is a writer's own temporary file: name its folder instead.
            parts: list[str] = []
            for part in rel.parts:
                if part.startswith("."):
                    break
                parts.append(part)
            what = f" (writing {Path(*parts).as_posix()})" if parts else ""
        except ValueError:
            what = ""
    reason = exc.strerror or str(exc).replace(str(tmp), str(final))
    if isinstance(exc, WriteError) or not exc.strerror:
        reason = str(exc).replace(str(tmp), str(final))
        return WriteError(reason if reason.startswith(str(final)) else f"{final}: {reason}")
    return WriteError(f"{final}: could not write the results{what}: {reason}; "
                      "the old results are kept")


def _make_temporary(final: Path) -> Path:
    """An empty folder beside ``final``, under a name :func:`_clean_leftovers` knows.

    Made by a plain mkdir, so it has the mode any new folder gets under the
    user's umask (the umask is never read or changed: ``os.umask`` can only
    read it by setting it, for every thread of the process).
    """
    from spaceframe.errors import WriteError

    try:
        final.parent.mkdir(parents=True, exist_ok=True)
        tmp = final.with_name(f".{final.name}.tmp-{os.getpid()}-{uuid.uuid4().hex[:12]}")
        tmp.mkdir()
    except OSError as exc:
        raise WriteError(f"{final}: cannot create the results folder in {final.parent}: "
                         f"{exc.strerror or exc}") from None
    return tmp


def write_folder(output: Path, loaded: Loaded, force: bool,
                 fill: Callable[[Path], list[Path]], notes: list[str]) -> tuple[Path, list[Path]]:
    """Check ``output``, fill a temporary folder beside it with ``fill`` and swap it in.

    ``fill(folder)`` writes the results and returns the paths written.
    Leftovers of killed runs beside the folder are removed first; what could
    not be removed, and what of the old results could not be, is appended
    to ``notes``.

    Returns
    -------
    final : Path
        The results folder (symbolic links followed).
    files : list of Path
        What ``fill`` wrote, at its place in ``final``.

    Raises
    ------
    ProjectError
        For a folder that must never be written (see :func:`_target`).
    WriteError
        When the folder cannot be written; the old results are kept.
    """
    target = _target(output, loaded, force)
    final = target.final
    _clean_leftovers(final, notes)
    if target.mode == "new" and final.exists():
        target = _target(final, loaded, force)  # a leftover was put back
    tmp = _make_temporary(final)
    swap_notes: list[str] = []
    try:
        _write_marker(tmp, [])
        _fault("after-mkdtemp")
        files = fill(tmp)
        _fault("after-write")
        if "disk-full" in _faults():
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC),
                          str(tmp / "vtk" / f".results.{os.getpid()}-0123456789ab.vtu"))
        _write_marker(tmp, _tree(tmp))
        _replace_folder(tmp, target, swap_notes)
    except OSError as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        raise _write_error(exc, tmp, final) from None
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    notes.extend(swap_notes)
    return final, [final / f.relative_to(tmp) for f in files]
