"""Output of `verify --dims 2`: the cases table (text and Markdown), the JSON keys
`cases` and `split`, and a Markdown report with figures for `--report DIR`."""
from __future__ import annotations

import json
from pathlib import Path

from ..report import MARKER, check_writable, json_safe, table, write_text
from .cases import CASES, SMOOTH_CASE
from .findings import SplitVerification

HEADERS = ["case", "N", "steps", "c", "l1", "l2", "linf", "min", "max", "overshoot",
           "mass drift", "note"]


def case_rows(sv: SplitVerification) -> list[list]:
    rows = []
    for r in sv.runs:
        note = ("diverged at step %d" % r.diverged_at if r.diverged_at is not None else
                "kernel fault at step %d" % r.fault_at if r.fault_at is not None else "")
        rows.append([r.case, r.n, r.steps, r.courant, r.l1, r.l2, r.linf, r.min, r.max,
                     r.overshoot, r.mass_drift, note])
    return rows


def split_text(sv: SplitVerification) -> str:
    orders = ", ".join(f"{norm} {_order(values)}" for norm, values in sv.orders.items())
    lines = [f"2-D cases ({sv.method} splitting through the reference sweep: the 1-D kernel "
             "called once per line; errors against the initial field, which is the exact "
             "solution at the end; overshoot: furthest outside the initial range after any "
             "sweep)",
             table(HEADERS, case_rows(sv)),
             f"observed order on {SMOOTH_CASE} (finest pair): {orders}"]
    return "\n".join(lines) + "\n"


def _order(values) -> str:
    value = values[-1] if values else None
    return "-" if value is None or value != value else f"{value:.3g}"


def split_json(sv: SplitVerification) -> dict:
    """The keys `verify --json --dims 2` adds: `split` and `cases`."""
    return json_safe({"split": sv.to_json(), "cases": [r.to_json() for r in sv.runs]})


def write_split_report(sv: SplitVerification, scheme: str, directory: Path,
                       force: bool = False) -> list[Path]:
    """Markdown and figures of the 2-D cases into directory (beside verify's own report)."""
    from .figures import case_figure, convergence_figure

    stem = f"{scheme}-2d-{sv.method}"
    names = {case.name: f"{stem}-{case.name}.png" for case in CASES}
    names["convergence"] = f"{stem}-convergence.png"
    for name in list(names.values()) + [f"{stem}.md", f"{stem}.json"]:
        check_writable(directory / name, force)
    written = [case_figure(sv, case, directory / names[case.name]) for case in CASES]
    written.append(convergence_figure(sv, directory / names["convergence"]))
    doc = {"note": MARKER, **split_json(sv)}
    written.append(write_text(directory / f"{stem}.json", json.dumps(doc, indent=2) + "\n", force))
    parts = [f"<!-- {MARKER} verify --dims 2 -->", f"# {scheme}: 2-D cases, {sv.method} splitting",
             "", "Errors against the initial field (the exact solution at the final time). "
             "Sweeps run through the reference path (the 1-D kernel once per line).", "",
             table(HEADERS, case_rows(sv), markdown=True), ""]
    parts += [f"![{caption}]({name})" + "\n" for caption, name in names.items()]
    written.append(write_text(directory / f"{stem}.md", "\n".join(parts), force))
    return written
