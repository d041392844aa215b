"""The JUnit XML report of `stepper check --junit PATH`, as CI systems read it.

Pure: results in, XML text out. One ``testsuite`` per file and one ``testcase`` per instance
(named ``#INDEX NAME``); a failed check is a ``failure`` whose message gives the round, the
check, the expected and the found value, with the replay's sentence as its text. A file that
could not be used is one test case with an ``error``. An incomplete instance is ``skipped``
(a ``failure`` under --strict); the reasons --strict adds are one more test case, ``strict``.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from stepper.cli.file_result import FileResult
    from stepper.verify.results import Failure
    from stepper.verify.verdict import Report

__all__ = ["junit_xml"]

_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


def _text(value: object) -> str:
    return _NOT_XML.sub("?", str(value))


def _failure_message(report: Report, failure: Failure) -> str:
    from stepper.verify.verdict import COUNT_CHECKS

    fmt = str if failure.check in COUNT_CHECKS else report.fmt
    where = "the claim (round 0)" if failure.round == 0 else f"round {failure.round}"
    return (f"{where}, check {failure.check}: expected {fmt(failure.expected)}, found {fmt(failure.found)}")


def junit_xml(results: list[FileResult], strict: bool = False) -> str:
    root = ET.Element("testsuites", name="stepper check")
    totals = {"tests": 0, "failures": 0, "errors": 0, "skipped": 0}
    for result in results:
        suite = ET.SubElement(root, "testsuite", name=_text(result.name))
        counts = {"tests": 0, "failures": 0, "errors": 0, "skipped": 0}

        def case(name: str) -> ET.Element:
            counts["tests"] += 1
            return ET.SubElement(suite, "testcase", classname=_text(result.name), name=_text(name))

        if result.checked is None:
            error = ET.SubElement(case("file"), "error", type="unusable" if result.code == 2 else "internal",
                                  message=_text(result.error))
            error.text = _text(result.error)
            counts["errors"] += 1
        else:
            report = result.checked.report
            for summary in report.instances:
                tc = case(f"#{summary.index} {summary.name}")
                if summary.failure is not None:
                    node = ET.SubElement(tc, "failure", type=_text(summary.failure.check),
                                         message=_text(_failure_message(report, summary.failure)))
                    node.text = _text(summary.failure.explanation)
                    counts["failures"] += 1
                elif summary.status == "incomplete":
                    message = f"stops after {summary.rounds_passed} of {summary.num_vars} rounds"
                    if strict:
                        ET.SubElement(tc, "failure", type="incomplete", message=message)
                        counts["failures"] += 1
                    else:
                        ET.SubElement(tc, "skipped", message=message)
                        counts["skipped"] += 1
            if not report.instances:
                case("(no instance)")
            if result.checked.strict:
                node = ET.SubElement(case("strict"), "failure", type="strict",
                                     message=_text("; ".join(result.checked.strict)))
                node.text = _text("\n".join(result.checked.strict))
                counts["failures"] += 1
        for key, value in counts.items():
            suite.set(key, str(value))
            totals[key] += value
    for key, value in totals.items():
        root.set(key, str(value))
    ET.indent(root)
    return '<?xml version="1.0" encoding="UTF-8"?>\n' + ET.tostring(root, encoding="unicode") + "\n"
