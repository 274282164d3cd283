"""What the GX metric providers compute, as plain functions on pandas frames (no GX here).

Each function calls the same core function as the CLI on the rows of its kind (see
:mod:`accuracy_checks.gx.batch`) and returns a JSON-ready payload whose ``results`` are
:meth:`CheckResult.to_dict` dicts, so the numbers are the CLI's by construction:

- :func:`accuracy_payload` → :func:`accuracy_checks.checks.accuracy.run_accuracy` (the CLI's
accuracy stage: evaluation frame, every measure, judged by the config's levels — some measures turn
  levels into their own bounds, and the wording of a result depends on its status, so the
  judging happens there, not in the expectation);
- :func:`coverage_payload` → :func:`accuracy_checks.checks.coverage.coverage_checks`, judged
  with the built-in levels only; each coverage expectation re-judges its results with its own
  levels (:func:`rejudge`), so one computation serves every coverage expectation;
- :func:`actuals_payload` → :func:`accuracy_checks.checks.actuals.actuals_checks` (infinite
  actuals fail, missing ones are counted; no levels);
- :func:`notes_payload`: the results about the inputs that
  :func:`~accuracy_checks.gx.batch_from_config` carried in the ``notes`` rows (the engine's
  ``archive.snapshot`` warnings), read back unchanged.
"""

from __future__ import annotations

import difflib
import json
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd
from pydantic import ValidationError

from accuracy_checks.checks.accuracy import run_accuracy
from accuracy_checks.checks.actuals import actuals_checks
from accuracy_checks.checks.coverage import coverage_checks
from accuracy_checks.checks.judge import BUILTIN_DEFAULTS, Thresholds
from accuracy_checks.config import Config, Level, validate
from accuracy_checks.gx.batch import NOTE, ROW_KIND, select_rows
from accuracy_checks.measures.catalogue import load_config, measure_catalogue
from accuracy_checks.measures.selection import measures_to_report
from accuracy_checks.results import ALL_SERIES, CheckResult
from accuracy_checks.sources import frames as F
from accuracy_checks.store.archive import cycle_label

__all__ = [
    "accuracy_config",
    "accuracy_payload",
    "actuals_payload",
    "coverage_payload",
    "level_json",
    "measure_levels",
    "notes_payload",
    "result_from_dict",
    "segment_names",
    "threshold_book",
    "threshold_segments_results",
]

#: A measure's levels as JSON: ``{"warn": 5, "fail": [-10, 15]}`` (either key may be absent).
Levels = Mapping[str, Any]

# stands in for the parts of a Config that judging does not read
_PLACEHOLDER_SOURCES: dict[str, Any] = {
    "forecast": {"path": "-", "keys": ["series"], "period": "period", "value": "forecast",
                 "issued": "issued"},
    "actuals": {"path": "-", "period": "period", "value": "actual"},
    "frequency": "D",
    "horizon": 1,
}


def threshold_book(measure: str | None = None, thresholds: Levels | None = None,
                   segment_thresholds: Mapping[str, Levels] | None = None,
                   undefined_status: str = "warn") -> Thresholds:
    """A :class:`~accuracy_checks.checks.judge.Thresholds` holding ``measure``'s levels, as if
    the config said ``thresholds.default.<measure>`` = ``thresholds`` and
    ``thresholds.segments.<segment>.<measure>`` = ``segment_thresholds[segment]``.

    The levels are validated by the config's own rules (warn before fail, ``[low, high]`` only
    for centred measures …); a problem raises ``ValueError`` naming the key. The built-in
    levels of the coverage measures apply where none is given, as in the CLI.

    >>> book = threshold_book("wape", {"warn": 25, "fail": 40}, {"plants": {"warn": 40}})
    >>> book.judge("wape", "tools", 30.0).status, book.judge("wape", "plants", 45.0).status
    ('warn', 'warn')
    """
    default = {measure: dict(thresholds)} if measure and thresholds else {}
    segments = {seg: {measure: dict(lv)} for seg, lv in (segment_thresholds or {}).items()
                if measure and lv is not None}
    raw = {**_PLACEHOLDER_SOURCES,
           "evaluation": {"undefined_status": undefined_status},
           "thresholds": {"default": default, "segments": segments}}
    try:
        config = validate(raw, measure_catalogue)
    except ValidationError as exc:
        raise ValueError(f"invalid levels for measure {measure!r}: {_problems(exc)}") from None
    return Thresholds(config)


def result_from_dict(data: Mapping[str, Any]) -> CheckResult:
    """The :class:`CheckResult` of a :meth:`CheckResult.to_dict` dict (``[low, high]`` lists
    become tuples again; unknown keys are ignored).

    >>> r = CheckResult("accuracy", "warn", segment="*", lag=1, measure="me", warn=(-1.0, 2.0))
    >>> result_from_dict(r.to_dict()) == r
    True
    """
    fields = CheckResult.__dataclass_fields__
    kw = {k: v for k, v in data.items() if k in fields}
    for key in ("warn", "fail"):
        bound = kw.get(key)
        if isinstance(bound, list | tuple):
            kw[key] = (float(bound[0]), float(bound[1]))
    kw["examples"] = list(kw.get("examples") or [])
    kw["details"] = dict(kw.get("details") or {})
    return CheckResult(**kw)


# --------------------------------------------------------------------------- accuracy


def level_json(level: Level | None) -> dict[str, Any] | None:
    """A level as plain JSON: ``{"warn": 5.0, "fail": [-10.0, 15.0]}`` (pairs as lists).

    >>> level_json(Level(warn=5, fail=(-10, 15)))
    {'warn': 5.0, 'fail': [-10.0, 15.0]}
    """
    if level is None:
        return None
    out: dict[str, Any] = {}
    for key in ("warn", "fail"):
        bound = getattr(level, key)
        if isinstance(bound, tuple):
            out[key] = [float(bound[0]), float(bound[1])]
        elif bound is not None:
            out[key] = float(bound)
    return out


def measure_levels(config: Config, measure: str) -> dict[str, Any]:
    """``{"thresholds": …, "segment_thresholds": {…}}``: the levels ``config`` sets for
    ``measure`` (the default ones — the built-in ones when the config sets none — and the
    per-segment overrides), as JSON."""
    default = config.thresholds.default.get(measure, BUILTIN_DEFAULTS.get(measure))
    segments = {seg: level_json(lv[measure]) for seg, lv in config.thresholds.segments.items()
                if measure in lv}
    return {"thresholds": level_json(default), "segment_thresholds": segments}


def accuracy_config(spec: Mapping[str, Any]) -> Config:
    """The config an accuracy expectation runs with.

    ``spec["config"]``: the path of an accuracy-checks YAML file (its evaluation settings and
    levels apply). Otherwise a config made of ``spec``'s ``keys``, ``frequency``,
    ``quantiles`` (levels τ; columns ``q<τ>``), ``lags``, ``window``, ``min_obs``,
    ``undefined_status`` and the levels of ``spec["measure"]`` (``thresholds``,
    ``segment_thresholds``); every other setting keeps its default. Raises ``ValueError``
    naming the problem.
    """
    if spec.get("config"):
        return load_config(spec["config"])
    measure = spec["measure"]
    lags = list(spec.get("lags") or [1])
    evaluation: dict[str, Any] = {"lags": lags, "measures": [measure]}
    for key in ("window", "min_obs", "undefined_status"):
        if spec.get(key) is not None:
            evaluation[key] = spec[key]
    segments = {seg: {measure: dict(lv)} for seg, lv in
                (spec.get("segment_thresholds") or {}).items() if lv is not None}
    raw = {
        "forecast": {"path": "-", "keys": list(spec.get("keys") or []), "period": F.PERIOD,
                     "value": F.FORECAST, "issued": F.ISSUED,
                     "quantiles": {float(t): F.quantile_column(float(t))
                                   for t in spec.get("quantiles") or []}},
        "actuals": {"path": "-", "period": F.PERIOD, "value": F.ACTUAL},
        "frequency": spec.get("frequency"),
        "horizon": max(lags),
        "evaluation": evaluation,
        "thresholds": {"default": {measure: dict(spec["thresholds"])}
                       if spec.get("thresholds") else {}, "segments": segments},
    }
    try:
        return validate(raw, measure_catalogue)
    except ValidationError as exc:
        raise ValueError(f"invalid settings for measure {measure!r}: {_problems(exc)}") from None


def _problems(exc: ValidationError) -> str:
    return "; ".join(
        f"{'.'.join(str(p) for p in err['loc'])}: {err['msg'].removeprefix('Value error, ')}"
        for err in exc.errors()
    )


def accuracy_payload(frame: pd.DataFrame, *, spec: Mapping[str, Any],
                     row_kind_column: str = ROW_KIND) -> dict[str, Any]:
    """Every accuracy result the CLI would give for the ``earlier`` and ``actuals`` rows of a
    stacked batch, with the config of :func:`accuracy_config`.

    Calls :func:`accuracy_checks.checks.accuracy.run_accuracy` (evaluation frame → measures →
    judged results, exactly as ``accuracy-checks run``). Returns ``{"results": [...],
    "measures": [...], "levels": {measure: measure_levels(...)}}``.
    """
    earlier = select_rows(frame, "earlier", row_kind_column=row_kind_column,
                          whole_if_untagged=False)
    actuals = select_rows(frame, "actuals", row_kind_column=row_kind_column,
                          whole_if_untagged=False)
    if earlier is None or actuals is None:
        raise ValueError(
            f"accuracy needs a stacked batch with a {row_kind_column!r} column and 'earlier' "
            "and 'actuals' rows (accuracy_checks.gx.stack_frames or batch_from_config)"
        )
    config = accuracy_config(spec)
    results = run_accuracy(config, earlier, actuals, book=Thresholds(config))
    measures = measures_to_report(config)
    return {"results": [r.to_dict() for r in results], "measures": measures,
            "levels": {m: measure_levels(config, m) for m in measures}}


# --------------------------------------------------------------------------- coverage


def coverage_payload(frame: pd.DataFrame, *, keys: Sequence[str], frequency: str, horizon: int,
                     active_periods: int, row_kind_column: str = ROW_KIND) -> dict[str, Any]:
    """Every coverage result, judged with the built-in levels only.

    ``frame`` is a stacked batch (``forecast`` rows checked against its ``actuals``,
    ``known`` and ``previous`` rows) or a plain forecast frame (then only the horizon check
    is meaningful: ``has_actuals`` is false).

    Returns ``{"results": [...], "cycle": <issue date of the forecast>, "has_actuals": bool,
    "has_previous": bool}``.
    """
    keys = list(keys)
    forecast = select_rows(frame, "forecast", row_kind_column=row_kind_column,
                           whole_if_untagged=True)
    assert forecast is not None
    actuals = select_rows(frame, "actuals", row_kind_column=row_kind_column,
                          whole_if_untagged=False)
    has_actuals = actuals is not None and len(actuals) > 0
    if actuals is None:
        actuals = pd.DataFrame({
            **{k: forecast[k].iloc[:0] for k in keys},
            F.PERIOD: pd.Series(dtype="datetime64[ns]"),
            F.ACTUAL: pd.Series(dtype="float64"),
            F.SEGMENT: pd.Series(dtype="str"),
        })
    known = select_rows(frame, "known", row_kind_column=row_kind_column,
                        whole_if_untagged=False)
    if known is not None and len(known):
        columns = [k for k in keys if k in known.columns and known[k].notna().any()]
        known = known.loc[:, columns].drop_duplicates()
    else:
        known = None
    previous = select_rows(frame, "previous", row_kind_column=row_kind_column,
                           whole_if_untagged=False)
    label = None
    if previous is not None and len(previous):
        label = _previous_label(previous)
    else:
        previous = None
    results = coverage_checks(forecast, actuals, keys=keys, frequency=frequency,
                              horizon=horizon, active_periods=active_periods,
                              book=threshold_book(), known_series=known, previous=previous,
                              previous_label=label)
    cycle = None
    if F.ISSUED in forecast.columns and forecast[F.ISSUED].notna().any():
        cycle = cycle_label(pd.Timestamp(forecast[F.ISSUED].max()))
    return {"results": [r.to_dict() for r in results], "cycle": cycle,
            "has_actuals": has_actuals, "has_previous": previous is not None}


def _previous_label(previous: pd.DataFrame) -> str | None:
    if "previous_label" in previous.columns and previous["previous_label"].notna().any():
        return str(previous["previous_label"].dropna().iloc[0])
    if F.ISSUED not in previous.columns or previous[F.ISSUED].isna().all():
        return None
    label = cycle_label(pd.Timestamp(previous[F.ISSUED].max()))
    if F.ATTEMPT in previous.columns and previous[F.ATTEMPT].notna().any():
        label += f" (attempt {int(previous[F.ATTEMPT].max())})"
    return label


def rejudge(results: Sequence[CheckResult], book: Thresholds) -> list[CheckResult]:
    """``results`` judged again by ``book``. A ``skipped`` result (nothing to judge) stays
    as it is; the others get the status and levels ``book`` gives their value, exactly as the
    coverage checks judge (:meth:`Thresholds.judge`)."""
    out = []
    for r in results:
        if r.status == "skipped" or r.measure is None:
            out.append(r)
            continue
        judged = book.judge(r.measure, r.segment or ALL_SERIES, r.value)
        out.append(CheckResult(**{**r.__dict__, "status": judged.status, "warn": judged.warn,
                                  "fail": judged.fail}))
    return out


# --------------------------------------------------------------------------- the inputs


def actuals_payload(frame: pd.DataFrame, *, keys: Sequence[str],
                    value_column: str | None = None,
                    row_kind_column: str = ROW_KIND) -> dict[str, Any]:
    """The actuals checks of the CLI on the ``actuals`` rows of a stacked batch:
    :func:`~accuracy_checks.checks.actuals.actuals_checks` (``value_column`` is the name of
    the actuals' value column in the user's file, for the message).

    Returns ``{"results": [...], "has_actuals": bool}``; a frame that is not a stacked batch
    has no actuals to check (``has_actuals`` false, no results).
    """
    actuals = select_rows(frame, "actuals", row_kind_column=row_kind_column,
                          whole_if_untagged=False)
    if actuals is None:
        return {"results": [], "has_actuals": False}
    if F.ACTUAL not in actuals.columns:  # a stacked batch whose actuals part had no rows
        actuals = actuals.assign(**{F.ACTUAL: np.nan})
    results = actuals_checks(actuals, keys=list(keys), column=value_column)
    return {"results": [r.to_dict() for r in results], "has_actuals": True}


def notes_payload(frame: pd.DataFrame, *, row_kind_column: str = ROW_KIND
                  ) -> list[dict[str, Any]]:
    """The results the ``notes`` rows carry (:meth:`CheckResult.to_dict` dicts, in order);
    none when the batch has no such rows."""
    notes = select_rows(frame, "notes", row_kind_column=row_kind_column, whole_if_untagged=False)
    if notes is None or NOTE not in notes.columns:
        return []
    return [json.loads(text) for text in notes[NOTE].tolist()]


# --------------------------------------------------------------------------- segment names


def segment_names(frame: pd.DataFrame, *, row_kind_column: str = ROW_KIND) -> list[str]:
    """Distinct segment names in the forecast, actuals and earlier rows (as the CLI reads
    them), without ``"unassigned"``, sorted."""
    if F.SEGMENT not in frame.columns:
        return []
    rows = frame
    if row_kind_column in frame.columns:
        rows = frame.loc[frame[row_kind_column].isin(["forecast", "actuals", "earlier"])]
    names = {str(s) for s in pd.unique(rows[F.SEGMENT].dropna().to_numpy(dtype=object))}
    names.discard(F.UNASSIGNED)
    return sorted(names)


def threshold_segments_results(segments: Sequence[str], names: Sequence[str]
                               ) -> list[CheckResult]:
    """A ``config.thresholds`` warning for each of ``segments`` that is not among ``names``
    (the segments in the data), worded as the CLI words it."""
    present = set(names)
    known = ", ".join(sorted(names)[:12])
    out = []
    for seg in segments:
        if seg == ALL_SERIES or seg in present:
            continue
        close = difflib.get_close_matches(seg, sorted(names), n=1, cutoff=0.6)
        hint = f" Did you mean {close[0]!r}?" if close else ""
        out.append(CheckResult(
            "config.thresholds", "warn", segment=seg,
            message=(f"thresholds.segments.{seg} matches no series, so its levels judge "
                     f"nothing.{hint} Segments in the data: {known}."),
        ))
    return out


def finite_or_none(value: Any) -> float | None:
    """``value`` as a float, ``None`` when missing or not finite."""
    if value is None:
        return None
    value = float(value)
    return value if np.isfinite(value) else None
