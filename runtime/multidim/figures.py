"""Figures of the 2-D and 3-D cases: initial and final fields side by side (3-D: the
middle z plane), and convergence."""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (after choosing the back end)
import numpy as np  # noqa: E402

from fluxloom.compiler import LoomError  # noqa: E402

from ..plots import PNG_TAG  # noqa: E402
from .cases import smooth_case  # noqa: E402


def _save(fig, path: Path) -> Path:
    fig.tight_layout()
    try:
        fig.savefig(path, dpi=110, metadata={"Software": PNG_TAG})
    except OSError as err:
        raise LoomError(f"cannot write {path}: {err.strerror or err}", file=str(path)) from None
    finally:
        plt.close(fig)
    return path


def case_figure(sv, case, path: Path) -> Path:
    """The finest grid's initial field, final field and their difference."""
    row = sv.rows(case.name)[-1]
    initial, final = _plane(row.initial), _plane(row.final)
    fig, axes = plt.subplots(1, 3, figsize=(11.5, 3.8))
    low = min(initial.min(), final.min())
    high = max(initial.max(), final.max())
    extent = (0, 1, 0, 1)
    for ax, data, title in ((axes[0], initial, "initial = exact final"),
                            (axes[1], final, f"after {row.steps} steps")):
        image = ax.imshow(data.T, origin="lower", extent=extent, vmin=low, vmax=high,
                          cmap="viridis")
        ax.set_title(title, fontsize=9)
        fig.colorbar(image, ax=ax, shrink=0.8)
    diff = final - initial
    size = float(np.max(np.abs(diff))) or 1.0
    image = axes[2].imshow(diff.T, origin="lower", extent=extent, vmin=-size, vmax=size,
                           cmap="RdBu_r")
    axes[2].set_title("final - exact", fontsize=9)
    fig.colorbar(image, ax=axes[2], shrink=0.8)
    for ax in axes:
        ax.set_xlabel("x")
        ax.set_ylabel("y")
    where = ", middle z plane" if row.initial.ndim == 3 else ""
    fig.suptitle(f"{case.name}, N = {row.n}{where}, {sv.method} splitting, "
                 f"c = {row.courant:.3g}", fontsize=10)
    return _save(fig, path)


def _plane(field: np.ndarray) -> np.ndarray:
    """A 2-D field, or the middle z plane of a 3-D one."""
    return field if field.ndim == 2 else field[:, :, field.shape[2] // 2]


def convergence_figure(sv, path: Path) -> Path:
    """l1, l2, linf against N for every case, log-log, with reference slopes."""
    fig, ax = plt.subplots(figsize=(6.4, 4.6))
    smooth = smooth_case(sv.dims)
    for case in dict.fromkeys(r.case for r in sv.runs):
        rows = [r for r in sv.rows(case) if r.l1 is not None and r.l1 > 0]
        if not rows:
            continue
        ns = np.array([r.n for r in rows], dtype=float)
        ax.loglog(ns, [r.l1 for r in rows], marker="o",
                  linestyle="-" if case == smooth else ":", label=f"{case} l1")
    rows = [r for r in sv.rows(smooth) if r.l1]
    if rows:
        ns = np.array([rows[0].n, rows[-1].n], dtype=float)
        for slope in (1, 2):
            ax.loglog(ns, rows[0].l1 * 0.5 * (ns / ns[0]) ** -slope, color="0.6",
                      linewidth=0.8, linestyle="--")
            ax.annotate(f"slope {slope}", (ns[-1], rows[0].l1 * 0.5 * (ns[-1] / ns[0]) ** -slope),
                        fontsize=7, color="0.4")
    ax.set_xlabel("cells per side N")
    ax.set_ylabel("normalised l1 error")
    ax.set_title(f"{sv.dims}-D cases, {sv.method} splitting")
    ax.grid(True, which="both", linewidth=0.3)
    ax.legend(fontsize=7)
    return _save(fig, path)
