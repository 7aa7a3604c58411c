"""The documented limits of the front end (README: "Limits").

Each keeps one cost bounded: below them `check` stays fast and small, above them
the front end stops with a located error instead of running away.
"""
from __future__ import annotations

MAX_FILE_BYTES = 128 * 1024
"""A spec file larger than this is refused before it is parsed."""

MAX_OFFSET = 8
"""Stencil offsets q[k] need -MAX_OFFSET <= k <= MAX_OFFSET (the analysis works on
polynomials whose degree grows with the width times the number of stages)."""

MAX_DEPTH = 100
"""Expressions nest at most this deep: every operator, parenthesis, call and unary
sign is one level (a sum of n terms is n - 1 levels; group long sums). The same
holds once lets are written out (a chain of lets each wrapping the last nests too)."""

MAX_EXPRESSION_NODES = 10_000
"""A flux, low flux or let may hold at most this many operators and operands once
the lets it uses are written out in full (chains of lets can double in size)."""

MAX_DEGREE = 256
"""An expression's degree in the cell values (and c, and a limiter's argument) with its
lets and limiters written out, as a fraction over one denominator (the larger of the
two degrees): powers multiply it, products add it, a sum of fractions multiplies out
their denominators; piecewise parts (abs, min, max) count as their largest piece.
Bounds towers of powers built through lets."""

MAX_EXPONENT = 64
"""A number written as an exponent is at most this in size (exact arithmetic on
constants cannot run away); a param used as an exponent too."""
