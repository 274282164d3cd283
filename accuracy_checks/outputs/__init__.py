"""Renderers of a :class:`~accuracy_checks.results.RunReport`: console, JSON, JUnit XML, Markdown.

Every renderer reads the one result model and words values the same way
(:mod:`accuracy_checks.outputs.wording`); files are written atomically (a temporary file in
the target folder, then ``os.replace``), UTF-8, and identical reports give identical output.
"""

from __future__ import annotations

from accuracy_checks.outputs.console import render_console
from accuracy_checks.outputs.jsonfile import write_json
from accuracy_checks.outputs.junit import to_junit_xml, write_junit
from accuracy_checks.outputs.markdown import render_markdown, write_markdown
from accuracy_checks.outputs.wording import describe_threshold, describe_value, headline

__all__ = [
    "describe_threshold",
    "describe_value",
    "headline",
    "render_console",
    "render_markdown",
    "to_junit_xml",
    "write_json",
    "write_junit",
    "write_markdown",
]
