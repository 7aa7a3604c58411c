"""`fluxloom check FILE`: what the front end knows about a scheme.

(The analysis passes extend this report; see compiler/analysis/.)
"""
from __future__ import annotations

import json

import sympy

from .common import add_set_option, add_spec_argument, scheme_from_args


def register(sub) -> None:
    parser = sub.add_parser("check", help="analyse a scheme and print its properties",
                            description="Parse a scheme and report what is known about it.")
    add_spec_argument(parser)
    add_set_option(parser)
    parser.add_argument("--json", action="store_true", help="print JSON instead of a table")
    parser.set_defaults(run=run)


def front_end_facts(scheme) -> dict:
    return {
        "scheme": scheme.name,
        "about": scheme.about,
        "time": scheme.time,
        "offsets": list(scheme.offsets),
        "halo": scheme.halo,
        "uses_courant": scheme.uses_c,
        "params": {p.name: {"value": float(p.value), "exact": str(p.value)} for p in scheme.params},
        "limiters": {lim.name: {"psi": str(lim.body)} for lim in scheme.limiters},
        "flux": f"u*({sympy.sstr(scheme.face)})",
        "low_flux": None if scheme.low_face is None else f"u*({sympy.sstr(scheme.low_face)})",
        "correct": scheme.correct,
        "clip": None if scheme.clip is None else [str(v) for v in scheme.clip],
        "fingerprint": scheme.fingerprint,
    }


def run(args) -> int:
    scheme = scheme_from_args(args)
    facts = front_end_facts(scheme)
    if args.json:
        print(json.dumps(facts, indent=2))
        return 0
    print(f"scheme   {facts['scheme']}" + (f"  -  {facts['about']}" if facts["about"] else ""))
    print(f"time     {facts['time']}")
    print(f"stencil  offsets {facts['offsets']} (upwind frame), halo {facts['halo']}")
    for name, p in facts["params"].items():
        print(f"param    {name} = {p['exact']}")
    for name, lim in facts["limiters"].items():
        print(f"limiter  {name}(r) = {lim['psi']}")
    print(f"flux     {facts['flux']}")
    return 0
