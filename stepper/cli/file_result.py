"""One file's outcome in a `stepper check` of several files (:mod:`stepper.cli.check_many`) and in
its JUnit report (:mod:`stepper.cli.junit_report`): the exit code, and what the check found or why
it could not run.

A check of one file never makes one, so it lives apart from :mod:`stepper.cli.check_file`, which
every check imports (a frozen dataclass costs about half a millisecond of CPU to create at import).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from stepper.cli.check_file import Checked

__all__ = ["FileResult"]


@dataclass(frozen=True, slots=True)
class FileResult:
    """One file's outcome: its exit code, and either what the check found or why it could not run."""

    name: str
    code: int
    checked: Checked | None
    error: str | None

    def detail(self) -> str:
        """What the file's line says after its name."""
        if self.checked is None:
            return self.error or ""
        if self.checked.strict and self.checked.report.first_failure is None:
            return "strict: " + "; ".join(self.checked.strict)
        report = self.checked.report
        failure = report.first_failure
        if failure is not None:
            where = "its claim" if failure.round == 0 else f"round {failure.round}"
            values = ""
            if failure.expected is not None or failure.found is not None:
                from stepper.verify.verdict import COUNT_CHECKS

                fmt = str if failure.check in COUNT_CHECKS else report.fmt
                values = f": expected {fmt(failure.expected)}, found {fmt(failure.found)}"
            return f"instance #{failure.instance} '{failure.instance_name}', {where}, check {failure.check}{values}"
        if report.verdict == "incomplete":
            return "the transcript stops early; every round present passed"
        return f"{report.instance_count} instance(s), every check passed; challenges {report.challenges}"
