"""File readers and writers, installed as the subpackage ``spaceframe.io``.

The folder is named ``io/`` in the repository but is mapped to
``spaceframe.io`` by pyproject.toml, so it never shadows the standard
library's :mod:`io`.

Each format module offers ``read(path, **options) -> Model`` and/or
``write(path, model, ...)``.  The table below maps file suffixes to modules;
it is the one place to register a format.
"""

from __future__ import annotations

#: suffix -> module name inside spaceframe.io (filled in by the import issue).
READERS: dict[str, str] = {}
WRITERS: dict[str, str] = {}
