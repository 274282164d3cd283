"""The registry of accuracy measures: id, label, unit, which way is better, and the formula.

One registry holds every measure: the core ones defined here (pooled from the sufficient
statistics of :func:`~accuracy_checks.measures.stats.error_stats`), the other built-in
families (:mod:`~accuracy_checks.measures.scaled`, ``signals``, ``value_added``,
``probabilistic``, ``cost``), and measures that other packages add through the
``accuracy_checks.measures`` entry-point group (:mod:`accuracy_checks.measures.plugins`). Every
:class:`Measure` yields, per group, the columns ``value`` (float, NaN when undefined) and
``reason`` (``None`` or why the value is undefined), plus optional extra columns. All formulas
are vectorised over the groups. Thresholds read ``direction`` and ``unit``; outputs read
``label`` and ``description``.

Rules (docs/measures.md): ``n = 0`` → ``no_data`` for every measure; ``Σ|y| = 0`` →
``zero_denominator`` (Bias %, WAPE); any zero actual → ``zero_actual`` (MAPE, which then reports
``mape_nonzero``); ``n < 2`` → ``too_few_rows`` (SDE). Percentages are in percent. A figure
whose sums exceed the float64 range is ``overflow`` (set by :mod:`accuracy_checks.checks.accuracy`,
never by a formula: formulas stay plain arithmetic).

>>> import pandas as pd
>>> from accuracy_checks.measures.stats import error_stats
>>> stats = error_stats(pd.DataFrame({"actual": [0.0, 4.0, 0.0, 1.0],
...                                   "forecast": [1.0, 2.0, 0.0, 0.0]}), [])
>>> get_measure("wape").from_stats(stats)
   value reason
0   80.0   None
>>> get_measure("mape").from_stats(stats)
   value       reason  mape_nonzero  n_zero_actual
0    NaN  zero_actual          75.0              2
"""

from __future__ import annotations

import inspect
import math
import re
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
import pandas as pd

from accuracy_checks.results import Reason

if TYPE_CHECKING:
    from accuracy_checks.measures.data import MeasureData, MeasureSettings

__all__ = [
    "CORE_MEASURES",
    "INPUTS",
    "MEASURES",
    "REASONS",
    "Direction",
    "Levels",
    "Measure",
    "add_loader",
    "declare",
    "display_order",
    "get_measure",
    "headline_measures",
    "register_measure",
    "registered_measures",
]

#: ``lower``: lower is better; ``centered``: closer to 0 is better; ``higher``: higher is better.
Direction = Literal["lower", "centered", "higher"]

#: Reasons a measure value can be undefined (a subset of
#: :class:`~accuracy_checks.results.Reason`).
REASONS: tuple[Reason, ...] = (
    Reason.ZERO_ACTUAL,
    Reason.ZERO_DENOMINATOR,
    Reason.TOO_FEW_ROWS,
    Reason.ZERO_SCALE,
    Reason.NO_DATA,
    Reason.NOT_CONFIGURED,
    Reason.OVERFLOW,
)

#: The inputs a measure may need (:attr:`Measure.needs`), in words: what a result of a
#: measure that cannot be computed says is missing.
INPUTS: dict[str, str] = {
    "history": "the actuals history (to scale errors or build the naive baselines)",
    "quantiles": "quantile forecasts (forecast.quantiles)",
    "intervals": "a central interval: two quantile levels τ and 1 − τ in forecast.quantiles "
                 "(e.g. 0.1 and 0.9)",
    "costs": "unit costs (the costs section of the config)",
}

#: ``(warn, fail)`` levels; each ``None``, a number or a ``(low, high)`` pair.
Levels = tuple[Any, Any]

_ID = re.compile(r"^[a-z][a-z0-9_]*$")


@dataclass(frozen=True)
class Measure:
    """One accuracy measure.

    A measure computes its values in one of two ways:

    ``from_stats(stats)``
        from the pooled sufficient statistics of :func:`~accuracy_checks.measures.stats.
        error_stats` (one row per group): the fast, mergeable path of the core measures;
    ``compute(data)``
        from a :class:`~accuracy_checks.measures.data.MeasureData`: the rows of the window
        with their group codes, series codes, quantiles, baselines and scales.

    Either returns a frame with the columns ``value`` (float, NaN when undefined) and
    ``reason`` (``None`` or one of :data:`REASONS`), plus optional extra columns that land in
    the result's ``details``; ``n_obs`` (rows used) replaces the group's row count. The frame
    has one row per group (its index is the group number), or, for a measure with several
    figures per group (one per quantile or interval), a ``group`` column and a ``variant``
    column (``"q0.1"``, ``"80%"``) with one row per group and variant.

    ``needs`` names what the config must provide (``"quantiles"``, ``"intervals"``,
    ``"costs"``); ``window`` is ``"evaluation"`` (the ``evaluation.window`` periods) or
    ``"tracking"`` (the ``evaluation.tracking_window`` periods). ``levels(configured, extras,
    settings)`` turns the configured ``(warn, fail)`` (``None`` when the config sets none)
    into the bounds that judge one value (the tracking signal's √n-scaled limit);
    ``breach_counts(extras, settings)`` may veto a breach that chance explains (interval
    coverage's binomial test). ``origin`` says where the measure comes from (``built-in`` or
    the plugin's entry point).
    """

    id: str
    label: str
    #: ``"%"`` (always in percent), ``"pp"`` (percentage points), ``"units"`` (data units),
    #: ``"money"``, or ``""`` for a ratio without unit (MASE, tracking signal)
    unit: str
    direction: Direction
    from_stats: Callable[[pd.DataFrame], pd.DataFrame] | None = None
    description: str = ""
    compute: Callable[[MeasureData], pd.DataFrame] | None = None
    needs: frozenset[str] = field(default_factory=frozenset)
    window: Literal["evaluation", "tracking"] = "evaluation"
    levels: Callable[[Levels | None, Mapping[str, Any], MeasureSettings], Levels | None] | None = (
        None
    )
    breach_counts: Callable[[Mapping[str, Any], MeasureSettings], bool] | None = None
    #: rank worst offenders by their share of the bias (else of the absolute error)
    bias_type: bool = False
    origin: str = "built-in"
    #: how a value is worded (:func:`accuracy_checks.measures.wording.value_words`):
    #: ``"level"`` a number and its unit (``23.4 %``); ``"bias"`` the side of the error
    #: (``under-forecast by 4.2 %``); ``"mean_bias"`` the same per forecast (``… units on
    #: average``); ``"signal"`` a sustained side and the signal (``sustained under-forecast
    #: (tracking signal 4.2)``). ``None``: ``"bias"`` for a centred measure, else ``"level"``.
    wording: Literal["level", "bias", "mean_bias", "signal"] | None = None
    #: where the measure stands in tables (lower first); ties and ``None`` follow by id
    order: int | None = None
    #: rank as the headline figure of the accuracy-by-lag table (lower first); ``None``: never
    headline: int | None = None
    #: the facts behind a value, read from a result's ``details`` and ``unit`` (the periods
    #: summed, the series skipped, the baseline's WAPE …): a sentence that ends the result's
    #: message (docs/checks.md), or ``""`` when the details hold none. ``None``: no facts.
    facts: Callable[[Mapping[str, Any], str | None], str] | None = None

    @property
    def words(self) -> str:
        """The wording in effect (see :attr:`wording`)."""
        if self.wording is not None:
            return self.wording
        return "bias" if self.direction == "centered" else "level"

    def facts_words(self, details: Mapping[str, Any], unit: str | None) -> str:
        """The :attr:`facts` sentence of a result (``""`` without one)."""
        return self.facts(details, unit) if self.facts is not None else ""

    def needs_words(self, missing: Iterable[str]) -> str:
        """The inputs ``missing`` of :attr:`needs` in words (:data:`INPUTS`), ``; ``-joined.

        >>> get_measure("mase").needs_words(["history"])
        'the actuals history (to scale errors or build the naive baselines)'
        """
        return "; ".join(INPUTS.get(need, need) for need in missing)

    def evaluate(self, data: MeasureData) -> pd.DataFrame:
        """The measure's frame for ``data`` (see the class doc)."""
        if self.compute is not None:
            return self.compute(data)
        assert self.from_stats is not None  # register_measure guarantees one of the two
        return self.from_stats(data.stats)


def _column(stats: pd.DataFrame, name: str) -> np.ndarray:
    return stats[name].to_numpy(dtype=np.float64)


def _ratio(numerator: np.ndarray, denominator: np.ndarray) -> np.ndarray:
    """numerator / denominator, NaN where the denominator is 0 (no warning, never inf)."""
    out = np.full(numerator.shape, np.nan)
    with np.errstate(invalid="ignore", over="ignore"):
        np.divide(numerator, denominator, out=out, where=denominator != 0)
    return out


def _percent(fraction: np.ndarray) -> np.ndarray:
    """``100 × fraction``; beyond the float64 range it is ±inf without a warning (the caller
    finds overflowed groups on the statistics, :func:`~accuracy_checks.measures.stats.
    overflowed`)."""
    with np.errstate(over="ignore"):
        return 100.0 * fraction


def _result(
    stats: pd.DataFrame,
    value: np.ndarray,
    rules: list[tuple[np.ndarray, str]],
    **extra: np.ndarray,
) -> pd.DataFrame:
    """Frame of ``value``/``reason`` (+ extras); the first matching rule gives the reason."""
    reason = np.full(len(stats), None, dtype=object)
    undefined = np.zeros(len(stats), dtype=bool)
    for mask, label in reversed(rules):
        reason[mask] = label
        undefined |= mask
    value = np.where(undefined, np.nan, value)
    out = pd.DataFrame({"value": value}, index=stats.index)
    # dtype=object keeps None as None (pandas 3 would infer ``str`` and turn None into NaN).
    out["reason"] = pd.Series(reason, index=stats.index, dtype=object)
    for name, column in extra.items():
        out[name] = column
    return out


def _no_data(stats: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    n = _column(stats, "n")
    return n, n == 0


def _me(stats: pd.DataFrame) -> pd.DataFrame:
    _, empty = _no_data(stats)
    return _result(stats, _column(stats, "mean_e"), [(empty, Reason.NO_DATA)])


def _per_volume(stats: pd.DataFrame, numerator: str) -> pd.DataFrame:
    """``100 · stats[numerator] / Σ|actual|`` in percent; undefined if ``Σ|actual| = 0``."""
    _, empty = _no_data(stats)
    sum_abs_y = _column(stats, "sum_abs_y")
    value = _percent(_ratio(_column(stats, numerator), sum_abs_y))
    return _result(stats, value,
                   [(empty, Reason.NO_DATA), (sum_abs_y == 0, Reason.ZERO_DENOMINATOR)])


def _bias_pct(stats: pd.DataFrame) -> pd.DataFrame:
    return _per_volume(stats, "sum_e")


def _mae(stats: pd.DataFrame) -> pd.DataFrame:
    n, empty = _no_data(stats)
    return _result(stats, _ratio(_column(stats, "sum_abs_e"), n), [(empty, Reason.NO_DATA)])


def _mape(stats: pd.DataFrame) -> pd.DataFrame:
    n, empty = _no_data(stats)
    n_zero = stats["n_zero_y"].to_numpy(dtype=np.int64)
    sum_ape = _column(stats, "sum_ape")
    value = _percent(_ratio(sum_ape, n))
    nonzero = _percent(_ratio(sum_ape, n - n_zero))
    return _result(
        stats,
        value,
        [(empty, Reason.NO_DATA), (n_zero > 0, Reason.ZERO_ACTUAL)],
        mape_nonzero=nonzero,
        n_zero_actual=n_zero,
    )


def _wape(stats: pd.DataFrame) -> pd.DataFrame:
    return _per_volume(stats, "sum_abs_e")


def _rmse(stats: pd.DataFrame) -> pd.DataFrame:
    n, empty = _no_data(stats)
    with np.errstate(invalid="ignore"):
        value = np.sqrt(_ratio(_column(stats, "sum_sq_e"), n))
    return _result(stats, value, [(empty, Reason.NO_DATA)])


def _sde(stats: pd.DataFrame) -> pd.DataFrame:
    n, empty = _no_data(stats)
    with np.errstate(invalid="ignore"):
        value = np.sqrt(_ratio(_column(stats, "m2_e"), n - 1.0))
    return _result(stats, value, [(empty, Reason.NO_DATA), (n < 2, Reason.TOO_FEW_ROWS)])


#: Every known measure by id. Extend it with :func:`register_measure`, not by assignment.
MEASURES: dict[str, Measure] = {}

#: The measures computed from :func:`~accuracy_checks.measures.stats.error_stats` by default.
CORE_MEASURES: tuple[str, ...] = ("me", "bias_pct", "mae", "mape", "wape", "rmse", "sde")


def get_measure(measure_id: str) -> Measure:
    """The measure registered under ``measure_id`` (plugins included).

    Raises
    ------
    KeyError
        If no measure has that id; the message lists the known ids.

    >>> get_measure("wape").direction
    'lower'
    """
    try:
        return MEASURES[measure_id]
    except KeyError:
        pass
    registered = registered_measures()
    if measure_id in registered:
        return registered[measure_id]
    known = ", ".join(sorted(registered))
    raise KeyError(f"unknown measure {measure_id!r}; known measures: {known}") from None


#: Called before the registry is read in full: :mod:`accuracy_checks.measures.plugins` adds
#: the loader of the ``accuracy_checks.measures`` entry points (the package imports it), so
#: the registry needs no import of its plugins.
_LOADERS: list[Callable[[], object]] = []


def add_loader(loader: Callable[[], object]) -> None:
    """Have :func:`registered_measures` call ``loader`` first (it registers more measures,
    once per process)."""
    if loader not in _LOADERS:
        _LOADERS.append(loader)


def registered_measures() -> dict[str, Measure]:
    """:data:`MEASURES` after loading the plugins of the ``accuracy_checks.measures``
    entry-point group (once per process; see :mod:`accuracy_checks.measures.plugins`)."""
    for loader in _LOADERS:
        loader()
    return MEASURES


def check_measure(measure: Measure) -> None:
    """Raise ``ValueError`` if ``measure`` is not a usable definition (the message says why).

    Checked: the id (lower-case letters, digits, ``_``), the direction, that exactly one of
    ``from_stats``/``compute`` is given and that it takes one positional argument, the
    window, and that the hooks given (``levels``, ``breach_counts``, ``facts``) are callable.
    """
    if not isinstance(measure, Measure):
        raise ValueError(
            f"expected an accuracy_checks.measures.Measure, got {type(measure).__name__}"
        )
    if not isinstance(measure.id, str) or not _ID.match(measure.id):
        raise ValueError(
            f"measure id {measure.id!r} must be lower-case letters, digits and '_', starting "
            "with a letter"
        )
    if measure.direction not in ("lower", "centered", "higher"):
        raise ValueError(
            f"measure {measure.id!r}: direction must be 'lower', 'centered' or 'higher', "
            f"got {measure.direction!r}"
        )
    if measure.wording not in (None, "level", "bias", "mean_bias", "signal"):
        raise ValueError(
            f"measure {measure.id!r}: wording must be 'level', 'bias', 'mean_bias' or 'signal', "
            f"got {measure.wording!r}"
        )
    if measure.window not in ("evaluation", "tracking"):
        raise ValueError(
            f"measure {measure.id!r}: window must be 'evaluation' or 'tracking', "
            f"got {measure.window!r}"
        )
    for hook in ("levels", "breach_counts", "facts"):
        if getattr(measure, hook) is not None and not callable(getattr(measure, hook)):
            raise ValueError(f"measure {measure.id!r}: {hook} is not callable")
    given = [n for n in ("from_stats", "compute") if getattr(measure, n) is not None]
    if len(given) != 1:
        raise ValueError(
            f"measure {measure.id!r}: give exactly one of from_stats(stats) or compute(data); "
            f"got {', '.join(given) or 'neither'}"
        )
    name = given[0]
    function = getattr(measure, name)
    if not callable(function):
        raise ValueError(f"measure {measure.id!r}: {name} is not callable")
    try:
        signature = inspect.signature(function)
    except (TypeError, ValueError):  # builtins without a signature: accept
        return
    try:
        signature.bind(object())
    except TypeError:
        raise ValueError(
            f"measure {measure.id!r}: {name} must take exactly one positional argument "
            f"({'stats' if name == 'from_stats' else 'data'}); its signature is "
            f"{name}{signature}"
        ) from None


def display_order(measure_ids: Iterable[str]) -> list[str]:
    """``measure_ids`` in table order: by each measure's :attr:`~Measure.order`, then by id
    (unknown ids last, by id).

    >>> display_order(["pinball", "wape", "zz", "me"])
    ['me', 'wape', 'pinball', 'zz']
    """
    def key(measure_id: str) -> tuple[float, str]:
        found = MEASURES.get(measure_id)
        rank = found.order if found is not None and found.order is not None else math.inf
        return (rank, measure_id)

    return sorted(measure_ids, key=key)


def headline_measures() -> list[str]:
    """The measures that may headline the accuracy-by-lag table, best candidate first.

    >>> headline_measures()[:3]
    ['wape', 'mae', 'bias_pct']
    """
    ranked = [m for m in MEASURES.values() if m.headline is not None]
    return [m.id for m in sorted(ranked, key=lambda m: (m.headline, m.id))]


def measure_label(measure_id: str | None) -> str:
    """The readable label of a measure id (the id itself when unknown, ``value`` for none)."""
    if measure_id is None:
        return "value"
    found = MEASURES.get(measure_id)
    return found.label if found is not None else measure_id


def register_measure(measure: Measure, *, replace: bool = False) -> None:
    """Add ``measure`` to :data:`MEASURES`.

    Raises
    ------
    ValueError
        If a measure with the same id is registered and ``replace`` is false, or the
        definition is not usable (:func:`check_measure`).
    """
    check_measure(measure)
    if measure.id in MEASURES and not replace:
        other = MEASURES[measure.id]
        raise ValueError(
            f"a measure with id {measure.id!r} is already registered "
            f"({other.label}, {other.origin}); pass replace=True to override it"
        )
    MEASURES[measure.id] = measure


def declare(specs: Iterable[Mapping[str, Any]], descriptions: Mapping[str, str]) -> None:
    """Register the built-in measures of one module: ``specs`` holds one keyword dict of
    :class:`Measure` fields per measure (in registry order), ``descriptions`` their
    :attr:`~Measure.description` by id (every id needs one).

    Raises
    ------
    ValueError
        As :func:`register_measure` (an id registered twice, an unusable definition).
    """
    for spec in specs:
        register_measure(Measure(**spec, description=descriptions[spec["id"]]))


#: The core measures, one keyword dict of :class:`Measure` fields each (the table order is the
#: registry's order); their descriptions follow by id.
_CORE: tuple[dict[str, Any], ...] = (
    dict(id="me", label="Mean error", unit="units", direction="centered", from_stats=_me,
         order=0, headline=3, wording="mean_bias", bias_type=True),
    dict(id="bias_pct", label="Bias %", unit="%", direction="centered", from_stats=_bias_pct,
         order=1, headline=2, bias_type=True),
    dict(id="mae", label="MAE", unit="units", direction="lower", from_stats=_mae, order=2,
         headline=1),
    dict(id="mape", label="MAPE %", unit="%", direction="lower", from_stats=_mape, order=3,
         headline=4),
    dict(id="wape", label="WAPE %", unit="%", direction="lower", from_stats=_wape, order=4,
         headline=0),
    dict(id="rmse", label="RMSE", unit="units", direction="lower", from_stats=_rmse, order=6,
         headline=6),
    dict(id="sde", label="SD of errors", unit="units", direction="lower", from_stats=_sde,
         order=7, headline=7),
)
_CORE_DESCRIPTIONS = {
    "me": "Σe/n with e = actual − forecast; positive = under-forecast. "
          "docs/measures.md §1 (common practice).",
    "bias_pct": "100·Σe/Σ|actual| in percent, pooled (volume-weighted); positive = "
                "under-forecast. Undefined if Σ|actual| = 0. docs/measures.md §2 "
                "(common practice).",
    "mae": "Mean absolute error Σ|e|/n in data units (MAD). docs/measures.md §3 "
           "(common practice; Brown 1959).",
    "mape": "100·mean(|e|/|actual|) in percent, pooled over rows. Undefined if any "
            "actual is 0; then mape_nonzero covers the nonzero rows. docs/measures.md §4 "
            "(common practice; critiqued by Hyndman & Koehler 2006).",
    "wape": "100·Σ|e|/Σ|actual| in percent (MAD/mean ratio), pooled. Undefined if "
            "Σ|actual| = 0. docs/measures.md §5 (Kolassa & Schütz 2007).",
    "rmse": "√(Σe²/n) in data units, pooled. docs/measures.md §7 "
            "(common practice; Hyndman & Koehler 2006).",
    "sde": "√(Σ(e − ME)²/(n − 1)) in data units, pooled. Undefined if n < 2. "
           "docs/measures.md §8 (common practice).",
}
declare(_CORE, _CORE_DESCRIPTIONS)
