"""The one JSON writer: results.json and ``--json`` on stdout are the same bytes of
``RunResult.to_json()`` (DESIGN.md contract), every engine diagnostic written as its sentence
(``harness.messages``).

Strict JSON: non-finite floats (NaN, ±inf) become ``null`` and numpy scalars plain numbers, so
every JSON parser reads it (``allow_nan=False`` makes a value that slipped through an error, not
an ``Infinity``).  Non-ASCII characters are escaped (``\\u00b5``), so the text is the same
whatever the console's encoding.
"""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

from ..messages import text
from ..outcome import RunResult
from ..results import Diagnostic
from .context import ReportContext


def document(run: RunResult) -> dict[str, Any]:
    """``run.to_json()`` with every value made strict-JSON safe."""
    return _clean(run.to_json())


#: the file this writer writes in the report folder (``harness.report.WRITERS``)
FILE = "results.json"


def write(run: RunResult, context: ReportContext) -> str:
    """The report file's text: the same bytes ``--json`` prints."""
    return render(run)


def render(run: RunResult) -> str:
    """The JSON text, indented, ASCII (other characters escaped), with a final newline."""
    return json.dumps(document(run), indent=2, allow_nan=False) + "\n"


def _clean(obj: Any) -> Any:
    if isinstance(obj, Diagnostic):            # a diagnostic is written as its sentence
        return text(obj)
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [_clean(v) for v in obj.tolist()]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        value = float(obj)
        return value if math.isfinite(value) else None
    return obj
