"""Constants: exact in analysis, of bounded size, one rounding in every kernel.

References: Python's int/int division and float() of a Fraction, both correctly
rounded to double by the language's definition; the single-precision neighbours of a
value found with numpy.nextafter and compared exactly with fractions; gcc and
gfortran reading the generated literals.
"""
from __future__ import annotations

import resource
import subprocess
import sys
from fractions import Fraction

import numpy as np
import sympy
import pytest

from fluxloom.compiler import LoomError, parse_overrides, scheme_from_text
from fluxloom.compiler.emit import c_files
from fluxloom.runtime.kernel import load_kernel, numpy_module, run_periodic
from fluxloom.runtime.reference import reference_run

from test_emit_c import need

CONSTANTS = {  # param name -> (text in the spec, exact value)
    "third": ("1/3", Fraction(1, 3)),
    "tenth": ("0.1", Fraction(1, 10)),
    "tiny": ("2^-40", Fraction(1, 2 ** 40)),
    "big": ("1e30", Fraction(10 ** 30)),
    "huge_int": ("12345678901234567890123", Fraction(12345678901234567890123)),
    "near_max": ("3.4e38", Fraction(34 * 10 ** 37)),
    "near_min": ("1.2e-38", Fraction(12, 10 ** 39)),
    "subnormal_single": ("1e-40", Fraction(1, 10 ** 40)),
    "long": ("0.1234567890123456789012345678901234567890", Fraction(
        1234567890123456789012345678901234567890, 10 ** 40)),
    "negative": ("-7/9", Fraction(-7, 9)),
    "odd_single": ("16777217", Fraction(16777217)),  # halfway between two singles: to even
}


def nearest_single(value: Fraction) -> float:
    """The single-precision real nearest value, ties to even, by exact comparison."""
    guess = np.float32(float(value))
    candidates = [guess, np.nextafter(guess, np.float32(-np.inf)),
                  np.nextafter(guess, np.float32(np.inf))]
    return float(min(candidates, key=lambda v: (abs(Fraction(float(v)) - value),
                                                int(np.array(v).view(np.uint32)) & 1)))


def constants_scheme():
    params = "\n".join(f"  param {name} = {text}" for name, (text, _) in CONSTANTS.items())
    total = " + ".join(CONSTANTS)
    return scheme_from_text(f"scheme consts {{\n{params}\n"
                            f"  flux = u * (q[0] + ({total}) * 0 * q[1])\n}}\n")


@pytest.mark.parametrize("precision", ["double", "float"])
def test_every_target_holds_the_same_correctly_rounded_constant(tmp_path, precision):
    scheme = constants_scheme()
    want = {name: float(value) if precision == "double" else nearest_single(value)
            for name, (_, value) in CONSTANTS.items()}
    # numpy: the module's params
    module = numpy_module(scheme, precision)
    assert {name: float(v) for name, v in module.PARAMS.items()} == want
    real = "double" if precision == "double" else "float"
    for file, text in c_files(scheme, precision).items():
        (tmp_path / file).write_text(text)
    # C: the header's macros, printed exactly (%a) after the compiler read them
    lines = "".join(f'    printf("%a\\n", (double)({real})consts_PARAM_{name});\n' for name in want)
    (tmp_path / "show.c").write_text(f'#include <stdio.h>\n#include "consts.h"\n'
                                     f"int main(void)\n{{\n{lines}    return 0;\n}}\n")
    subprocess.run([need("gcc"), "-std=c99", "-Wall", "-Wextra", "-Wpedantic", "-Werror",
                    "show.c", "-o", "show_c"], cwd=tmp_path, check=True, capture_output=True)
    run = subprocess.run([str(tmp_path / "show_c")], capture_output=True, text=True, check=True)
    assert [float.fromhex(v) for v in run.stdout.split()] == list(want.values())
    # Fortran: the interface module's parameters, as bits
    kind, bits = ("c_double", "c_int64_t") if precision == "double" else ("c_float", "c_int32_t")
    prints = "".join(f"  print '(i0)', transfer(consts_param_{name}, 0_{bits})\n" for name in want)
    (tmp_path / "show.f90").write_text(
        f"program show\n  use, intrinsic :: iso_c_binding, only: {bits}\n  use consts_mod\n"
        f"  implicit none\n{prints}end program show\n")
    # the module's sweep wrapper calls the C kernel, so the program links its object
    subprocess.run([need("gcc"), "-std=c99", "-O1", "-c", "consts.c", "-o", "consts.o"],
                   cwd=tmp_path, check=True, capture_output=True)
    subprocess.run([need("gfortran"), "-std=f2008", "-Wall", "-Werror", "consts_mod.f90",
                    "show.f90", "consts.o", "-lm", "-o", "show_f"], cwd=tmp_path, check=True,
                   capture_output=True)
    run = subprocess.run([str(tmp_path / "show_f")], capture_output=True, text=True, check=True)
    dtype, word = (np.float64, np.int64) if precision == "double" else (np.float32, np.int32)
    assert [int(v) for v in run.stdout.split()] == \
        [int(np.array(v, dtype).view(word)) for v in want.values()]


def test_integer_params_divide_as_reals():
    """param a = 1, b = 4: a / b is 1/4 in every kernel (C once computed 1 / 4 = 0); 20 steps
    of C, numpy and the face-by-face reference agree to round-off."""
    scheme = scheme_from_text("scheme quarter {\n  param a = 1\n  param b = 4\n"
                              "  flux = u * (q[0] + a / b * (q[1] - q[0]))\n}\n")
    x = np.linspace(0.0, 1.0, 40, endpoint=False)
    q = np.exp(-40 * (x - 0.5) ** 2)
    u = np.ones(41)
    want = reference_run(scheme, q, u, 0.4, 20)
    for backend in ("numpy", "c"):
        got = run_periodic(load_kernel(scheme, backend), q, u, 0.4, 20)
        assert np.max(np.abs(got - want)) < 1e-14


def test_a_clip_bound_may_be_a_param_and_follows_set():
    text = "scheme bounded {\n  param lo = 0\n  flux = u * q[0]\n  clip lo, 1\n}\n"
    scheme = scheme_from_text(text)
    assert scheme.clip == (0, 1)
    moved = scheme_from_text(text, overrides=parse_overrides(["lo=1/2"]))
    assert moved.clip == (Fraction(1, 2), 1)
    got = run_periodic(load_kernel(moved, "c"), np.array([0.0, 0.25, 0.75, 1.0]), np.ones(5),
                       0.5, 1)
    assert np.all(got >= 0.5)
    with pytest.raises(LoomError, match="LO < HI"):
        scheme_from_text(text, overrides=parse_overrides(["lo=2"]))


def test_a_param_defined_from_params_follows_set():
    text = ("scheme derived {\n  param a = 1/4\n  param b = 2 * a\n"
            "  flux = u * (q[0] + b * (q[1] - q[0]))\n}\n")
    assert {p.name: p.value for p in scheme_from_text(text).params}["b"] == Fraction(1, 2)
    scheme = scheme_from_text(text, overrides=parse_overrides(["a=1/8"]))
    assert {p.name: p.value for p in scheme.params}["b"] == Fraction(1, 4)


REFUSED = [  # (flux expression, message fragment, where the caret goes: a part of it or
             # its index in the expression)
    ("1e39 * q[1]", "outside the range", "1e39"),
    ("1e-46 * q[1]", "outside the range", "1e-46"),
    ("1e308 * 10 * q[1]", "outside the range", "1e308"),
    ("1e20 * q[1] * 1e20", "combine into it", None),  # the whole flux expression
    ("sqrt(-1) * q[1]", "not a real number", "sqrt"),
    ("(-8)^(1/3) * q[1]", "not a real number", "(-8)"),
    ("0^-1 * q[1]", "not finite", "0^"),
    ("q[1] / (1 - 1)", "division by zero", "1 - 1"),
    ("1e999999999 * q[1]", "outside the range", "1e9"),
    ("0." + "1" * 5000 + " * q[1]", "digits", "0."),
    # (2^64)^64 has 4097 bits; one more ^64 would need 262,208: the caret is at that 64
    ("((((((2^64)^64)^64)^64)^64)^64) * q[1]", "bits", 16),
    ("q[1]^65", "too large", "65"),
]
FACE_COLUMN = len("  flux = u * (") + 1


@pytest.mark.parametrize("face, fragment, culprit", REFUSED,
                         ids=[f"{r[1]}-{i}" for i, r in enumerate(REFUSED)])
def test_constants_no_kernel_can_hold_are_located_errors(face, fragment, culprit):
    with pytest.raises(LoomError) as caught:
        scheme_from_text(f"scheme bad {{\n  flux = u * ({face} + q[0])\n}}\n", file="n.loom")
    assert fragment in caught.value.message
    if culprit is None:
        column = len("  flux = ") + 1
    else:
        column = FACE_COLUMN + (culprit if isinstance(culprit, int) else face.index(culprit))
    assert (caught.value.span.line, caught.value.span.col) == (2, column)


@pytest.mark.parametrize("item, fragment", [
    ("k=1e999999999", "outside the range"), ("k=1e40", "outside the range"),
    ("k=1e-46", "outside the range"),
    ("k=" + "9" * 200, "digits"), ("k=70", "too large")])
def test_set_values_are_bounded_too(item, fragment):
    text = "scheme powered {\n  param k = 2\n  flux = u * (q[0] + q[1]^k / 100)\n}\n"
    with pytest.raises(LoomError, match=fragment):
        scheme_from_text(text, overrides=parse_overrides([item]))


HUGE_INPUTS = [
    "1e999999999 * q[1]",
    "((((((2^64)^64)^64)^64)^64)^64) * q[1]",
    "((1 + 10^-30)^64)^64^64 * q[1]",
    "9" * 4299 + " * q[1]",
]


def test_huge_constants_are_refused_within_a_small_memory_cap():
    """Bounded before exact arithmetic starts: each refusal runs in a child process whose
    address space is capped at 1 GiB (a blow-up would end it with MemoryError)."""
    script = (
        "import sys, resource\n"
        "resource.setrlimit(resource.RLIMIT_AS, (1 << 30, 1 << 30))\n"
        "from fluxloom.compiler import LoomError, scheme_from_text\n"
        "for face in sys.argv[1:]:\n"
        "    try:\n"
        "        scheme_from_text('scheme h {\\n  flux = u * (q[0] + ' + face + ')\\n}\\n')\n"
        "    except LoomError as err:\n"
        "        print('refused', err.span.line, err.span.col)\n")
    done = subprocess.run([sys.executable, "-c", script, *HUGE_INPUTS], capture_output=True,
                          text=True, timeout=300)
    assert done.returncode == 0, done.stderr[-2000:]
    assert done.stdout.split("\n")[:-1] == ["refused 2 " + str(c) for c in (22, 38, 36, 22)], \
        done.stdout
    assert resource.getrlimit(resource.RLIMIT_AS)  # the cap was the child's only


# A param of value 0 under a division has no value (common practice, no source): the
# front end must say so where it is written, and `--set` likewise, never an internal error.
@pytest.mark.parametrize("text, line", [
    ("scheme z {\n  param k0 = 0\n  param y = max(0, 2 / k0)\n  flux = u * q[0]\n}\n", 3),
    ("scheme z {\n  param k0 = 0\n  flux = u * q[0] * (1 + max(0, 1 / k0))\n}\n", 3),
    ("scheme z {\n  param k0 = 0\n  let r = ratio(q[0] - q[-1], q[1] - q[0])\n"
     "  limiter f(x) = max(0, min(1, x / k0))\n  flux = u * (q[0] + f(r) * (q[1] - q[0]))\n}\n", 4),
])
def test_a_division_by_a_param_that_is_zero_is_located(text, line):
    with pytest.raises(LoomError) as caught:
        scheme_from_text(text, "z.loom")
    assert "no finite value" in caught.value.message or "not a finite number" in caught.value.message
    assert caught.value.span.line == line


def test_set_giving_a_param_zero_under_a_division_is_refused():
    text = "scheme z {\n  param k0 = 1\n  flux = u * q[0] * (1 + max(0, 1 / k0) / 8)\n}\n"
    assert scheme_from_text(text, "z.loom", {"k0": sympy.Integer(2)}).params[0].value == 2
    with pytest.raises(LoomError, match="no finite value with k0 = 0"):
        scheme_from_text(text, "z.loom", {"k0": sympy.Integer(0)})
