"""Names keep their meaning: operators parse as written, and no user name is ever taken
for a built-in, a cell value, the limiter's argument, a generated temporary, a library
function or another target's name.

References: faces built by hand in sympy and lambdified by sympy itself; one forward
Euler step computed here by the update's definition (common practice, no source);
gfortran reading the interface module's constants.
"""
from __future__ import annotations

import subprocess

import numpy as np
import pytest
import sympy

from fluxloom.compiler import LoomError, scheme_from_text
from fluxloom.compiler.emit import c_files
from fluxloom.runtime.kernel import load_kernel, numpy_module

from test_emit_c import need

QM1, Q0, Q1, Q2, C = sympy.symbols("qm1 q0 q1 q2 c", real=True)


def ratio(x, y):
    return sympy.Piecewise((x / y, sympy.Ne(y, 0)), (0, True))


def lambdified(g: sympy.Expr):
    return sympy.lambdify((QM1, Q0, Q1, Q2, C), g, modules="numpy")


def step_by_hand(g: sympy.Expr, q: np.ndarray, courant: float) -> np.ndarray:
    """One forward-Euler step with u = 1 everywhere (face j+1/2 reads cells j-1 .. j+2),
    periodic, from the update's definition."""
    face = lambdified(g)
    n = len(q)
    j = np.arange(n)
    with np.errstate(all="ignore"):  # Piecewise evaluates both of ratio's branches
        flux = np.broadcast_to(face(q[(j - 1) % n], q[j], q[(j + 1) % n], q[(j + 2) % n],
                                    np.full(n, courant)), (n,))
    return q - courant * (flux - flux[(j - 1) % n])


def kernel_step(scheme, backend: str, q: np.ndarray, courant: float) -> np.ndarray:
    kernel = load_kernel(scheme, backend)
    h, n = kernel.halo, len(q)
    padded = np.concatenate([q[n - h:], q, q[:h]])
    return kernel.step(padded, np.ones(n + 1), courant)[h:h + n]


R_HAND = ratio(Q0 - QM1, Q1 - Q0)
VAN_LEER = (R_HAND + sympy.Abs(R_HAND)) / (1 + sympy.Abs(R_HAND))
LET_R = "  let r = ratio(q[0] - q[-1], q[1] - q[0])\n"

# (spec, the face g built by hand)
WORKING = {
    "abs_decoy": (LET_R + "  limiter Abs(x) = 0 * x\n"
                  "  limiter vl(x) = (x + abs(x)) / (1 + abs(x))\n"
                  "  flux = u * (q[0] + (1 - c) / 2 * vl(r) * (q[1] - q[0]) + Abs(r))",
                  Q0 + (1 - C) / 2 * VAN_LEER * (Q1 - Q0)),
    "sympy_names": (LET_R + "  limiter Integer(x) = max(0, min(1, x))\n"
                    "  limiter Ratio(x) = x / 2\n  limiter Max(x) = abs(x)\n"
                    "  limiter Symbol(x) = 3 * x\n  limiter list(x) = x - 1\n"
                    "  flux = u * (q[0] + Integer(r) * (q[1] - q[0]) / 2 + Ratio(q[2]) "
                    "+ Max(q[-1]) + Symbol(q[1]) / 7 + list(q[0]) / 5)",
                    Q0 + sympy.Max(0, sympy.Min(1, R_HAND)) * (Q1 - Q0) / 2 + Q2 / 2
                    + sympy.Abs(QM1) + 3 * Q1 / 7 + (Q0 - 1) / 5),
    "param_r": ("  param r = 2\n  let rr = ratio(q[0] - q[-1], q[1] - q[0])\n"
                "  limiter f(x) = min(x, r)\n"
                "  flux = u * (q[0] + (1 - c) / 2 * f(rr) * (q[1] - q[0]))",
                Q0 + (1 - C) / 2 * sympy.Min(R_HAND, 2) * (Q1 - Q0)),
    "params_like_cells_and_temporaries": (
        "  param q_0 = 3\n  param q_m1 = 5\n  param q_1 = 7\n  param t0 = 1/2\n"
        "  param s0 = 1/4\n  param a = 2\n  param b = 8\n  param top = 11\n  param c0 = 13\n"
        "  flux = u * (q[0] + (q_0 - q_m1 + q_1) / (t0 + s0) * (q[1] - q[0]) * a / b / 100"
        " + (top - c0) * (q[0] - q[-1]) / 1000 + t0 * s0 * q[2] / 10)",
        Q0 + sympy.Rational(5 * 4, 3) * (Q1 - Q0) / 4 / 100 - 2 * (Q0 - QM1) / 1000
        + Q2 / 80),
    "names_of_every_target": (
        "  param int = 2\n  param lambda = 3\n  param None = 5\n  param end = 7\n"
        "  param I = 11\n  param E = 13\n  param pi = 17\n  param HUGE_VAL = 19\n  param n = 23\n"
        "  flux = u * (q[0] + (int + lambda + None + end + I + E + pi + HUGE_VAL + n) / 1000"
        " * (q[1] - q[0]))",
        Q0 + sympy.Rational(100, 1000) * (Q1 - Q0)),
    "limiters_named_like_forms": (
        LET_R + "  limiter x(y) = max(0, min(1, y))\n  limiter limiter_x(y) = max(0, min(2, y))\n"
        "  limiter slope_x(y) = (y + abs(y)) / (1 + abs(y))\n  limiter psi_x(y) = y^2 / (1 + y^2)\n"
        "  flux = u * (q[0] + (x(r) + limiter_x(r) + slope_x(r) + psi_x(r)) / 8 * (q[1] - q[0]))",
        Q0 + (sympy.Max(0, sympy.Min(1, R_HAND)) + sympy.Max(0, sympy.Min(2, R_HAND)) + VAN_LEER
              + R_HAND ** 2 / (1 + R_HAND ** 2)) / 8 * (Q1 - Q0)),
}


def working(name: str):
    body, _ = WORKING[name]
    return scheme_from_text(f"scheme {name} {{\n{body}\n}}\n", file=f"{name}.loom")


@pytest.mark.parametrize("name", sorted(WORKING))
def test_every_name_keeps_its_meaning_in_every_back_end(name):
    scheme = working(name)
    _, g = WORKING[name]
    rng = np.random.default_rng(len(name))
    q = rng.uniform(-1.0, 2.0, 32)
    q[::5] = q[1::5]  # flat pairs: ratio's zero case
    want = step_by_hand(g, q, 0.4)
    for backend in ("numpy", "c"):
        assert np.allclose(kernel_step(scheme, backend, q, 0.4), want, rtol=1e-14, atol=1e-14)


@pytest.mark.parametrize("name", sorted(WORKING))
def test_the_ir_is_the_face_as_written(name):
    """The IR (limiters expanded, params bound) is the hand-built face: equal at random
    points to the last bit of a float evaluation."""
    scheme = working(name)
    _, g = WORKING[name]
    from fluxloom.compiler.symbols import C as C_IR, q
    ir = scheme.expand_limiters(scheme.bound(scheme.face))
    ir = ir.replace(lambda e: type(e).__name__ == "Ratio", lambda e: ratio(*e.args))
    ir = ir.xreplace({q(-1): QM1, q(0): Q0, q(1): Q1, q(2): Q2, C_IR: C})
    assert ir.free_symbols <= {QM1, Q0, Q1, Q2, C}
    rng = np.random.default_rng(1)
    points = rng.uniform(-2, 2, (5, 64))
    points[1, ::3] = points[2, ::3]
    with np.errstate(all="ignore"):  # Piecewise evaluates both of ratio's branches
        assert np.allclose(lambdified(ir)(*points), lambdified(g)(*points), rtol=1e-15, atol=0)


def test_fortran_reads_the_params_the_c_header_and_numpy_hold(tmp_path):
    """Params named like keywords, library constants, cells and temporaries: gfortran
    compiles the interface modules, and its constants equal numpy's PARAMS to the bit."""
    names = ["params_like_cells_and_temporaries", "names_of_every_target"]
    program = ["program show", "  use, intrinsic :: iso_c_binding, only: c_double, c_int64_t"]
    program += [f"  use {n}_mod" for n in names]
    program += ["  implicit none"]
    expected = []
    for n in names:
        scheme = working(n)
        for file, text in c_files(scheme, "double").items():
            (tmp_path / file).write_text(text)
        for param, value in numpy_module(scheme, "double").PARAMS.items():
            program.append(f"  print '(i0)', transfer({n}_param_{param}, 0_c_int64_t)")
            expected.append(int(np.float64(value).view(np.int64)))
    program.append("end program show")
    (tmp_path / "show.f90").write_text("\n".join(program) + "\n")
    modules = [f"{n}_mod.f90" for n in names]
    # the modules' natural-indexing sweep wrappers call the C kernels: link them
    for n in names:
        subprocess.run([need("gcc"), "-std=c99", "-c", f"{n}.c"], cwd=tmp_path, check=True,
                       capture_output=True)
    subprocess.run([need("gfortran"), "-std=f2008", "-Wall", "-Werror", *modules, "show.f90",
                    *(f"{n}.o" for n in names), "-o", "show"], cwd=tmp_path, check=True,
                   capture_output=True)
    run = subprocess.run([str(tmp_path / "show")], capture_output=True, text=True, check=True)
    assert [int(v) for v in run.stdout.split()] == expected


REFUSED = [
    ("scheme k_and_K {\n  param k = 1\n  param K = 2\n  flux = u * q[0]\n}\n",
     "differ only in letter case", (3, 9)),
    ("scheme numpy {\n  flux = u * q[0]\n}\n", "name of a Python module", (1, 8)),
    ("scheme math {\n  flux = u * q[0]\n}\n", "name of a Python module", (1, 8)),
    ("scheme class {\n  flux = u * q[0]\n}\n", "Python keyword", (1, 8)),
    ("scheme _hidden {\n  flux = u * q[0]\n}\n", "must start with a letter", (1, 8)),
    ("scheme " + "s" * 49 + " {\n  flux = u * q[0]\n}\n", "at most 48", (1, 8)),
    ("scheme p {\n  param " + "p" * 60 + " = 1\n  flux = u * q[0]\n}\n", "too long", (2, 9)),
    ("scheme shadow {\n  param kappa = 1\n  limiter f(kappa) = kappa\n  flux = u * f(q[0])\n}\n",
     "hide that param", (3, 13)),
    ("scheme builtin {\n  limiter abs(x) = x\n  flux = u * q[0]\n}\n", "built-in name", (2, 11)),
]


@pytest.mark.parametrize("text, fragment, where", REFUSED, ids=[r[1][:20] for r in REFUSED])
def test_names_no_target_can_hold_are_refused_where_they_are_written(text, fragment, where):
    with pytest.raises(LoomError) as caught:
        scheme_from_text(text, file="names.loom")
    assert fragment in caught.value.message
    assert (caught.value.span.line, caught.value.span.col) == where
    assert caught.value.render().startswith(f"names.loom:{where[0]}:{where[1]}: error:")


# ---- operators: precedence and associativity -----------------------------------------

OPERATORS = [  # (face as written, the same built by hand)
    ("q[0] - q[1] - q[2]", (Q0 - Q1) - Q2),
    ("q[0] / q[1] / q[2]", (Q0 / Q1) / Q2),
    ("q[0] * q[1] / q[2] * q[-1]", ((Q0 * Q1) / Q2) * QM1),
    ("q[0] / q[1] * q[2]", (Q0 / Q1) * Q2),
    ("q[0] ^ q[1] ^ 2", Q0 ** (Q1 ** 2)),
    ("-q[0] ^ 2", -(Q0 ** 2)),
    ("q[0] ^ -2", Q0 ** -2),
    ("2 ^ -1 ^ 2 * q[0]", sympy.Integer(2) ** (-(sympy.Integer(1) ** 2)) * Q0),
    ("q[0] + q[1] * q[2] ^ 2", Q0 + Q1 * Q2 ** 2),
    ("(q[0] + q[1]) * q[2]", (Q0 + Q1) * Q2),
    ("q[0] - -q[1]", Q0 + Q1),
    ("- - q[0] + +q[1]", Q0 + Q1),
    ("q[0] ^ q[1] * q[2]", Q0 ** Q1 * Q2),
    ("q[0] - q[1] + q[2] - q[-1]", ((Q0 - Q1) + Q2) - QM1),
    ("q[0] / (q[1] - q[2]) / 3", Q0 / (Q1 - Q2) / 3),
    ("q[0] * -q[1] ^ 3 / 4", Q0 * (-(Q1 ** 3)) / 4),
    ("1 / 4 * q[0] - 1 / 4 ^ 2 * q[1]", sympy.Rational(1, 4) * Q0 - sympy.Rational(1, 16) * Q1),
]


@pytest.mark.parametrize("face, g", OPERATORS, ids=[o[0] for o in OPERATORS])
def test_operators_parse_and_print_as_written(face, g):
    """The IR equals the hand-built sympy expression exactly, and both back ends step
    like the hand-built face (positive data keep the powers real)."""
    scheme = scheme_from_text(f"scheme ops {{\n  flux = u * ({face})\n}}\n")
    from fluxloom.compiler.symbols import q
    ir = scheme.face.xreplace({q(-1): QM1, q(0): Q0, q(1): Q1, q(2): Q2})
    assert ir == g  # sympy's canonical form: a misparse is another expression
    q_values = np.random.default_rng(2).uniform(0.5, 1.5, 24)
    want = step_by_hand(g, q_values, 0.25)
    for backend in ("numpy", "c"):
        assert np.allclose(kernel_step(scheme, backend, q_values, 0.25), want, rtol=1e-13,
                           atol=1e-13)
