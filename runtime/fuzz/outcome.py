"""What one fuzz input's result means: success, a located error, or an escape.

A located error is exit status 2 with `FILE:LINE:COL: error: ...` first, where
LINE and COL exist in the input, followed by that very line (as the parser counts
lines) and a caret under COL. Everything else is an escape: an internal error,
a traceback, a crash, a timeout, memory past the cap, or a message without a
place or at the wrong place.
"""
from __future__ import annotations

import re

from fluxloom.compiler.diagnostics import SHOWN_WIDTH, split_lines

SUCCESS = ("ok", "located")
ESCAPES = ("internal", "memory", "traceback", "crash", "timeout", "unlocated", "misplaced")


def classify(exit_status: int | None, stderr: str, path: str, data: bytes) -> tuple[str, str]:
    """(outcome, why) for one input; outcome is in SUCCESS or ESCAPES."""
    if exit_status is None:
        return "timeout", "no answer within the time limit"
    if "Traceback (most recent call last)" in stderr:
        return "traceback", "a Python traceback reached the user"
    if exit_status == 0:
        return "ok", ""
    if exit_status == 3:
        if "MemoryError" in stderr:
            return "memory", "ran out of memory under the cap"
        return "internal", stderr.strip().splitlines()[0] if stderr.strip() else "exit 3"
    if exit_status != 2:
        return "crash", f"exit status {exit_status}"
    return _located(stderr, path, data)


def _located(stderr: str, path: str, data: bytes) -> tuple[str, str]:
    lines = stderr.split("\n")
    head = re.match(re.escape(path) + r":(\d+):(\d+): error: \S", lines[0])
    if not head:
        return "unlocated", f"exit 2 without FILE:LINE:COL: {lines[0][:200]!r}"
    line, col = int(head.group(1)), int(head.group(2))
    source = split_lines(data.decode("utf-8", "replace"))
    if not 1 <= line <= len(source):
        return "misplaced", f"line {line} of a {len(source)}-line input"
    text = source[line - 1]
    if not 1 <= col <= len(text) + 1:
        return "misplaced", f"column {col} of a {len(text)}-character line {line}"
    if len(lines) < 3:
        if text.strip():
            return "unlocated", "the offending line is not shown"
        return "located", ""
    shown = "".join(ch if ch.isprintable() else " " for ch in text)
    if len(shown) <= SHOWN_WIDTH:
        if lines[1] != "  " + shown:
            return "misplaced", f"quoted {lines[1][2:80]!r} for line {line} {shown[:80]!r}"
        if lines[2].find("^") != col + 1:
            return "misplaced", f"caret at {lines[2].find('^') - 1}, column is {col}"
    return "located", ""
