"""Timing helpers for the benchmarks: medians of repeated runs, growth exponents, machine info."""

from __future__ import annotations

import math
import os
import platform
import re
import statistics
import time
from typing import Callable

import numpy as np


def median_time(fn: Callable[[], object], repeats: int, warmup: int = 1,
                clock: Callable[[], float] = time.perf_counter) -> float:
    """Median time in s (wall, or ``clock``: ``time.process_time`` for this process's CPU) of
    ``repeats`` calls of ``fn`` after ``warmup`` unmeasured ones."""
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(repeats):
        start = clock()
        fn()
        times.append(clock() - start)
    return statistics.median(times)


def repeats_for(seconds_per_run: float, budget: float = 3.0, low: int = 3, high: int = 25) -> int:
    """How many repeats fit a time budget in s (at least ``low``, at most ``high``)."""
    if seconds_per_run <= 0:
        return high
    return int(min(high, max(low, budget / seconds_per_run)))


def growth_exponent(sizes, times) -> float:
    """Least-squares slope of log(time) against log(size) (time ~ size^p), over the points."""
    x, y = np.log(np.asarray(sizes, float)), np.log(np.asarray(times, float))
    return float(np.polyfit(x, y, 1)[0]) if len(sizes) >= 2 else math.nan


def cpu_model() -> str:
    """The CPU model name from /proc/cpuinfo and the number of logical CPUs."""
    names, count = [], 0
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as fh:
            for line in fh:
                if line.startswith("model name"):
                    names.append(line.split(":", 1)[1].strip())
                    count += 1
    except OSError:
        pass
    return f"{names[0] if names else platform.processor() or 'unknown'} x {count or '?'}"


def versions() -> str:
    """Python, numpy, scipy, sympy and matplotlib versions and the BLAS in use."""
    import scipy
    parts = [f"Python {platform.python_version()}", f"numpy {np.__version__}",
             f"scipy {scipy.__version__}"]
    for name in ("sympy", "matplotlib"):
        try:
            mod = __import__(name)
            parts.append(f"{name} {mod.__version__}")
        except ImportError:
            pass
    try:
        blas = np.show_config(mode="dicts")["Build Dependencies"]["blas"]
        parts.append(f"BLAS {blas.get('name')} {blas.get('version')}")
    except Exception:          # noqa: BLE001 - informational only
        pass
    return ", ".join(parts)


def load_average() -> str:
    try:
        with open("/proc/loadavg", encoding="utf-8") as fh:
            return " ".join(fh.read().split()[:3])
    except OSError:
        return "?"


def ms(seconds: float) -> str:
    """A time in ms with 3 significant digits."""
    return f"{1e3 * seconds:.3g}"


def write_section(results, heading: str, text: str) -> None:
    """Replace (or append) the section of the Markdown file ``results`` (a Path) headed by
    ``heading`` (up to the next "## " heading), keeping every other one; written atomically."""
    old = results.read_text(encoding="utf-8") if results.exists() else "# Benchmark results\n"
    pattern = re.compile(rf"^{re.escape(heading)}\n.*?(?=^## |\Z)", re.S | re.M)
    block = f"{heading}\n\n{text.strip()}\n\n"
    new = pattern.sub(lambda _m: block, old) if pattern.search(old) else \
        old.rstrip("\n") + "\n\n" + block
    tmp = results.with_suffix(".md.tmp")
    tmp.write_text(new, encoding="utf-8")
    os.replace(tmp, results)


def publish(results, heading: str, text: str, print_only: bool) -> int:
    """Print ``text`` and, unless ``print_only``, make it the ``heading`` section of
    ``results`` (``write_section``); 0, the benchmark's exit status."""
    print(text)
    if not print_only:
        write_section(results, heading, text)
    return 0
