"""One batch frame for a whole config: the frames the gate reads, stacked, each row tagged.

A GX suite validates one batch, while the gate reads several tables. :func:`stack_frames`
puts them in one frame with a column ``row_kind`` that says where each row comes from:

``forecast``   the cycle being checked (canonical forecast frame: keys, ``period``,
               ``issued``, ``forecast``, quantile columns ``q0.1`` …, ``segment``)
``actuals``    the actuals (keys, ``period``, ``actual``, ``segment``)
``earlier``    the earlier cycles' forecasts (from ``history`` and the archive; same columns as
               the forecast plus ``attempt`` and ``source``), which the accuracy checks join
               with the actuals exactly as the CLI does
``known``      the key columns of the segment mapping table (series expected without actuals)
``previous``   the previous cycle's forecast from the archive (for the series count), with
               its label in ``previous_label``
``notes``      results about the inputs themselves, as the engine's ``load_inputs`` gives them
               (``Inputs.notes``: an archived snapshot that is missing or unreadable, so its
               cycle was left out), one row each, the result's JSON
               (:meth:`~accuracy_checks.results.CheckResult.to_dict`) in the column ``note``;
               the adapter carries them into its result unchanged

Columns a part lacks are empty (NaN/NaT) in its rows. Every expectation of
:mod:`accuracy_checks.gx` reads only its rows; the built-in expectations of
:func:`~accuracy_checks.gx.suite_from_config` carry the row condition
``row_kind == "forecast"``.
"""

from __future__ import annotations

import json
import os
from collections.abc import Sequence
from pathlib import Path
from typing import Literal

import pandas as pd

from accuracy_checks.api import read_config
from accuracy_checks.config import Config
from accuracy_checks.engine import archived_cycles
from accuracy_checks.errors import InputError
from accuracy_checks.results import CheckResult
from accuracy_checks.sources.load import load_inputs

__all__ = ["NOTE", "ROW_KIND", "RowKind", "batch_from_config", "select_rows", "stack_frames"]

#: The column of a stacked batch that says which frame a row comes from.
ROW_KIND = "row_kind"
RowKind = Literal["forecast", "actuals", "earlier", "known", "previous", "notes"]
ROW_KINDS: tuple[str, ...] = ("forecast", "actuals", "earlier", "known", "previous", "notes")
#: The column of the ``notes`` rows: one result about the inputs, as JSON text.
NOTE = "note"


def stack_frames(*, forecast: pd.DataFrame | None = None, actuals: pd.DataFrame | None = None,
                 earlier: pd.DataFrame | None = None, known: pd.DataFrame | None = None,
                 previous: pd.DataFrame | None = None,
                 notes: Sequence[CheckResult] | None = None,
                 row_kind_column: str = ROW_KIND) -> pd.DataFrame:
    """Stack canonical frames into one batch frame with a ``row_kind`` column.

    Parts that are ``None`` are left out; empty parts add no rows. ``notes`` become one
    ``notes`` row each (their JSON in the column ``note``). The index is a fresh
    ``RangeIndex``.

    >>> f = pd.DataFrame({"k": ["a"], "forecast": [1.0]})
    >>> a = pd.DataFrame({"k": ["a", "b"], "actual": [2.0, 3.0]})
    >>> batch = stack_frames(forecast=f, actuals=a)
    >>> batch["row_kind"].tolist(), batch["actual"].tolist()[1:]
    (['forecast', 'actuals', 'actuals'], [2.0, 3.0])
    """
    parts = {"forecast": forecast, "actuals": actuals, "earlier": earlier,
             "known": known, "previous": previous,
             "notes": pd.DataFrame({NOTE: [json.dumps(r.to_dict()) for r in notes or ()]})}
    tagged = []
    for kind, frame in parts.items():
        if frame is None:
            continue
        if row_kind_column in frame.columns:
            raise InputError(
                f"The {kind} frame already has a column {row_kind_column!r}, which the stacked "
                "batch uses to tag rows; pass another name as row_kind_column.",
                column=row_kind_column,
            )
        if len(frame):
            tagged.append(frame.assign(**{row_kind_column: kind}))
    if not tagged:
        return pd.DataFrame({row_kind_column: pd.Series(dtype="str")})
    return pd.concat(tagged, ignore_index=True) if len(tagged) > 1 else tagged[0].reset_index(
        drop=True)


def select_rows(frame: pd.DataFrame, kind: str, *, row_kind_column: str = ROW_KIND,
                whole_if_untagged: bool) -> pd.DataFrame | None:
    """The rows of ``kind``. A frame without the ``row_kind`` column is taken whole when
    ``whole_if_untagged`` (a plain forecast frame), else gives ``None``.

    >>> f = stack_frames(forecast=pd.DataFrame({"x": [1]}), actuals=pd.DataFrame({"x": [2]}))
    >>> select_rows(f, "actuals", whole_if_untagged=False)["x"].tolist()
    [2]
    >>> select_rows(pd.DataFrame({"x": [1]}), "actuals", whole_if_untagged=False) is None
    True
    """
    if row_kind_column not in frame.columns:
        return frame if whole_if_untagged else None
    rows = frame.loc[frame[row_kind_column] == kind]
    return rows.drop(columns=[row_kind_column])


def batch_from_config(config: str | os.PathLike[str] | Config, *,
                      forecast_path: Path | None = None, actuals_path: Path | None = None,
                      row_kind_column: str = ROW_KIND) -> pd.DataFrame:
    """The batch that :func:`~accuracy_checks.gx.suite_from_config`'s suite validates.

    Reads every input the way ``accuracy-checks run`` does (no writes, no snapshot) and
    stacks the current forecast, the actuals, the earlier cycles, the mapping's key columns
    (``known``), the previous archived cycle (``previous``, with its ``attempt``) and the
    results about the inputs (``notes``: the ``archive.snapshot`` warnings).
    """
    cfg = read_config(config)
    inputs = load_inputs(cfg, forecast_path=forecast_path, actuals_path=actuals_path,
                         archive=archived_cycles(cfg))
    keys = list(cfg.forecast.keys)
    known = None
    if inputs.mapping is not None:
        columns = [k for k in keys if k in inputs.mapping.columns]
        known = inputs.mapping.loc[:, columns].drop_duplicates() if columns else None
    previous = inputs.previous
    if previous is not None and inputs.previous_label is not None:
        previous = previous.assign(previous_label=inputs.previous_label)
    return stack_frames(forecast=inputs.forecast, actuals=inputs.actuals, earlier=inputs.earlier,
                        known=known, previous=previous, notes=inputs.notes,
                        row_kind_column=row_kind_column)
