"""report.html: a self-contained page (inline CSS, plots as base64 PNG data URIs).

Nothing on the page is fetched: no scripts, no external style sheets or images, and a
Content-Security-Policy that forbids loading anything but ``data:`` images.  Every piece of text
goes through ``html.escape``.  Layout: overall summary and file list at the top; per file a header
(file, verdict, cautions boxed first, errors, warnings, jumps) and its whole-schedule plot, then
per check its field table and facts (failures in red, notes of passing fields apart) beside its
waveform plot.
"""

from __future__ import annotations

import base64
from html import escape as _escape
from typing import Mapping

from ..outcome import PASS, CheckResult, FileResult, RunResult
from . import common
from .plot_schedule import SCHEDULE

CSS = """
body{font:14px/1.45 system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;
 color:#1d1d1f;margin:24px auto;max-width:1280px;padding:0 16px}
h1{font-size:22px;margin:0 0 8px}h2{font-size:18px;margin:32px 0 6px;padding-top:12px;
 border-top:2px solid #ccc}h3{font-size:15px;margin:0 0 6px}
table{border-collapse:collapse;margin:6px 0}th,td{border:1px solid #d0d0d0;padding:3px 6px;
 text-align:left;vertical-align:top}th{background:#f3f3f3;white-space:nowrap}
td.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
.summary{font-weight:600;margin:6px 0 12px}.meta{color:#555;margin:2px 0}
.v{display:inline-block;padding:1px 7px;border-radius:3px;font-weight:600;font-size:12px;
 white-space:nowrap}
.v-pass{background:#e3f4e6;color:#17602a}.v-mismatch{background:#fde4e2;color:#a3221a}
.v-engines-disagree{background:#fff0d4;color:#8a4b00}.v-error{background:#5c1a1a;color:#fff}
.v-finding{background:#7a1f6e;color:#fff}.v-unchecked{background:#eceff1;color:#37474f}
tr.bad td{background:#fff8f7}
.check{display:flex;flex-wrap:wrap;gap:16px;align-items:flex-start;margin:14px 0;padding:10px;
 border:1px solid #e0e0e0;border-left:5px solid #9e9e9e;border-radius:4px}
.check.c-pass{border-left-color:#2e8b45}.check.c-mismatch{border-left-color:#c62828}
.check.c-engines-disagree{border-left-color:#e08a00}.check.c-error{border-left-color:#5c1a1a}
.facts{flex:1 1 460px;min-width:0;overflow-x:auto}.plot{flex:0 1 632px;min-width:0}
.plot img{display:block;max-width:100%;height:auto;border:1px solid #eee}
.caution{border:2px solid #c77700;background:#fff6e0;padding:8px 12px;margin:8px 0;
 border-radius:4px}.caution strong{color:#8a4b00}
.errors{border:2px solid #a3221a;background:#fdecea;padding:6px 12px;margin:8px 0}
ul{margin:4px 0;padding-left:22px}.msg{color:#a3221a;font-weight:600}.notes{color:#444}
.v-unchecked{background:#fde4e2;color:#a3221a}.check.c-unchecked{border-left-color:#c62828}
"""

_CSP = "default-src 'none'; img-src data:; style-src 'unsafe-inline'"


def esc(text: object) -> str:
    """Escape any text for HTML element content or a quoted attribute value."""
    return _escape(common.printable(str(text)), quote=True)


def badge(verdict: str) -> str:
    return f'<span class="v v-{esc(verdict)}">{esc(verdict)}</span>'


def render(run: RunResult, plots: Mapping[tuple[int, int], bytes] | None = None) -> str:
    """The HTML page.  ``plots`` maps (file index, check index) to PNG bytes, and (file index,
    ``SCHEDULE``) to the file's whole-schedule plot."""
    plots = plots or {}
    body = ["<h1>tauproof discrepancy report</h1>",
            f'<p class="summary">{badge(run.verdict)} {esc(common.summary_line(run))}</p>',
            _counts_table(run), _file_list(run)]
    for i, file in enumerate(run.files):
        body.append(_file_section(i, file, plots))
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            f'<meta http-equiv="Content-Security-Policy" content="{_CSP}">\n'
            '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
            "<title>tauproof report</title>\n"
            f"<style>{CSS}</style>\n</head>\n<body>\n" + "\n".join(body) + "\n</body>\n</html>\n")


def _counts_table(run: RunResult) -> str:
    checks, files = common.check_counts(run), common.file_counts(run)
    rows = "".join(f"<tr><td>{badge(v)}</td><td class=\"num\">{checks[v]}</td>"
                   f"<td class=\"num\">{files[v]}</td></tr>" for v in checks)
    return f"<table><tr><th>verdict</th><th>checks</th><th>files</th></tr>{rows}</table>"


def _file_list(run: RunResult) -> str:
    items = "".join(f'<li>{badge(f.verdict)} <a href="#file-{i + 1}">{esc(f.title or f.file)}</a>'
                    f' <span class="meta">{esc(f.file)} · '
                    f'{common.plural(len(f.checks), "check")}</span></li>'
                    for i, f in enumerate(run.files))
    return f"<h2>Files</h2><ol>{items}</ol>"


def _file_section(i: int, file: FileResult, plots) -> str:
    out = [f'<section id="file-{i + 1}">',
           f"<h2>{i + 1}. {esc(file.title or file.file)} {badge(file.verdict)}</h2>",
           f'<p class="meta">file {esc(file.file)} · {common.plural(len(file.checks), "check")}'
           f' · {file.seconds:.2f} s</p>']
    findings = common.finding_lines(file)
    if findings:
        out.append('<div class="errors"><strong>Findings</strong><ul>'
                   + "".join(f"<li>{esc(f)}</li>" for f in findings) + "</ul></div>")
    if file.cautions:
        out.append('<div class="caution"><strong>⚠ Safety cautions</strong><ul>'
                   + "".join(f"<li>{esc(c)}</li>" for c in file.cautions) + "</ul></div>")
    for label, items in (("Errors", file.errors), ("Not checked", file.messages)):
        if items:
            out.append(f'<div class="errors"><strong>{label}</strong><ul>'
                       + "".join(f"<li>{esc(e)}</li>" for e in items) + "</ul></div>")
    if file.warnings:
        out.append("<p><strong>Warnings</strong></p><ul>"
                   + "".join(f"<li>{esc(w)}</li>" for w in file.warnings) + "</ul>")
    jumps = common.jump_lines(file)
    if jumps:
        out.append("<p><strong>Jumps</strong> (charge moved, energy dissipated)</p><ul>"
                   + "".join(f"<li>{esc(j)}</li>" for j in jumps) + "</ul>")
    out.append(_stored_table(file))
    schedule = plots.get((i, SCHEDULE))
    if schedule:
        out.append(_image(schedule, f"whole schedule of {file.title or file.file}"))
    for check in file.checks:
        out.append(_check_block(check, plots.get((i, check.index))))
    out.append("</section>")
    return "\n".join(out)


def _check_block(check: CheckResult, png: bytes | None) -> str:
    facts = [f"<h3>{esc(common.check_label(check))} {badge(check.verdict)}</h3>"]
    if check.direction:
        facts.append(f'<p class="meta">reference direction: {esc(check.direction)}</p>')
    facts.append(f'<p class="meta">event t = {esc(common.time(check.at))} · '
                 f"{esc(common.modes_text(check))} · whole-waveform deviation "
                 f"{esc(common.deviation_text(check))}</p>")
    if check.dominant is not None and check.dominant.get("tau"):
        facts.append(f'<p class="meta">{esc(common.dominant_text(check))}</p>')
    facts.append(_field_table(check))
    failing, notes = common.split_messages(check)
    for cls, items in (("msg" if check.verdict != PASS else "notes", failing), ("notes", notes)):
        if items:
            facts.append(f'<ul class="{cls}">' + "".join(f"<li>{esc(m)}</li>" for m in items)
                         + "</ul>")
    if check.note:
        facts.append(f'<p class="meta">note: {esc(check.note)}</p>')
    plot = _image(png, f"waveform of {common.check_label(check)}") if png else ""
    return (f'<div class="check c-{esc(check.verdict)}"><div class="facts">' + "".join(facts)
            + "</div>" + plot + "</div>")


def _image(png: bytes, alt: str) -> str:
    """A plot as an inline data-URI image."""
    data = base64.b64encode(png).decode("ascii")
    return f'<div class="plot"><img src="data:image/png;base64,{data}" alt="{esc(alt)}"></div>'


def _stored_table(file: FileResult) -> str:
    """Stored energy of each capacitor and inductor just before and after every event."""
    headers, rows = common.stored_rows(file)
    if not rows:
        return ""
    head = "".join(f"<th>{esc(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f'<td class="num">{esc(c)}</td>' for c in row) + "</tr>"
                   for row in rows)
    return ("<p><strong>Stored energy</strong> (each capacitor and inductor, just before and "
            f"just after each event)</p><table><tr>{head}</tr>{body}</table>")


def _field_table(check: CheckResult) -> str:
    """field / hand / closed form / numeric / tolerance / verdict (/ formula, when one is set)."""
    formulas = any(f.formula for f in check.fields)
    head = ("<tr><th>field</th><th>hand</th><th>closed form</th><th>numeric</th>"
            "<th>tolerance</th><th>verdict</th>" + ("<th>formula</th>" if formulas else "")
            + "</tr>")
    rows = []
    for field in common.shown_fields(check):
        cls = "" if field.verdict == PASS else ' class="bad"'
        rows.append(f"<tr{cls}><td>{esc(common.field_label(field))}</td>"
                    + "".join(f'<td class="num">{esc(v)}</td>' for v in common.field_values(field))
                    + f'<td class="num">{esc(common.tolerance_text(field))}</td>'
                    f"<td>{badge(field.verdict)}</td>"
                    + (f"<td>{esc(field.formula)}</td>" if formulas else "") + "</tr>")
    return f"<table>{head}{''.join(rows)}</table>"
