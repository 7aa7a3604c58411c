"""PNG figures of the symbolic analysis (`fluxloom check --plots DIR`).

|G| over theta at several Courant numbers, the stability map over (c, theta),
the relative phase speed, and each limiter's curve over Sweby's region. A file
already there is replaced only when fluxloom wrote it or with --force.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import sympy

from fluxloom.compiler import LoomError
from fluxloom.compiler.symbols import C, R

from .plots import _save, is_ours, plt

THETA = np.linspace(1e-4, np.pi, 721)


def _courants(analysis) -> list[float]:
    span = analysis.stable_interval
    top = float(sympy.N(span.hi)) if span is not None and span.hi.is_finite else 1.0
    picks = sorted({round(top * f, 4) for f in (0.25, 0.5, 0.75, 1.0)} | {analysis.courant})
    return picks + [round(top * 1.1, 4)]


def _g_of(linear_scheme):
    z = sympy.Symbol("z")
    f = sympy.lambdify((C, z), linear_scheme.amplification, modules="numpy")
    return lambda c, theta: np.broadcast_to(f(c, np.exp(1j * theta)), np.shape(theta))


def amplification_figure(analysis, path: Path) -> Path:
    fig, ax = plt.subplots(figsize=(6.4, 4.4))
    g = _g_of(analysis.linearisation.smooth[0])
    for c in _courants(analysis):
        ax.plot(THETA, np.abs(g(c, THETA)), label=f"c = {c:g}")
    ax.axhline(1.0, color="black", lw=0.8, ls=":")
    ax.set_xlabel("theta = k dx")
    ax.set_ylabel("|G|")
    ax.set_title(f"{analysis.scheme.name}: amplification factor "
                 f"({analysis.linearisation.smooth[0].label})", fontsize=9)
    ax.legend(fontsize=7)
    return _save(fig, path)


def stability_map_figure(analysis, path: Path) -> Path:
    span = analysis.stable_interval
    top = float(sympy.N(span.hi)) if span is not None and span.hi.is_finite else 1.0
    cs = np.linspace(1e-3, max(2.2, 1.5 * top), 331)
    thetas = THETA[THETA >= 0.05]  # below this |G| - 1 is at round-off level and the contour speckles
    g = _g_of(analysis.linearisation.smooth[0])
    growth = np.array([np.abs(g(c, thetas)) for c in cs]).T
    fig, ax = plt.subplots(figsize=(6.4, 4.4))
    image = ax.pcolormesh(cs, thetas, np.log10(np.maximum(growth, 1e-6)), shading="auto",
                          cmap="RdBu_r", vmin=-0.5, vmax=0.5)
    ax.contour(cs, thetas, growth, levels=[1.0], colors="black", linewidths=0.8)
    fig.colorbar(image, ax=ax, label="log10 |G|")
    ax.set_xlabel("Courant number c")
    ax.set_ylabel("theta")
    ax.set_title(f"{analysis.scheme.name}: stability map (|G| = 1 contour)", fontsize=9)
    return _save(fig, path)


def phase_speed_figure(analysis, path: Path) -> Path:
    fig, ax = plt.subplots(figsize=(6.4, 4.4))
    g = _g_of(analysis.linearisation.smooth[0])
    for c in _courants(analysis)[:-1]:
        phase = np.unwrap(np.angle(g(c, THETA)))
        ax.plot(THETA, -phase / (c * THETA), label=f"c = {c:g}")
    ax.axhline(1.0, color="black", lw=0.8, ls=":")
    ax.set_xlabel("theta = k dx")
    ax.set_ylabel("numerical / exact phase speed")
    ax.set_title(f"{analysis.scheme.name}: relative phase speed", fontsize=9)
    ax.legend(fontsize=7)
    return _save(fig, path)


LIMITER_COURANTS = (0.25, 0.5, 0.75)
"""Courant numbers at which a limiter is drawn against the region of the flux-limited
Lax-Wendroff form, psi/r <= 2/c and psi <= 2/(1 - c) (psi = 0 for r <= 0)."""


def _limiter_values(body, courant: bool, r, c=None):
    args = (R, C) if courant else (R,)
    f = sympy.lambdify(args, body, "numpy")
    with np.errstate(all="ignore"):
        values = f(r, c) if courant else f(r)
    return np.broadcast_to(np.asarray(values, dtype=float), r.shape)


def limiter_figure(analysis, limiter, path: Path) -> Path:
    """The limiter over the TVD region: the Courant-free region (a limiter of r) and, in
    one panel per Courant number, the region of the flux-limited Lax-Wendroff form at c."""
    r = np.linspace(-1.0, 4.0, 1001)
    body = analysis.scheme.bound(limiter.body)
    panels = ([None] if not limiter.courant else []) + list(LIMITER_COURANTS)
    fig, axes = plt.subplots(1, len(panels), figsize=(3.4 * len(panels), 3.6), squeeze=False)
    pos = r > 0
    top = 3.2
    for ax, c in zip(axes[0], panels):
        psi = _limiter_values(body, limiter.courant, r, c if c is not None else 0.5)
        if c is None:
            upper = np.minimum(2 * r[pos], 2)
            lower2, upper2 = np.minimum(r[pos], 1), np.minimum(np.maximum(r[pos], 1), upper)
            title = "Courant-free region"
        else:
            upper = np.minimum(2 * r[pos] / c, 2 / (1 - c))
            lower2 = np.minimum(r[pos], 1)
            upper2 = np.minimum(np.maximum(r[pos], 1), upper)
            title = f"c = {c:g}"
        ax.fill_between(r[pos], 0, upper, color="0.88", label="TVD region")
        ax.fill_between(r[pos], lower2, upper2, color="0.7", label="second-order part")
        outside = np.zeros_like(r, dtype=bool)
        outside[pos] = (psi[pos] > upper + 1e-12) | (psi[pos] < -1e-12)
        outside[~pos] = np.abs(psi[~pos]) > 1e-12
        ax.plot(r, psi, color="C0", lw=1.6, label=f"{limiter.name}")
        if outside.any():
            ax.plot(np.where(outside, r, np.nan), np.where(outside, psi, np.nan), color="C3",
                    lw=2.4, label="outside the region")
        if c is None:
            _shade_failures(ax, analysis, limiter.name, r[0], r[-1])
        top = max(top, float(np.nanmax(np.where(np.isfinite(psi), psi, np.nan))) + 0.2)
        ax.set_xlabel("r")
        ax.set_title(title, fontsize=9)
    for ax in axes[0]:
        ax.set_ylim(-0.3, min(top, 8.0))
    axes[0][0].set_ylabel("psi")
    axes[0][0].legend(fontsize=6, loc="upper left")
    args = "r, c" if limiter.courant else "r"
    fig.suptitle(f"{analysis.scheme.name}: limiter {limiter.name}({args})", fontsize=9)
    return _save(fig, path)


FAILURE_COLOURS = {"sweby_tvd": "tab:red", "second_order_region": "tab:orange"}


def _shade_failures(ax, analysis, name: str, left: float, right: float) -> None:
    """Shade the r where the limiter leaves Sweby's region (red) or its second-order part
    (orange), as the analysis found them, and name the range in the legend."""
    from fluxloom.compiler.analysis.wording import PROPERTY_LABELS, r_set_text

    facts = next((f for f in analysis.limiters if f.name == name), None)
    shaded = sympy.S.EmptySet
    for failure in getattr(facts, "failures", ()):
        colour = FAILURE_COLOURS.get(failure.property)
        if colour is None:
            continue
        label = f"outside {PROPERTY_LABELS[failure.property]}: {r_set_text(failure.where)}"
        where = sympy.Complement(failure.where, shaded)   # each r shaded once
        shaded = sympy.Union(shaded, failure.where)
        if where.is_empty:
            ax.plot([], [], color=colour, label=label.replace(": ", " (as above): ", 1))
            continue
        pieces = where.args if isinstance(where, sympy.Union) else (where,)
        for piece in pieces:
            lo = max(left, float(piece.inf)) if piece.inf != -sympy.oo else left
            hi = min(right, float(piece.sup)) if piece.sup != sympy.oo else right
            if hi < lo:
                continue
            if hi == lo:
                ax.axvline(lo, color=colour, lw=1.0, ls="--", label=label)
            else:
                ax.axvspan(lo, hi, color=colour, alpha=0.15, label=label)
            label = None


def write_plots(analysis, directory: Path, force: bool = False) -> list[Path]:
    """Write every figure into directory (created if needed); return the paths."""
    directory.mkdir(parents=True, exist_ok=True)
    name = analysis.scheme.name
    jobs = []
    if analysis.linearisation.smooth:
        jobs += [(directory / f"{name}_amplification.png", amplification_figure),
                 (directory / f"{name}_stability_map.png", stability_map_figure),
                 (directory / f"{name}_phase_speed.png", phase_speed_figure)]
    for limiter in analysis.scheme.limiters:
        jobs.append((directory / f"{name}_limiter_{limiter.name}.png",
                     lambda a, p, lim=limiter: limiter_figure(a, lim, p)))
    for path, _ in jobs:
        if path.exists() and not force and not is_ours(path):
            raise LoomError(f"{path} exists and was not written by fluxloom; "
                            "use --force to overwrite it", file="--plots")
    return [make(analysis, path) for path, make in jobs]
