"""Accuracy over time: drift and sustained-breach checks across cycles, from the audit trail.

A single cycle's breach may be noise; a figure that has been getting worse for several cycles
means the method or its parameters need review. Two checks look at each figure (check ×
segment × measure × lag, and the variant of a measure with several figures per group) over the
cycles recorded in the audit store, using the **last attempt of each earlier cycle**:

``drift.control_limit`` (accuracy figures)
    The current value against the figure's own trailing cycles: limits at ``mean ± k·sd`` of
    its last ``drift.cycles`` (N) earlier values (sample standard deviation, ``ddof = 1``;
    earlier cycles without a value are passed over). Only a **worsening** counts: above the
    upper limit for lower-is-better measures (WAPE, MAE …), below the lower limit for
    higher-is-better ones (forecast value added), and for measures whose ideal is a value
    (bias, mean error, tracking signal: 0; interval coverage: its nominal level) a value
    beyond either limit that also lies further from the ideal than the trailing mean. A
    figure with fewer than ``drift.min_history`` earlier values is ``skipped`` (reason
    ``too_few_cycles``). The result's ``warn`` (or ``fail``) is the limit that applied and
    its details hold the mean, sd, limits and the cycles they came from.

``drift.sustained_breach`` (every thresholded figure that is breached now)
    How many consecutive cycles, this one included, the figure has breached a threshold
    (``warn``, ``fail`` or ``waived`` in the trail; ``pass`` breaks the run; skipped, error
    or absent cycles neither break nor extend it, as in ``accuracy-checks breaches``). At
    ``drift.sustained_cycles`` (M) or more, the result takes ``drift.sustained_status``
    (default ``fail``): a warning that persists escalates the gate. Below M it passes, and says
    how far it has got.

The rules are pure functions on arrays (:mod:`.drift_rules`: :func:`control_limits`,
:func:`breach_streaks`, and the false-alarm rate of the limits); :func:`load_trail` asks the
store for the trail (:func:`~accuracy_checks.store.queries.trail_of_figures`) and
:func:`drift_checks` ties them to a run (``engine.run_checks`` calls it before waivers are
applied, so drift results can be waived and are recorded with the run).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from accuracy_checks.checks.drift_rules import (
    ControlLimits,
    breach_streaks,
    control_limits,
    false_alarm_rate,
)
from accuracy_checks.checks.judge import Thresholds
from accuracy_checks.measures.catalogue import measure_directions
from accuracy_checks.measures.registry import measure_label
from accuracy_checks.measures.wording import format_number, unit_suffix, value_words
from accuracy_checks.results import (
    ALL_SERIES,
    BREACHED,
    JUDGED,
    WAIVABLE,
    CheckResult,
    Reason,
    Status,
    StatusName,
)
from accuracy_checks.store.queries import TRAIL_COLUMNS, trail_of_figures

if TYPE_CHECKING:
    from accuracy_checks.config import Config, Drift
    from accuracy_checks.store.core import Store

__all__ = [
    "CONTROL_LIMIT",
    "SUSTAINED_BREACH",
    "TRAIL_COLUMNS",
    "ControlLimits",
    "breach_streaks",
    "control_limits",
    "drift_checks",
    "drift_results",
    "false_alarm_rate",
    "load_trail",
    "lookback_cycles",
]

CONTROL_LIMIT = "drift.control_limit"
SUSTAINED_BREACH = "drift.sustained_breach"
#: statuses of a result of this run that judged its figure (waivers are applied after drift)
_JUDGED_NOW = JUDGED - {Status.WAIVED}
_KEY = ["check", "segment", "measure", "lag", "variant"]


# ------------------------------------------------------------------------ the audit trail


def lookback_cycles(drift: Drift) -> int:
    """How many earlier cycles a run reads: 2·N for the control limits (the last N with a
    value, allowing for cycles without one), and at least M for sustained breaches."""
    return max(2 * drift.cycles, drift.sustained_cycles)


def load_trail(store: Store, *, before: str | None, cycles: int,
               accuracy_measures: Sequence[str] | None = None,
               breached: Sequence[tuple[str, str]] = ()) -> pd.DataFrame:
    """Recorded results of the last attempt of each of the ``cycles`` latest cycles before
    ``before`` (a cycle label; ``None``: every recorded cycle), oldest first.

    Only what the drift checks need is read (the store's
    :func:`~accuracy_checks.store.queries.trail_of_figures`): ``accuracy`` results of
    ``accuracy_measures`` (every accuracy measure when ``None``) and results of the (check,
    measure) pairs in ``breached``. Columns: :data:`TRAIL_COLUMNS` (``variant`` is ``""``
    when the result has none); drift results themselves are never read back.
    """
    with store.db.read() as conn:
        rows = trail_of_figures(conn, before=before, cycles=cycles,
                                accuracy_measures=accuracy_measures, breached=breached)
    if not rows:
        return pd.DataFrame({c: pd.Series(dtype="float64" if c == "value" else object)
                             for c in TRAIL_COLUMNS})
    frame = pd.DataFrame(rows, columns=list(TRAIL_COLUMNS))
    frame["variant"] = frame["variant"].astype(object)
    frame["value"] = pd.to_numeric(frame["value"], errors="coerce").astype("float64")
    frame["lag"] = frame["lag"].astype("Int64")
    return frame.sort_values("cycle", kind="stable", ignore_index=True)


# --------------------------------------------------------------------------- the checks


def drift_checks(config: Config, results: Sequence[CheckResult], store: Store, *,
                 cycle: str | None) -> list[CheckResult]:
    """The drift results of a run of ``cycle`` whose other results are ``results``, judged
    against the earlier cycles recorded in ``store`` (nothing when ``drift.enabled`` is
    false). Reads the store; writes nothing."""
    drift = config.drift
    if not drift.enabled:
        return []
    measures = drift_measures(config, results)
    breached = sorted({(r.check, r.measure) for r in _breached_now(results, drift)
                       if r.measure is not None})
    if not measures and not breached:
        return []
    lookback = lookback_cycles(drift)
    trail = load_trail(store, before=cycle, cycles=lookback, accuracy_measures=measures,
                       breached=breached)
    return drift_results(config, results, trail, lookback=lookback)


def drift_measures(config: Config, results: Sequence[CheckResult]) -> list[str]:
    """The accuracy measures the control-limit rule watches in this run: ``drift.measures``
    (``all``: every measure reported), by default those a threshold names."""
    drift = config.drift
    if not drift.control_limit:
        return []
    reported = list(dict.fromkeys(r.measure for r in results
                                  if r.check == "accuracy" and r.measure is not None))
    if "all" in drift.measures:
        return reported
    if drift.measures:
        return [m for m in drift.measures if m in reported]
    book = Thresholds(config)
    return [m for m in reported if book.has_threshold(m)]


def _breached_now(results: Sequence[CheckResult], drift: Drift) -> list[CheckResult]:
    if drift.sustained_cycles < 2:
        return []
    return [r for r in results if r.status in WAIVABLE and r.measure is not None
            and not r.check.startswith("drift.")]


def drift_results(config: Config, results: Sequence[CheckResult], trail: pd.DataFrame, *,
                  lookback: int | None = None) -> list[CheckResult]:
    """Pure: the ``drift.control_limit`` and ``drift.sustained_breach`` results of a run with
    ``results``, given the ``trail`` of earlier cycles (see :func:`load_trail`).

    ``lookback`` is how many cycles the trail could hold at most: a breach run that fills it
    is reported as "at least" that long.
    """
    drift = config.drift
    if not drift.enabled:
        return []
    out = _control_limit_results(drift, results, trail, drift_measures(config, results))
    out += _sustained_results(drift, results, trail, lookback)
    return out


def _variant_of(result: CheckResult) -> str:
    return str(result.details.get("variant") or "") if isinstance(result.details, dict) else ""


def _figures(results: Sequence[CheckResult]) -> pd.DataFrame:
    return pd.DataFrame(
        [(r.check, r.segment, r.measure, r.lag, _variant_of(r)) for r in results],
        columns=_KEY,
    ).astype({"lag": "Int64"})


def _matrix(figures: pd.DataFrame, trail: pd.DataFrame, column: str,
            extra: float | np.ndarray) -> tuple[np.ndarray, list[str]]:
    """``trail[column]`` laid out as figures × earlier cycles, plus the current column."""
    cycles = sorted(trail["cycle"].unique().tolist()) if len(trail) else []
    grid = np.full((len(figures), len(cycles) + 1), np.nan)
    grid[:, -1] = extra
    if len(trail) and len(figures):
        keyed = figures.reset_index(names="row")
        hit = trail.astype({"lag": "Int64"}).merge(keyed, on=_KEY, how="inner")
        if len(hit):
            col = np.searchsorted(np.array(cycles, dtype=object), hit["cycle"].to_numpy())
            grid[hit["row"].to_numpy(), col] = hit[column].to_numpy(dtype=np.float64)
    return grid, cycles


def _control_limit_results(drift: Drift, results: Sequence[CheckResult], trail: pd.DataFrame,
                           measures: Sequence[str]) -> list[CheckResult]:
    watched = set(measures)
    current = [r for r in results if r.check == "accuracy" and r.measure in watched
               and r.status in _JUDGED_NOW and r.value is not None
               and math.isfinite(r.value)]
    if not current:
        return []
    directions = measure_directions()
    figures = _figures(current)
    usable = trail.loc[(trail["check"] == "accuracy") & trail["status"].isin(JUDGED)
                       & trail["value"].notna()]
    values, cycles = _matrix(figures, usable, "value",
                             np.array([r.value for r in current], dtype=np.float64))
    direction = np.array([directions.get(r.measure or "", ("lower", ""))[0] for r in current])
    ideal = np.array([_ideal(r) for r in current])
    limits = control_limits(values, cycles=drift.cycles, k=drift.k,
                            min_history=drift.min_history, direction=direction, ideal=ideal)
    have = np.isfinite(values[:, :-1])
    out = []
    for i, r in enumerate(current):
        used = [c for c, h in zip(cycles, have[i], strict=True) if h]
        n = int(limits.n[i, -1])
        mean, sd = float(limits.mean[i, -1]), float(limits.sd[i, -1])
        lo, hi = float(limits.lower[i, -1]), float(limits.upper[i, -1])
        details: dict[str, Any] = {
            "direction": str(direction[i]), "k": drift.k, "n_history": n,
            "history_cycles": len(used), "first_cycle": used[0] if used else None,
            "last_cycle": used[-1] if used else None,
        }
        if _variant_of(r):
            details["variant"] = _variant_of(r)
        if not limits.judged[i, -1]:
            out.append(CheckResult(
                CONTROL_LIMIT, Status.SKIPPED, segment=r.segment, lag=r.lag, measure=r.measure,
                value=r.value, n_series=r.n_series, n_obs=r.n_obs, unit=r.unit,
                reason=Reason.TOO_FEW_CYCLES, details=details,
                message=(f"{_name(r)}: not judged for drift yet: {n} earlier cycle(s) with a "
                         f"value, {drift.min_history} needed (drift.min_history)."),
            ))
            continue
        details.update({"mean": mean, "sd": sd, "lower": lo, "upper": hi,
                        "signal": bool(limits.signal[i, -1])})
        if direction[i] == "centered":
            details["ideal"] = float(ideal[i])
        bound: float | tuple[float, float] = (
            hi if direction[i] == "lower" else lo if direction[i] == "higher" else (lo, hi))
        status: Status | StatusName = drift.status if limits.signal[i, -1] else Status.PASS
        out.append(CheckResult(
            CONTROL_LIMIT, status, segment=r.segment, lag=r.lag, measure=r.measure,
            value=r.value, n_series=r.n_series, n_obs=r.n_obs, unit=r.unit, details=details,
            warn=bound if drift.status == Status.WARN else None,
            fail=bound if drift.status == Status.FAIL else None,
            message=_limit_message(r, status, details, drift),
        ))
    return out


def _ideal(result: CheckResult) -> float:
    """The value a centred measure aims at: its nominal level where the result states one
    (interval coverage), else 0."""
    nominal = result.details.get("nominal_pct") if isinstance(result.details, dict) else None
    try:
        return float(nominal) if nominal is not None else 0.0
    except (TypeError, ValueError):
        return 0.0


def _name(r: CheckResult) -> str:
    """``Bias % of pet-care at lag 1`` (``all series`` for ``"*"``)."""
    seg = "all series" if r.segment in (None, ALL_SERIES) else str(r.segment)
    what = measure_label(r.measure) if r.check == "accuracy" else f"{r.check} ({r.measure})"
    variant = _variant_of(r)
    lag = f" at lag {r.lag}" if r.lag is not None else ""
    return f"{what}{f' ({variant})' if variant else ''} of {seg}{lag}"


def _value_words(r: CheckResult) -> str:
    """The value of ``r`` in words, as its measure's registry entry words it."""
    return value_words(r.value, measure=r.measure, unit=r.unit, reason=r.reason)


def _num(value: float, unit: str | None) -> str:
    return f"{format_number(value)}{unit_suffix(unit)}"


def _limit_message(r: CheckResult, status: str, d: dict[str, Any], drift: Drift) -> str:
    unit = r.unit
    span = (f"mean {_num(d['mean'], unit)} ± {format_number(drift.k)} sd "
            f"({_num(d['sd'], unit)}) of {d['n_history']} earlier cycles, "
            f"{d['first_cycle']} to {d['last_cycle']}")
    now = _value_words(r)
    if d["direction"] == "lower":
        limit = f"its drift limit {_num(d['upper'], unit)}"
        side = "above"
    elif d["direction"] == "higher":
        limit = f"its drift limit {_num(d['lower'], unit)}"
        side = "below"
    else:
        limit = f"its drift limits [{format_number(d['lower'])}, {format_number(d['upper'])}]"
        side = "outside"
    if status == Status.PASS:
        return f"{_name(r)}: {now}, within {limit} ({span})."
    worse = ("further from its ideal than usual" if d["direction"] == "centered"
             else "worse than its own history")
    return (f"{_name(r)}: {now}, {side} {limit} ({span}): {worse}; look for a change in the "
            "data or the forecasting method.")


def _sustained_results(drift: Drift, results: Sequence[CheckResult], trail: pd.DataFrame,
                       lookback: int | None) -> list[CheckResult]:
    now = _breached_now(results, drift)
    if not now:
        return []
    m = drift.sustained_cycles
    figures = _figures(now)
    judged = trail.loc[trail["status"].isin(JUDGED)]
    judged = judged.assign(state=judged["status"].isin(BREACHED).astype(np.float64))
    states, cycles = _matrix(figures, judged, "state", 1.0)
    length, first = breach_streaks(states)
    labels = [*cycles, None]
    out = []
    for i, r in enumerate(now):
        n = int(length[i])
        since = labels[int(first[i])] if first[i] >= 0 else None
        full = lookback is not None and len(cycles) >= lookback and n == len(cycles) + 1
        streak_cycles = [c for c, s in zip(cycles, states[i, :-1], strict=True)
                         if s == 1 and (since is None or c >= since)]
        status: Status | StatusName = drift.sustained_status if n >= m else Status.PASS
        details: dict[str, Any] = {"cycles_in_a_row": n, "at_least": full,
                                   "since_cycle": since, "breached_cycles": streak_cycles,
                                   "breached_status": r.status, "escalate_after": m,
                                   "direction": "lower"}
        if _variant_of(r):
            details["variant"] = _variant_of(r)
        level = float(m - 1)
        out.append(CheckResult(
            SUSTAINED_BREACH, status, segment=r.segment, lag=r.lag, measure=r.measure,
            value=float(n), unit="cycles", n_series=r.n_series, n_obs=r.n_obs,
            warn=level if drift.sustained_status == Status.WARN else None,
            fail=level if drift.sustained_status == Status.FAIL else None,
            details=details, message=_sustained_message(r, n, full, since, status, drift),
        ))
    return out


def _sustained_message(r: CheckResult, n: int, at_least: bool, since: str | None,
                       status: str, drift: Drift) -> str:
    count = f"{'at least ' if at_least else ''}{n} cycle{'s' if n != 1 else ''} in a row"
    where = f" (since cycle {since})" if since and n > 1 else ""
    head = (f"{_name(r)} has breached its {r.status} level {count}{where}; "
            f"now {_value_words(r)}")
    m = drift.sustained_cycles
    if status == Status.PASS:
        return f"{head}. It escalates to {drift.sustained_status} at {m} cycles in a row."
    return (f"{head}: a sustained breach, escalated to {drift.sustained_status} "
            f"(drift.sustained_cycles: {m}). Review the method or its parameters for this "
            "segment, or waive it with a reason.")
