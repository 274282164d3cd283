"""The YAML config: pydantic v2 models, safe loading and messages a user can act on.

The models are declarations only (no pandas, no I/O beyond reading the file itself). Every
problem is raised as :class:`~accuracy_checks.errors.ConfigError` naming the file, the key path
and, for a misspelt key, the closest valid key.
"""

from __future__ import annotations

import difflib
import json
import re
import typing
from pathlib import Path
from typing import Annotated, Any, Literal

import yaml
from pydantic import (
    BaseModel,
    ConfigDict,
    Field,
    PrivateAttr,
    ValidationError,
    field_validator,
    model_validator,
)

from accuracy_checks.errors import ConfigError

Direction = Literal["lower", "centered", "higher"]

#: Measures a threshold can name, with the way that is better. Accuracy measures come from the
#: measure registry; the rest are figures of the coverage checks.
CHECK_MEASURES: dict[str, tuple[Direction, str]] = {
    "missing_series_pct": ("lower", "%"),
    "unexpected_series": ("lower", "count"),
    "incomplete_series": ("lower", "count"),
    "series_count_change_pct": ("centered", "%"),
}

#: The longest horizon a config may give (periods).
MAX_HORIZON = 1000

#: Column names the tool uses for its own canonical frames; key columns may not use them.
RESERVED_COLUMNS = frozenset(
    {"period", "issued", "forecast", "actual", "segment", "lag", "attempt", "source", "cycle"}
)


def measure_directions() -> dict[str, tuple[Direction, str]]:
    """Every measure id a threshold may name → (direction, unit).

    Accuracy measures come from the registry, plugins (entry points) included.
    """
    from accuracy_checks.measures.registry import registered_measures

    out: dict[str, tuple[Direction, str]] = {
        m.id: (m.direction, m.unit) for m in registered_measures().values()
    }
    out.update(CHECK_MEASURES)
    return out


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


Bound = float | tuple[float, float]


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


class ForecastSource(_Strict):
    """Where the forecast is and which columns hold what."""

    path: Path
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


class ActualsSource(_Strict):
    """Where the actuals are; ``keys`` default to the forecast's keys."""

    path: Path
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
    mapping: Path | None = None


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
    def _measures(cls, measures: list[str]) -> list[str]:
        return _measure_list(measures)


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
    def _measures(cls, measures: list[str]) -> list[str]:
        return _measure_list(measures)

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
    history: Path | list[Path] | None = None
    archive: Path = Path(".accuracy_checks/archive")
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
    def history_paths(self) -> list[Path]:
        if self.history is None:
            return []
        return list(self.history) if isinstance(self.history, list) else [self.history]

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
    def _frequency(cls, frequency: str) -> str:
        import pandas as pd

        try:
            pd.tseries.frequencies.to_offset(frequency)
        except ValueError as exc:
            raise ValueError(
                f"{frequency!r} is not a pandas offset alias (e.g. D, W-MON, MS, QS)"
            ) from exc
        return frequency

    @model_validator(mode="after")
    def _cross_field(self) -> Config:
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
        known = measure_directions()
        levels = [("thresholds.default", self.thresholds.default)] + [
            (f"thresholds.segments.{name}", lv) for name, lv in self.thresholds.segments.items()
        ]
        for where, by_measure in levels:
            for measure, level in by_measure.items():
                if measure not in known:
                    raise ValueError(
                        f"{where}.{measure}: unknown measure {measure!r}"
                        + _did_you_mean(measure, known)
                        + f"; measures: {', '.join(sorted(known))}"
                    )
                _check_level(f"{where}.{measure}", level, known[measure][0])
        return self

    @model_validator(mode="after")
    def _measure_inputs(self) -> Config:
        """A measure that a threshold or ``evaluation.measures`` names must have its inputs
        (unit costs, quantiles, a central interval); ``all`` only takes what is fed."""
        from accuracy_checks.measures.data import central_intervals
        from accuracy_checks.measures.registry import registered_measures

        have = {
            "costs": self.costs is not None,
            "quantiles": bool(self.forecast.quantiles),
            "intervals": bool(central_intervals(list(self.forecast.quantiles))),
        }
        what = {
            "costs": "a `costs` section (unit costs of under- and over-forecasting)",
            "quantiles": "quantile columns in `forecast.quantiles`",
            "intervals": "two quantile levels τ and 1 − τ in `forecast.quantiles` "
                         "(e.g. 0.1 and 0.9)",
        }
        named = [("evaluation.measures", m) for m in self.evaluation.measures]
        named += [("thresholds.default", m) for m in self.thresholds.default]
        named += [(f"thresholds.segments.{s}", m)
                  for s, lv in self.thresholds.segments.items() for m in lv]
        registry = registered_measures()
        for where, measure in named:
            needs = registry[measure].needs if measure in registry else frozenset()
            for need in sorted(needs):
                if not have.get(need, True):
                    raise ValueError(f"{where} names {measure!r}, which needs {what[need]}")
        return self


def _as_pair(bound: Bound, direction: Direction) -> tuple[float, float]:
    if isinstance(bound, tuple):
        return bound
    return (-bound, bound) if direction == "centered" else (bound, bound)


def _check_level(where: str, level: Level, direction: Direction) -> None:
    for name in ("warn", "fail"):
        bound = getattr(level, name)
        if isinstance(bound, tuple):
            if direction != "centered":
                raise ValueError(
                    f"{where}.{name}: a [low, high] pair only suits measures judged by their "
                    f"distance from 0 (me, bias_pct, series_count_change_pct); give one number"
                )
            if bound[0] > bound[1]:
                raise ValueError(f"{where}.{name}: low {bound[0]} is above high {bound[1]}")
        elif bound is not None and direction == "centered" and bound < 0:
            raise ValueError(
                f"{where}.{name}: {bound} bounds the absolute value and cannot be negative; "
                "use a [low, high] pair for asymmetric bounds"
            )
    if level.warn is None or level.fail is None:
        return
    w, f = level.warn, level.fail
    if direction == "centered":
        (wl, wh), (fl, fh) = _as_pair(w, direction), _as_pair(f, direction)
        if not (fl <= wl and wh <= fh):
            raise ValueError(
                f"{where}: the warn level {_show(w)} must lie inside the fail level {_show(f)} "
                "(warn comes before fail)"
            )
    elif direction == "lower" and w > f:  # type: ignore[operator]
        raise ValueError(
            f"{where}: warn {_show(w)} is beyond fail {_show(f)}; for this measure lower is "
            f"better, so warn must be ≤ fail (e.g. warn: {_show(f)}, fail: {_show(w)})"
        )
    elif direction == "higher" and w < f:  # type: ignore[operator]
        raise ValueError(
            f"{where}: warn {_show(w)} is below fail {_show(f)}; for this measure higher is "
            "better, so warn must be ≥ fail"
        )


def _show(bound: Bound) -> str:
    if isinstance(bound, tuple):
        return f"[{bound[0]:g}, {bound[1]:g}]"
    return f"{bound:g}"


def _measure_list(measures: list[str]) -> list[str]:
    """Measure ids (or ``all``) named in a list key, each known, without repeats."""
    known = measure_directions()
    for measure in measures:
        if measure != "all" and measure not in known:
            raise ValueError(
                f"unknown measure {measure!r}" + _did_you_mean(measure, known)
                + f"; measures: all, {', '.join(sorted(known))}"
            )
    return list(dict.fromkeys(measures))


def _did_you_mean(word: str, candidates: typing.Iterable[str]) -> str:
    match = difflib.get_close_matches(word, list(candidates), n=1, cutoff=0.6)
    return f" — did you mean {match[0]!r}?" if match else ""


# --------------------------------------------------------------------------- loading


class _UniqueKeyLoader(yaml.SafeLoader):
    """Safe loader that rejects a key given twice in one mapping (YAML keeps the last silently)."""


def _construct_mapping(loader: _UniqueKeyLoader, node: yaml.MappingNode) -> dict[Any, Any]:
    seen: set[Any] = set()
    for key_node, _ in node.value:
        key = loader.construct_object(key_node)
        if key in seen:
            raise yaml.constructor.ConstructorError(
                None, None, f"key {key!r} is given twice", key_node.start_mark
            )
        seen.add(key)
    return loader.construct_mapping(node)


_UniqueKeyLoader.add_constructor(
    yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG,
    _construct_mapping,  # type: ignore[arg-type]
)


def load_config(path: str | Path, **overrides: Any) -> Config:
    """Read, validate and resolve a config file.

    ``overrides`` replace top-level sections after loading (used by the CLI's path options).
    Raises :class:`ConfigError` with a message naming the file and key.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError(
            f"Config file {path} does not exist. Pass the path of your YAML config with "
            "--config (see the README's config reference)."
        ) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"Config file {path} cannot be read: {exc}.") from exc
    return parse_config(text, source=path, **overrides)


def parse_config(text: str, *, source: Path | None = None, **overrides: Any) -> Config:
    """Validate config text (YAML). Relative paths resolve against ``source``'s folder."""
    name = str(source) if source else "<config>"
    try:
        raw = yaml.load(text, Loader=_UniqueKeyLoader)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" at line {mark.line + 1}, column {mark.column + 1}" if mark else ""
        problem = getattr(exc, "problem", None) or str(exc)
        raise ConfigError(f"Config file {name} is not valid YAML{where}: {problem}.") from None
    if raw is None:
        raise ConfigError(f"Config file {name} is empty; see the README's config reference.")
    if not isinstance(raw, dict):
        raise ConfigError(
            f"Config file {name} must be a mapping of keys (version, forecast, actuals, …); "
            f"it holds a {type(raw).__name__}."
        )
    raw.update(overrides)
    try:
        config = Config.model_validate(raw)
    except ValidationError as exc:
        raise ConfigError(_explain(exc, name)) from None
    base = source.resolve().parent if source else Path.cwd()
    config = _resolve_paths(config, base)
    config._source = source.resolve() if source else None
    config._text = text
    return config


def _resolve_paths(config: Config, base: Path) -> Config:
    def res(p: Path) -> Path:
        p = p.expanduser()
        return p if p.is_absolute() else (base / p)

    history = config.history
    if isinstance(history, list):
        history = [res(p) for p in history]
    elif history is not None:
        history = res(history)
    store = config.store
    prefix = "sqlite:///"
    if store and store.startswith(prefix) and not store.startswith(prefix + "/"):
        rest = store[len(prefix) :]
        if rest and rest != ":memory:":
            store = prefix + str(res(Path(rest)))
    mapping = config.segments.mapping
    return config.model_copy(
        update={
            "forecast": config.forecast.model_copy(update={"path": res(config.forecast.path)}),
            "actuals": config.actuals.model_copy(update={"path": res(config.actuals.path)}),
            "history": history,
            "archive": res(config.archive),
            "store": store,
            "segments": config.segments.model_copy(
                update={"mapping": res(mapping) if mapping else None}
            ),
        }
    )


def _explain(exc: ValidationError, name: str) -> str:
    lines = []
    for err in exc.errors():
        loc = tuple(err["loc"])
        key = ".".join(str(p) for p in loc if not _is_union_tag(p)) or "(top level)"
        kind = err["type"]
        if kind == "extra_forbidden":
            parent = tuple(p for p in loc[:-1] if not _is_union_tag(p))
            valid = _fields_at(parent)
            hint = _did_you_mean(str(loc[-1]), valid)
            allowed = f" Valid keys here: {', '.join(valid)}." if valid else ""
            lines.append(f"unknown key `{key}`{hint}.{allowed}")
        elif kind == "missing":
            lines.append(f"`{key}` is required but missing.")
        else:
            msg = err["msg"].removeprefix("Value error, ")
            value = err.get("input")
            shown = (
                f" (got {json.dumps(value, default=str)[:80]})"
                if not isinstance(value, dict | list)
                else ""
            )
            lines.append(f"`{key}`: {msg}{shown}.")
    unique = list(dict.fromkeys(lines))
    return f"Config file {name} is invalid: " + " ".join(unique)


def _is_union_tag(part: Any) -> bool:
    # pydantic inserts the member type's name into the location of union errors
    return isinstance(part, str) and (
        part in {"float", "tuple[float, float]", "bool", "list[str]", "list[Path]", "Path"}
        or part.startswith(("function-", "tuple[", "list["))
    )


def _fields_at(loc: tuple[Any, ...]) -> list[str]:
    """The valid keys of the model found at ``loc`` (for "did you mean")."""
    tp: Any = Config
    for part in loc:
        tp = _unwrap(tp)
        if isinstance(tp, type) and issubclass(tp, BaseModel):
            field = tp.model_fields.get(str(part))
            if field is None:
                return []
            tp = field.annotation
        elif typing.get_origin(tp) is dict:
            tp = typing.get_args(tp)[1]
        else:
            return []
    tp = _unwrap(tp)
    if isinstance(tp, type) and issubclass(tp, BaseModel):
        return list(tp.model_fields)
    return []


def _unwrap(tp: Any) -> Any:
    origin = typing.get_origin(tp)
    if origin is Annotated:
        return _unwrap(typing.get_args(tp)[0])
    if origin in (typing.Union, getattr(__import__("types"), "UnionType", None)):
        models = [a for a in typing.get_args(tp) if a is not type(None)]
        return _unwrap(models[0]) if len(models) == 1 else tp
    return tp


def json_schema() -> dict[str, Any]:
    """The config's JSON Schema (for editors: yaml-language-server, VS Code).

    Built at call time from :func:`measure_directions`, so plugin measures are included. It
    rejects what :func:`parse_config` rejects for a name: an unknown key anywhere, an unknown
    measure as a threshold key (``thresholds.default.<measure>``,
    ``thresholds.segments.<segment>.<measure>``) or in ``evaluation.measures`` /
    ``drift.measures`` (which also take ``all``); and it lists the valid measures for
    completion (one property per measure, with its label, unit and direction).
    """
    schema = Config.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "accuracy-checks config"
    _add_measure_names(schema)
    return schema


def _measure_description(measure: str) -> str:
    """One line for an editor's completion list: label, unit, which way is better."""
    from accuracy_checks.measures.registry import registered_measures

    direction, unit = measure_directions()[measure]
    better = {
        "lower": "lower is better",
        "higher": "higher is better",
        "centered": "levels bound its distance from its target",
    }[direction]
    registered = registered_measures().get(measure)
    label = registered.label if registered is not None else "coverage check figure"
    return f"{label} ({unit}; {better})" if unit else f"{label} ({better})"


def _add_measure_names(schema: dict[str, Any]) -> None:
    """Constrain the measure names of ``schema`` (from :meth:`Config.model_json_schema`) in
    place: ``$defs/MeasureLevels`` (one property per measure, no other key) for the threshold
    maps, ``$defs/MeasureName`` (an enum with ``all``) for the measure lists."""
    known = sorted(measure_directions())
    defs = schema["$defs"]
    defs["MeasureLevels"] = {
        "title": "Levels by measure",
        "description": "warn and fail levels keyed by measure id",
        "type": "object",
        "properties": {
            m: {"$ref": "#/$defs/Level", "description": _measure_description(m)} for m in known
        },
        "additionalProperties": False,
    }
    defs["MeasureName"] = {
        "title": "Measure",
        "description": "a measure id, or `all` for every measure whose inputs the config has",
        "enum": ["all", *known],
    }
    thresholds = defs["Thresholds"]["properties"]
    thresholds["default"] = {"$ref": "#/$defs/MeasureLevels"}
    thresholds["segments"] = {
        "title": "Levels by segment",
        "type": "object",
        "additionalProperties": {"$ref": "#/$defs/MeasureLevels"},
    }
    for model in ("Evaluation", "Drift"):
        defs[model]["properties"]["measures"]["items"] = {"$ref": "#/$defs/MeasureName"}
