"""Spec text -> AST. The only module that imports lark."""
from __future__ import annotations

from functools import lru_cache
from importlib import resources
from pathlib import Path

import lark
from lark import Transformer, v_args

from . import syntax as ast
from .diagnostics import LoomError, Span, split_lines
from .limits import MAX_DEPTH, MAX_FILE_BYTES

# Friendly names for the grammar's terminals, used in syntax errors.
TOKEN_WORDS = {
    "LPAR": "'('", "RPAR": "')'", "LBRACE": "'{'", "RBRACE": "'}'",
    "LSQB": "'['", "RSQB": "']'", "COMMA": "','", "EQUAL": "'='",
    "PLUS": "'+'", "MINUS": "'-'", "STAR": "'*'", "SLASH": "'/'",
    "CIRCUMFLEX": "'^'", "NAME": "a name", "NUMBER": "a number",
    "STRING": "a string", "_NL": "end of line", "$END": "end of file",
}


@lru_cache(maxsize=1)
def _parser() -> lark.Lark:
    text = resources.files("fluxloom.grammar").joinpath("loom.lark").read_text("utf-8")
    # cache=True keeps the built LALR tables in the temp dir, keyed by the grammar text.
    return lark.Lark(text, parser="lalr", strict=True, propagate_positions=True, cache=True,
                     maybe_placeholders=False)


def _span(meta) -> Span:
    return Span(meta.line, meta.column, meta.end_line, meta.end_column)


def _tok_span(tok: lark.Token) -> Span:
    return Span(tok.line, tok.column, tok.end_line, tok.end_column)


def _name(tok: lark.Token) -> ast.Name:
    return ast.Name(str(tok), _tok_span(tok))


@v_args(meta=True)
class _ToAst(Transformer):
    """Builds AST nodes only; meaning is checked later (compiler/check.py)."""

    def start(self, meta, children):
        return children[0]

    def scheme(self, meta, children):
        name, *statements = children
        return ast.Spec(_name(name), tuple(statements), _span(meta), "", "")

    # statements
    def about(self, meta, children):
        return ast.About(str(children[0])[1:-1], _span(meta))

    def time(self, meta, children):
        return ast.Time(_name(children[0]), _span(meta))

    def param(self, meta, children):
        return ast.Param(_name(children[0]), children[1], _span(meta))

    def let(self, meta, children):
        return ast.Let(_name(children[0]), children[1], _span(meta))

    def limiter(self, meta, children):
        name, names, body = children
        return ast.LimiterDef(_name(name), names, body, _span(meta))

    def names(self, meta, children):
        return tuple(_name(t) for t in children)

    def flux(self, meta, children):
        return ast.Flux("flux", children[0], _span(meta))

    def low_flux(self, meta, children):
        return ast.Flux("low_flux", children[0], _span(meta))

    def correct(self, meta, children):
        return ast.Correct(_name(children[0]), _span(meta))

    def clip(self, meta, children):
        return ast.Clip(children[0], children[1], _span(meta))

    # expressions
    def _binary(op):  # noqa: N805 - a factory used only in this class body
        def build(self, meta, children):
            return ast.Binary(op, children[0], children[1], _span(meta))
        return build

    add, sub, mul, div, pow = _binary("+"), _binary("-"), _binary("*"), _binary("/"), _binary("^")

    def neg(self, meta, children):
        return ast.Unary("-", children[0], _span(meta))

    def pos(self, meta, children):
        return ast.Unary("+", children[0], _span(meta))

    def group(self, meta, children):
        return children[0]

    def number(self, meta, children):
        return ast.Number(str(children[0]), _tok_span(children[0]))

    def name(self, meta, children):
        return _name(children[0])

    def index(self, meta, children):
        return ast.Index(_name(children[0]), children[1], _span(meta))

    def call(self, meta, children):
        return ast.Call(_name(children[0]), children[1], _span(meta))

    def args(self, meta, children):
        return tuple(children)


def _syntax_error(err: lark.exceptions.UnexpectedInput, text: str) -> LoomError:
    """Turn lark's parser state into one plain sentence at the right spot."""
    lines = split_lines(text)
    if len(lines) > 1 and lines[-1] == "":  # a final newline ends the last line
        lines.pop()
    if isinstance(err, lark.exceptions.UnexpectedCharacters):
        span = Span(err.line, err.column, err.line, err.column + 1)
        char = text[err.pos_in_stream] if err.pos_in_stream < len(text) else ""
        if char == '"':
            return LoomError("unterminated string: a string must close with '\"' on the same line", span)
        return LoomError(f"unexpected character {char!r}", span)
    if isinstance(err, lark.exceptions.UnexpectedToken):
        tok = err.token
        expected = set(err.expected)
        if tok.type == "$END":
            span = Span(len(lines), len(lines[-1]) + 1)
        else:
            span = _tok_span(tok)
            if tok.type == "_NL":  # point at the end of the line, not the next one
                line = lines[tok.line - 1] if tok.line <= len(lines) else ""
                span = Span(tok.line, len(line.rstrip()) + 1)
        if "RPAR" in expected and tok.type in ("_NL", "$END", "RBRACE", "RSQB"):
            return LoomError("unbalanced parenthesis: '(' is never closed", span)
        if tok.type == "RPAR" and expected & {"NAME", "NUMBER"}:
            return LoomError("expected an argument before ')': empty parentheses are not allowed",
                             span)
        if tok.type == "RPAR":
            return LoomError("unbalanced parenthesis: ')' has no matching '('", span)
        if "RSQB" in expected and tok.type in ("_NL", "$END"):
            return LoomError("unbalanced bracket: '[' is never closed", span)
        if tok.type == "$END" and "RBRACE" in expected:
            return LoomError("missing '}': the scheme block is never closed", span)
        if tok.type == "$END":
            return LoomError("unexpected end of file", span)
        if tok.type == "LBRACE" or (tok.type == "_NL" and "LBRACE" in expected):
            return LoomError("expected 'scheme NAME {' with the name and '{' on one line", span)
        operators = {"PLUS", "MINUS", "STAR", "SLASH", "CIRCUMFLEX"}
        if tok.type in ("NAME", "NUMBER", "LPAR") and operators <= expected:
            return LoomError(f"unexpected {_describe(tok)}: is an operator (+ - * / ^) missing "
                             "before it?", span)
        if expected == {"_NL"} or (tok.type != "_NL" and "_NL" in expected and len(expected) <= 3):
            return LoomError(f"unexpected {_describe(tok)}: one statement per line", span)
        want = ", ".join(sorted(TOKEN_WORDS.get(e, repr(e.lower())) for e in expected))
        return LoomError(f"unexpected {_describe(tok)}; expected {want}", span)
    return LoomError("syntax error", Span(getattr(err, "line", 1), getattr(err, "column", 1)))


def _describe(tok: lark.Token) -> str:
    if tok.type in ("_NL", "$END"):
        return TOKEN_WORDS[tok.type]
    return f"'{tok}'"


def parse_text(text: str, file: str = "<spec>") -> ast.Spec:
    """Parse spec text into an AST, or raise LoomError with a location."""
    check_size(text.encode("utf-8", "surrogatepass"), file, text)
    if not _strip_comments(text).strip():
        raise LoomError("empty file: expected 'scheme NAME { ... }'", Span(1, 1),
                        file=file, source=text)
    try:
        tree = _parser().parse(text)
    except lark.exceptions.UnexpectedInput as err:
        raise _syntax_error(err, text).located(file, text) from None
    _check_depth(tree)
    spec = _ToAst().transform(tree)
    return ast.Spec(spec.name, spec.statements, spec.span, file, text)


def _strip_comments(text: str) -> str:
    return "\n".join(line.split("#", 1)[0] for line in text.split("\n"))


# Expression nodes of the grammar; each is one level of nesting.
_NESTING = frozenset({"add", "sub", "mul", "div", "pow", "neg", "pos", "group", "index", "call"})


def _check_depth(tree: lark.Tree) -> None:
    """Refuse expressions nested deeper than MAX_DEPTH before anything recurses on them.

    Iterative, so that no depth of input can exhaust the stack here.
    """
    stack = [(tree, 0)]
    while stack:
        node, depth = stack.pop()
        if node.data in _NESTING:
            depth += 1
            if depth > MAX_DEPTH:
                raise LoomError(f"expression nested more than {MAX_DEPTH} levels deep (each "
                                "operator, parenthesis and call is a level); split it with "
                                "'let' or group long sums in parentheses", _span(node.meta))
        stack.extend((child, depth) for child in node.children if isinstance(child, lark.Tree))


def check_size(raw: bytes, file: str, text: str | None = None) -> None:
    """Refuse a spec longer than MAX_FILE_BYTES, pointing at the first byte past the limit."""
    if len(raw) <= MAX_FILE_BYTES:
        return
    before = raw[:MAX_FILE_BYTES]
    start = before.rfind(b"\n") + 1
    line = before.count(b"\n") + 1
    col = len(before[start:].decode("utf-8", "replace")) + 1
    shown = text if text is not None else raw.decode("utf-8", "replace")
    raise LoomError(f"the spec is larger than {MAX_FILE_BYTES // 1024} KiB ({MAX_FILE_BYTES} "
                    f"bytes), the most fluxloom reads; this one goes on past here",
                    Span(line, col), file=file, source=shown)


def read_spec_text(path: str | Path) -> str:
    """Read a spec file as UTF-8, with located errors for missing files and bad bytes."""
    path = Path(path)
    try:
        with path.open("rb") as stream:
            raw = stream.read(MAX_FILE_BYTES + 1)  # never more, whatever the file is
    except FileNotFoundError:
        raise LoomError("no such file", file=str(path)) from None
    except IsADirectoryError:
        raise LoomError("is a directory, not a .loom file", file=str(path)) from None
    except OSError as err:
        raise LoomError(f"cannot read file: {err.strerror}", file=str(path)) from None
    check_size(raw, str(path))
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as err:
        before = raw[: err.start]
        start = before.rfind(b"\n") + 1
        line = before.count(b"\n") + 1
        col = len(before[start:].decode("utf-8", "replace")) + 1  # characters, as the parser counts
        shown = raw.decode("utf-8", errors="replace")
        raise LoomError(f"the file is not valid UTF-8 (byte 0x{raw[err.start]:02x})",
                        Span(line, col), file=str(path), source=shown) from None


def parse_file(path: str | Path) -> ast.Spec:
    return parse_text(read_spec_text(path), str(path))
