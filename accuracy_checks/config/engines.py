"""The ``engine`` key: which engine runs the checks, and the dask engine's cluster.

Declarations only (no dask import): ``engine: pandas`` (the default), ``engine: dask``, or
``engine: {name: dask, scheduler, workers, memory_limit}`` (docs/engines.md).
"""

from __future__ import annotations

import re
from typing import Annotated, Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

__all__ = ["Engine"]

#: ``memory_limit`` of a dask worker: a size (``4GB``, ``512 MiB``, ``2e9``) or ``auto``
_MEMORY = re.compile(r"^\s*(auto|\d+(\.\d+)?(e\d+)?\s*([kmgt]i?b|b)?)\s*$", re.IGNORECASE)


class Engine(BaseModel):
    """Which engine runs the checks (docs/engines.md): ``pandas`` (one process, the default) or
    ``dask`` (the series split into shards checked on a Dask cluster's workers, the same
    results). ``scheduler``: the address of a running cluster's scheduler
    (``tcp://host:8786``); without it a local cluster of ``workers`` worker processes, each
    limited to ``memory_limit``, starts and stops with the run."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    name: Literal["pandas", "dask"] = "pandas"
    scheduler: str | None = None
    workers: Annotated[int, Field(ge=1, le=256)] | None = None
    memory_limit: str | None = None

    @field_validator("memory_limit")
    @classmethod
    def _memory(cls, value: str | None) -> str | None:
        if value is not None and not _MEMORY.match(value):
            raise ValueError(
                f"{value!r} is not a size: give bytes with a unit "
                "(\"4GB\", \"512MiB\") or \"auto\""
            )
        return value

    @model_validator(mode="after")
    def _dask_only(self) -> Engine:
        given = [k for k in ("scheduler", "workers", "memory_limit") if getattr(self, k)]
        if self.name == "pandas" and given:
            raise ValueError(
                f"engine.{given[0]} applies to the dask engine only; write `name: dask` or "
                f"drop `{given[0]}`"
            )
        if self.scheduler and (self.workers or self.memory_limit):
            extra = "workers" if self.workers else "memory_limit"
            raise ValueError(
                f"engine.{extra} sizes the local cluster the run starts; with "
                "engine.scheduler the run uses that cluster's own workers: drop one of them"
            )
        return self
