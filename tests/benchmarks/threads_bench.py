"""BLAS threading on a shared 2-core machine: the same solve with OPENBLAS_NUM_THREADS=1 and
with the library default, each in a fresh interpreter (the setting is read at import)."""

from __future__ import annotations

import json
import os
import subprocess
import sys

_CHILD = """
import json, statistics, time
import numpy as np
from tests.benchmarks.circuits import rc_ladder
from harness.closedform import solve
out = {}
a = np.random.default_rng(0).random((200, 200))
for name, fn in (("svd 200", lambda: np.linalg.svd(a)),
                 ("solve ladder 200", lambda: solve(rc_ladder(200))),
                 ("solve ladder 20", lambda: solve(rc_ladder(20)))):
    fn()
    ts = []
    for _ in range(7):
        t = time.perf_counter(); fn(); ts.append(time.perf_counter() - t)
    out[name] = statistics.median(ts)
print(json.dumps(out))
"""


def compare() -> dict:
    """{setting: {case: median s}} for threads = 1 and the default (variable unset)."""
    res = {}
    for label, value in (("1 thread", "1"), ("default", None)):
        env = dict(os.environ)
        for key in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
            env.pop(key, None)
        if value:
            env["OPENBLAS_NUM_THREADS"] = value
        proc = subprocess.run([sys.executable, "-c", _CHILD], env=env, capture_output=True,
                              text=True, cwd=os.getcwd())
        res[label] = json.loads(proc.stdout.strip().splitlines()[-1]) if proc.returncode == 0 \
            else {"error": proc.stderr[-300:]}
    return res
