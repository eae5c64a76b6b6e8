"""Output formats, registered by name: each is a function from check results to text.

A format is a small function, not a branch in the command: add one by writing the
function in its own module and listing it in ``FORMATS`` (imported lazily, so the start
of a run pays only for the format it uses).
"""

from __future__ import annotations

import importlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass

from drivelint.checks.runner import CheckResult
from drivelint.report.run import RunRecord


@dataclass(frozen=True, slots=True)
class ReportOptions:
    explain: bool = False
    color: bool = False
    show_accepted: bool = False  # text: list accepted findings (other formats always do)
    width: int | None = None  # text: wrap lines at this many columns (a terminal), else not
    testbench: str | None = None  # html: the folder of `drivelint testbench` output
    output: str | None = None  # where the report is written (html links are relative to it)
    run: RunRecord | None = None  # json: the run's header (what it checked, and how)
    # json: each result's position among the files the run named (None: as given)
    order: tuple[int, ...] | None = None


Formatter = Callable[[Sequence[CheckResult], ReportOptions], str]

# name -> "module:function" under drivelint.report
FORMATS: dict[str, str] = {
    "text": "findings:format_text",
    "json": "findings:format_json",
    "sarif": "sarif:format_sarif",
    "junit": "junit:format_junit",
    "github": "github:format_github",
    "html": "html:format_html",
}


def formatter(name: str) -> Formatter:
    module, function = FORMATS[name].split(":")
    found: Formatter = getattr(importlib.import_module(f"drivelint.report.{module}"), function)
    return found
