"""The HTML report: one self-contained file with charts, read from the audit store.

``accuracy-checks report --config FILE --out report.html [--since DATE]`` (or ``run …
--report PATH``) writes it. From Python::

    from accuracy_checks.report import write_report

    rendered = write_report(config, "report.html")      # or a store URL instead of a config
    print(rendered.charts, rendered.bytes)

Modules, in the order the data flows: :mod:`.data` (the queries), :mod:`.page` (the page:
head, header, stylesheet and its CSP), its sections :mod:`.sections` (the latest run),
:mod:`.trends` (over cycles) and :mod:`.timeline` (the breaches), their building blocks
:mod:`.blocks` (tables, figures, words), :mod:`.charts` (the inline SVG charts) and
:mod:`.svg` (palette, markers, hatch patterns, escaping). No extra dependency: the charts
are SVG written by this package.
"""

from __future__ import annotations

from datetime import date, datetime
from pathlib import Path
from typing import TYPE_CHECKING

from accuracy_checks.report.data import ReportData, load_report_data
from accuracy_checks.report.page import RenderedReport, render_report

if TYPE_CHECKING:
    from accuracy_checks.config import Config
    from accuracy_checks.store import Store

__all__ = ["RenderedReport", "ReportData", "build_report", "load_report_data", "render_report",
           "write_report"]


def build_report(store: Store, *, since: date | None = None,
                 now: datetime | None = None) -> RenderedReport:
    """The report of ``store`` (cycles issued on or after ``since``), as a string."""
    return render_report(load_report_data(store, since=since, now=now))


def write_report(target: Config | str, out: str | Path, *, since: date | None = None,
                 now: datetime | None = None) -> RenderedReport:
    """Write the report of a config's audit store (or of a store URL) to ``out``, atomically.

    Raises :class:`~accuracy_checks.store.StoreError` (exit 2) when the store cannot be read;
    an SQLite store that does not exist yet is an error too (nothing has been recorded).
    """
    from accuracy_checks.outputs.jsonfile import write_text_atomic
    from accuracy_checks.store import StoreError, default_store_url, open_store
    from accuracy_checks.store.urls import mask_url, sqlite_file

    url = target if isinstance(target, str) else default_store_url(target)
    path = sqlite_file(url)
    if path is not None and not path.exists():
        raise StoreError(f"No run recorded yet: the audit store {mask_url(url)} does not "
                         "exist (the first `accuracy-checks run` creates it), so there is "
                         "nothing to report.")
    with open_store(url, create=False) as store:
        rendered = build_report(store, since=since, now=now)
    write_text_atomic(out, rendered.html)
    return rendered
