"""The engines agree on random well-posed circuits: every engines-disagree, classified.

Runs ``agree_circuits.circuit_text(seed)`` for seeds ``start .. start+count-1`` through the same
path as ``tauproof check`` (``runner.check_file``: reader, closed form, numerical engine, trust
guard, comparator; without the worked derivations of the mismatches its placeholder hand
values make, which change no verdict and took ~80 % of the time), each in a worker process bounded by ``--seconds`` (SIGALRM), and counts every
field or check whose verdict is ``engines-disagree``, grouped by field and kind of message; limits
the engines report (withheld values, work budgets) are counted apart.  Figures go into
``tests/benchmarks/RESULTS.md`` (section "engine agreement") unless ``--print-only``.

    python -m tests.benchmarks.agree --count 1000 [--start 0] [--jobs 2] [--print-only]
"""

from __future__ import annotations

import argparse
import collections
import multiprocessing
import os
import re
import signal
import tempfile
import time
from pathlib import Path

from tests.benchmarks.agree_circuits import circuit_text

RESULTS = Path(__file__).with_name("RESULTS.md")
SECTION = "## Engine agreement on random well-posed circuits"


class _Timeout(Exception):
    pass


def _alarm(signum, frame):
    raise _Timeout()


def disagreements(result) -> list[tuple[str, str]]:
    """(group, detail) of every engines-disagree in a FileResult."""
    out = []
    for check in result.checks:
        for f in check.fields:
            if f.verdict == "engines-disagree":
                kind = ("missing-numeric" if f.numeric is None and f.closed_form is not None
                        else "missing-closed" if f.closed_form is None and f.numeric is not None
                        else "value")
                out.append((f"{f.name}:{kind}", f"{check.probe} @ {check.at:.3g}: {f.message}"))
        for m in check.messages:
            if isinstance(m, str) and m.startswith(("order:", "waveform:")):
                out.append((m.split(":")[0], f"{check.probe} @ {check.at:.3g}: {m}"))
    return out


def _check_texts(result) -> list[str]:
    """Every text message of every check, its fields' included (diagnostics left out)."""
    return [m for check in result.checks for m in check.messages if isinstance(m, str)]


def run_one(seed: int, seconds: float = 60.0) -> dict:
    """Analyse circuit ``seed``; its disagreements, errors, limits and time."""
    from harness.messages import text as sentence
    from harness.runner import check_file
    signal.signal(signal.SIGALRM, _alarm)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    started = time.perf_counter()
    try:
        text = circuit_text(seed)
        with tempfile.TemporaryDirectory() as tmp:
            path = os.path.join(tmp, f"random-{seed}.toml")
            Path(path).write_text(text, encoding="utf-8")
            result = check_file(path, derivations=False)  # placeholder hand values
        found = disagreements(result)
        errors = list(result.errors)
        said = [w if isinstance(w, str) else sentence(w) for w in result.warnings]
        limits = [w for w in said if "budget" in w or "beyond" in w]
        limits += [m for m in _check_texts(result) if "a limit of the numerical engine" in m]
    except _Timeout:
        found, errors, limits = [], [f"over {seconds:g} s"], []
    except Exception as err:  # the generator itself (reader refusal) is reported, not hidden
        found, errors, limits = [], [f"{type(err).__name__}: {err}"], []
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
    return {"seed": seed, "disagree": found, "errors": errors, "limits": limits,
            "seconds": time.perf_counter() - started}


def _task(args):
    return run_one(*args)


def run(start: int, count: int, jobs: int, seconds: float) -> list[dict]:
    """Every seed's row, in seed order; workers fork from this process after the engines are
    imported, so a run uses one version of the code throughout."""
    import harness.runner, harness.closedform, harness.simulate  # noqa: F401,E401
    tasks = [(s, seconds) for s in range(start, start + count)]
    if jobs <= 1:
        return [_task(t) for t in tasks]
    with multiprocessing.get_context("fork").Pool(jobs, maxtasksperchild=50) as pool:
        return sorted(pool.imap_unordered(_task, tasks, chunksize=4), key=lambda r: r["seed"])


def summary(rows: list[dict], start: int, wall: float) -> str:
    """The RESULTS.md section: circuits, disagreements by group, errors, limits, timings."""
    groups = collections.Counter(g for r in rows for g, _ in r["disagree"])
    bad = [r for r in rows if r["disagree"]]
    errs = [r for r in rows if r["errors"]]
    limited = [r for r in rows if r["limits"]]
    times = sorted(r["seconds"] for r in rows)
    lines = [SECTION, "",
             f"`python -m tests.benchmarks.agree --start {start} --count {len(rows)}` "
             f"(seeds {start}..{start + len(rows) - 1}; {wall:.0f} s wall): "
             f"**{len(bad)} circuits with engines-disagree** "
             f"({sum(groups.values())} fields or checks), {len(errs)} with an error, "
             f"{len(limited)} with a reported limit; per circuit median "
             f"{times[len(times) // 2]:.2f} s, max {times[-1]:.1f} s.", ""]
    if groups:
        lines += ["| group | count |", "|---|---|"]
        lines += [f"| {g} | {n} |" for g, n in groups.most_common()]
        lines.append("")
    for r in (bad + errs)[:12]:
        detail = r["disagree"][0][1] if r["disagree"] else r["errors"][0]
        detail = re.sub(r"\s+", " ", detail)[:300]
        lines.append(f"- seed {r['seed']}: {detail}")
    return "\n".join(lines) + "\n"


def write_results(text: str) -> None:
    old = RESULTS.read_text(encoding="utf-8")
    if SECTION in old:
        head, _, rest = old.partition(SECTION)
        tail = rest[rest.find("\n## "):] if "\n## " in rest else ""
        new = head + text + tail
    else:
        new = old.rstrip("\n") + "\n\n" + text
    RESULTS.write_text(new, encoding="utf-8")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--start", type=int, default=0)
    parser.add_argument("--count", type=int, default=1000)
    parser.add_argument("--jobs", type=int, default=2)
    parser.add_argument("--seconds", type=float, default=60.0)
    parser.add_argument("--print-only", action="store_true")
    parser.add_argument("--details", action="store_true", help="print every disagreement")
    args = parser.parse_args()
    started = time.perf_counter()
    rows = run(args.start, args.count, args.jobs, args.seconds)
    text = summary(rows, args.start, time.perf_counter() - started)
    if args.details:
        for r in rows:
            for group, detail in r["disagree"]:
                print(f"seed {r['seed']} [{group}] {detail}")
            for e in r["errors"]:
                print(f"seed {r['seed']} [error] {e}")
    print(text)
    if not args.print_only:
        write_results(text)


if __name__ == "__main__":
    main()
