"""Reading a config: safe YAML, validation, paths resolved, and messages a user can act on.

Every problem is raised as :class:`~accuracy_checks.errors.ConfigError` naming the file, the
key path and, for a misspelt key, the closest valid key. The measure names and the frequency
are checked against the catalogue the caller hands in (``catalogue=``: a
:class:`~accuracy_checks.config.catalogue.Catalogue`, or a function that returns one);
:func:`accuracy_checks.load_config` hands in the registered measures.
"""

from __future__ import annotations

import json
import types
import typing
from collections.abc import Callable
from pathlib import Path
from typing import Annotated, Any

import yaml
from pydantic import BaseModel, ValidationError

from accuracy_checks.config.catalogue import CONTEXT_KEY, Catalogue, did_you_mean
from accuracy_checks.config.models import Config, SqlPlace, SqlSource, Url
from accuracy_checks.config.urls import expand_env, mask_location
from accuracy_checks.errors import ConfigError

__all__ = ["CatalogueSource", "load_config", "parse_config", "validate"]

#: A catalogue, a function that returns one (called once per validation), or ``None`` (names
#: and frequency unchecked).
CatalogueSource = Catalogue | Callable[[], Catalogue] | None


def validate(raw: dict[str, Any], catalogue: CatalogueSource = None) -> Config:
    """``raw`` (the parsed YAML) as a :class:`Config`, checked against ``catalogue``.

    Raises pydantic's ``ValidationError`` (the loaders turn it into a :class:`ConfigError`).
    """
    if catalogue is not None and not isinstance(catalogue, Catalogue):
        catalogue = catalogue()
    return Config.model_validate(raw, context={CONTEXT_KEY: catalogue})


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


def load_config(path: str | Path, *, catalogue: CatalogueSource, **overrides: Any) -> Config:
    """Read, validate and resolve a config file.

    ``overrides`` replace top-level sections after loading (used by the CLI's path options);
    ``catalogue`` is what measure names and the frequency are checked against; it is required
    so that no caller skips those checks by accident (``None`` asks for the structure only).
    :func:`accuracy_checks.load_config` hands in the registry's catalogue. Raises
    :class:`ConfigError` with a message naming the file and key.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError(
            f"Config file {path} does not exist. Pass the path of your YAML config with "
            "--config (see docs/config.md)."
        ) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"Config file {path} cannot be read: {exc}.") from exc
    return parse_config(text, source=path, catalogue=catalogue, **overrides)


def parse_config(text: str, *, catalogue: CatalogueSource, source: Path | None = None,
                 **overrides: Any) -> Config:
    """Validate config text (YAML) against ``catalogue`` (see :func:`load_config`). Relative
    paths resolve against ``source``'s folder."""
    name = str(source) if source else "<config>"
    try:
        raw = yaml.load(text, Loader=_UniqueKeyLoader)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f" at line {mark.line + 1}, column {mark.column + 1}" if mark else ""
        problem = getattr(exc, "problem", None) or str(exc)
        raise ConfigError(f"Config file {name} is not valid YAML{where}: {problem}.") from None
    if raw is None:
        raise ConfigError(f"Config file {name} is empty; see docs/config.md.")
    if not isinstance(raw, dict):
        raise ConfigError(
            f"Config file {name} must be a mapping of keys (version, forecast, actuals, …); "
            f"it holds a {type(raw).__name__}."
        )
    raw.update(overrides)
    try:
        config = validate(raw, catalogue)
    except ValidationError as exc:
        raise ConfigError(_explain(exc, name)) from None
    checked = [(f"{key}.url", sql.url) for key, sql in config.sql_sources]
    checked += [(key, p.url) for key, p in config.url_places if isinstance(p, Url)]
    for key, url in checked:
        try:
            expand_env(url, key)
        except ConfigError as exc:
            raise ConfigError(f"Config file {name}: {exc}") from None
    base = source.resolve().parent if source else Path.cwd()
    config = _resolve_paths(config, base)
    config._source = source.resolve() if source else None
    config._text = text
    return config


def _file_url(url: str, res: Callable[[Path], Path]) -> str:
    """An SQLite or DuckDB URL with a relative database file made absolute (``res``); any
    other URL as it is."""
    for prefix in ("sqlite:///", "duckdb:///"):
        if url.startswith(prefix) and not url.startswith(prefix + "/"):
            rest, sep, query = url[len(prefix):].partition("?")
            if rest and rest != ":memory:" and not rest.startswith("${"):
                return prefix + str(res(Path(rest))) + sep + query
    return url


def _resolve_paths(config: Config, base: Path) -> Config:
    def res(p: Path) -> Path:
        p = p.expanduser()
        return p if p.is_absolute() else (base / p)

    def sql(s: SqlSource) -> SqlSource:
        return s.model_copy(update={"url": _file_url(s.url, res)})

    def place(p: Any) -> Any:
        if isinstance(p, SqlPlace):
            return p.model_copy(update={"sql": sql(p.sql)})
        return res(p) if isinstance(p, Path) else p

    def section(s: Any) -> Any:
        return s.model_copy(update={"path": place(s.path),
                                    "sql": sql(s.sql) if s.sql is not None else None})

    history = config.history
    history = [place(p) for p in history] if isinstance(history, list) else place(history)
    store = _file_url(config.store, res) if config.store else config.store
    return config.model_copy(
        update={
            "forecast": section(config.forecast),
            "actuals": section(config.actuals),
            "history": history,
            "archive": place(config.archive),
            "store": store,
            "segments": config.segments.model_copy(
                update={"mapping": place(config.segments.mapping)}
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
            hint = did_you_mean(str(loc[-1]), valid)
            allowed = f" Valid keys here: {', '.join(valid)}." if valid else ""
            lines.append(f"unknown key `{key}`{hint}.{allowed}")
        elif kind == "missing":
            lines.append(f"`{key}` is required but missing.")
        else:
            msg = err["msg"].removeprefix("Value error, ")
            value = err.get("input")
            if isinstance(value, str):
                value = mask_location(value)
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
        part in {"float", "tuple[float, float]", "bool", "list[str]", "list[Path]", "Path",
                 "SqlPlace", "SqlSource", "list"}
        or part.startswith(("function-", "tuple[", "list["))
    )


def _fields_at(loc: tuple[Any, ...]) -> list[str]:
    """The valid keys of the model found at ``loc`` (for "did you mean")."""
    tp: Any = Config
    for part in loc:
        if isinstance(part, int):  # an item of a list (``history[0]``)
            lists = [a for a in _members(tp) if typing.get_origin(a) is list]
            if not lists:
                return []
            tp = typing.get_args(lists[0])[0]
            continue
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


def _members(tp: Any) -> list[Any]:
    """The members of a union (``Annotated`` removed), or ``[tp]``."""
    while typing.get_origin(tp) is Annotated:
        tp = typing.get_args(tp)[0]
    if typing.get_origin(tp) in (typing.Union, types.UnionType):
        return [m for a in typing.get_args(tp) for m in _members(a)]
    return [tp]


def _unwrap(tp: Any) -> Any:
    origin = typing.get_origin(tp)
    if origin is Annotated:
        return _unwrap(typing.get_args(tp)[0])
    if origin in (typing.Union, types.UnionType):
        members = [_unwrap(a) for a in typing.get_args(tp) if a is not type(None)]
        if len(members) == 1:
            return members[0]
        # a path or a model (``history``, ``segments.mapping``): keys are the model's
        models = [m for m in members if isinstance(m, type) and issubclass(m, BaseModel)]
        return models[0] if len(models) == 1 else tp
    return tp
