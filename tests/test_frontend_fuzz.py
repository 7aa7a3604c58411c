"""Property: any text either compiles or raises LoomError with a location.

Mutated examples and token soup exercise the parser, the checks and the lowering;
no other exception may escape the front end.
"""
from __future__ import annotations

from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
import pytest

from fluxloom.compiler import LoomError, Scheme, scheme_from_text

EXAMPLES = [p.read_text() for p in sorted((Path(__file__).resolve().parents[1] / "examples").glob("*.loom"))]
TOKENS = ["scheme", "about", "time", "param", "let", "limiter", "flux", "low_flux", "correct",
          "clip", "fct", "euler", "ssp_rk3", "rk4", "q", "u", "c", "r", "kappa", "abs", "min", "max",
          "sign", "sqrt", "ratio", "{", "}", "(", ")", "[", "]", ",", "=", "+", "-", "*", "/",
          "^", "0", "1", "-1", "2", "1/3", "0.5", "1e3", '"text"', '"', "#", "\n", " ", "\t",
          "\u00e9", "\x00", "q[0]", "q[1]", "q[-1]", "u *", "x"]


@st.composite
def mutated_example(draw):
    text = draw(st.sampled_from(EXAMPLES))
    for _ in range(draw(st.integers(1, 4))):
        kind = draw(st.sampled_from(["delete", "insert", "replace", "swap-lines", "dup-line"]))
        if not text:
            text = draw(st.sampled_from(TOKENS))
            continue
        i = draw(st.integers(0, len(text) - 1))
        j = draw(st.integers(i, min(len(text), i + 12)))
        if kind == "delete":
            text = text[:i] + text[j:]
        elif kind == "insert":
            text = text[:i] + draw(st.sampled_from(TOKENS)) + text[i:]
        elif kind == "replace":
            text = text[:i] + draw(st.text(min_size=0, max_size=4)) + text[j:]
        else:
            lines = text.split("\n")
            a = draw(st.integers(0, len(lines) - 1))
            b = draw(st.integers(0, len(lines) - 1))
            if kind == "swap-lines":
                lines[a], lines[b] = lines[b], lines[a]
            else:
                lines.insert(b, lines[a])
            text = "\n".join(lines)
    return text


@st.composite
def token_soup(draw):
    body = draw(st.lists(st.sampled_from(TOKENS), min_size=0, max_size=30))
    return "scheme s {\n" + " ".join(body) + "\n}\n"


def _compiles_or_located(text: str) -> None:
    try:
        result = scheme_from_text(text, "fuzz.loom")
    except LoomError as err:
        assert err.span is not None, err.message
        assert err.render().startswith(f"fuzz.loom:{err.span.line}:{err.span.col}: error: ")
        return
    assert isinstance(result, Scheme)


@pytest.mark.slow
@settings(max_examples=1500, deadline=None, suppress_health_check=list(HealthCheck))
@given(mutated_example())
def test_mutated_examples_compile_or_fail_located(text):
    _compiles_or_located(text)


@settings(max_examples=700, deadline=None, suppress_health_check=list(HealthCheck))
@given(token_soup())
def test_token_soup_compiles_or_fails_located(text):
    _compiles_or_located(text)
