"""Markdown reports rendered from templates (the demo's report).

The runtime builds every table and sentence; the template holds the prose and
the layout only (loops, no other logic), rendered with the emitters' strict
Environment, so a missing value is an error, never empty text.
"""
from __future__ import annotations

from .environment import render

DEMO_REPORT = "demo_report.md.j2"


def demo_report(context: dict) -> str:
    """The demo's report.md from the values runtime/demo.py gathers."""
    return render(DEMO_REPORT, **context)
