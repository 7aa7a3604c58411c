"""Constants of a spec: exact in analysis, bounded in size, one rounding in every kernel.

Number literals and constant subexpressions are kept exact (sympy Rationals and
algebraic numbers) for the analysis. Exact arithmetic can run away, so sizes are
bounded before it starts: a literal has at most MAX_LITERAL_DIGITS digits and a
decimal exponent of at most MAX_DECIMAL_EXPONENT, a power of a constant is
estimated before it is computed, and no exact constant may need more than
MAX_CONSTANT_BITS bits.

Kernels are built in double or single precision, and a spec must mean the same
in both: every nonzero constant that reaches a kernel lies in the range of
single-precision reals, [REAL_MIN, REAL_MAX] in magnitude (below 1.2e-38 single
precision keeps fewer digits, but no constant becomes 0 or infinite), and is real
and finite. Each target prints the constant rounded once to the nearest real of the
kernel's precision (IEEE round to nearest, ties to even), so C, Fortran and numpy
hold the same bits.
"""
from __future__ import annotations

import math
import re
from fractions import Fraction

import numpy as np
import sympy

from .diagnostics import LoomError, Span

MAX_LITERAL_DIGITS = 100
MAX_DECIMAL_EXPONENT = 400
MAX_CONSTANT_BITS = 10_000
from .limits import MAX_EXPONENT  # one limit, written once
"""The largest power of a constant (q[0]^k needs |k| <= 64 as well)."""

REAL_MAX = Fraction(int(np.finfo(np.float32).max))
REAL_MIN = Fraction(*float(np.finfo(np.float32).smallest_subnormal).as_integer_ratio())
RANGE_TEXT = "1.4e-45 to 3.4e38"

_LITERAL = re.compile(r"^(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d+))?$")


def literal(text: str, span: Span | None = None, where: str | None = None) -> sympy.Rational:
    """A decimal literal as an exact Rational (0.1 -> 1/10), sizes bounded first.

    where: the file label for errors outside a spec (`--set`).
    """
    match = _LITERAL.match(text.strip())
    if not match or not (match.group(1) or match.group(2)):
        raise _error(f"'{text}' is not a number", span, where)
    whole, fraction, exponent = match.group(1), match.group(2) or "", match.group(3) or "0"
    digits = (whole + fraction).lstrip("0")
    if len(whole + fraction) > MAX_LITERAL_DIGITS:
        raise _error(f"the number has {len(whole + fraction)} digits; at most "
                     f"{MAX_LITERAL_DIGITS} are allowed", span, where)
    if not digits:
        return sympy.Integer(0)
    exponent = exponent.lstrip("+")
    if len(exponent.lstrip("-").lstrip("0")) > 6 or abs(int(exponent)) > MAX_DECIMAL_EXPONENT:
        raise _error(f"the number {text[:24]}{'...' if len(text) > 24 else ''} is outside the "
                     f"range of constants ({RANGE_TEXT} in magnitude)", span, where)
    value = Fraction(whole + fraction or "0") * Fraction(10) ** (int(exponent) - len(fraction))
    return sympy.Rational(value.numerator, value.denominator)


def check_power(base: sympy.Expr, exponent: sympy.Expr, span: Span | None,
                written: sympy.Expr | None = None) -> None:
    """Refuse base ^ exponent before computing it when the exact result would be huge;
    `written` is the exponent as the spec wrote it when params gave it its value."""
    if not exponent.is_number:
        return
    if abs(exponent) > MAX_EXPONENT:
        if written is not None and written != exponent:
            raise LoomError(f"exponent {written} = {exponent} is too large (at most "
                            f"{MAX_EXPONENT}: a param used as an exponent is bounded like a "
                            "number)", span)
        raise LoomError(f"exponent {exponent} is too large (at most {MAX_EXPONENT} here)", span)
    if base.is_Rational and exponent.is_Rational:
        bits = abs(int(base.p)).bit_length() + int(base.q).bit_length()
        if bits * abs(exponent) > MAX_CONSTANT_BITS:
            raise LoomError(f"this power of a constant would need about "
                            f"{int(bits * abs(exponent))} bits exactly; constants are limited "
                            f"to {MAX_CONSTANT_BITS} bits (and to {RANGE_TEXT} in magnitude)",
                            span)


def check_exact(value: sympy.Expr, span: Span | None, where: str | None = None) -> None:
    """A constant subexpression may be computed with: real, finite, of bounded size."""
    if value.has(sympy.zoo, sympy.oo, -sympy.oo, sympy.nan):
        raise _error("this constant is not finite (a division by zero or an infinite value)",
                     span, where)
    if value.is_real is False or value.has(sympy.I):
        raise _error(f"this constant is not a real number (it is {value}); only real constants "
                     "are allowed", span, where)
    if value.is_Rational:
        bits = abs(int(value.p)).bit_length() + int(value.q).bit_length()
        if bits > MAX_CONSTANT_BITS:
            raise _error(f"this constant needs {bits} bits exactly; constants are limited to "
                         f"{MAX_CONSTANT_BITS} bits", span, where)


def check_range(value: sympy.Expr, span: Span | None, where: str | None = None,
                what: str = "constant") -> None:
    """A constant a kernel holds: real, finite, zero or within single-precision range."""
    check_exact(value, span, where)
    magnitude = _exact_magnitude(value)
    if magnitude is None:
        raise _error(f"the {what} {value} could not be evaluated as a real number", span, where)
    if magnitude != 0 and not (REAL_MIN <= magnitude <= REAL_MAX):
        shown = (f"{float(exact_value(value)):.3g}" if Fraction(1, 10 ** 300) < magnitude
                 < 10 ** 300 else f"about 1e{_decimal_exponent(magnitude)}")
        raise _error(f"the {what} {shown} is outside the range of constants ({RANGE_TEXT} in "
                     "magnitude), the single-precision reals: kernels of either precision "
                     "must hold it", span, where)


def _decimal_exponent(magnitude: Fraction) -> int:
    return round((magnitude.numerator.bit_length() - magnitude.denominator.bit_length())
                 * math.log10(2))


def _exact_magnitude(value: sympy.Expr) -> Fraction | None:
    try:
        return abs(exact_value(value))
    except (ValueError, TypeError, ZeroDivisionError):
        return None


def _error(message: str, span: Span | None, where: str | None) -> LoomError:
    if where is not None and span is None:
        return LoomError(message, file=where)
    return LoomError(message, span)


# ---- rounding to a kernel's precision ----------------------------------------------

def exact_value(value: sympy.Expr) -> Fraction:
    """The constant as a Fraction: exact for rationals, 60 digits for algebraic numbers
    (no algebraic number lies closer than that to a rounding boundary that matters)."""
    if value.is_Rational:
        return Fraction(int(value.p), int(value.q))
    approx = sympy.N(value, 60)
    if not approx.is_Float:
        raise ValueError(f"{value} has no real value")
    return Fraction(str(approx))


def nearest(value: sympy.Expr, precision: str) -> float:
    """The real of the kernel's precision nearest the constant (ties to even), as a
    Python float holding exactly that value."""
    exact = exact_value(value)
    candidate = float(exact)  # correctly rounded to double
    if precision == "double":
        return candidate
    single = np.float32(candidate)
    if not math.isfinite(single):
        raise LoomError(f"the constant {value} overflows single precision", file="<emit>")
    below = np.nextafter(single, np.float32(-np.inf))
    above = np.nextafter(single, np.float32(np.inf))
    best = min((single, below, above),
               key=lambda v: (abs(Fraction(float(v)) - exact),
                              int(np.array(v, np.float32).view(np.uint32)) & 1))
    return float(best)


def shortest_text(value: float, precision: str) -> str:
    """The shortest decimal that reads back as value when parsed at the precision
    ('0.1', '0.33333334', '1e-05'); a C or Fortran compiler parses it straight into
    that precision. Python parses decimals into doubles only, so the numpy kernel of
    single precision prints repr(value) instead: the exact double of the single."""
    text = repr(value) if precision == "double" else str(np.float32(value))
    if not math.isfinite(value):
        raise LoomError(f"the constant {value} is not finite", file="<emit>")
    return text if ("e" in text or "." in text) else text + ".0"
