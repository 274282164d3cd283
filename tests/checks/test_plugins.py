"""Checks added by other packages through the ``accuracy_checks.checks`` entry points.

``importlib.metadata.entry_points`` is replaced by a fake that lists the plugins below, as an
installed package would.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from typing import Any

import pytest

from accuracy_checks import load_config, run_checks
from accuracy_checks.checks.plugins import GROUP, reset_check_plugins
from accuracy_checks.results import CheckResult
from tests.support.project import FakeDist, FakeEntryPoint, Project


def promo_calendar(inputs: Any, config: Any, book: Any) -> list[CheckResult]:
    """Fails when the forecast holds more rows than 10 per series (a made-up rule)."""
    rows = len(inputs.forecast)
    status = book.judge("unexpected_series", "*", float(rows > 100)).status
    return [CheckResult("promo_calendar.rows", status, segment="*", value=float(rows),
                        unit="count", message=f"{rows} forecast rows")]


def raises(inputs: Any, config: Any, book: Any) -> list[CheckResult]:
    raise RuntimeError("calendar service down")


def impostor(inputs: Any, config: Any, book: Any) -> list[CheckResult]:
    return [CheckResult("accuracy", "pass", message="I am a built-in, honest")]


def not_a_list(inputs: Any, config: Any, book: Any) -> dict[str, int]:
    return {"rows": 1}


def one_arg(inputs: Any) -> list[CheckResult]:
    return []


PLUGINS = [
    FakeEntryPoint("promo_calendar", "shop:promo_calendar", promo_calendar, FakeDist("shop")),
    FakeEntryPoint("flaky", "shop:raises", raises, FakeDist("shop")),
    FakeEntryPoint("impostor", "odd:impostor", impostor),
    FakeEntryPoint("listless", "odd:not_a_list", not_a_list),
    FakeEntryPoint("one_arg", "odd:one_arg", one_arg, FakeDist("odd")),
    FakeEntryPoint("coverage", "odd:promo", promo_calendar),
    FakeEntryPoint("constant", "odd:X", 42),
    FakeEntryPoint("broken", "gone:X", ImportError("No module named 'gone'")),
]


@pytest.fixture
def plugins(monkeypatch: pytest.MonkeyPatch) -> Iterator[None]:
    import importlib.metadata

    real = importlib.metadata.entry_points

    def entry_points(*, group: str) -> Any:
        return list(PLUGINS) if group == GROUP else real(group=group)

    monkeypatch.setattr(importlib.metadata, "entry_points", entry_points)
    reset_check_plugins()
    try:
        yield
    finally:
        reset_check_plugins()


def test_check_plugins_run_and_bad_ones_are_named(
        plugins: None, make_project: Callable[..., Project]) -> None:
    project = make_project()
    report = run_checks(load_config(project.config), snapshot=False)
    by_check = {r.check: r for r in report.results}
    # a good plugin's result joins the run, judged by the config's book
    assert by_check["promo_calendar.rows"].value == 24.0  # 6 series × horizon 4
    assert by_check["promo_calendar.rows"].status == "pass"
    # a raising plugin is an error naming it; the other checks still ran
    assert by_check["flaky"].status == "error"
    assert "'flaky'" in by_check["flaky"].message and "calendar service down" in (
        by_check["flaky"].message)
    assert by_check["impostor"].status == "error" and "does not own" in (
        by_check["impostor"].message)
    assert by_check["listless"].status == "error" and "not a list" in (
        by_check["listless"].message)
    # rejected at load: a warning each, naming the entry point and why
    rejected = [r for r in report.results if r.check == "checks.plugins"]
    why = {r.details["entry_point"]: r.message for r in rejected}
    assert set(why) == {"one_arg", "coverage", "constant", "broken"}
    assert "cannot be called as check(inputs, config, book)" in why["one_arg"]
    assert "package 'odd'" in why["one_arg"]
    assert "built-in check family" in why["coverage"]
    assert "not a function" in why["constant"]
    assert "could not be imported" in why["broken"]
    assert any(r.check == "accuracy" and r.status == "pass" for r in report.results)
    assert report.status == "fail"  # an error result fails the gate
