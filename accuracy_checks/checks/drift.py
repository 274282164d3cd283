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

**False alarms.** For a stable figure whose cycle-to-cycle values are independent and normal,
a new value minus the mean of n earlier ones, divided by their sample standard deviation
times √(1 + 1/n), follows Student's t with n − 1 degrees of freedom (the prediction interval
of a new observation). So a one-sided limit at k standard deviations is crossed with
probability ``P(T_{n−1} > k / √(1 + 1/n))`` (:func:`false_alarm_rate`): with the defaults
N = 13, k = 3 that is 0.68 % per figure per cycle (1.27 % while only the minimum history of 8
cycles exists; k = 4: 0.11 %). Figures judged by their distance from an ideal value can worsen
on either side: about twice that. Consecutive accuracy windows overlap (a 4-period window
shares 3 periods with the previous cycle's), so a figure's values are positively correlated
from cycle to cycle: the trailing sd then understates the spread of a new value and false
alarms are more frequent (1.2 % instead of 0.68 % for a 4-period window, simulated), and a
step change in the forecast's errors enters the figure over ``evaluation.window`` cycles: a
step of 3 standard deviations of the period-level error is caught within 4 cycles in 91 % of
simulated histories, an abrupt step of 6 standard deviations of the figure in its first cycle
in 99.5 %. Expect about ``figures × rate`` drift warnings per cycle by chance: with many
segments, raise ``k``.

**Why at least 8 earlier cycles by default.** The standard deviation of n values is itself
uncertain: its relative standard error is about 1/√(2(n − 1)), 27 % at n = 8 but 50 % at
n = 3, and the false-alarm rate at k = 3 grows from 1.27 % (n = 8) to 2.6 % (n = 5) and 6.1 %
(n = 3). Eight cycles (two months of weekly cycles) keeps a young figure's limits honest;
fewer makes the rule mostly noise.

The rules are pure functions on arrays (:func:`control_limits`, :func:`breach_streaks`),
fully vectorised (no loop over figures or cycles); :func:`load_trail` reads the audit store
and :func:`drift_checks` ties them to a run (``engine.run_checks`` calls it before waivers are
applied, so drift results can be waived and are recorded with the run).
"""

from __future__ import annotations

import json
import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from accuracy_checks.outputs.wording import describe_value, format_number, unit_suffix
from accuracy_checks.results import ALL_SERIES, CheckResult, StatusName

if TYPE_CHECKING:
    from accuracy_checks.config import Config, Drift
    from accuracy_checks.store import Store

__all__ = [
    "CONTROL_LIMIT",
    "SUSTAINED_BREACH",
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
#: statuses of a recorded result that judged its figure (skipped and error ones did not)
JUDGED = ("pass", "warn", "fail", "waived")
#: statuses that count as a breach of a threshold (a waived breach still is one)
BREACHED = ("warn", "fail", "waived")
#: trail columns
TRAIL_COLUMNS = ("check", "segment", "measure", "lag", "variant", "cycle", "status", "value")
_KEY = ["check", "segment", "measure", "lag", "variant"]


# ------------------------------------------------------------------------------ the rules


@dataclass(frozen=True)
class ControlLimits:
    """The control-limit rule over cycles: arrays of shape (figures, cycles).

    ``mean``/``sd``/``n`` describe the baseline each cycle was judged against (its ``n``
    earlier values, at most N), ``lower``/``upper`` the limits ``mean ∓ k·sd``; ``judged``
    is whether the cycle had a value and at least ``min_history`` earlier values, ``signal``
    whether its value worsened beyond a limit.
    """

    mean: np.ndarray
    sd: np.ndarray
    n: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    judged: np.ndarray
    signal: np.ndarray


def control_limits(values: np.ndarray, *, cycles: int, k: float, min_history: int,
                   direction: str | Sequence[str] | np.ndarray = "lower",
                   ideal: float | np.ndarray = 0.0) -> ControlLimits:
    """Judge every cycle (column, oldest first) of ``values`` against its trailing cycles.

    ``values`` has one row per figure and one column per cycle (NaN: no value that cycle).
    A cycle's baseline is the last ``cycles`` (N) earlier values of its row (cycles without
    a value are passed over); it is judged once the baseline holds ``min_history`` values,
    against ``mean ± k·sd`` (sample sd, ddof = 1). ``direction`` (per figure, or one for
    all): ``lower`` (only above the upper limit counts), ``higher`` (only below the lower
    limit) or ``centered`` (beyond either limit and further from ``ideal`` than the mean).

    Fully vectorised: prefix sums over each row's values in time order (centred on the row's
    mean first, so the sums of squares keep their precision).

    >>> v = np.array([[10, 11, 9, 10, 11, 9, 10, 11, 9, 30, 10.5]])
    >>> out = control_limits(v, cycles=8, k=3, min_history=8)
    >>> out.signal[0].astype(int).tolist()
    [0, 0, 0, 0, 0, 0, 0, 0, 0, 1, 0]
    >>> round(float(out.upper[0, 9]), 3)  # mean 10 of the last 8, sd √(6/7) (ddof = 1)
    12.777
    >>> bool(control_limits(-v, cycles=8, k=3, min_history=8).signal[0, 9])  # lower is better
    False
    """
    x = np.asarray(values, dtype=np.float64)
    if x.ndim != 2:
        raise ValueError("values must be a 2-d array: figures × cycles")
    if not 2 <= min_history <= cycles:
        raise ValueError(f"need 2 ≤ min_history ≤ cycles; got {min_history} and {cycles}")
    n_fig = x.shape[0]
    kind = np.broadcast_to(np.asarray(direction), (n_fig,))
    ideal_v = np.broadcast_to(np.asarray(ideal, dtype=np.float64), (n_fig,))
    ok = np.isfinite(x)
    count = ok.sum(axis=1)
    centre = np.divide(np.where(ok, x, 0.0).sum(axis=1), count, out=np.zeros(n_fig),
                       where=count > 0)
    xc = np.where(ok, x - centre[:, None], 0.0)
    order = np.argsort(~ok, axis=1, kind="stable")  # each row's values first, in time order
    packed = np.take_along_axis(xc, order, axis=1)
    zero = np.zeros((n_fig, 1))
    p1 = np.concatenate([zero, np.cumsum(packed, axis=1)], axis=1)
    p2 = np.concatenate([zero, np.cumsum(packed * packed, axis=1)], axis=1)
    before = np.cumsum(ok, axis=1) - ok  # values strictly before each cycle
    start = np.maximum(before - cycles, 0)
    n = before - start
    s1 = np.take_along_axis(p1, before, axis=1) - np.take_along_axis(p1, start, axis=1)
    s2 = np.take_along_axis(p2, before, axis=1) - np.take_along_axis(p2, start, axis=1)
    mean_c = np.divide(s1, n, out=np.full(x.shape, np.nan), where=n > 0)
    ss = np.maximum(s2 - np.where(n > 0, s1 * mean_c, 0.0), 0.0)
    sd = np.sqrt(np.divide(ss, n - 1, out=np.full(x.shape, np.nan), where=n > 1))
    mean = mean_c + centre[:, None]
    lower, upper = mean - k * sd, mean + k * sd
    judged = ok & (n >= min_history)
    up, down = x > upper, x < lower
    further = np.abs(x - ideal_v[:, None]) > np.abs(mean - ideal_v[:, None])
    beyond = np.where((kind == "lower")[:, None], up,
                      np.where((kind == "higher")[:, None], down, (up | down) & further))
    return ControlLimits(mean, sd, n, lower, upper, judged, judged & beyond)


def false_alarm_rate(n: int, k: float, *, sides: int = 1) -> float:
    """Chance that a stable, independent normal figure crosses a limit at ``k`` sd of ``n``
    earlier values: ``sides · P(T_{n−1} > k / √(1 + 1/n))`` (Student's t; the prediction
    interval of a new observation).

    >>> round(false_alarm_rate(13, 3.0) * 100, 2), round(false_alarm_rate(8, 3.0) * 100, 2)
    (0.68, 1.27)
    """
    from scipy.special import stdtr

    return float(sides * stdtr(n - 1, -k / math.sqrt(1 + 1 / n)))


def breach_streaks(states: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Consecutive breached cycles at the end of each row, and where that run starts.

    ``states`` (figures × cycles, oldest first): 1 breached, 0 not breached (``pass``), NaN no
    judgement (skipped, error, absent: neither breaks nor extends a run). Returns the length of
    the run of breaches since the last pass, and the column of its first breach (−1 if none).

    >>> s = np.array([[1, 0, 1, np.nan, 1, 1], [0, 0, 0, 0, 0, 0], [1, 1, 1, 1, 1, 1.0]])
    >>> n, first = breach_streaks(s)
    >>> n.tolist(), first.tolist()
    ([3, 0, 6], [2, -1, 0])
    """
    s = np.asarray(states, dtype=np.float64)
    col = np.arange(s.shape[1])
    last_pass = np.where(s == 0, col, -1).max(axis=1, initial=-1)
    after = (s == 1) & (col > last_pass[:, None])
    n = after.sum(axis=1)
    first = np.where(after, col, s.shape[1]).min(axis=1, initial=s.shape[1])
    return n, np.where(n > 0, first, -1)


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

    Only what the drift checks need is read: ``accuracy`` results of ``accuracy_measures``
    (every accuracy measure when ``None``) and results of the (check, measure) pairs in
    ``breached``. Columns: :data:`TRAIL_COLUMNS` (``variant`` is ``""`` when the result has
    none). Queries bind every value; drift results themselves are never read back.
    """
    from sqlalchemy import and_, case, false, or_, select

    from accuracy_checks.store.schema import results, runs

    with store.db.read() as conn:
        found = conn.execute(
            select(runs.c.id, runs.c.cycle, runs.c.attempt).where(runs.c.cycle.is_not(None))
        ).all()
        last: dict[str, tuple[int, int]] = {}
        for pk, cyc, attempt in found:
            key = (int(attempt or 0), int(pk))
            if (before is None or cyc < before) and (cyc not in last or key > last[cyc]):
                last[cyc] = key
        chosen = sorted(last)[-cycles:] if cycles > 0 else []
        if not chosen:
            return _empty_trail()
        pk_cycle = {last[c][1]: c for c in chosen}
        wanted = []
        if accuracy_measures is None:
            wanted.append(results.c.check_name == "accuracy")
        elif accuracy_measures:
            wanted.append(and_(results.c.check_name == "accuracy",
                               results.c.measure.in_(list(accuracy_measures))))
        wanted += [and_(results.c.check_name == check, results.c.measure == measure)
                   for check, measure in sorted(set(breached))]
        if not wanted:
            return _empty_trail()
        has_variant = results.c.details.like('%"variant"%')
        rows = conn.execute(
            select(results.c.run_pk, results.c.check_name, results.c.segment,
                   results.c.measure, results.c.lag, results.c.status, results.c.value,
                   case((has_variant, results.c.details), else_=None))
            .where(results.c.run_pk.in_(list(pk_cycle)), results.c.measure.is_not(None),
                   or_(false(), *wanted))
        ).all()
    frame = pd.DataFrame([tuple(r) for r in rows],
                         columns=["run_pk", "check", "segment", "measure", "lag", "status",
                                  "value", "details"])
    if frame.empty:
        return _empty_trail()
    frame["cycle"] = frame["run_pk"].map(pk_cycle)
    frame["variant"] = _variants(frame["details"])
    frame["value"] = pd.to_numeric(frame["value"], errors="coerce").astype("float64")
    frame["lag"] = frame["lag"].astype("Int64")
    return frame.loc[:, list(TRAIL_COLUMNS)].sort_values("cycle", kind="stable",
                                                         ignore_index=True)


def _variants(details: pd.Series) -> pd.Series:
    """The ``variant`` of each stored result's details JSON ("" when none); one parse per
    distinct text."""
    texts = details.dropna()
    if texts.empty:
        return pd.Series("", index=details.index, dtype=object)
    parsed = {t: str((json.loads(t) or {}).get("variant") or "") for t in texts.unique()}
    return details.map(parsed).fillna("").astype(object)


def _empty_trail() -> pd.DataFrame:
    return pd.DataFrame({c: pd.Series(dtype="float64" if c == "value" else object)
                         for c in TRAIL_COLUMNS})


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
    from accuracy_checks.checks.judge import ThresholdBook

    book = ThresholdBook(config)
    return [m for m in reported if book.has_threshold(m)]


def _breached_now(results: Sequence[CheckResult], drift: Drift) -> list[CheckResult]:
    if drift.sustained_cycles < 2:
        return []
    return [r for r in results if r.status in ("warn", "fail") and r.measure is not None
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
               and r.status in ("pass", "warn", "fail") and r.value is not None
               and math.isfinite(r.value)]
    if not current:
        return []
    from accuracy_checks.config import measure_directions

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
                CONTROL_LIMIT, "skipped", segment=r.segment, lag=r.lag, measure=r.measure,
                value=r.value, n_series=r.n_series, n_obs=r.n_obs, unit=r.unit,
                reason="too_few_cycles", details=details,
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
        status: StatusName = drift.status if limits.signal[i, -1] else "pass"
        out.append(CheckResult(
            CONTROL_LIMIT, status, segment=r.segment, lag=r.lag, measure=r.measure,
            value=r.value, n_series=r.n_series, n_obs=r.n_obs, unit=r.unit, details=details,
            warn=bound if drift.status == "warn" else None,
            fail=bound if drift.status == "fail" else None,
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


def _label(measure: str | None) -> str:
    from accuracy_checks.measures.registry import measure_label

    return measure_label(measure)


def _name(r: CheckResult) -> str:
    """``Bias % of pet-care at lag 1`` (``all series`` for ``"*"``)."""
    seg = "all series" if r.segment in (None, ALL_SERIES) else str(r.segment)
    what = _label(r.measure) if r.check == "accuracy" else f"{r.check} ({r.measure})"
    variant = _variant_of(r)
    lag = f" at lag {r.lag}" if r.lag is not None else ""
    return f"{what}{f' ({variant})' if variant else ''} of {seg}{lag}"


def _num(value: float, unit: str | None) -> str:
    return f"{format_number(value)}{unit_suffix(unit)}"


def _limit_message(r: CheckResult, status: str, d: dict[str, Any], drift: Drift) -> str:
    unit = r.unit
    span = (f"mean {_num(d['mean'], unit)} ± {format_number(drift.k)} sd "
            f"({_num(d['sd'], unit)}) of {d['n_history']} earlier cycles, "
            f"{d['first_cycle']} to {d['last_cycle']}")
    now = describe_value(r)
    if d["direction"] == "lower":
        limit = f"its drift limit {_num(d['upper'], unit)}"
        side = "above"
    elif d["direction"] == "higher":
        limit = f"its drift limit {_num(d['lower'], unit)}"
        side = "below"
    else:
        limit = f"its drift limits [{format_number(d['lower'])}, {format_number(d['upper'])}]"
        side = "outside"
    if status == "pass":
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
        status: StatusName = drift.sustained_status if n >= m else "pass"
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
            warn=level if drift.sustained_status == "warn" else None,
            fail=level if drift.sustained_status == "fail" else None,
            details=details, message=_sustained_message(r, n, full, since, status, drift),
        ))
    return out


def _sustained_message(r: CheckResult, n: int, at_least: bool, since: str | None,
                       status: str, drift: Drift) -> str:
    count = f"{'at least ' if at_least else ''}{n} cycle{'s' if n != 1 else ''} in a row"
    where = f" (since cycle {since})" if since and n > 1 else ""
    head = (f"{_name(r)} has breached its {r.status} level {count}{where}; "
            f"now {describe_value(r)}")
    m = drift.sustained_cycles
    if status == "pass":
        return f"{head}. It escalates to {drift.sustained_status} at {m} cycles in a row."
    return (f"{head}: a sustained breach, escalated to {drift.sustained_status} "
            f"(drift.sustained_cycles: {m}). Review the method or its parameters for this "
            "segment, or waive it with a reason.")
