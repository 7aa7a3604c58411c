"""Specs the fuzz harness once saw escape (internal errors), each now analysed.

The verdicts are held against Sweby's region (Sweby 1984, "High resolution schemes
using flux limiters for hyperbolic conservation laws", SINUM 21: psi = 0 for r <= 0
and 0 <= psi <= min(2r, 2) for r > 0), not against fluxloom's own output.
"""
from __future__ import annotations

from fluxloom.compiler import scheme_from_text
from fluxloom.compiler.analysis import analyse


def facts(limiter: str):
    scheme = scheme_from_text(f"scheme f {{\n  limiter psi(r) = {limiter}\n"
                              "  let r = ratio(q[0] - q[-1], q[1] - q[0])\n"
                              "  flux = u * (q[0] + (1 - c) / 2 * psi(r) * (q[1] - q[0]))\n}\n")
    (found,) = analyse(scheme).limiters
    return found


def test_a_limiter_with_a_pole_at_zero_is_outside_the_region():
    # 10 / r^2 (0 at r = 0 through ratio) exceeds min(2r, 2) near r = 0: not TVD.
    found = facts("ratio(10, r * r)")
    assert found.sweby_tvd is False and found.second_order_region is False


def test_a_limiter_through_ratio_is_sampled_without_errors():
    # sqrt(ratio(ratio(r, r), 1/2)) is sqrt(2) for every r != 0: nonzero for r < 0,
    # so outside the region.
    found = facts("sqrt(ratio(ratio(r, r), 1/2))")
    assert found.sweby_tvd is False


def test_a_face_with_no_real_value_at_some_states_is_not_called_upwind_biased():
    # sqrt of a negative cell value has no real value (common practice, no source): the
    # property checks of the upwind form meet it and must answer "not shown", not crash.
    from fluxloom.compiler.analysis.upwind_form import upwind_form

    scheme = scheme_from_text("scheme h2 {\n  let r = ratio(q[0] - q[-1], q[1] - q[0])\n"
                              "  flux = u * (q[0] + (abs(max(sqrt(q[0]), c, (q[0] * r)^2)))^2)\n}\n")
    assert upwind_form(scheme) is None
    assert analyse(scheme).tvd is not None


def test_limiters_with_constants_outside_the_rational_field_are_sampled():
    # Two bodies the fuzz harness saw end in internal errors: one whose Courant analysis
    # meets constants outside the rational field, one with an integer past 64 bits under
    # sqrt. Both are >= 5 or > 0 somewhere in r < 0, so outside Sweby's region (psi = 0
    # for r <= 0 and psi <= 2 there).
    found = facts("max(min(5. * 0.5, (0.5)), 5. + 2 / 1e3, ratio(r, r) - r + 1/2)")
    assert found.sweby_tvd is False
    found = facts("(1e-3 / 12 - min(r, 1 / sqrt(123456789012345678901234567890)))^2")
    assert found.sweby_tvd is False
