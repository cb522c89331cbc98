"""Member design checks over analysis results.

One module per kind of check: ``steel`` (EN 1993-1-1 axial resistance,
flexural buckling and slenderness), ``deflection`` (span/N limits),
``combinations`` (EN 1990 combinations generated from actions), ``sizing``
(lightest catalogue section that passes).  Every check returns arrays of
length b (one value per member); none changes the Model.

The checks cover member resistance to axial force only.  Joints,
connections, local effects, fatigue, fire and the national annex are the
engineer's; results must be checked by a qualified engineer.
"""

from spaceframe.design.combinations import Action, generate_combinations
from spaceframe.design.deflection import DeflectionCheck, check_deflection
from spaceframe.design.governing import GoverningCheck, check_results
from spaceframe.design.sizing import SizingResult, chs_catalogue, size_groups
from spaceframe.design.steel import (
    IMPERFECTION_FACTORS,
    MemberCheck,
    buckling_curve_for,
    buckling_reduction,
    check_members,
)

__all__ = [
    "IMPERFECTION_FACTORS",
    "Action",
    "DeflectionCheck",
    "GoverningCheck",
    "MemberCheck",
    "SizingResult",
    "buckling_curve_for",
    "buckling_reduction",
    "check_deflection",
    "check_members",
    "check_results",
    "chs_catalogue",
    "generate_combinations",
    "size_groups",
]
