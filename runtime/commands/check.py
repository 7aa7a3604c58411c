"""`fluxloom check FILE`: what fluxloom can prove about a scheme.

One section per property, verdict first; `--json` prints the analysis
document (schema in README.md); `--plots DIR` writes PNG figures.
"""
from __future__ import annotations

import json
import math
from fractions import Fraction
from pathlib import Path

import sympy

from fluxloom.compiler import LoomError
from fluxloom.compiler.analysis import analyse
from fluxloom.compiler.analysis.budget import DEFAULT_SECONDS

from fluxloom.compiler.analysis.claims import read_claims
from fluxloom.compiler.analysis.wording import (bounded_text, failure_text, limiter_text,
                                                order_text, split_lines, stability_text,
                                                value_text, verdict_text, yes_no)

from .common import add_courant_option, add_set_option, add_spec_argument, add_split_option, \
    parse_courant, parse_dims_split, scheme_from_args


def register(sub) -> None:
    parser = sub.add_parser("check", help="analyse a scheme and print its properties",
                            description="Prove what can be proven about a scheme: consistency, "
                                        "order, stability, conservation, monotonicity, limiters, "
                                        "TVD, dispersion and bounds.")
    add_spec_argument(parser)
    add_set_option(parser)
    parser.add_argument("--json", action="store_true", help="print the analysis as JSON")
    add_courant_option(parser, "Courant number for the dispersion table and the order there, "
                               "e.g. 0.5 or 3/5 (default 0.5)")
    parser.add_argument("--plots", metavar="DIR",
                        help="write PNG figures (|G|, stability map, phase speed, limiters) to DIR")
    parser.add_argument("--force", action="store_true",
                        help="overwrite existing figures in the --plots directory")
    parser.add_argument("--budget", default=str(DEFAULT_SECONDS), metavar="SECONDS",
                        help="CPU seconds each analysis pass may take before it falls back to "
                             f"a numeric method or says undecided (default {DEFAULT_SECONDS:g})")
    parser.add_argument("--dims", type=int, default=1, metavar="D",
                        help="also analyse the scheme split over D = 2 or 3 dimensions "
                             "(stability per direction, order with constant and with variable "
                             "coefficients, the splitting error); default 1")
    add_split_option(parser)
    parser.set_defaults(run=run)


def parse_budget(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise LoomError(f"--budget expects a number of seconds, given '{text}'",
                        file="--budget") from None
    if not math.isfinite(value) or value <= 0:
        raise LoomError(f"--budget must be a positive number of seconds, given '{text}'",
                        file="--budget")
    return value


def run(args) -> int:
    parse_courant(args.courant)  # validates; the analysis keeps the Courant number exact
    seconds = parse_budget(args.budget)
    dims, split = parse_dims_split(args.dims, args.split)
    scheme = scheme_from_args(args)
    analysis = analyse(scheme, exact_courant(args.courant), seconds)
    doc = analysis.to_json()
    if dims > 1:
        from fluxloom.compiler.analysis.splitting import analyse_splitting, with_split

        doc = with_split(doc, analyse_splitting(analysis, dims, split))
    if args.plots:
        written, skipped = write_figures(analysis, Path(args.plots), args.force)
        doc["plots"] = [str(p) for p in written]
        doc["plots_not_written"] = skipped
    if args.json:
        print(json.dumps(doc, indent=2))
    else:
        print(render(doc))
    return 0


def exact_courant(text: str) -> sympy.Rational:
    """'3/5' and '0.6' as the exact 3/5 (the text already passed parse_courant)."""
    top, _, bottom = text.strip().partition("/")
    value = Fraction(top.strip()) / (Fraction(bottom.strip()) if bottom else 1)
    return sympy.Rational(value.numerator, value.denominator)


def write_figures(analysis, directory: Path, force: bool) -> tuple[list[Path], list[str]]:
    """The figures --plots writes, and a sentence for each kind it cannot write."""
    try:
        from fluxloom.runtime.analysis_plots import write_plots
    except ImportError as err:  # matplotlib missing from this installation
        raise LoomError(f"--plots needs matplotlib, which cannot be imported ({err}); "
                        "install it (pip install matplotlib) or leave out --plots",
                        file="--plots") from None
    skipped = []
    lin = analysis.linearisation
    if not lin.smooth:
        skipped.append(f"no amplification, stability-map or phase-speed figures: no linear "
                       f"scheme stands for this one ({lin.note})")
    if not analysis.scheme.limiters:
        skipped.append("no limiter figure: the scheme has no limiter statement")
    return write_plots(analysis, directory, force=force), skipped


# ---- terminal report ------------------------------------------------------------

def _ssp(time_method: dict) -> str:
    exact = time_method["ssp_coefficient_exact"]
    return f"{exact} (not SSP)" if time_method["ssp_coefficient"] == 0 else exact


def exchange_text(exchange: dict) -> str:
    """The kernel's exchange schedule in one line (the `exchange` object of the JSON)."""
    per_step = exchange["per_step"]
    faces = (f", {exchange['face_halo']} face velocities per side" if exchange["face_halo"]
             else "")
    return (f"decomposed: kernel halo {exchange['halo']} cells per side{faces}, {per_step} "
            f"exchange{'s' if per_step != 1 else ''} per step")


def render(doc: dict) -> str:
    """The analysis for reading; every verdict is worded by compiler/analysis/wording.py."""
    claims = read_claims(doc)
    out = []
    head = f"{doc['scheme']}" + (f"  -  {doc['about']}" if doc.get("about") else "")
    out.append(head)
    out.append(f"  time {doc['time']}, stencil offsets {doc['offsets']} (upwind frame), "
               f"halo {doc['halo']}" + "".join(f", {k} = {v['exact']}" for k, v in doc["params"].items()))
    tm = doc["time_method"]
    out.append(f"  time method {tm['name']}: {tm['stages']} stage{'s' if tm['stages'] > 1 else ''}, "
               f"order {tm['order']}"
               + (f" ({tm['linear_order']} on linear problems)"
                  if tm["linear_order"] != tm["order"] else "")
               + f", SSP coefficient {_ssp(tm)}")
    if "exchange" in doc:
        out.append("  " + exchange_text(doc["exchange"]))
    if not doc["linear"]:
        out.append(f"  nonlinear: {doc['linearisation']}")

    order = doc["order"]
    out.append("")
    out.append(f"consistency   {yes_no(claims.consistent)}; order "
               f"{order_text(claims.order, claims.courant)}"
               + (" at fixed Courant number" if claims.order.overall is not None else ""))
    for term in doc["modified_equation"]:
        out.append(f"  {term['coefficient']} * {term['derivative']}")
    if doc["modified_equation"]:
        out.append(f"  ({doc['modified_equation_form']})")
    for variant in doc["modified_equation_by_scheme"][1:]:
        out.append(f"  {variant['label']}: order {variant['order']['overall']}; "
                   + "; ".join(f"{t['coefficient']} * {t['derivative']}" for t in variant["terms"]))
    if order.get("note"):
        out.append(f"  note: {order['note']}")

    st = doc["stability"]
    out.append("")
    out.append(f"stability     {stability_text(claims.stability)}"
               + ("; no claim elsewhere" if st["outside"] == "no claim" and st["kind"] else ""))
    out.append(f"  basis: {st['basis']}")
    at = st["at_courant"]
    out.append(f"  at c = {at['courant_exact']}: "
               + {True: "stable", False: "unstable", None: "no claim"}[at["stable"]])
    if st.get("stand_ins"):
        out.append(f"  stand-ins: all stable for {st['stand_ins']['set']}")
    for standin in claims.stability.standins:
        if len(claims.stability.standins) > 1:
            out.append(f"  {standin.label}: {stability_text_of(standin)}")
    if len(st["schemes"]) == 1:
        only = st["schemes"][0]
        if only.get("semi_discrete_z"):
            out.append(f"  G = R(c lambda(z)), lambda(z) = {only['semi_discrete_z']}, z = exp(i theta)")
        else:
            out.append(f"  G(z) = {only['amplification_z']}, z = exp(i theta)")
        if len(only["abs_squared_s"]) <= 160:
            out.append(f"  |G|^2 = {only['abs_squared_s']}, s = sin^2(theta/2)")
    if "time_method" in st:
        tm = st["time_method"]
        limit = value_text(tm["imaginary_axis_limit"], tm["imaginary_axis_limit_exact"])
        out.append(f"  R(z) = {tm['stability_polynomial']}; imaginary-axis limit {limit}; "
                   f"SSP coefficient {_ssp(tm)}")
    if st["method"]:
        out.append(f"  method: {st['method']}" + (f", tolerance {st['tolerance']:g}" if st["tolerance"] else ""))

    out.append("")
    out.append(f"conservation  {yes_no(claims.conservative)}: {claims.conservation_reason}")

    out.append("")
    out.append(f"convergence   {verdict_text(claims.convergent)}: {claims.convergent.reason}")

    mono = doc["monotone"]
    out.append("")
    out.append(f"monotone      {verdict_text(claims.monotone)}: {claims.monotone.reason}")
    if mono["coefficients"]:
        out.append("  update coefficients: " + ", ".join(
            f"q[j{int(k):+d}] {v}" for k, v in mono["coefficients"].items()))
    for bnd in mono["bounding"]:
        out.append(f"  {bnd['label']}: monotone for {bnd['set']}")

    if doc["limiters"]:
        out.append("")
        out.append("limiters")
        for name, lim in doc["limiters"].items():
            slope = lim["slope_at_1"]
            slopes = (slope["left_exact"] if slope["left_exact"] == slope["right_exact"]
                      else f"{slope['left_exact']} (left), {slope['right_exact']} (right)")
            out.append(f"  {name}({', '.join(lim['arguments'])}) = {lim['psi']}")
            out.append(f"    psi(1) = {lim['psi_at_1_exact']}, slope at 1 = {slopes}, "
                       f"max psi = {lim['sup_psi_exact'] or 'depends on c'}")
            facts = next(f for f in claims.limiters if f.name == name)
            out.append(f"    {limiter_text(facts)}")
            if lim["tvd_courant"]["set"] is not None:
                out.append(f"    in the Courant-dependent TVD region for "
                           f"{lim['tvd_courant']['set']}; its second-order part for "
                           f"{lim['second_order_courant']['set']}")
            for failure in facts.failures:
                out.append(f"    {failure_text(failure)}")
            for failure in lim["courant_failures"]:
                out.append(f"    {failure['text']}")
            out.append(f"    method: {lim['method']}")

    tvd = doc["tvd"]
    out.append("")
    if claims.tvd.holds is None:
        out.append(f"TVD           undecided: {claims.tvd.reason}")
    else:
        out.append(f"TVD           {verdict_text(claims.tvd)}")
        out.append(f"  method: {tvd['method']}")
        if claims.tvd.reason:
            out.append(f"  {claims.tvd.reason}")

    if doc["bounds"] is not None:
        b = doc["bounds"]
        out.append("")
        out.append(f"bounds        bounded {bounded_text(claims)}")
        out.append(f"  new extrema: {b['new_extrema']}")
        out.append(f"  accuracy: {b['order']}")
        out.append(f"  {b['reason']}")

    disp = doc.get("dispersion")
    if disp:
        out.append("")
        where = {True: "", False: ", outside the stable interval",
                 None: ", where no stability is claimed"}[disp["stable_at_courant"]]
        out.append(f"dispersion    at c = {disp['courant']:g} ({disp['label']}{where})")
        out.append("  cells/wave   |G|/step   phase err/step   rel. speed   |G|/wavelength   phase err/wavelength")
        for r in disp["rows"]:
            out.append(f"  {r['cells_per_wavelength']:>10d}   {r['amplitude_per_step']:8.5f}   "
                       f"{r['phase_error_per_step']:+14.3e}   {r['relative_phase_speed']:10.5f}   "
                       f"{r['amplitude_per_wavelength']:14.4e}   {r['phase_error_per_wavelength']:+20.4f}")
        out.append("  (phase errors in radians, arg G + c theta: positive lags the exact solution, negative leads)")
    if claims.split is not None:
        out.append("")
        lines = split_lines(claims.split)
        out.append(lines[0])
        out += [f"  {line}" for line in lines[1:]]
        out.append(f"  note: {claims.split.order_note}")
        out.append(f"  constant field: {claims.split.constant_field}")
    if doc["undecided"]:
        out.append("")
        out.append("undecided     " + "; ".join(doc["undecided"]))
    over = doc.get("budget", {}).get("exceeded") or []
    if over:
        out.append("")
        out.append(f"budget        {doc['budget']['seconds']:g} s of CPU time per pass "
                   "(--budget); past it:")
        for item in over:
            out.append(f"  {item['pass']}: {item['note']}")
    if "plots" in doc:
        out.append("")
        out.append("plots         " + (", ".join(doc["plots"]) or "none written"))
        for why in doc["plots_not_written"]:
            out.append(f"  {why}")
    return "\n".join(out)


def stability_text_of(standin) -> str:
    """One linear stand-in's stability, worded like the scheme's."""
    from fluxloom.compiler.analysis.claims import Stability

    return stability_text(Stability(standin.kind, standin.stable, (), None, None, "", "unstable"))
