"""Every time method a spec can name (`time NAME`), one table each.

This is the only place a method's coefficients are written. Add a method by
adding one entry (Shu-Osher rows with `shu_osher`, or a Butcher tableau with
`butcher`); its R(z), orders, SSP coefficient, the kernels' stage updates and
the reference stepper all follow. The stage updates keep as few arrays
between stages as the rows allow: a row that reads only q, the previous stage
and its operator needs none, so write SSP methods in their Shu-Osher form.
"""
from __future__ import annotations

from .table import TimeMethod, butcher, shu_osher

METHODS: dict[str, TimeMethod] = {m.name: m for m in (
    butcher("euler", "forward Euler", [], [1]),

    # Y1 = q + dL(q); q_new = q/2 + Y1/2 + dL(Y1)/2 (Heun's method as convex combinations)
    shu_osher("ssp_rk2", "two-stage SSP Runge-Kutta (Heun)",
              alpha=[[1], ["1/2", "1/2"]],
              beta=[[1], [0, "1/2"]]),

    # Shu and Osher (1988): Y1 = q + dL(q); Y2 = 3/4 q + 1/4 Y1 + 1/4 dL(Y1);
    # q_new = 1/3 q + 2/3 Y2 + 2/3 dL(Y2)
    shu_osher("ssp_rk3", "three-stage third-order SSP Runge-Kutta (Shu-Osher form)",
              alpha=[[1], ["3/4", "1/4"], ["1/3", 0, "2/3"]],
              beta=[[1], [0, "1/4"], [0, 0, "2/3"]]),

    butcher("rk4", "classical fourth-order Runge-Kutta (not SSP)",
            a=[["1/2"], [0, "1/2"], [0, 0, 1]],
            b=["1/6", "1/3", "1/3", "1/6"]),

    # Wicker and Skamarock (2002): q* = q + dt/3 L(q); q** = q + dt/2 L(q*);
    # q_new = q + dt L(q**)
    butcher("ws_rk3", "three-stage Runge-Kutta of Wicker and Skamarock (third order on "
            "linear problems, second order otherwise; not SSP)",
            a=[["1/3"], [0, "1/2"]],
            b=[0, 0, 1]),

    # Ketcheson (2008), SSPRK(10,4): five forward-Euler steps of dt/6, Y5 mixes the
    # start back in, four more steps of dt/6, and q_new combines q, Y4 and Y9.
    shu_osher("ssp_rk10_4", "ten-stage fourth-order SSP Runge-Kutta, low storage (Ketcheson)",
              alpha=[[1], [0, 1], [0, 0, 1], [0, 0, 0, 1],
                     ["3/5", 0, 0, 0, "2/5"],
                     [0, 0, 0, 0, 0, 1], [0] * 6 + [1], [0] * 7 + [1], [0] * 8 + [1],
                     ["1/25", 0, 0, 0, "9/25", 0, 0, 0, 0, "3/5"]],
              beta=[["1/6"], [0, "1/6"], [0, 0, "1/6"], [0, 0, 0, "1/6"],
                    [0, 0, 0, 0, "1/15"],
                    [0] * 5 + ["1/6"], [0] * 6 + ["1/6"], [0] * 7 + ["1/6"], [0] * 8 + ["1/6"],
                    [0, 0, 0, 0, "3/50", 0, 0, 0, 0, "1/10"]]),
)}
