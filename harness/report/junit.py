"""junit.xml: one ``testsuite`` per circuit file, one ``testcase`` per check.

The layout CI systems read (the common JUnit XML convention): ``testsuites`` > ``testsuite``
(name = the file's title, attributes tests/failures/errors/skipped/time) > ``testcase``
(classname = the file path with ``/`` as ``.``, no leading ``.``, name = ``#1 node rst at 0 s``).  A check whose
verdict is ``mismatch`` or ``engines-disagree`` carries a ``failure`` (type = the verdict,
message = its first message, text = every message and the field table; a spec'd field failing
over the parts' tolerances comes first); a check with verdict
``error`` carries an ``error``.  A file that could not be analysed gets a single testcase
``analyse`` with an ``error`` holding the file's errors; a file with nothing to check a single
testcase ``expectations`` with a ``failure`` saying so (CI must not read 0 tests as a pass).
Control and bidi-control characters are shown as escapes (``common.printable``); any other
character XML 1.0 forbids is dropped.
"""

from __future__ import annotations

import re
from typing import TYPE_CHECKING

from ..messages import worded
from ..outcome import ERROR, PASS, CheckResult, FileResult, RunResult
from . import common
from .context import ReportContext

if TYPE_CHECKING:                      # the annotation's type; loaded only when junit.xml is written
    import xml.etree.ElementTree as ET

#: characters XML 1.0 forbids; compiled on first use (by ``re``'s cache), not at import: the
#: class of wide ranges costs ~3 ms, paid by every ``solve`` that imports the report package
_ILLEGAL = "[^\x09\x0a\x0d\x20-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]"


def _x(text: str) -> str:
    return re.sub(_ILLEGAL, "", common.printable(str(text)))


#: the file this writer writes in the report folder (``harness.report.WRITERS``)
FILE = "junit.xml"


def write(run: RunResult, context: ReportContext) -> str:
    """The report file's text (``harness.report.context``)."""
    return render(run)


def render(run: RunResult) -> str:
    """The XML text with declaration, UTF-8."""
    import xml.etree.ElementTree as ET  # deferred: only the report files need it
    run = worded(run)
    root = ET.Element("testsuites", name="tauproof")
    totals = {"tests": 0, "failures": 0, "errors": 0}
    for file in run.files:
        suite = _suite(file)
        root.append(suite)
        for key in totals:
            totals[key] += int(suite.get(key))
    for key, count in totals.items():
        root.set(key, str(count))
    ET.indent(root)
    return ET.tostring(root, encoding="unicode", xml_declaration=True) + "\n"


def _suite(file: FileResult) -> ET.Element:
    import xml.etree.ElementTree as ET

    from .spreads import summary
    suite = ET.Element("testsuite", name=_x(file.title or file.file), skipped="0",
                       time=f"{file.seconds:.3f}")
    props = ET.SubElement(suite, "properties")
    ET.SubElement(props, "property", name="file", value=_x(file.file))
    ET.SubElement(props, "property", name="verdict", value=file.verdict)
    classname = _x(class_name(file.file))
    failures = errors = 0
    cases = list(file.checks)
    if not cases and file.verdict == ERROR:
        case = ET.SubElement(suite, "testcase", classname=classname, name="analyse")
        text = "\n".join(file.errors) or "the file could not be analysed"
        ET.SubElement(case, "error", type=ERROR, message=_x(text.splitlines()[0])).text = _x(text)
        errors += 1
    elif not cases and file.messages:
        case = ET.SubElement(suite, "testcase", classname=classname, name="expectations")
        text = "\n".join(file.messages)
        ET.SubElement(case, "failure", type=file.verdict,
                      message=_x(file.messages[0])).text = _x(text)
        failures += 1
    found = [f["message"] for f in file.findings if not f["acknowledged"]]
    if found:
        case = ET.SubElement(suite, "testcase", classname=classname, name="findings")
        ET.SubElement(case, "failure", type="finding",
                      message=_x(found[0])).text = _x("\n".join(found))
        failures += 1
    for check in cases:
        case = ET.SubElement(suite, "testcase", classname=classname,
                             name=_x(common.check_label(check)))
        if check.verdict == PASS:
            continue
        tag = "error" if check.verdict == ERROR else "failure"
        failing, notes = common.split_messages(check)
        specs = [f"{common.FAILING_SPEC}: {summary(s)}"
                 for _, s in common.failing_specs(file, check)]
        messages = specs + failing + [f"note: {m}" for m in notes] or [check.verdict]
        ET.SubElement(case, tag, type=check.verdict,
                      message=_x(messages[0])).text = _x(_details(check, messages))
        if tag == "error":
            errors += 1
        else:
            failures += 1
    suite.set("tests", str(max(len(cases) + bool(found), errors + failures)))
    suite.set("failures", str(failures))
    suite.set("errors", str(errors))
    if file.warnings:
        ET.SubElement(suite, "system-out").text = _x("\n".join(f"warning: {w}"
                                                              for w in file.warnings))
    return suite


def class_name(path: str) -> str:
    """The file path as a dotted class name: ``circuits.library.logger.reset``; the root, drive,
    ``.`` and ``..`` steps are left out, so an absolute path never gives a leading ``.``."""
    steps = [s for s in path.replace("\\", "/").removesuffix(".toml").split("/")
             if s not in ("", ".", "..") and not s.endswith(":")]
    return ".".join(steps) or "circuit"


def _details(check: CheckResult, messages: list[str]) -> str:
    lines = [f"{common.check_label(check)}: {check.verdict}"]
    if check.direction:
        lines.append(f"reference direction: {check.direction}")
    lines.append(common.modes_text(check))
    lines += messages
    for field in check.fields:
        hand, closed, numeric = common.field_values(field)
        lines.append(f"{field.name}: hand {hand}, closed form {closed}, numeric {numeric} -> "
                     f"{field.verdict}")
    return "\n".join(lines)
