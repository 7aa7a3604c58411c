"""A method's table as the stage updates a kernel performs with few arrays.

A kernel stage reads the step's start q_start, the current stage state q_stage
(stage i holds Y_i) and its own workspace; it evaluates dL = dt L(q_stage) and
writes Y_{i+1}. Whatever Y_{i+1} needs beyond q_start, q_stage and dL (earlier
stages, earlier operator values) must wait in workspace *registers*, arrays of
n values kept from stage to stage. They are derived from the Shu-Osher rows:

- after stage i, each later Y_k (k >= i + 2) has a pending part
  P_k = sum_{j <= i} alpha[k][j] Y_j + beta[k][j] dL_j (q_start's share excluded,
  it is always at hand);
- the registers after stage i hold a basis of those P_k (chosen among them,
  a register keeping its target while that target still needs it), and each
  P_k is a fixed combination of the registers;
- stage i writes Y_{i+1} = alpha[i+1][0] q_start + alpha[i+1][i] Y_i
  + beta[i+1][i] dL + P_{i+1} (from the registers as they were), then the new
  registers, each from the old ones, Y_i and dL.

So a Shu-Osher row reading only q, the previous stage and its operator costs no
register (SSP-RK2, SSP-RK3), classical RK4 needs one (its weighted sum of
stage derivatives), and SSPRK(10,4) one (what its last stage takes from Y4).
Writes happen after the output, in register order; a register whose old value a
later write still reads is `saved` in a local first.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import sympy

from .registry import METHODS
from .table import TimeMethod

_ZERO = sympy.Integer(0)


@dataclass(frozen=True)
class Combination:
    """start * q_start + stage * q_stage + rate * dt L(q_stage) + sum weight * register
    (registers as they were when the stage began)."""

    start: sympy.Rational = _ZERO
    stage: sympy.Rational = _ZERO
    rate: sympy.Rational = _ZERO
    registers: tuple[tuple[int, sympy.Rational], ...] = ()   # (register, weight)

    def reads(self) -> frozenset[int]:
        return frozenset(k for k, _ in self.registers)


@dataclass(frozen=True)
class StageUpdate:
    """One stage: q_out, then each register in `writes` (in order)."""

    out: Combination
    writes: tuple[tuple[int, Combination], ...] = ()
    saved: tuple[int, ...] = ()   # registers to copy before the writes (read after overwritten)


@dataclass(frozen=True)
class LowStorageForm:
    updates: tuple[StageUpdate, ...]
    registers: int

    @property
    def uses_start(self) -> bool:
        combos = [u.out for u in self.updates] + [c for u in self.updates for _, c in u.writes]
        return any(c.start != 0 for c in combos)


def _atoms(stages: int):
    """Y_1 .. Y_{s-1} and dL_0 .. dL_{s-1}: the quantities a pending part is made of."""
    atoms = [("Y", j) for j in range(1, stages)] + [("dL", j) for j in range(stages)]
    return {atom: i for i, atom in enumerate(atoms)}


@lru_cache(maxsize=None)
def derive(method: TimeMethod) -> LowStorageForm:
    s = method.stages
    index = _atoms(s)

    def contribution(target: int, j: int) -> sympy.Matrix:
        """What stage j adds to Y_target, q_start's share aside."""
        vector = sympy.zeros(len(index), 1)
        if j >= 1:
            vector[index[("Y", j)]] = method.alpha[target - 1][j]
        vector[index[("dL", j)]] = method.beta[target - 1][j]
        return vector

    pending: dict[int, sympy.Matrix] = {}     # target -> its pending part, after the last stage
    slots: dict[int, int] = {}                # register -> the target whose part it holds
    updates = []
    for i in range(s):
        target = i + 1
        a_row, b_row = method.alpha[target - 1], method.beta[target - 1]
        if i == 0:   # q_stage is q_start: its weight goes on the stage (forward Euler reads q_stage)
            out = Combination(stage=a_row[0], rate=b_row[0])
        else:
            out = Combination(start=a_row[0], stage=a_row[i], rate=b_row[i],
                              registers=_express(pending.get(target), pending, slots))
        new_pending = {}
        for later in range(i + 2, s + 1):
            vector = pending.get(later, sympy.zeros(len(index), 1)) + contribution(later, i)
            if any(v != 0 for v in vector):
                new_pending[later] = vector
        new_slots = _choose_registers(new_pending, slots)
        writes = []
        for slot in sorted(new_slots):
            later = new_slots[slot]
            old = _express(pending.get(later), pending, slots)
            combo = Combination(stage=method.alpha[later - 1][i] if i else _ZERO,
                                rate=method.beta[later - 1][i], registers=old)
            if combo == Combination(registers=((slot, sympy.Integer(1)),)):
                continue   # the register already holds it
            writes.append((slot, combo))
        updates.append(StageUpdate(out, tuple(writes), _saved(writes)))
        pending, slots = new_pending, new_slots
    count = 1 + max((slot for u in updates for slot, _ in u.writes), default=-1)
    return LowStorageForm(tuple(updates), count)


def _choose_registers(pending: dict[int, sympy.Matrix], slots: dict[int, int]) -> dict[int, int]:
    """A basis of the pending parts, chosen among them: targets that already own a
    register keep it; the others take the lowest free registers."""
    kept_first = [t for _, t in sorted(slots.items()) if t in pending]
    order = kept_first + [t for t in sorted(pending) if t not in kept_first]
    basis: list[int] = []
    for t in order:
        candidate = sympy.Matrix.hstack(*[pending[b] for b in basis], pending[t])
        if candidate.rank() == len(basis) + 1:
            basis.append(t)
    chosen = {slot: t for slot, t in slots.items() if t in basis}
    free = (k for k in range(len(pending) + len(slots) + 1) if k not in chosen)
    for t in basis:
        if t not in chosen.values():
            chosen[next(free)] = t
    return chosen


def _express(vector, pending: dict[int, sympy.Matrix], slots: dict[int, int]):
    """vector as (register, weight) pairs over the registers holding `slots`' parts."""
    if vector is None or all(v == 0 for v in vector):
        return ()
    order = sorted(slots)
    columns = sympy.Matrix.hstack(*[pending[slots[k]] for k in order])
    solution, free = columns.gauss_jordan_solve(vector)
    if free.shape[0]:
        raise AssertionError("registers must be linearly independent")
    return tuple((k, w) for k, w in zip(order, solution) if w != 0)


def _saved(writes) -> tuple[int, ...]:
    written, saved = set(), set()
    for slot, combo in writes:
        saved |= combo.reads() & written
        written.add(slot)
    return tuple(sorted(saved))


def low_storage_form(name: str) -> LowStorageForm:
    """The stage updates of a registered method."""
    return derive(METHODS[name])
