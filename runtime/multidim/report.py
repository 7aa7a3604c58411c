"""Output of `verify --dims 2` (or 3): the cases table (text and Markdown), the JSON keys
`cases` and `split`, and a Markdown report with figures for `--report DIR`."""
from __future__ import annotations

import json
from pathlib import Path

from ..report import MARKER, check_writable, json_safe, table, write_text
from .cases import cases_for, smooth_case
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
    lines = [f"{sv.dims}-D cases ({sv.method} splitting through the generated sweep, one "
             "call per sweep; errors against the initial field, which is the exact "
             "solution at the end; overshoot: furthest outside the initial range after any "
             "sweep)",
             table(HEADERS, case_rows(sv)),
             f"observed order on {smooth_case(sv.dims)} (finest pair): {orders}"]
    return "\n".join(lines) + "\n"


def _order(values) -> str:
    value = values[-1] if values else None
    return "-" if value is None or value != value else f"{value:.3g}"


def split_json(sv: SplitVerification) -> dict:
    """The keys `verify --json --dims 2` (or 3) adds: `split` and `cases`."""
    return json_safe({"split": sv.to_json(), "cases": [r.to_json() for r in sv.runs]})


def write_split_report(sv: SplitVerification, scheme: str, directory: Path,
                       force: bool = False) -> list[Path]:
    """Markdown and figures of the cases into directory (beside verify's own report)."""
    from .figures import case_figure, convergence_figure

    stem = f"{scheme}-{sv.dims}d-{sv.method}"
    cases = cases_for(sv.dims)
    names = {case.name: f"{stem}-{case.name}.png" for case in cases}
    names["convergence"] = f"{stem}-convergence.png"
    for name in list(names.values()) + [f"{stem}.md", f"{stem}.json"]:
        check_writable(directory / name, force)
    written = [case_figure(sv, case, directory / names[case.name]) for case in cases]
    written.append(convergence_figure(sv, directory / names["convergence"]))
    doc = {"note": MARKER, **split_json(sv)}
    written.append(write_text(directory / f"{stem}.json", json.dumps(doc, indent=2) + "\n", force))
    parts = [f"<!-- {MARKER} verify --dims {sv.dims} -->",
             f"# {scheme}: {sv.dims}-D cases, {sv.method} splitting",
             "", "Errors against the initial field (the exact solution at the final time). "
             "Sweeps run through the generated sweep (NAME_sweep, one call per sweep).", "",
             table(HEADERS, case_rows(sv), markdown=True), ""]
    parts += [f"![{caption}]({name})" + "\n" for caption, name in names.items()]
    written.append(write_text(directory / f"{stem}.md", "\n".join(parts), force))
    return written
