"""Results of the analyses, and the figures every output reports.

One module per result kind, each class naming the analysis that made it in
its ``analysis`` attribute (the :class:`Result` protocol):

- ``static``: the result of one case or combination (`CaseResult`, analysis
  "static", linear or with tension-only members), the set of them
  (`Results`) and envelopes;
- ``modes``: buckling factors (`BucklingResult`, "buckling") and natural
  frequencies (`VibrationResult`, "vibration") with their mode shapes;
- ``path``: the equilibrium path of a nonlinear analysis (`LoadPath`,
  "nonlinear");
- ``summary``: the figures (maximum movement, largest forces, totals,
  residual) that the tables, the report and the command line share.

Results own copies of what they report: changing the model after an
analysis does not change an earlier result.
"""

from typing import ClassVar, Protocol, runtime_checkable

from spaceframe.results.modes import BucklingResult, VibrationResult
from spaceframe.results.path import STRAIN_MEASURE, LoadPath
from spaceframe.results.static import CaseResult, Envelope, Results

__all__ = [
    "STRAIN_MEASURE",
    "BucklingResult",
    "CaseResult",
    "Envelope",
    "LoadPath",
    "Result",
    "Results",
    "VibrationResult",
]


@runtime_checkable
class Result(Protocol):
    """What every result kind has: the name of the analysis that made it.

    ``analysis`` is "static", "buckling", "vibration" or "nonlinear"; writers
    and the report choose what to show by it.
    """

    analysis: ClassVar[str]
