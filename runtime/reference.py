"""A slow reference evaluation of a scheme, independent of both emitters.

It reads the IR, turns the face expression into a scalar Python function with
sympy.lambdify (limiters expanded, params bound), and then does everything face
by face and cell by cell on a periodic domain, straight from the definitions:
the upwind frame, flux 0 where u == 0, the Runge-Kutta method in the plain
Shu-Osher form of its registry table (every stage kept, none of the kernels'
low-storage bookkeeping), Zalesak's flux correction and the post-step clamp.
Only tests and cross-checks use it; it is far too slow for real runs.
"""
from __future__ import annotations

import math

import numpy as np
import sympy

from fluxloom.compiler.ir import Scheme
from fluxloom.compiler.symbols import C, q
from fluxloom.compiler.time_methods import method


def _ratio(a, b):
    return a / b if b != 0 else 0.0


def _sign(x):
    return float((x > 0) - (x < 0))


_SCALAR_FUNCTIONS = {"Ratio": _ratio, "sign": _sign, "Abs": abs, "Min": min, "Max": max}


def scalar_face_function(scheme: Scheme, face: sympy.Expr):
    """g(q_k..., c) as a plain Python function of floats, over the scheme's offsets."""
    expr = scheme.expand_limiters(scheme.bound(face))
    arguments = [q(k) for k in scheme.offsets] + [C]
    return sympy.lambdify(arguments, expr, modules=[_SCALAR_FUNCTIONS, "math"])


class PeriodicReference:
    """One scheme on a periodic domain of n cells; face i is the left face of cell i."""

    def __init__(self, scheme: Scheme):
        self.scheme = scheme
        self.high = scalar_face_function(scheme, scheme.face)
        self.low = (scalar_face_function(scheme, scheme.low_face)
                    if scheme.low_face is not None else None)

    # ---- fluxes ------------------------------------------------------------
    def face_flux(self, g, values, u, dt_dx, i):
        """u * g at face i (between cells i - 1 and i), in the upwind frame."""
        if u == 0:
            return 0.0
        n = len(values)
        j = i - 1  # the face between cells j and j + 1
        # The upwind frame written out here on purpose, not read from compiler/upwind.py:
        # the tests hold the kernels against this stepper as an independent check.
        if u > 0:
            cells = [values[(j + k) % n] for k in self.scheme.offsets]
        else:
            cells = [values[(j + 1 - k) % n] for k in self.scheme.offsets]
        return u * g(*cells, abs(u) * dt_dx)

    def fluxes(self, g, values, u_face, dt_dx):
        return [self.face_flux(g, values, u_face[i], dt_dx, i) for i in range(len(values))]

    def rate(self, values, u_face, dt_dx):
        """dt * L(q) = -dt/dx (F(j+1/2) - F(j-1/2)) for every cell."""
        flux = self.fluxes(self.high, values, u_face, dt_dx)
        n = len(values)
        return [-dt_dx * (flux[(j + 1) % n] - flux[j]) for j in range(n)]

    # ---- time methods ------------------------------------------------------
    def step(self, values, u_face, dt_dx):
        if self.scheme.correct == "fct":
            new = self.fct_step(values, u_face, dt_dx)
        else:
            new = self.runge_kutta_step(values, u_face, dt_dx)
        if self.scheme.clip is not None:
            lo, hi = (float(v) for v in self.scheme.clip)
            new = [min(hi, max(lo, v)) for v in new]
        return new

    def runge_kutta_step(self, values, u_face, dt_dx):
        """Y_k = sum_j alpha[k][j] Y_j + beta[k][j] dt L(Y_j), Y_0 = q, Y_s the new q."""
        table = method(self.scheme.time)
        stages, rates = [values], []
        for alpha_row, beta_row in zip(table.alpha, table.beta):
            rates.append(self.rate(stages[-1], u_face, dt_dx))
            new = [0.0] * len(values)
            for j, (a, b) in enumerate(zip(alpha_row, beta_row)):
                a, b = float(a), float(b)
                if a:
                    new = _axpy(new, a, stages[j])
                if b:
                    new = _axpy(new, b, rates[j])
            stages.append(new)
        return stages[-1]

    def fct_step(self, values, u_face, dt_dx):
        """Zalesak (1979, J. Comput. Phys. 31:335): flux-corrected transport, one step.

        w_td is the low-order (transported and diffused) solution; A = F_high - F_low;
        P+/P- the antidiffusive inflow/outflow of a cell, Q+/Q- its room to the local
        bounds of w_old and w_td over the cell and its two neighbours, R+/R- = min(1, Q/P)
        (0 where P = 0); each face takes min(R+ of the cell it feeds, R- of the cell it drains).

        Written here from the paper on purpose, not printed from the kernels' plan
        (compiler/emit/fct_plan.py): the tests hold the kernels against this stepper, so
        it must not share their steps. It also shares none of their constants: on a
        periodic domain every neighbour is an index mod n, so there are no spans, halos
        or workspace offsets to keep in step with the plan.
        """
        n = len(values)
        low = self.fluxes(self.low, values, u_face, dt_dx)
        high = self.fluxes(self.high, values, u_face, dt_dx)
        w_td = [values[j] - dt_dx * (low[(j + 1) % n] - low[j]) for j in range(n)]
        anti = [high[i] - low[i] for i in range(n)]
        w_a = [max(values[j], w_td[j]) for j in range(n)]
        w_b = [min(values[j], w_td[j]) for j in range(n)]
        r_plus, r_minus = [], []
        for j in range(n):
            left, right = anti[j], anti[(j + 1) % n]
            w_max = max(w_a[(j - 1) % n], w_a[j], w_a[(j + 1) % n])
            w_min = min(w_b[(j - 1) % n], w_b[j], w_b[(j + 1) % n])
            p_plus = dt_dx * (max(0.0, left) - min(0.0, right))
            p_minus = dt_dx * (max(0.0, right) - min(0.0, left))
            q_plus = w_max - w_td[j]
            q_minus = w_td[j] - w_min
            r_plus.append(min(1.0, q_plus / p_plus) if p_plus > 0 else 0.0)
            r_minus.append(min(1.0, q_minus / p_minus) if p_minus > 0 else 0.0)
        corrected = []
        for i in range(n):  # face i between cells i - 1 and i
            if anti[i] >= 0:
                factor = min(r_plus[i], r_minus[(i - 1) % n])
            else:
                factor = min(r_plus[(i - 1) % n], r_minus[i])
            corrected.append(factor * anti[i])
        return [w_td[j] - dt_dx * (corrected[(j + 1) % n] - corrected[j]) for j in range(n)]


def _axpy(x, a, y):
    return [xi + a * yi for xi, yi in zip(x, y)]


def reference_run(scheme: Scheme, q_interior, u_face, dt_dx: float, steps: int) -> np.ndarray:
    """Advance the interior `steps` times on a periodic domain; float64 result.

    u_face has n + 1 entries like a kernel's (u_face[i] is the left face of cell i);
    u_face[n] must equal u_face[0].
    """
    values = [float(v) for v in np.asarray(q_interior, dtype=np.float64)]
    u = [float(v) for v in np.asarray(u_face, dtype=np.float64)]
    if len(u) != len(values) + 1:
        raise ValueError(f"u_face needs {len(values) + 1} entries, has {len(u)}")
    if u[-1] != u[0]:
        raise ValueError("on a periodic domain u_face[n] must equal u_face[0]")
    model = PeriodicReference(scheme)
    dt_dx = float(dt_dx)
    for _ in range(steps):
        values = model.step(values, u, dt_dx)
        if not all(math.isfinite(v) for v in values):
            break
    return np.array(values, dtype=np.float64)
