"""The ``--json`` document: :meth:`RunReport.to_dict` written atomically.

Contract (docs/results.md): ``{"status", "run_id", "cycle", "results": [{"check", "segment", "lag",
"measure", "value", "warn", "fail", "status", "n_series", "n_obs", "message", "examples"}, …]}``
plus the run metadata keys and the result extras ``reason``, ``unit``, ``details``.

The file is strict JSON (``allow_nan=False``): NaN and ±inf anywhere (values, examples,
details) become ``null``; numpy scalars and arrays become plain numbers, booleans and lists;
timestamps, dates and periods become ISO strings. The write is atomic: a temporary file in the
target folder, fsynced, then ``os.replace`` — a reader never sees a half-written file.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import json
import math
import os
import tempfile
from decimal import Decimal
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from accuracy_checks.results import RunReport, json_value

__all__ = ["dumps_report", "to_jsonable", "write_json", "write_text_atomic"]

_NEW_FILE_MODE = 0o644


def _default(obj: Any) -> Any:
    """``json`` ``default=`` hook: numpy, pandas and datetime values as plain JSON values."""
    if obj is None or obj is pd.NaT or obj is pd.NA:
        return None
    if isinstance(obj, np.bool_ | np.integer | np.floating):
        return json_value(obj)  # non-finite → None
    if isinstance(obj, np.datetime64):
        return None if np.isnat(obj) else pd.Timestamp(obj).isoformat()
    if isinstance(obj, np.timedelta64):
        return None if np.isnat(obj) else pd.Timedelta(obj).isoformat()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, pd.Timestamp | _dt.datetime | _dt.date | _dt.time):
        return obj.isoformat()
    if isinstance(obj, pd.Timedelta):
        return obj.isoformat()
    if isinstance(obj, _dt.timedelta):
        return pd.Timedelta(obj).isoformat()
    if isinstance(obj, pd.Period | pd.Interval | Path):
        return str(obj)
    if isinstance(obj, Decimal):
        return float(obj) if obj.is_finite() else None
    if isinstance(obj, set | frozenset):
        return sorted(obj, key=repr)
    if isinstance(obj, bytes):
        return obj.decode("utf-8", errors="replace")
    # Anything else is shown as text rather than crashing the gate's output.
    return str(obj)


def to_jsonable(obj: Any) -> Any:
    """A deep copy of ``obj`` made of JSON values only (str, int, float, bool, None, list, dict).

    Non-finite floats become ``None``; dict keys become strings.

    >>> import numpy as np, pandas as pd
    >>> to_jsonable({"v": np.float64("nan"), "n": np.int64(3), np.int64(1): pd.Timestamp(0)})
    {'v': None, 'n': 3, '1': '1970-01-01T00:00:00'}
    """
    if obj is None or isinstance(obj, str | bool | int):
        return obj if not isinstance(obj, np.generic) else _default(obj)
    if isinstance(obj, float):
        value = float(obj)
        return value if math.isfinite(value) else None
    if isinstance(obj, dict):
        return {_key(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [to_jsonable(v) for v in obj]
    converted = _default(obj)
    if converted is obj or isinstance(converted, str):
        return converted
    return to_jsonable(converted)


def _key(key: Any) -> str:
    if isinstance(key, str):
        return key
    value = to_jsonable(key)
    if isinstance(value, str):
        return value
    return json.dumps(value, allow_nan=False)


def dumps_report(report: RunReport) -> str:
    """The JSON text of ``report`` (UTF-8 ready, indent 2, strict: no NaN), ending in a newline."""
    document = to_jsonable(report.to_dict())
    return (
        json.dumps(document, indent=2, ensure_ascii=False, allow_nan=False, default=_default) + "\n"
    )


def write_text_atomic(path: str | os.PathLike[str], text: str) -> None:
    """Write ``text`` as UTF-8 to ``path`` atomically (temp file in the same folder + replace).

    The folder is created when missing. An existing file keeps its permission bits; a new one
    gets ``0o644``. On any error the temporary file is removed and the target is untouched.
    """
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    try:
        mode = target.stat().st_mode & 0o777
    except FileNotFoundError:
        mode = _NEW_FILE_MODE
    fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    try:
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as handle:
            handle.write(text)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(tmp_name, mode)
        os.replace(tmp_name, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp_name)
        raise


def write_json(report: RunReport, path: str | os.PathLike[str]) -> None:
    """Write the ``--json`` document of ``report`` to ``path`` atomically (see module doc)."""
    write_text_atomic(path, dumps_report(report))
