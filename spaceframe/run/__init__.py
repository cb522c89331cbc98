"""The main job: check and run a model file and write its results folder.

``job`` holds ``check`` and ``run`` (one function per phase); ``folder`` builds the
results folder under a temporary name and swaps it in; ``outputs`` runs the writers
into it; ``design`` decides which members and results a run checks; ``report`` writes
the HTML report.  The command line only parses its arguments and calls these.
"""

from spaceframe.run.job import CheckReport, Progress, RunOutcome, check, load, run

__all__ = ["CheckReport", "Progress", "RunOutcome", "check", "load", "run"]
