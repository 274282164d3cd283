"""Reading: the configured files → the canonical frames of :mod:`.frames`.

The modules, in the order the data flows through them:

- :mod:`.files`: finding the data files (a file, or the CSV/Parquet files of a folder), header
  checks, the raw CSV and Parquet reads;
- :mod:`.columns`: :class:`~.columns.Column` and the converters of keys, segments, numbers and
  dates (the reading rules: identifiers are text, one date format per column);
- :mod:`.readers`: :func:`read_forecast` and :func:`read_actuals`;
- :mod:`.segments`: :func:`read_mapping`, segment labels, the ``segment`` column of each frame;
- :mod:`.prereads`: Parquet pre-reads (cycle starts, the periods and series of the actuals);
- :mod:`.codes`: integer row codes of key columns (the one place for them);
- :mod:`.memory`: frames given in memory (pandas DataFrames, pyarrow Tables) in place of a
  configured input, through the same converters;
- :mod:`.load`: :func:`load_inputs`, every input of one run → :class:`Inputs`.

Every problem a user can fix raises :class:`~accuracy_checks.errors.InputError` naming the
file, the column and the first offending rows (docs/inputs.md lists them). The readers are
exported here and load on first use, so importing :mod:`.frames` stays free of pandas.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from accuracy_checks.sources.load import Inputs, load_inputs
    from accuracy_checks.sources.readers import read_actuals, read_forecast
    from accuracy_checks.sources.segments import read_mapping

__all__ = ["Inputs", "load_inputs", "read_actuals", "read_forecast", "read_mapping"]

_LAZY = {"Inputs": "load", "load_inputs": "load", "read_actuals": "readers",
         "read_forecast": "readers", "read_mapping": "segments"}


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        import importlib

        return getattr(importlib.import_module(f"{__name__}.{_LAZY[name]}"), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
