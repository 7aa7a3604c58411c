"""Every measurement `verify` makes on one kernel, planned from the prediction.

The prediction decides only what is run, never how it is judged: profiles
that fit inside a clamp's range, spectral or growth probes of stability, and
the Courant numbers probed (covering the predicted stable set, its complement
and its islands). runtime/rules.py judges the results.
"""
from __future__ import annotations

from dataclasses import dataclass

from . import harness
from .prediction import Prediction
from .profiles import BELL, DISCONTINUOUS, MIXED, SINE, Profile

SMOOTH = (SINE, BELL)


@dataclass(frozen=True)
class Options:
    courant: float = 0.5
    velocity: str = "+1"                       # "+1", "-1" or "varying"
    cells: tuple[int, ...] = harness.CONVERGENCE_CELLS
    shape_cells: int = 100
    conservation_steps: int = 200
    stability: bool = True

    @property
    def sign(self) -> float:
        return -1.0 if self.velocity == "-1" else 1.0

    def check_size(self) -> None:
        """Refuse (LoomError) runs whose work is unbounded (tiny Courant numbers)."""
        for n in (max(self.cells), self.shape_cells):
            harness.check_run_size(n, self.courant)


@dataclass(frozen=True)
class Measurements:
    convergence: tuple[harness.Convergence, ...]   # SMOOTH, in order
    shapes: tuple[harness.Shape, ...]              # DISCONTINUOUS, in order
    conservation: tuple[harness.Conservation, ...]  # constant velocity, then varying
    mirror: harness.Mirror
    stability: harness.Stability | None


def in_clip_range(profile: Profile, clip) -> Profile:
    """A profile that sticks out of a clamp's range is mapped onto it, so the clamp does
    not judge the data instead of the scheme."""
    if clip is not None and (profile.low < clip[0] or profile.high > clip[1]):
        return profile.scaled(*clip)
    return profile


def mass_tolerance(precision: str) -> float:
    return 1e-12 if precision == "double" else 1e-5


def measure(kernel, prediction: Prediction, options: Options = Options(),
            progress=None) -> Measurements:
    """Run every measurement on `kernel`."""
    say = progress or (lambda message: None)
    options.check_size()
    c, sign, clip = options.courant, options.sign, prediction.clip

    say("convergence")
    convergence = tuple(harness.convergence(kernel, in_clip_range(p, clip), c, sign, options.cells)
                        for p in SMOOTH)
    say("bounds, extrema and total variation")
    shapes = tuple(harness.shape(kernel, in_clip_range(p, clip), c, sign, options.shape_cells)
                   for p in DISCONTINUOUS)
    say("conservation")
    conservation = tuple(
        harness.conservation(kernel, in_clip_range(MIXED, clip), c, v, options.shape_cells,
                             options.conservation_steps)
        for v in ("-1" if sign < 0 else "+1", "varying"))
    say("velocity sign symmetry")
    mirror = harness.mirror_run(kernel, in_clip_range(MIXED, clip), min(c, 1.0))
    stability = None
    if options.stability:
        say("stability sweep")
        spectral = prediction.spectral
        courants = prediction.probe_courants(spectral=spectral)
        if c <= max(courants):       # the runs' own Courant number is probed too
            courants = courants + (c,)
        stability = harness.stability_sweep(kernel, courants, sign, linear=spectral, clip=clip,
                                            amplitude=prediction.probe_amplitude)
    return Measurements(convergence, shapes, conservation, mirror, stability)
