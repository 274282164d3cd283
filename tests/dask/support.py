"""Running both engines on the same project and comparing every result (tests/dask/)."""

from __future__ import annotations

import math
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.errors import InputError
from accuracy_checks.results import RunReport

#: the numbers of the two engines agree to this relative tolerance
REL = 1e-9


def same(a: Any, b: Any, where: str = "") -> list[str]:
    """Where ``a`` and ``b`` (JSON-ready values) differ: floats to :data:`REL` relative,
    everything else exactly."""
    if isinstance(a, float) or isinstance(b, float):
        if a is None or b is None or isinstance(a, str) or isinstance(b, str):
            return [] if a == b else [f"{where}: {a!r} != {b!r}"]
        ok = math.isclose(a, b, rel_tol=REL, abs_tol=1e-12) or (math.isnan(a) and math.isnan(b))
        return [] if ok else [f"{where}: {a!r} != {b!r}"]
    if isinstance(a, dict) and isinstance(b, dict):
        out = []
        for k in dict.fromkeys([*a, *b]):
            out += same(a.get(k, "<absent>"), b.get(k, "<absent>"), f"{where}.{k}")
        return out
    if isinstance(a, list) and isinstance(b, list):
        if len(a) != len(b):
            return [f"{where}: {len(a)} items != {len(b)} items: {a!r:.300} / {b!r:.300}"]
        return [d for i, (x, y) in enumerate(zip(a, b, strict=True))
                for d in same(x, y, f"{where}[{i}]")]
    return [] if a == b else [f"{where}: {a!r:.300} != {b!r:.300}"]


def compare(pandas_report: RunReport, dask_report: RunReport) -> None:
    """Every result (check, segment, status, counts, examples, message, value …) and the
    inputs' info of the two runs are the same."""
    a, b = pandas_report.to_dict(), dask_report.to_dict()
    names_a = [(r["check"], r["segment"], r.get("measure"), r.get("lag")) for r in a["results"]]
    names_b = [(r["check"], r["segment"], r.get("measure"), r.get("lag")) for r in b["results"]]
    assert names_a == names_b
    diffs = same(a["results"], b["results"], "results")
    diffs += same(a["inputs"], b["inputs"], "inputs")
    diffs += same(a.get("evaluated_cycles"), b.get("evaluated_cycles"), "evaluated_cycles")
    assert a["status"] == b["status"]
    assert not diffs, "\n".join(diffs[:20])


def both(config: Path, scheduler: str, **kwargs: Any) -> tuple[RunReport, RunReport]:
    """The pandas engine's report, then the dask engine's (on ``scheduler``), of ``config``
    (dry runs unless ``snapshot`` is given: the store sees the same history for both)."""
    kwargs.setdefault("snapshot", False)
    cfg = load_config(config)
    return (run_checks(cfg, engine="pandas", **kwargs),
            run_checks(cfg, engine="dask", scheduler=scheduler, **kwargs))


def refusals(config: Path, scheduler: str) -> list[str]:
    """The InputError message of each engine (pandas, then dask on ``scheduler``) on
    ``config`` (dry runs)."""
    cfg = load_config(config)
    out = []
    for engine in ("pandas", "dask"):
        with pytest.raises(InputError) as err:
            run_checks(cfg, engine=engine, scheduler=scheduler if engine == "dask" else None,
                       snapshot=False)
        out.append(str(err.value))
    return out


@contextmanager
def local_cluster() -> Iterator[str]:
    """A real local cluster of 2 worker processes (~2 s to start); yields its scheduler's
    address. The workers inherit the environment as it is when it starts."""
    import distributed

    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  dashboard_address=":0", silence_logs=40) as local:
        yield local.scheduler_address
