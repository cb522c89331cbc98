"""The model file: a TOML file read into a Model with its load cases and combinations.

``core`` reads the file and builds the Model: ``parse`` (with ``schema``, the typed
table reader, ``selectors`` and ``loads``) turns the text into the plain dataclasses
of ``spec``, and ``build`` makes the Model from them.  ``design`` reads its
``[design]`` and ``[actions]`` tables, ``analysis`` its ``[analysis]`` table, and
``cache`` keeps the imported, healed drawing beside the results so that a re-run does
not parse it again.
"""

from spaceframe.project.core import RESTRAINT_ALIASES, Project, load_project, parse_project

__all__ = ["RESTRAINT_ALIASES", "Project", "load_project", "parse_project"]
