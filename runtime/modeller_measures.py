"""The measures modellers judge a scheme by, read off the runs `verify` makes.

Nothing here runs a kernel: each measure is derived from a harness result that
runtime/measurements.py produced for verify (the convergence ladder, the shape
runs of the square wave and the mixed profile, the conservation runs, the
stability sweep), so compare and verify report the same runs. Definitions (also
in the README):

- peak retained: the smooth bell's maximum after one revolution on N cells as a
  fraction of its initial maximum (cell averages, above the background level);
- front width: cells between the 10 % and 90 % levels of the square wave's jump
  after one revolution, with the profile linear between cell centres; walking from
  the low side across each front, from the last crossing of 10 % before the
  profile first reaches 90 % to that first 90 % crossing; the wider of its fronts;
- overshoot and undershoot: how far the solution went above its initial maximum
  and below its initial minimum at any step (square wave and mixed profile), as
  a fraction of the initial range;
- measured stability limit: the upper edge of the Courant numbers measured stable
  from near 0 (the sweep's bisected edge);
- mass drift: the larger relative drift of the total in a steady and a
  sign-changing flow.
A run that stopped gives no value; `stopped` says "diverged at step k".
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import harness
from .measurements import Measurements
from .rules import measured_set_text

LOW_LEVEL, HIGH_LEVEL = 0.1, 0.9

UNITS = {
    "cost": "seconds per cell-update (one whole step on one cell)",
    "speed": "million cell-updates per second (at the median cost)",
    "errors": "normalised l1, l2, linf errors after one revolution of the smooth bell",
    "peak_retained": "fraction of the initial maximum (smooth bell, one revolution)",
    "front_width": "cells (10 %-90 % of the square wave's jump, one revolution)",
    "overshoot": "fraction of the initial range (above the initial maximum, any step)",
    "undershoot": "fraction of the initial range (below the initial minimum, any step)",
    "stability_measured": "Courant number",
    "stages": "flux evaluations per step",
    "halo": "ghost cells per side",
    "mass_drift": "relative change of the total",
}


# ---- single measures -------------------------------------------------------------

def peak_retained(final: np.ndarray, initial: np.ndarray, background: float = 0.0) -> float:
    """max(final) / max(initial), both above `background`."""
    top = float(np.max(initial)) - background
    return (float(np.max(final)) - background) / top if top > 0 else float("nan")


def _crossing(values: np.ndarray, level: float, i: int) -> float:
    """Where the line from values[i] to values[i + 1] meets `level` (cells from index 0)."""
    a, b = float(values[i]), float(values[i + 1])
    return i + (level - a) / (b - a) if b != a else float(i)


def rise_width(values: np.ndarray, low: float, high: float) -> float | None:
    """Cells from the last 10 % crossing before the first 90 % crossing to that crossing,
    walking along `values` (from the low side towards the high side)."""
    lo = low + LOW_LEVEL * (high - low)
    hi = low + HIGH_LEVEL * (high - low)
    above_hi = np.nonzero(values >= hi)[0]
    if above_hi.size == 0 or above_hi[0] == 0:
        return None
    k = int(above_hi[0])                    # first value at or above 90 %
    x_hi = _crossing(values, hi, k - 1)
    below_lo = np.nonzero(values[:k] <= lo)[0]
    if below_lo.size == 0:
        return None
    j = int(below_lo[-1])                   # last value at or below 10 % before it
    x_lo = _crossing(values, lo, j)
    return x_hi - x_lo


def front_width(final: np.ndarray, exact: np.ndarray) -> float | None:
    """The widest 10 %-90 % front of `final`, its fronts located by where the exact
    solution crosses 50 %; each front is walked from the middle of its low plateau to
    the middle of its high plateau (periodic)."""
    low, high = float(np.min(exact)), float(np.max(exact))
    if high <= low:
        return None
    n = exact.size
    upper = exact >= (low + high) / 2
    fronts = [i for i in range(n) if upper[i] != upper[i - 1]]   # i - 1 wraps at 0
    if not fronts:
        return None
    widths = []
    for k, f in enumerate(fronts):
        before = fronts[k - 1] if len(fronts) > 1 else f - n
        after = fronts[(k + 1) % len(fronts)] if len(fronts) > 1 else f + n
        gap_before = (f - before) % n or n
        gap_after = (after - f) % n or n
        start, stop = f - gap_before // 2, f + (gap_after + 1) // 2
        window = np.take(final, np.arange(start, stop), mode="wrap")
        rising = upper[f]
        width = rise_width(window if rising else window[::-1], low, high)
        if width is None:
            return None
        widths.append(width)
    return max(widths)


def over_and_undershoot(shape: harness.Shape) -> tuple[float, float]:
    """How far the shape run went beyond its initial range at any step, as fractions of it."""
    lo, hi = shape.initial_bounds
    span = hi - lo
    seen_lo, seen_hi = shape.seen_bounds
    return max(0.0, seen_hi - hi) / span, max(0.0, lo - seen_lo) / span


def stopped_text(run) -> str | None:
    """'diverged at step k' or 'kernel fault at step k' for a run that stopped, else None."""
    fault = getattr(run, "fault_at", None)
    if fault is not None:
        return f"kernel fault at step {fault}"
    if run.diverged_at is not None:
        return f"diverged at step {run.diverged_at}"
    return None


# ---- all of them --------------------------------------------------------------------

@dataclass(frozen=True)
class StabilityMeasured:
    max: float | None          # upper edge of the stable run from near 0 (None: none)
    set: tuple[tuple[float, float], ...]
    text: str
    method: str

    def to_json(self) -> dict:
        return {"max": self.max, "set": [list(p) for p in self.set], "text": self.text,
                "method": self.method}


@dataclass(frozen=True)
class Measures:
    peak_retained: float | None
    front_width: float | None
    overshoot: float | None
    undershoot: float | None
    stability: StabilityMeasured | None
    stages: int
    halo: int
    mass_drift: float | None
    new_extrema: int
    bounded: bool
    square_l1: float | None
    stopped: dict = field(default_factory=dict)   # measure -> "diverged at step k"

    def to_json(self) -> dict:
        return {"peak_retained": self.peak_retained, "front_width": self.front_width,
                "overshoot": self.overshoot, "undershoot": self.undershoot,
                "stability_measured": self.stability.to_json() if self.stability else None,
                "stages": self.stages, "halo": self.halo, "mass_drift": self.mass_drift,
                "new_extrema": self.new_extrema, "bounded": self.bounded,
                "square_l1": self.square_l1, "stopped": dict(self.stopped)}


def bell_row(m: Measurements, cells: int) -> harness.ConvergenceRow:
    """The smooth bell's run on `cells` cells (the second smooth profile verify runs)."""
    bell = m.convergence[1]
    return next(r for r in bell.rows if r.n == cells)


def measures(m: Measurements, kernel, cells: int, background: float = 0.0) -> Measures:
    """Every measure, from verify's measurements of `kernel` (bell ladder includes `cells`)."""
    from .norms import errors

    stopped = {}
    bell = bell_row(m, cells)
    why = stopped_text(bell)
    peak = None
    if why:
        stopped["peak_retained"] = why
    else:
        # after a whole revolution the exact solution is the initial data
        peak = peak_retained(bell.final, bell.exact, background)
    square, mixed = m.shapes
    why = stopped_text(square)
    width = square_l1 = None
    if why:
        stopped["front_width"] = stopped["square_l1"] = why
    else:
        width = front_width(square.final, square.exact)
        square_l1 = errors(square.final, square.exact).l1
    over = under = None
    why = next((w for w in map(stopped_text, m.shapes) if w), None)
    if why:
        stopped["overshoot"] = stopped["undershoot"] = why
    else:
        pairs = [over_and_undershoot(sh) for sh in m.shapes]
        over, under = max(p[0] for p in pairs), max(p[1] for p in pairs)
    drift = None
    why = next((w for w in map(stopped_text, m.conservation) if w), None)
    if why:
        stopped["mass_drift"] = why
    else:
        drift = max(c.mass_drift for c in m.conservation)
    st = m.stability
    stability = None
    if st is not None:
        text = "grew at every c tried" if st.unstable_everywhere else measured_set_text(st)
        stability = StabilityMeasured(st.measured_max, st.measured, text, st.method)
    return Measures(peak, width, over, under, stability, getattr(kernel, "stages", 1),
                    kernel.halo, drift, max(sh.new_extrema for sh in m.shapes),
                    all(sh.bounded and sh.stopped_at is None for sh in m.shapes),
                    square_l1, stopped)
