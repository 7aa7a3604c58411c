"""The fuzz harness: it must see every kind of escape, and fluxloom must show none.

The harness is tested like verify: fed misbehaving runs (a probe stage that hangs,
dies, runs out of memory, raises, or reports without a place), it must call each one
an escape. Then a few thousand generated inputs go through the front end, and a few
hundred through `fluxloom check`, each in a worker process under a time and memory
limit: every one must end in success or a located error with exit status 2.
`python -m fluxloom.runtime.fuzz` runs any number (DEVELOPERS.md).
"""
from __future__ import annotations

import random

import pytest

from fluxloom.runtime.fuzz import driver
from fluxloom.runtime.fuzz.inputs import KINDS, make_input, seed_corpus, tokens
from fluxloom.runtime.fuzz.outcome import classify


def test_the_harness_calls_every_misbehaviour_an_escape():
    probes = [b"spin", b"exit", b"allocate", b"raise", b"unlocated", b"located", b"fine"]
    summary = driver.run("probe", inputs=[("probe", p) for p in probes], timeout=2,
                         memory_mb=1024)
    by_index = {e.index: e.outcome for e in summary.escapes}
    assert by_index == {0: "timeout", 1: "crash", 2: "memory", 3: "internal", 4: "unlocated"}
    assert "CPU time limit" in summary.escapes[0].why
    assert summary.outcomes["located"] == 1 and summary.outcomes["ok"] == 1
    assert summary.tried == len(probes) and summary.escaped == 5


def test_a_silent_worker_is_killed_on_the_wall_clock():
    # sleeping uses no CPU time: only the driver's wall-clock net catches it
    summary = driver.run("probe", inputs=[("probe", b"sleep"), ("probe", b"fine")], timeout=5,
                         wall=3)
    assert [e.outcome for e in summary.escapes] == ["timeout"]
    assert summary.outcomes["ok"] == 1


def test_the_classifier_checks_the_quoted_line_and_the_caret():
    data = b'scheme a {\n  about "x\x0cy"\n  flux = u * kapa\n}\n'
    good = "f.loom:3:14: error: unknown name 'kapa'\n    flux = u * kapa\n               ^~~~"
    assert classify(2, good, "f.loom", data) == ("located", "")
    # what str.splitlines() would have quoted: the line after the form feed's break
    shifted = good.replace("    flux = u * kapa", '  y"')
    assert classify(2, shifted, "f.loom", data)[0] == "misplaced"
    assert classify(2, good.replace("   ^~~~", "  ^~~~"), "f.loom", data)[0] == "misplaced"
    assert classify(2, good.replace(":3:14:", ":9:14:"), "f.loom", data)[0] == "misplaced"
    assert classify(2, "f.loom: error: no place", "f.loom", data)[0] == "unlocated"
    assert classify(3, "fluxloom: internal error: KeyError", "f.loom", data)[0] == "internal"
    assert classify(None, "", "f.loom", data)[0] == "timeout"
    assert classify(0, "Traceback (most recent call last):", "f.loom", data)[0] == "traceback"


def test_inputs_are_reproducible_and_of_every_kind():
    corpus = seed_corpus()
    first = [make_input(5, i, corpus) for i in range(300)]
    assert first == [make_input(5, i, corpus) for i in range(300)]
    assert {kind for kind, _ in first} == set(KINDS)
    assert len({data for _, data in first}) > 280


def test_tokens_cut_where_the_grammar_cuts():
    # every character belongs to exactly one token, so mutations keep the rest intact
    text = 'scheme s {\n  about "a # b"  # note\n  flux = u * (q[-1] + 2.5e3)\n}\n'
    cut = tokens(text)
    assert "".join(cut) == text
    assert '"a # b"' in cut and "# note" in cut and "2.5e3" in cut and "scheme" in cut


def test_random_text_is_cut_losslessly():
    rng = random.Random(3)
    for _ in range(200):
        text = "".join(chr(rng.randint(0, 0x3000)) for _ in range(rng.randint(0, 60)))
        assert "".join(tokens(text)) == text


def test_thousands_of_inputs_through_the_front_end_escape_nothing():
    summary = driver.run("front", count=2000, seed=20260101, timeout=20, memory_mb=1024)
    assert summary.tried == 2000
    assert summary.escapes == [], [(e.index, e.outcome, e.why) for e in summary.escapes]
    assert summary.outcomes["ok"] > 100 and summary.outcomes["located"] > 1000


@pytest.mark.slow
def test_hundreds_of_inputs_through_check_escape_nothing():
    summary = driver.run("check", count=300, seed=20260102, timeout=30, memory_mb=1024)
    assert summary.escapes == [], [(e.index, e.outcome, e.why) for e in summary.escapes]
    assert summary.outcomes["ok"] > 20
