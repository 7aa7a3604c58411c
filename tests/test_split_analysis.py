"""Analysis of split schemes (check --dims 2|3 --split ...), held against independent
computations: numpy matrix exponentials of random operators for the splitting error,
sympy for the commutator of variable-coefficient transport operators, 2-D von Neumann
symbols measured by FFT on the generated kernels' split steps, and the splitting error
order measured on a generated kernel against numpy's exponential of the semi-discrete
operator."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
import sympy

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.compiler.analysis import analyse
from fluxloom.compiler.analysis.claims import read_claims
from fluxloom.compiler.analysis.split_error import operator_names, split_error
from fluxloom.compiler.analysis.splitting import split_document
from fluxloom.compiler.splittings import splitting
from fluxloom.runtime.kernel import load_kernel
from fluxloom.runtime.multidim.flows import SWIRL, divergence
from fluxloom.runtime.splitting import split_step
from fluxloom.runtime.sweeps import BoundSweep, LineSweep

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
METHODS = ("lie", "alternating", "strang")


# ---- the splitting error, against numpy exponentials of random matrices ----------------

def _expm_symmetric(matrix: np.ndarray, t: float) -> np.ndarray:
    values, vectors = np.linalg.eigh(matrix)
    return (vectors * np.exp(t * values)) @ vectors.T


def _bracket_value(text: str, ops: dict) -> np.ndarray:
    """The matrix of a commutator written as '[A_x, [A_y, A_x]]' (parsed here, not by fluxloom)."""
    text = text.strip()
    if not text.startswith("["):
        return ops[text]
    inner = text[1:-1]
    depth = 0
    for i, ch in enumerate(inner):
        depth += ch == "["
        depth -= ch == "]"
        if ch == "," and depth == 0:
            left, right = _bracket_value(inner[:i], ops), _bracket_value(inner[i + 1:], ops)
            return left @ right - right @ left
    raise AssertionError(f"not a commutator: {text}")


@pytest.mark.parametrize("dims", [2, 3])
@pytest.mark.parametrize("method", METHODS)
def test_splitting_error_matches_matrix_exponentials(method, dims):
    # Lie's local error is h^2/2 [B, A] and Strang's h^3 (1/12 [B, [B, A]] - 1/24 [A, [A, B]])
    # (Baker-Campbell-Hausdorff; common practice, no source): here every coefficient is
    # checked numerically on random symmetric matrices, where the exponentials are exact
    # through numpy's eigendecomposition.
    rng = np.random.default_rng(7 + dims)
    names = operator_names(dims)
    ops = {}
    for name in names:
        m = rng.normal(size=(6, 6))
        ops[name] = (m + m.T) / 4
    error = split_error(method, dims)
    table = splitting(method)
    predicted = sum(float(b.coefficient) * _bracket_value(b.text, ops) for b in error.brackets)
    total = sum(ops.values())
    ratios = []
    for h in (2e-3, 1e-3):
        product = np.eye(6)
        for step in table.sequence(dims):
            for sweep in step:
                product = _expm_symmetric(ops[names[sweep.axis]], float(sweep.fraction) * h) @ product
        local = product - _expm_symmetric(total, table.period * h)
        ratios.append(np.linalg.norm(local / h ** error.power - predicted) / np.linalg.norm(predicted))
    assert error.power == (2 if method == "lie" else 3)
    assert ratios[1] < 0.01 and ratios[1] < 0.6 * ratios[0]   # the remainder is O(h)


def test_error_vanishes_for_commuting_operators():
    # Diagonal matrices commute: every split product is the exact exponential.
    rng = np.random.default_rng(3)
    ops = {n: np.diag(rng.normal(size=5)) for n in operator_names(2)}
    for method in METHODS:
        error = split_error(method, 2)
        value = sum(float(b.coefficient) * _bracket_value(b.text, ops) for b in error.brackets)
        assert np.allclose(value, 0)


# ---- the commutator of 2-D transport operators (sympy) -------------------------------------

def _transport_commutator(u, v):
    x, y = sympy.symbols("x y")
    f = sympy.Function("f")(x, y)

    def a_x(g):
        return -sympy.diff(u * g, x)

    def a_y(g):
        return -sympy.diff(v * g, y)
    return sympy.simplify(a_x(a_y(f)) - a_y(a_x(f)))


def test_transport_operators_commute_only_with_constant_coefficients():
    # A_x = -d/dx(u .), A_y = -d/dy(v .): with constant u, v the split step has no splitting
    # error; in the swirling flow (LeVeque 1996, from memory) and in solid-body rotation it
    # does (common practice, no source).
    x, y = sympy.symbols("x y")
    a, b = sympy.symbols("a b")
    assert _transport_commutator(a, b) == 0
    swirl_u = sympy.sin(sympy.pi * x) ** 2 * sympy.sin(2 * sympy.pi * y)
    swirl_v = -sympy.sin(sympy.pi * y) ** 2 * sympy.sin(2 * sympy.pi * x)
    assert _transport_commutator(swirl_u, swirl_v) != 0
    assert _transport_commutator(-(y - sympy.Rational(1, 2)), x - sympy.Rational(1, 2)) != 0


# ---- stability: 2-D symbols measured by FFT on generated kernels ----------------------------

def _split_symbol(kernel, method, cx, cy, n=24, seed=0):
    """G(theta_x, theta_y) of one split step (step 0), from the FFT of random data."""
    rng = np.random.default_rng(seed)
    q = rng.normal(size=(n, n))
    faces = [np.full((n + 1, n), 1.0), np.full((n, n + 1), 1.0)]
    sweep = BoundSweep(LineSweep(kernel), faces, (cx, cy))   # unit velocity: dt/dx = c
    out = split_step(sweep, q, method, 0)
    return np.fft.fft2(out) / np.fft.fft2(q)


def _line_symbol(kernel, c, n=24, seed=1):
    rng = np.random.default_rng(seed)
    q = rng.normal(size=(1, n))
    out = LineSweep(kernel)(1, q, np.full((1, n + 1), 1.0), c)
    return np.fft.fft(out[0]) / np.fft.fft(q[0])


def _courant_points(direction):
    """Courant numbers inside (the middle of the main interval) and just outside it."""
    main = direction.stable.parts[0]
    top = main.hi if math.isfinite(main.hi) else 2.0
    inside = 0.6 * top
    outside = 1.2 * main.hi if math.isfinite(main.hi) else None
    return inside, outside


RANDOM_SPECS = [
    # linear stencils of our own, nobody's published scheme
    """scheme random_a {
  time euler
  flux = u * (q[0] + 2/5 * (1 - c) * (q[1] - q[0]) + 1/10 * (1 - c) * (q[0] - q[-1]))
}""",
    """scheme random_c {
  time euler
  flux = u * (q[0] + 2/7 * (q[1] - q[0]) + 1/9 * (q[0] - q[-1]) - c/3 * (q[1] - q[0]))
}""",
    """scheme random_b {
  time ssp_rk3
  flux = u * (q[0] + 3/10 * (q[1] - q[0]) + 1/6 * (q[0] - q[-1]))
}""",
]


def _schemes():
    for stem in ("upwind", "lax_wendroff", "quickest", "kappa_rk3"):
        yield stem, load_scheme(EXAMPLES / f"{stem}.loom")
    for text in RANDOM_SPECS:
        scheme = scheme_from_text(text)
        yield scheme.name, scheme


@pytest.mark.parametrize("stem, scheme", list(_schemes()), ids=lambda v: v if isinstance(v, str) else "")
def test_split_stability_against_measured_symbols(stem, scheme):
    kernel = load_kernel(scheme, "c")
    analysis = analyse(scheme)
    for method in METHODS:
        claims = read_claims(split_document(analysis, 2, method)).split
        assert claims.decided
        inside_x, outside_x = _courant_points(claims.directions[0])
        inside_y, _ = _courant_points(claims.directions[1])
        growth = np.max(np.abs(_split_symbol(kernel, method, inside_x, inside_y)))
        assert claims.stable_at((inside_x, inside_y)) and growth <= 1 + 1e-10
        # the split symbol is the product of the measured 1-D symbols (sweeps commute)
        fraction = claims.directions[0].fraction
        gx = _line_symbol(kernel, fraction * inside_x) ** round(1 / fraction)
        gy = _line_symbol(kernel, inside_y)
        assert np.allclose(_split_symbol(kernel, method, inside_x, inside_y),
                           np.outer(gx, gy), atol=1e-10)
        if outside_x is not None and not claims.directions[0].stable.contains(outside_x):
            growth = np.max(np.abs(_split_symbol(kernel, method, outside_x, inside_y)))
            assert not claims.stable_at((outside_x, inside_y)) and growth > 1 + 1e-6


def test_strang_doubles_the_x_interval_and_keeps_islands():
    # QUICKEST: stable for 0 <= c <= 1 and at c = 2 (REFERENCE.md; Leonard 1979, from
    # memory). Strang's x sweeps take dt/2, so c_x may reach 2 and the island sits at 4.
    scheme = load_scheme(EXAMPLES / "quickest.loom")
    split = read_claims(split_document(analyse(scheme), 2, "strang")).split
    x, y = split.directions
    assert [(p.lo, p.hi) for p in x.stable.parts] == [(0.0, 2.0), (4.0, 4.0)]
    assert [(p.lo, p.hi) for p in y.stable.parts] == [(0.0, 1.0), (2.0, 2.0)]
    kernel = load_kernel(scheme, "c")
    # the island, measured: |G| <= 1 at c_x = 4 (two half sweeps at c = 2), c_y = 2
    assert np.max(np.abs(_split_symbol(kernel, "strang", 4.0, 2.0))) <= 1 + 1e-10
    assert np.max(np.abs(_split_symbol(kernel, "strang", 3.6, 0.5))) > 1 + 1e-6
    assert np.max(np.abs(_split_symbol(kernel, "lie", 2.0, 0.5))) <= 1 + 1e-10
    assert np.max(np.abs(_split_symbol(kernel, "lie", 1.6, 0.5))) > 1 + 1e-6


# ---- order: the splitting error measured on a generated kernel -----------------------------

def _centred_operator(faces: np.ndarray, axis: int, n: int) -> np.ndarray:
    """-(F(i+1/2) - F(i-1/2)) / dx with F = u (q_i + q_{i+1}) / 2, periodic, as a matrix on
    the n*n cells (C order): written here from the formula, not from fluxloom."""
    size = n * n
    op = np.zeros((size, size))
    index = np.arange(size).reshape(n, n)
    for i in range(n):
        for j in range(n):
            for side, sign in ((1, -1.0), (0, 1.0)):        # right face out, left face in
                if axis == 0:
                    u = faces[i + side, j]
                    left, right = index[(i + side - 1) % n, j], index[(i + side) % n, j]
                else:
                    u = faces[i, j + side]
                    left, right = index[i, (j + side - 1) % n], index[i, (j + side) % n]
                op[index[i, j], left] += sign * u * n / 2
                op[index[i, j], right] += sign * u * n / 2
    return op


def test_measured_splitting_order_per_method():
    # Lie splitting is first order, alternating Lie (over pairs of steps) and Strang second
    # (Strang 1968, SIAM J. Numer. Anal. 5:506, from memory). Measured: centred fluxes under
    # classical RK4 (time error O(dt^4)) in a divergence-free swirl on 8 x 8 cells, against
    # numpy's exact exponential of the semi-discrete operator (skew-symmetric here).
    scheme = load_scheme(EXAMPLES / "centred_rk4.loom")
    kernel = load_kernel(scheme, "c")
    analysis = analyse(scheme)
    n, horizon = 8, 0.5
    faces = list(SWIRL.face_velocities(n))
    assert np.max(np.abs(divergence(*faces))) < 1e-12
    total = _centred_operator(faces[0], 0, n) + _centred_operator(faces[1], 1, n)
    assert np.allclose(total, -total.T)
    values, vectors = np.linalg.eigh(1j * total)        # Hermitian
    q0 = np.random.default_rng(5).normal(size=(n, n))
    exact = (vectors @ (np.exp(-1j * horizon * values) * (vectors.conj().T @ q0.ravel()))).real
    for method in METHODS:
        errors = []
        steps_list = (16, 32, 64)
        for steps in steps_list:
            dt = horizon / steps
            sweep = BoundSweep(LineSweep(kernel), faces, (dt * n, dt * n))
            q = q0.copy()
            for k in range(steps):
                q = split_step(sweep, q, method, k)
            errors.append(np.linalg.norm(q.ravel() - exact))
        measured = math.log2(errors[-2] / errors[-1])
        claimed = read_claims(split_document(analysis, 2, method)).split.order_variable
        assert claimed == (1 if method == "lie" else 2)
        assert abs(measured - claimed) < 0.25, (method, errors)


# ---- a 1-D step with a velocity that varies along it, against characteristics --------------

WAVY = 0.8      # u(x) = 1 + WAVY sin(2 pi x) > 0


def _speed(x):
    return 1 + WAVY * np.sin(2 * np.pi * x)


_GL_NODES, _GL_WEIGHTS = np.polynomial.legendre.leggauss(10)
_TAU_NODES = np.linspace(0.0, 1.0, 4097)


def _slowness(lo, hi):
    """The integral of 1/u from lo to hi (short intervals, 10-point Gauss-Legendre)."""
    mid, half = (lo + hi) / 2, (hi - lo) / 2
    return half * np.sum(_GL_WEIGHTS[:, None] / _speed(mid[None, :] + half[None, :] * _GL_NODES[:, None]),
                         axis=0)


_TAU = np.concatenate(([0.0], np.cumsum(_slowness(_TAU_NODES[:-1], _TAU_NODES[1:]))))


def _travel_time(x):
    whole = np.floor(x)
    k = np.minimum(((x - whole) * 4096).astype(int), 4095)
    return whole * _TAU[-1] + _TAU[k] + _slowness(_TAU_NODES[k], x - whole)


def _foot(x, t):
    """Where the characteristic through x at time t started (Newton on the travel time)."""
    target = _travel_time(x) - t
    whole = np.floor(target / _TAU[-1])
    start = np.interp(target - whole * _TAU[-1], _TAU, _TAU_NODES) + whole
    for _ in range(4):
        start = start - (_travel_time(start) - target) * _speed(start)
    return start


def _exact_averages(n, t):
    """q_t + (u q)_x = 0 keeps u q constant along dx/dt = u: cell averages of
    q(x, t) = u(x0) q0(x0) / u(x), 8-point Gauss-Legendre in each cell."""
    nodes, weights = np.polynomial.legendre.leggauss(8)
    x = (np.arange(n)[:, None] + (nodes[None, :] + 1) / 2) / n
    x0 = _foot(x.ravel(), t).reshape(x.shape)
    q = (1.5 + np.sin(2 * np.pi * x0)) * _speed(x0) / _speed(x)
    return (q * weights[None, :]).sum(axis=1) / 2


@pytest.mark.parametrize("stem", ["lax_wendroff", "fromm", "kappa_rk3"])
def test_one_d_order_with_a_velocity_varying_along_the_sweep(stem):
    # The claim behind order.variable_coefficients: a single-step face sees only its own
    # velocity and is first order where u varies [derived]; a method-of-lines face keeps its
    # order. Measured against the exact solution by characteristics (own reference) at a
    # time that is not a whole transit (over a whole transit the first-order part cancels,
    # since the integral of u_x / u over a period is zero).
    from fluxloom.runtime.kernel import run_periodic

    assert abs(_TAU[-1] - 1 / math.sqrt(1 - WAVY ** 2)) < 1e-12   # transit time [derived]
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    claimed = read_claims(split_document(analyse(scheme), 2, "strang")).split.order_one_d_variable
    kernel = load_kernel(scheme, "c")
    horizon, errors = 0.5, []
    cells = (400, 800, 1600)
    for n in cells:
        u = _speed(np.arange(n + 1) / n)
        u[-1] = u[0]
        steps = math.ceil(horizon * (1 + WAVY) * n / 0.5)
        dt = horizon / steps
        q = run_periodic(kernel, _exact_averages(n, 0.0), u, dt * n, steps)
        exact = _exact_averages(n, horizon)
        errors.append(np.abs(q - exact).sum() / np.abs(exact).sum())
    measured = math.log2(errors[-2] / errors[-1])
    assert claimed == (3 if stem == "kappa_rk3" else 1)
    assert abs(measured - claimed) < 0.25, errors
