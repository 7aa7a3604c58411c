"""Runge-Kutta steps as their authors print them.

The tests' reference for the time-method registry, which writes each method once,
as a table, and derives everything else from it: these formulas are written from
the publications (sources beside each, [mem] where recalled from memory), in the
authors' own arrangement, and share nothing with the registry.

operator(y) is dt L(y); ratio(a, b) builds a coefficient (Fraction for exact
arithmetic, true division for floats).
"""
from __future__ import annotations

from fractions import Fraction

PUBLISHED = ("euler", "ssp_rk2", "ssp_rk3", "rk4", "ws_rk3", "ssp_rk10_4")


def published_step(name: str, q, operator, ratio=Fraction):
    if name == "euler":
        return q + operator(q)
    if name == "ssp_rk2":  # Heun as convex combinations (Shu and Osher 1988 [mem])
        q1 = q + operator(q)
        return ratio(1, 2) * q + ratio(1, 2) * (q1 + operator(q1))
    if name == "ssp_rk3":  # Shu and Osher 1988, J. Comput. Phys. 77:439 (REFERENCE.md) [mem]
        q1 = q + operator(q)
        q2 = ratio(3, 4) * q + ratio(1, 4) * q1 + ratio(1, 4) * operator(q1)
        return ratio(1, 3) * q + ratio(2, 3) * q2 + ratio(2, 3) * operator(q2)
    if name == "rk4":  # classical Runge-Kutta (Kutta 1901; common practice)
        k1 = operator(q)
        k2 = operator(q + ratio(1, 2) * k1)
        k3 = operator(q + ratio(1, 2) * k2)
        k4 = operator(q + k3)
        return q + ratio(1, 6) * (k1 + 2 * k2 + 2 * k3 + k4)
    if name == "ws_rk3":   # Wicker and Skamarock 2002, Mon. Wea. Rev. 130:2088 [mem]
        q_star = q + ratio(1, 3) * operator(q)
        q_star2 = q + ratio(1, 2) * operator(q_star)
        return q + operator(q_star2)
    if name == "ssp_rk10_4":  # Ketcheson 2008, SIAM J. Sci. Comput. 30:2113, the
        q1 = q2 = q           # two-register pseudo-code [mem]
        for _ in range(5):
            q1 = q1 + ratio(1, 6) * operator(q1)
        q2 = ratio(1, 25) * q2 + ratio(9, 25) * q1
        q1 = 15 * q2 - 5 * q1
        for _ in range(4):
            q1 = q1 + ratio(1, 6) * operator(q1)
        return q2 + ratio(3, 5) * q1 + ratio(1, 10) * operator(q1)
    raise KeyError(f"no published formula for {name!r} in the tests")
