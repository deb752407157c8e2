"""report.html: a self-contained page (inline CSS, plots as inline SVG elements).

Nothing on the page is fetched: no scripts, no external style sheets or images, and a
Content-Security-Policy that forbids loading anything (the plots are part of the page's markup,
``svg``: their text is escaped like the rest).  Every piece of text
goes through ``html.escape``.  Layout: the provenance (tool, time, command, versions, git
commit), the overall summary, a verdict filter (CSS radio buttons) and the file list at the top,
files that need attention first; per file a header (file, SHA-256, verdict, findings and cautions
boxed first, errors, warnings, jumps), its parts as written, its whole-schedule plot, then per
check its field table and facts (failures in red, notes of passing fields apart) beside its
waveform plot, failing checks first and passing ones folded; a passing file is folded whole.
Print styles drop the filter and unfold everything.
"""

from __future__ import annotations

from html import escape as _escape
from typing import Any, Mapping

from ..messages import worded
from ..outcome import PASS, CheckResult, FileResult, RunResult
from . import common, spreads
from .context import ReportContext
from .plot_schedule import SCHEDULE
from .svg import without_metadata

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
.facts pre{white-space:pre-wrap;overflow-wrap:anywhere}
.plot svg{display:block;max-width:100%;height:auto;border:1px solid #eee}
.caution{border:2px solid #c77700;background:#fff6e0;padding:8px 12px;margin:8px 0;
 border-radius:4px}.caution strong{color:#8a4b00}
.errors{border:2px solid #a3221a;background:#fdecea;padding:6px 12px;margin:8px 0}
ul{margin:4px 0;padding-left:22px}.msg{color:#a3221a;font-weight:600}.notes{color:#444}
.v-unchecked{background:#fde4e2;color:#a3221a}.check.c-unchecked{border-left-color:#c62828}
.prov td{font-size:12px}.prov code,.hash{font-family:ui-monospace,monospace;font-size:11px}
.filter{position:sticky;top:0;background:#fff;padding:6px 0;border-bottom:1px solid #ddd;
 z-index:1}.filter label{margin-right:12px;cursor:pointer}
#show-attention:checked~main .f-pass,#show-attention:checked~main .check.c-pass,
#show-attention:checked~main details.passes{display:none}
#show-failing:checked~main .file:not(.f-mismatch):not(.f-engines-disagree):not(.f-error)
 :not(.f-finding):not(.f-unchecked){display:none}
#show-passing:checked~main .file:not(.f-pass){display:none}
details>summary{cursor:pointer;font-weight:600;margin:8px 0}
a.top{display:inline-block;margin:8px 0;font-size:12px}
@media print{.filter,a.top,input{display:none}body{max-width:none;margin:0;font-size:11px}
 details::details-content{content-visibility:visible;display:contents}
 section,.check{break-inside:avoid}h2{break-before:auto}.plot svg{max-width:90%}}
"""

_CSP = "default-src 'none'; style-src 'unsafe-inline'"


def esc(text: object) -> str:
    """Escape any text for HTML element content or a quoted attribute value."""
    return _escape(common.printable(str(text)), quote=True)


def badge(verdict: str) -> str:
    return f'<span class="v v-{esc(verdict)}">{esc(verdict)}</span>'


#: the file this writer writes in the report folder (``harness.report.WRITERS``)
FILE = "report.html"


def write(run: RunResult, context: ReportContext) -> str:
    """The page with its plots embedded and a section per spec'd field (``report.spreads``)."""
    return render(run, context.plots, context.provenance).replace(
        "</main>", spreads.html(run, context.histograms) + "</main>", 1)


def render(run: RunResult, plots: Mapping[tuple[int, int], str] | None = None,
           provenance: Mapping[str, Any] | None = None) -> str:
    """The HTML page.  ``plots`` maps (file index, check index) to SVG text, and (file index,
    ``SCHEDULE``) to the file's whole-schedule plot; ``provenance`` (``provenance.collect``)
    heads the page and gives each file's parts as written.  Files that need attention come
    first; passing files and checks are folded (``<details>``); a CSS-only filter by verdict
    (radio buttons, no script) sits above the files."""
    run = worded(run)
    provenance = provenance or {}
    order = common.attention_order(run)
    plots = _within_budget(run, plots or {}, order)
    body = ['<h1 id="top">tauproof discrepancy report</h1>', _provenance_table(provenance),
            f'<p class="summary">{badge(run.verdict)} {esc(common.summary_line(run))}</p>',
            _counts_table(run), FILTER, "<main>", _file_list(run, order)]
    files = provenance.get("files", {})
    for i in order:
        body.append(_file_section(i, run.files[i], plots, files.get(run.files[i].file, {})))
    body.append("</main>")
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            f'<meta http-equiv="Content-Security-Policy" content="{_CSP}">\n'
            '<meta name="viewport" content="width=device-width, initial-scale=1">\n'
            "<title>tauproof report</title>\n"
            f"<style>{CSS}</style>\n</head>\n<body>\n" + "\n".join(body) + "\n</body>\n</html>\n")


#: the verdict filter: radio buttons whose state the style sheet reads (no script)
FILTER = ('<div class="filter">show: '
          + "".join(f'<input type="radio" name="show" id="show-{key}"{" checked" * (key == "all")}>'
                    f'<label for="show-{key}">{text}</label>'
                    for key, text in (("all", "everything"), ("attention", "needs attention"),
                                      ("failing", "failing files"), ("passing", "passing files")))
          + "</div>")


def _provenance_table(facts: Mapping[str, Any]) -> str:
    """Tool, time, command, library versions and the circuits' git commit(s)."""
    if not facts:
        return ""
    rows = [("tool", facts.get("tool", "")), ("date and time", facts.get("time", "")),
            ("command", facts.get("command", "")), ("libraries", facts.get("versions", ""))]
    rows += [(f"git commit of {folder}", commit)
             for folder, commit in facts.get("commits", {}).items()]
    body = "".join(f"<tr><th>{esc(k)}</th><td><code>{esc(v)}</code></td></tr>" for k, v in rows)
    return f'<table class="prov">{body}</table>'


def _counts_table(run: RunResult) -> str:
    checks, files = common.check_counts(run), common.file_counts(run)
    rows = "".join(f"<tr><td>{badge(v)}</td><td class=\"num\">{checks[v]}</td>"
                   f"<td class=\"num\">{files[v]}</td></tr>" for v in checks)
    return f"<table><tr><th>verdict</th><th>checks</th><th>files</th></tr>{rows}</table>"


def _file_list(run: RunResult, order: list[int]) -> str:
    items = "".join(f'<li>{badge(f.verdict)} <a href="#file-{i + 1}">{esc(f.title or f.file)}</a>'
                    f' <span class="meta">{esc(f.file)} · '
                    f'{common.plural(len(f.checks), "check")}</span></li>'
                    for i, f in ((i, run.files[i]) for i in order))
    return f"<h2>Files</h2><ol>{items}</ol>"


def _file_section(i: int, file: FileResult, plots, facts: Mapping[str, Any]) -> str:
    head = f"{i + 1}. {esc(file.title or file.file)} {badge(file.verdict)}"
    out = [f'<section id="file-{i + 1}" class="file f-{esc(file.verdict)}">',
           f"<h2>{head}</h2>" if file.verdict != PASS else
           f"<details><summary>{head}</summary>",
           f'<p class="meta">file {esc(file.file)} · {common.plural(len(file.checks), "check")}'
           f' · {file.seconds:.2f} s'
           + (f' · SHA-256 <span class="hash">{esc(facts["sha256"])}</span>'
              if facts.get("sha256") else "") + "</p>"]
    out += _file_notices(file)
    out.append(_parts_table(facts.get("parts", [])))
    out.append(_stored_table(file))
    schedule = plots.get((i, SCHEDULE))
    if schedule is not None:
        out.append(_image(schedule, f"whole schedule of {file.title or file.file}"))
    failing = [c for c in file.checks if c.verdict != PASS]
    passing = [c for c in file.checks if c.verdict == PASS]
    out += [_check_block(c, plots.get((i, c.index)), _spec_links(i, file, c)) for c in failing]
    if passing and failing:
        out.append(f'<details class="passes"><summary>{common.plural(len(passing), "passing check")}'
                   "</summary>")
    out += [_check_block(c, plots.get((i, c.index))) for c in passing]
    if passing and failing:
        out.append("</details>")
    if file.verdict == PASS:
        out.append("</details>")
    out.append('<a class="top" href="#top">↑ back to top</a></section>')
    return "\n".join(out)


def _file_notices(file: FileResult) -> list[str]:
    """Findings, cautions, errors, what was not checked, warnings and jumps, in that order."""
    out = []
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
    return out


def _parts_table(parts: list[Mapping[str, str]]) -> str:
    """The parts as the file writes them: name, kind, nodes, value, initial, schedule."""
    if not parts:
        return ""
    keys = ("name", "kind", "nodes", "value", "initial", "schedule")
    head = "".join(f"<th>{k}</th>" for k in keys)
    body = "".join("<tr>" + "".join(f"<td>{esc(p.get(k, ''))}</td>" for k in keys) + "</tr>"
                   for p in parts)
    return f"<p><strong>Parts</strong> (as written)</p><table>{head}{body}</table>"


def _spec_links(i: int, file: FileResult, check: CheckResult) -> list[str]:
    """A line per spec'd field of ``check`` that fails over the parts' tolerances, linked to
    its section (its numbers are there)."""
    return [f'{common.FAILING_SPEC}: <a href="#{spreads.anchor(i, j)}">'
            f"{esc(spreads.summary(s))}</a>" for j, s in common.failing_specs(file, check)]


def _check_block(check: CheckResult, chart: str | None, specs: list[str] = ()) -> str:
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
    if specs:
        facts.append('<ul class="msg">' + "".join(f"<li>{x}</li>" for x in specs) + "</ul>")
    for cls, items in (("msg" if check.verdict != PASS else "notes", failing), ("notes", notes)):
        if items:
            facts.append(f'<ul class="{cls}">' + "".join(f"<li>{esc(m)}</li>" for m in items)
                         + "</ul>")
    if check.note:
        facts.append(f'<p class="meta">note: {esc(check.note)}</p>')
    if check.derivation:
        facts.append("<details open><summary>The hand method, done right (formulas in part "
                     "names, then numbers)</summary><pre>"
                     + esc("\n".join(check.derivation)) + "</pre></details>")
    plot = _image(chart, f"waveform of {common.check_label(check)}") if chart is not None else ""
    return (f'<div class="check c-{esc(check.verdict)}"><div class="facts">' + "".join(facts)
            + "</div>" + plot + "</div>")


def inline(chart: str, alt: str) -> str:
    """A plot's SVG text as an element of the page, without its metadata (the tables beside it
    say the same), labelled ``alt`` for screen readers."""
    return (f'<div class="plot" role="img" aria-label="{esc(alt)}">{without_metadata(chart)}'
            "</div>")


def _image(chart: str, alt: str) -> str:
    """A plot inline, or the note that stands for a passing check's plot left out
    (``NOT_EMBEDDED``) to keep the page small."""
    if not chart:
        return ('<p class="meta">(the plot of this passing check is in plots/ of the report '
                "folder and in report.md: the page keeps its size down)</p>")
    return inline(chart, alt)


#: characters of plots a page holds before passing checks' plots are left out (the schedule
#: plots and every check that needs attention are always shown): ~2 MB of page
EMBED_BUDGET = 1_600_000
#: the stand-in for a plot left out of the page
NOT_EMBEDDED = ""


def _within_budget(run: RunResult, plots: Mapping, order: list[int]) -> dict:
    """The plots the page shows, in the page's order: every file's schedule plot and every
    check that needs attention, then passing checks' plots while the sum stays within
    ``EMBED_BUDGET``; the rest ``NOT_EMBEDDED``."""
    out, used, later = {}, 0, []
    for i in order:
        passing = {(i, c.index) for c in run.files[i].checks if c.verdict == PASS}
        for key in [(i, SCHEDULE)] + [(i, c.index) for c in run.files[i].checks]:
            if key not in plots:
                continue
            if key in passing:
                later.append(key)
                continue
            out[key] = plots[key]
            used += len(plots[key])
    for key in later:
        fits = used + len(plots[key]) <= EMBED_BUDGET
        out[key] = plots[key] if fits else NOT_EMBEDDED
        used += len(plots[key]) if fits else 0
    return out


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
