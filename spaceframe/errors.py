"""Project exceptions and warnings.

One root, :class:`SpaceframeError`; each leaf also inherits the builtin that
callers would naturally catch (``ValueError`` for bad input, ``LinAlgError``
for a frame that cannot carry load, ``OSError`` for files).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "MESSAGE_LIMIT",
    "MechanismError",
    "ModelError",
    "ProjectError",
    "ReadError",
    "SolverError",
    "SpaceframeError",
    "SpaceframeWarning",
    "WriteError",
    "one_line",
]

#: Longest message, in characters, that an error or warning shows; longer
#: ones keep their beginning and end.  A message is read on one terminal
#: line or a few; a reader that quotes a whole damaged file (one "line" of a
#: binary file can be 100,000 characters) must not flood the screen.
MESSAGE_LIMIT = 600

# Control characters (line breaks, tabs, escape sequences, C1 controls) are
# shown escaped, so that a message is one line and a damaged file cannot
# drive the terminal.
_ESCAPES = {c: f"\\x{c:02x}" for c in (*range(0x20), 0x7F, *range(0x80, 0xA0))}
_ESCAPES.update({ord("\n"): "\\n", ord("\r"): "\\r", ord("\t"): "\\t"})


def one_line(text: object, limit: int = MESSAGE_LIMIT) -> str:
    """``text`` as one line of at most about ``limit`` characters.

    Surrounding white space is dropped, line breaks and other control
    characters inside are shown escaped (``\\n``, ``\\x1b``), and a text
    longer than ``limit`` keeps its first and last parts with the number of
    characters left out between them.

    Examples
    --------
    >>> one_line('Invalid group code "$DIMGAP\\n"\\n')
    'Invalid group code "$DIMGAP\\\\n"'
    >>> len(one_line("x" * 100_000)) <= MESSAGE_LIMIT
    True
    """
    flat = str(text).strip().translate(_ESCAPES)
    if len(flat) <= limit:
        return flat
    tail = limit // 4
    frame = " ...[ characters left out]... "
    head = max(limit - tail - len(frame) - len(str(len(flat))), 0)
    cut = f" ...[{len(flat) - head - tail} characters left out]... "
    return flat[:head] + cut + flat[len(flat) - tail :]


class SpaceframeError(Exception):
    """Root of every exception raised on purpose by spaceframe.

    Its text is always one line of at most :data:`MESSAGE_LIMIT` characters
    (see :func:`one_line`), whatever library text it quotes.
    """

    def __str__(self) -> str:
        return one_line(super().__str__())


class ModelError(SpaceframeError, ValueError):
    """Bad input to the model: the message names the entity, index and value."""


class ReadError(SpaceframeError, OSError):
    """A file could not be read into a model: the message names the file."""

    def __init__(self, message: str) -> None:
        # OSError's constructor interprets a second positional argument as
        # errno; keep the plain one-argument form so str(err) is the message.
        super().__init__(message)

    def __str__(self) -> str:
        return one_line(self.args[0]) if self.args else ""


class WriteError(SpaceframeError, OSError):
    """An output file could not be written: the message names the file."""

    def __init__(self, message: str) -> None:
        super().__init__(message)  # one argument: see ReadError

    def __str__(self) -> str:
        return one_line(self.args[0]) if self.args else ""


class MechanismError(SpaceframeError, np.linalg.LinAlgError):
    """The frame cannot carry the load: a mechanism or rigid-body motion.

    Attributes
    ----------
    nodes : (k,) int
        Node ids involved in the mechanism (may be empty when unknown).
    directions : (k,) str
        For each node, the unrestrained direction ("x", "y", "z" or a
        description of a direction vector).
    """

    def __init__(
        self,
        message: str,
        nodes: np.ndarray | None = None,
        directions: list[str] | None = None,
    ) -> None:
        super().__init__(message)
        self.nodes = np.asarray(nodes if nodes is not None else [], dtype=np.int64)
        self.directions = list(directions or [])


class SolverError(SpaceframeError, RuntimeError):
    """A linear solver failed or returned an answer that did not check out."""


class ProjectError(SpaceframeError, ValueError):
    """Bad model file: the message names the file, the key path and the value."""


class SpaceframeWarning(UserWarning):
    """Warnings issued by spaceframe (e.g. a model in several parts).

    Like the errors, its text is one line of limited length.
    """

    def __str__(self) -> str:
        return one_line(super().__str__())
