"""Hand-written kernels `fluxloom bench` measures generated code against.

handwritten.c: straightforward C for first-order upwind, Lax-Wendroff and van
Leer limited Lax-Wendroff, plus two streaming references: a sweep that reads a
step's inputs (state and face velocities) and writes its output once each (the
memory-bandwidth ceiling of any one-sweep step), and a plain copy of the state.
handwritten_numpy.py: the same three schemes as idiomatic whole-array numpy.

`counterpart(scheme)` says which hand-written kernel computes the same thing as
a scheme, by evaluating the face expressions at random points, so a spec with
another name or another but equivalent way of writing the flux still matches.
"""
from __future__ import annotations

from dataclasses import dataclass
from importlib import resources

import numpy as np
import sympy

from fluxloom.compiler.symbols import C, Ratio, q

from . import handwritten_numpy


@dataclass(frozen=True)
class Counterpart:
    name: str
    halo: int
    c_function: str
    numpy_step: object
    face: sympy.Expr


def _vanleer(r):
    return (r + sympy.Abs(r)) / (1 + sympy.Abs(r))


_JUMP = q(1) - q(0)
COUNTERPARTS = (
    Counterpart("upwind", 1, "hand_upwind_step", handwritten_numpy.upwind_step, q(0)),
    Counterpart("lax_wendroff", 1, "hand_lax_wendroff_step", handwritten_numpy.lax_wendroff_step,
                q(0) + (1 - C) / 2 * _JUMP),
    Counterpart("lw_vanleer", 2, "hand_lw_vanleer_step", handwritten_numpy.lw_vanleer_step,
                q(0) + (1 - C) / 2 * _vanleer(Ratio(q(0) - q(-1), _JUMP)) * _JUMP),
)

_SYMBOLS = (q(-1), q(0), q(1), C)
_MODULES = [{"Ratio": lambda a, b: np.divide(a, b, out=np.zeros_like(b), where=b != 0)}, "numpy"]


def _values(face, points):
    function = sympy.lambdify(_SYMBOLS, face, modules=_MODULES)
    return np.broadcast_to(function(*points), points[0].shape)


def counterpart(scheme) -> Counterpart | None:
    """The hand-written kernel equivalent to scheme (euler, no clip, no FCT), or None."""
    if scheme.time != "euler" or scheme.clip is not None or scheme.correct is not None:
        return None
    if not set(scheme.offsets) <= {-1, 0, 1}:
        return None
    rng = np.random.default_rng(0)
    points = [rng.uniform(-1, 1, 200) for _ in range(3)] + [rng.uniform(0, 1, 200)]
    mine = _values(scheme.expand_limiters(scheme.bound_face), points)
    for candidate in COUNTERPARTS:
        if candidate.halo == scheme.stencil_reach and np.allclose(mine, _values(candidate.face, points),
                                                         rtol=1e-12, atol=1e-12):
            return candidate
    return None


def c_source() -> tuple[str, str]:
    """(declarations for cffi's cdef, the C source with the header inlined)."""
    folder = resources.files(__name__)
    header = folder.joinpath("handwritten.h").read_text(encoding="utf-8")
    source = folder.joinpath("handwritten.c").read_text(encoding="utf-8")
    return header, source.replace('#include "handwritten.h"', header, 1)
