"""What a report-file writer is given beside the run (``harness.report.WRITERS``).

A writer is a module of this package with ``FILE`` (the file name it writes in the report
folder) and ``write(run, context) -> str`` (the file's text; it is encoded as UTF-8).  It renders
the run's diagnostics through ``harness.messages`` like every other writer.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Mapping


@dataclass(frozen=True)
class ReportContext:
    """Everything of one report set that is not in the ``RunResult``.

    Attributes:
        plots: (file index, check index or ``plot_schedule.SCHEDULE``) -> SVG text, for
            writers that embed them.
        links: the same keys -> the plot's path relative to the report folder
            (``plots/001-x-c1.svg``), for writers that link them.
        provenance: ``provenance.collect`` (who ran what, on which files), or empty.
        histograms: (file index, spec'd field index) -> the field's histogram SVG, and
            (file index, spec'd field index, "sensitivity") -> its sensitivity bar chart.
        spec_links: the same keys with the file's path for its index -> the plot's path
            relative to the report folder (empty when no plots are drawn).
    """

    plots: Mapping[tuple[int, Any], str] = field(default_factory=dict)
    links: Mapping[tuple[int, Any], str] = field(default_factory=dict)
    provenance: Mapping[str, Any] = field(default_factory=dict)
    histograms: Mapping[tuple, str] = field(default_factory=dict)
    spec_links: Mapping[tuple, str] = field(default_factory=dict)
