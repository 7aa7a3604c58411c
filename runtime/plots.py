"""PNG figures of what the harness measured (matplotlib, Agg back end, no display).

Every figure is tagged in its PNG metadata as written by fluxloom, so a later run
knows the file is its own to replace.
"""
from __future__ import annotations

import math
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.ticker  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402  (after choosing the back end)
import numpy as np  # noqa: E402

from fluxloom.compiler import LoomError  # noqa: E402

from .profiles import cell_centres  # noqa: E402

PNG_TAG = "fluxloom"
_METADATA = {"Software": PNG_TAG}


def _save(fig, path: Path, **layout) -> Path:
    fig.tight_layout(**layout)
    try:
        fig.savefig(path, dpi=110, metadata=_METADATA)
    except OSError as err:
        raise LoomError(f"cannot write {path}: {err.strerror or err}", file=str(path)) from None
    finally:
        plt.close(fig)
    return path


save_figure = _save   # for the other figure modules (runtime/compare_plots.py)


def convergence_figure(verification, path: Path) -> Path:
    """Error against N on log-log axes, one line per profile and norm, with reference slopes."""
    fig, ax = plt.subplots(figsize=(6.4, 4.6))
    markers = {"l1": "o", "l2": "s", "linf": "^"}
    anchor_n = anchor_e = None
    for conv in verification.convergence:
        rows = [r for r in conv.rows if r.errors is not None]
        if not rows:
            continue
        ns = np.array([r.n for r in rows], dtype=float)
        for norm, marker in markers.items():
            errs = np.array([r.errors.get(norm) for r in rows])
            ax.loglog(ns, errs, marker=marker, linestyle="-" if norm == "l1" else ":",
                      label=f"{conv.profile} {norm}")
        if anchor_n is None:
            anchor_n, anchor_e = ns[0], rows[0].errors.l1
    if anchor_n is not None:
        ns = np.array([anchor_n, anchor_n * 32])
        for slope in (1, 2, 3):
            ax.loglog(ns, anchor_e * 0.5 * (ns / anchor_n) ** -slope, color="0.6",
                      linewidth=0.8, linestyle="--")
            ax.annotate(f"slope {slope}", (ns[-1], anchor_e * 0.5 * 32.0 ** -slope),
                        fontsize=7, color="0.4")
    cells = sorted({r.n for conv in verification.convergence for r in conv.rows})
    ax.set_xticks(cells, [str(n) for n in cells])
    ax.xaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
    predicted = verification.prediction.order
    ax.set_title(f"{verification.scheme}: convergence, one revolution"
                 + (f" (predicted order {predicted})" if predicted else ""))
    ax.set_xlabel("cells N")
    ax.set_ylabel("normalised error")
    ax.grid(True, which="both", linewidth=0.3)
    ax.legend(fontsize=7, ncol=2)
    return _save(fig, path)


def profiles_figure(verification, path: Path) -> Path:
    """Final profiles against the exact solution: a smooth one and the discontinuous ones."""
    panels = []
    bell = verification.convergence[-1]
    row = next((r for r in bell.rows if r.n >= 100), bell.rows[-1])
    panels.append((f"{row.profile}, N = {row.n}", row.final, row.exact, row.diverged_at))
    for sh in verification.shapes:
        panels.append((f"{sh.profile}, N = {sh.n}, {sh.steps} steps", sh.final, sh.exact,
                       sh.diverged_at))
    fig, axes = plt.subplots(1, len(panels), figsize=(4.2 * len(panels), 3.4))
    for ax, (title, final, exact, diverged) in zip(np.atleast_1d(axes), panels):
        x = cell_centres(final.size)
        if exact is not None:
            ax.plot(x, exact, color="0.5", linewidth=1.0, label="exact")
        ax.plot(x, final, marker=".", markersize=3, linewidth=0.8, label=verification.scheme)
        if diverged is not None:
            title += f" (diverged at step {diverged})"
        ax.set_title(title, fontsize=9)
        ax.set_xlabel("x")
        ax.legend(fontsize=7)
    return _save(fig, path)


def stability_figure(verification, path: Path) -> Path:
    """Measured growth over Courant numbers, with the predicted stable set (islands
    included) and the measured one."""
    st = verification.stability
    pred = verification.prediction
    fig, ax = plt.subplots(figsize=(6.4, 4.0))
    cs = np.array([p.courant for p in st.probes])
    growth = np.array([p.growth if math.isfinite(p.growth) else np.nan for p in st.probes])
    diverged = np.array([not math.isfinite(p.growth) for p in st.probes])
    stable = ~np.array([p.grows for p in st.probes])
    ok = stable & ~diverged
    ax.scatter(cs[ok], growth[ok], color="tab:green", s=12, label="stable", zorder=3)
    ax.scatter(cs[~stable & ~diverged], growth[~stable & ~diverged], color="tab:red", s=12,
               label="grows", zorder=3)
    if diverged.any():
        top = np.nanmax(growth) if np.isfinite(growth).any() else 2.0
        ax.scatter(cs[diverged], np.full(diverged.sum(), top * 1.2), color="tab:red",
                   marker="x", label="diverged or fault", zorder=3)
    right = float(cs.max()) * 1.02
    first = True
    for part in pred.stable_set.parts if pred.stability_decided else ():
        hi = min(part.hi, right)
        if part.is_point:
            ax.axvline(part.lo, color="tab:green", linestyle="--", linewidth=1,
                       label="predicted stable" if first else None)
        else:
            ax.axvspan(part.lo, hi, color="tab:green", alpha=0.1,
                       label="predicted stable" if first else None)
        first = False
    for i, (lo, hi) in enumerate(st.measured):
        ax.hlines(1.0, lo, hi, color="k", linewidth=2.5, label="measured stable" if i == 0 else None)
    ax.set_yscale("log")
    ax.set_xlim(0, right)
    ax.set_xlabel("Courant number c")
    ax.set_ylabel("max |G| over modes" if st.method == "spectral" else "l2 growth, 2nd half")
    ax.set_title(f"{verification.scheme}: stability, predicted vs measured")
    ax.grid(True, which="both", linewidth=0.3)
    ax.legend(fontsize=7)
    return _save(fig, path)


def overlay_figure(entries, path: Path, title: str = "final profiles") -> Path:
    """Several schemes' final profiles over the exact one, one panel per profile.

    entries: [(label, {profile: (final, exact)})]."""
    names = []
    for _, finals in entries:
        names += [p for p in finals if p not in names]
    fig, axes = plt.subplots(1, len(names), figsize=(4.6 * len(names), 3.9), squeeze=False)
    for ax, name in zip(axes[0], names):
        exact_drawn = False
        for label, finals in entries:
            if name not in finals:
                continue
            final, exact = finals[name]
            x = cell_centres(final.size)
            if not exact_drawn:
                ax.plot(x, exact, color="k", linewidth=1.2, label="exact")
                exact_drawn = True
            ax.plot(x, final, linewidth=0.9, label=label)
        ax.set_title(name, fontsize=9)
        ax.set_xlabel("x")
    handles, labels = axes[0][0].get_legend_handles_labels()
    fig.legend(handles, labels, loc="lower center", ncol=min(len(labels), 6), fontsize=7,
               frameon=False)
    fig.suptitle(title, fontsize=10)
    return _save(fig, path, rect=(0, 0.08 + 0.04 * (len(labels) > 6), 1, 1))


def is_ours(path: Path) -> bool:
    """A PNG this module wrote (it carries the fluxloom tag)."""
    try:
        with open(path, "rb") as handle:
            head = handle.read(4096)
    except OSError:
        return False
    return head.startswith(b"\x89PNG") and b"Software\x00" + PNG_TAG.encode() in head
