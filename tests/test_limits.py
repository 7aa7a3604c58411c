"""The front end's documented limits, at their edges, and lines counted as the parser counts.

Each limit is tried at its value (accepted) and one past it (a located error, exit 2).
How fast and small `check` stays at the limits is measured by benchmarks/bench_limits.py,
never timed here.
"""
from __future__ import annotations

import pytest

from fluxloom.compiler import LoomError, load_scheme, scheme_from_text
from fluxloom.compiler.limits import MAX_DEPTH, MAX_EXPRESSION_NODES, MAX_FILE_BYTES, MAX_OFFSET
from fluxloom.runtime.cli import main


def _error(text: str) -> LoomError:
    with pytest.raises(LoomError) as caught:
        scheme_from_text(text, "limit.loom")
    assert caught.value.span is not None
    return caught.value


# ---- line breaks: only '\n' ends a line ------------------------------------------------
# Python's str.splitlines() also breaks at these (Python docs, "str.splitlines"); the
# grammar's line counter counts '\n' only, so the quoted line must come from '\n' too.
SPLITLINES_BREAKS = ["\f", "\v", "\x1c", "\x1d", "\x1e", "\x85", "\u2028", "\u2029"]


@pytest.mark.parametrize("char", SPLITLINES_BREAKS, ids=[f"U+{ord(c):04X}" for c in SPLITLINES_BREAKS])
def test_line_separators_in_a_string_do_not_shift_later_errors(char):
    text = f'scheme a {{\n  about "one{char}two{char}three"\n  let w = 1\n  flux = u * (q[0] + kapa)\n}}\n'
    err = _error(text)
    assert (err.span.line, err.span.col) == (4, 22)
    head, shown, caret = err.render().split("\n")
    assert head.startswith("limit.loom:4:22: error: unknown name 'kapa'")
    assert shown == "  " + text.split("\n")[3]
    assert caret.index("^") == 2 + 21


def test_control_characters_are_shown_as_one_column_each():
    text = 'scheme a {\n  about "\x1b[2J\u2028"  flux\n}\n'
    err = _error(text)
    shown, caret = err.render().split("\n")[1:]
    assert "\x1b" not in shown and "\u2028" not in shown
    assert len(shown) == 2 + len(text.split("\n")[1])
    assert shown[caret.index("^")] == "f"


def test_a_hostile_file_name_is_escaped_in_the_message():
    err = _error("scheme a {\n  flux = u * kapa\n}\n")
    err.file = "evil\x1b[31m\n.loom"
    assert "\x1b" not in err.render() and err.render().startswith("evil\\x1b[31m\\n.loom:2:")


def test_invalid_utf8_column_counts_characters(tmp_path):
    path = tmp_path / "bad.loom"
    path.write_bytes('scheme a {\n  about "\u00e9\u00e9"'.encode() + b"\xff\n}\n")
    with pytest.raises(LoomError) as caught:
        load_scheme(path)
    # '  about "' is 9 characters, two e-acute and '"' make 12: the bad byte is column 13
    # (counting bytes would say 15)
    assert (caught.value.span.line, caught.value.span.col) == (2, 13)


# ---- file size ------------------------------------------------------------------------

def _padded(size: int) -> str:
    head = "scheme padded {\n  flux = u * q[0]\n}\n"
    filler = size - len(head)
    lines = []
    while filler > 0:
        line = "#" + "x" * min(99, filler - 2) + "\n" if filler >= 2 else "\n"
        lines.append(line)
        filler -= len(line)
    return head + "".join(lines)


def test_file_at_the_size_limit_compiles_and_one_byte_more_is_refused(tmp_path):
    path = tmp_path / "big.loom"
    text = _padded(MAX_FILE_BYTES)
    assert len(text.encode()) == MAX_FILE_BYTES
    path.write_text(text)
    assert load_scheme(path).name == "padded"
    path.write_text(text + "\n")
    with pytest.raises(LoomError) as caught:
        load_scheme(path)
    err = caught.value
    assert f"larger than {MAX_FILE_BYTES // 1024} KiB" in err.message
    assert err.span.line == text.count("\n") + 1 and err.span.col == 1
    with pytest.raises(LoomError):
        scheme_from_text(text + "\n", "big.loom")


def test_huge_blank_file_is_refused_quickly_on_the_command_line(tmp_path, capsys):
    path = tmp_path / "blank.loom"
    with path.open("wb") as stream:
        stream.write(b"\n" * (8 * MAX_FILE_BYTES))
    assert main(["check", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.startswith(f"{path}:{MAX_FILE_BYTES + 1}:1: error: the spec is larger than")


# ---- stencil width --------------------------------------------------------------------

def test_widest_stencil_compiles():
    scheme = scheme_from_text(f"scheme w {{\n  flux = u * (q[0] + (q[{MAX_OFFSET}] - "
                              f"q[-{MAX_OFFSET}]) / 100)\n}}\n")
    assert scheme.offsets == (-MAX_OFFSET, 0, MAX_OFFSET)
    # face j+1/2 reads cell j+k, face j-1/2 cell j-1+k (common practice, no source)
    assert scheme.stencil_reach == MAX_OFFSET + 1


@pytest.mark.parametrize("offset", [MAX_OFFSET + 1, -MAX_OFFSET - 1, 64, "9" * 4500])
def test_wider_stencils_are_refused_where_written(offset):
    err = _error(f"scheme w {{\n  flux = u * (q[0] + q[{offset}])\n}}\n")
    assert "stencil offset too wide" in err.message
    assert (err.span.line, err.span.col) == (2, 24)


# ---- nesting depth --------------------------------------------------------------------

def _nested(depth: int) -> str:
    # u * (q[0] + abs(...abs(q[1])...)): '*', the parentheses, '+' and q[1] are four
    # levels, each abs( one more.
    inner = "abs(" * (depth - 4) + "q[1]" + ")" * (depth - 4)
    return f"scheme d {{\n  flux = u * (q[0] + {inner})\n}}\n"


def test_nesting_at_the_limit_compiles_and_one_more_is_refused():
    assert scheme_from_text(_nested(MAX_DEPTH)).name == "d"
    err = _error(_nested(MAX_DEPTH + 1))
    assert "nested more than 100 levels" in err.message
    assert err.span.line == 2


def test_nesting_counts_lets_written_out():
    def chain(links):  # a0 = q[0] is one level (indexing); each abs(...) adds one
        lets = "".join(f"  let a{k + 1} = abs(a{k})\n" for k in range(links))
        return f"scheme d {{\n  let a0 = q[0]\n{lets}  flux = u * q[0]\n}}\n"
    assert scheme_from_text(chain(MAX_DEPTH - 1)).name == "d"
    err = _error(chain(MAX_DEPTH))
    assert f"let 'a{MAX_DEPTH}' nests {MAX_DEPTH + 1} levels deep" in err.message
    assert err.span.line == MAX_DEPTH + 2


def test_a_long_flat_sum_is_refused_not_a_crash():
    err = _error("scheme s {\n  flux = u * (" + " + ".join(["q[0]"] * 5000) + ")\n}\n")
    assert "nested more than" in err.message and err.span.line == 2


# ---- expression size after lets are written out ---------------------------------------

def _doubling(lets: int, last: str = "") -> str:
    # a0 = q[0] has 1 node; a(k+1) = a(k) + a(k) has 2 size(a(k)) + 1, so a(k) has 2^(k+1) - 1.
    body = "".join(f"  let a{k + 1} = a{k} + a{k}\n" for k in range(lets))
    return f"scheme big {{\n  let a0 = q[0]\n{body}  flux = u * ({last or f'a{lets}'})\n}}\n"


def test_expression_size_limit_counts_lets_written_out():
    # a12 has 2^13 - 1 = 8191 nodes <= 10000; a13 has 16383.
    assert 2 ** 13 - 1 <= MAX_EXPRESSION_NODES < 2 ** 14 - 1
    assert scheme_from_text(_doubling(12)).name == "big"
    err = _error(_doubling(13))
    assert "let 'a13' is too large: 16383" in err.message
    assert err.span.line == 15  # "scheme", a0, then a1 on line 3


def test_flux_at_exactly_the_node_limit():
    # u * (a12 + X) has 2 + 1 + 8191 + size(X) nodes; X = a9 + a8 + a7 + a2 + a1 + (-a0)
    # has 1023 + 511 + 255 + 7 + 3 + 2 (a unary minus on a0) + 5 ('+') = 1806: 10000 in all.
    assert MAX_EXPRESSION_NODES == 10_000
    scheme_from_text(_doubling(12, "a12 + a9 + a8 + a7 + a2 + a1 + (-a0)"))
    err = _error(_doubling(12, "a12 + a9 + a8 + a7 + a2 + a1 + (-(-a0))"))
    assert "the flux is too large: 10001" in err.message


def test_nested_limiter_calls_count_each_use_of_the_argument():
    # f(r) = r + r^2 has its argument twice: nesting f doubles the written-out size.
    calls = "f(" * 30 + "q[0]" + ")" * 30
    err = _error(f"scheme n {{\n  limiter f(r) = r + r^2\n  flux = u * (q[0] + {calls})\n}}\n")
    assert "the flux is too large" in err.message and err.span.line == 3


def test_many_lets_compile():
    lets = "".join(f"  let a{k} = q[0] + {k}\n" for k in range(5000))
    assert scheme_from_text(f"scheme many {{\n{lets}  flux = u * a4999\n}}\n").name == "many"


# ---- the flux's part without u, decided without expanding where possible ----------------

BIG = "(q[-2] + q[-1] + q[0] + q[1] + q[2] + q[3])"
SMALL = "(q[-2] + q[-1] + q[0] + q[1] + q[2] + q[3] - q[3])"


def _identity(power: int, extra: str = "") -> str:
    # S^p - S^(p-1) * (S - q3) - q3 * S^(p-1) is zero: expanded, S^64 over six cells has
    # C(69, 5) = 11 million terms, which must never be built.
    return (f"scheme rest {{\n  flux = u * q[0] + {BIG}^{power} - {BIG}^{power - 1} * {SMALL} "
            f"- q[3] * {BIG}^{power - 1}{extra}\n}}\n")


def test_a_part_without_u_that_vanishes_identically_is_accepted():
    import sympy
    from fluxloom.compiler.symbols import q
    # the identity itself, checked by expansion where that is cheap (power 3)
    s = sum(q(k) for k in range(-2, 4))
    assert sympy.expand(s ** 3 - s ** 2 * (s - q(3)) - q(3) * s ** 2) == 0
    for power in (3, 64):
        assert scheme_from_text(_identity(power)).face == q(0)


@pytest.mark.parametrize("extra", [" + q[4]", " + max(0, q[1] - 1000000000)", " + 1/3"])
def test_a_part_without_u_is_found_without_expanding(extra):
    err = _error(_identity(64, extra))
    assert "has a part without u" in err.message and err.span.line == 2


# ---- degree: towers of powers through lets ------------------------------------------------

def _tower(levels: int, tail: str = "") -> str:
    lets = "".join(f"  let a{k + 1} = a{k}^4\n" for k in range(levels))
    return f"scheme tower {{\n  let a0 = q[1] - q[0]\n{lets}  flux = u * (q[0] + a{levels}{tail})\n}}\n"


def test_degree_limit_at_its_edge():
    import sympy
    from fluxloom.compiler.limits import MAX_DEGREE
    from fluxloom.compiler.symbols import q
    assert MAX_DEGREE == 4 ** 4
    face = scheme_from_text(_tower(4)).face
    # sympy's own degree of the lowered face (q[1] - q[0])^256 + q[0]
    assert sympy.Poly(face, q(0), q(1)).total_degree() == MAX_DEGREE
    err = _error(_tower(4, " * q[2]"))
    assert "the flux has degree up to 257" in err.message and err.span.line == 7
    err = _error(_tower(5))
    assert "let 'a5' has degree up to 1024" in err.message and err.span.line == 7


def test_degree_counts_a_sum_of_fractions_over_one_denominator():
    import sympy
    from fluxloom.compiler.symbols import q
    # y^57 + 1 / (1 + w^50 x^50 z^50 v^50) = (y^57 (1 + ...) + 1) / (1 + ...): degree 257
    text = ("scheme d {\n  flux = u * (q[0] + q[1]^57 + 1 / (1 + q[2]^50 * q[3]^50 * q[4]^50 "
            "* q[-1]^50))\n}\n")
    err = _error(text)
    assert "degree up to 257" in err.message
    # sympy clears the denominator the same way (at a degree it can afford: 5 and 3 * 4)
    small = q(1) ** 5 + 1 / (1 + q(2) ** 3 * q(3) ** 3 * q(4) ** 3 * q(-1) ** 3)
    numerator = sympy.fraction(sympy.together(small))[0]
    assert sympy.Poly(numerator, q(1), q(2), q(3), q(4), q(-1)).total_degree() == 5 + 12


def test_a_param_used_as_an_exponent_is_bounded_like_a_number():
    import sympy
    text = "scheme p {\n  param k = 2\n  flux = u * (q[0] + (q[1] - q[0])^k)\n}\n"
    assert scheme_from_text(text, "p.loom", {"k": sympy.Integer(64)}).params[0].value == 64
    with pytest.raises(LoomError, match="exponent k = 65 is too large"):
        scheme_from_text(text, "p.loom", {"k": sympy.Integer(65)})
    err = _error(text.replace("k = 2", "k = 65"))
    assert "exponent k = 65 is too large" in err.message and (err.span.line, err.span.col) == (3, 36)


def test_courant_limiters_are_measured_with_both_arguments():
    # f(r, c) = r^2 * c has degree 3: each nesting multiplies the degree by 3 (3^9 > 256)
    calls = "f(" * 9 + "q[1] - q[0]" + ", c)" * 9
    text = f"scheme n {{\n  limiter f(r, c) = r^2 * c\n  flux = u * (q[0] + {calls})\n}}\n"
    err = _error(text)
    assert "the flux has degree up to" in err.message and err.span.line == 3
    assert scheme_from_text(text.replace("f(" * 9, "f(" * 2).replace(", c)" * 9, ", c)" * 2))
