"""Amplitude and phase error at a few resolutions, at one Courant number.

For a mode of N cells per wavelength, theta = 2 pi / N; one step multiplies it
by G(c, theta) where the exact solution multiplies it by exp(-i c theta). A
wavelength is travelled in N / c steps.
"""
from __future__ import annotations

import cmath
import math
from dataclasses import dataclass

import sympy

from ..symbols import C
from .symbol import LinearScheme

CELLS_PER_WAVELENGTH = (4, 8, 16, 32)


@dataclass(frozen=True)
class DispersionRow:
    cells_per_wavelength: int
    theta: float
    amplitude_per_step: float            # |G|
    phase_error_per_step: float          # arg G + c theta, radians (positive: lags)
    relative_phase_speed: float          # -arg G / (c theta); 1 is exact
    amplitude_per_wavelength: float      # |G|^(N / c)
    phase_error_per_wavelength: float    # radians after N / c steps


@dataclass(frozen=True)
class Dispersion:
    label: str
    courant: float
    rows: tuple[DispersionRow, ...]


def analyse_dispersion(scheme: LinearScheme, courant: float) -> Dispersion | None:
    """The table at `courant`; None where |G| overflows a double there (a huge c)."""
    g = sympy.lambdify(sympy.Symbol("z"), scheme.amplification.subs(C, sympy.nsimplify(courant)),
                       modules="math")
    rows = []
    for n in CELLS_PER_WAVELENGTH:
        theta = 2 * math.pi / n
        try:
            value = complex(g(cmath.exp(1j * theta)))
        except (OverflowError, ZeroDivisionError):
            return None
        if not (math.isfinite(value.real) and math.isfinite(value.imag)):
            return None
        exact = -courant * theta
        phase = cmath.phase(value) if value != 0 else 0.0
        # The branch of arg G nearest the exact phase (c theta can exceed pi).
        phase += 2 * math.pi * round((exact - phase) / (2 * math.pi))
        steps = n / courant
        amplitude = abs(value)
        try:
            per_wavelength = amplitude ** steps
        except OverflowError:
            return None
        if not math.isfinite(per_wavelength * (phase - exact) * steps):
            return None
        rows.append(DispersionRow(n, theta, amplitude, phase - exact,
                                  -phase / (courant * theta), per_wavelength,
                                  (phase - exact) * steps))
    return Dispersion(scheme.label, courant, tuple(rows))
