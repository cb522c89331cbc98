"""Shared pieces of model-file tests: a small bar's geometry and supports, and reading text."""

from __future__ import annotations

from pathlib import Path

import pytest

from spaceframe.errors import ProjectError
from spaceframe.project import Project, parse_project

#: A straight bar of two 3 m members along x (invented test data).
BAR_GEOMETRY = """\
[geometry]
nodes = [[0, 0, 0], [3, 0, 0], [6, 0, 0]]
members = [[0, 1], [1, 2]]
"""
#: The bar held at both ends and across (y, z) at its middle node, free along x there.
BAR_SUPPORTS = """\
[[supports]]
nodes = [0, 2]
restrain = "xyz"
[[supports]]
nodes = [1]
restrain = "yz"
"""


def project_from_text(tmp_path: Path, text: str, name: str = "canopy.toml") -> Project:
    """Write ``text`` as the model file ``name`` in ``tmp_path`` and read it."""
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return parse_project(path.read_text(encoding="utf-8"), path)


def project_error(tmp_path: Path, text: str) -> str:
    """The one-line message of the ProjectError that reading ``text`` raises."""
    with pytest.raises(ProjectError) as exc:
        project_from_text(tmp_path, text)
    message = str(exc.value)
    assert "\n" not in message, message
    return message
