"""`fluxloom check FILE`: what fluxloom can prove about a scheme.

One section per property, verdict first; `--json` prints the analysis
document (schema in README.md); `--plots DIR` writes PNG figures.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

from fluxloom.compiler import LoomError
from fluxloom.compiler.analysis import analyse
from fluxloom.compiler.analysis.budget import DEFAULT_SECONDS

from .common import add_set_option, add_spec_argument, scheme_from_args


def register(sub) -> None:
    parser = sub.add_parser("check", help="analyse a scheme and print its properties",
                            description="Prove what can be proven about a scheme: consistency, "
                                        "order, stability, conservation, monotonicity, limiters, "
                                        "TVD, dispersion and bounds.")
    add_spec_argument(parser)
    add_set_option(parser)
    parser.add_argument("--json", action="store_true", help="print the analysis as JSON")
    parser.add_argument("--courant", default="0.5", metavar="C",
                        help="Courant number for the dispersion table (default 0.5)")
    parser.add_argument("--plots", metavar="DIR",
                        help="write PNG figures (|G|, stability map, phase speed, limiters) to DIR")
    parser.add_argument("--force", action="store_true",
                        help="overwrite existing figures in the --plots directory")
    parser.add_argument("--budget", default=str(DEFAULT_SECONDS), metavar="SECONDS",
                        help="CPU seconds each analysis pass may take before it falls back to "
                             f"a numeric method or says undecided (default {DEFAULT_SECONDS:g})")
    parser.set_defaults(run=run)


def parse_courant(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise LoomError(f"--courant expects a number, given '{text}'", file="--courant") from None
    if not math.isfinite(value) or value <= 0:
        raise LoomError(f"--courant must be a positive number, given '{text}'", file="--courant")
    return value


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
    courant = parse_courant(args.courant)
    seconds = parse_budget(args.budget)
    scheme = scheme_from_args(args)
    analysis = analyse(scheme, courant, seconds)
    doc = analysis.to_json()
    if args.plots:
        from fluxloom.runtime.analysis_plots import write_plots

        written = write_plots(analysis, Path(args.plots), force=args.force)
        doc["plots"] = [str(p) for p in written]
    if args.json:
        print(json.dumps(doc, indent=2))
    else:
        print(render(doc))
    return 0


# ---- terminal report ------------------------------------------------------------

def _yes(value) -> str:
    return {True: "yes", False: "no", None: "undecided"}[value]


def _c(value, exact) -> str:
    if value is None and exact in (None, "oo"):
        return "oo" if exact == "oo" else "-"
    if exact is not None and len(exact) <= 24 and exact != _short(value):
        return f"{exact} ({_short(value)})"
    return _short(value)


def _short(value) -> str:
    if value is None:
        return "-"
    return f"{value:.6g}"


def _interval(d: dict) -> str:
    if d.get("courant_min") is None and d.get("courant_max") is None \
            and d.get("courant_max_exact") is None:
        return "no interval"
    lo = _c(d.get("courant_min"), d.get("courant_min_exact"))
    hi = _c(d.get("courant_max"), d.get("courant_max_exact"))
    closing = ")" if d.get("courant_max_exact") == "oo" else "]"
    return f"[{lo}, {hi}{closing}"


def _islands(d: dict) -> str:
    isl = d.get("islands") or []
    if not isl:
        return ""
    return "; also " + ", ".join(
        f"c = {_c(i['courant_min'], i['courant_min_exact'])}" if i["courant_min"] == i["courant_max"]
        else _interval(i) for i in isl)


def _ssp(time_method: dict) -> str:
    exact = time_method["ssp_coefficient_exact"]
    return f"{exact} (not SSP)" if time_method["ssp_coefficient"] == 0 else exact


def render(doc: dict) -> str:
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
    if not doc["linear"]:
        out.append(f"  nonlinear: {doc['linearisation']}")

    order = doc["order"]
    out.append("")
    if order["overall"] is None:
        out.append(f"consistency   {_yes(doc['consistent'])}; no order")
    else:
        out.append(f"consistency   {_yes(doc['consistent'])}; order {order['overall']} overall "
                   f"(space {order['space']}, time {order['time']}) at fixed Courant number")
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
    out.append(f"stability     {st['kind'] or 'undecided'}" + (f" for c in {_interval(st)}" if st["kind"] == "conditional" else "")
               + _islands(st))
    for sch in st["schemes"]:
        if len(st["schemes"]) > 1 or sch.get("islands"):
            out.append(f"  {sch['label']}: {sch['kind']}, stable for {sch['set']}")
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
        limit = _c(tm["imaginary_axis_limit"], tm["imaginary_axis_limit_exact"])
        out.append(f"  R(z) = {tm['stability_polynomial']}; imaginary-axis limit {limit}; "
                   f"SSP coefficient {_ssp(tm)}")
    out.append(f"  method: {st['method']}" + (f", tolerance {st['tolerance']:g}" if st["tolerance"] else ""))

    out.append("")
    out.append(f"conservation  {_yes(doc['conservative'])}: {doc['conservation']['reason']}")

    conv = doc["convergent"]
    out.append("")
    out.append(f"convergence   {_yes(conv['holds'])}: {conv['reason']}")

    mono = doc["monotone"]
    out.append("")
    out.append(f"monotone      {_yes(mono['holds'])}" + (f" for c in {_interval(mono)}" if mono["holds"] else "")
               + f": {mono['reason']}")
    if mono["coefficients"]:
        out.append("  update coefficients: " + ", ".join(
            f"q[j{int(k):+d}] {v}" for k, v in mono["coefficients"].items()))
    for bnd in mono.get("bounding", []):
        out.append(f"  {bnd['label']}: monotone for {bnd['set']}")

    if doc["limiters"]:
        out.append("")
        out.append("limiters")
        for name, lim in doc["limiters"].items():
            slope = lim["slope_at_1"]
            slopes = (slope["left_exact"] if slope["left_exact"] == slope["right_exact"]
                      else f"{slope['left_exact']} (left), {slope['right_exact']} (right)")
            out.append(f"  {name}(r) = {lim['psi']}")
            out.append(f"    psi(1) = {lim['psi_at_1_exact']}, slope at 1 = {slopes}, "
                       f"max psi = {lim['sup_psi_exact']}")
            out.append(f"    Sweby TVD region {_yes(lim['sweby_tvd'])}; second-order region "
                       f"{_yes(lim['second_order_region'])}; symmetric {_yes(lim['symmetric'])}")
            for why in lim["why_not"]:
                out.append(f"    because {why}")
            out.append(f"    method: {lim['method']}")

    tvd = doc["tvd"]
    out.append("")
    if tvd["holds"] is None:
        out.append(f"TVD           undecided: {tvd['reason']}")
    else:
        where = tvd["set"] if tvd.get("set") else "no Courant number"
        out.append(f"TVD           {_yes(tvd['holds'])}" + (f" for {where}" if tvd["holds"] else ""))
        out.append(f"  method: {tvd['method']}")
        if tvd["reason"]:
            out.append(f"  {tvd['reason']}")

    bounded = doc["bounded"]
    if doc["bounds"] is not None:
        b = doc["bounds"]
        out.append("")
        extra = f" for c in {_interval(bounded)}" if b["kind"] == "fct" and bounded["holds"] else \
            (f" within [{b['low_exact']}, {b['high_exact']}]" if b["kind"] == "clip" else "")
        out.append(f"bounds ({b['kind']})  bounded {_yes(b['bounded'])}{extra}")
        out.append(f"  new extrema: {b['new_extrema']}")
        out.append(f"  accuracy: {b['order']}")
        out.append(f"  {b['reason']}")

    disp = doc.get("dispersion")
    if disp:
        out.append("")
        where = "" if disp["stable_at_courant"] else ", outside the stable interval"
        out.append(f"dispersion    at c = {disp['courant']:g} ({disp['label']}{where})")
        out.append("  cells/wave   |G|/step   phase err/step   rel. speed   |G|/wavelength   phase err/wavelength")
        for r in disp["rows"]:
            out.append(f"  {r['cells_per_wavelength']:>10d}   {r['amplitude_per_step']:8.5f}   "
                       f"{r['phase_error_per_step']:+14.3e}   {r['relative_phase_speed']:10.5f}   "
                       f"{r['amplitude_per_wavelength']:14.4e}   {r['phase_error_per_wavelength']:+20.4f}")
        out.append("  (phase errors in radians, arg G + c theta: positive lags the exact solution, negative leads)")
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
    if doc.get("plots"):
        out.append("")
        out.append("plots         " + ", ".join(doc["plots"]))
    return "\n".join(out)
