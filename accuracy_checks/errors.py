"""Exceptions of accuracy-checks.

Every exception is light and picklable: it carries a message and a small summary, never a
frame, so it crosses process boundaries (Prefect, Dask) intact. The CLI maps
:class:`UsageError` (bad config or input) to exit code 2 and :class:`GateFailed` to exit 1.
"""

from __future__ import annotations

from typing import Any


class AccuracyChecksError(Exception):
    """Base class of every error this package raises on purpose."""

    def __init__(self, message: str, **summary: Any) -> None:
        super().__init__(message)
        self.message = message
        self.summary: dict[str, Any] = summary

    def __reduce__(self) -> tuple[Any, ...]:
        return (_rebuild, (type(self), self.message, self.summary))

    def __str__(self) -> str:
        return self.message


def _rebuild(cls: type[AccuracyChecksError], message: str, summary: dict[str, Any]) -> Any:
    return cls(message, **summary)


class UsageError(AccuracyChecksError):
    """The config or an input cannot be used (exit code 2)."""


class ConfigError(UsageError):
    """The config file is missing, unreadable or invalid."""


class InputError(UsageError):
    """An input file is missing, unreadable, empty or lacks a configured column."""


class GateFailed(AccuracyChecksError):
    """Raised by integrations (not by the core) when the verdict is ``fail``."""
