"""Every kind of bad input gets a located message, never a traceback."""
from __future__ import annotations

import pytest

from fluxloom.compiler import LoomError, load_scheme, parse_overrides, scheme_from_text
from fluxloom.runtime.cli import main

# (case id, spec text, fragment of the message, line, column)
BAD_SPECS = [
    ("unbalanced-open", "scheme a {\n  flux = u * (q[0]\n}\n",
     "unbalanced parenthesis: '(' is never closed", 2, 19),
    ("unbalanced-close", "scheme a {\n  flux = u * q[0])\n}\n",
     "')' has no matching '('", 2, 18),
    ("missing-brace", "scheme a {\n  flux = u * q[0]\n",
     "missing '}'", 2, 18),
    ("stray-token", "scheme a {\n  flux = u * q[0] q[1]\n}\n",
     "unexpected 'q'", 2, 19),
    ("stray-operator", "scheme a {\n  flux = u * * q[0]\n}\n",
     "unexpected '*'", 2, 14),
    ("unterminated-string", 'scheme a {\n  about "oops\n  flux = u * q[0]\n}\n',
     "unterminated string", 2, 9),
    ("unknown-name", "scheme a {\n  param kappa = 1\n  flux = u * (q[0] + kapa)\n}\n",
     "unknown name 'kapa' (did you mean 'kappa'?)", 3, 22),
    ("used-before-defined", "scheme a {\n  flux = u * (q[0] + w)\n  let w = 1\n}\n",
     "'w' is used before it is defined (on line 3)", 2, 22),
    ("courant-in-rk", "scheme a {\n  time ssp_rk3\n  flux = u * (q[0] + c)\n}\n",
     "'c' (the Courant number) is only defined for 'time euler'", 3, 22),
    ("flux-nonlinear-in-u", "scheme a {\n  flux = u^2 * q[0]\n}\n",
     "not linear in u", 2, 10),
    ("flux-abs-u", "scheme a {\n  flux = abs(u) * q[0]\n}\n",
     "not linear in u", 2, 10),
    ("flux-part-without-u", "scheme a {\n  flux = u * q[0] + q[1]\n}\n",
     "has a part without u", 2, 10),
    ("flux-without-u", "scheme a {\n  flux = q[0]\n}\n",
     "does not contain u", 2, 10),
    ("missing-flux", "scheme a {\n  time euler\n}\n",
     "no 'flux = ...' statement", 1, 8),
    ("repeated-flux", "scheme a {\n  flux = u * q[0]\n  flux = u * q[1]\n}\n",
     "'flux' is given twice (first on line 2)", 3, 3),
    ("name-defined-twice", "scheme a {\n  let r = 1\n  let r = 2\n  flux = u * q[0]\n}\n",
     "'r' is defined twice (first on line 2)", 3, 7),
    ("param-and-let-clash", "scheme a {\n  param k = 1\n  let k = 2\n  flux = u * q[0]\n}\n",
     "'k' is defined twice", 3, 7),
    ("limiter-second-arg-not-c", "scheme a {\n  limiter f(r, s) = r\n  flux = u * q[0]\n}\n",
     "a limiter's second argument can only be 'c', the Courant number", 2, 16),
    ("limiter-three-args", "scheme a {\n  limiter f(r, c, s) = r\n  flux = u * q[0]\n}\n",
     "a limiter takes its ratio and at most 'c'", 2, 19),
    ("limiter-of-c-with-rk", "scheme a {\n  time ssp_rk3\n  limiter f(r, c) = r\n"
     "  flux = u * q[0]\n}\n", "a limiter of 'c' (the Courant number) needs 'time euler'", 3, 16),
    ("limiter-c-undeclared", "scheme a {\n  limiter f(r) = r / c\n  flux = u * q[0]\n}\n",
     "declare it as limiter NAME(r, c)", 2, 22),
    ("limiter-of-c-called-without-c", "scheme a {\n  limiter f(r, c) = r\n"
     "  flux = u * f(q[0])\n}\n", "limiter 'f' takes 2 arguments (f(r, c)), given 1", 3, 14),
    ("limiter-of-c-called-with-a-number", "scheme a {\n  limiter f(r, c) = r\n"
     "  flux = u * f(q[0], 0.5)\n}\n", "the second argument of limiter 'f' must be 'c'", 3, 22),
    ("limiter-zero-over-zero", "scheme a {\n  limiter f(r) = 5 * max(0, r) / (2 * (1 + r))\n"
     "  flux = u * (q[0] + f(q[0]))\n}\n", "limiter 'f' has no value at r = -1", 2, 35),
    ("limiter-pole", "scheme a {\n  limiter f(r) = max(0, r) / (r - 2)\n"
     "  flux = u * (q[0] + f(q[0]))\n}\n", "limiter 'f' is unbounded near r = 2", 2, 31),
    ("limiter-sqrt-of-negative", "scheme a {\n  limiter f(r) = sqrt(r)\n"
     "  flux = u * (q[0] + f(q[0]))\n}\n", "square root of a negative number", 2, 18),
    ("limiter-of-c-zero-over-zero-at-c-1", "scheme a {\n"
     "  limiter f(r, c) = max(0, min(2 * r / (1 - c), 1))\n"
     "  flux = u * (q[0] + f(q[0], c))\n}\n", "limiter 'f' has no value at c = 1", 2, 41),
    ("limiter-no-args", "scheme a {\n  limiter f() = 1\n  flux = u * q[0]\n}\n",
     "expected an argument before ')'", 2, 13),
    ("limiter-called-with-two", "scheme a {\n  limiter f(r) = r\n  flux = u * f(q[0], q[1])\n}\n",
     "limiter 'f' takes 1 argument, given 2", 3, 14),
    ("offset-decimal", "scheme a {\n  flux = u * q[0.5]\n}\n",
     "the offset in q[...] must be an integer", 2, 16),
    ("offset-symbol", "scheme a {\n  flux = u * q[c]\n}\n",
     "the offset in q[...] must be an integer", 2, 16),
    ("unknown-time", "scheme a {\n  time rk3\n  flux = u * q[0]\n}\n",
     "unknown time method 'rk3'", 2, 8),
    ("unknown-function", "scheme a {\n  flux = u * mni(q[0], q[1])\n}\n",
     "unknown function 'mni' (did you mean 'min'?)", 2, 14),
    ("wrong-arity-abs", "scheme a {\n  flux = u * abs(q[0], q[1])\n}\n",
     "'abs' takes 1 argument, given 2", 2, 14),
    ("wrong-arity-min", "scheme a {\n  flux = u * min(q[0])\n}\n",
     "'min' takes at least 2 arguments, given 1", 2, 14),
    ("wrong-arity-ratio", "scheme a {\n  flux = u * ratio(q[0])\n}\n",
     "'ratio' takes 2 arguments, given 1", 2, 14),
    ("empty-file", "", "empty file", 1, 1),
    ("comments-only", "# nothing but a comment\n\n", "empty file", 1, 1),
    ("name-not-identifier", "scheme 2d {\n  flux = u * q[0]\n}\n",
     "scheme name '2d' is not a C identifier", 1, 8),
    ("name-with-dash", "scheme my-scheme {\n  flux = u * q[0]\n}\n",
     "scheme name 'my-scheme' is not a C identifier", 1, 8),
    ("name-c-keyword", "scheme double {\n  flux = u * q[0]\n}\n",
     "scheme name 'double' is a C keyword", 1, 8),
    ("index-not-q", "scheme a {\n  flux = u * u[0]\n}\n",
     "only 'q' can be indexed", 2, 14),
    ("bare-q", "scheme a {\n  flux = u * q\n}\n", "'q' needs an offset", 2, 14),
    ("q-in-limiter", "scheme a {\n  limiter f(r) = r * q[0]\n  flux = u * q[0]\n}\n",
     "'q[...]' is not allowed in a limiter", 2, 22),
    ("redefine-builtin", "scheme a {\n  let abs = 1\n  flux = u * q[0]\n}\n",
     "'abs' is a built-in name", 2, 7),
    ("call-a-let", "scheme a {\n  let w = 1\n  flux = u * w(q[0])\n}\n",
     "'w' is not a function", 3, 14),
    ("unknown-correction", "scheme a {\n  low_flux = u * q[0]\n  flux = u * q[0]\n  correct fcx\n}\n",
     "unknown correction 'fcx' (did you mean 'fct'?)", 4, 11),
    ("fct-without-low-flux", "scheme a {\n  flux = u * q[0]\n  correct fct\n}\n",
     "'correct fct' needs a monotone 'low_flux", 3, 3),
    ("fct-with-rk", "scheme a {\n  time ssp_rk3\n  low_flux = u * q[0]\n  flux = u * q[0]\n"
     "  correct fct\n}\n", "'correct fct' needs 'time euler'", 5, 3),
    # A low flux that is monotone nowhere cannot anchor FCT: its one-step coefficients
    # (1 + c, -c) are never all non-negative (Godunov 1959, from memory: a linear scheme is
    # monotone iff every coefficient is >= 0).
    ("fct-low-flux-not-monotone", "scheme a {\n  low_flux = u * q[1]\n  flux = u * q[0]\n"
     "  correct fct\n}\n", "the low_flux is monotone at no Courant number", 2, 14),
    ("clip-not-constant", "scheme a {\n  flux = u * q[0]\n  clip 0, q[0]\n}\n",
     "not allowed in a clip", 3, 11),
    ("clip-reversed", "scheme a {\n  flux = u * q[0]\n  clip 1, 0\n}\n",
     "clip needs LO < HI", 3, 3),
    ("two-statements-one-line", "scheme a {\n  time euler flux = u * q[0]\n}\n",
     "unexpected 'flux'", 2, 14),
]


@pytest.mark.parametrize("text, fragment, line, col",
                         [case[1:] for case in BAD_SPECS], ids=[case[0] for case in BAD_SPECS])
def test_bad_spec_is_located(text, fragment, line, col):
    with pytest.raises(LoomError) as caught:
        scheme_from_text(text, "bad.loom")
    err = caught.value
    assert fragment in err.message
    assert (err.span.line, err.span.col) == (line, col)
    rendered = err.render()
    assert rendered.startswith(f"bad.loom:{line}:{col}: error: ")
    if text.strip():
        # the offending line is shown with a caret under the column
        shown, caret = rendered.splitlines()[1:3]
        assert caret.index("^") == col - 1 + 2
        assert shown.strip() == text.splitlines()[line - 1].strip()


def test_missing_file(tmp_path):
    with pytest.raises(LoomError) as caught:
        load_scheme(tmp_path / "absent.loom")
    assert caught.value.render() == f"{tmp_path / 'absent.loom'}: error: no such file"


def test_bytes_that_are_not_utf8(tmp_path):
    path = tmp_path / "latin1.loom"
    path.write_bytes(b"scheme a {\n  about \"caf\xe9\"\n  flux = u * q[0]\n}\n")
    with pytest.raises(LoomError) as caught:
        load_scheme(path)
    err = caught.value
    assert "not valid UTF-8 (byte 0xe9)" in err.message
    assert (err.span.line, err.span.col) == (2, 13)


@pytest.mark.parametrize("item, fragment", [
    ("kapa=1", "has no param 'kapa' (did you mean 'kappa'?)"),
    ("kappa", "--set expects NAME=VALUE"),
    ("kappa=", "--set expects NAME=VALUE"),
    ("kappa=one", "'one' is not a number"),
    ("kappa=1/0", "'1/0' is not a number"),
])
def test_bad_set_values(item, fragment):
    from pathlib import Path
    path = Path(__file__).resolve().parents[1] / "examples" / "kappa_rk3.loom"
    with pytest.raises(LoomError) as caught:
        load_scheme(path, parse_overrides([item]))
    assert fragment in caught.value.message


def test_set_accepts_exact_rationals():
    from pathlib import Path

    import sympy
    path = Path(__file__).resolve().parents[1] / "examples" / "kappa_rk3.loom"
    scheme = load_scheme(path, parse_overrides(["kappa=1/3"]))
    assert scheme.params[0].value == sympy.Rational(1, 3)
    scheme = load_scheme(path, parse_overrides(["kappa=-0.5"]))
    assert scheme.params[0].value == sympy.Rational(-1, 2)


@pytest.mark.parametrize("text", [case[1] for case in BAD_SPECS[:8]])
def test_command_line_exit_status_two_and_no_traceback(tmp_path, capsys, text):
    path = tmp_path / "bad.loom"
    path.write_text(text)
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    assert err.startswith(f"{path}:")


def test_command_line_missing_file(capsys):
    assert main(["check", "no/such/file.loom"]) == 2
    assert "no such file" in capsys.readouterr().err


def test_command_line_bad_set(capsys):
    from pathlib import Path
    path = Path(__file__).resolve().parents[1] / "examples" / "kappa_rk3.loom"
    assert main(["check", str(path), "--set", "nope=1"]) == 2
    assert "has no param 'nope'" in capsys.readouterr().err
