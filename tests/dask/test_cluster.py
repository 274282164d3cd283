"""The dask engine on a cluster started separately (``dask scheduler`` + ``dask worker`` on
loopback), an unreachable scheduler, the command line's options, check plugins refused."""

from __future__ import annotations

import socket
import subprocess
import sys
import time
from collections.abc import Callable, Iterator
from pathlib import Path

import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.checks import plugins as check_plugins
from accuracy_checks.errors import ConfigError, UsageError
from tests.dask.support import both, compare
from tests.support.cli import run
from tests.support.project import FakeDist, FakeEntryPoint, Project


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@pytest.fixture(scope="module")
def separate(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """``dask scheduler`` and two ``dask worker`` processes on loopback; yields the address."""
    import distributed

    port = _free_port()
    address = f"tcp://127.0.0.1:{port}"
    logs = tmp_path_factory.mktemp("cluster")
    exe = Path(sys.executable).parent / "dask"
    log = (logs / "cluster.log").open("w")
    procs = [subprocess.Popen([str(exe), "scheduler", "--host", "127.0.0.1", "--port",
                               str(port), "--dashboard-address", ":0", "--no-show"],
                              stdout=subprocess.DEVNULL, stderr=log)]
    procs.append(subprocess.Popen(
        [str(exe), "worker", address, "--nworkers", "2", "--nthreads", "1",
         "--memory-limit", "1GB", "--no-dashboard"],
        stdout=subprocess.DEVNULL, stderr=log))
    try:
        deadline = time.monotonic() + 60
        while True:
            try:
                with distributed.Client(address, timeout=5) as client:
                    client.wait_for_workers(2, timeout=30)
                break
            except (OSError, TimeoutError):
                if time.monotonic() > deadline:
                    raise
                time.sleep(1)
        yield address
    finally:
        for p in reversed(procs):
            p.terminate()
        for p in procs:
            try:
                p.wait(timeout=20)
            except subprocess.TimeoutExpired:
                p.kill()
                p.wait()
        log.close()


def test_a_separately_started_cluster_gives_the_same_results(
        make_project: Callable[..., Project], separate: str) -> None:
    compare(*both(make_project().config, separate))


def test_the_command_line_takes_the_scheduler(make_project: Callable[..., Project],
                                              separate: str, tmp_path: Path) -> None:
    project = make_project()
    assert run(project, "--scheduler", separate, "--no-snapshot", "--json",
               str(tmp_path / "d.json")) == 0
    assert run(project, "--engine", "pandas", "--no-snapshot", "--json",
               str(tmp_path / "p.json")) == 0
    import json

    from tests.dask.support import same

    d, p = (json.loads((tmp_path / f"{x}.json").read_text())["results"] for x in "dp")
    assert not same([r for r in d if not r["check"].startswith("drift")],
                    [r for r in p if not r["check"].startswith("drift")])


def test_an_unreachable_scheduler_is_exit_2_naming_it(make_project: Callable[..., Project],
                                                      capsys: pytest.CaptureFixture[str]
                                                      ) -> None:
    project = make_project()
    address = f"tcp://127.0.0.1:{_free_port()}"
    t0 = time.monotonic()
    assert run(project, "--scheduler", address, "--no-snapshot") == 2
    assert time.monotonic() - t0 < 60
    err = capsys.readouterr().err
    assert address in err and "did not answer" in err


def test_scheduler_with_the_pandas_engine_is_a_usage_error(
        make_project: Callable[..., Project]) -> None:
    config = load_config(make_project().config)
    with pytest.raises(UsageError, match="--scheduler applies to the dask engine"):
        run_checks(config, engine="pandas", scheduler="tcp://127.0.0.1:1", snapshot=False)


def test_check_plugins_are_refused_on_the_dask_engine(make_project: Callable[..., Project],
                                                      monkeypatch: pytest.MonkeyPatch) -> None:
    """A check plugin takes whole frames: exit 2 before any cluster is asked."""
    import importlib.metadata

    from accuracy_checks.results import CheckResult

    def check(inputs: object, config: object, book: object) -> list[CheckResult]:
        return []

    real = importlib.metadata.entry_points

    def entry_points(*, group: str) -> object:
        return ([FakeEntryPoint("shop_rule", "shop:check", check, FakeDist("shop"))]
                if group == check_plugins.GROUP else real(group=group))

    monkeypatch.setattr(importlib.metadata, "entry_points", entry_points)
    check_plugins.reset_check_plugins()
    try:
        config = load_config(make_project().config)
        with pytest.raises(ConfigError, match="Check plugins are installed \\(shop_rule\\)"):
            run_checks(config, engine="dask", scheduler="tcp://127.0.0.1:1", snapshot=False)
    finally:
        check_plugins.reset_check_plugins()


def test_a_local_cluster_starts_and_stops_with_the_run(make_project: Callable[..., Project],
                                                       tmp_path: Path) -> None:
    """No scheduler: the run starts its own cluster of worker processes (the config's
    ``workers`` and ``memory_limit``) and closes it: no worker process outlives the run."""
    import psutil

    project = make_project(extra="engine: {name: dask, workers: 1, memory_limit: 1GB}\n")
    before = {p.pid for p in psutil.Process().children(recursive=True)}
    assert run(project, "--no-snapshot", "--json", str(tmp_path / "r.json")) == 0
    time.sleep(1)
    # (multiprocessing's resource tracker lives as long as this process: not a worker)
    left = [p for p in psutil.Process().children(recursive=True) if p.pid not in before
            and p.is_running() and p.status() != psutil.STATUS_ZOMBIE
            and "resource_tracker" not in " ".join(p.cmdline())]
    assert not left, [p.cmdline() for p in left]
