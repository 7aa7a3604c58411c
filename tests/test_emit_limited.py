"""Limiters emitted from a and b (compiler/emit/limited.py) keep the language's values
and stay finite for every finite a and b, with the same bits in C and numpy.

The reference is the definition itself, psi(ratio(a, b)) * b and psi(ratio(a, b)),
evaluated by mpmath (sympy's arbitrary-precision library) at 200 bits from the
limiter body as the user wrote it, on data from subnormal numbers to 1e300 (1e36 in
single precision), zeros, equal and opposite pairs.
"""
from __future__ import annotations

import subprocess

import mpmath
import numpy as np
import pytest
import sympy

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.compiler.emit.c import c_sources
from fluxloom.compiler.emit.plan import plan_kernel
from fluxloom.compiler.symbols import R
from fluxloom.runtime.kernel import numpy_module

from conftest import EXAMPLES
from test_emit_c import need

# Bodies of the bundled limiters and of our own: unbounded (r), even (r^2 / (1 + r^2)),
# a root, a sign, a ratio inside the body, params.
LIMITERS = {
    "vanleer": "(x + abs(x)) / (1 + abs(x))",
    "vanalbada": "max(0, x) * (1 + x) / (1 + x^2)",
    "tidewater": "max(0, x) * (x + 3) / (x^2 + x + 2)",
    "superbee": "max(0, min(2 * x, 1), min(x, 2))",
    "koren": "max(0, min(2 * x, (1 + 2 * x) / 3, 2))",
    "identity": "x",
    "even": "x^2 / (1 + x^2)",
    "rooted": "max(0, x) * sqrt(1 + x^2) / (1 + abs(x)^3) + sign(x) * beta",
    "ratioed": "ratio(3 * x, 1 + abs(x)) - min(x, 1) / gamma",
    "signed": "min(abs(x), 2) * sign(x) + 2 * x / (1 + x^4)",
}
EXPONENT = {"double": (-320, 300), "float": (-45, 36)}
FLOOR = {"double": 2.0 ** -55, "float": 2.0 ** -26}       # the value form's B >= 2^-60 / 2^-30
LOST = {"double": 2.0 ** -1060, "float": 2.0 ** -135}     # 2^14 subnormal steps of the scale


def spec(name: str, body: str) -> str:
    return f"""scheme lim_{name} {{
  param beta = 1/4
  param gamma = 2
  let r = ratio(q[0] - q[-1], q[1] - q[0])
  limiter {name}(x) = {body}
  flux = u * (q[0] + {name}(r) * (q[1] - q[0]) / 4 + {name}(r) / 8)
}}"""


def data(precision: str, seed: int):
    rng = np.random.default_rng(seed)
    low, high = EXPONENT[precision]
    dtype = np.float64 if precision == "double" else np.float32
    n = 600
    a = rng.choice([-1.0, 1.0], n) * 10.0 ** rng.uniform(low, high, n)
    b = rng.choice([-1.0, 1.0], n) * 10.0 ** rng.uniform(low, high, n)
    a[:40], b[40:80] = 0.0, 0.0
    b[80:120] = a[80:120]
    b[120:160] = -a[120:160]
    a[160:200] = rng.normal(size=40)
    b[160:200] = rng.normal(size=40)
    with np.errstate(over="ignore", under="ignore"):
        return a.astype(dtype), b.astype(dtype)


def reference(body: sympy.Expr, a, b, kind: str):
    """The definition at 200 bits. A ratio too small for the precision is 0, as ratio(a, b)
    is there; within a factor 8 of that threshold the kernels may keep its sign (they
    scale before dividing) and the reference says nan: it matters only for a limiter
    with a jump at 0."""
    mpmath.mp.prec = 200
    psi = sympy.lambdify(R, body, modules=[{"Ratio": lambda x, y: x / y if y != 0 else 0},
                                           "mpmath"])
    least = float(np.finfo(a.dtype).smallest_subnormal) if a.dtype != object else 0.0
    out = []
    for x, y in zip(a.tolist(), b.tolist()):
        r = mpmath.mpf(x) / mpmath.mpf(y) if y != 0 else mpmath.mpf(0)
        if abs(r) < mpmath.mpf(least) / 8:
            r = mpmath.mpf(0)
        elif abs(r) < mpmath.mpf(least):
            out.append(float("nan"))
            continue
        value = psi(r)
        out.append(float(value * mpmath.mpf(y)) if kind == "slope" else float(value))
    return np.array(out)


def forms(name: str, precision: str):
    scheme = scheme_from_text(spec(name, LIMITERS[name]))
    module = numpy_module(scheme, precision)
    return scheme, getattr(module, f"slope_{name}"), getattr(module, f"psi_{name}")


@pytest.mark.parametrize("precision", ["double", "float"])
@pytest.mark.parametrize("name", sorted(LIMITERS))
def test_both_forms_keep_the_definition_and_stay_finite(name, precision):
    scheme, slope, value = forms(name, precision)
    body = scheme.bound(scheme.limiters[0].body)
    a, b = data(precision, len(name))
    eps, least = float(np.finfo(a.dtype).eps), float(np.finfo(a.dtype).smallest_subnormal)
    with np.errstate(over="raise", invalid="raise", divide="raise", under="ignore"):
        got_slope, got_value = slope(a, b), value(a, b)
    assert np.all(np.isfinite(got_slope)) and np.all(np.isfinite(got_value))
    want = reference(body, a, b, "slope")
    scale = np.maximum(np.abs(a.astype(float)), np.abs(b.astype(float)))
    # the same to a few roundings, or below what the precision can hold (next to the inputs)
    assert np.all(np.isnan(want) | (np.abs(got_slope - want)
                                    <= 8 * eps * np.abs(want) + LOST[precision] * scale + 2 * least))
    assert np.all(got_slope[b == 0] == 0)
    # the value form evaluates ratios beyond 2^60 (2^30) there: exact where psi has finite
    # limits at +-infinity, and for every limiter on smaller ratios
    want = reference(body, a, b, "psi")
    close = np.abs(got_value - want) <= 8 * eps * np.abs(want) + FLOOR[precision]
    with np.errstate(all="ignore"):
        ratio = np.abs(a.astype(float) / b.astype(float))
    ordinary = (b == 0) | (ratio <= 2.0 ** (58 if precision == "double" else 28))
    far = reference(body, np.array([1e200, -1e200]), np.array([1e-200, 1e-200]), "psi")
    bounded = bool(np.all(np.abs(far) < 1e6))
    assert np.all(close | np.isnan(want) | (~ordinary & (not bounded)))


def test_van_leer_slope_is_the_harmonic_mean_form():
    # van Leer's limited slope, psi(a/b) b = (a|b| + |a|b) / (|a| + |b|) (van Leer 1974,
    # J. Comput. Phys. 14:361, the harmonic-mean form; [mem]): the emitted form gives it
    # to a rounding or two, with no scaling (its parts are of degree 0 or 1).
    scheme, slope, _ = forms("vanleer", "double")
    (form,) = [f for f in plan_kernel(scheme).limiter_forms if f.kind == "slope"]
    assert "ScaleDown" not in str(form.program.result)
    rng = np.random.default_rng(5)
    a, b = rng.normal(size=200), rng.normal(size=200)
    a[:20], b[20:40], b[40:60], b[60:80] = 0.0, 0.0, a[40:60], -a[60:80]
    with np.errstate(all="ignore"):
        harmonic = np.where(np.abs(a) + np.abs(b) > 0,
                            (a * np.abs(b) + np.abs(a) * b) / (np.abs(a) + np.abs(b)), 0.0)
    assert np.allclose(slope(a, b), harmonic, rtol=4e-16, atol=0)


def test_piecewise_linear_limiters_need_no_division():
    """minmod, superbee, MC, Koren and the overreaching limiter: max/min of linear pieces
    give psi(a/b) b as max/min of linear pieces in a and b (no quotient at all)."""
    for stem in ("lw_minmod", "lw_superbee", "lw_mc", "lw_koren", "lw_overreach"):
        plan = plan_kernel(load_scheme(EXAMPLES / f"{stem}.loom"))
        (form,) = plan.limiter_forms
        assert form.kind == "slope" and not plan.limiters
        assert not form.program.result.has(sympy.Pow) and "Ratio" not in str(form.program.result)


def test_a_call_without_its_slope_is_evaluated_from_a_and_b_too():
    # psi(r) / 8 is not multiplied by the slope: the value form, never r itself
    scheme = scheme_from_text(spec("vanalbada", LIMITERS["vanalbada"]))
    plan = plan_kernel(scheme)
    assert sorted(f.kind for f in plan.limiter_forms) == ["psi", "slope"]
    assert not plan.limiters
    text = str(plan.flux.result)
    assert "slope_vanalbada(" in text and "psi_vanalbada(" in text and "Ratio" not in text


def test_a_param_exponent_is_rewritten_with_its_value():
    scheme = scheme_from_text("""scheme powered {
  param k = 2
  let r = ratio(q[0] - q[-1], q[1] - q[0])
  limiter f(x) = max(0, x)^k / (1 + x^2)
  flux = u * (q[0] + f(r) * (q[1] - q[0]) / 2)
}""")
    (form,) = plan_kernel(scheme).limiter_forms
    a = np.array([1e300, 1e-300, -2.0, 0.0, 3.0])
    b = np.array([1e-300, 1e300, 1.0, 5.0, 0.0])
    got = numpy_module(scheme, "double").slope_f(a, b)
    assert np.all(np.isfinite(got))
    assert np.allclose(got, [1e-300, 0.0, 0.0, 0.0, 0.0], rtol=1e-15, atol=0)


# ---- the C forms: the numpy bits -----------------------------------------------------

C_HARNESS = r"""
#include <stdio.h>
#include <stdlib.h>
#include "NAME.c"
int main(void)
{
    static REAL a[COUNT], b[COUNT];
    if (fread(a, sizeof a[0], COUNT, stdin) != COUNT || fread(b, sizeof b[0], COUNT, stdin) != COUNT)
        return 1;
    for (size_t i = 0; i < COUNT; ++i) {
        REAL out[2] = {NAME_slope_LIM(a[i], b[i]), NAME_psi_LIM(a[i], b[i])};
        fwrite(out, sizeof out[0], 2, stdout);
    }
    return 0;
}
"""


@pytest.mark.slow
@pytest.mark.parametrize("precision", ["double", "float"])
def test_c_forms_give_the_numpy_bits(tmp_path, precision):
    """Bit-stable across back ends: the C functions, compiled as the build compiles them,
    return exactly the numpy kernel's values for every limiter here."""
    real = "double" if precision == "double" else "float"
    for name in ("vanleer", "tidewater", "rooted", "ratioed", "even"):
        scheme, slope, value = forms(name, precision)
        for file, text in c_sources(scheme, precision).items():
            (tmp_path / file).write_text(text)
        a, b = data(precision, 11)
        harness = (C_HARNESS.replace("NAME", scheme.name).replace("LIM", name)
                   .replace("REAL", real).replace("COUNT", str(len(a))))
        (tmp_path / "harness.c").write_text(harness)
        subprocess.run([need("gcc"), "-std=c99", "-O2", "harness.c", "-lm", "-o", "harness"],
                       cwd=tmp_path, check=True, capture_output=True)
        run = subprocess.run([str(tmp_path / "harness")], input=a.tobytes() + b.tobytes(),
                             capture_output=True, check=True)
        got = np.frombuffer(run.stdout, a.dtype).reshape(-1, 2)
        with np.errstate(under="ignore"):
            want = np.stack([slope(a, b), value(a, b)], axis=1).astype(a.dtype)
        assert np.array_equal(got, want), name  # every value to the bit (a zero's sign aside)


def test_scale_helpers_are_exact_powers_of_two():
    """m * scale_down(m) lies in [2, 4) for every normal m from 2^-1021 up, [1, 4) in
    single precision from 2^-125; both helpers give powers of two whose product is 1."""
    scheme, _, _ = forms("tidewater", "double")
    for precision, (dtype, word, low, mantissa) in {
            "double": (np.float64, np.uint64, -1021, 52),
            "float": (np.float32, np.uint32, -125, 23)}.items():
        module = numpy_module(scheme, precision)
        info = np.finfo(dtype)
        m = np.concatenate([[0.0, info.smallest_subnormal, info.tiny, info.max],
                            np.ldexp(1.0, np.arange(low, int(np.log2(info.max)))) * 1.5])
        m = m.astype(dtype)
        down, up = module.scale_down(m), module.scale_up(m)
        for power in (down, up):
            assert np.all(power.view(word) & ((1 << mantissa) - 1) == 0) and np.all(power > 0)
        assert np.all(down * up == 1)
        normal = m >= np.ldexp(1.0, low)
        product = m[normal].astype(np.float64) * down[normal]
        assert np.all((2 <= product) & (product < 4))
        assert np.all(np.isfinite(m * down)) and np.all(m[m > 0] * down[m > 0] > 0)


# ---- whole faces that square their data: evaluated on scaled values ------------------

def test_degrees_of_a_weighted_reconstruction():
    """WENO's eps sits beside squared differences: degree 2; the face is of degree 1."""
    from fluxloom.compiler.emit.scaled_face import param_degrees

    scheme = load_scheme(EXAMPLES / "weno5_rk3.loom")
    degrees, wide, widest = param_degrees(scheme.face)
    assert {p.name: d for p, d in degrees.items()} == {"eps": 2} and wide and widest == 4
    linear = load_scheme(EXAMPLES / "kappa_rk3.loom")
    assert param_degrees(linear.face)[1] is False
    offset = scheme_from_text("scheme off {\n  flux = u * (q[0] + 1 + q[1]^2)\n}\n")
    assert param_degrees(offset.face) is None  # 1 + q^2: not homogeneous


@pytest.mark.parametrize("precision", ["double", "float"])
def test_a_scaled_face_is_the_definition_at_every_magnitude(precision):
    """The WENO face of the bundled example against the face as written, evaluated by
    mpmath at 200 bits (eps bound), from subnormal data to 1e300 (1e30): the same to
    1e-6 of the stencil's largest value (the weights are ill-conditioned where two
    smoothness indicators nearly tie), finite everywhere, and on data of order one the
    very bits of the face as written."""
    from fluxloom.compiler.symbols import q

    scheme = load_scheme(EXAMPLES / "weno5_rk3.loom")
    module = numpy_module(scheme, precision)
    dtype = np.float64 if precision == "double" else np.float32
    low, high = EXPONENT[precision]
    rng = np.random.default_rng(9)
    cells = []
    for k in range(5):
        exponent = rng.uniform(low, high, 300)
        exponent[::3] = exponent[0::3].copy()  # stencils of one magnitude too
        with np.errstate(under="ignore"):
            cells.append((rng.choice([-1.0, 1.0], 300) * 10.0 ** exponent).astype(dtype))
    with np.errstate(over="raise", invalid="raise", divide="raise", under="ignore"):
        got = module.face_values(*cells)
    assert np.all(np.isfinite(got))
    mpmath.mp.prec = 200
    offsets = (-2, -1, 0, 1, 2)
    face = sympy.lambdify([q(k) for k in offsets], scheme.bound_face, modules="mpmath")
    scale = np.max(np.abs(np.array(cells, dtype=float)), axis=0)
    for i in range(300):
        want = face(*[mpmath.mpf(float(c[i])) for c in cells])
        assert abs(float(got[i]) - float(want)) <= 1e-6 * scale[i] + 4 * np.finfo(dtype).tiny
    ordinary = [rng.normal(size=500).astype(dtype) for _ in offsets]
    assert np.array_equal(module.face_values(*ordinary), unscaled_face(scheme, precision)(*ordinary))


def unscaled_face(scheme, precision: str):
    """face_values of the same module printed without the scaling: the same operations in
    the same order, so on ordinary data the scaled face must give its very bits."""
    from fluxloom.compiler.emit import plan
    from fluxloom.compiler.emit.numpy_ import numpy_source

    original = plan.scaled_face
    plan.scaled_face = lambda *args: None
    try:
        source = numpy_source(scheme, precision, ("unscaled",))
    finally:
        plan.scaled_face = original
    namespace: dict = {}
    exec(compile(source, "unscaled", "exec"), namespace)  # noqa: S102 - our own output
    return namespace["face_values"]
