"""A checked file's status, decided in one place for every format.

In order of precedence: ``error``: an input problem or a crash stopped part of the check
(an error diagnostic); ``partial``: the file was read and checked around something it
names but does not hold (an include, a library, a model, a subcircuit) — its findings, if
any, are still reported, and the stages that need what is missing are "not checked";
``findings``: checked, with findings; ``clean``: checked, nothing found. JSON and HTML show
these words, JUnit maps them to its own (error / failure / skipped in part / passed),
SARIF's ``executionSuccessful`` and the text summary's "files with errors" follow
``error``.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from drivelint.diagnostics import Severity

if TYPE_CHECKING:
    from drivelint.checks.runner import CheckResult

STATUSES = ("clean", "findings", "partial", "error")


def file_status(result: CheckResult) -> str:
    """``error``, ``partial``, ``findings`` or ``clean`` (see the module docstring)."""
    if any(d.severity is Severity.ERROR for d in result.diagnostics):
        return "error"
    if result.circuit.partial:
        return "partial"
    return "findings" if result.findings else "clean"


def failed(result: CheckResult) -> bool:
    """The file could not be checked as written."""
    return file_status(result) == "error"
