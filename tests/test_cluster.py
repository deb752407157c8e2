"""Files analysed on a Dask cluster (``--cluster``): a local cluster of worker processes gives the
same results as a local run (a heavy Monte Carlo spread over the workers in pieces too), a dying
worker loses only its file, a file over ``--timeout`` is stopped, an unreachable scheduler is
exit 2 within a bounded wait, and the single-machine command never imports Dask."""

from __future__ import annotations

import json
import math
import shutil
import subprocess
import sys
import time
import types
from pathlib import Path

import pytest

pytest.importorskip("distributed")

from harness import cluster, clusterparts  # noqa: E402
from harness.circuitfile import read_circuit  # noqa: E402
from harness.cli import main  # noqa: E402
from harness.report.jsonout import document  # noqa: E402
from harness.runner import RunOptions  # noqa: E402
from harness.variation import shard  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
LIBRARY = ROOT / "circuits" / "library"


def _json(capsys, argv: list[str]) -> tuple[int, dict]:
    code = main(argv)
    return code, json.loads(capsys.readouterr().out)


def _without_timings(value):
    """The document with every ``seconds`` entry removed (timings differ between runs)."""
    if isinstance(value, dict):
        return {k: _without_timings(v) for k, v in value.items() if k != "seconds"}
    if isinstance(value, list):
        return [_without_timings(v) for v in value]
    return value


def test_the_library_on_a_local_cluster_gives_the_results_of_one_job(capsys):
    """``--json`` is the bytes of results.json; the closed form alone keeps the test short (the
    transport, not the engines, is under test)."""
    common = ["check", str(LIBRARY), "--closed-form-only", "--no-report", "--json"]
    code_one, one = _json(capsys, common + ["--jobs", "1"])
    code_two, two = _json(capsys, common + ["--cluster", "local:2"])
    assert code_one == code_two == 0
    assert len(two["files"]) == len(list(LIBRARY.rglob("*.toml")))
    assert _without_timings(two) == _without_timings(one)


#: the library's reset-delay tolerance file with 600,000 samples: its Monte Carlo is three
#: pieces (samples [0, 262144), [262144, 524288), [524288, 600000))
HEAVY_SAMPLES = 600_000


def _heavy(folder: Path) -> Path:
    text = (LIBRARY / "tolerance" / "reset-delay-spread.toml").read_text(encoding="utf-8")
    path = folder / "reset-heavy.toml"
    path.write_text(text.replace("samples = 10000", f"samples = {HEAVY_SAMPLES}"),
                    encoding="utf-8")
    assert [len(r) for r in shard.plan(read_circuit(str(path))).values()] == [3]
    shutil.copy(LIBRARY / "tolerance" / "precharge-spread.toml", folder)  # one not split
    return path


def test_a_heavy_monte_carlo_in_pieces_gives_the_results_of_one_job(tmp_path, capsys):
    """The pieces' samples come from the chunked stream, so results.json is the same bytes."""
    _heavy(tmp_path)
    common = ["check", str(tmp_path), "--no-report", "--json"]
    code_one, one = _json(capsys, common + ["--jobs", "1"])
    code_two, two = _json(capsys, common + ["--cluster", "local:2"])
    assert code_one == code_two == 0
    assert one["files"][1]["spec"][0]["monte_carlo"]["count"] == HEAVY_SAMPLES
    assert _without_timings(two) == _without_timings(one)


def test_a_worker_dying_on_a_piece_costs_the_file_nothing(tmp_path, monkeypatch, capsys):
    """A piece that kills its worker every time: past the scheduler's bound the file is run
    again whole, alone, and its result is that of a local run."""
    _heavy(tmp_path)
    code, one = _json(capsys, ["check", str(tmp_path), "--no-report", "--json", "--jobs", "1"])
    marks = tmp_path / "marks"
    marks.mkdir()

    def dying_piece(path, tolerance, index, start, stop):  # shipped by value
        import os
        from pathlib import Path as P
        from harness.circuitfile import read_circuit as read
        from harness.variation import shard as pieces
        (P(marks) / f"{start}-{os.getpid()}").touch()
        if start == 262144:
            os._exit(3)
        return pieces.summary(read(path, tolerance), index, start, stop)

    monkeypatch.setattr(clusterparts, "piece", dying_piece)
    result = cluster.run([str(tmp_path)], RunOptions(), "local:2")
    tried = sorted(p.name.split("-")[0] for p in marks.iterdir())
    assert tried.count("262144") == cluster.LOCAL_ALLOWED_FAILURES + 1, tried
    assert "0" in tried     # the first piece starts beside it (the last may be dropped
    #                          once the file's own task has failed: the file runs again whole)
    assert _without_timings(document(result)) == _without_timings(one)


#: values of 16 MB: over Dask's ``distributed.comm.offload`` threshold (10 MiB), so Dask
#: (de)serialises them on its offload thread
LARGE = 2_000_000


def _large(count: int):
    import numpy as np
    return np.ones(count)


def _total(values) -> float:
    return float(values.sum())


def test_workers_forked_after_a_large_result_still_move_large_values():
    """Local workers are forked from the client: one forked after the client had received a
    large value (its offload thread running) must not inherit a pool without its thread."""
    with cluster._connect("local:2", True) as started:
        client = started()
        assert len(client.nthreads()) == 2      # the start returns once both have joined
        assert client.submit(_large, LARGE, pure=False).result().size == LARGE
        client.restart_workers(list(client.nthreads()))
        first, second = sorted(client.nthreads())
        made = client.submit(_large, LARGE, workers=[first], pure=False)
        total = client.submit(_total, made, workers=[second], pure=False)
        assert total.result(timeout=60) == LARGE


def _few_files(tmp_path: Path, odd: str) -> list[str]:
    """Three library files and a copy of the first named ``odd``, in collection order."""
    chosen = sorted(LIBRARY.rglob("*.toml"))[:3]
    for i, path in enumerate(chosen):
        shutil.copy(path, tmp_path / f"f{i}.toml")
    shutil.copy(chosen[0], tmp_path / f"{odd}.toml")
    return sorted(str(p) for p in tmp_path.glob("*.toml"))


def test_a_worker_that_dies_loses_only_its_file(tmp_path):
    files = _few_files(tmp_path, "boom")

    def dying(path, numeric, tolerance):  # shipped by value: the workers run this
        import os
        from harness.runner import check_file
        if "boom" in path:
            os._exit(3)
        return check_file(path, numeric)

    result = cluster.run([str(tmp_path)], RunOptions(numeric=False), "local:2", work=dying)
    by_file = {f.file: f for f in result.files}
    assert list(by_file) == files
    boom = by_file[str(tmp_path / "boom.toml")]
    assert boom.verdict == "error" and "worker process analysing this file died" in boom.errors[0]
    assert all(f.verdict == "pass" for name, f in by_file.items() if "boom" not in name)


def _plain(path, numeric, tolerance):  # shipped by value: the workers run this
    from harness.runner import check_file
    return check_file(path, numeric)


def test_a_file_over_the_timeout_is_stopped_and_the_others_finish(tmp_path):
    """The limit is relative to a reference run of the three quick files on a fresh local
    cluster measured just before (its whole wall time, cluster start and stop included, three
    times over, at least 15 s): a file's first run on a fresh worker imports the engines, which took
    over 3 s at a load average of 11 on 2 cores, so a fixed limit failed the quick files
    under load, and 8 s (twice over) once failed a quick file when the load rose after the
    reference.  The stuck file still has to be stopped at the limit, far below its 600 s."""
    reference = tmp_path / "reference"
    reference.mkdir()
    _few_files(reference, "slow")
    (reference / "slow.toml").unlink()
    started = time.monotonic()
    quick = cluster.run([str(reference)], RunOptions(numeric=False), "local:2", work=_plain)
    limit = float(max(15, math.ceil(3.0 * (time.monotonic() - started))))
    assert [f.verdict for f in quick.files] == ["pass"] * 3
    folder = tmp_path / "run"
    folder.mkdir()
    _few_files(folder, "slow")

    def sleepy(path, numeric, tolerance):
        import time as clock
        from harness.runner import check_file
        if "slow" in path:
            clock.sleep(600)
        return check_file(path, numeric)

    started = time.monotonic()
    result = cluster.run([str(folder)], RunOptions(numeric=False, timeout=limit), "local:2",
                         work=sleepy)
    assert time.monotonic() - started < limit + 52
    verdicts = {Path(f.file).name: f.verdict for f in result.files}
    assert verdicts == {"f0.toml": "pass", "f1.toml": "pass", "f2.toml": "pass",
                        "slow.toml": "error"}, [(f.file, f.errors) for f in result.files]
    slow = [f for f in result.files if "slow" in f.file][0]
    assert f"timed out after {limit:g} s" in slow.errors[0]


def test_an_unreachable_scheduler_is_exit_two_naming_it(capsys):
    started = time.monotonic()
    code = main(["check", str(LIBRARY), "--no-report", "--cluster", "tcp://127.0.0.1:1"])
    took = time.monotonic() - started
    err = capsys.readouterr().err
    assert code == 2 and "tcp://127.0.0.1:1" in err, err
    assert took < cluster.CONNECT_TIMEOUT + 10


@pytest.mark.parametrize("address", ["local:0", "local:x", "nowhere"])
def test_an_unusable_address_is_a_usage_error(address, capsys):
    assert main(["check", str(LIBRARY), "--no-report", "--cluster", address]) == 2
    assert repr(address) in capsys.readouterr().err


def test_the_project_setting_is_used(tmp_path, monkeypatch, capsys):
    (tmp_path / "pyproject.toml").write_text('[tool.tauproof]\ncluster = "tcp://127.0.0.1:1"\n',
                                             encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    assert main(["check", str(LIBRARY), "--no-report"]) == 2
    assert "tcp://127.0.0.1:1" in capsys.readouterr().err


def test_the_command_line_does_not_import_dask():
    probe = subprocess.run([sys.executable, "-c", "import sys, harness.cli, harness.runner; "
                            "print(sorted(m for m in sys.modules "
                            "if m.split('.')[0] in ('dask', 'distributed')))"],
                           capture_output=True, text=True)
    assert probe.stdout.strip() == "[]", probe.stdout + probe.stderr


_INTERRUPTED = """
import sys, time
from pathlib import Path
import harness.cluster as cluster
mark, original = sys.argv[1], cluster.run

def slow(path, numeric, tolerance):  # shipped by value: the workers run this
    import time as clock
    from pathlib import Path as P
    from harness.runner import check_file
    if "slow" in path:
        P(mark).write_text("started")
        clock.sleep(120)
    return check_file(path, numeric)

cluster.run = lambda paths, options, address: original(paths, options, address, work=slow)
from harness.cli import main
sys.exit(main(sys.argv[2:]))
"""


def test_ctrl_c_cancels_the_run_and_keeps_the_previous_reports(tmp_path):
    """SIGINT while a file runs on the cluster: exit 130, one line, previous reports intact."""
    import signal
    folder = tmp_path / "files"
    folder.mkdir()
    _few_files(folder, "slow")
    reports = tmp_path / "reports"
    reports.mkdir()
    (reports / "results.json").write_text("previous")
    mark = tmp_path / "started"
    proc = subprocess.Popen([sys.executable, "-c", _INTERRUPTED, str(mark), "check", str(folder),
                             "--cluster", "local:2", "--closed-form-only",
                             "--report-dir", str(reports)],
                            cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 60
    while not mark.exists() and time.monotonic() < deadline and proc.poll() is None:
        time.sleep(0.05)
    assert mark.exists(), proc.communicate()
    proc.send_signal(signal.SIGINT)
    out, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert "Traceback" not in err and "stopped by SIGINT" in err, err
    assert sorted(p.name for p in reports.iterdir()) == ["results.json"]
    assert (reports / "results.json").read_text() == "previous"


def test_the_local_settings_are_dask_settings():
    """Dask takes any key without complaint, so a misspelt one would silently change nothing:
    every key ``local:N`` sets must be one of Dask's own defaults (its ``distributed.yaml``)."""
    import dask
    import distributed  # noqa: F401  (registers its defaults)
    missing = object()
    for key in cluster._local_settings():
        assert dask.config.get(key, default=missing) is not missing, key


def _broken_setup(worker=None) -> None:
    import os
    os._exit(3)     # the worker process ends as it starts


def test_a_local_cluster_whose_workers_cannot_start_is_unreachable(tmp_path, monkeypatch):
    """When the local cluster's workers cannot start, the run ends with ClusterUnreachable
    saying so instead of waiting."""
    _few_files(tmp_path, "f3")
    monkeypatch.setattr(cluster, "dask_setup", _broken_setup)   # forked workers inherit it
    monkeypatch.setattr(cluster, "WORKER_START_TIMEOUT", 3.0)
    started = time.monotonic()
    with pytest.raises(cluster.ClusterUnreachable,
                       match="cannot start the cluster local:2: its workers did not start"):
        cluster.run([str(tmp_path)], RunOptions(numeric=False), "local:2", work=_plain)
    assert time.monotonic() - started < 30     # no wait for workers that cannot start


def _pid_noted(path, numeric, tolerance):  # shipped by value: the workers run this
    import os
    from pathlib import Path as P
    from harness.runner import check_file
    (P(path).parent / "pids" / str(os.getpid())).touch()
    return check_file(path, numeric)


def _alive(pid: int) -> bool:
    """Whether process ``pid`` runs (a zombie, ended and waiting to be reaped, does not)."""
    try:
        with open(f"/proc/{pid}/stat", encoding="ascii") as handle:
            return handle.read().rsplit(")", 1)[1].split()[0] != "Z"
    except FileNotFoundError:
        return False


@pytest.mark.skipif(not Path("/proc").is_dir(), reason="reads /proc")
def test_no_worker_outlives_the_run(tmp_path):
    """The cluster is closed on a thread of its own once the results are in hand: its workers
    are gone soon after, and a command that exits does not wait for them to linger."""
    (tmp_path / "pids").mkdir()
    _few_files(tmp_path, "f3")
    result = cluster.run([str(tmp_path)], RunOptions(numeric=False), "local:2", work=_pid_noted)
    assert [f.verdict for f in result.files] == ["pass"] * 4
    pids = [int(p.name) for p in (tmp_path / "pids").iterdir()]
    assert pids
    deadline = time.monotonic() + 30
    while any(_alive(pid) for pid in pids) and time.monotonic() < deadline:
        time.sleep(0.05)
    assert not [pid for pid in pids if _alive(pid)]


def test_a_local_cluster_left_without_workers_is_seen_deserted(monkeypatch):
    """Every worker lost and none restarted: the client stops sleeping on results (joined is
    False) and, past the bound with no worker, the cluster is deserted (the run then ends)."""
    monkeypatch.setattr(cluster, "WORKER_START_TIMEOUT", 0.2)
    workers: dict = {"tcp://w1": 1}
    run = types.SimpleNamespace(local="local:2", unmanned=None, looked=-math.inf,
                                client=types.SimpleNamespace(nthreads=lambda: workers))
    assert cluster._Run.joined(run) and run.unmanned is None
    assert not cluster._Run.deserted(run)
    workers.clear()
    assert cluster._Run.joined(run)             # looked at most once a second
    run.looked = -math.inf
    assert not cluster._Run.joined(run) and run.unmanned is not None
    assert not cluster._Run.deserted(run)
    time.sleep(0.3)
    assert not cluster._Run.joined(run) and cluster._Run.deserted(run)
    workers["tcp://w2"] = 1                     # a worker back in time: the wait goes on
    assert cluster._Run.joined(run) and not cluster._Run.deserted(run)
    remote = types.SimpleNamespace(local=None, unmanned=None, looked=-math.inf, client=run.client)
    assert cluster._Run.joined(remote)         # a remote scheduler's workers may come later


def _stuck(path, numeric, tolerance):  # shipped by value: the workers run this
    import time as clock
    from harness.runner import check_file
    if "stuck" in path:
        clock.sleep(600)
    return check_file(path, numeric)


def test_a_deserted_cluster_keeps_the_files_done_and_writes_the_reports(tmp_path, monkeypatch,
                                                                        capsys):
    """Once three files are done the cluster is made to look empty (``joined`` stubbed as in
    the test above; a real loss of every worker for good cannot be arranged reliably): past
    the bound the run ends as one with errors (exit 2, README's exit codes), the three files
    keep their results, the stuck one is an error naming the cause, and the reports are
    written."""
    folder, reports = tmp_path / "files", tmp_path / "reports"
    folder.mkdir()
    files = _few_files(folder, "stuck")
    monkeypatch.setattr(cluster, "WORKER_START_TIMEOUT", 0.5)
    real = cluster._Run.joined

    def lonely(run):
        if len(run.done) < 3:
            return real(run)
        run.unmanned = run.unmanned or time.monotonic()
        return False
    monkeypatch.setattr(cluster._Run, "joined", lonely)
    original = cluster.run
    monkeypatch.setattr(cluster, "run", lambda paths, options, address:
                        original(paths, options, address, work=_stuck))
    started = time.monotonic()
    code = main(["check", str(folder), "--cluster", "local:2", "--closed-form-only",
                 "--no-plots", "--report-dir", str(reports)])
    assert time.monotonic() - started < 120
    assert code == 2, capsys.readouterr().err
    written = json.loads((reports / "results.json").read_text())
    by_name = {Path(f["file"]).name: f for f in written["files"]}
    assert [f["file"] for f in written["files"]] == files
    assert {n: f["verdict"] for n, f in by_name.items()} == {
        "f0.toml": "pass", "f1.toml": "pass", "f2.toml": "pass", "stuck.toml": "error"}
    assert "no worker left on the cluster local:2 for 0.5 s" in by_name["stuck.toml"]["errors"][0]
    assert (reports / "junit.xml").exists() and (reports / "report.html").exists()


def test_a_second_chance_on_a_deserted_cluster_keeps_the_error(monkeypatch):
    """A file whose worker died is run again alone at the end; on a cluster left without
    workers for the bound that run never starts, so the file keeps its error at once instead
    of waiting for ever (no time limit set)."""
    from harness.runner import _error_result
    monkeypatch.setattr(cluster, "WORKER_START_TIMEOUT", 0.2)
    cancelled = []
    future = types.SimpleNamespace(status="pending")
    client = types.SimpleNamespace(nthreads=lambda: {}, submit=lambda *a, **k: future,
                                   cancel=lambda futures, force: cancelled.extend(futures))
    died = _error_result("a.toml", f"a.toml: {cluster._DIED} each time the cluster tried it")
    run = types.SimpleNamespace(local="local:2", unmanned=None, looked=-math.inf, client=client,
                                files=["a.toml"], options=RunOptions(), work=_plain,
                                done={0: died})
    run.joined = lambda: cluster._Run.joined(run)
    run.deserted = lambda: cluster._Run.deserted(run)
    started = time.monotonic()
    cluster._second_chance(run)
    assert run.done[0] is died and cancelled == [future]
    assert time.monotonic() - started < 5.0


def test_an_interrupt_during_a_second_chance_cancels_the_re_run(monkeypatch):
    """Ctrl-C while a file runs again alone: the re-run task is cancelled on the way out (on a
    remote scheduler it would otherwise run on after the command has ended)."""
    from harness.runner import _error_result
    cancelled = []
    future = types.SimpleNamespace(status="pending")
    client = types.SimpleNamespace(submit=lambda *a, **k: future,
                                   cancel=lambda futures, force: cancelled.extend(futures))
    died = _error_result("a.toml", f"a.toml: {cluster._DIED} each time the cluster tried it")
    run = types.SimpleNamespace(client=client, files=["a.toml"], options=RunOptions(),
                                work=_plain, done={0: died}, deserted=lambda: False)

    def interrupted():
        raise KeyboardInterrupt
    run.joined = interrupted
    with pytest.raises(KeyboardInterrupt):
        cluster._second_chance(run)
    assert cancelled == [future] and run.done[0] is died


def test_a_result_in_hand_is_kept_when_its_worker_has_left_since(tmp_path):
    """The client's event loop fetched a file's result (``as_completed(with_results=True)``),
    then the worker holding the result's data left: the future reads "lost" (pending again,
    to be run anew where there may be no worker at all).  The result in hand is the file's, so
    it is kept, and nothing asks the future anything that waits (its ``exception()`` waited for
    ever on a local cluster left without workers, before the no-worker bound was looked at).
    A task that failed is an error naming the cause, from the future's own state."""
    from harness.runner import _error_result

    class Future:
        def __init__(self, status, err=None):
            self.status, self.err = status, err

        def exception(self, timeout=None):
            if self.status != "error":
                raise AssertionError("asked a future that is not done: this waits")
            return self.err

        result = exception

    class KilledWorker(Exception):
        pass

    kept = _error_result("a.toml", "a stand-in for a FileResult the worker sent")
    lost, gone = Future(status="lost"), Future(status="lost")
    died = Future(status="error", err=KilledWorker("tried 3 times"))
    batch = [(lost, kept), (died, ("KilledWorker", died.err, None)), (gone, None)]
    run = types.SimpleNamespace(
        finished=types.SimpleNamespace(next_batch=lambda block: batch), done={},
        running={lost: cluster._Task(0, math.inf), died: cluster._Task(1, math.inf),
                 gone: cluster._Task(2, math.inf)},
        files=["a.toml", "b.toml", "c.toml"], bar=types.SimpleNamespace(step=lambda: None))
    assert cluster._Run.collect(run)
    assert run.done[0] is kept and not run.running
    assert cluster._DIED in run.done[1].errors[0] and "tried 3 times" in run.done[1].errors[0]
    assert cluster._LOST in run.done[2].errors[0] and "lost" in run.done[2].errors[0]


_DESERTING = """
import sys
import harness.cluster as cluster
original = cluster.run

def leaving(path, numeric, tolerance):  # shipped by value: the workers run this
    import time as clock
    from harness.runner import check_file
    if "leave" in path:     # the worker closes, its nanny with it: no worker starts again
        from distributed import get_worker
        worker = get_worker()
        worker.loop.add_callback(worker.close, nanny=True)
        clock.sleep(60)
    return check_file(path, numeric)

cluster.WORKER_START_TIMEOUT = 2.0
cluster.run = lambda paths, options, address: original(paths, options, address, work=leaving)
from harness.cli import main
sys.exit(main(sys.argv[1:]))
"""

#: a small file of our own, so it is handed out after the library's (largest first)
_LEAVE = """
[parts]
V1 = { kind = "voltage-source", nodes = ["a", "gnd"], value = "0 V", steps = [["0 s", "5 V"]] }
R1 = { kind = "resistor", nodes = ["a", "b"], value = "10k" }
C1 = { kind = "capacitor", nodes = ["b", "gnd"], value = "100n" }
[[expect]]
node = "b"
final = "5 V"
"""


def test_a_cluster_whose_last_worker_leaves_for_good_ends_the_run(tmp_path):
    """A real ``local:1`` cluster loses its only worker for good (it closes with its nanny
    while running the last file, just after the one before it finished: that file's result
    was fetched, then its data left with the worker and its future reads "lost").  The run
    ends within the no-worker bound, exit 2, the files done keep their results and the last
    one is an error saying no worker was left.  It ran for ever about half the time when the
    client asked the "lost" future for its exception."""
    folder, reports = tmp_path / "files", tmp_path / "reports"
    folder.mkdir()
    for i, path in enumerate(sorted(LIBRARY.rglob("*.toml"))[:3]):
        shutil.copy(path, folder / f"f{i}.toml")
    (folder / "leave.toml").write_text(_LEAVE, encoding="utf-8")
    proc = subprocess.Popen([sys.executable, "-c", _DESERTING, "check", str(folder),
                             "--cluster", "local:1", "--closed-form-only", "--no-plots",
                             "--report-dir", str(reports)],
                            cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        out, err = proc.communicate(timeout=90)
    except subprocess.TimeoutExpired:
        proc.kill()
        pytest.fail(f"the run did not end: {proc.communicate()}")
    assert proc.returncode == 2, err
    by_name = {Path(f["file"]).name: f for f in
               json.loads((reports / "results.json").read_text())["files"]}
    left = "no worker left on the cluster local:1 for 2 s"
    leave = by_name["leave.toml"]
    assert leave["verdict"] == "error" and left in leave["errors"][0]
    assert by_name["f0.toml"]["verdict"] == by_name["f1.toml"]["verdict"] == "pass"
    # the file just before may lose the race with the worker's leaving: then it says so
    assert by_name["f2.toml"]["verdict"] == "pass" or left in by_name["f2.toml"]["errors"][0]
