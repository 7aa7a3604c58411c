"""Fuzz inputs: specs written from the grammar, token-level mutations of specs, raw bytes.

Every input is a pure function of (seed, index), so any run can be split into
chunks, resumed, and any escape reproduced from its number alone.
"""
from __future__ import annotations

import random
import re
from pathlib import Path

KINDS = ("grammar", "mutated", "bytes")

TIME_METHODS = ("euler", "ssp_rk2", "ssp_rk3", "rk4")
BUILTINS = {"abs": 1, "sign": 1, "sqrt": 1, "min": 2, "max": 3, "ratio": 2}
# Names a careless or hostile spec might choose: keywords of every target, builtins,
# the language's own symbols, and names close to generated temporaries.
ODD_NAMES = ("q", "u", "c", "r", "abs", "min", "int", "double", "return", "import", "class",
             "lambda", "None", "np", "numpy", "math", "self", "Abs", "Ratio", "I", "E", "pi",
             "oo", "t0", "x0", "q_0", "q_m1", "k", "K", "end", "module", "real", "_", "__init__")
NUMBERS = ("0", "1", "2", "3", "1/2", "1/3", "0.5", "0.25", ".5", "5.", "1e-3", "2.5e2", "1e3",
           "10", "64", "65", "0.0", "7", "12", "1e-300", "1e300", "123456789012345678901234567890")
HOSTILE_TEXT = ("*/", "/*", '"""', "'''", "\\", "\\n", "\\x00", "\r", "\x00", "\f", "\v", "\x85",
                "\u2028", "\u2029", "\x1b[2J", "#include <stdlib.h>", "%", "{{", "}}", "{%",
                "$(echo hi)", "`id`", "\ufeff", "\u202e", "é", "𝔘", "\t", "??/", "!", "&")
# Pieces that stress limits when dropped into a spec.
STRESS = ("q[8]", "q[9]", "q[-8]", "q[-9]", "q[64]", "q[99999999999999999999]", "1e999999999",
          "9" * 5000, "(" * 120, ")" * 120, "abs(" * 60, "^64", "^65", "^-64", "^0.5",
          "2^64^64", "1/0", "0/0", "sqrt(-1)", "1e308*10", "\n" * 50, " " * 200)
TOKEN_RE = re.compile(r'"[^"\n]*"|#[^\n]*|\r?\n|[ \t\f]+|[A-Za-z_][A-Za-z_0-9]*|'
                      r"(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?|.", re.S)
PUNCTUATION = ("{", "}", "(", ")", "[", "]", ",", "=", "+", "-", "*", "/", "^", "\n", " ")
KEYWORDS = ("scheme", "about", "time", "param", "let", "limiter", "flux", "low_flux", "correct",
            "clip", "fct", *TIME_METHODS)


def seed_corpus(examples: Path | None = None) -> list[str]:
    """The bundled examples: the starting points of mutations."""
    folder = examples or Path(__file__).resolve().parents[2] / "examples"
    return [p.read_text("utf-8") for p in sorted(folder.glob("*.loom"))]


def make_input(seed: int, index: int, corpus: list[str]) -> tuple[str, bytes]:
    """(kind, bytes) of input number `index` of the run with `seed`."""
    rng = random.Random(f"{seed}:{index}")
    kind = rng.choices(KINDS, weights=(4, 5, 1))[0]
    if kind == "grammar":
        text = SpecWriter(rng).spec()
        if rng.random() < 0.3:
            text = mutate(text, rng)
        return kind, text.encode("utf-8", "surrogatepass")
    if kind == "mutated":
        return kind, mutate(rng.choice(corpus), rng).encode("utf-8", "surrogatepass")
    base = rng.choice(corpus) if rng.random() < 0.7 else SpecWriter(rng).spec()
    return kind, mutate_bytes(base.encode("utf-8"), rng)


# ---- specs written from the grammar ---------------------------------------------------

class SpecWriter:
    """A random spec, statement by statement, mostly well formed and mostly meaningful."""

    def __init__(self, rng: random.Random):
        self.rng = rng
        self.params: list[str] = []
        self.lets: list[str] = []
        self.limiters: list[str] = []

    def name(self) -> str:
        rng = self.rng
        if rng.random() < 0.08:
            return rng.choice(ODD_NAMES)
        return rng.choice("abcdefghkmnpstvwxyz") + rng.choice(["", "1", "2", "_a", "lim", "0"])

    def number(self) -> str:
        rng = self.rng
        if rng.random() < 0.7:
            return rng.choice(NUMBERS[:14])
        return rng.choice(NUMBERS)

    def offset(self) -> str:
        rng = self.rng
        k = rng.choice([0, 0, 1, 1, -1, 2, -2, 3, -3]) if rng.random() < 0.95 else rng.randint(-10, 10)
        return f"q[{k}]"

    def expr(self, depth: int, where: str) -> str:
        rng = self.rng
        if depth <= 0 or rng.random() < 0.3:
            return self.atom(where)
        choice = rng.random()
        if choice < 0.45:
            op = rng.choice("+-*/")
            return f"{self.expr(depth - 1, where)} {op} {self.expr(depth - 1, where)}"
        if choice < 0.55:
            base = self.expr(depth - 1, where)
            exponent = rng.choice(["2", "2", "3", "1/2", "-1", "0", "4"]) if rng.random() < 0.9 \
                else rng.choice(["64", "65", "0.5", "-64", "10"])
            return f"({base})^{exponent}"
        if choice < 0.65:
            return f"-({self.expr(depth - 1, where)})"
        if choice < 0.8:
            return f"({self.expr(depth - 1, where)})"
        func = rng.choice(list(BUILTINS) + (self.limiters if where != "limiter" else []))
        arity = BUILTINS.get(func, 1)
        if rng.random() < 0.05:
            arity = rng.randint(0, 4)
        args = ", ".join(self.expr(depth - 1, where) for _ in range(arity))
        return f"{func}({args})"

    def atom(self, where: str) -> str:
        rng = self.rng
        pool = ["number"] * 3 + ["param"] * bool(self.params)
        if where in ("flux", "let"):
            pool += ["q"] * 5 + ["let"] * (2 * bool(self.lets)) + ["c"]
        if where == "limiter":
            pool += ["r"] * 5
        pick = rng.choice(pool)
        if rng.random() < 0.02:
            return rng.choice(ODD_NAMES + STRESS)
        if pick == "number":
            return self.number()
        if pick == "param":
            return rng.choice(self.params)
        if pick == "q":
            return self.offset()
        if pick == "let":
            return rng.choice(self.lets)
        return pick  # "c" or "r"

    def about(self) -> str:
        rng = self.rng
        words = [rng.choice(["upwind", "limited", "scheme", "flux", "test", "x"]) for _ in range(3)]
        if rng.random() < 0.5:
            words.insert(rng.randint(0, 3), rng.choice(HOSTILE_TEXT))
        if rng.random() < 0.1:
            words.append("".join(chr(rng.randint(1, 0x2FFF)) for _ in range(rng.randint(1, 8))))
        return " ".join(words)

    def spec(self) -> str:
        rng = self.rng
        method = rng.choice(TIME_METHODS) if rng.random() < 0.95 else self.name()
        lines = [f"scheme {self.name() if rng.random() < 0.9 else 'fz'} {{"]
        if rng.random() < 0.7:
            lines.append(f'  about "{self.about()}"')
        if rng.random() < 0.7:
            lines.append(f"  time {method}")
        for _ in range(rng.choice([0, 0, 1, 2, 3])):
            name = self.name()
            lines.append(f"  param {name} = {self.expr(rng.randint(0, 2), 'param')}")
            self.params.append(name)
        for _ in range(rng.choice([0, 1, 1, 2])):
            name = self.name()
            lines.append(f"  limiter {name}(r) = {self.expr(rng.randint(1, 3), 'limiter')}")
            self.limiters.append(name)
        if rng.random() < 0.5:
            self.lets.append("r")
            lines.append("  let r = ratio(q[0] - q[-1], q[1] - q[0])")
        for _ in range(rng.choice([0, 1, 2, 3])):
            name = self.name()
            lines.append(f"  let {name} = {self.expr(rng.randint(0, 3), 'let')}")
            self.lets.append(name)
        lines.append(self.flux("flux"))
        if rng.random() < 0.15:
            lines.append("  low_flux = u * q[0]" if rng.random() < 0.7 else self.flux("low_flux"))
            if rng.random() < 0.7:
                lines.append("  correct fct")
        if rng.random() < 0.1:
            lines.append(f"  clip {self.expr(1, 'clip')}, {self.expr(1, 'clip')}")
        if rng.random() < 0.05:
            rng.shuffle(lines)
        return "\n".join(lines) + "\n}\n"

    def flux(self, kind: str) -> str:
        rng = self.rng
        body = self.expr(rng.randint(1, 4), "flux")
        if rng.random() < 0.9:
            return f"  {kind} = u * ({self.offset() if rng.random() < 0.5 else 'q[0]'} + {body})"
        return f"  {kind} = {rng.choice(['u^2 * ', 'abs(u) * ', '', 'u * u * '])}({body})"


# ---- mutations --------------------------------------------------------------------------

def tokens(text: str) -> list[str]:
    """The text cut where the grammar would cut it (strings, comments, names, numbers, ...)."""
    return [m.group(0) for m in TOKEN_RE.finditer(text)]


def mutate(text: str, rng: random.Random) -> str:
    """A few token- or line-level edits that keep most of the spec's structure."""
    for _ in range(rng.choice([1, 1, 2, 3, 4])):
        toks = tokens(text)
        if not toks:
            toks = [rng.choice(KEYWORDS)]
        i = rng.randrange(len(toks))
        edit = rng.random()
        if edit < 0.2:
            del toks[i]
        elif edit < 0.4:
            toks.insert(i, rng.choice(KEYWORDS + PUNCTUATION + NUMBERS + ODD_NAMES))
        elif edit < 0.55:
            toks[i] = _similar(toks[i], rng)
        elif edit < 0.65:
            j = rng.randrange(len(toks))
            toks[i], toks[j] = toks[j], toks[i]
        elif edit < 0.75:
            toks.insert(i, rng.choice(STRESS + HOSTILE_TEXT))
        elif edit < 0.85:
            lines = "".join(toks).split("\n")
            a, b = rng.randrange(len(lines)), rng.randrange(len(lines))
            if rng.random() < 0.5:
                lines[a], lines[b] = lines[b], lines[a]
            else:
                lines.insert(b, lines[a])
            toks = ["\n".join(lines)]
        elif edit < 0.92:
            # put a hostile character inside a string or comment, then break a later line
            toks.insert(i, rng.choice(HOSTILE_TEXT) + rng.choice(["", "\n", "\f", "\u2028"]))
        else:
            toks[i:i] = toks[i:i + rng.randint(1, 8)] * rng.randint(1, 3)
        text = "".join(toks)
    return text


def _similar(tok: str, rng: random.Random) -> str:
    """A token of the same sort as tok: a number for a number, a name for a name."""
    if tok[:1].isdigit() or tok[:1] == ".":
        return rng.choice(NUMBERS + ("-1", "1e9999", "0x10", "1_000"))
    if tok[:1].isalpha() or tok[:1] == "_":
        return rng.choice(KEYWORDS + ODD_NAMES + tuple(BUILTINS))
    if tok.startswith('"'):
        return '"' + "".join(rng.choice(HOSTILE_TEXT) for _ in range(rng.randint(0, 4))) + '"'
    return rng.choice(PUNCTUATION)


def mutate_bytes(data: bytes, rng: random.Random) -> bytes:
    """Byte-level damage: flips, random or invalid UTF-8 bytes, truncation, line endings."""
    buf = bytearray(data)
    for _ in range(rng.choice([1, 1, 2, 4, 8])):
        if not buf:
            buf.extend(rng.randbytes(rng.randint(1, 16)))
            continue
        i = rng.randrange(len(buf))
        edit = rng.random()
        if edit < 0.3:
            buf[i] ^= 1 << rng.randrange(8)
        elif edit < 0.5:
            buf[i:i] = rng.randbytes(rng.randint(1, 4))
        elif edit < 0.6:
            buf[i:i] = rng.choice([b"\xff", b"\xc3", b"\xe2\x80", b"\xed\xa0\x80", b"\x00",
                                   b"\xef\xbb\xbf", b"\r", b"\r\n", b"\x0c", b"\xc2\x85",
                                   b"\xe2\x80\xa8"])
        elif edit < 0.7:
            del buf[i:]
        elif edit < 0.8:
            del buf[i:i + rng.randint(1, 8)]
        else:
            buf = bytearray(bytes(buf).replace(b"\n", rng.choice([b"\r\n", b"\r", b"\n\n"])))
    return bytes(buf)
