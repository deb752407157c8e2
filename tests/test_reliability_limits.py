"""Limits a user can rely on: at each documented limit the circuit is read and solved in seconds,
one past it is an input error naming the field (never a hang or an out-of-memory kill).

References: the Elmore delay of an RC ladder equals the sum of its time constants,
sum 1/|lambda_i| = sum_k C_k R_k,path = R C N (N + 1) / 2 for N equal sections (W. C. Elmore,
J. Appl. Phys. 19, 55 (1948), from memory; it is the trace of (C^-1 G)^-1); an RC driven by a
square wave with half-period >> RC settles to the source value in each half-period (common
practice, 99.3 % after 5 tau).
"""

from __future__ import annotations

import time

import numpy as np
import pytest

from harness import closedform
from harness.circuitfile import (MAX_EVENTS, MAX_EXPECTATIONS, MAX_FILE_BYTES, parse_circuit,
                                 read_circuit)
from harness.cli import main
from harness.errors import InputError
from harness.fields import MAX_PARTS, MAX_STEPS
from harness.model import Probe


def ladder(sections: int, expects: int = 0) -> str:
    """An RC ladder of ``sections`` 1 kOhm / 1 nF sections driven by a 1 V step."""
    lines = ["[parts]", 'V1 = { kind = "voltage-source", nodes = ["n0", "gnd"], value = "0 V", '
                        'steps = [["0 s", "1 V"]] }']
    for i in range(sections):
        lines.append(f'R{i} = {{ kind = "resistor", nodes = ["n{i}", "n{i + 1}"], value = "1k" }}')
        lines.append(f'C{i} = {{ kind = "capacitor", nodes = ["n{i + 1}", "gnd"], value = "1n" }}')
    lines += [f'[[expect]]\nnode = "n{1 + j % sections}"' for j in range(expects)]
    return "\n".join(lines) + "\n"


def square(steps: int, second: int = 0) -> str:
    """An RC (tau = 10 us) driven by a 0/1 V square wave of ``steps`` steps 100 us apart."""
    wave = ", ".join(f'["{(j + 1) * 100}u", "{(j + 1) % 2} V"]' for j in range(steps))
    extra = ""
    if second:
        other = ", ".join(f'["{(j + 1) * 100 + 50}u", "{j % 2} mA"]' for j in range(second))
        extra = (f'I1 = {{ kind = "current-source", nodes = ["gnd", "out"], value = "0 A", '
                 f'steps = [{other}] }}\n')
    return (f'[parts]\nV1 = {{ kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", '
            f'steps = [{wave}] }}\n'
            f'R1 = {{ kind = "resistor", nodes = ["in", "out"], value = "1k" }}\n'
            f'C1 = {{ kind = "capacitor", nodes = ["out", "gnd"], value = "10n" }}\n{extra}')


def test_parts_at_limit_are_read():
    """A ladder of MAX_PARTS parts is accepted by the reader (its run time is measured in
    tests/benchmarks/large_bench.py, not here)."""
    sections = (MAX_PARTS - 1) // 2
    assert len(parse_circuit(ladder(sections)).parts) == 2 * sections + 1


def test_large_ladder_solves_and_matches_elmore():
    """A 1,000-section ladder (2,001 parts) solves; its taus sum to the Elmore delay
    R C N (N + 1) / 2 (module docstring)."""
    sections = 1000
    sol = closedform.solve(parse_circuit(ladder(sections)))
    elmore = 1e3 * 1e-9 * sections * (sections + 1) / 2
    assert sum(sol.time_constants(0)) == pytest.approx(elmore, rel=1e-8)


def test_parts_past_limit_is_an_input_error():
    """One part past MAX_PARTS is an input error naming the parts table."""
    with pytest.raises(InputError) as caught:
        parse_circuit(ladder(MAX_PARTS // 2 + 1))
    assert caught.value.field == "parts" and str(MAX_PARTS) in caught.value.message


def test_events_at_limit_solve_and_settle():
    """MAX_EVENTS - 1 steps: the closed form solves quickly and each half-period settles."""
    text = square(MAX_EVENTS - 1)
    started = time.perf_counter()
    circuit = parse_circuit(text)
    sol = closedform.solve(circuit)
    assert time.perf_counter() - started < 30
    assert len(circuit.events) == MAX_EVENTS
    probe = Probe("node", ("out",))
    for k in (1, 2, MAX_EVENTS // 2, MAX_EVENTS - 1):
        level = float(k % 2)  # the source after step k: 10 tau later within 5e-5 (e^-10)
        assert sol.features(probe, k).before == pytest.approx(1.0 - level, abs=1e-4)


def test_events_past_limit_across_schedules_is_an_input_error():
    """Two schedules whose distinct times add up past MAX_EVENTS: error naming the busiest."""
    half = MAX_EVENTS // 2 + 1
    with pytest.raises(InputError) as caught:
        parse_circuit(square(half + 5, second=half))
    err = caught.value
    assert (err.part, err.field) == ("V1", "steps") and str(MAX_EVENTS) in err.message


def test_steps_past_limit_is_an_input_error():
    """One schedule longer than MAX_STEPS is an input error naming its steps."""
    with pytest.raises(InputError) as caught:
        parse_circuit(square(MAX_STEPS + 1))
    assert (caught.value.part, caught.value.field) == ("V1", "steps")


def test_expectations_at_and_past_limit(tmp_path):
    """MAX_EXPECTATIONS blocks read quickly; one more is an error naming expect."""
    started = time.perf_counter()
    circuit = parse_circuit(ladder(5, MAX_EXPECTATIONS))
    assert len(circuit.expectations) == MAX_EXPECTATIONS
    assert time.perf_counter() - started < 10
    with pytest.raises(InputError) as caught:
        parse_circuit(ladder(5, MAX_EXPECTATIONS + 1))
    assert caught.value.field == "expect"


def test_file_past_size_limit_is_refused_without_reading_it_all(tmp_path, capsys):
    """A 50 MB file is refused at once (only MAX_FILE_BYTES + 1 bytes are read), exit 2."""
    path = tmp_path / "huge.toml"
    with path.open("wb") as handle:
        handle.write(b"# " + b"x" * (50 * 2 ** 20) + b"\n")
    started = time.perf_counter()
    code = main(["check", str(path), "--no-report"])
    err = capsys.readouterr().err
    assert time.perf_counter() - started < 5
    assert code == 2 and f"{MAX_FILE_BYTES:,} bytes" in err and str(path) in err


def test_file_at_size_limit_is_read(tmp_path):
    """A file just under MAX_FILE_BYTES (a long comment and a small circuit) reads."""
    body = ladder(3)
    path = tmp_path / "big.toml"
    path.write_text("#" + "x" * (MAX_FILE_BYTES - len(body) - 3) + "\n" + body, encoding="utf-8")
    assert path.stat().st_size <= MAX_FILE_BYTES
    assert len(read_circuit(path).parts) == 7
