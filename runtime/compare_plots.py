"""Figures of a comparison: accuracy against cost, and a family's measures against its param.

Written through runtime/plots.py (Agg back end, PNGs tagged as fluxloom's own).
"""
from __future__ import annotations

from pathlib import Path

from .plots import overlay_figure, save_figure  # first: it chooses the Agg back end

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.ticker import NullFormatter  # noqa: E402

from .compare_report import FAMILY_LABELS  # noqa: E402
from .comparison import Comparison, Family, family_best, family_values, value_text  # noqa: E402

NORM_LABELS = {"l1": "l1 error", "linf": "linf error"}
FAMILY_UNITS = {"front_width": "cells", "overshoot": "of the range", "undershoot": "of the range",
                "stability_measured": "Courant number", "cost": "s per cell-update",
                "peak_retained": "of the initial maximum"}


def profiles_figure(comparison: Comparison, path: Path) -> Path:
    """Every scheme's final bell, square wave and mixed profile over the exact one."""
    s = comparison.settings
    return overlay_figure([(r.label, r.finals) for r in comparison.rows], path,
                          f"one revolution, N = {s.cells}, c = {s.courant:g}")


def accuracy_cost_figure(comparison: Comparison, path: Path) -> Path:
    """Error against the cost of one revolution on log-log axes: one line per scheme, one
    point per grid (labelled N), the timings' range as horizontal bars; with a target
    error, its level and the cheapest scheme's point on it."""
    s = comparison.settings
    fig, axes = plt.subplots(1, 2, figsize=(11.5, 4.8), squeeze=False)
    for ax, norm in zip(axes[0], ("l1", "linf")):
        for r in comparison.rows:
            points = [(g, g.get(norm)) for g in r.errors if g.get(norm) is not None
                      and g.get(norm) > 0]
            if not points or r.cost is None:
                continue
            cost = [r.cost.scaled(g.work) for g, _ in points]
            x = np.array([c.median for c in cost])
            y = np.array([e for _, e in points])
            bars = np.array([[c.median - c.min for c in cost], [c.max - c.median for c in cost]])
            line = ax.errorbar(x, y, xerr=bars, marker="o", markersize=4, linewidth=1.1,
                               capsize=2, label=r.label)
            if r is comparison.rows[0] or len(comparison.rows) <= 4:
                for (g, e), xi in zip(points, x):
                    ax.annotate(str(g.n), (xi, e), textcoords="offset points", xytext=(3, 3),
                                fontsize=6, color=line.lines[0].get_color())
        if s.target_error is not None and norm == s.target_norm:
            ax.axhline(s.target_error, color="0.4", linestyle="--", linewidth=0.8,
                       label=f"target {s.target_error:g}")
            best = comparison.cheapest
            if best is not None:
                ax.plot([best.reach.cost.median], [s.target_error], marker="*", markersize=13,
                        color="k", linestyle="none",
                        label=f"cheapest: {comparison.rows[best.index].label}, "
                              f"N = {best.reach.n}")
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.xaxis.set_minor_formatter(NullFormatter())   # minor labels crowd short ranges
        ax.yaxis.set_minor_formatter(NullFormatter())
        ax.set_xlabel("seconds for one revolution (cost per cell-update x cells x steps)")
        ax.set_ylabel(f"normalised {NORM_LABELS[norm]}")
        ax.set_title(f"{NORM_LABELS[norm]} against cost, smooth bell, c = {s.courant:g}",
                     fontsize=9)
        ax.grid(True, which="both", linewidth=0.3)
    handles, labels = axes[0][0].get_legend_handles_labels()
    extra_h, extra_l = axes[0][1].get_legend_handles_labels()
    for h, lab in zip(extra_h, extra_l):
        if lab not in labels:
            handles.append(h)
            labels.append(lab)
    fig.legend(handles, labels, loc="lower center", ncol=min(len(labels), 4), fontsize=7,
               frameon=False)
    rows = (len(labels) + 3) // 4
    return save_figure(fig, path, rect=(0, 0.05 + 0.04 * rows, 1, 1))


def family_figure(comparison: Comparison, family: Family, path: Path) -> Path:
    """Each measure against the family's param, the best value of each starred."""
    x = np.array([float(v) for v in family.values])
    measures = list(FAMILY_LABELS)
    columns = 4
    rows = (len(measures) + columns - 1) // columns
    fig, axes = plt.subplots(rows, columns, figsize=(3.3 * columns, 2.7 * rows), squeeze=False)
    for ax, measure in zip(axes.flat, measures):
        values = family_values(comparison, family, measure)
        y = np.array([np.nan if v is None else v for v in values], dtype=float)
        ax.plot(x, y, marker="o", linewidth=1.0)
        if measure == "cost":          # the timings' range
            rows = [comparison.rows[i] for i in family.members]
            low = [r.cost.min if r.cost else np.nan for r in rows]
            high = [r.cost.max if r.cost else np.nan for r in rows]
            ax.vlines(x, low, high, color="tab:blue", linewidth=0.8)
        best, note = family_best(comparison, family, measure)
        for b in best:
            i = family.values.index(b)
            ax.plot([x[i]], [y[i]], marker="*", markersize=12, color="tab:red", linestyle="none")
        unit = FAMILY_UNITS.get(measure)
        ax.set_title(FAMILY_LABELS[measure] + (f", {unit}" if unit else "")
                     + (f"\n({note})" if note else ""), fontsize=8)
        ax.set_xticks(x, [value_text(v) for v in family.values], fontsize=7)
        ax.tick_params(axis="y", labelsize=7)
        if measure in ("l1", "linf", "cost") and np.all(y[np.isfinite(y)] > 0) \
                and np.isfinite(y).any():
            ax.set_yscale("log")
            ax.yaxis.set_minor_formatter(NullFormatter())
        ax.grid(True, linewidth=0.3)
    for ax in list(axes.flat)[len(measures):]:
        ax.set_visible(False)
    s = comparison.settings
    fig.suptitle(f"{family.title}: measures at N = {s.cells}, "
                 f"c = {s.courant:g} (star: best)", fontsize=10)
    return save_figure(fig, path)
