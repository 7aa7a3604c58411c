"""Published check values the tests hold fluxloom against, each beside its source.

Every test that compares with a published or independently derived value reads it
from here; nothing is read from outside the repository. Each value carries flags:

  pub      seen stated in the published material named;
  mem      the citation is recalled from memory (the value itself is also derived);
  derived  recomputed independently (numpy/sympy, by a method other than fluxloom's);
           a test may re-derive it the same way as its reference.

Notation: linear advection q_t + u q_x = 0, u > 0, Courant number c = u dt/dx,
theta = k dx, s = sin^2(theta/2). Modified equation q_t + u q_x = sum a_m d^m q/dx^m.
Expressions are sympy-readable text in u, dx, c, s, y, r and theta.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy


@dataclass(frozen=True)
class Value:
    value: object
    source: str
    flags: tuple[str, ...]

    def expr(self, **symbols) -> sympy.Expr:
        """The value as a sympy expression, the names bound to the given symbols."""
        return sympy.sympify(self.value, locals=symbols)


LEVEQUE = "LeVeque 2002, Finite Volume Methods for Hyperbolic Problems, sec. 8.6"
WARMING_HYETT = "Warming and Hyett 1974, J. Comput. Phys. 14:159"
WARMING_BEAM = "Warming and Beam 1976, AIAA J. 14:1241"
FROMM = "Fromm 1968, J. Comput. Phys. 3:176"
LEONARD = "Leonard 1979, Comput. Methods Appl. Mech. Eng. 19:59"
SWEBY = "Sweby 1984, SIAM J. Numer. Anal. 21:995"
HARTEN = "Harten 1983, J. Comput. Phys. 49:357"
GODUNOV = "Godunov 1959, Mat. Sb. 47:271"
ZALESAK = "Zalesak 1979, J. Comput. Phys. 31:335"
SHU_OSHER = "Shu and Osher 1988, J. Comput. Phys. 77:439"
GOTTLIEB_SHU_TADMOR = ("Gottlieb and Shu 1998, Math. Comp. 67:73; Gottlieb, Shu and Tadmor 2001, "
                       "SIAM Rev. 43:89")
BALDAUF = "Baldauf 2008, J. Comput. Phys. 227:6638 (tables of such limits)"
ARORA_ROE = "Arora and Roe 1997, J. Comput. Phys. 132:3"
WILLIAMSON = "Williamson et al. 1992, J. Comput. Phys. 102:211"
BANKS = "Banks, Aslam and Rider 2008, J. Comput. Phys. 227:6985"


# ---- single-step schemes ---------------------------------------------------------------

STABLE_INTERVAL = {  # (lo, hi) of c, both ends included
    "upwind": Value((0, 1), WARMING_HYETT, ("mem", "derived")),
    "lax_wendroff": Value((0, 1), LEVEQUE, ("mem", "derived")),
    "beam_warming": Value((0, 2), f"{WARMING_BEAM}; {LEVEQUE}", ("mem", "derived")),
    "fromm": Value((0, 1), FROMM, ("mem", "derived")),
    "lax_friedrichs": Value((0, 1), LEVEQUE, ("mem", "derived")),
    "quickest": Value((0, 1), LEONARD, ("mem", "derived")),
}
QUICKEST_ISLAND = Value(2, f"{LEONARD}: stable again at c = 2 exactly, G = z^-2 (a shift by two "
                           "cells)", ("mem", "derived"))
FTCS_UNSTABLE = Value("|G| > 1 for every c > 0", "von Neumann analysis, common practice",
                      ("derived",))

ORDER = {
    "upwind": Value(1, WARMING_HYETT, ("mem", "derived")),
    "lax_wendroff": Value(2, LEVEQUE, ("mem", "derived")),
    "beam_warming": Value(2, WARMING_BEAM, ("mem", "derived")),
    "fromm": Value(2, FROMM, ("mem", "derived")),
    "lax_friedrichs": Value(1, LEVEQUE, ("mem", "derived")),
    "quickest": Value(3, LEONARD, ("mem", "derived")),
}
FROMM_ORDER_AT_HALF = Value(3, f"{FROMM}: a3 = (u dx^2/12)(1 - c)(1 - 2c) vanishes at c = 1/2",
                            ("mem", "derived"))
FTCS_ORDERS = Value({"space": 2, "time": 1, "overall": 1},
                    "von Neumann / modified equation, common practice", ("derived",))

MODIFIED_EQUATION = {  # (scheme, m) -> a_m
    ("upwind", 2): Value("u*dx/2*(1 - c)", WARMING_HYETT, ("mem", "derived")),
    ("upwind", 3): Value("-u*dx**2/6*(1 - c)*(1 - 2*c)", WARMING_HYETT, ("mem", "derived")),
    ("upwind", 4): Value("u*dx**3/24*(1 - 7*c + 12*c**2 - 6*c**3)", WARMING_HYETT,
                         ("mem", "derived")),
    ("lax_wendroff", 3): Value("-u*dx**2/6*(1 - c**2)", LEVEQUE, ("mem", "derived")),
    ("lax_wendroff", 4): Value("-u*dx**3/8*c*(1 - c**2)", LEVEQUE, ("mem", "derived")),
    ("beam_warming", 3): Value("u*dx**2/6*(2 - 3*c + c**2)", f"{WARMING_BEAM}; {LEVEQUE}",
                               ("mem", "derived")),
    ("beam_warming", 4): Value("-u*dx**3/8*(2 - c)*(1 - c)**2", f"{WARMING_BEAM}; {LEVEQUE}",
                               ("mem", "derived")),
    ("fromm", 3): Value("u*dx**2/12*(1 - c)*(1 - 2*c)", FROMM, ("mem", "derived")),
    ("lax_friedrichs", 2): Value("u*dx/(2*c)*(1 - c**2)", LEVEQUE, ("mem", "derived")),
    # The sign of a3 was misprinted in an earlier list and is corrected here: the series of
    # arg G = -atan(c tan(theta)) gives +.
    ("lax_friedrichs", 3): Value("u*dx**2/3*(1 - c**2)", LEVEQUE + " (sign corrected)",
                                 ("mem", "derived")),
    ("ftcs", 2): Value("-u*dx*c/2", "von Neumann / modified equation, common practice",
                       ("derived",)),
    ("quickest", 4): Value("-u*dx**3/24*(1 - c)*(2 - c)*(1 + c)", LEONARD, ("mem", "derived")),
}
QUICKEST_NO_LOW_TERMS = Value("no q_xx and no q_xxx term", LEONARD, ("mem", "derived"))

ABS_G_SQUARED = {  # |G|^2 in s = sin^2(theta/2)
    "upwind": Value("1 - 4*c*(1 - c)*s", "von Neumann analysis, common practice", ("derived",)),
    "lax_wendroff": Value("1 - 4*c**2*(1 - c**2)*s**2", LEVEQUE, ("pub",)),
    "ftcs": Value("1 + 4*c**2*s*(1 - s)", "von Neumann analysis: 1 + c^2 sin^2(theta)", ("pub",)),
}
BEAM_WARMING_G = Value("1 - c*(1 - 1/z)*(3 - c)/2 + c*(1 - c)/2*(1 - 1/z)/z",
                       f"{WARMING_BEAM}; {LEVEQUE}: G written out, z = exp(i theta)",
                       ("mem", "derived"))
LAX_FRIEDRICHS_G = Value("cos(theta) - I*c*sin(theta)", LEVEQUE, ("mem", "derived"))
QUICKEST_FACE = Value("(q0 + q1)/2 - c/2*(q1 - q0) - (1 - c**2)/6*(q1 - 2*q0 + qm1)", LEONARD,
                      ("mem",))

MONOTONE_INTERVAL = {
    "upwind": Value((0, 1), f"{GODUNOV}; coefficients (1 - c, c), {LEVEQUE}", ("mem", "derived")),
    "lax_friedrichs": Value((0, 1), f"coefficients ((1 + c)/2, (1 - c)/2), {LEVEQUE}",
                            ("mem", "derived")),
}
LAX_WENDROFF_DOWNWIND_COEFFICIENT = Value("-c*(1 - c)/2", f"{GODUNOV}; {LEVEQUE}",
                                          ("mem", "derived"))
GODUNOV_BARRIER = Value("a monotone linear scheme is at most first order", GODUNOV, ("mem",))


# ---- Runge-Kutta methods ------------------------------------------------------------------

IMAGINARY_AXIS_ABS_R_SQUARED = {  # |R(iy)|^2
    "euler": Value("1 + y**2", "common practice", ("derived",)),
    "ssp_rk2": Value("1 + y**4/4", GOTTLIEB_SHU_TADMOR, ("mem", "derived")),
    "ssp_rk3": Value("1 - y**4/12 + y**6/36", GOTTLIEB_SHU_TADMOR, ("mem", "derived")),
    "rk4": Value("1 - y**6/72 + y**8/576", "common practice", ("derived",)),
    # every three-stage method of linear order 3 has SSP-RK3's R(z)
    "ws_rk3": Value("1 - y**4/12 + y**6/36", "Wicker and Skamarock 2002, Mon. Wea. Rev. 130:2088",
                    ("mem", "derived")),
}
IMAGINARY_AXIS_LIMIT = {
    "euler": Value("0", GOTTLIEB_SHU_TADMOR, ("mem", "derived")),
    "ssp_rk2": Value("0", GOTTLIEB_SHU_TADMOR, ("mem", "derived")),
    "ssp_rk3": Value("sqrt(3)", GOTTLIEB_SHU_TADMOR, ("mem", "derived")),
    "rk4": Value("2*sqrt(2)", GOTTLIEB_SHU_TADMOR, ("mem", "derived")),
    "ws_rk3": Value("sqrt(3)", "Wicker and Skamarock 2002, Mon. Wea. Rev. 130:2088",
                    ("mem", "derived")),
}
KETCHESON = "Ketcheson 2008, SIAM J. Sci. Comput. 30:2113"
WICKER_SKAMAROCK = "Wicker and Skamarock 2002, Mon. Wea. Rev. 130:2088"
SSP_COEFFICIENT = {  # 0: not strong-stability preserving
    "euler": Value(1, "forward Euler is the step SSP methods are built from; common practice",
                   ("derived",)),
    "ssp_rk2": Value(1, f"{SHU_OSHER}; {GOTTLIEB_SHU_TADMOR}", ("mem",)),
    "ssp_rk3": Value(1, SHU_OSHER, ("mem",)),
    "rk4": Value(0, f"Kraaijevanger 1991, BIT 31:482; {GOTTLIEB_SHU_TADMOR}: classical RK4 is "
                 "not SSP", ("mem",)),
    "ssp_rk10_4": Value(6, KETCHESON, ("mem",)),
    "ws_rk3": Value(0, "by hand: K (I + rK)^-1 has the entry -r/6 (q** reads q* with weight "
                    "1/2, q* reads L(q) with 1/3, q** has no L(q) of its own), negative for "
                    "every r > 0", ("derived",)),
}
CLASSICAL_ORDER = {
    "euler": Value(1, "common practice", ("derived",)),
    "ssp_rk2": Value(2, SHU_OSHER, ("mem",)),
    "ssp_rk3": Value(3, SHU_OSHER, ("mem",)),
    "rk4": Value(4, "Kutta 1901; common practice", ("mem",)),
    "ws_rk3": Value(2, f"{WICKER_SKAMAROCK}: third order only on linear problems", ("mem",)),
    "ssp_rk10_4": Value(4, KETCHESON, ("mem",)),
}
LINEAR_ORDER = {
    "euler": Value(1, "common practice", ("derived",)),
    "ssp_rk2": Value(2, SHU_OSHER, ("mem",)),
    "ssp_rk3": Value(3, SHU_OSHER, ("mem",)),
    "rk4": Value(4, "common practice", ("derived",)),
    "ws_rk3": Value(3, WICKER_SKAMAROCK, ("mem",)),
    "ssp_rk10_4": Value(4, KETCHESON, ("mem",)),
}
ROOTED_TREES = Value((1, 1, 2, 4, 9, 20, 48, 115), "Cayley 1857; OEIS A000081 (rooted trees "
                     "with n vertices)", ("mem",))
SSP_RK3_STAGES = Value("q1 = q + dt L(q); q2 = 3/4 q + 1/4 q1 + 1/4 dt L(q1); "
                       "q(new) = 1/3 q + 2/3 q2 + 2/3 dt L(q2)", SHU_OSHER, ("mem",))

# Largest stable Courant number of a method-of-lines scheme: bisection on the max over
# theta of |R(-c S(theta))| <= 1 with 4001 theta points. Tolerance about 1e-3.
MOL_LIMIT_TOLERANCE = 1e-3
MOL_LIMIT = {  # (space discretisation, method) -> largest stable c
    ("upwind", "ssp_rk2"): Value(1.0, BALDAUF, ("mem", "derived")),
    ("upwind", "ssp_rk3"): Value(1.2564, BALDAUF, ("mem", "derived")),
    ("upwind", "rk4"): Value(1.3926, BALDAUF, ("mem", "derived")),
    ("centred", "ssp_rk3"): Value(3 ** 0.5, BALDAUF, ("mem", "derived")),
    ("centred", "rk4"): Value(2 * 2 ** 0.5, BALDAUF, ("mem", "derived")),
    ("kappa=1/3", "ssp_rk2"): Value(0.8736, BALDAUF, ("mem", "derived")),
    ("kappa=1/3", "ssp_rk3"): Value(1.6259, BALDAUF, ("mem", "derived")),
    ("kappa=1/3", "rk4"): Value(1.7453, BALDAUF, ("mem", "derived")),
    ("kappa=0", "ssp_rk2"): Value(1.0, BALDAUF, ("mem", "derived")),
    ("kappa=0", "ssp_rk3"): Value(1.1758, BALDAUF, ("mem", "derived")),
    ("kappa=0", "rk4"): Value(1.3846, BALDAUF, ("mem", "derived")),
    ("kappa=-1", "ssp_rk2"): Value(0.5, BALDAUF, ("mem", "derived")),
    ("kappa=-1", "ssp_rk3"): Value(0.6281, BALDAUF, ("mem", "derived")),
    ("kappa=-1", "rk4"): Value(0.6963, BALDAUF, ("mem", "derived")),
}
WENO5_LINEAR_FACE = Value({-2: "2/60", -1: "-13/60", 0: "47/60", 1: "27/60", 2: "-3/60"},
                          "Jiang and Shu 1996, J. Comput. Phys. 126:202, \"Efficient "
                          "implementation of weighted ENO schemes\": the ideal weights 1/10, "
                          "6/10, 3/10 combine the three parabolic face values into the "
                          "fifth-order upwind-biased face on q[-2..2]", ("mem", "derived"))
MOL_EULER_UNSTABLE = Value(("centred", "kappa=1/3", "kappa=0", "kappa=-1"),
                           "forward Euler with these method-of-lines operators", ("derived",))


# ---- flux limiters ------------------------------------------------------------------------

LIMITER = {  # psi(r)
    "minmod": Value("Max(0, Min(1, r))", "Roe 1986", ("mem",)),
    "superbee": Value("Max(0, Min(2*r, 1), Min(r, 2))", f"Roe 1986; {SWEBY}", ("mem",)),
    "vanleer": Value("(r + Abs(r))/(1 + Abs(r))", "van Leer 1974, J. Comput. Phys. 14:361",
                     ("mem",)),
    "mc": Value("Max(0, Min(2*r, (1 + r)/2, 2))", "van Leer 1977, J. Comput. Phys. 23:276",
                ("mem",)),
    "vanalbada": Value("Max(0, r)*(r + 1)/(r**2 + 1)",
                       "van Albada, van Leer and Roberts 1982, Astron. Astrophys. 108:76",
                       ("mem",)),
    "koren": Value("Max(0, Min(2*r, (1 + 2*r)/3, 2))", "Koren 1993", ("mem",)),
}
LIMITER_SYMMETRIC = {
    name: Value(name != "koren", f"{ARORA_ROE} (symmetry psi(r)/r = psi(1/r)) [pub]; table of "
                "limiters [mem]", ("pub", "mem")) for name in LIMITER
}
LIMITERS_IN_SWEBY_REGION = Value(tuple(LIMITER), f"{SWEBY}: all six lie in the TVD region and "
                                 "its second-order part, with psi(1) = 1", ("mem", "derived"))
LIMITER_SLOPES_AT_ONE = {  # (left, right) derivatives at r = 1
    "minmod": Value((1, 0), "from the published bodies, common practice", ("derived",)),
    "superbee": Value((0, 1), "from the published bodies, common practice", ("derived",)),
    "vanleer": Value(("1/2", "1/2"), "from the published bodies, common practice", ("derived",)),
    "mc": Value(("1/2", "1/2"), "from the published bodies, common practice", ("derived",)),
    "koren": Value(("2/3", "2/3"), "from the published bodies, common practice", ("derived",)),
}
VAN_ALBADA_PEAK = Value(("(1 + sqrt(2))/2", "1 + sqrt(2)", 1.2071),
                        "peak value and where (r), from the body", ("derived",))
SWEBY_REGION = Value("psi = 0 for r <= 0, 0 <= psi <= min(2r, 2); second-order part "
                     "min(r, 1) <= psi <= min(max(r, 1), 2r, 2), psi(1) = 1", SWEBY, ("mem",))
COURANT_REGION = Value("psi/r <= 2/c and psi <= 2/(1 - c), psi >= 0, psi = 0 for r <= 0, "
                       "for q(j+1/2) = q_j + (1 - c)/2 psi(r_j) (q_{j+1} - q_j), 0 <= c <= 1",
                       f"{SWEBY}; from Harten's C", ("mem", "derived"))
OVERREACH_TVD = Value(("Max(0, Min(3*r, 1), Min(r, 3))", ("1/3", "2/3")),
                      f"{SWEBY} conditions: TVD exactly for 1/3 <= c <= 2/3; a square wave at "
                      "c = 0.8 shows total variation growing", ("mem", "derived"))
LIMITED_LW_TVD = Value((0, 1), f"{SWEBY}: a limiter in the region makes flux-limited "
                       "Lax-Wendroff TVD for 0 <= c <= 1", ("mem", "derived"))
HARTEN_CONDITIONS = Value("q_j(new) = q_j - C_{j-1/2}(q_j - q_{j-1}) + D_{j+1/2}(q_{j+1} - q_j) "
                          "is TVD if C >= 0, D >= 0 and C + D <= 1 on each interface", HARTEN,
                          ("mem",))
LAX_FRIEDRICHS_HARTEN = Value(("(1 + c)/2", "(1 - c)/2"), f"{HARTEN}: C and D of Lax-Friedrichs",
                              ("mem", "derived"))


# ---- measured errors ----------------------------------------------------------------------

# For q = sin(2 pi x) on a periodic grid of N cells, after n steps the normalised l2 error
# of a linear scheme is exactly |G(theta)^n - exp(-i c theta n)|, theta = 2 pi / N; here
# c = 1/2 and one period (n = 2N), N = 20, 40, 80, 160.
EXACT_L2_CELLS = (20, 40, 80, 160)
EXACT_L2 = {
    "upwind": Value((0.3907478, 0.2188548, 0.1160915, 0.0598248),
                    "|G^n - exp(-i c theta n)|", ("derived",)),
    "lax_wendroff": Value((7.674288e-2, 1.934163e-2, 4.842749e-3, 1.211070e-3),
                          "|G^n - exp(-i c theta n)|", ("derived",)),
    "beam_warming": Value((7.674288e-2, 1.934163e-2, 4.842749e-3, 1.211070e-3),
                          "|G^n - exp(-i c theta n)| (= Lax-Wendroff at c = 1/2)", ("derived",)),
    "fromm": Value((9.017417e-3, 1.138527e-3, 1.426057e-4, 1.783369e-5),
                   "|G^n - exp(-i c theta n)|", ("derived",)),
}
NORMS = Value("l1 = sum|phi - f|/sum|f|; l2 = sqrt(sum (phi - f)^2)/sqrt(sum f^2); "
              "linf = max|phi - f|/max|f|", WILLIAMSON, ("mem",))
LIMITED_ORDER_ON_SINE = Value({"l1": 2, "linf": 1}, f"TVD limiters clip extrema ({SWEBY})",
                              ("mem",))
DISCONTINUITY_RATE = Value("p/(p + 1) in l1 for a p-th order linear scheme", BANKS, ("mem",))
FCT_BOUNDED = Value("no new extrema and sharper than the low-order solution on a square wave",
                    ZALESAK, ("pub",))


# ---- Runge-Kutta steps as their authors print them ------------------------------------------
# The time-method registry writes each method once, as a table, and derives everything else
# from it; these formulas are written from the publications in the authors' own arrangement
# and share nothing with the registry. operator(y) is dt L(y); ratio(a, b) builds a
# coefficient (Fraction for exact arithmetic, true division for floats).

from fractions import Fraction  # noqa: E402

PUBLISHED_STEPS = ("euler", "ssp_rk2", "ssp_rk3", "rk4", "ws_rk3", "ssp_rk10_4")


def published_step(name: str, q, operator, ratio=Fraction):
    if name == "euler":
        return q + operator(q)
    if name == "ssp_rk2":  # Heun as convex combinations (Shu and Osher 1988 [mem])
        q1 = q + operator(q)
        return ratio(1, 2) * q + ratio(1, 2) * (q1 + operator(q1))
    if name == "ssp_rk3":  # Shu and Osher 1988, J. Comput. Phys. 77:439 [mem]
        q1 = q + operator(q)
        q2 = ratio(3, 4) * q + ratio(1, 4) * q1 + ratio(1, 4) * operator(q1)
        return ratio(1, 3) * q + ratio(2, 3) * q2 + ratio(2, 3) * operator(q2)
    if name == "rk4":  # classical Runge-Kutta (Kutta 1901; common practice)
        k1 = operator(q)
        k2 = operator(q + ratio(1, 2) * k1)
        k3 = operator(q + ratio(1, 2) * k2)
        k4 = operator(q + k3)
        return q + ratio(1, 6) * (k1 + 2 * k2 + 2 * k3 + k4)
    if name == "ws_rk3":   # Wicker and Skamarock 2002, Mon. Wea. Rev. 130:2088 [mem]
        q_star = q + ratio(1, 3) * operator(q)
        q_star2 = q + ratio(1, 2) * operator(q_star)
        return q + operator(q_star2)
    if name == "ssp_rk10_4":  # Ketcheson 2008, SIAM J. Sci. Comput. 30:2113, the
        q1 = q2 = q           # two-register pseudo-code [mem]
        for _ in range(5):
            q1 = q1 + ratio(1, 6) * operator(q1)
        q2 = ratio(1, 25) * q2 + ratio(9, 25) * q1
        q1 = 15 * q2 - 5 * q1
        for _ in range(4):
            q1 = q1 + ratio(1, 6) * operator(q1)
        return q2 + ratio(3, 5) * q1 + ratio(1, 10) * operator(q1)
    raise KeyError(f"no published formula for {name!r} in the tests")
