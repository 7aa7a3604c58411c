"""`verify --grid stretched|perturbed`: convergence on non-uniform cells, beside the uniform grid.

A smooth profile (sin 2 pi x) is carried once round the periodic unit interval by the
generated sweep with per-cell dt/dx (runtime/grids.py builds the grids and their exact
cell averages). The observed orders are reported for the uniform grid and for each
non-uniform one, with what is lost.

What the findings hold the kernel to:
- smoothly stretched grids (x = s + a sin(2 pi s) / (2 pi), a = 0.2 and 0.4): the spec's
  coefficients are used in index space, so neighbouring widths differ by O(h^2) and a
  scheme of order p keeps min(p, 2) (common practice, no source: the index-space
  truncation error of a smooth mapping);
- randomly perturbed widths (10 %): the local truncation error of a flux difference is
  only first order, yet the error of many finite-volume schemes still converges at
  second order (supraconvergence: Kreiss, Manteuffel, Swartz, Wendroff and White 1986,
  Math. Comp. 47:537; Wendroff and White 1989, Comput. Math. Appl. 18:761; citations from
  memory). "Many" is not every scheme, so this is measured and reported, not claimed.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fluxloom.compiler import LoomError

from .array_sweep import fill_periodic_axis
from .grids import STRETCHINGS, Grid, grid_convergence
from .prediction import Prediction
from .measurements import in_clip_range
from .profiles import SINE
from .rules import (AGREE, DISAGREE, LIMITED_ORDER_TOL, LINEAR_ORDER_TOL, NO_CLAIM, Finding,
                    expected_order, fmt)

CELLS = (32, 64, 128, 256)
KINDS = ("stretched", "perturbed")


@dataclass(frozen=True)
class GridRun:
    grid: str                  # "uniform", "stretched (a = 0.2)", ...
    cells: tuple[int, ...]
    l1: tuple[float, ...]
    l2: tuple[float, ...]
    linf: tuple[float, ...]
    orders: dict               # per norm, one per successive pair

    def to_json(self) -> dict:
        return {"grid": self.grid, "cells": list(self.cells), "l1": list(self.l1),
                "l2": list(self.l2), "linf": list(self.linf),
                "orders": {k: list(v) for k, v in self.orders.items()}}


@dataclass(frozen=True)
class GridVerification:
    kind: str
    courant: float
    runs: tuple[GridRun, ...]          # uniform first
    findings: tuple[Finding, ...]

    def to_json(self) -> dict:
        return {"kind": self.kind, "courant": self.courant, "profile": SINE.name,
                "runs": [r.to_json() for r in self.runs]}


def width_aware_advance(kernel):
    """advance(q0, grid, velocity, dt, steps) for runtime/grids.grid_convergence: the
    kernel's sweep on a periodic line with per-cell dt/dx."""
    h = kernel.halo
    dtype = kernel.dtype

    def advance(q0: np.ndarray, grid: Grid, velocity: float, dt: float, steps: int):
        n = grid.n
        ratio = grid.dt_dx(dt)
        d = np.concatenate((ratio[-1:], ratio, ratio[:1])).astype(dtype)   # cells -1 .. n
        u = np.full(n + 1, velocity, dtype)
        q = np.zeros(n + 2 * h, dtype)
        q[h:h + n] = q0
        out = q.copy()
        for _ in range(steps):
            fill_periodic_axis(q, 0, h)
            kernel.sweep(q, u, d, 0, out=out)
            q, out = out, q
        return q[h:h + n].astype(float)

    return advance


def check_grid_kernel(kernel, kind: str) -> None:
    if not kernel.sweep_widths:
        raise LoomError(f"--grid {kind}: a flux-corrected kernel takes one dt/dx; per-cell "
                        "widths need a scheme without flux correction", file="--grid")


def verify_grids(kernel, prediction: Prediction, kind: str, courant: float, cells=CELLS,
                 progress=None) -> GridVerification:
    check_grid_kernel(kernel, kind)
    say = progress or (lambda message: None)
    advance = width_aware_advance(kernel)
    settings = [("uniform", STRETCHINGS[0])]
    settings += [("stretched", a) for a in STRETCHINGS] if kind == "stretched" else \
        [("perturbed", STRETCHINGS[0])]
    profile = in_clip_range(SINE, prediction.clip)    # a clamped scheme: inside its range
    runs = []
    for grid_kind, stretching in settings:
        say(f"{grid_kind} grid, N = {', '.join(map(str, cells))}")
        found = grid_convergence(advance, profile, grid_kind, tuple(cells), courant,
                                 stretching=stretching)
        runs.append(GridRun(found.kind, found.cells, tuple(e.l1 for e in found.errors),
                            tuple(e.l2 for e in found.errors),
                            tuple(e.linf for e in found.errors), found.orders))
    findings = tuple(_finding(run, runs[0], prediction, courant) for run in runs[1:])
    return GridVerification(kind, courant, tuple(runs), findings)


def with_grids(verification, grids: GridVerification):
    import dataclasses
    return dataclasses.replace(verification,
                               findings=tuple(verification.findings) + grids.findings)


def _finest(run: GridRun) -> float:
    return run.orders["l1"][-1] if run.orders["l1"] else float("nan")


def _finding(run: GridRun, uniform: GridRun, prediction: Prediction, courant: float) -> Finding:
    observed, base = _finest(run), _finest(uniform)
    lost = base - observed if math.isfinite(observed) and math.isfinite(base) else float("nan")
    context = (f"{run.grid} grid, {SINE.name}, c <= {fmt(courant)}, "
               f"N = {run.cells[0]}..{run.cells[-1]}")
    values = {"grid": run.grid, "observed_order": observed, "uniform_order": base,
              "order_lost": lost, "pair_orders": run.orders["l1"]}
    measured = (f"l1 order {fmt(observed)} (uniform {fmt(base)}; lost {fmt(lost)}; pairs: "
                f"{', '.join(fmt(o) for o in run.orders['l1'])})")
    if run.grid.startswith("perturbed"):
        return Finding("grid convergence", context,
                       "no claim: on random widths the local truncation error is first order, "
                       "yet many finite-volume schemes converge at second order "
                       "(supraconvergence, Kreiss et al. 1986; Wendroff and White 1989)",
                       measured, NO_CLAIM, values)
    stability = prediction.claims.stability
    if not stability.decided:
        return Finding("grid convergence", context, "no claim: stability undecided", measured,
                       NO_CLAIM, values)
    if not any(p.lo <= 1e-12 and p.hi >= courant - 1e-12 for p in stability.stable.parts):
        # cells of a non-uniform grid see every Courant number up to the largest
        return Finding("grid convergence", context, "no claim: not claimed stable for every "
                       f"Courant number up to {fmt(courant)}", measured, NO_CLAIM, values)
    order = prediction.order
    if order is None:
        return Finding("grid convergence", context, "no claim: order undecided", measured,
                       NO_CLAIM, values)
    expected = min(expected_order(SINE, order, prediction.clips_extrema), 2.0)
    nonlinear = not prediction.claims.linear or prediction.fct
    tol = LIMITED_ORDER_TOL if nonlinear else LINEAR_ORDER_TOL
    values["predicted_order"] = expected
    predicted = (f"order min({order}, 2) on a smoothly stretched grid (index-space "
                 f"coefficients)" + (f", at most {fmt(expected)} where extrema are flattened"
                                     if expected < min(order, 2) else "")
                 + f"; l1 order at least {fmt(expected - tol)} on the finest pair")
    ok = math.isfinite(observed) and observed >= expected - tol
    return Finding("grid convergence", context, predicted, measured,
                   AGREE if ok else DISAGREE, values)


def grids_text(grids: GridVerification) -> str:
    lines = [f"convergence on non-uniform grids ({SINE.name}, once round, c <= "
             f"{fmt(grids.courant)}): l1 errors and observed orders"]
    for run in grids.runs:
        errors = ", ".join(f"{e:.3e}" for e in run.l1)
        orders = ", ".join(fmt(o) for o in run.orders["l1"])
        lines.append(f"  {run.grid:<22} N = {', '.join(map(str, run.cells))}: l1 {errors}; "
                     f"orders {orders}")
    return "\n".join(lines) + "\n"
