"""Project exceptions and warnings.

One root, :class:`SpaceframeError`; each leaf also inherits the builtin that
callers would naturally catch (``ValueError`` for bad input, ``LinAlgError``
for a frame that cannot carry load, ``OSError`` for files).
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "MechanismError",
    "ModelError",
    "ProjectError",
    "ReadError",
    "SolverError",
    "SpaceframeError",
    "SpaceframeWarning",
]


class SpaceframeError(Exception):
    """Root of every exception raised on purpose by spaceframe."""


class ModelError(SpaceframeError, ValueError):
    """Bad input to the model: the message names the entity, index and value."""


class ReadError(SpaceframeError, OSError):
    """A file could not be read into a model: the message names the file."""

    def __init__(self, message: str) -> None:
        # OSError's constructor interprets a second positional argument as
        # errno; keep the plain one-argument form so str(err) is the message.
        super().__init__(message)

    def __str__(self) -> str:
        return str(self.args[0]) if self.args else ""


class WriteError(SpaceframeError, OSError):
    """An output file could not be written: the message names the file."""

    def __init__(self, message: str) -> None:
        super().__init__(message)  # one argument: see ReadError

    def __str__(self) -> str:
        return str(self.args[0]) if self.args else ""


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
    """Warnings issued by spaceframe (e.g. a model in several parts)."""
