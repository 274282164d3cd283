"""The config's pydantic models: declarations of sources, sections, thresholds and drift.

Declarations only: no pandas, no I/O, no import of the measures. Each model checks its own
structure (types, ranges, keys, the date formats, how sections fit together); the names that
depend on the measure catalogue (measure ids, which way a level must point, a measure's inputs,
the frequency) are checked against the :class:`~accuracy_checks.config.catalogue.Catalogue`
handed in through pydantic's validation context, and left unchecked without one.
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Annotated, ClassVar, Literal

from pydantic import (
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Discriminator,
    Field,
    PrivateAttr,
    Tag,
    ValidationInfo,
    field_validator,
    model_validator,
)

from accuracy_checks.config.catalogue import (
    catalogue_of,
    check_frequency,
    check_measure_list,
    has_central_interval,
    unknown_measure,
    unmet_inputs,
)
from accuracy_checks.config.engines import Engine
from accuracy_checks.config.levels import Bound, check_level
from accuracy_checks.config.places import (
    Location,
    Place,
    PlaceEntry,
    SqlPlace,
    SqlSource,
    Url,
    entry_kind,
    one_place,
)

#: The longest horizon a config may give (periods).
MAX_HORIZON = 1000

#: Column names the tool uses for its own canonical frames; key columns may not use them.
RESERVED_COLUMNS = frozenset(
    {"period", "issued", "forecast", "actual", "segment", "lag", "attempt", "source", "cycle"}
)


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


class Level(_Strict):
    """Warn and fail levels of one measure.

    A number bounds the value (``lower`` measures: beyond it is bad; ``higher``: below it is
    bad; ``centered`` measures: its absolute value). A ``[low, high]`` pair bounds a centred
    measure asymmetrically. A value strictly beyond a level breaks it.
    """

    warn: Bound | None = None
    fail: Bound | None = None

    @model_validator(mode="after")
    def _one_level(self) -> Level:
        if self.warn is None and self.fail is None:
            raise ValueError("give a `warn` level, a `fail` level, or both")
        return self


class _Placed(_Strict):
    """An input with a place: ``path`` (a path or URL) or ``sql`` (a table or query), exactly
    one of them."""

    role: ClassVar[str] = "input"

    path: Location | None = None
    sql: SqlSource | None = None

    @property
    def place(self) -> Place:
        """The input's place: its path or URL, or its SQL source."""
        return self.sql if self.sql is not None else self.path  # type: ignore[return-value]

    @model_validator(mode="after")
    def _place(self) -> _Placed:
        one_place(self.role, self.path, self.sql)
        return self


class ForecastSource(_Placed):
    """Where the forecast is (``path``, or ``sql``: a table or query) and which columns hold
    what."""

    role: ClassVar[str] = "forecast"

    keys: Annotated[list[str], Field(min_length=1)]
    period: str
    value: str
    issued: str
    quantiles: dict[float, str] = Field(default_factory=dict)
    #: negative forecasts are an output-check failure unless allowed here
    #: (``true`` for every segment, or a list of segment names)
    allow_negative: bool | list[str] = False
    #: the one format of a date column written as text, by column (``period``/``issued``
    #: column names → a strftime pattern such as ``"%d/%m/%Y"``); default ISO 8601
    #: (YYYY-MM-DD). History files use these too.
    date_formats: dict[str, str] = Field(default_factory=dict)

    @field_validator("keys")
    @classmethod
    def _keys(cls, keys: list[str]) -> list[str]:
        if len(set(keys)) != len(keys):
            raise ValueError(f"key columns repeat: {keys}")
        clash = sorted(set(keys) & RESERVED_COLUMNS)
        if clash:
            raise ValueError(
                f"key column name(s) {clash} are reserved by accuracy-checks; rename the "
                "column(s) in the data or add a renamed copy"
            )
        return keys

    @field_validator("quantiles")
    @classmethod
    def _quantiles(cls, quantiles: dict[float, str]) -> dict[float, str]:
        for tau in quantiles:
            if not 0 < tau < 1:
                raise ValueError(f"quantile level {tau} must lie strictly between 0 and 1")
        if len(set(quantiles.values())) != len(quantiles):
            raise ValueError("two quantile levels name the same column")
        return dict(sorted(quantiles.items()))

    @model_validator(mode="after")
    def _date_formats(self) -> ForecastSource:
        _check_date_formats("forecast", self.date_formats, {"period": self.period,
                                                            "issued": self.issued})
        return self


class ActualsSource(_Placed):
    """Where the actuals are (``path``, or ``sql``: a table or query); ``keys`` default to the
    forecast's keys."""

    role: ClassVar[str] = "actuals"

    period: str
    value: str
    keys: list[str] | None = None
    #: the one format of the period column when written as text (``{column: "%d/%m/%Y"}``);
    #: default ISO 8601 (YYYY-MM-DD)
    date_formats: dict[str, str] = Field(default_factory=dict)

    @model_validator(mode="after")
    def _date_formats(self) -> ActualsSource:
        _check_date_formats("actuals", self.date_formats, {"period": self.period})
        return self


#: strftime directives that place a date on the calendar (at least one is needed): day,
#: month, year, day of year, ISO year and week
_DATE_DIRECTIVES = frozenset("dmYyBbjGV")
#: every directive a date format may use (the others: weekday, week number, time, offset)
_DIRECTIVES = _DATE_DIRECTIVES | frozenset("aAwuUWHIMSpfzZ")


def _check_date_formats(section: str, formats: dict[str, str], columns: dict[str, str]) -> None:
    """Each key is one of the section's date columns; each format a strftime pattern with at
    least a day, month or year directive that reads back what it writes."""
    from datetime import datetime

    for column, fmt in formats.items():
        if column not in columns.values():
            named = ", ".join(f"{column!r} (`{section}.{key}`)" for key, column in
                              columns.items())
            raise ValueError(
                f"`{section}.date_formats` names column {column!r}, which is not a date column "
                f"of the {section}; its date columns are {named}"
            )
        directives = re.findall(r"%(.)", fmt.replace("%%", ""))
        unknown = sorted(set(directives) - _DIRECTIVES)
        if unknown or not set(directives) & _DATE_DIRECTIVES:
            raise ValueError(
                f"`{section}.date_formats.{column}`: {fmt!r} is not a date format; give a "
                "strftime pattern with day, month and year, e.g. \"%d/%m/%Y\" or \"%Y%m%d\""
                + (f" (unknown directive(s) {', '.join('%' + d for d in unknown)})"
                   if unknown else "")
            )
        sample = datetime(2001, 12, 31, 13, 45, 30)
        try:
            datetime.strptime(sample.strftime(fmt), fmt)
        except ValueError as exc:
            raise ValueError(
                f"`{section}.date_formats.{column}`: {fmt!r} cannot read back the dates it "
                f"writes ({exc}); give a strftime pattern such as \"%d/%m/%Y\""
            ) from None


class Segments(_Strict):
    """How series are grouped into segments that share thresholds."""

    columns: list[str] = Field(default_factory=list)
    #: a file, or a table or query (``{sql: {url, table}}``)
    mapping: PlaceEntry | None = None

    @property
    def mapping_place(self) -> Place | None:
        """The mapping's place: its path or its SQL source (``None``: no mapping)."""
        return self.mapping.sql if isinstance(self.mapping, SqlPlace) else self.mapping


class Coverage(_Strict):
    active_periods: Annotated[int, Field(ge=1)] = 8


class Evaluation(_Strict):
    lags: Annotated[list[int], Field(min_length=1)] = Field(default_factory=lambda: [1])
    window: Annotated[int, Field(ge=1)] = 4
    min_obs: Annotated[int, Field(ge=1)] = 20
    #: status of a thresholded measure whose value is undefined (zero actuals, too few rows)
    undefined_status: Literal["pass", "warn", "fail", "skipped"] = "warn"
    #: measures reported besides the core ones and those a threshold names (``all``: every
    #: registered measure whose inputs the config provides)
    measures: list[str] = Field(default_factory=list)
    #: seasonal period m of MASE, MSIS and the seasonal naive baseline (default: from the
    #: frequency: 52 weekly, 12 monthly, 4 quarterly, 7 daily, 24 hourly, 1 otherwise)
    seasonal_period: Annotated[int, Field(ge=1)] | None = None
    #: trailing periods (with actuals) of the tracking signals
    tracking_window: Annotated[int, Field(ge=1)] = 13
    #: ``scaled``: tracking-signal levels are z-values, the limit is z·1.25·√n for a window of
    #: n periods; ``constant``: levels bound |tracking signal| directly
    tracking_limit: Literal["scaled", "constant"] = "scaled"
    #: smoothing constant α of Trigg's tracking signal
    trigg_alpha: Annotated[float, Field(gt=0, le=1)] = 0.1
    #: a coverage breach counts only if the binomial test gives a p-value below this
    coverage_test_level: Annotated[float, Field(gt=0, lt=1)] = 0.05
    #: worst-offender series listed for each breached accuracy result
    offenders: Annotated[int, Field(ge=0)] = 10

    @field_validator("lags")
    @classmethod
    def _lags(cls, lags: list[int]) -> list[int]:
        bad = [lag for lag in lags if lag < 1]
        if bad:
            raise ValueError(f"lags start at 1 (the first period a cycle forecasts); got {bad}")
        return sorted(set(lags))

    @field_validator("measures")
    @classmethod
    def _measures(cls, measures: list[str], info: ValidationInfo) -> list[str]:
        return check_measure_list(measures, catalogue_of(info))


class UnitCosts(_Strict):
    """Money per unit of error: ``under`` for each unit under-forecast (actual above the
    forecast: lost sales), ``over`` for each unit over-forecast (stock left over). Both > 0."""

    under: Annotated[float, Field(gt=0, allow_inf_nan=False)]
    over: Annotated[float, Field(gt=0, allow_inf_nan=False)]


class Costs(_Strict):
    """Unit costs of forecast errors, per segment (``default`` for the others)."""

    #: the label written after money values (``EUR``, ``USD`` …)
    currency: str = "money"
    default: UnitCosts | None = None
    segments: dict[str, UnitCosts] = Field(default_factory=dict)


class Thresholds(_Strict):
    default: dict[str, Level] = Field(default_factory=dict)
    segments: dict[str, dict[str, Level]] = Field(default_factory=dict)


class Drift(_Strict):
    """Checks across cycles, from the audit trail (:mod:`accuracy_checks.checks.drift`).

    ``drift.control_limit``: each accuracy figure (segment × measure × lag) against its own
    trailing cycles: mean ± ``k`` standard deviations of its last ``cycles`` earlier values,
    judged once ``min_history`` earlier cycles have a value; only a worsening counts.
    ``drift.sustained_breach``: a threshold breached (warn or fail) in ``sustained_cycles``
    consecutive cycles gets a result of ``sustained_status``.
    """

    #: both drift checks on or off
    enabled: bool = True
    #: the control-limit rule on or off (``enabled: false`` turns both off)
    control_limit: bool = True
    #: N: trailing cycles (with a value) the mean and standard deviation come from
    cycles: Annotated[int, Field(ge=2)] = 13
    #: the limits lie k standard deviations from the trailing mean
    k: Annotated[float, Field(gt=0, allow_inf_nan=False)] = 3.0
    #: fewer earlier cycles with a value: the figure is skipped (reason ``too_few_cycles``)
    min_history: Annotated[int, Field(ge=2)] = 8
    #: status of a value beyond its limits
    status: Literal["warn", "fail"] = "warn"
    #: measures watched (default: those a threshold names; ``all``: every reported measure)
    measures: list[str] = Field(default_factory=list)
    #: M: a threshold breached in M consecutive cycles escalates (0 turns the rule off)
    sustained_cycles: Annotated[int, Field(ge=0)] = 3
    #: the status a sustained breach escalates to
    sustained_status: Literal["warn", "fail"] = "fail"

    @field_validator("measures")
    @classmethod
    def _measures(cls, measures: list[str], info: ValidationInfo) -> list[str]:
        return check_measure_list(measures, catalogue_of(info))

    @model_validator(mode="after")
    def _counts(self) -> Drift:
        if self.min_history > self.cycles:
            raise ValueError(
                f"drift.min_history ({self.min_history}) cannot exceed drift.cycles "
                f"({self.cycles}): the limits come from at most `cycles` earlier cycles"
            )
        if self.sustained_cycles == 1:
            raise ValueError(
                "drift.sustained_cycles: 1 would escalate every breach at once; give 2 or "
                "more consecutive cycles, or 0 to turn the rule off"
            )
        return self


class Config(_Strict):
    """A validated config. Paths are absolute (resolved against the config file's folder)."""

    version: Literal[1] = 1
    forecast: ForecastSource
    actuals: ActualsSource
    #: earlier forecasts: a file or folder, a table or query (``{sql: {url, table}}``), or a
    #: list of them
    history: Annotated[
        Annotated[Location, Tag("Path")] | Annotated[SqlPlace, Tag("SqlPlace")]
        | Annotated[list[PlaceEntry], Tag("list")],
        Discriminator(entry_kind),
    ] | None = None
    #: a local folder, or a URL (``s3://bucket/archive``): :mod:`accuracy_checks.store.archive`
    archive: Location = Path(".accuracy_checks/archive")
    store: str | None = None
    frequency: str
    #: periods a cycle forecasts, 1 to MAX_HORIZON (1000): a longer horizon would run past
    #: the calendar the tool computes on (year 2262) at daily and finer frequencies
    horizon: int
    segments: Segments = Field(default_factory=Segments)
    coverage: Coverage = Field(default_factory=Coverage)
    evaluation: Evaluation = Field(default_factory=Evaluation)
    thresholds: Thresholds = Field(default_factory=Thresholds)
    #: unit costs of under- and over-forecasting (measure ``error_cost``)
    costs: Costs | None = None
    #: drift and sustained-breach checks across cycles (from the audit trail)
    drift: Drift = Field(default_factory=Drift)
    #: the engine: ``pandas`` (default), ``dask``, or ``{name: dask, scheduler, workers,
    #: memory_limit}`` (:class:`Engine`; a plain name is its ``name``)
    engine: Annotated[Engine, BeforeValidator(
        lambda v: {"name": v} if isinstance(v, str) else v,
        json_schema_input_type=Literal["pandas", "dask"] | Engine)] = Field(
        default_factory=Engine)

    _source: Path | None = PrivateAttr(default=None)
    _text: str = PrivateAttr(default="")

    @property
    def source(self) -> Path | None:
        """The config file this was read from (``None`` if built in code)."""
        return self._source

    @property
    def text(self) -> str:
        """The config file's text, as read."""
        return self._text

    @property
    def actual_keys(self) -> list[str]:
        return list(self.actuals.keys or self.forecast.keys)

    @property
    def history_paths(self) -> list[Place]:
        """The place of each history entry: a path, or a SQL source."""
        if self.history is None:
            return []
        entries = self.history if isinstance(self.history, list) else [self.history]
        return [e.sql if isinstance(e, SqlPlace) else e for e in entries]

    @property
    def sql_sources(self) -> list[tuple[str, SqlSource]]:
        """``(config key, source)`` of every input read from a database."""
        found: list[tuple[str, Place | None]] = [
            ("forecast.sql", self.forecast.sql), ("actuals.sql", self.actuals.sql),
            ("segments.mapping.sql", self.segments.mapping_place)]
        several = isinstance(self.history, list)
        found += [(f"history[{i}].sql" if several else "history.sql", p)
                  for i, p in enumerate(self.history_paths)]
        return [(key, p) for key, p in found if isinstance(p, SqlSource)]

    @property
    def url_places(self) -> list[tuple[str, Url]]:
        """``(config key, URL)`` of every input or archive given as a URL."""
        found: list[tuple[str, object]] = [
            ("forecast.path", self.forecast.path), ("actuals.path", self.actuals.path),
            ("segments.mapping", self.segments.mapping_place), ("archive", self.archive)]
        several = isinstance(self.history, list)
        found += [(f"history[{i}]" if several else "history", p)
                  for i, p in enumerate(self.history_paths)]
        return [(key, p) for key, p in found if isinstance(p, Url)]

    @field_validator("horizon")
    @classmethod
    def _horizon(cls, horizon: int) -> int:
        if horizon < 1:
            raise ValueError(f"horizon must be at least 1 period; got {horizon}")
        if horizon > MAX_HORIZON:
            raise ValueError(
                f"horizon must be at most {MAX_HORIZON} periods; got {horizon}"
            )
        return horizon

    @field_validator("frequency")
    @classmethod
    def _frequency(cls, frequency: str, info: ValidationInfo) -> str:
        return check_frequency(frequency, catalogue_of(info))

    @model_validator(mode="after")
    def _cross_field(self, info: ValidationInfo) -> Config:
        if self.actuals.keys is not None and len(self.actuals.keys) != len(self.forecast.keys):
            raise ValueError(
                f"actuals.keys {self.actuals.keys} has {len(self.actuals.keys)} column(s) but "
                f"forecast.keys {self.forecast.keys} has {len(self.forecast.keys)}; actuals.keys "
                "names the actuals' columns for the forecast's keys, one for one and in the "
                "same order (leave it out when the names are the same)"
            )
        beyond = [lag for lag in self.evaluation.lags if lag > self.horizon]
        if beyond:
            raise ValueError(
                f"evaluation.lags {beyond} lie beyond the horizon of {self.horizon} periods"
            )
        catalogue = catalogue_of(info)
        if catalogue is None:
            return self
        for where, by_measure in self._levels():
            for measure, level in by_measure.items():
                known = catalogue.measures.get(measure)
                if known is None:
                    raise ValueError(unknown_measure(f"{where}.{measure}", measure, catalogue))
                check_level(f"{where}.{measure}", level.warn, level.fail, known.direction)
        return self

    @model_validator(mode="after")
    def _measure_inputs(self, info: ValidationInfo) -> Config:
        """A measure that a threshold or ``evaluation.measures`` names must have its inputs
        (unit costs, quantiles, a central interval); ``all`` only takes what is fed."""
        catalogue = catalogue_of(info)
        if catalogue is None:
            return self
        have = {
            "costs": self.costs is not None,
            "quantiles": bool(self.forecast.quantiles),
            "intervals": has_central_interval(self.forecast.quantiles),
        }
        named = [("evaluation.measures", m) for m in self.evaluation.measures]
        named += [(where, m) for where, by_measure in self._levels() for m in by_measure]
        unmet_inputs(named, have, catalogue)
        return self

    def _levels(self) -> list[tuple[str, dict[str, Level]]]:
        """``(where, levels by measure)`` of ``thresholds.default`` and each segment."""
        return [("thresholds.default", self.thresholds.default)] + [
            (f"thresholds.segments.{name}", levels)
            for name, levels in self.thresholds.segments.items()
        ]
