"""Every example analyses; the JSON document has the promised shape; the
command line behaves; Godunov's barrier holds over all examples."""
from __future__ import annotations

import json

import pytest
import sympy

from fluxloom.compiler import LoomError, load_scheme, scheme_from_text
from fluxloom.compiler.analysis import analyse, check_low_flux
from fluxloom.runtime.cli import main

from conftest import EXAMPLE_FILES, EXAMPLES
import reference_values as ref

REQUIRED = {"scheme", "time", "halo", "consistent", "order", "modified_equation", "stability",
            "conservative", "convergent", "monotone", "limiters", "tvd"}


def test_every_example_analyses(example_path):
    doc = analyse(load_scheme(example_path)).to_json()
    assert REQUIRED <= set(doc)
    assert set(doc["order"]) >= {"space", "time", "overall"}
    assert doc["stability"]["kind"] in ("unconditional", "conditional", "unstable", None)
    if doc["stability"]["kind"] is None:  # a nonlinear scheme proven stable on no interval
        assert doc["stability"]["outside"] == "no claim" and doc["stability"]["stand_ins"]
        assert any(u.startswith("stability") for u in doc["undecided"])
    assert set(doc["convergent"]) >= {"holds", "courant_min", "courant_max"}
    assert set(doc["monotone"]) >= {"holds", "courant_max"}
    assert set(doc["tvd"]) >= {"holds", "courant_min", "courant_max"}
    for lim in doc["limiters"].values():
        assert set(lim) >= {"psi_at_1", "sweby_tvd", "second_order_region", "symmetric"}
    for term in doc["modified_equation"]:
        assert set(term) >= {"derivative", "coefficient"}
        sympy.sympify(term["coefficient"])  # an exact expression sympy reads back
    json.loads(json.dumps(doc))  # plain JSON: numbers, strings, bools, null


def test_godunov_barrier_over_all_examples():
    # reference_values.GODUNOV_BARRIER (Godunov 1959 [mem]): a linear monotone scheme is at
    # most first order. No example found monotone on an interval may claim more.
    found_monotone = []
    for path in EXAMPLE_FILES:
        doc = analyse(load_scheme(path)).to_json()
        mono = doc["monotone"]
        # monotone on an interval; at isolated Courant numbers (c = 1, an exact shift) a
        # scheme may be monotone and exact, which the theorem does not exclude
        if doc["linear"] and mono["holds"] and mono["courant_min"] < mono["courant_max"]:
            found_monotone.append(path.stem)
            assert doc["order"]["overall"] <= 1, path.stem
    assert {"upwind", "lax_friedrichs", "upwind_rk3"} <= set(found_monotone)


@pytest.mark.parametrize("stem", sorted(ref.MONOTONE_INTERVAL))
def test_monotone_intervals(stem):
    # reference_values.MONOTONE_INTERVAL: every update coefficient >= 0 (LeVeque 2002 [mem]).
    doc = analyse(load_scheme(EXAMPLES / f"{stem}.loom")).to_json()["monotone"]
    assert doc["holds"] and (doc["courant_min"], doc["courant_max"]) == ref.MONOTONE_INTERVAL[stem].value


def test_lax_wendroff_not_monotone():
    # reference_values.LAX_WENDROFF_DOWNWIND_COEFFICIENT: a_{+1} = -c(1 - c)/2 < 0 (Godunov
    # 1959 [mem]); monotone only at c = 1, the exact shift (an island, not an interval).
    doc = analyse(load_scheme(EXAMPLES / "lax_wendroff.loom")).to_json()["monotone"]
    assert doc["holds"] is False
    assert [(i["courant_min"], i["courant_max"]) for i in doc["islands"]] == [(1.0, 1.0)]
    c = sympy.Symbol("c", nonnegative=True)
    expected = ref.LAX_WENDROFF_DOWNWIND_COEFFICIENT.expr(c=c)
    assert sympy.simplify(sympy.sympify(doc["coefficients"]["1"], locals={"c": c}) - expected) == 0


def test_conservation_and_its_sources(example_path):
    scheme = load_scheme(example_path)
    doc = analyse(scheme).to_json()
    if scheme.clip is not None:
        assert doc["conservative"] is False
        assert doc["conservation"]["source"] == "clip"
        assert "post-step clamp" in doc["conservation"]["reason"]
        assert doc["bounds"]["bounded"] is True and doc["verdict_sources"]["bounded"] == "clip"
    else:
        assert doc["conservative"] is True


def test_clip_keeps_the_scheme_verdicts():
    plain = analyse(load_scheme(EXAMPLES / "lax_wendroff.loom")).to_json()
    clipped = analyse(load_scheme(EXAMPLES / "lw_clip.loom")).to_json()
    assert clipped["stability"]["courant_max"] == plain["stability"]["courant_max"]
    assert clipped["order"]["overall"] == plain["order"]["overall"]
    assert clipped["verdict_sources"]["stability"] == "scheme"
    assert clipped["verdict_sources"]["conservative"] == "clip"


def test_fct_verdicts():
    # Zalesak 1979, J. Comput. Phys. 31:335 [pub]: corrected fluxes telescope; bounded where
    # the low-order (upwind) step is monotone, 0 <= c <= 1 (its coefficients 1 - c and c).
    doc = analyse(load_scheme(EXAMPLES / "lw_fct.loom")).to_json()
    assert doc["conservative"] is True and doc["conservation"]["source"] == "fct"
    assert doc["bounds"]["kind"] == "fct"
    assert doc["bounded"]["holds"] is True
    assert (doc["bounded"]["courant_min"], doc["bounded"]["courant_max"]) == (0, 1)
    assert doc["order"]["overall"] == 2 and "correction bites" in doc["order"]["note"]


FCT_BAD_LOW = """scheme bad {
  time euler
  low_flux = u * (q[0] + q[1]) / 2
  flux = u * (q[0] + (1 - c) / 2 * (q[1] - q[0]))
  correct fct
}"""


def test_fct_with_a_low_flux_monotone_nowhere_is_an_error(tmp_path):
    # The centred flux with forward Euler has coefficient -c/2 on q[j+1] (never monotone).
    with pytest.raises(LoomError, match="monotone at no Courant number"):
        check_low_flux(scheme_from_text(FCT_BAD_LOW))
    path = tmp_path / "bad.loom"
    path.write_text(FCT_BAD_LOW)
    with pytest.raises(LoomError) as err:
        analyse(load_scheme(path))
    assert err.value.span is not None and err.value.span.line == 3
    assert main(["check", str(path)]) == 2


def test_check_json_and_exit_status(capsys):
    assert main(["check", str(EXAMPLES / "upwind.loom"), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["stability"]["courant_max"] == 1.0
    assert doc["stability"]["courant_max_exact"] == "1"
    # An unstable scheme is a finding, not an error.
    assert main(["check", str(EXAMPLES / "ftcs.loom")]) == 0
    out = capsys.readouterr().out
    assert "stability     unstable" in out


@pytest.mark.parametrize("value", ["0", "-1", "abc", "nan"])
def test_bad_courant_is_bad_input(value, capsys):
    assert main(["check", str(EXAMPLES / "upwind.loom"), "--courant", value]) == 2
    assert "--courant" in capsys.readouterr().err


def test_set_overrides_reach_the_analysis(capsys):
    # kappa = -1 with SSP-RK3: reference_values.MOL_LIMIT [derived].
    assert main(["check", str(EXAMPLES / "kappa_rk3.loom"), "--set", "kappa=-1", "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    limit = ref.MOL_LIMIT[("kappa=-1", "ssp_rk3")].value
    assert abs(doc["stability"]["courant_max"] - limit) < ref.MOL_LIMIT_TOLERANCE
    assert main(["check", str(EXAMPLES / "kappa_rk3.loom"), "--set", "kapa=0"]) == 2


def test_dispersion_table_at_requested_courant():
    # Upwind at c = 1 is the exact shift: |G| = 1 and no phase error at any resolution
    # (common practice, no source).
    doc = analyse(load_scheme(EXAMPLES / "upwind.loom"), courant=1.0).to_json()["dispersion"]
    assert [r["cells_per_wavelength"] for r in doc["rows"]] == [4, 8, 16, 32]
    for row in doc["rows"]:
        assert abs(row["amplitude_per_step"] - 1) < 1e-12
        assert abs(row["phase_error_per_step"]) < 1e-12


def test_numeric_path_agrees_with_exact_path():
    # The numeric fallback (theta grid + bisection, tolerance 1e-5 stated) against the exact
    # sympy path on schemes where both run: the limits must agree to the stated tolerance.
    from fluxloom.compiler.analysis.stability import NUMERIC_TOLERANCE, numeric_set, stable_set
    from fluxloom.compiler.analysis.symbol import linearise

    for stem in ("kappa_rk3", "beam_warming", "upwind_rk3"):
        linear = linearise(load_scheme(EXAMPLES / f"{stem}.loom")).smooth[0]
        exact, numeric = stable_set(linear), numeric_set(linear)
        assert exact.tolerance is None and numeric.tolerance == NUMERIC_TOLERANCE
        assert abs(float(exact.main.hi) - float(numeric.main.hi)) <= 2 * NUMERIC_TOLERANCE, stem


ODD_SPECS = {
    # A face whose derivatives grow without bound on smooth data (1 / (q[1] - q[0])): no
    # linear scheme stands for it, so the linear analysis is undecided, never guessed.
    "unbounded_face": ("scheme odd {\n  flux = u * (q[0] + 1 / (q[1] - q[0]))\n}", "undecided"),
    # A face nonlinear without a named limiter and kinked at constant states: linearised on
    # smooth monotone data, one linear scheme for increasing and one for decreasing data.
    "abs_face": ("scheme odd {\n  flux = u * (q[0] + abs(q[1] - q[0]) / 4)\n}", "smooth"),
    # A param that is not rational: the numeric stability path, tolerance stated.
    "irrational_param": ("scheme odd {\n  param k = sqrt(2)/4\n  time ssp_rk3\n"
                         "  flux = u * (q[0] + k * (q[1] - q[0]))\n}", "numeric"),
    # A limiter that is not piecewise rational: sampled, and the method says so.
    "sqrt_limiter": ("scheme odd {\n  let r = ratio(q[0] - q[-1], q[1] - q[0])\n"
                     "  limiter s(r) = max(0, min(sqrt(abs(r)), 2))\n"
                     "  flux = u * (q[0] + (1 - c) / 2 * s(r) * (q[1] - q[0]))\n}", "sampled"),
    # c in a denominator of the face.
    "c_denominator": ("scheme odd {\n  flux = u * (q[0] + (1 - c) / (2 * (1 + c)) * (q[1] - q[0]))\n}",
                      "exact"),
}


@pytest.mark.parametrize("name", sorted(ODD_SPECS))
def test_unusual_schemes_analyse_and_say_how(name):
    text, how = ODD_SPECS[name]
    doc = analyse(scheme_from_text(text)).to_json()
    json.dumps(doc)
    if how == "undecided":
        assert doc["stability"]["kind"] is None and doc["undecided"]
        assert doc["linear"] is False and "no linearisation" in doc["linearisation"]
    elif how == "smooth":
        # q[0] + |q[1] - q[0]|/4 is q[0] + (q[1] - q[0])/4 on increasing data and
        # q[0] - (q[1] - q[0])/4 on decreasing data (common practice, no source). Their
        # forward-Euler limits come from G = 1 - c (1 - 1/z)(a + b z) scanned here with
        # numpy (1/2 and 2/3); the analysis reports the common interval, the smaller one.
        import numpy
        z = numpy.exp(1j * numpy.linspace(0, numpy.pi, 4001))

        def limit(a, b):
            cs = numpy.arange(1, 4001) / 2000
            ok = [numpy.max(numpy.abs(1 - c * (1 - 1 / z) * (a + b * z))) <= 1 + 1e-12 for c in cs]
            return cs[numpy.argmin(ok) - 1] if not all(ok) else None
        assert "smooth monotone data" in doc["linearisation"] and doc["linear"] is False
        labels = [sch["label"] for sch in doc["stability"]["schemes"]]
        assert len(labels) == 2 and all("monotone data" in x for x in labels)
        expected = min(limit(3 / 4, 1 / 4), limit(5 / 4, -1 / 4))
        # nothing is proven for the nonlinear face itself: its linearisations are reported
        # as stand-ins
        assert doc["stability"]["kind"] is None
        assert abs(doc["stability"]["stand_ins"]["courant_max"] - expected) <= 1e-3
    elif how == "numeric":
        assert doc["stability"]["method"].startswith("numeric") and doc["stability"]["tolerance"] <= 1e-4
    elif how == "sampled":
        (lim,) = doc["limiters"].values()
        assert lim["method"].startswith("sampled") and lim["sweby_tvd"] is False
    else:
        assert doc["stability"]["method"].startswith("exact")
        # G = 1 - c(1 - 1/z)(1 + k(z - 1)), k = (1 - c)/(2(1 + c)), evaluated directly with
        # numpy on a theta grid: |G| <= 1 just below c = 1 and > 1 just above.
        import numpy
        z = numpy.exp(1j * numpy.linspace(0, numpy.pi, 2001))

        def growth(c):
            k = (1 - c) / (2 * (1 + c))
            return numpy.max(numpy.abs(1 - c * (1 - 1 / z) * (1 + k * (z - 1))))
        assert growth(0.99) <= 1 + 1e-12 and growth(1.01) > 1
        assert doc["stability"]["courant_max"] == 1.0


def test_plots_are_written_and_foreign_files_kept(tmp_path):
    from fluxloom.runtime.analysis_plots import write_plots

    analysis = analyse(load_scheme(EXAMPLES / "lw_superbee.loom"))
    written = write_plots(analysis, tmp_path)
    assert len(written) == 4 and all(p.read_bytes().startswith(b"\x89PNG") for p in written)
    assert write_plots(analysis, tmp_path)  # our own files are replaced
    (tmp_path / "lw_superbee_amplification.png").write_bytes(b"someone else's")
    with pytest.raises(LoomError, match="--force"):
        write_plots(analysis, tmp_path)
    assert write_plots(analysis, tmp_path, force=True)


def test_unconditional_and_inconsistent_shift():
    # flux = u q[0] / c moves every value one cell per step whatever c is: |G| = 1 for all c
    # (unconditionally stable) but consistent only at c = 1, so not convergent (common
    # practice, no source).
    doc = analyse(scheme_from_text("scheme shift {\n  flux = u * q[0] / c\n}")).to_json()
    assert doc["stability"]["kind"] == "unconditional"
    assert doc["stability"]["courant_max"] is None
    assert doc["stability"]["courant_max_exact"] == "oo"
    assert doc["consistent"] is False and doc["convergent"]["holds"] is False
