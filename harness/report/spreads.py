"""The sign-off over tolerances in the reports: one console line per spec'd field, a Markdown
/ HTML section per field (corner table, ranked sensitivities, Monte Carlo summary, histogram with
the limits marked, ranked sensitivity bar chart) and the samples as CSV."""

from __future__ import annotations

import csv
import io

import numpy as np

from ..outcome import PASS, RunResult
from ..safetext import printable
from ..units import format_si

SAMPLES_CSV = "spec-samples.csv"
#: the last element of a plot key that names a field's sensitivity chart (the histogram's key
#: has none)
SENSITIVITY = "sensitivity"


def _v(value, unit) -> str:
    return "—" if value is None else format_si(value, unit)


def _limits(s) -> str:
    """``limits 3 ms … 5 ms``, ``limit ≤ 5 ms`` or ``limit ≥ 3 ms``."""
    low, high = s.limits.get("min"), s.limits.get("max")
    if low is not None and high is not None:
        return f"limits {_v(low, s.unit)} … {_v(high, s.unit)}"
    return f"limit ≤ {_v(high, s.unit)}" if low is None else f"limit ≥ {_v(low, s.unit)}"


def line(s) -> str:
    """``expect #1: node rst at 0 s crossing: pass  limits 70 ms … 150 ms, nominal 93.16 ms,
    extremes 77.8–110.7 ms, yield 100 % (…)``."""
    return printable(f"{s.check} {summary(s)}")


def summary(s) -> str:
    """``line`` without the check's label: ``crossing: pass  limits …``."""
    text = f"{s.name}: {s.verdict}  {_limits(s)}, nominal {_v(s.nominal, s.unit)}"
    if s.low is not None or s.high is not None:
        text += f", extremes {_v(s.low, s.unit)} … {_v(s.high, s.unit)}"
    mc = s.monte_carlo
    if mc:
        lo, hi = mc["yield_95"]
        text += (f", yield {100 * mc['yield']:.2f} % (Wilson 95 %: {100 * lo:.2f}–"
                 f"{100 * hi:.2f} %)")
    if s.verdict != PASS and s.messages:    # why it is not a pass, in the same line
        text += " — " + "; ".join(s.messages)
    return printable(text)


def console(run: RunResult) -> str:
    """One line per spec'd field of every file."""
    return "\n".join(f"{printable(f.file)}: {line(s)}" for f in run.files for s in f.spreads)


def _rows(s) -> list[tuple[str, ...]]:
    rows = [(q, f"{x:+.3f}", f"{100 * s.low_corner.get(q, 0):+.2f} %",
             f"{100 * s.high_corner.get(q, 0):+.2f} %") for q, x in s.sensitivities]
    return rows


def markdown(run: RunResult, plots: dict) -> list[str]:
    """Markdown section per spec'd field."""
    out = []
    for f in run.files:
        for i, s in enumerate(f.spreads):
            out += [f"### Spec: {printable(f.title)} — {printable(s.check)} — {s.name}", "",
                    f"Verdict **{s.verdict}**; limits min {_v(s.limits['min'], s.unit)}, max "
                    f"{_v(s.limits['max'], s.unit)}; nominal {_v(s.nominal, s.unit)}; extremes "
                    f"{_v(s.low, s.unit)} … {_v(s.high, s.unit)} ({s.extreme_method}); numerical "
                    f"engine there {_v(s.numeric_low, s.unit)} … {_v(s.numeric_high, s.unit)}"
                    + (f"; RSS {_v(s.rss[0], s.unit)} … {_v(s.rss[1], s.unit)}" if s.rss
                       else "") + f"; evaluated by the {s.route}.", ""]
            out += [f"- {printable(m)}" for m in s.messages]
            out += ["", "| quantity | sensitivity ∂x/∂p·p/x | at min | at max |",
                    "|---|---:|---:|---:|"]
            out += ["| " + " | ".join(r) + " |" for r in _rows(s)] + [""]
            mc = s.monte_carlo
            if mc and "mean" in mc:
                out += [f"Monte Carlo: {mc['count']} samples, mean {_v(mc['mean'], s.unit)}, "
                        f"σ {_v(mc['std'], s.unit)}, min {_v(mc['min'], s.unit)}, max "
                        f"{_v(mc['max'], s.unit)}, yield {100 * mc['yield']:.3f} % (Wilson 95 %"
                        f" {100 * mc['yield_95'][0]:.3f}–{100 * mc['yield_95'][1]:.3f} %)", ""]
            for key, what in (((f.file, i), "histogram"), ((f.file, i, SENSITIVITY),
                                                            "sensitivities")):
                if key in plots:
                    out += [f"![{what} of {s.name}]({plots[key]})", ""]
    return out


def html(run: RunResult, histograms: dict | None = None) -> str:
    """A section per spec'd field: its summary, the ranked sensitivities with the corners, the
    Monte Carlo line, its histogram and its sensitivity chart (``histograms``: (file index,
    field index) -> histogram SVG, (file index, field index, SENSITIVITY) -> chart SVG, written
    inline)."""
    from .html import esc, inline
    histograms = histograms or {}
    parts = []
    for i, f in enumerate(run.files):
        for j, s in enumerate(f.spreads):
            text = markdown(_one(run, f, s), {})
            lines = [ln for ln in text if ln and not ln.startswith("|")]
            rows = "".join("<tr>" + "".join(f"<td>{esc(c)}</td>" for c in r) + "</tr>"
                           for r in _rows(s))
            body = [f'<h3 id="{anchor(i, j)}">{esc(lines[0].lstrip("# "))}</h3>']
            body += [f"<p>{esc(ln.lstrip('- ').replace('**', ''))}</p>" for ln in lines[1:]]
            body.append("<table><tr><th>quantity</th><th>sensitivity ∂x/∂p·p/x</th>"
                        f"<th>at min</th><th>at max</th></tr>{rows}</table>")
            for key, what in (((i, j), "histogram"), ((i, j, SENSITIVITY), "sensitivities")):
                chart = histograms.get(key)
                if chart:
                    body.append(inline(chart, f"{what} of {s.name}"))
            parts.append("".join(body))
    if not parts:
        return ""
    return ('<section id="spec"><h2>Spec limits over tolerances</h2>' + "".join(parts)
            + "</section>")


def anchor(file_index: int, spread_index: int) -> str:
    """The HTML id of a spec'd field's section (0-based indices into the run)."""
    return f"spec-{file_index + 1}-{spread_index + 1}"


def _one(run: RunResult, file, spread) -> RunResult:
    """A run holding only ``file`` with only ``spread``, for one field's Markdown lines."""
    from dataclasses import replace
    return RunResult(files=(replace(file, spreads=(spread,)),))


def samples_csv(run: RunResult, drawn=None) -> str:
    """file, check, field, sample number, value, then each quantity's relative deviation;
    a file's rows from ``drawn`` (``pieces.Drawn``) where they were drawn already."""
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\n").writerow(
        ["file", "check", "field", "sample", "value", "deviations"])
    pieces = [drawn.get(f) if drawn is not None else None for f in run.files]
    return buffer.getvalue() + "".join(p.samples if p is not None else sample_rows(f)
                                       for f, p in zip(run.files, pieces))


def sample_rows(file) -> str:
    """One file's rows of ``samples_csv`` (no header)."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    for s in file.spreads:
        if s.samples is None:
            continue
        names = list(s.units)
        for n, value in enumerate(s.samples):
            dev = s.sample_deviations[n] if n < len(s.sample_deviations) else []
            writer.writerow([printable(file.file), printable(s.check), s.name, n,
                             repr(float(value)),
                             ";".join(f"{q}={d:+.6g}" for q, d in zip(names, dev))])
    return buffer.getvalue()


#: the charts' width and panel height, px
WIDTH, HEIGHT = 630, 250
#: bins of the Monte Carlo histogram
BINS = 60


def histogram(s) -> str | None:
    """SVG: the samples' histogram with the limits, extremes and RSS bounds marked."""
    from .plots import unit_symbol
    from .svg import Chart, Style
    from .svgdraw import render
    if s.samples is None or not np.isfinite(s.samples).any():
        return None
    chart = Chart(WIDTH, printable(f"{s.check} — {s.name}: {len(s.samples)} samples"))
    ax = chart.panel(HEIGHT, xunit=unit_symbol(s.unit), yunit=None, xlabel=f"{s.name} ({s.unit})",
                     ylabel="samples")
    counts, edges = np.histogram(s.samples[np.isfinite(s.samples)], bins=BINS)
    ax.bars(edges, counts, "#8fb3d9", "samples")
    marks = [("spec min", s.limits["min"], "#d62728"), ("spec max", s.limits["max"], "#d62728"),
             ("extreme min", s.low, "#000000"), ("extreme max", s.high, "#000000")]
    if s.rss:
        marks += [("RSS min", s.rss[0], "#2a9d3a"), ("RSS max", s.rss[1], "#2a9d3a")]
    for label, x, colour in marks:
        if x is not None:
            ax.vline(x, Style(colour, 1.8, "6,2.6" if "RSS" in label else ""), label)
    return render(chart, field=s.name)


def sensitivity_chart(s) -> str | None:
    """SVG: the normalised sensitivities ∂x/∂p·p/x as horizontal bars, largest on top (rise
    blue, fall orange); the metadata carries the quantities and values in that order."""
    from .svg import Chart, Style
    from .svgdraw import render
    ranked = [(q, x) for q, x in s.sensitivities if np.isfinite(x)]
    if not ranked:
        return None
    chart = Chart(WIDTH, printable(f"{s.check} — {s.name}"))
    names = [printable(q) for q, _ in ranked][::-1]
    values = [x for _, x in ranked][::-1]
    ax = chart.panel(max(90, 30 * len(values)), xunit=None, yunit=None, categories=names,
                     xlabel=f"normalised sensitivity of {s.name}")
    ax.hbars(values, ["#3b75af" if x >= 0 else "#ef8636" for x in values])
    ax.vline(0.0, Style("#000000", 1.0))
    return render(chart, field=s.name, quantities=[q for q, _ in ranked],
                  sensitivities=[x for _, x in ranked])
