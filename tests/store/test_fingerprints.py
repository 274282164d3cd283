"""Input fingerprints, the hashing of them in the background, and the snapshot staged beside
the checks: same digests, nothing left behind by a failed run."""

from __future__ import annotations

import hashlib
import threading
from collections.abc import Callable
from pathlib import Path

import pytest

import accuracy_checks.engine as engine_module
from accuracy_checks import load_config
from accuracy_checks.engine import run_checks
from accuracy_checks.store import open_store
from accuracy_checks.store.fingerprints import (
    FileHashes,
    file_fingerprint,
    input_fingerprints,
    local_input_files,
)
from tests.support.project import Project

# FIPS 180-2, appendix B.1: SHA-256("abc")
ABC_SHA256 = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"


def _threads() -> set[str]:
    return {t.name for t in threading.enumerate() if t.name.startswith("accuracy-checks-")}


def test_file_fingerprint_is_the_files_sha256(tmp_path: Path) -> None:
    small = tmp_path / "abc.txt"
    small.write_bytes(b"abc")
    assert file_fingerprint(small) == {"path": str(small), "sha256": ABC_SHA256, "bytes": 3}
    # more than one read chunk (1 MiB) and a ragged end: hashlib's one-shot digest of the bytes
    data = bytes(range(256)) * (3 * 4096) + b"tail!!!"
    big = tmp_path / "big.bin"
    big.write_bytes(data)
    assert file_fingerprint(big)["sha256"] == hashlib.sha256(data).hexdigest()
    assert file_fingerprint(big)["bytes"] == len(data)


def test_folder_fingerprint_hashes_names_and_digests_in_name_order(tmp_path: Path) -> None:
    folder = tmp_path / "lake"
    (folder / "week=2").mkdir(parents=True)
    (folder / "week=1").mkdir()
    (folder / "week=2" / "part.parquet").write_bytes(b"abc")
    (folder / "week=1" / "part.parquet").write_bytes(b"")
    empty = hashlib.sha256(b"").hexdigest()
    expected = hashlib.sha256(f"week=1/part.parquet\0{empty}\nweek=2/part.parquet\0{ABC_SHA256}\n"
                              .encode()).hexdigest()
    assert file_fingerprint(folder) == {"path": str(folder), "sha256": expected, "bytes": 3}
    assert file_fingerprint(tmp_path / "missing.csv")["sha256"] is None


def test_background_hashes_equal_the_ones_taken_at_record_time(
        make_project: Callable[..., Project]) -> None:
    project = make_project()
    config = load_config(project.config)
    files = local_input_files(config)
    assert {p.name for p in files} == {"forecast.csv", "actuals.csv", "earlier.csv",
                                       "products.csv"}
    info = {"forecast": {"rows": 7}, "actuals": {"rows": 9}}
    with FileHashes(files) as hashes:
        ahead = input_fingerprints(config, info, hashes=hashes)
    assert ahead == input_fingerprints(config, info)
    assert ahead["forecast"]["rows"] == 7
    assert ahead["forecast"]["sha256"] == hashlib.sha256(
        (project.data / "forecast.csv").read_bytes()).hexdigest()
    assert _threads() == set()


def test_stopped_hashing_leaves_the_rest_to_record_time(
        make_project: Callable[..., Project]) -> None:
    project = make_project()
    config = load_config(project.config)
    hashes = FileHashes(local_input_files(config))
    hashes.close()  # told to stop at once: whatever it did not finish is hashed on the spot
    assert _threads() == set()
    assert input_fingerprints(config, {}, hashes=hashes) == input_fingerprints(config, {})


def test_frames_and_non_local_places_are_not_hashed(make_project: Callable[..., Project]) -> None:
    import pandas as pd

    from accuracy_checks.engine import given_frames

    config = load_config(make_project().config)
    frames = given_frames(forecast=pd.DataFrame({"x": [1]}), history=pd.DataFrame({"x": [1]}))
    names = [p.name for p in local_input_files(config, frames=frames)]
    assert names == ["actuals.csv", "products.csv"]


def test_run_records_the_inputs_sha256(make_project: Callable[..., Project]) -> None:
    project = make_project()
    config = load_config(project.config)
    report = run_checks(config)
    with open_store(config) as store:
        inputs = store.history()[0]["inputs"]
    for role, name in (("forecast", "forecast.csv"), ("actuals", "actuals.csv"),
                       ("mapping", "products.csv")):
        data = (project.data / name).read_bytes()
        assert inputs[role]["sha256"] == hashlib.sha256(data).hexdigest(), role
        assert inputs[role]["bytes"] == len(data)
    assert inputs["history"][0]["sha256"] == hashlib.sha256(
        (project.data / "earlier.csv").read_bytes()).hexdigest()
    assert report.snapshot is not None and Path(report.snapshot).is_file()
    assert _threads() == set()


def test_a_run_failing_after_its_inputs_are_read_leaves_nothing_staged(
        make_project: Callable[..., Project], monkeypatch: pytest.MonkeyPatch) -> None:
    """The snapshot is written beside the checks: when they fail, the staged file is removed
    (after its thread is done) and the hashing stops; nothing is recorded."""
    project = make_project()
    config = load_config(project.config)

    def broken(*_: object, **__: object) -> list[object]:
        raise RuntimeError("a check broke")

    monkeypatch.setattr(engine_module, "evaluate", broken)
    with pytest.raises(RuntimeError, match="a check broke"):
        run_checks(config)
    assert _threads() == set()
    assert list((config.archive / ".incoming").iterdir()) == []
    assert not list(config.archive.glob("cycle=*/attempt-*.parquet"))
