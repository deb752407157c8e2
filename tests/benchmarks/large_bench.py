"""Large circuits: a whole ``check`` of RC ladders from ~100 to 5,000 parts, with both engines,
crossings, peaks, the dominant-τ estimate and every report, one fresh process per size.

    python -m tests.benchmarks.large_bench [--sizes 50 100 ...] [--print-only]

Each size runs ``tauproof check FILE --jobs 1`` (reports written, OPENBLAS_NUM_THREADS=1) in a
child process; its CPU time (user + system, from wait4: what one core spends, whatever else
the shared machine runs), wall time and peak resident memory are read from the kernel.  The
local growth exponent between neighbouring sizes shows any cliff; the 1,000-section ladder
(2,001 parts) is the target case (<= 10 s on one core).  Writes the "## Large circuits"
section of RESULTS.md.  The ladder is invented for timing; its hand values are rough.
"""

from __future__ import annotations

import argparse
import math
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from .timing import cpu_model, load_average, publish, versions

RESULTS = Path(__file__).with_name("RESULTS.md")
HEADING = "## Large circuits"
SIZES = (50, 100, 250, 500, 750, 1000, 1500, 2000, 2499)
TARGET_SECTIONS = 1000
#: the ladder whose check is measured stage by stage (4,999 parts)
STAGE_SECTIONS = 2499
TARGET_SECONDS = 10.0
#: what the measured curve shows (kept beside the table when it is rewritten)
NOTES = """

What the curve shows: below ~500 sections the ~2 s of a fresh process (imports, the reports and
three plots) dominates.  The bump at 750 sections is the numerical engine's own modes (a dense
QZ with left and right vectors of its ideal pencil, `simulate.modal`, up to `EIGEN_UP_TO` = 800
states; above it the numerical engine reports no modes of its own and no dominant τ).  From
1,000 sections on the growth is the closed form's dense symmetric eigendecomposition (all n
modes, O(n³) time); its memory is now Q1 (n x f, kept for the whole analysis) and, for moments,
eigh's S, C11 and workspace (O(n²): 50 MB per n x n matrix at 4,999 parts).  Memory at 4,999
parts was 821 MB before the memory work of 2026-12-04 (per stage: closed form 596 MB peak,
conditioning 510, comparison 836, 657 held at the end): two dense G~, C~ per pencil, V beside
Q1, an f x f diagonal A, two complex copies of Q1 for the features, (n, s) test injections in
the Thevenin routine and the reach test, a dense complex G~ + s0 C~, and the jump test's
temporaries.  Every size ends in exit 1: the rough hand values, and the closed form's dominant
τ at the far end counts only the capacitors its reach test sees (33 of 600 at 600 sections:
far capacitors' transfer at the test points falls below `reach.REACH`), which disagrees with
the numerical engine's Elmore-like sum (left to the engine-agreement work)."""


def ladder_file(sections: int) -> str:
    """TOML of an RC ladder (1 kOhm / 1 nF per section) stepped 0 -> 1 V at t = 0, probed at
    the far end and in the middle for final, dominant τ (the Elmore delay), a 50 % rising
    crossing and the peak."""
    lines = [f'title = "RC ladder, {sections} sections"', "[parts]",
             'V1 = { kind = "voltage-source", nodes = ["n0", "gnd"], value = "0 V", '
             'steps = [["0 s", "1 V"]] }']
    for i in range(sections):
        lines.append(f'R{i + 1} = {{ kind = "resistor", nodes = ["n{i}", "n{i + 1}"], '
                     f'value = "1k" }}')
        lines.append(f'C{i + 1} = {{ kind = "capacitor", nodes = ["n{i + 1}", "gnd"], '
                     f'value = "1n" }}')
    elmore = 1e-6 * sections * (sections + 1) / 2
    for node in (f"n{sections}", f"n{max(1, sections // 2)}"):
        lines += ["[[expect]]", f'node = "{node}"', 'at = "0 s"', 'final = "1 V"',
                  f'dominant-tau = "{elmore:.6g} s"',
                  f'crossing = {{ level = "0.5 V", time = "{0.7 * elmore:.4g} s", '
                  f'direction = "rising" }}', 'peak = "1 V"']
    return "\n".join(lines) + "\n"


def run_check(path: Path, report_dir: Path) -> dict:
    """CPU s, wall s, peak RSS MB and exit code of one ``check`` in a child process."""
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", MPLBACKEND="Agg")
    start = time.perf_counter()
    child = subprocess.Popen([sys.executable, "-m", "harness.cli", "check", str(path),
                              "--jobs", "1", "--report-dir", str(report_dir)],
                             stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)
    _, status, usage = os.wait4(child.pid, 0)
    child.returncode = os.waitstatus_to_exitcode(status)
    return {"cpu": usage.ru_utime + usage.ru_stime, "wall": time.perf_counter() - start,
            "rss": usage.ru_maxrss / 1024, "code": child.returncode}


def measure(sizes) -> list[dict]:
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in sizes:
            path = Path(tmp) / f"ladder{n}.toml"
            path.write_text(ladder_file(n), encoding="utf-8")
            row = {"sections": n, "parts": 2 * n + 1, **run_check(path, Path(tmp) / f"r{n}")}
            print(f"[large] {n} sections: {row['cpu']:.2f} s CPU, {row['wall']:.1f} s wall, "
                  f"{row['rss']:.0f} MB, exit {row['code']}", flush=True)
            rows.append(row)
    return rows


#: the stages of one check whose peak memory is measured (``stage_memory``)
STAGES = ("read", "closed form solve", "conditioning", "numerical engine", "cautions",
          "comparison (features, sign-off, Thevenin, reach)")


def _resident() -> tuple[float, float]:
    """(peak since the last reset, current) resident memory of this process, MB."""
    status = {line.split(":")[0]: int(line.split()[1]) for line in open("/proc/self/status")
              if line.startswith(("VmHWM", "VmRSS"))}
    return status["VmHWM"] / 1024, status["VmRSS"] / 1024


def _stages_child(sections: int) -> None:
    """Run one check's stages in this process (``runner._analyse``'s order) and print, per
    stage, the peak resident memory during it (the kernel's high-water mark, reset through
    /proc/self/clear_refs before each stage) and the memory held after it, as JSON."""
    import json
    from harness import closedform, runner, simulate
    from harness.circuitfile import read_circuit
    from harness.compare import compare_file
    from harness.compare.trust import guard
    from harness.report.cautions import cautions_for
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "ladder.toml"
        path.write_text(ladder_file(sections), encoding="utf-8")
        out, state = [], {}

        def stage(fn):
            with open("/proc/self/clear_refs", "w") as f:
                f.write("5")
            fn()
            out.append(_resident())

        stage(lambda: state.update(circuit=read_circuit(str(path))))
        circuit = state["circuit"]
        stage(lambda: state.update(exact=closedform.solve(circuit)))
        stage(lambda: state.update(trust=state["exact"].conditioning()))
        exact = guard(state["exact"], state["trust"])
        stage(lambda: state.update(sim=guard(simulate.solve(circuit), state["trust"])))
        stage(lambda: state.update(cautions=cautions_for(
            circuit, voltages=runner._node_voltages(circuit, exact),
            jumps=[exact.jump(k) for k in range(len(circuit.events))])))
        stage(lambda: compare_file(circuit, exact, state["sim"], cautions=state["cautions"],
                                   seconds=0.0))
    print(json.dumps(out))


def stage_memory(sections: int) -> list[tuple[float, float]]:
    """Per stage of one check of the ``sections``-section ladder, in a fresh process: (peak
    MB during the stage, MB held after it)."""
    import json
    env = dict(os.environ, OPENBLAS_NUM_THREADS="1", MPLBACKEND="Agg")
    done = subprocess.run([sys.executable, "-m", "tests.benchmarks.large_bench",
                           "--stages-child", str(sections)], capture_output=True, text=True,
                          env=env, check=True)
    return [tuple(x) for x in json.loads(done.stdout.strip().splitlines()[-1])]


def _stage_table(sections: int, stages: list[tuple[float, float]]) -> str:
    body = [f"Memory by stage of one check of the {sections}-section ladder "
            f"({2 * sections + 1} parts; `large_bench --stages`, one fresh process, the "
            f"analysis without the reports):", "",
            "| stage | peak resident MB during it | resident MB after it |", "|---|---|---|"]
    body += [f"| {name} | {peak:.0f} | {held:.0f} |" for name, (peak, held) in
             zip(STAGES, stages)]
    return "\n".join(body)


def compose(rows: list[dict], load: tuple[str, str]) -> str:
    body = ["| sections | parts | check CPU s | wall s | peak memory MB | exit | "
            "local exponent (CPU vs parts) |", "|---|---|---|---|---|---|---|"]
    prev = None
    for r in rows:
        exp = "—" if prev is None else \
            f"{math.log(r['cpu'] / prev['cpu']) / math.log(r['parts'] / prev['parts']):.2f}"
        body.append(f"| {r['sections']} | {r['parts']} | {r['cpu']:.2f} | {r['wall']:.1f} | "
                    f"{r['rss']:.0f} | {r['code']} | {exp} |")
        prev = r
    target = [r for r in rows if r["sections"] == TARGET_SECTIONS]
    verdict = ""
    if target:
        t = target[0]
        met = t["cpu"] <= TARGET_SECONDS
        verdict = (f"Target: the {TARGET_SECTIONS}-section ladder ({t['parts']} parts) in <= "
                   f"{TARGET_SECONDS:g} s on one core: **{'met' if met else 'not met'}** "
                   f"({t['cpu']:.2f} s CPU, {t['rss']:.0f} MB).\n\n")
    return (f"Machine: {cpu_model()}; {versions()}.  Load average (/proc/loadavg) at start / "
            f"end: {load[0]} / {load[1]} (2 shared cores: wall times scatter with the load, CPU "
            f"times much less).\n\n`python -m tests.benchmarks.large_bench`: one `tauproof "
            f"check FILE --jobs 1` per size in a fresh process (reports and plots written, "
            f"OPENBLAS_NUM_THREADS=1), an RC ladder probed at the far end and the middle for "
            f"final, dominant τ, a 50 % crossing and the peak (exit 1: the rough hand values "
            f"and the dominant-τ disagreement noted below).\n\n" + verdict + "\n".join(body)
            + NOTES)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--sizes", nargs="*", type=int, default=list(SIZES))
    parser.add_argument("--print-only", action="store_true")
    parser.add_argument("--stages", type=int, default=STAGE_SECTIONS,
                        help="ladder sections of the per-stage memory table (0: none)")
    parser.add_argument("--stages-child", type=int, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.stages_child:
        _stages_child(args.stages_child)
        return 0
    load0 = load_average()
    rows = measure(args.sizes)
    text = compose(rows, (load0, load_average()))
    if args.stages:
        text += "\n\n" + _stage_table(args.stages, stage_memory(args.stages))
    return publish(RESULTS, HEADING, text, args.print_only)


if __name__ == "__main__":
    raise SystemExit(main())
