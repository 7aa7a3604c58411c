"""Located errors: every problem in a spec is reported as file:line:col with a caret."""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Span:
    """A region of source text; lines and columns count from 1."""

    line: int
    col: int
    end_line: int | None = None
    end_col: int | None = None


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
        if self.span is None:
            return f"{self.file}: error: {self.message}"
        head = f"{self.file}:{self.span.line}:{self.span.col}: error: {self.message}"
        line = source_line(self.source, self.span.line)
        if line is None:
            return head
        width = 1
        if self.span.end_line == self.span.line and self.span.end_col:
            width = max(1, self.span.end_col - self.span.col)
        caret = " " * (self.span.col - 1) + "^" + "~" * (width - 1)
        return f"{head}\n  {line}\n  {caret}"

    def __str__(self) -> str:  # pragma: no cover - used in logs only
        return self.render()


def source_line(source: str | None, line: int) -> str | None:
    if source is None:
        return None
    lines = source.splitlines()
    if 1 <= line <= len(lines):
        return lines[line - 1].expandtabs(1)
    return None


def did_you_mean(name: str, candidates) -> str:
    """A ' (did you mean 'x'?)' hint when a candidate is close, else ''."""
    import difflib

    close = difflib.get_close_matches(name, sorted(set(candidates)), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""
