"""Results of the analyses, and the figures every output reports.

``static`` holds the static result of one case or combination (`CaseResult`), the
set of them (`Results`) and envelopes; ``summary`` the figures (maximum movement,
largest forces, totals, residual) that the tables, the report and the command line
share.  Results own copies of what they report.
"""

from spaceframe.results.static import CaseResult, Envelope, Results

__all__ = ["CaseResult", "Envelope", "Results"]
