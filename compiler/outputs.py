"""Generated files as `build` writes them: the analysis verdicts worded for the banner,
handed to the emitters as data (the emitters never run the analysis).
"""
from __future__ import annotations

from .emit.targets import files_for
from .ir import Scheme
from .keyed import fingerprint_cache


@fingerprint_cache()
def verdict_lines(scheme: Scheme) -> tuple[str, ...]:
    """The verdicts worded as in `check` and every report (compiler/analysis/wording.py)."""
    from .analysis import analyse
    from .analysis.claims import read_claims
    from .analysis.wording import verdict_lines as worded

    try:
        claims = read_claims(analyse(scheme).to_json())
    except Exception as err:  # the kernel is still correct; say what happened
        return (f"analysis: failed ({type(err).__name__})",)
    return worded(claims)


def target_files(scheme: Scheme, target: str, precision: str = "double",
                 verdicts: bool = True, **options) -> dict[str, str]:
    """{file name: text} of `build --target target`; verdicts=False leaves the analysis out;
    options go to the targets that take them (c: openmp)."""
    return files_for(target, scheme, precision, verdict_lines(scheme) if verdicts else (),
                     **options)
