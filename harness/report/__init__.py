"""The report writers: console text, summary.csv, results.json, report.md, report.html, junit.xml.

Each report file is written by one module of this package, listed in ``WRITERS``: the module
has ``FILE`` (its file name) and ``write(run, context) -> str`` (``context.ReportContext``: the
plots, their links, the provenance).  Adding a report format is that module and its line in
``WRITERS`` (DEVELOPERS.md, "How to add a report format").  The console text (``console``) is
printed by the command line, not written as a file.

``write_all(run, report_dir)`` writes every report file for one run plus one SVG plot per check
with a trace and one whole-schedule SVG per file under ``report_dir/plots/`` (named ``<file
number>-<sanitised title>-c<check>.svg`` and ``…-schedule.svg``; untrusted titles cannot leave
the folder), as one set (``publish``: staged in a hidden folder, then swapped in; a failure
leaves the previous set whole, and links are never followed).  The HTML holds the same plots
inline; the Markdown links the SVG files.  ``with_plots=False`` (the command line's
``--no-plots``) writes every report without them.  Failures to write raise ``ReportError`` (an
``OSError``).

The writing itself lives in ``writeall``; this module forwards its names on first use (PEP 562
module ``__getattr__``), so that importing one writer (``harness.report.console``, ``jsonout``)
does not load the others.
"""

from __future__ import annotations

__all__ = ["PLOT_DIR", "PLOT_SUFFIX", "REPORT_FILES", "WRITERS", "ReportError", "plot_name",
           "render_plots", "write_all"]


def __getattr__(name: str):
    """The names of ``writeall``, imported when first asked for."""
    if name in __all__:
        from . import writeall
        return getattr(writeall, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
