"""Located errors: every problem in a spec is reported as file:line:col with a caret."""
from __future__ import annotations

import re
from dataclasses import dataclass


@dataclass(frozen=True)
class Span:
    """A region of source text; lines and columns count from 1."""

    line: int
    col: int
    end_line: int | None = None
    end_col: int | None = None


SHOWN_WIDTH = 160  # characters of a source line shown under an error


class LoomError(Exception):
    """The one error type the front end raises for bad input.

    It carries where the problem is, so the command line can print the line and a
    caret instead of a traceback.
    """

    def __init__(self, message: str, span: Span | None = None, *,
                 file: str = "<spec>", source: str | None = None):
        super().__init__(message)
        self.message = message
        self.span = span
        self.file = file
        self.source = source

    def located(self, file: str, source: str | None) -> "LoomError":
        """The same error, tied to a file and its text (kept if already set)."""
        if self.source is None:
            self.file, self.source = file, source
        return self

    def render(self) -> str:
        file, message = printable(self.file), _shorten(printable(self.message, keep="\n\t"))
        if self.span is None:
            return f"{file}: error: {message}"
        head = f"{file}:{self.span.line}:{self.span.col}: error: {message}"
        line = source_line(self.source, self.span.line)
        if line is None:
            return head
        width = 1
        if self.span.end_line == self.span.line and self.span.end_col:
            width = max(1, self.span.end_col - self.span.col)
        col = self.span.col
        if len(line) > SHOWN_WIDTH:  # a window of a long line around the column
            start = max(0, min(col - 1 - SHOWN_WIDTH // 2, len(line) - SHOWN_WIDTH))
            line = ("..." if start else "") + line[start:start + SHOWN_WIDTH] + (
                "..." if start + SHOWN_WIDTH < len(line) else "")
            col = col - start + (3 if start else 0)
            width = max(1, min(width, len(line) - col + 1))
        caret = " " * (col - 1) + "^" + "~" * (width - 1)
        return f"{head}\n  {line}\n  {caret}"

    def __str__(self) -> str:  # pragma: no cover - used in logs only
        return self.render()


def printable(text: str, keep: str = "") -> str:
    """text with control characters (and line separators) written as escapes, so a
    file name or a quoted name cannot move the terminal's cursor or fake a line."""
    return "".join(ch if ch.isprintable() or ch in keep
                   else ch.encode("unicode_escape").decode("ascii") for ch in text)


def _shorten(message: str) -> str:
    """Very long words (a 5000-digit number, a name pasted many times) cut in the middle;
    a file path of ordinary length (up to 400 characters) is kept whole."""
    return _LONG_WORD.sub(lambda m: f"{m.group(0)[:60]}...({len(m.group(0))} characters)..."
                          f"{m.group(0)[-60:]}", message)


_LONG_WORD = re.compile(r"[^\s']{401,}")


def split_lines(text: str) -> list[str]:
    """Lines as the parser counts them: only '\n' ends a line ('\r\n' too).

    str.splitlines() also breaks at form feeds, vertical tabs, NEL and U+2028,
    which would quote the wrong line under every later error.
    """
    return [line[:-1] if line.endswith("\r") else line for line in text.split("\n")]


def source_line(source: str | None, line: int) -> str | None:
    """Line `line` (from 1) as shown under an error: one printable character per column."""
    if source is None:
        return None
    lines = split_lines(source)
    if lines and lines[-1] == "":  # the text ends with a newline: no line after it
        lines.pop()
    if 1 <= line <= len(lines):
        # Tabs and control characters become one space each, so the caret lines up.
        return "".join(ch if ch.isprintable() else " " for ch in lines[line - 1])
    return None


def did_you_mean(name: str, candidates) -> str:
    """A ' (did you mean 'x'?)' hint when a candidate is close, else ''."""
    import difflib

    close = difflib.get_close_matches(name, sorted(set(candidates)), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""
