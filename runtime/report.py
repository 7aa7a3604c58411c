"""Reports of the harness's findings: terminal text, Markdown and JSON files.

Files are written only where nothing of the user's would be lost: a file that
exists is replaced only if fluxloom wrote it (it carries MARKER, or the PNG tag
of runtime/plots.py), unless the caller passes force.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

from fluxloom.compiler import LoomError

import numpy as np

from fluxloom.compiler.analysis.wording import set_text, stability_text

from . import plots
from .findings import AGREE, DISAGREE, FAULT, NO_CLAIM, Verification

MARKER = "written by fluxloom"


# ---- safe writing ---------------------------------------------------------------

def is_ours(path: Path) -> bool:
    if path.suffix == ".png":
        return plots.is_ours(path)
    try:
        head = path.read_text(errors="replace")[:4096]
    except OSError:
        return False
    return MARKER in head


def check_writable(path: Path, force: bool) -> None:
    """Refuse to replace a file fluxloom did not write, unless forced."""
    if path.exists() and not force and not is_ours(path):
        raise LoomError(f"{path} exists and was not written by fluxloom; "
                        "not overwriting it (use --force, or another directory)",
                        file=str(path))


def write_text(path: Path, text: str, force: bool = False) -> Path:
    check_writable(path, force)
    try:
        path.write_text(text)
    except OSError as err:
        raise LoomError(f"cannot write {path}: {err.strerror or err}", file=str(path)) from None
    return path


def prepare_directory(directory: Path) -> Path:
    directory = Path(directory)
    if directory.exists() and not directory.is_dir():
        raise LoomError(f"{directory} exists and is not a directory", file=str(directory))
    try:
        directory.mkdir(parents=True, exist_ok=True)
    except OSError as err:
        raise LoomError(f"cannot create {directory}: {err.strerror}", file=str(directory)) from None
    return directory


# ---- number formatting ----------------------------------------------------------------

def num(x, digits: int = 3) -> str:
    if x is None:
        return "-"
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, int):
        return str(x)
    if isinstance(x, float):
        if math.isnan(x):
            return "-"
        if math.isinf(x):
            return "inf"
        if x != 0 and (abs(x) < 1e-3 or abs(x) >= 1e5):
            return f"{x:.{digits - 1}e}"
        return f"{x:.{digits}g}"
    return str(x)


def table(headers, rows, markdown: bool = False) -> str:
    """A plain text or Markdown table; numbers right-aligned."""
    cells = [[num(v) if not isinstance(v, str) else v for v in row] for row in rows]
    if markdown:
        out = ["| " + " | ".join(headers) + " |",
               "|" + "|".join("---:" if _numeric_column(cells, i) else "---"
                              for i in range(len(headers))) + "|"]
        out += ["| " + " | ".join(row) + " |" for row in cells]
        return "\n".join(out)
    widths = [max(len(str(h)), *(len(r[i]) for r in cells)) if cells else len(str(h))
              for i, h in enumerate(headers)]
    right = [_numeric_column(cells, i) for i in range(len(headers))]

    def line(values):
        return "  ".join(v.rjust(w) if r else v.ljust(w)
                         for v, w, r in zip(values, widths, right)).rstrip()
    return "\n".join([line(headers), line(["-" * w for w in widths])] + [line(r) for r in cells])


def _numeric_column(cells, i) -> bool:
    def numeric(text):
        try:
            float(text)
            return True
        except ValueError:
            return text in ("-", "inf")
    return bool(cells) and all(numeric(r[i]) for r in cells)


# ---- verify ---------------------------------------------------------------------

def convergence_rows(v: Verification):
    rows = []
    for conv in v.convergence:
        orders = {norm: [float("nan")] + values for norm, values in conv.pair_orders.items()}
        for i, row in enumerate(conv.rows):
            e = row.errors
            rows.append([row.profile, row.n, row.steps,
                         e.l1 if e else None, e.l2 if e else None, e.linf if e else None,
                         orders["l1"][i], orders["l2"][i], orders["linf"][i],
                         f"diverged at step {row.diverged_at}" if row.diverged_at else
                         f"kernel fault at step {row.fault_at}" if row.fault_at else ""])
        rows.append([conv.profile, "fit", "", None, None, None,
                     conv.fitted["l1"], conv.fitted["l2"], conv.fitted["linf"], ""])
    return rows


CONVERGENCE_HEADERS = ["profile", "N", "steps", "l1", "l2", "linf",
                       "order l1", "order l2", "order linf", "note"]
FINDING_HEADERS = ["verdict", "check", "where", "predicted", "measured"]


MARKS = {AGREE: "agree", DISAGREE: "DISAGREE", NO_CLAIM: "no claim", FAULT: "FAULT"}


def finding_rows(v: Verification):
    return [[MARKS[f.verdict], f.check, f.context, f.predicted, f.measured] for f in v.findings]


def _headline(v: Verification) -> str:
    o = v.options
    return (f"verify {v.scheme} ({v.backend} kernel, {v.precision}): c = {o.courant:g}, "
            f"u = {o.velocity}")


def _summary(v: Verification) -> str:
    total = len(v.findings)
    unclaimed = sum(f.verdict == NO_CLAIM for f in v.findings)
    faults = v.faults
    wrong = [f for f in v.findings if f.verdict == DISAGREE]
    if not wrong and not faults:
        text = f"all {total} findings agree with the analysis"
        if unclaimed:
            text += f" ({unclaimed} of them where it claims nothing)"
        return text
    parts = []
    if faults:
        parts.append(f"{len(faults)} of {total} findings hit a KERNEL FAULT (NaN or Inf from "
                     "finite data): " + ", ".join(_where(f) for f in faults))
    if wrong:
        parts.append(f"{len(wrong)} of {total} findings DISAGREE with the analysis: "
                     + ", ".join(_where(f) for f in wrong))
    return "; ".join(parts)


def _where(f) -> str:
    return f"{f.check} ({f.context.split(',')[0]})"


def verification_text(v: Verification) -> str:
    parts = [_headline(v), "",
             "Convergence (normalised errors after one revolution; order from each pair, "
             "then the least-squares fit)",
             table(CONVERGENCE_HEADERS, convergence_rows(v)), "",
             "Findings (predicted by the analysis vs measured on the kernel)"]
    for f in v.findings:
        parts.append(f"  [{MARKS[f.verdict]:<8}] {f.check:<12} {f.context}")
        parts.append(f"             predicted: {f.predicted}")
        parts.append(f"             measured:  {f.measured}")
    parts += ["", _summary(v)]
    return "\n".join(parts) + "\n"


def verification_markdown(v: Verification, figures: dict[str, str]) -> str:
    parts = [f"<!-- {MARKER} verify -->", f"# {_headline(v)}", "", f"**{_summary(v)}**", "",
             "## Findings", "", table(FINDING_HEADERS, finding_rows(v), markdown=True), "",
             "## Convergence", "",
             "Normalised errors after one revolution on N = 25 x 2^k cells; the order from "
             "each successive pair, and the least-squares fit.", "",
             table(CONVERGENCE_HEADERS, convergence_rows(v), markdown=True), ""]
    for caption, name in figures.items():
        parts += [f"![{caption}]({name})", ""]
    return "\n".join(parts)


# ---- the JSON document of `fluxloom verify --json` -------------------------------------

def json_safe(x):
    if isinstance(x, float) and not math.isfinite(x):
        return None
    if isinstance(x, dict):
        return {k: json_safe(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [json_safe(v) for v in x]
    if isinstance(x, np.generic):
        return json_safe(x.item())
    return x


def verification_json(v: Verification) -> dict:
    sine = v.convergence[0]
    drifts = [c.mass_drift for c in v.conservation]
    claims = v.prediction.claims
    main = next((p for p in claims.stability.stable.parts if not p.is_point), None)
    st = v.stability
    doc = {
        "scheme": v.scheme,
        "backend": v.backend,
        "precision": v.precision,
        "courant": v.options.courant,
        "velocity": v.options.velocity,
        "convergence": [
            {"profile": row.profile, "n": row.n, "steps": row.steps, "courant": row.courant,
             "l1": row.errors.l1 if row.errors else None,
             "l2": row.errors.l2 if row.errors else None,
             "linf": row.errors.linf if row.errors else None,
             "diverged_at": row.diverged_at, "fault_at": row.fault_at}
            for conv in v.convergence for row in conv.rows],
        "observed_order": dict(sine.finest_order),
        "fitted_order": dict(sine.fitted),
        "observed_order_by_profile": {conv.profile: dict(conv.finest_order) for conv in v.convergence},
        "predicted_order": v.prediction.order,
        "bounded": all(sh.bounded and sh.stopped_at is None for sh in v.shapes),
        "new_extrema": max(sh.new_extrema for sh in v.shapes),
        "tv_increase": max(sh.tv_increase for sh in v.shapes),
        "mass_drift": max(drifts),
        "mass_drift_by_velocity": {c.velocity: c.mass_drift for c in v.conservation},
        "mirror_mismatch": v.mirror,
        "stability": {
            "predicted_kind": claims.stability.kind,
            "predicted": stability_text(claims.stability),
            "predicted_set": set_text(claims.stability.stable) if claims.stability.decided else None,
            "predicted_min": main.lo if main else None,
            "predicted_max": main.hi if main else None,
            "measured_set": [list(r) for r in st.measured] if st else None,
            "measured_max": st.measured_max if st else None,
            "unstable_everywhere": st.unstable_everywhere if st else None,
            "method": st.method if st else None,
            "courants_tried": len(st.probes) if st else None,
        },
        "kernel_faults": [f.to_json() for f in v.faults],
        "findings": [f.to_json() for f in v.findings],
        "agree": v.agree,
    }
    return json_safe(doc)


def write_verification(v: Verification, directory: Path, force: bool = False) -> list[Path]:
    """Markdown, JSON and figures for one verification, into directory."""
    directory = prepare_directory(directory)
    stem = v.scheme
    figures = {"convergence": f"{stem}-convergence.png", "final profiles": f"{stem}-profiles.png"}
    if v.stability is not None:
        figures["stability: predicted vs measured"] = f"{stem}-stability.png"
    for name in list(figures.values()) + [f"{stem}-verify.md", f"{stem}-verify.json"]:
        check_writable(directory / name, force)
    written = [plots.convergence_figure(v, directory / figures["convergence"]),
               plots.profiles_figure(v, directory / figures["final profiles"])]
    if v.stability is not None:
        written.append(plots.stability_figure(v, directory / f"{stem}-stability.png"))
    doc = {"note": MARKER, **verification_json(v)}  # the marker first: is_ours reads the head
    written.append(write_text(directory / f"{stem}-verify.json",
                              json.dumps(doc, indent=2) + "\n", force))
    written.append(write_text(directory / f"{stem}-verify.md",
                              verification_markdown(v, figures), force))
    return written
