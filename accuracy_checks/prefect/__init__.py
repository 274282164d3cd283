"""Prefect 3 integration: the gate as a task of your flow (extra ``prefect``).

Install with ``pip install "accuracy-checks[prefect]"``; ``import accuracy_checks`` never
imports Prefect. Use::

    from prefect import flow
    from prefect.futures import wait
    from accuracy_checks.prefect import check_forecast, first_failure

    @flow
    def nightly() -> object:
        check = check_forecast.submit("accuracy-checks.yaml", forecast_path="out/forecast.csv")
        done = publish.submit("out/forecast.csv", wait_for=[check])  # never runs on a failed gate
        wait([check, done])
        return first_failure(check, done) or check.result()  # a failed gate fails the flow

- :data:`check_forecast` (:mod:`.gate`) runs the configured checks (``run_checks``: the audit
  record is written and waivers applied on every verdict) and returns the
  :class:`~accuracy_checks.results.RunReport`. It publishes a table artifact of the results
  that did not pass and a Markdown artifact of the summary. On ``fail`` it ends ``Failed``
  with the verdict as the state's message and no traceback in the log (``future.result()``
  raises :class:`~accuracy_checks.errors.GateFailed`, a short, picklable summary); on ``warn``
  it logs every warning through the run logger and ends ``Completed`` under the name
  :data:`WARNED_STATE_NAME`; an unusable config or input ends it ``Failed`` with the CLI's
  one-paragraph message and no traceback of ours. ``alert=`` takes your callable, which
  receives the report.
- on a flow run by ``DaskTaskRunner``, ``check_forecast(engine="dask")`` checks the series
  in shards on the flow's own cluster (``flows/dask_gate.py``; docs/engines.md).

Remember Prefect's rule: a flow that returns ``None`` ends ``Completed`` even when a task in it
failed; return the failed state (:func:`first_failure`) or raise.
"""

from __future__ import annotations

try:
    import prefect  # noqa: F401
except ImportError as exc:  # pragma: no cover - depends on the environment
    raise ImportError(
        'accuracy_checks.prefect needs Prefect 3: pip install "accuracy-checks[prefect]"'
    ) from exc

from accuracy_checks.prefect import gate as _gate
from accuracy_checks.prefect.gate import *  # noqa: F403  (the task and its helpers: gate.__all__)

__all__ = list(_gate.__all__)
