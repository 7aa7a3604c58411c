"""The documented limits of the front end (README: "Limits").

Each keeps one cost bounded: below them `check` stays fast and small, above them
the front end stops with a located error instead of running away.
"""
from __future__ import annotations

MAX_FILE_BYTES = 256 * 1024
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
