"""JUnit XML for CI systems: one ``<testcase>`` per case.

Structure (the fields CI systems read)::

    <testsuites tests="N" failures="F" errors="0" time="T">
      <testsuite name="sdrx refs CASES" tests="N" failures="F" errors="0" skipped="0" time="T">
        <testcase classname="sdrx.refs.CASES-STEM" name="CASE" time="t">
          <failure type="regression|capture-changed" message="one line">details</failure>
          <system-out>notes (version differences, ...)</system-out>
        </testcase>
      </testsuite>
    </testsuites>
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from dataclasses import dataclass, field
from pathlib import Path
from typing import Optional

from ..fileio import atomic_path

__all__ = ["JUnitCase", "junit_xml", "write_junit"]


@dataclass(frozen=True)
class JUnitCase:
    """One test case for the report.

    Parameters
    ----------
    name : str
    time_s : float
    failure_type : str or None
        None when the case passed.
    message : str
        One-line summary (the figure and its limit).
    details : str
        Longer text inside the failure element.
    notes : tuple of str
        Written to ``system-out`` (version differences and the like).
    """

    name: str
    time_s: float
    failure_type: Optional[str] = None
    message: str = ""
    details: str = ""
    notes: tuple = field(default_factory=tuple)


def junit_xml(cases, suite_name: str, classname: str) -> bytes:
    """JUnit XML bytes for a list of :class:`JUnitCase`.

    Examples
    --------
    >>> x = junit_xml([JUnitCase("a", 0.5), JUnitCase("b", 0.25, "regression", "SNR 3 dB < 60 dB")],
    ...               "sdrx refs", "sdrx.refs.cases")
    >>> root = ET.fromstring(x)
    >>> suite = root.find("testsuite")
    >>> suite.get("tests"), suite.get("failures"), [t.get("name") for t in suite.iter("testcase")]
    ('2', '1', ['a', 'b'])
    """
    cases = list(cases)
    failures = sum(1 for c in cases if c.failure_type)
    total = sum(c.time_s for c in cases)
    attrs = {"tests": str(len(cases)), "failures": str(failures), "errors": "0", "time": f"{total:.3f}"}
    root = ET.Element("testsuites", {"name": suite_name, **attrs})
    suite = ET.SubElement(root, "testsuite", {"name": suite_name, **attrs, "skipped": "0"})
    for c in cases:
        tc = ET.SubElement(suite, "testcase", {"classname": classname, "name": c.name, "time": f"{c.time_s:.3f}"})
        if c.failure_type:
            f = ET.SubElement(tc, "failure", {"type": c.failure_type, "message": c.message})
            f.text = c.details or c.message
        if c.notes:
            so = ET.SubElement(tc, "system-out")
            so.text = "\n".join(c.notes)
    ET.indent(root)
    return ET.tostring(root, encoding="utf-8", xml_declaration=True) + b"\n"


def write_junit(path, cases, suite_name: str, classname: str) -> Path:
    """Write the JUnit XML file atomically.

    Parameters
    ----------
    path : str or Path
        Output file (checked by the caller with ``sdrx.fileio.check_output``).
    cases : list of JUnitCase
    suite_name, classname : str

    Returns
    -------
    Path
    """
    p = Path(path)
    with atomic_path(p) as tmp:
        tmp.write_bytes(junit_xml(cases, suite_name, classname))
    return p
