"""A checked file's status, decided in one place for every format.

``error``: an input problem or a crash stopped part of the check (an error diagnostic);
``findings``: checked, with findings; ``clean``: checked, nothing found. JSON and HTML show
these words, JUnit maps them to its own (error / failure / passed), SARIF's
``executionSuccessful`` and the text summary's "files with errors" follow ``error``.
"""

from __future__ import annotations

from drivelint.checks.runner import CheckResult
from drivelint.diagnostics import Severity

STATUSES = ("clean", "findings", "error")


def file_status(result: CheckResult) -> str:
    """``error``, ``findings`` or ``clean`` (see the module docstring)."""
    if any(d.severity is Severity.ERROR for d in result.diagnostics):
        return "error"
    return "findings" if result.findings else "clean"


def failed(result: CheckResult) -> bool:
    """The file could not be checked as written."""
    return file_status(result) == "error"
