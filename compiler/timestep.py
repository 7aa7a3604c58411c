"""Runge-Kutta methods as the stage updates a kernel performs.

Every method here is written so that one stage reads only the start-of-step
state, the current stage state and (for classical RK4) one accumulator, which
is what a kernel with caller-owned arrays and host halo exchange needs:

    dL      = dt * L(q_stage)              L(q)_j = -(F_{j+1/2} - F_{j-1/2}) / dx
    q_out   = start * q_start + stage * q_stage + rate * dL + acc * accumulator
    accumulator <- acc_start * q_start + acc_keep * accumulator + acc_rate * dL

SSP-RK2 and SSP-RK3 are in Shu-Osher form (convex combinations of forward
Euler steps), so no accumulator is needed; classical RK4 keeps the weighted
sum of its stage derivatives in the accumulator.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

S = sympy.Rational


@dataclass(frozen=True)
class StageUpdate:
    """One stage: q_out and (optionally) the accumulator as combinations above."""

    start: sympy.Rational
    stage: sympy.Rational
    rate: sympy.Rational
    acc: sympy.Rational = S(0)
    accumulates: bool = False
    acc_start: sympy.Rational = S(0)
    acc_keep: sympy.Rational = S(0)
    acc_rate: sympy.Rational = S(0)


_EULER = (StageUpdate(S(0), S(1), S(1)),)

# Heun's method as a convex combination: q1 = q + dL(q); q+ = q/2 + (q1 + dL(q1))/2.
_SSP_RK2 = (
    StageUpdate(S(0), S(1), S(1)),
    StageUpdate(S(1, 2), S(1, 2), S(1, 2)),
)

# Shu-Osher SSP-RK3: q1 = q + dL(q); q2 = 3/4 q + 1/4 q1 + 1/4 dL(q1);
# q+ = 1/3 q + 2/3 q2 + 2/3 dL(q2).
_SSP_RK3 = (
    StageUpdate(S(0), S(1), S(1)),
    StageUpdate(S(3, 4), S(1, 4), S(1, 4)),
    StageUpdate(S(1, 3), S(2, 3), S(2, 3)),
)

# Classical RK4: stage states q + dt/2 k1, q + dt/2 k2, q + dt k3; the
# accumulator gathers q + dt (k1 + 2 k2 + 2 k3) / 6 and the last stage adds k4/6.
_RK4 = (
    StageUpdate(S(1), S(0), S(1, 2), accumulates=True, acc_start=S(1), acc_rate=S(1, 6)),
    StageUpdate(S(1), S(0), S(1, 2), accumulates=True, acc_keep=S(1), acc_rate=S(1, 3)),
    StageUpdate(S(1), S(0), S(1), accumulates=True, acc_keep=S(1), acc_rate=S(1, 3)),
    StageUpdate(S(0), S(0), S(1, 6), acc=S(1)),
)

STAGE_UPDATES: dict[str, tuple[StageUpdate, ...]] = {
    "euler": _EULER,
    "ssp_rk2": _SSP_RK2,
    "ssp_rk3": _SSP_RK3,
    "rk4": _RK4,
}


def stage_updates(method: str) -> tuple[StageUpdate, ...]:
    """The stage updates of a time method named in a spec."""
    return STAGE_UPDATES[method]


def uses_accumulator(method: str) -> bool:
    return any(s.accumulates for s in STAGE_UPDATES[method])


def stability_polynomial(method: str) -> sympy.Expr:
    """R(z): one step of the stage updates applied to q' = lambda q, z = lambda dt."""
    z = sympy.Symbol("z")
    start, accumulator = sympy.Integer(1), sympy.Integer(0)
    current = start
    for s in STAGE_UPDATES[method]:
        rate = z * current
        out = s.start * start + s.stage * current + s.rate * rate + s.acc * accumulator
        if s.accumulates:
            accumulator = s.acc_start * start + s.acc_keep * accumulator + s.acc_rate * rate
        current = out
    return sympy.expand(current)
