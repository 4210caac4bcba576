"""Tolerance analysis: nominal, worst-case corners and Monte Carlo (docs/analysis.md).

`tolerances` says which values carry a tolerance and moves them; `sensitivity`
measures how each tolerance moves each limit's margin; `worstcase` and `montecarlo`
are the two analyses; `run.analyse` drives them for a check run. docs/analysis.md
explains the methods and their limits.
"""

from checker.analysis.run import analyse

__all__ = ["analyse"]
