"""JUnit XML for CI: one testsuite per device, one testcase per verdict.

Written atomically (a temporary file renamed into place), so an interrupted run never leaves a
half-written file where CI expects a complete one.
"""

from __future__ import annotations

from pathlib import Path

from junit_xml import TestCase, TestSuite, to_xml_report_string

from .._version import __version__
from .outputs import write_atomic

__all__ = ["suite_for", "junit_xml", "write_junit"]


def suite_for(result) -> TestSuite:
    subject = result.subject
    cases = []
    for v in result.verdicts:
        case = TestCase(v.name, classname=f"modemverify.{subject.name}", elapsed_sec=v.duration_s,
                        stdout=v.render())
        if v.outcome == "fail":
            case.add_failure_info(message=v.reason, output=v.render())
        elif v.outcome == "error":
            case.add_error_info(message=v.reason, output=v.render())
        elif v.outcome == "inconclusive":
            if result.gates(v):
                case.add_failure_info(message="inconclusive: " + v.reason, output=v.render())
            else:
                case.add_skipped_info(message="inconclusive: " + v.reason, output=v.render())
        elif v.outcome == "skipped":
            case.add_skipped_info(message=v.reason)
        cases.append(case)
    props = {"modemverify.version": __version__, "seed": str(result.seed),
             "adapter": subject.adapter, "modulation": subject.scheme.modulation,
             "convention": subject.scheme.convention,
             "samples_per_symbol": str(subject.scheme.samples_per_symbol)}
    if subject.file:
        props["device_file"] = subject.file
    if subject.sha256:
        props["device_file_sha256"] = subject.sha256
    if getattr(result, "interrupted", False):
        props["interrupted"] = "true: the run stopped before this device's checks finished"
    return TestSuite(subject.name, cases, properties=props)


def junit_xml(results) -> str:
    return to_xml_report_string([suite_for(r) for r in results], encoding="utf-8")


def write_junit(results, path: str | Path) -> None:
    write_atomic(path, junit_xml(results))
