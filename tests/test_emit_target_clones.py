"""The AVX2 clone of a step computes the same bits as the baseline build."""
from __future__ import annotations

import subprocess
from pathlib import Path

from fluxloom.compiler import load_scheme
from fluxloom.compiler.emit import c_files

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"

DRIVER = r"""
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include "lw_vanleer.h"
int main(void)
{
    const size_t n = 3000, h = lw_vanleer_HALO;
    double *q = malloc((n + 2 * h) * sizeof *q), *out = malloc((n + 2 * h) * sizeof *out);
    double *u = malloc((n + 1) * sizeof *u);
    double *work = malloc(lw_vanleer_workspace_size(n) * sizeof *work);
    for (size_t i = 0; i < n + 2 * h; ++i) q[i] = sin(0.01 * (double)i) + (i % 300 < 90);
    for (size_t i = 0; i <= n; ++i) u[i] = 0.3 + sin(0.004 * (double)i);
    lw_vanleer_step(n, q, out, u, 0.9, work);
    for (size_t i = h; i < n + h; i += 7) printf("%a\n", out[i]);
    free(q); free(out); free(u); free(work);
    return 0;
}
"""


def test_target_clones_match_the_baseline_bit_for_bit(tmp_path):
    # The clone differs only in instruction set (no FMA contraction: gcc's "avx2" target
    # does not enable FMA), so IEEE arithmetic gives identical bits (common practice, no source).
    for name, text in c_files(load_scheme(EXAMPLES / "lw_vanleer.loom"), "double").items():
        (tmp_path / name).write_text(text)
    (tmp_path / "driver.c").write_text(DRIVER)
    outputs = []
    for extra in ([], ["-DFLUXLOOM_NO_TARGET_CLONES"]):
        exe = tmp_path / f"driver{len(extra)}"
        subprocess.run(["gcc", "-std=c99", "-O2", *extra, "-o", str(exe), str(tmp_path / "driver.c"),
                        str(tmp_path / "lw_vanleer.c"), "-lm"], check=True, cwd=tmp_path)
        outputs.append(subprocess.run([str(exe)], check=True, capture_output=True, text=True).stdout)
    assert outputs[0] == outputs[1]
    assert len(outputs[0].splitlines()) > 400
    assert "target_clones" in (tmp_path / "lw_vanleer.c").read_text()
