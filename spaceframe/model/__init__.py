"""The Model: nodes, members, supports, member properties and load cases as numpy arrays.

Floor 2 of the package: it imports only the ground floor (errors, tolerances, units,
sections, materials) and never an analysis, a reader or a writer.  ``loads`` holds the
load arithmetic that turns panel pressures, self-weight and temperature into load-case
arrays.
"""

from spaceframe.model.core import ANALYSES, STANDARD_GRAVITY, LoadCase, Model

__all__ = ["ANALYSES", "STANDARD_GRAVITY", "LoadCase", "Model"]
