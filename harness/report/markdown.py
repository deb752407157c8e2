"""report.md: the discrepancy report as Markdown (GitHub-flavoured tables).

An overall summary and the list of files at the top; per file a header (file, verdict, cautions
first and prominent, errors, warnings, jumps, a link to its whole-schedule plot) and per check a
field table, the probe's reference direction, order and modes, the waveform deviation, the
messages (notes of passing fields marked "note:") and a link to its plot (an SVG file).

All untrusted text (titles, part names, messages) goes through ``escape``: Markdown punctuation is
backslash-escaped, ``|`` cannot split a table cell, and ``<``/``>``/``&`` become HTML entities
so no raw HTML reaches a renderer.
"""

from __future__ import annotations

import re
from typing import Any, Mapping

from ..messages import worded
from ..outcome import PASS, CheckResult, FileResult, RunResult
from . import common, spreads
from .context import ReportContext
from .plot_schedule import SCHEDULE

#: punctuation that can start Markdown markup mid-line (GFM); text never starts a line here
_SPECIAL = re.compile(r"([\\`*_\[\]#|~$])")


def escape(text: str) -> str:
    """``text`` safe inside Markdown prose or a table cell (one line)."""
    text = common.printable(str(text)).replace("\r", " ").replace("\n", " ")
    text = text.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    return _SPECIAL.sub(r"\\\1", text)


#: the file this writer writes in the report folder (``harness.report.WRITERS``)
FILE = "report.md"


def write(run: RunResult, context: ReportContext) -> str:
    """The text with its plots linked and the spec'd fields' sections (``report.spreads``)."""
    return render(run, context.links, context.provenance) + "\n".join(
        spreads.markdown(run, context.spec_links))


def render(run: RunResult, plots: Mapping[tuple[int, int], str] | None = None,
           provenance: Mapping[str, Any] | None = None) -> str:
    """The Markdown text.  ``plots`` maps (file index, check index) to a path relative to the
    report folder (``plots/001-x-c1.svg``), and (file index, ``SCHEDULE``) to the file's
    whole-schedule plot; checks without one get no image.  ``provenance``
    (``provenance.collect``) heads the text and gives each file's SHA-256 and parts as written.
    Files that need attention come first."""
    run = worded(run)
    plots, provenance = plots or {}, provenance or {}
    out = ["# tauproof discrepancy report", ""] + _provenance(provenance)
    out += [f"**{escape(common.summary_line(run))}**", ""]
    out += _summary_table(run)
    files = provenance.get("files", {})
    for i in common.attention_order(run):
        out += _file_section(i, run.files[i], plots)
        out += _parts(files.get(run.files[i].file, {}))
    return "\n".join(out) + "\n"


def _provenance(facts: Mapping[str, Any]) -> list[str]:
    if not facts:
        return []
    lines = [f"- {label}: {escape(facts.get(key, ''))}" for key, label in
             (("tool", "tool"), ("time", "date and time"), ("command", "command"),
              ("versions", "libraries"))]
    lines += [f"- git commit of {escape(folder)}: {escape(commit)}"
              for folder, commit in facts.get("commits", {}).items()]
    return lines + [""]


def _parts(facts: Mapping[str, Any]) -> list[str]:
    """The file's SHA-256 and its parts as written."""
    out = [f"SHA-256 of the file: {facts['sha256']}", ""] if facts.get("sha256") else []
    parts = facts.get("parts", [])
    if parts:
        keys = ("name", "kind", "nodes", "value", "initial", "schedule")
        out += ["**Parts** (as written)", "", "| " + " | ".join(keys) + " |",
                "|" + "---|" * len(keys)]
        out += ["| " + " | ".join(escape(p.get(k, "")) for k in keys) + " |" for p in parts]
        out.append("")
    return out


def _summary_table(run: RunResult) -> list[str]:
    checks = common.check_counts(run)
    lines = ["| verdict | checks | files |", "|---|---:|---:|"]
    files = common.file_counts(run)
    for verdict, count in checks.items():
        lines.append(f"| {verdict} | {count} | {files[verdict]} |")
    lines += ["", "## Files", ""]
    for i, file in enumerate(run.files):
        where = f"{escape(file.file)}, " if file.title else ""
        lines.append(f"{i + 1}. **{file.verdict}** — {escape(file.title or file.file)} "
                     f"({where}{common.plural(len(file.checks), 'check')})")
    return lines + [""]


def _file_section(i: int, file: FileResult, plots) -> list[str]:
    out = [f"## {i + 1}\\. {escape(file.title or file.file)}", "",
           f"File {escape(file.file)} — verdict **{file.verdict}**", ""]
    findings = common.finding_lines(file)
    if findings:
        out += ["**Findings**", ""] + [f"- {escape(text)}" for text in findings] + [""]
    if file.cautions:
        out += ["> **⚠ Safety cautions**", ">"]
        out += [f"> - {escape(text)}" for text in file.cautions]
        out.append("")
    for label, items in (("Errors", file.errors), ("Not checked", file.messages),
                         ("Warnings", file.warnings)):
        if items:
            out += [f"**{label}**", ""] + [f"- {escape(text)}" for text in items] + [""]
    jumps = common.jump_lines(file)
    if jumps:
        out += ["**Jumps**", ""] + [f"- {escape(text)}" for text in jumps] + [""]
    headers, rows = common.stored_rows(file)
    if rows:
        out += ["**Stored energy** (each capacitor and inductor, just before and just after "
                "each event)", "", "| " + " | ".join(escape(h) for h in headers) + " |",
                "|" + "---:|" * len(headers)]
        out += ["| " + " | ".join(escape(c) for c in row) + " |" for row in rows] + [""]
    schedule = plots.get((i, SCHEDULE))
    if schedule:
        out += [f"![whole schedule of {escape(file.title or file.file)}]({schedule})", ""]
    for check in file.checks:
        out += _check_section(check, plots.get((i, check.index)),
                              [s for _, s in common.failing_specs(file, check)])
    return out


def _check_section(check: CheckResult, plot: str | None, specs: list = ()) -> list[str]:
    mark = "✔" if check.verdict == PASS else "✘"
    out = [f"### {mark} {escape(common.check_label(check))} — {check.verdict}", ""]
    if check.direction:
        out.append(f"- reference direction: {escape(check.direction)}")
    out.append(f"- {escape(common.modes_text(check))}")
    if check.dominant is not None and check.dominant.get("tau"):
        out.append(f"- {escape(common.dominant_text(check))}")
    out.append(f"- whole-waveform deviation: {escape(common.deviation_text(check))}")
    if check.note:
        out.append(f"- note: {escape(check.note)}")
    out += ["", "| field | hand | closed form | numeric | tolerance | verdict | formula |",
            "|---|---:|---:|---:|---:|---|---|"]
    for field in common.shown_fields(check):
        formula = escape(field.formula) if field.formula else ""
        values = " | ".join(escape(v) for v in common.field_values(field))
        out.append(f"| {escape(common.field_label(field))} | {values} | "
                   f"{escape(common.tolerance_text(field))} | {field.verdict} | {formula} |")
    out.append("")
    failing, notes = common.split_messages(check)
    out += [f"- **{common.FAILING_SPEC}: {escape(spreads.summary(s))}** (its Spec "
            "section is below)" for s in specs]
    out += [f"- **{escape(m)}**" if check.verdict != PASS else f"- {escape(m)}" for m in failing]
    out += [f"- note: {escape(m)}" for m in notes]
    if failing or notes or specs:
        out.append("")
    if check.derivation:
        out += ["The hand method, done right (formulas in part names, then numbers):", ""]
        out += [f"- {escape(line.strip())}" for line in check.derivation] + [""]
    if plot:
        out += [f"![waveform of {escape(common.check_label(check))}]({plot})", ""]
    return out

