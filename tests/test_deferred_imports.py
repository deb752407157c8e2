"""Imports that only some paths need are deferred: importing the command line, the runner, the
comparator and the exact engine pulls in none of them, and neither does a whole
``solve FILE --closed-form-only`` of a small circuit (a fresh interpreter each, so earlier
tests do not count; the numerical engine needs scipy.integrate, which brings scipy.optimize).
Each costs start-up on every `tauproof solve` otherwise (measured on this machine: scipy.optimize
~0.1 s with the scipy.special, scipy.fft and scipy.spatial it loads, pandas ~0.25 s,
matplotlib ~0.3 s, the report writers a solve does not print ~5 ms, scipy.sparse with csgraph
~13 ms, tabulate ~4 ms as it reads its package metadata, xml.etree ~2.5 ms, multiprocessing
~2 ms, the spread patterns ~0.7 ms, report.style ~0.45 ms, the exact engine's Thevenin and
reach modules ~0.25 ms; tests/benchmarks/RESULTS.md,
"Start-up and small circuits").  numpy itself loads only for a command that analyses files
(``check``, ``solve``), whose engines the console command imports first with the garbage
collector paused."""

from __future__ import annotations

import subprocess
import sys
import tomllib
from contextlib import nullcontext as _nothing
from pathlib import Path

import pytest

#: never loaded by importing the core
DEFERRED = ("pandas", "matplotlib", "scipy.optimize", "sympy", "dask", "distributed", "tqdm")
#: never loaded by a closed-form solve of a small circuit (what each is for)
NOT_FOR_A_SMALL_SOLVE = {
    "scipy.optimize": "the numerical engine, periodic checks, worst-case extremes",
    "scipy.integrate": "the numerical engine",
    "scipy.sparse": "circuits of GRAPH_MIN_PARTS parts or more, the numerical engine",
    "scipy.sparse.csgraph": "node groups of large circuits",
    "scipy.special": "scipy.optimize and the statistics of spreads",
    "scipy.fft": "scipy.optimize",
    "harness.simulate": "the numerical engine",
    "harness.variation.analyse": "spec'd fields (spreads)",
    "harness.derive": "derive and --formulas",
    "harness.closedform.periodic": "files with a repeating window",
    "harness.closedform.thevenin": "dominant-tau estimates (zero-value time constants)",
    "harness.closedform.reach": "dominant-tau estimates (the parts that reach the probe)",
    "pandas": "reading summary.csv back (csvout.read)",
    "matplotlib": "plots",
    "tabulate": "the check console table (solve's tables are laid out by report.console)",
    "xml.etree.ElementTree": "junit.xml",
    "multiprocessing": "--jobs N worker processes",
    "sympy": "derive",
    "tqdm": "the progress bar on a terminal",
    "harness.report.writeall": "writing the report set",
    "harness.report.html": "report.html",
    "harness.report.markdown": "report.md",
    "harness.report.junit": "junit.xml",
    "harness.report.plots": "plots",
    "harness.report.svg": "plots",
    "harness.report.style": "check's console text (colour, terminal width)",
}
SMALL = str(Path(__file__).resolve().parents[1] / "circuits/library/logger/button-debounce.toml")


def _loaded(code: str, names) -> list[str]:
    listing = f"\nimport sys; print(' '.join(m for m in {tuple(names)!r} if m in sys.modules))"
    done = subprocess.run([sys.executable, "-c", code + listing], capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    return done.stdout.split()


def test_the_core_imports_none_of_the_optional_libraries():
    code = "import harness.cli, harness.runner, harness.compare, harness.closedform, harness.report"
    assert _loaded(code, DEFERRED) == [], "imported at start-up"


def test_a_small_closed_form_solve_loads_none_of_the_deferred_modules():
    """The whole command, crossings included (the exact engine's Brent root finder is its own,
    ``harness.closedform.brent``, not scipy.optimize's)."""
    code = ("import io, contextlib, harness.cli\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            f"    code = harness.cli.main(['solve', {SMALL!r}, '--closed-form-only'])\n"
            "assert code == 0, code\n")
    loaded = _loaded(code, NOT_FOR_A_SMALL_SOLVE)
    assert loaded == [], {m: NOT_FOR_A_SMALL_SOLVE[m] for m in loaded}


def test_the_small_solve_has_a_crossing_to_refine():
    """The file above exercises the root finder (else the test above proves less)."""
    text = open(SMALL, encoding="utf-8").read()
    assert "crossing" in text


def test_the_command_line_loads_numpy_only_for_a_command_that_analyses_files():
    """``import harness.cli`` (the console script's first line) loads no numpy, nor do
    ``help`` and ``--version`` through the console command; ``solve`` does, and leaves the
    garbage collector on after its imports (``_command``: the console command without its
    quick exit, so this process can look afterwards)."""
    assert _loaded("import harness.cli", ("numpy", "scipy")) == []
    for words in (["help"], ["--version"], ["new", "--help"]):
        code = ("import io, contextlib, harness.cli\n"
                f"sys.argv = ['tauproof', *{words!r}]\n"
                "with contextlib.redirect_stdout(io.StringIO()):\n"
                "    try:\n"
                "        harness.cli.command()\n"
                "    except SystemExit:\n"
                "        pass\n")
        assert _loaded("import sys\n" + code, ("numpy",)) == [], words
    code = ("import gc, io, contextlib, sys, harness.cli\n"
            f"sys.argv = ['tauproof', 'solve', {SMALL!r}, '--closed-form-only']\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            "    assert harness.cli._command(True) == 0\n"
            "assert gc.isenabled()\n")
    assert _loaded(code, ("numpy", "scipy.linalg", "harness.closedform")) == [
        "numpy", "scipy.linalg", "harness.closedform"]


def test_the_console_command_prints_and_exits_as_main_does(capsys):
    """``python -m harness`` and ``python -m harness.cli`` (through ``cli.command``, which
    only changes when the garbage collector runs) give ``main``'s output and exit code: a
    pass (0), a usage error (2); and the installed script is that command."""
    import harness.cli
    for words, expected in ((["solve", SMALL, "--closed-form-only"], 0),
                            (["solve", "--jobs", "0", SMALL], 2)):
        with pytest.raises(SystemExit) if expected == 2 else _nothing():
            assert harness.cli.main(words) == expected
        inside = capsys.readouterr()
        for module in ("harness", "harness.cli"):
            done = subprocess.run([sys.executable, "-m", module, *words], capture_output=True,
                                  text=True, timeout=120)
            assert (done.returncode, done.stdout, done.stderr) == (
                expected, inside.out, inside.err), module
    project = tomllib.loads((Path(__file__).resolve().parents[1] / "pyproject.toml")
                            .read_text(encoding="utf-8"))
    assert project["project"]["scripts"]["tauproof"] == "harness.cli:command"


def test_a_small_solve_compiles_no_spread_pattern():
    """The spread, tempco and temperature patterns (``variation.declare``) are compiled by
    re's cache on first use, so a file without spreads does not pay for them (~0.7 ms)."""
    code = ("import io, contextlib, re, harness.cli\n"
            "from harness.variation import declare\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            f"    assert harness.cli.main(['solve', {SMALL!r}, '--closed-form-only']) == 0\n"
            "patterns = {getattr(p, 'pattern', p) for p in (declare._TEMPCO, declare._CELSIUS,"
            " declare._PAIR)}\n"
            "cached = {key[1] for cache in (getattr(re, '_cache', {}), getattr(re, '_cache2', {}))"
            " for key in cache}\n"
            "print(' '.join(sorted(str(len(p)) for p in patterns & cached)))\n")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0, done.stderr
    assert done.stdout.split() == [], "compiled during a solve without spreads"
