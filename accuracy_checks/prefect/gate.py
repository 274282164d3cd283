"""The gate as a Prefect task: run the checks, publish artifacts, pass, warn or fail.

Contract of :data:`check_forecast` (one task run = one gate run, recorded in the audit store):

- **pass**: returns ``Completed(data=report)``; the run's state is plain ``Completed``.
- **warn**: logs every ``warn`` result through the run logger, then returns
  ``Completed(name=WARNED_STATE_NAME, data=report)``: the task (and its flow) complete, and
  the UI shows that the gate had warnings. With ``fail_on="warn"`` a warning fails instead.
- **fail**: returns ``Failed(message=…, data=GateFailed)`` (:func:`gate_failed_state`): the
  message is the verdict line and the first findings; the
  :class:`~accuracy_checks.errors.GateFailed` holds them too, with a ``summary`` of the run
  id, cycle, attempt, counts and findings (plain values: it survives pickling across
  processes), and ``future.result()`` raises it. The state is returned, not raised, so the
  run's log shows the verdict and no Python traceback. Downstream tasks that ``wait_for`` it
  never run; the flow must return the failed state (:func:`first_failure`) or raise, or it
  ends ``Completed``. The audit record was written before.
- **unusable config or input**: logs the CLI's one-paragraph message
  (``accuracy-checks: error: …``) and returns ``Failed(message=<that line>, data=<the
  UsageError>)``: no traceback of ours in the log, nothing recorded (as the CLI's exit 2),
  and ``future.result()`` raises the ``UsageError``.

On pass, warn and fail alike the task publishes two artifacts (when it runs inside a flow or
task run): ``<artifact_key>-findings``, a table of the results that need attention (``fail``,
``error``, ``warn``, ``waived``; skipped results count as passes and are summed up in the
Markdown), and ``<artifact_key>-summary``, the Markdown summary
(:func:`~accuracy_checks.outputs.render_markdown`). ``alert=`` takes a callable (or a list
of them) that receives the :class:`~accuracy_checks.results.RunReport` when the verdict is in
``alert_on`` (default warn and fail); an alert that raises is logged and does not change the
verdict. With ``check_forecast.with_options(retries=N)`` only unexpected errors are retried
(:func:`retry_only_glitches`), never a verdict or an unusable input.

For unit tests call the body without a server: ``check_forecast.fn(...)`` inside
``prefect.logging.disable_run_logger()`` (artifacts are skipped outside a run).
"""

from __future__ import annotations

import logging
import re
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any, Literal

from prefect import get_run_logger, task
from prefect.artifacts import create_markdown_artifact, create_table_artifact
from prefect.cache_policies import NO_CACHE
from prefect.context import FlowRunContext, TaskRunContext
from prefect.futures import PrefectFuture
from prefect.states import Completed, Failed, State

from accuracy_checks.config import Config
from accuracy_checks.errors import GateFailed, UsageError
from accuracy_checks.outputs.findings import top_findings
from accuracy_checks.outputs.markdown import render_markdown
from accuracy_checks.outputs.wording import (
    describe_threshold,
    describe_value,
    headline,
    result_label,
    status_word,
)
from accuracy_checks.results import FAILING, NEEDS_ATTENTION, RunReport, sort_for_display

__all__ = [
    "MAX_TABLE_ROWS",
    "WARNED_STATE_NAME",
    "Alert",
    "check_forecast",
    "cli_message",
    "findings",
    "findings_table",
    "first_failure",
    "gate_failed_state",
    "gate_failure",
    "retry_only_glitches",
    "run_gate",
    "usage_failure",
]

#: Name of the ``Completed`` state of a gate that passed with warnings.
WARNED_STATE_NAME = "Completed with warnings"
#: Rows of the findings table artifact before it is cut (the description says so).
MAX_TABLE_ROWS = 500
#: Findings named in a GateFailed message and in the warn state's message.
MAX_FINDINGS = 3

Alert = Callable[[RunReport], object]
_KEY = re.compile(r"^[a-z0-9](?:[a-z0-9-]*[a-z0-9])?$")


class _NoEmptyExcInfo(logging.Filter):
    """Drops the empty ``exc_info`` of Prefect's "Task run failed with state: …" record.

    Prefect logs that line with ``exc_info=True`` also when a task *returns* a ``Failed``
    state, where no exception is being handled; Python then prints ``NoneType: None`` under
    it, which reads like a crash. A record with a real exception is left as it is.
    """

    def filter(self, record: logging.LogRecord) -> bool:
        info = record.exc_info
        if isinstance(info, tuple) and info[0] is None:
            record.exc_info = None
        return True


def _install_log_filter() -> None:
    logger = logging.getLogger("prefect.task_runs")
    if not any(isinstance(f, _NoEmptyExcInfo) for f in logger.filters):
        logger.addFilter(_NoEmptyExcInfo())


_install_log_filter()


def cli_message(exc: UsageError) -> str:
    """The line the CLI prints for an unusable config or input (exit code 2).

    >>> from accuracy_checks.errors import ConfigError
    >>> cli_message(ConfigError("Config x.yaml: unknown key 'horizn'."))
    "accuracy-checks: error: Config x.yaml: unknown key 'horizn'."
    """
    return f"accuracy-checks: error: {exc.message}"


def usage_failure(exc: UsageError) -> State:
    """A ``Failed`` state for an unusable config or input: the CLI's message, the error as its
    data (``state.result()`` raises it), no traceback."""
    return Failed(message=cli_message(exc), data=exc)


def run_gate(config: Config | str | Path, *, forecast_path: str | Path | None = None,
             actuals_path: str | Path | None = None, snapshot: bool = True,
             label: str | None = None,
             progress: Callable[[str], None] | None = None,
             forecast: Any = None, actuals: Any = None, history: Any = None,
             mapping: Any = None, engine: str | None = None,
             scheduler: str | None = None) -> RunReport:
    """Load ``config`` (a path or a loaded :class:`~accuracy_checks.config.Config`) and run
    :func:`~accuracy_checks.engine.run_checks`: read, check, judge, apply waivers, snapshot
    and record the run in the audit store. ``forecast``, ``actuals``, ``history`` and
    ``mapping`` take frames (pandas or pyarrow) in place of the config's places. ``engine``
    and ``scheduler`` override the config's ``engine`` key; the dask engine run inside a task
    of a flow on ``DaskTaskRunner`` (no scheduler given) uses that flow's cluster. Raises
    ``UsageError`` on an unusable config or input (then nothing is recorded)."""
    from accuracy_checks.api import read_config
    from accuracy_checks.engine import run_checks

    cfg = read_config(config)
    return run_checks(cfg, forecast_path=Path(forecast_path) if forecast_path else None,
                      actuals_path=Path(actuals_path) if actuals_path else None,
                      progress=progress, snapshot=snapshot, label=label,
                      forecast=forecast, actuals=actuals, history=history, mapping=mapping,
                      engine=engine, scheduler=scheduler)


def findings(report: RunReport, n: int = MAX_FINDINGS) -> list[str]:
    """The ``n`` most important findings of ``report`` in plain words (failures first;
    :func:`~accuracy_checks.outputs.findings.top_findings`)."""
    return top_findings(report, n)


def gate_failure(report: RunReport, *, fail_on: str = "fail") -> GateFailed:
    """The :class:`GateFailed` of a failed (or, with ``fail_on="warn"``, warned) run.

    Its message is the verdict line and the first findings; ``summary`` holds ``status``,
    ``headline``, ``run_id``, ``cycle``, ``attempt``, ``counts``, ``findings`` and
    ``fail_on``: plain values only, so it pickles across process boundaries.
    """
    found = findings(report)
    text = f"Forecast gate failed: {headline(report)}"
    if report.status == "warn":
        text += " (fail_on=warn: warnings fail the gate)"
    if found:
        text += ". " + " | ".join(found)
    return GateFailed(text, status=report.status, headline=headline(report),
                      run_id=report.run_id, cycle=report.cycle, attempt=report.attempt,
                      counts=report.counts(), findings=found, fail_on=fail_on)


def gate_failed_state(report: RunReport, *, fail_on: str = "fail") -> State:
    """The ``Failed`` state of a failed (or, with ``fail_on="warn"``, warned) run: the
    :func:`gate_failure` message as the state's message and the :class:`GateFailed` as its
    data (``state.result()`` and ``future.result()`` raise it). Returned, not raised, so that
    Prefect logs the verdict and no traceback."""
    exc = gate_failure(report, fail_on=fail_on)
    return Failed(message=str(exc), data=exc)


def findings_table(report: RunReport, *, limit: int = MAX_TABLE_ROWS) -> list[dict[str, Any]]:
    """Rows of the findings table artifact: one per result with a status in
    :data:`~accuracy_checks.results.NEEDS_ATTENTION` (the Markdown summary lists them too),
    failures first, at most ``limit``. Values are worded as in every other output (sign in
    words, percent in percent); every cell is a str or an int (JSON-safe)."""
    rows: list[dict[str, Any]] = []
    for r in sort_for_display(report.results):
        if r.status not in NEEDS_ATTENTION:
            continue
        if len(rows) == limit:
            break
        rows.append({
            "status": status_word(r.status),
            "check": r.check,
            "segment": r.segment if r.segment is not None else "",
            "lag": r.lag if r.lag is not None else "",
            "measure": r.measure or "",
            "value": describe_value(r) if r.value is not None or r.measure else "",
            "thresholds": describe_threshold(r),
            "series": r.n_series if r.n_series is not None else "",
            "rows": r.n_obs if r.n_obs is not None else "",
            "message": r.message,
            "result": result_label(r),
        })
    return rows


def first_failure(*runs: PrefectFuture[Any] | State) -> State | None:
    """A ``Failed`` state for a flow to return: that of the first run (future or state, in
    pipeline order) that failed, carrying its exception and message; ``None`` if none failed.

    A flow that returns ``None`` ends ``Completed`` even when a task in it failed: returning
    this state instead fails the flow, and calling the flow raises the task's exception
    (``GateFailed``, ``UsageError``) with no traceback in the flow's log.
    """
    for run in runs:
        state = run.state if isinstance(run, PrefectFuture) else run
        if state.is_failed() or state.is_crashed():
            exc = state.result(raise_on_failure=False)
            if isinstance(exc, UsageError):
                return Failed(message=cli_message(exc), data=exc)
            if isinstance(exc, BaseException):
                return Failed(message=str(exc) or state.message, data=exc)
            return Failed(message=state.message)
    return None


def _default_label() -> str | None:
    """``<flow name>/<flow run name> (<flow run id>)`` inside a flow run, else ``None``."""
    from prefect.runtime import flow_run

    run_id = flow_run.get_id()
    if not run_id:
        return None
    return f"{flow_run.get_flow_name()}/{flow_run.get_name()} ({run_id})"


def _in_run() -> bool:
    return TaskRunContext.get() is not None or FlowRunContext.get() is not None


def _publish_artifacts(report: RunReport, key: str, logger: Any) -> None:
    rows = findings_table(report)
    n_attention = sum(r.status in NEEDS_ATTENTION for r in report.results)
    cut = f" (first {len(rows)} of {n_attention})" if n_attention > len(rows) else ""
    line = headline(report)
    try:
        create_table_artifact(
            table=rows, key=f"{key}-findings",
            description=f"accuracy-checks {line}: results that need attention{cut}")
        create_markdown_artifact(markdown=render_markdown(report), key=f"{key}-summary",
                                 description=f"accuracy-checks {line}")
    except Exception as exc:  # the verdict matters more than its artifacts
        logger.warning(f"could not publish the gate's artifacts ({type(exc).__name__}: {exc}); "
                       "the verdict and the audit record are not affected")


def _call_alerts(alerts: Sequence[Alert], report: RunReport, logger: Any) -> None:
    for fn in alerts:
        try:
            fn(report)
        except Exception as exc:  # an alert must not change the verdict
            name = getattr(fn, "__qualname__", repr(fn))
            logger.warning(f"the alert {name} raised {type(exc).__name__}: {exc}; "
                           "the gate's verdict stands")


def _as_alerts(alert: Alert | Sequence[Alert] | None) -> list[Alert]:
    if alert is None:
        return []
    if callable(alert):
        return [alert]
    alerts = list(alert)
    bad = [a for a in alerts if not callable(a)]
    if bad:
        raise TypeError(f"alert must be a callable or a list of callables, got {bad[0]!r}")
    return alerts


def retry_only_glitches(task: object, task_run: object, state: State) -> bool:
    """Prefect ``retry_condition_fn`` of the gate task: a verdict (``GateFailed``) or an
    unusable input (``UsageError``) is never retried, since a retry would only record the
    same verdict again as a new attempt; anything else (a locked store, a lost connection) is.

    >>> retry_only_glitches(None, None, Failed(data=GateFailed("Forecast gate failed")))
    False
    >>> retry_only_glitches(None, None, Failed(data=TimeoutError("store busy")))
    True
    """
    error = state.result(raise_on_failure=False) if state.data is not None else None
    return not isinstance(error, GateFailed | UsageError)


@task(name="accuracy-gate", cache_policy=NO_CACHE, persist_result=False,
      retry_condition_fn=retry_only_glitches)
def check_forecast(
    config: Config | str | Path,
    *,
    forecast_path: str | Path | None = None,
    actuals_path: str | Path | None = None,
    snapshot: bool = True,
    label: str | None = None,
    fail_on: Literal["warn", "fail"] = "fail",
    alert: Alert | Sequence[Alert] | None = None,
    alert_on: Sequence[str] = ("warn", "fail"),
    artifact_key: str = "accuracy-gate",
    forecast: Any = None,
    actuals: Any = None,
    history: Any = None,
    mapping: Any = None,
    engine: Literal["pandas", "dask"] | None = None,
    scheduler: str | None = None,
) -> State:
    """Gate a forecast: run the checks of ``config``, record the run, publish artifacts, then
    pass, warn or fail (see the module docstring for the contract of each outcome).

    ``forecast_path``/``actuals_path`` override the config's paths (as ``--forecast`` and
    ``--actuals``); ``forecast``, ``actuals``, ``history`` (one frame or a list) and
    ``mapping`` take pandas DataFrames or pyarrow Tables with the configured column names
    instead, validated like files (a bad frame fails the task as a bad file does, naming
    the frame and the column); ``snapshot=False`` is a dry run (not archived; still recorded);
    ``label`` is kept with the audit record (default: ``<flow>/<flow run name> (<id>)``);
    ``fail_on="warn"`` fails on warnings too; ``alert`` is called with the report when the
    verdict is in ``alert_on``; ``artifact_key`` prefixes the artifacts' keys (lower-case
    letters, digits and dashes); ``engine``/``scheduler`` choose the engine (default: the
    config's ``engine``): on a flow whose task runner is ``DaskTaskRunner`` the dask engine
    checks the shards on the flow's own cluster (docs/engines.md).
    """
    if fail_on not in ("warn", "fail"):
        raise ValueError(f"fail_on must be 'warn' or 'fail', got {fail_on!r}")
    if not _KEY.match(artifact_key):
        raise ValueError(f"artifact_key must be lower-case letters, digits and dashes, got "
                         f"{artifact_key!r}")
    alerts = _as_alerts(alert)
    logger = get_run_logger()
    try:
        report = run_gate(config, forecast_path=forecast_path, actuals_path=actuals_path,
                          snapshot=snapshot, label=label or _default_label(),
                          progress=logger.info, forecast=forecast, actuals=actuals,
                          history=history, mapping=mapping, engine=engine,
                          scheduler=scheduler)
    except UsageError as exc:
        logger.error(cli_message(exc))
        return usage_failure(exc)

    if _in_run():
        _publish_artifacts(report, artifact_key, logger)
    for r in sort_for_display(report.results):
        if r.status in FAILING:
            logger.error(f"{status_word(r.status)} {result_label(r)}: {r.message}")
        elif r.status == "warn":
            logger.warning(f"{status_word(r.status)} {result_label(r)}: {r.message}")
    logger.log(logging.ERROR if report.status == "fail" else logging.INFO,
               f"{headline(report)}; recorded as run {report.run_id}")
    if report.status in alert_on:
        _call_alerts(alerts, report, logger)

    if report.status == "fail" or (report.status == "warn" and fail_on == "warn"):
        return gate_failed_state(report, fail_on=fail_on)
    if report.status == "warn":
        found = findings(report)
        return Completed(name=WARNED_STATE_NAME, data=report,
                         message=f"{headline(report)}: " + " | ".join(found))
    return Completed(message=headline(report), data=report)
