"""Writing a file so that it appears whole or not at all.

The one helper every writer of the package uses (tables, VTK, DXF, report,
pictures, demos, the run folder's marker): below every other floor, so the
viewer and the run use it as well as ``spaceframe.io``.
"""

from __future__ import annotations

import os
import tempfile
import threading
from collections.abc import Callable
from pathlib import Path

from spaceframe.errors import WriteError

__all__ = ["atomic_write"]


def atomic_write(path: str | os.PathLike[str], save: Callable[[Path], None]) -> Path:
    """Call ``save(temp_path)`` on a temporary file next to ``path``, then rename.

    A failure leaves neither a partial file at ``path`` nor the temporary file.

    Raises
    ------
    WriteError
        If the folder does not exist or the file cannot be written.
    """
    target = Path(path)
    folder = target.parent if str(target.parent) else Path(".")
    if not folder.is_dir():
        raise WriteError(f"{target}: folder {folder} does not exist")
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise WriteError(
            f"{target}: cannot create a file in {folder}: {exc.strerror or exc}") from exc
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        save(tmp)
        # mkstemp makes the file private (0600); give it the mode any new file
        # gets under the user's umask, as a plain open() would.
        os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, target)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        # strerror, not str(exc): the latter names the hidden temporary file.
        raise WriteError(f"{target}: could not be written: {exc.strerror or exc}") from exc
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return target


_UMASK_LOCK = threading.Lock()


def _umask() -> int:
    """The process's umask.

    Read from /proc/self/status where the kernel reports it (Linux 4.7 on):
    ``os.umask`` can only read it by setting it, and a file that another
    thread creates in that moment would be created under umask 0.  Elsewhere
    ``os.umask`` under a lock (which guards against this module's own threads).
    """
    try:
        with open("/proc/self/status", encoding="ascii", errors="replace") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError, IndexError):
        pass
    with _UMASK_LOCK:
        mask = os.umask(0)
        os.umask(mask)
    return mask
