"""``tauproof help`` and ``tauproof new``: the file-format reference, the settings, a starting file.

``help format`` prints the circuit-file reference that ``harness.reference`` writes from the
reader's own declarations; ``help config`` the ``[tool.tauproof]`` keys.  ``new FILE`` writes
``STARTER``: a commented RC charge whose hand values are right, so it checks cleanly as written
and shows every common field in use.
"""

from __future__ import annotations

import sys
from pathlib import Path

#: a starting circuit file: an RC low-pass charged by a 5 V step (τ = R·C = 10 kΩ · 1 µF =
#: 10 ms, final 5 V; the first-order step response, common practice)
STARTER = '''\
# A tauproof circuit file (TOML). `tauproof help format` lists every field.
# Check it with: tauproof check THIS_FILE
title = "RC low-pass charged by a 5 V step"
ground = "gnd"                  # the reference node (default "gnd")

# Each part: kind, nodes = [p, n] (its voltage is v(p) - v(n), its current flows p -> n),
# and a value with a unit or prefix, quoted: "10k", "4k7", "1 uF", "100n", "2.2 mH".
[parts]
V1 = { kind = "voltage-source", nodes = ["in", "gnd"], value = "0 V", steps = [["1 ms", "5 V"]] }
R1 = { kind = "resistor", nodes = ["in", "out"], value = "10k" }
C1 = { kind = "capacitor", nodes = ["out", "gnd"], value = "1 uF", initial = "0 V" }
# a switch:  S1 = { kind = "switch", nodes = ["a", "b"], state = "open", steps = [["2 ms", "closed"]] }

[settings]
tolerance = "1 %"               # how close a hand value must be to the computed one

# One [[expect]] block per hand calculation: a probe at an event (t = 0 or a step time).
[[expect]]
node = "out"                    # or between = ["a", "b"], across = "C1", through = "R1"
at = "1 ms"                     # the event: V1 steps to 5 V
before = "0 V"                  # just before the event
after = "0 V"                   # just after it (a capacitor voltage cannot jump here)
final = "5 V"                   # where it heads if nothing else happens
tau = "= R1*C1"                 # a formula of part values: 10 ms
note = "first-order charge: v(t) = 5 V * (1 - exp(-(t - 1 ms)/tau))"
'''


def main(args) -> int:
    """Run ``help`` or ``new``; the exit code."""
    if args.command == "help":
        from .reference import config_reference, format_reference
        text = format_reference() if args.topic == "format" else config_reference()
        sys.stdout.write(text)
        return 0
    return write_new(Path(args.file))


def write_new(path: Path) -> int:
    """Write ``STARTER`` to ``path`` (0), refusing to replace a file that exists (2)."""
    if path.suffix != ".toml":
        print(f"tauproof: {path}: a circuit file's name ends in .toml", file=sys.stderr)
        return 2
    try:
        with open(path, "x", encoding="utf-8") as handle:
            handle.write(STARTER)
    except FileExistsError:
        print(f"tauproof: {path} exists; it was left as it is (give a new name)",
              file=sys.stderr)
        return 2
    except OSError as exc:
        print(f"tauproof: cannot write {path}: {exc.strerror or exc}", file=sys.stderr)
        return 2
    print(f"wrote {path}: check it with `tauproof check {path}`")
    return 0
