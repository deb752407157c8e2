"""Shared graph checks on a ``Circuit``: is the analysis well-posed, and where are jumps possible.

Pure functions of the circuit; no equations are solved.  Each part is classed, for one set of
switch states, as *voltage-type* (voltage source, vcvs, ccvs, closed ideal switch: it fixes a
voltage and carries any current), *current-type* (current source, vccs, cccs: it fixes a current),
*open* (an open ideal switch), *resistive* (resistor, switch with on/off resistance), capacitor or
inductor.  The checks are the classical ones of network topology (union-find over the node set,
spanning-forest fundamental loops and node-group cutsets):

* a node group with no path to ground through conducting parts (anything but current-type and
  open parts) is floating, or connects to the rest only through a current-type cutset;
* a loop of voltage-type parts alone is a short circuit or a source loop;
* before t = 0 (capacitors with ``initial`` as voltage sources, inductors with ``initial`` as
  current sources): a loop of known voltages must sum to zero (union-find with node potentials),
  a cutset of known currents must sum to zero, a capacitor without ``initial`` needs a DC path on
  both terminals, and an inductor without ``initial`` must not close a loop with no resistance.

``check`` raises; ``voltage_loops``, ``trapped_nodes`` and ``storage_cutsets`` only report facts
for the comparator's messages.
"""

from __future__ import annotations

from collections import deque

from . import model as m
from .errors import InitialStateError, TopologyError
from .filelines import closest
from .model import CURRENT_TYPE, RESISTIVE, VOLTAGE_TYPE
from .units import format_si

#: the class of an open ideal switch (it neither fixes nor carries anything)
OPEN = "open"
#: relative tolerance for the sums of known voltages around a loop / currents across a cutset
SUM_TOLERANCE = 1e-9


def branch_class(part: m.Part, closed: bool | None = None) -> str:
    """The class of ``part`` given its switch state: its kind's declared branch type
    (``model.KindSpec.branch``), or for a switched kind ``VOLTAGE_TYPE``, ``RESISTIVE`` or
    ``OPEN`` by its state and resistances."""
    declared = m.KIND_SPECS[part.kind].branch
    if declared != m.SWITCHED:
        return declared
    if closed:
        return VOLTAGE_TYPE if part.on_resistance is None else RESISTIVE
    return OPEN if part.off_resistance is None else RESISTIVE


class _Forest:
    """Union-find over nodes that keeps its spanning-forest edges and node potentials.

    ``add(a, b, name, volts)`` records v(a) - v(b) = volts (weighted union-find: each node keeps
    its potential relative to its parent).  When a and b are already joined the edge closes a
    loop: it is not added, and the mismatch (tree potential difference minus volts) is returned.
    """

    def __init__(self, nodes=()) -> None:
        self.parent: dict[str, str] = {}
        self.offset: dict[str, float] = {}
        self.adjacent: dict[str, list[tuple[str, str]]] = {}
        for node in nodes:
            self.find(node)

    def find(self, x: str) -> tuple[str, float]:
        """(root, v(x) - v(root))."""
        if x not in self.parent:
            self.parent[x], self.offset[x], self.adjacent[x] = x, 0.0, []
            return x, 0.0
        path = []
        while self.parent[x] != x:
            path.append(x)
            x = self.parent[x]
        total = 0.0
        for node in reversed(path):
            total += self.offset[node]
            self.offset[node], self.parent[node] = total, x
        return x, (self.offset[path[0]] if path else 0.0)

    def root(self, x: str) -> str:
        return self.find(x)[0]

    def add(self, a: str, b: str, name: str, volts: float = 0.0) -> tuple[bool, float]:
        """Join a and b by part ``name``; (True, 0) if joined, (False, mismatch) if a loop."""
        ra, pa = self.find(a)
        rb, pb = self.find(b)
        if ra == rb:
            return False, (pa - pb) - volts
        self.parent[rb], self.offset[rb] = ra, pa - pb - volts
        self.adjacent[a].append((b, name))
        self.adjacent[b].append((a, name))
        return True, 0.0

    def path(self, a: str, b: str) -> list[str]:
        """Names of the forest parts on the path from a to b (breadth-first search)."""
        came: dict[str, tuple[str, str] | None] = {a: None}
        queue = deque([a])
        while queue:
            x = queue.popleft()
            if x == b:
                break
            for y, name in self.adjacent[x]:
                if y not in came:
                    came[y] = (x, name)
                    queue.append(y)
        names, x = [], b
        while came.get(x) is not None:
            x, name = came[x]
            names.append(name)
        return names[::-1]

    def boundaries(self, parts) -> dict[str, list[m.Part]]:
        """root -> the parts with exactly one terminal in its group, in the order of ``parts``."""
        out: dict[str, list[m.Part]] = {}
        for part in parts:
            rp, rn = self.root(part.p), self.root(part.n)
            if rp != rn:
                out.setdefault(rp, []).append(part)
                out.setdefault(rn, []).append(part)
        return out

    def groups(self, nodes) -> dict[str, list[str]]:
        """root -> its nodes, in the order of ``nodes``."""
        out: dict[str, list[str]] = {}
        for node in nodes:
            out.setdefault(self.root(node), []).append(node)
        return out


# --- wording -------------------------------------------------------------------------------

def _and(items) -> str:
    items = list(items)
    if len(items) <= 1:
        return "".join(items)
    return ", ".join(items[:-1]) + " and " + items[-1]


def _nodes_text(nodes) -> str:
    nodes = list(nodes)
    shown = ", ".join(f"'{n}'" for n in nodes[:8]) + (", …" if len(nodes) > 8 else "")
    return f"node {shown}" if len(nodes) == 1 else f"nodes {shown}"


def _describe(part: m.Part, closed: bool | None) -> str:
    if part.kind == m.SWITCH:
        return f"{'closed' if closed else 'open'} switch {part.name}"
    return f"{m.KIND_SPECS[part.kind].noun} {part.name}"


def _t(when: float) -> str:
    return f"t = {format_si(when, 's')}"


def _moment(when: float | None) -> str:
    return "before t = 0" if when is None else f"from {_t(when)} on"


def _error(cls, circuit: m.Circuit, part: m.Part, field: str | None, message: str):
    return cls(message, file=circuit.source, part=part.name, field=field, line=part.line)


# --- the checks ----------------------------------------------------------------------------

def check(circuit: m.Circuit) -> None:
    """Raise TopologyError / InitialStateError if the circuit is ill-posed before t = 0 or in
    any interval (every distinct set of switch states is checked once, at its first event).
    """
    switches = [p for p in circuit.parts if p.kind == m.SWITCH]
    before = {s.name: bool(s.closed) for s in switches}
    _check_configuration(circuit, before, None, {})
    _check_initial_state(circuit, before)
    seen = {frozenset(n for n, c in before.items() if c)}
    for when, closed, changed in _timeline(switches):
        key = frozenset(n for n, c in closed.items() if c)
        if key not in seen:
            seen.add(key)
            _check_configuration(circuit, closed, when, changed)


def _timeline(switches: list[m.Part]):
    """Yield (time, states just after it, {switch: new state} for those that changed)."""
    by_time: dict[float, list[tuple[str, bool]]] = {}
    for s in switches:
        for when, new in s.steps:
            by_time.setdefault(when, []).append((s.name, bool(new)))
    states = {s.name: bool(s.closed) for s in switches}
    for when in sorted(by_time):
        changed = {name: new for name, new in by_time[when] if states[name] != new}
        if changed:
            states.update(changed)
            yield when, dict(states), changed


def _check_configuration(circuit: m.Circuit, closed: dict[str, bool], when: float | None,
                         changed: dict[str, bool]) -> None:
    _check_connected(circuit, closed, when, changed)
    _check_voltage_loops(circuit, closed, when, changed)


def _check_connected(circuit, closed, when, changed) -> None:
    """Floating node groups and current-type cutsets (checks 1 and 3)."""
    forest = _Forest(circuit.nodes)
    for part in circuit.parts:
        if branch_class(part, closed.get(part.name)) not in (CURRENT_TYPE, OPEN):
            forest.add(part.p, part.n, part.name)
    ground = forest.root(circuit.ground)
    for root, nodes in forest.groups(circuit.nodes).items():
        if root != ground:
            raise _with_near_miss(circuit, nodes,
                                  _floating_error(circuit, nodes, closed, when, changed))


def _with_near_miss(circuit, nodes: list, err: TopologyError) -> TopologyError:
    """``err`` moved to the ``nodes`` of the part terminal that names a near-miss node of
    ``nodes`` (``_near_miss``), with the likely name suggested; ``err`` itself otherwise."""
    typo = _near_miss(circuit, nodes)
    if typo is None or err.field == "steps":
        return err
    node, owner, side, meant = typo
    return _error(TopologyError, circuit, owner, "nodes",
                  f"node '{node}' ({owner.name}'s {side} terminal) may be a typo: "
                  f"did you mean '{meant}'? ({err.message})")


def _floating_error(circuit, nodes, closed, when, changed) -> TopologyError:
    members = set(nodes)
    boundary = [p for p in circuit.parts if (p.p in members) != (p.n in members)]
    through = _and(_describe(p, closed.get(p.name)) for p in boundary)
    sources = [p for p in boundary if branch_class(p) == CURRENT_TYPE]
    opened = [p for p in boundary if changed.get(p.name) is False]
    where, gnd = _nodes_text(nodes), circuit.ground
    one = len(nodes) == 1
    connects, its = ("connects", "its") if one else ("connect", "their")
    if opened:
        others = [p for p in boundary if p is not opened[0]]
        rest = (f" except through {_and(_describe(p, closed.get(p.name)) for p in others)}"
                if sources else "")
        return _error(TopologyError, circuit, opened[0], "steps",
                      f"opening {opened[0].name} at {_t(when)} leaves {where} with no path to "
                      f"ground ('{gnd}'){rest}, so {its} voltage is undefined; add a path (a "
                      f"resistor, for example) or give {opened[0].name} an off-resistance")
    if sources:
        return _error(TopologyError, circuit, sources[0], "nodes",
                      f"{where} {connects} to the rest of the circuit only through {through} "
                      f"{_moment(when)}: the current of {sources[0].name} has no return path "
                      f"and the voltage there is undefined; add a path to ground (a resistor, "
                      f"for example)")
    if boundary:
        switch = boundary[0]
        return _error(TopologyError, circuit, switch, "state" if when is None else "steps",
                      f"{where} {connects} to the rest of the circuit only through {through} "
                      f"{_moment(when)}, so {its} voltage is undefined; add a path to ground or "
                      f"give {switch.name} an off-resistance")
    inside = [p for p in circuit.parts if p.p in members]
    return _error(TopologyError, circuit, inside[0], "nodes",
                  f"{where} {'forms' if one else 'form'} a separate circuit with no connection to "
                  f"ground ('{gnd}'), so {its} voltage is undefined; connect it to '{gnd}' or "
                  f"check the node names")


def _check_voltage_loops(circuit, closed, when, changed) -> None:
    """Loops of voltage-type parts alone (check 2); a switch closing at ``when`` is named."""
    vparts = [p for p in circuit.parts
              if branch_class(p, closed.get(p.name)) == VOLTAGE_TYPE]
    ordered = ([p for p in vparts if p.kind != m.SWITCH]
               + [p for p in vparts if p.kind == m.SWITCH and p.name not in changed]
               + [p for p in vparts if p.name in changed])
    forest = _Forest()
    for part in ordered:
        joined, _ = forest.add(part.p, part.n, part.name)
        if joined:
            continue
        others = forest.path(part.p, part.n)
        switch = any(circuit.part(n).kind == m.SWITCH for n in others + [part.name])
        why = ("a loop of voltage-type parts only (voltage sources, controlled voltage sources, "
               "closed ideal switches) has no resistance to set its current, which is then "
               "unbounded or undefined; add resistance to the loop"
               + (" or give the switch an on-resistance" if switch else ""))
        if part.name in changed:
            raise _error(TopologyError, circuit, part, "steps",
                         f"closing {part.name} at {_t(when)} shorts {_and(others)}: {why}")
        if part.kind == m.SWITCH:
            raise _error(TopologyError, circuit, part, "state" if when is None else "steps",
                         f"closed switch {part.name} shorts {_and(others)} {_moment(when)}: "
                         f"{why}")
        raise _error(TopologyError, circuit, part, "nodes",
                     f"{_and(others + [part.name])} form a loop with no resistance "
                     f"{_moment(when)}: {why}")


def _check_initial_state(circuit: m.Circuit, closed: dict[str, bool]) -> None:
    """The state at 0-: contradictions and undefined pre-step values (check 4)."""
    _check_initial_voltages(circuit, closed)
    _check_inductor_loops(circuit, closed)
    _check_capacitor_paths(circuit, closed)
    _check_initial_currents(circuit, closed)


def _check_initial_voltages(circuit, closed) -> None:
    """Loops of known voltages before t = 0 must sum to zero (weighted union-find)."""
    known: list[tuple[m.Part, float]] = []
    for p in circuit.parts:
        if p.kind == m.VOLTAGE_SOURCE:
            known.append((p, p.value or 0.0))
        elif p.kind == m.SWITCH and branch_class(p, closed[p.name]) == VOLTAGE_TYPE:
            known.append((p, 0.0))
    known += [(p, p.initial) for p in circuit.parts
              if p.kind == m.CAPACITOR and p.initial is not None]
    volts = {p.name: v for p, v in known}
    forest = _Forest()
    for part, value in known:
        joined, mismatch = forest.add(part.p, part.n, part.name, value)
        if joined:
            continue
        others = forest.path(part.p, part.n)
        scale = max(abs(volts[n]) for n in others + [part.name])
        if abs(mismatch) <= SUM_TOLERANCE * scale:
            continue
        held = value + mismatch
        raise _error(InitialStateError, circuit, part, "initial",
                     f"{part.name}'s initial voltage {format_si(value, 'V')} contradicts the "
                     f"circuit before t = 0: it is in a loop with {_and(others)}, which holds "
                     f"v({part.p}) - v({part.n}) at {format_si(held, 'V')}; set initial = "
                     f"\"{held:.6g} V\" or leave it out")


def _check_inductor_loops(circuit, closed) -> None:
    """Inductors without ``initial`` must not close a loop with no resistance before t = 0."""
    forest = _Forest()
    for p in circuit.parts:
        if (branch_class(p, closed.get(p.name)) == VOLTAGE_TYPE
                or (p.kind == m.CAPACITOR and p.initial is not None)):
            forest.add(p.p, p.n, p.name)
    for p in circuit.parts:
        if p.kind != m.INDUCTOR or p.initial is not None:
            continue
        joined, _ = forest.add(p.p, p.n, p.name)
        if not joined:
            others = forest.path(p.p, p.n)
            raise _error(InitialStateError, circuit, p, "initial",
                         f"{p.name}'s current before t = 0 is undefined: in DC it closes a loop "
                         f"with no resistance with {_and(others)}, so its current is not fixed "
                         f"by the circuit (or a voltage across the loop drives it without "
                         f"bound); give {p.name} an initial current or add resistance to the "
                         f"loop")


def _dc_forest(circuit, closed) -> _Forest:
    """Nodes joined by DC paths before t = 0 (capacitors without ``initial`` open, inductors
    without ``initial`` shorted, storage parts with ``initial`` as sources)."""
    forest = _Forest(circuit.nodes)
    for p in circuit.parts:
        cls = branch_class(p, closed.get(p.name))
        if (cls in (VOLTAGE_TYPE, RESISTIVE)
                or (p.kind == m.CAPACITOR and p.initial is not None)
                or (p.kind == m.INDUCTOR and p.initial is None)):
            forest.add(p.p, p.n, p.name)
    return forest


def _check_capacitor_paths(circuit, closed) -> None:
    """A capacitor without ``initial`` needs its terminals DC-connected (to ground or each other)."""
    forest = _dc_forest(circuit, closed)
    ground = forest.root(circuit.ground)
    groups = forest.groups(circuit.nodes)
    for p in circuit.parts:
        if p.kind != m.CAPACITOR or p.initial is not None:
            continue
        rp, rn = forest.root(p.p), forest.root(p.n)
        if rp == rn or (rp == ground and rn == ground):
            continue
        end = "p" if rp != ground else "n"
        raise _capacitor_path_error(circuit, p, end, groups[rp if rp != ground else rn])


def _capacitor_path_error(circuit, cap: m.Part, end: str, nodes: list) -> InitialStateError:
    """The error for capacitor ``cap`` whose ``end`` terminal ("p"/"n") is on ``nodes``, a group
    with no DC path to ground: a near-miss node name is blamed on the terminal that wrote it."""
    gnd = circuit.ground
    why = ("before t = 0 capacitors without initial are open and inductors with initial act as "
           "current sources")
    typo = _near_miss(circuit, nodes)
    if typo is not None:
        node, owner, side, meant = typo
        return _error(InitialStateError, circuit, owner, "nodes",
                      f"node '{node}' ({owner.name}'s {side} terminal) has no DC path to ground "
                      f"('{gnd}'); did you mean '{meant}'? (as written, {cap.name}'s voltage "
                      f"before t = 0 is undefined: {why})")
    node = cap.p if end == "p" else cap.n
    return _error(InitialStateError, circuit, cap, "initial",
                  f"{cap.name}'s voltage before t = 0 is undefined: {_nodes_text(nodes)} "
                  f"{'has' if len(nodes) == 1 else 'have'} no DC path to ground ('{gnd}') "
                  f"({cap.name}'s {end} terminal is on '{node}'; {why}); give {cap.name} an "
                  f"initial value")


def _near_miss(circuit, nodes: list) -> tuple[str, m.Part, str, str] | None:
    """(node, part, terminal "p"/"n", likely name) for a node of ``nodes`` that only one part
    terminal names and whose name is close to a node outside ``nodes``, or None."""
    others = [n for n in circuit.nodes if n not in set(nodes)]
    for node in nodes:
        ends = [(part, side) for part in circuit.parts
                for side, name in (("p", part.p), ("n", part.n)) if name == node]
        meant = closest(node, others) if len(ends) == 1 else None
        if meant is not None:
            return node, ends[0][0], ends[0][1], meant
    return None


def _check_initial_currents(circuit, closed) -> None:
    """Cutsets of known currents before t = 0 (current sources, inductors with ``initial``,
    open ideal switches) must sum to zero."""
    known: dict[str, float] = {}
    for p in circuit.parts:
        cls = branch_class(p, closed.get(p.name))
        if p.kind == m.CURRENT_SOURCE:
            known[p.name] = p.value or 0.0
        elif p.kind == m.INDUCTOR and p.initial is not None:
            known[p.name] = p.initial
        elif cls == OPEN or (p.kind == m.CAPACITOR and p.initial is None):
            known[p.name] = 0.0
    forest = _Forest(circuit.nodes)
    for p in circuit.parts:
        if p.name not in known:
            forest.add(p.p, p.n, p.name)
    ground = forest.root(circuit.ground)
    groups = forest.groups(circuit.nodes)
    cuts = forest.boundaries(circuit.parts)
    for root in sorted(groups, key=lambda r: r == ground):
        members = set(groups[root])
        boundary = cuts.get(root, [])
        if any(p.kind == m.CAPACITOR for p in boundary):
            continue  # a capacitor without initial: its 0- value is checked above
        net = sum(known[p.name] if p.p in members else -known[p.name] for p in boundary)
        scale = max([abs(known[p.name]) for p in boundary] + [0.0])
        inductors = [p for p in boundary if p.kind == m.INDUCTOR]
        if abs(net) <= SUM_TOLERANCE * scale or not inductors:
            continue
        them = "it" if len(members) == 1 else "them"
        flows = [f"{p.name} carries {format_si(abs(known[p.name]), 'A')} "
                 f"{'out of' if (p.p in members) == (known[p.name] > 0) else 'into'} {them}"
                 if known[p.name] else f"{_describe(p, closed.get(p.name))} carries 0 A"
                 for p in boundary]
        blame = inductors[-1]
        raise _error(InitialStateError, circuit, blame, "initial",
                     f"the currents into {_nodes_text(groups[root])} before t = 0 do not "
                     f"balance: {_and(flows)} (net {format_si(abs(net), 'A')} "
                     f"{'out' if net > 0 else 'in'}), and these are "
                     f"the only paths; change {blame.name}'s initial current")


# --- facts for messages --------------------------------------------------------------------

def _at_event(circuit: m.Circuit, k: int):
    """(time, switch states just after it, names of parts that change at it)."""
    when = circuit.events[k]
    closed, changed = {}, set()
    for p in circuit.parts:
        if p.kind == m.SWITCH:
            closed[p.name] = p.is_closed(when)
            if closed[p.name] != p.is_closed_before(when):
                changed.add(p.name)
        elif p.kind in m.SOURCES and p.source_value(when) != p.source_value_before(when):
            changed.add(p.name)
    return when, closed, changed


def voltage_loops(circuit: m.Circuit, k: int) -> list[tuple[str, ...]]:
    """Loops of capacitors and voltage-type parts through which capacitor voltages can jump at
    event k: fundamental loops (spanning forest, changing parts first) that hold a capacitor and
    a part that changes at ``circuit.events[k]`` (a voltage source stepping, an ideal switch
    closing).  Each loop is a tuple of part names; structural, not a statement that the jump is
    non-zero.
    """
    _, closed, changed = _at_event(circuit, k)
    vparts = [p for p in circuit.parts if branch_class(p, closed.get(p.name)) == VOLTAGE_TYPE]
    forest = _Forest()
    for p in sorted(vparts, key=lambda p: p.name not in changed):
        forest.add(p.p, p.n, p.name)
    loops = []
    for cap in (p for p in circuit.parts if p.kind == m.CAPACITOR):
        joined, _ = forest.add(cap.p, cap.n, cap.name)
        if not joined:
            loop = tuple(forest.path(cap.p, cap.n) + [cap.name])
            if changed.intersection(loop):
                loops.append(loop)
    return loops


def trapped_nodes(circuit: m.Circuit, k: int) -> list[tuple[str, ...]]:
    """Node groups reached from ground only through capacitors (and current-type or open parts)
    in interval k: the charge on each group is conserved.  Nodes in ``circuit.nodes`` order."""
    when = circuit.events[k]
    forest = _Forest(circuit.nodes)
    for p in circuit.parts:
        closed = p.is_closed(when) if p.kind == m.SWITCH else None
        if branch_class(p, closed) in (VOLTAGE_TYPE, RESISTIVE, m.INDUCTIVE):
            forest.add(p.p, p.n, p.name)
    ground = forest.root(circuit.ground)
    cuts = forest.boundaries(circuit.parts)
    out = []
    for root, nodes in forest.groups(circuit.nodes).items():
        if root != ground and any(p.kind == m.CAPACITOR for p in cuts.get(root, [])):
            out.append(tuple(nodes))
    return out


def storage_cutsets(circuit: m.Circuit, k: int) -> list[tuple[str, ...]]:
    """Cutsets of inductors with current-type parts and open ideal switches through which
    inductor currents can jump at event k: the boundaries of the node groups left when every
    other part is contracted, that hold an inductor and a part changing at ``circuit.events[k]``
    (a current source stepping, an ideal switch opening).  Tuples of part names, file order.
    """
    _, closed, changed = _at_event(circuit, k)
    forest = _Forest(circuit.nodes)
    for p in circuit.parts:
        if branch_class(p, closed.get(p.name)) in (VOLTAGE_TYPE, RESISTIVE, m.CAPACITIVE):
            forest.add(p.p, p.n, p.name)
    ground = forest.root(circuit.ground)
    out: list[tuple[str, ...]] = []
    for root, boundary in forest.boundaries(circuit.parts).items():
        cut = tuple(p.name for p in boundary)
        if (root != ground and any(p.kind == m.INDUCTOR for p in boundary)
                and changed.intersection(cut) and cut not in out):
            out.append(cut)
    return out


def dangling_nodes(circuit: m.Circuit) -> list[tuple[str, str]]:
    """(node, part) for every node other than ground that exactly one part terminal touches and
    no controlled source senses: an open end, usually a node-name typo (R2 to 'gdn').  File
    order of the parts."""
    touches: dict[str, list[str]] = {n: [] for n in circuit.nodes}
    for p in circuit.parts:
        for node in p.nodes:
            touches.setdefault(node, []).append(p.name)
        if isinstance(p.control, tuple):
            for node in p.control:
                touches.setdefault(node, []).extend([p.name, p.name])
    return [(node, names[0]) for node, names in touches.items()
            if node != circuit.ground and len(names) == 1]
