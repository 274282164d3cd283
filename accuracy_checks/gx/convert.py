"""From a GX validation result to this package's verdict and :class:`RunReport`.

So that a run validated through GX lands in the same outputs (console, JSON, JUnit, Markdown)
and the same audit store as a CLI run:

- this package's expectations carry the CLI's results in ``details["results"]``; they are
  rebuilt as :class:`~accuracy_checks.results.CheckResult` objects, and the results of the
  warning and the critical expectation of one measure are merged (the worse status wins):
  the n-th result of a (check, segment, lag, measure) in one expectation merges with the
  n-th of the same key in another, so results that share a key within one expectation (two
  ``archive.snapshot`` warnings) all stay.
  The severity caps the status: a ``warning`` or ``info`` expectation never makes a result
  worse than ``warn``, as GX would not fail on it;
- a built-in expectation becomes one result: ``check`` from its
  ``meta["accuracy_checks"]["check"]`` (else ``gx.<expectation type>``), status ``pass`` when
  it succeeded, else ``fail`` (severity ``critical``) or ``warn`` (``warning``/``info``);
  ``value`` is its unexpected count (or its observed value), ``examples`` its first unexpected
  values;
- an expectation that raised becomes an ``error`` result with GX's exception message.
"""

from __future__ import annotations

import math
import uuid
from collections import Counter
from collections.abc import Iterable, Mapping
from datetime import UTC, datetime
from typing import Any

from accuracy_checks.gx.compute import result_from_dict
from accuracy_checks.gx.expectations import EXPECTATION_CHECKS
from accuracy_checks.results import (
    ALL_SERIES,
    CheckResult,
    RunReport,
    StatusName,
    Verdict,
    worst_status,
)

__all__ = ["to_run_report", "validation_documents", "verdict"]

_EXAMPLES = 10
_RANK = {"fail": 3, "error": 3, "warn": 2, "pass": 1, "waived": 0, "skipped": 0}


def validation_documents(result: Any) -> list[dict[str, Any]]:
    """The suite validation results in ``result`` as JSON dicts (GX's ``to_json_dict``).

    ``result`` may be an ``ExpectationSuiteValidationResult`` (``ValidationDefinition.run``),
    a ``CheckpointResult`` (``Checkpoint.run``), the dict form of either, or a list of them.
    """
    if isinstance(result, list | tuple):
        return [doc for item in result for doc in validation_documents(item)]
    run_results = getattr(result, "run_results", None)
    if run_results is not None:
        return [r.to_json_dict() for r in run_results.values()]
    if hasattr(result, "to_json_dict"):
        return [result.to_json_dict()]
    if isinstance(result, Mapping):
        if "run_results" in result:
            inner = result["run_results"]
            return validation_documents(list(inner.values()) if isinstance(inner, Mapping)
                                        else list(inner))
        if "results" in result:
            return [dict(result)]
    raise TypeError(
        "expected a GX validation result (ExpectationSuiteValidationResult, CheckpointResult "
        f"or their to_json_dict() form), got {type(result).__name__}"
    )


def _severity(expectation_result: Mapping[str, Any]) -> str:
    config = expectation_result.get("expectation_config") or {}
    severity = config.get("severity") or "critical"
    return str(getattr(severity, "value", severity))


def _raised(expectation_result: Mapping[str, Any]) -> str | None:
    """GX's exception message if the expectation raised, else ``None``."""
    info = expectation_result.get("exception_info") or {}
    if info.get("raised_exception"):
        return str(info.get("exception_message") or "the expectation raised an exception")
    for value in info.values():  # keyed by metric when a metric failed
        if isinstance(value, Mapping) and value.get("raised_exception"):
            return str(value.get("exception_message") or "a metric raised an exception")
    return None


def verdict(result: Any) -> Verdict:
    """``fail`` if a ``critical`` expectation failed (or raised), ``warn`` if a ``warning`` or
    ``info`` one did, else ``pass`` — GX's ``get_max_severity_failure`` in this package's
    words."""
    statuses = []
    for doc in validation_documents(result):
        for er in doc.get("results", []):
            if not er.get("success", False):
                statuses.append("fail" if _severity(er) == "critical" else "warn")
    return worst_status(statuses)


def _cap(result: CheckResult, severity: str) -> CheckResult:
    if severity == "critical" or result.status not in ("fail", "error"):
        return result
    note = f" (reported as a warning: the GX expectation has severity {severity!r})"
    return CheckResult(**{**result.__dict__, "status": "warn",
                          "message": result.message + note})


def _bound_text(kwargs: Mapping[str, Any]) -> str:
    for key in ("column", "column_list"):
        if key in kwargs:
            value = kwargs[key]
            return ", ".join(map(str, value)) if isinstance(value, list) else str(value)
    if "column_A" in kwargs:
        return f"{kwargs['column_A']} vs {kwargs.get('column_B')}"
    return "the batch"


def _number(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, int | float):
        return None
    return float(value) if math.isfinite(value) else None


def _builtin_result(er: Mapping[str, Any], severity: str, error: str | None) -> CheckResult:
    config = er.get("expectation_config") or {}
    etype = str(config.get("type") or config.get("expectation_type") or "expectation")
    kwargs = config.get("kwargs") or {}
    tag = ((config.get("meta") or {}).get("accuracy_checks") or {})
    check = str(tag.get("check") or f"gx.{etype}")
    res = er.get("result") or {}
    where = _bound_text(kwargs)
    details = {"gx_expectation": etype, "severity": severity,
               "kwargs": {k: v for k, v in kwargs.items() if k not in ("batch_id",)}}
    if error is not None:
        return CheckResult(check, "error", segment=ALL_SERIES,
                           message=f"GX {etype} on {where} could not run: {error}",
                           details=details)
    success = bool(er.get("success"))
    status: StatusName = "pass" if success else ("fail" if severity == "critical" else "warn")
    if "unexpected_count" in res:
        bad = int(res.get("unexpected_count") or 0)
        total = int(res.get("element_count") or 0)
        examples = [ex if isinstance(ex, dict) else {"value": ex}
                    for ex in list(res.get("partial_unexpected_list") or [])[:_EXAMPLES]]
        message = (f"GX {etype} on {where}: {bad:,} of {total:,} rows unexpected"
                   if bad else f"GX {etype} on {where}: all {total:,} rows as expected")
        return CheckResult(check, status, segment=ALL_SERIES, value=float(bad), n_obs=bad,
                           unit="count", message=message, examples=examples if bad else [],
                           details=details)
    observed = res.get("observed_value")
    message = f"GX {etype} on {where}: observed {observed!r}" + (
        "" if success else ", not as expected")
    return CheckResult(check, status, segment=ALL_SERIES, value=_number(observed),
                       message=message, details={**details, "observed_value": observed})


def _our_results(er: Mapping[str, Any], severity: str, error: str | None
                 ) -> tuple[list[CheckResult], Mapping[str, Any]]:
    config = er.get("expectation_config") or {}
    etype = str(config.get("type"))
    details = ((er.get("result") or {}).get("details") or {})
    if error is not None:
        kwargs = config.get("kwargs") or {}
        measure = kwargs.get("measure") or details.get("measure")
        return [CheckResult(EXPECTATION_CHECKS[etype], "error", segment=ALL_SERIES,
                            measure=measure,
                            message=f"GX {etype} could not run: {error}")], details
    if "results" not in details:  # e.g. result_format BOOLEAN_ONLY: only GX's success is left
        success = bool(er.get("success"))
        kwargs = config.get("kwargs") or {}
        status: StatusName = "pass" if success else ("fail" if severity == "critical" else "warn")
        return [CheckResult(
            EXPECTATION_CHECKS[etype], status, segment=ALL_SERIES,
            measure=kwargs.get("measure"),
            message=(f"GX {etype} {'succeeded' if success else 'failed'}; its per-segment "
                     "results were not kept (use result_format BASIC or richer)"))], details
    results = [_cap(result_from_dict(d), severity) for d in details["results"]]
    return results, details


def to_run_report(result: Any, *, config_path: str | None = None,
                  run_id: str | None = None) -> RunReport:
    """A :class:`RunReport` of a GX validation result (see the module docstring).

    ``cycle`` is the issue date of the forecast rows (from the coverage expectations),
    ``evaluated_cycles`` the cycles the accuracy expectations measured, ``started_at`` and
    ``finished_at`` GX's validation time, ``inputs["gx"]`` the suites, their success and
    statistics. ``run_id`` defaults to a new random id.
    """
    docs = validation_documents(result)
    merged: dict[tuple[Any, ...], CheckResult] = {}
    others: list[CheckResult] = []
    cycle: str | None = None
    cycles: dict[tuple[Any, ...], dict[str, Any]] = {}
    for doc in docs:
        for er in doc.get("results", []):
            config = er.get("expectation_config") or {}
            etype = str(config.get("type"))
            severity = _severity(er)
            error = _raised(er)
            if etype not in EXPECTATION_CHECKS:
                others.append(_builtin_result(er, severity, error))
                continue
            results, details = _our_results(er, severity, error)
            cycle = cycle or details.get("cycle")
            seen: Counter[tuple[Any, ...]] = Counter()
            for r in results:
                for c in r.details.get("cycles") or []:
                    cycles.setdefault((c.get("cycle"), c.get("attempt"), c.get("source")), c)
                base = (r.check, r.segment, r.lag, r.measure)
                key = (*base, seen[base])
                seen[base] += 1
                if key not in merged or _RANK[r.status] > _RANK[merged[key].status]:
                    merged[key] = r
    times = sorted(t for t in (_time(doc) for doc in docs) if t)
    now = datetime.now(UTC).isoformat(timespec="seconds")
    return RunReport(
        run_id=run_id or uuid.uuid4().hex,
        cycle=cycle,
        attempt=None,
        results=others + list(merged.values()),
        started_at=times[0] if times else now,
        finished_at=times[-1] if times else now,
        config_path=config_path,
        inputs={"gx": _summary(docs)},
        evaluated_cycles=sorted(cycles.values(), key=lambda c: str(c.get("cycle"))),
    )


def _time(doc: Mapping[str, Any]) -> str | None:
    value = (doc.get("meta") or {}).get("validation_time")
    if value is None:
        return None
    if isinstance(value, datetime):
        return value.astimezone(UTC).isoformat(timespec="seconds")
    try:
        return datetime.fromisoformat(str(value)).astimezone(UTC).isoformat(timespec="seconds")
    except ValueError:
        return str(value)


def _summary(docs: Iterable[Mapping[str, Any]]) -> dict[str, Any]:
    suites = []
    for doc in docs:
        meta = doc.get("meta") or {}
        suites.append({
            "suite": doc.get("suite_name"),
            "success": doc.get("success"),
            "statistics": doc.get("statistics"),
            "validation_id": meta.get("validation_id"),
            "great_expectations_version": meta.get("great_expectations_version"),
        })
    return {"suites": suites}
