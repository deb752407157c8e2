"""Imports that only some paths need are deferred: importing the command line, the runner, the
comparator and the exact engine pulls in none of them (a fresh interpreter, so earlier tests do
not count; the numerical engine needs scipy.integrate, which brings scipy.optimize).  Each costs start-up on every `tauproof solve` otherwise (measured: scipy.optimize
~0.09 s, pandas ~0.25 s, matplotlib ~0.3 s on this machine)."""

from __future__ import annotations

import subprocess
import sys

DEFERRED = ("pandas", "matplotlib", "scipy.optimize", "sympy", "dask", "distributed", "tqdm")


def test_the_core_imports_none_of_the_optional_libraries():
    code = ("import sys, harness.cli, harness.runner, harness.compare, harness.closedform, "
            "harness.report; print(' '.join(m for m in %r if m in sys.modules))" % (DEFERRED,))
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "", f"imported at start-up: {done.stdout.strip()}"
