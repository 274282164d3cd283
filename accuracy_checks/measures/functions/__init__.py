"""Reference implementations of the accuracy measures (docs/measures.md §1–15).

Each function works on one series (or one pooled set of rows) given as 1-D array-likes of
the same length, written for reading, not speed: the engine computes the same figures from
grouped statistics and vectorised group reductions (:mod:`accuracy_checks.measures.stats`,
the measure families and the registry), and the tests hold the two to the same values.

- :mod:`~accuracy_checks.measures.functions.point`: ME, Bias %, MAE, MAPE, WAPE, RMSE, SDE
  and the cost of error; :func:`~accuracy_checks.measures.functions.point.present`, the input
  rule all share.
- :mod:`~accuracy_checks.measures.functions.series`: sMAPE, MASE, the tracking signals, the
  naive baselines and forecast value added (one series in time order).
- :mod:`~accuracy_checks.measures.functions.intervals`: interval coverage, pinball loss, the
  interval score and MSIS.

Conventions (docs/measures.md):

- ``e = actual − forecast``; a positive error is an **under-forecast**.
- Rows where any input is NaN are dropped first; ``±inf`` is not dropped.
- Percentages are in percent (×100), never fractions.
- An undefined value is ``nan`` (no rows, a zero denominator, too few rows), never 0 or inf.
"""

from accuracy_checks.measures.functions import intervals, point, series
from accuracy_checks.measures.functions.intervals import *  # noqa: F403
from accuracy_checks.measures.functions.point import *  # noqa: F403
from accuracy_checks.measures.functions.series import *  # noqa: F403

__all__ = [*point.__all__, *series.__all__, *intervals.__all__]
