"""Frames for other tools: the data the gate checks, as plain pandas frames.

:func:`evaluation_frame` gives the joined frame the accuracy checks run on, so that any tool
(Great Expectations, pandera, a notebook) can validate or explore exactly what the gate
measured. It reads the inputs the way ``accuracy-checks run`` does (same sources, segments,
history and archive, same lags and window) and writes nothing.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import TYPE_CHECKING

import pandas as pd

from accuracy_checks.config import Config
from accuracy_checks.config.places import Url
from accuracy_checks.measures.catalogue import load_config
from accuracy_checks.sources import frames as F

if TYPE_CHECKING:
    from accuracy_checks.sources.load import Inputs
    from accuracy_checks.sources.memory import GivenFrames

__all__ = ["evaluation_frame", "read_config"]


def read_config(config: str | os.PathLike[str] | Config) -> Config:
    """``config`` itself if it is a :class:`~accuracy_checks.config.Config`, else the
    validated config read from that path (raises :class:`~accuracy_checks.errors.ConfigError`).
    """
    return config if isinstance(config, Config) else load_config(Path(config))


def evaluation_frame(config: str | os.PathLike[str] | Config, *,
                     forecast_path: Path | Url | None = None,
                     actuals_path: Path | Url | None = None, forecast: object = None,
                     actuals: object = None, history: object = None,
                     mapping: object = None) -> pd.DataFrame:
    """The frame the accuracy checks of ``config`` run on: earlier cycles' forecasts joined
    with the actuals that have arrived since.

    One row per earlier forecast of a configured lag (``evaluation.lags``) whose target period
    lies in the window (the ``evaluation.window`` most recent periods that have an actual).
    Columns, in this order:

    - the key columns (``forecast.keys``), ``period`` (target period), ``issued`` (the issue
      date of the cycle that made the forecast), ``lag`` (int; 1 = the first period that
      cycle forecasts), ``segment``, ``forecast`` (units; NaN when the earlier forecast was
      missing or not finite), ``actual`` (units; NaN when it has not arrived);
    - then the quantile columns (``q0.1`` …), ``attempt`` (archive attempt, <NA> for
      history) and ``source`` (``"history"`` or ``"archive"``).

    The error is ``e = actual − forecast`` (positive = under-forecast). Rows with a NaN
    forecast or actual are kept; the measures count them as dropped (``n_dropped``). The
    tracking signals look further back (``evaluation.tracking_window`` periods); their extra
    rows are not in this frame.
    ``forecast_path``/``actuals_path`` override the config's paths, as on the command line;
    ``forecast``, ``actuals``, ``history`` and ``mapping`` take frames (pandas DataFrames or
    pyarrow Tables) in place of the config's places, as
    :func:`~accuracy_checks.engine.run_checks` does.

    Raises :class:`~accuracy_checks.errors.ConfigError` or
    :class:`~accuracy_checks.errors.InputError` on an unusable config or input.
    """
    from accuracy_checks.engine import given_frames

    cfg = read_config(config)
    frames = given_frames(forecast=forecast, actuals=actuals, history=history,
                          mapping=mapping, forecast_path=forecast_path,
                          actuals_path=actuals_path)
    frame, _ = _evaluation(cfg, forecast_path=forecast_path, actuals_path=actuals_path,
                           frames=frames)
    return frame


def _evaluation(config: Config, *, forecast_path: Path | Url | None = None,
                actuals_path: Path | Url | None = None,
                frames: GivenFrames | None = None) -> tuple[pd.DataFrame, Inputs]:
    """The evaluation frame (columns ordered) and the loaded inputs."""
    from accuracy_checks.engine import archived_cycles
    from accuracy_checks.evaluation.join import evaluation_frame as join
    from accuracy_checks.sources.load import load_inputs

    inputs = load_inputs(config, forecast_path=forecast_path, actuals_path=actuals_path,
                         archive=archived_cycles(config), frames=frames)
    keys = list(config.forecast.keys)
    ev = join(inputs.earlier, inputs.actuals, keys=keys, frequency=config.frequency,
              lags=config.evaluation.lags, window=config.evaluation.window)
    internal = [c for c in ev.frame.columns if str(c).startswith("__")]
    return order_columns(ev.frame.drop(columns=internal), keys), inputs


def order_columns(frame: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
    """``frame`` with the documented columns first (keys, period, issued, lag, segment,
    forecast, actual), then the others in their order; ``lag`` as int64 when complete.

    >>> f = pd.DataFrame({"actual": [1.0], "lag": [1], "k": ["a"], "forecast": [2.0],
    ...                   "period": [pd.Timestamp("2026-01-05")], "issued": [pd.NaT],
    ...                   "segment": ["*"], "source": ["history"]})
    >>> list(order_columns(f, ["k"]).columns)
    ['k', 'period', 'issued', 'lag', 'segment', 'forecast', 'actual', 'source']
    """
    first = [*keys, F.PERIOD, F.ISSUED, F.LAG, F.SEGMENT, F.FORECAST, F.ACTUAL]
    ordered = [c for c in first if c in frame.columns]
    ordered += [c for c in frame.columns if c not in ordered]
    out = frame.loc[:, ordered]
    if F.LAG in out.columns and len(out) and out[F.LAG].notna().all():
        out = out.assign(**{F.LAG: out[F.LAG].astype("int64")})
    return out.reset_index(drop=True)
