"""Port impedance of series-parallel circuits by reduction (SI: ohm, S, rad/s).

Most decap equivalent circuits are two-terminal series-parallel networks: repeatedly joining
two elements in series (an internal node touched by exactly those two) or in parallel (two
elements between the same two nodes), and dropping an element that hangs from an internal node
touched by nothing else (it carries no current), leaves one element between the ports
(docs/references.md [47]). Its impedance then follows from the element impedances alone,

    series:    Z = Z1 + Z2          parallel:    Y = Y1 + Y2,  Y = 1 / Z,

element-wise over every variant and frequency: a few array operations per element instead of a
batched dense solve (`celllab.physics.netlist.solve_impedance`, which uses this where it can).
Both sums add passive quantities whose real parts are >= 0, so no cancellation enters: the real
part of a mostly capacitive impedance keeps its relative precision.

`reduction_plan` finds the sequence of joins from the structure alone (element kinds and nodes,
not values), once per structure; `reduced_impedance` evaluates it. A circuit that does not
reduce (a bridge, or a three-terminal RC line) has no plan.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np

from celllab.physics.distributed_rc import rc_line_impedance

if TYPE_CHECKING:
    from celllab.physics.netlist import ComplexArray, Element, Netlist


@dataclass(frozen=True)
class ReductionPlan:
    """Joins that reduce a circuit to one element between its ports.

    Slots 0 .. n_elements-1 are the elements in netlist order; each step
    ``(op, a, b)`` joins slots ``a`` and ``b`` into the next new slot (op "series" or
    "parallel"); the last slot made (or the only element) is the port impedance.
    """

    n_elements: int
    steps: tuple[tuple[Literal["series", "parallel"], int, int], ...]
    root: int


def reduction_plan(netlist: Netlist) -> ReductionPlan | None:
    """The series/parallel joins that reduce ``netlist`` to its ports, or None if it does not
    reduce (a bridge, a three-terminal line, or no path between the ports)."""
    if any(el.node_far is not None for el in netlist.elements):
        return None
    port_a, port_b = netlist.ports
    ends: dict[int, tuple[str, str]] = {}
    incident: dict[str, set[int]] = defaultdict(set)
    between: dict[frozenset[str], int] = {}
    steps: list[tuple[Literal["series", "parallel"], int, int]] = []
    work: list[str] = []
    next_slot = len(netlist.elements)

    def add(slot: int, a: str, b: str) -> None:
        nonlocal next_slot
        key = frozenset((a, b))
        other = between.pop(key, None)
        if other is not None:  # already an element between a and b: join them in parallel
            remove(other)
            steps.append(("parallel", other, slot))
            slot, next_slot = next_slot, next_slot + 1
        ends[slot] = (a, b)
        incident[a].add(slot)
        incident[b].add(slot)
        between[key] = slot
        work.extend((a, b))

    def remove(slot: int) -> tuple[str, str]:
        a, b = ends.pop(slot)
        incident[a].discard(slot)
        incident[b].discard(slot)
        if between.get(frozenset((a, b))) == slot:
            del between[frozenset((a, b))]
        return a, b

    for k, el in enumerate(netlist.elements):
        add(k, el.node_a, el.node_b)
    while work:
        node = work.pop()
        if node in (port_a, port_b):
            continue
        touching = incident[node]
        if len(touching) == 1:  # hangs from this node alone: no current flows in it
            (slot,) = touching
            a, b = remove(slot)
            work.append(b if a == node else a)
        elif len(touching) == 2:
            first, second = sorted(touching)
            far = [x if y == node else y for x, y in (remove(first), remove(second))]
            steps.append(("series", first, second))
            slot, next_slot = next_slot, next_slot + 1
            add(slot, far[0], far[1])
    root = between.get(frozenset((port_a, port_b)))
    if root is None or len(ends) != 1:
        return None
    return ReductionPlan(len(netlist.elements), tuple(steps), root)


#: Complex values per block of rows evaluated at once: temporaries of this size stay in the
#: processor's caches (one pass over a whole (16 000 x 107) sweep was 3x slower, measured).
BLOCK_VALUES = 65_536


def reduced_impedance(netlist: Netlist, plan: ReductionPlan, omega: np.ndarray) -> ComplexArray:
    """Port impedance, ohm, (n_variant, n_freq), of ``netlist`` at angular frequencies
    ``omega`` (n_variant or 1, n_freq) rad/s, by the joins of ``plan``, a block of variants at
    a time (`BLOCK_VALUES`).

    Element values must be > 0 (a zero R or L, or a zero C, is a short or an open that the
    reciprocals cannot carry: the caller solves such variants by nodal analysis).
    """
    omega = np.asarray(omega, dtype=float)
    n_var = max(netlist.n_variant, omega.shape[0])
    n_freq = omega.shape[1]
    values = [(el, _column(el.value), None if el.c_total is None else _column(el.c_total))
              for el in netlist.elements]
    out = np.empty((n_var, n_freq), dtype=complex)
    step = max(1, BLOCK_VALUES // max(n_freq, 1))
    for start in range(0, n_var, step):
        rows = slice(start, min(start + step, n_var))
        w = omega if omega.shape[0] == 1 else omega[rows]
        out[rows] = _evaluate(plan, [(el, v[rows] if v.shape[0] > 1 else v,
                                      None if c is None else (c[rows] if c.shape[0] > 1 else c))
                                     for el, v, c in values], w)
    return out


def _column(value: object) -> np.ndarray:
    """An element value as a column: (n_var, 1), or (1, 1) when shared by every variant."""
    return np.asarray(value, dtype=float).reshape(-1, 1)


def _evaluate(plan: ReductionPlan, elements: list[tuple[Element, np.ndarray, np.ndarray | None]],
              omega: np.ndarray) -> ComplexArray:
    """The joins of ``plan`` on element values given as columns, at ``omega``."""
    # each slot holds its impedance ("z") or its admittance ("y"), whichever its last join
    # gave, so a value is inverted only when the next join needs the other form
    slots: dict[int, tuple[str, ComplexArray]] = {}
    for k, (el, val, c) in enumerate(elements):
        if el.kind == "R":
            slots[k] = ("z", val + 0j)
        elif el.kind == "L":
            slots[k] = ("z", 1j * omega * val)
        elif el.kind == "C":
            slots[k] = ("y", 1j * omega * val)
        else:
            assert c is not None  # an RC line always has its capacitance
            slots[k] = ("z", rc_line_impedance(val, c, omega, el.contacted_ends))

    def as_form(slot: int, form: str) -> ComplexArray:
        have, value = slots.pop(slot)
        return value if have == form else 1.0 / value

    new = plan.n_elements
    for op, a, b in plan.steps:
        form = "z" if op == "series" else "y"
        slots[new] = (form, as_form(a, form) + as_form(b, form))
        new += 1
    return as_form(plan.root, "z")  # broadcasts to the block's (rows, n_freq)
