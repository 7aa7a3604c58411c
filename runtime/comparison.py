"""Several schemes, or `--set` variants of one, measured side by side.

For each variant: the analysis (the prediction verify holds kernels against),
every measurement verify makes and its findings (so a disagreement with the
analysis is marked, not hidden), the modellers' measures read off those runs
(runtime/modeller_measures.py), its convergence ladder on the smooth bell
(runtime/accuracy.py) and its cost per cell-update (runtime/costs.py, every
kernel timed in turn in this process). With a target error: the grid and the
cost each variant needs for it, and the cheapest. Variants of one spec that
differ in one param form a family, whose measures are read against the param.
"""
from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, field, replace
import sympy

from fluxloom.compiler import LoomError, load_scheme
from fluxloom.compiler.ir import parse_override

from . import harness
from .accuracy import Cheapest, GridError, Reach, cheapest, grid_errors, reach
from .costs import Cost, TimingSettings, noise_warnings, time_kernels, within_noise
from .findings import AGREE, DISAGREE, FAULT, NO_CLAIM, Finding, Options, Verification, \
    verify_kernel
from .measurements import in_clip_range
from .modeller_measures import Measures, bell_row, measures
from .prediction import Prediction
from .profiles import BELL

DEFAULT_GRIDS = (25, 50, 100, 200, 400)
ORDER_JUDGED_FROM = 400   # an order is judged on a ladder reaching this grid (verify: 800),
                          # coarser grids may not show the asymptotic order yet


# ---- variants ------------------------------------------------------------------------

@dataclass(frozen=True)
class Variant:
    label: str
    scheme: object
    source: str | None = None                  # the spec file (variants of one file)
    settings: tuple[tuple[str, object], ...] = ()   # the --set values this variant takes


def value_text(value) -> str:
    return str(sympy.nsimplify(value))


def expand_variants(paths, override_texts) -> list[Variant]:
    """One variant per file and per combination of the --set values its params take."""
    lists = [parse_override(text) for text in override_texts]
    variants, used = [], set()
    for path in paths:
        base = load_scheme(path)
        own = [(name, values) for name, values in lists if name in {p.name for p in base.params}]
        used.update(name for name, _ in own)
        for combo in itertools.product(*[values for _, values in own]):
            overrides = {name: value for (name, _), value in zip(own, combo)}
            scheme = load_scheme(path, overrides)
            suffix = ", ".join(f"{k}={value_text(v)}" for k, v in overrides.items())
            variants.append(Variant(f"{scheme.name} ({suffix})" if suffix else scheme.name,
                                    scheme, str(path), tuple(overrides.items())))
    unused = [name for name, _ in lists if name not in used]
    if unused:
        raise LoomError(f"--set {unused[0]}: none of the schemes has a param '{unused[0]}'",
                        file="--set")
    return variants


# ---- settings --------------------------------------------------------------------------

@dataclass(frozen=True)
class CompareSettings:
    backend: str = "numpy"
    precision: str = "double"
    courant: float = 0.5
    cells: int = 100                          # the grid of the per-scheme columns
    grids: tuple[int, ...] = DEFAULT_GRIDS     # the convergence ladder (accuracy against cost)
    timing: TimingSettings = TimingSettings()
    target_error: float | None = None
    target_norm: str = "l1"
    stability: bool = True                     # run the stability sweep (measured limit)

    @property
    def ladder(self) -> tuple[int, ...]:
        """The grids run: the ladder and the columns' grid."""
        return tuple(sorted(set(self.grids) | {self.cells}))

    def check(self) -> None:
        """Refuse (LoomError) settings whose runs are unbounded or meaningless."""
        if self.cells < 8:
            raise LoomError(f"--cells must be at least 8, given {self.cells}", file="--cells")
        if any(n < 8 for n in self.grids) or len(self.ladder) < 2:
            raise LoomError("--grids must list grids of at least 8 cells, two or more with "
                            "--cells (a convergence line needs two points)", file="--grids")
        for n in self.ladder:
            harness.check_run_size(n, self.courant)
        if self.target_error is not None and not (0 < self.target_error < math.inf):
            raise LoomError(f"--target-error must be a positive number, given "
                            f"{self.target_error:g}", file="--target-error")
        if self.timing.repeats < 1 or self.timing.cells < 8:
            raise LoomError("timing needs at least one repeat on at least 8 cells",
                            file="--repeats")


# ---- one variant ------------------------------------------------------------------------

@dataclass(frozen=True)
class Compared:
    """One variant: what the analysis claims and what its kernel measured."""

    variant: Variant
    document: dict                 # the analysis document (`check --json`)
    verification: Verification     # verify's measurements and findings
    measures: Measures
    errors: tuple[GridError, ...]  # the bell's convergence ladder
    cells: int                     # the grid of the per-scheme columns
    cost: Cost | None = None
    reach: Reach | None = None
    finals: dict = field(default_factory=dict, compare=False, repr=False)

    @property
    def label(self) -> str:
        return self.variant.label

    @property
    def prediction(self) -> Prediction:
        return self.verification.prediction

    @property
    def order(self) -> int | None:
        return self.prediction.order

    @property
    def stable_max(self) -> float | None:
        """Upper end of the predicted stable interval nearest 0 (sorting)."""
        main = next((p for p in self.prediction.claims.stability.stable.parts
                     if not p.is_point), None)
        return main.hi if main else None

    def error_at(self, n: int) -> GridError:
        return next(g for g in self.errors if g.n == n)

    def error_at_cells(self, norm: str) -> float | None:
        """The bell's error in `norm` on the columns' grid (None: the run stopped)."""
        return self.error_at(self.cells).get(norm)

    @property
    def speed(self) -> float | None:
        return self.cost.speed if self.cost else None

    @property
    def disagreeing_checks(self) -> tuple[str, ...]:
        """The checks whose finding disagrees with the analysis (or hit a kernel fault)."""
        seen = []
        for f in self.verification.findings:
            if f.verdict in (DISAGREE, FAULT) and f.check not in seen:
                seen.append(f.check)
        return tuple(seen)


def analysis_document(scheme, courant: float) -> dict:
    from fluxloom.compiler.analysis import analyse

    return analyse(scheme, courant).to_json()


def measure_variant(variant: Variant, settings: CompareSettings,
                    prediction: Prediction | None = None) -> tuple[Compared, object]:
    """Every measurement of one variant (no timing): (row, its kernel).

    `prediction` replaces the analysis's own (tests feed wrong ones: the row must
    then show the disagreement)."""
    from .kernel import load_kernel

    scheme = variant.scheme
    document = analysis_document(scheme, settings.courant)
    if prediction is None:
        prediction = Prediction.from_document(document)
    kernel = load_kernel(scheme, backend=settings.backend, precision=settings.precision)
    options = Options(courant=settings.courant, cells=settings.ladder,
                      shape_cells=settings.cells, stability=settings.stability)
    verification = short_ladder(verify_kernel(kernel, prediction, options), settings.ladder)
    m = verification.measurements
    background = in_clip_range(BELL, prediction.clip).low
    bell = grid_errors(m.convergence[1])
    row = bell_row(m, settings.cells)
    square, mixed = m.shapes
    finals = {"bell": (row.final, row.exact), "square": (square.final, square.exact),
              "mixed": (mixed.final, mixed.exact)}
    return Compared(variant, document, verification,
                    measures(m, kernel, settings.cells, background), bell, settings.cells,
                    finals=finals), kernel


def short_ladder(verification: Verification, ladder) -> Verification:
    """On a ladder ending below ORDER_JUDGED_FROM the measured order is reported, not
    judged either way (agree or disagree): it may not have reached its asymptote."""
    finest = max(ladder)
    if finest >= ORDER_JUDGED_FROM:
        return verification
    findings = []
    for f in verification.findings:
        if f.check == "convergence" and f.verdict in (AGREE, DISAGREE):
            f = Finding(f.check, f.context,
                        f"no claim on grids up to N = {finest} (the order is judged on a "
                        f"ladder reaching N = {ORDER_JUDGED_FROM}; the analysis: "
                        f"{f.predicted})", f.measured, NO_CLAIM, f.values)
        findings.append(f)
    return replace(verification, findings=tuple(findings))


# ---- the comparison -------------------------------------------------------------------

@dataclass(frozen=True)
class Family:
    """Variants of one spec differing in one param, in order of its value."""

    scheme: str
    param: str
    members: tuple[int, ...]       # indices into Comparison.rows
    values: tuple[object, ...]     # exact param values (sympy), same order
    fixed: tuple[tuple[str, object], ...] = ()   # the other params' values, if any

    @property
    def title(self) -> str:
        others = ", ".join(f"{k}={value_text(v)}" for k, v in self.fixed)
        return f"{self.scheme} over {self.param}" + (f" ({others})" if others else "")


@dataclass(frozen=True)
class Comparison:
    settings: CompareSettings
    rows: tuple[Compared, ...]
    cheapest: Cheapest | None
    noise: tuple[str, ...]         # cost differences within the timings' spread
    families: tuple[Family, ...]


def compare(variants, settings: CompareSettings = CompareSettings(), progress=None,
            predictions=None) -> Comparison:
    """Measure every variant, then time every kernel in turn, then read off the target."""
    settings.check()
    say = progress or (lambda message: None)
    measured, kernels = [], []
    for i, variant in enumerate(variants, 1):
        say(f"{variant.label} ({i}/{len(variants)})")
        pred = predictions[i - 1] if predictions else None
        row, kernel = measure_variant(variant, settings, pred)
        measured.append(row)
        kernels.append(kernel)
    say("timing every kernel in turn")
    costs = time_kernels(kernels, settings.courant, settings.timing)
    rows = []
    for row, cost in zip(measured, costs):
        target = None
        if settings.target_error is not None:
            target = reach(row.errors, cost, settings.target_error, settings.target_norm,
                           settings.courant)
        rows.append(Compared(row.variant, row.document, row.verification, row.measures,
                             row.errors, row.cells, cost, target, row.finals))
    best = None
    if settings.target_error is not None:
        best = cheapest([r.reach for r in rows], [r.label for r in rows])
    noise = tuple(noise_warnings([(r.label, r.cost) for r in rows])) if len(rows) > 1 else ()
    return Comparison(settings, tuple(rows), best, noise, families([r.variant for r in rows]))


def families(variants) -> tuple[Family, ...]:
    """Groups of variants of one spec that differ in one param only: for every param that
    takes several values, one family per setting of the others."""
    out = []
    by_source: dict[str, list[int]] = {}
    for i, variant in enumerate(variants):
        if variant.source is not None and variant.settings:
            by_source.setdefault(variant.source, []).append(i)
    for members in by_source.values():
        names = [name for name, _ in variants[members[0]].settings]
        for name in names:
            groups: dict[str, list[int]] = {}
            for i in members:
                others = tuple((k, str(v)) for k, v in variants[i].settings if k != name)
                groups.setdefault(str(others), []).append(i)
            for group in groups.values():
                if len({str(dict(variants[i].settings)[name]) for i in group}) < 2:
                    continue
                ordered = sorted(group, key=lambda i: float(dict(variants[i].settings)[name]))
                fixed = tuple((k, v) for k, v in variants[group[0]].settings if k != name)
                out.append(Family(variants[group[0]].scheme.name, name, tuple(ordered),
                                  tuple(dict(variants[i].settings)[name] for i in ordered),
                                  fixed))
    return tuple(out)


# ---- reading a family -------------------------------------------------------------------

# measure -> (how to read it from a row, larger is better)
FAMILY_MEASURES = {
    "l1": (lambda r, n: r.error_at(n).l1, False),
    "linf": (lambda r, n: r.error_at(n).linf, False),
    "peak_retained": (lambda r, n: r.measures.peak_retained, True),
    "front_width": (lambda r, n: r.measures.front_width, False),
    "overshoot": (lambda r, n: r.measures.overshoot, False),
    "undershoot": (lambda r, n: r.measures.undershoot, False),
    "stability_measured": (lambda r, n: r.measures.stability.max
                           if r.measures.stability else None, True),
    "cost": (lambda r, n: r.cost.median if r.cost else None, False),
}


def family_values(comparison: Comparison, family: Family, measure: str) -> list[float | None]:
    read, _ = FAMILY_MEASURES[measure]
    return [read(comparison.rows[i], comparison.settings.cells) for i in family.members]


def family_best(comparison: Comparison, family: Family, measure: str) -> tuple[list, str | None]:
    """The param values that do best on `measure` (ties within 1e-9 relative), and a noise
    note when the measure is the cost and the runner-up is within the timings' spread."""
    _, larger = FAMILY_MEASURES[measure]
    values = family_values(comparison, family, measure)
    known = [(v, x) for v, x in zip(values, family.values) if v is not None and math.isfinite(v)]
    if not known:
        return [], None
    target = max(v for v, _ in known) if larger else min(v for v, _ in known)
    best = [x for v, x in known if abs(v - target) <= 1e-9 * max(abs(target), 1e-300)]
    note = None
    if measure == "cost" and len(known) > 1:
        rows = [comparison.rows[i] for i in family.members]
        ranked = sorted((r for r in rows if r.cost), key=lambda r: r.cost.median)
        if len(ranked) > 1 and within_noise(ranked[0].cost, ranked[1].cost):
            note = "within the timings' spread"
    return best, note


# ---- sorting --------------------------------------------------------------------------

def _m(name):
    return lambda r: getattr(r.measures, name)


# column -> (key, descending): errors ascending, speed and order descending
SORT_KEYS = {
    "name": (lambda r: r.label, False),
    "order": (lambda r: r.order, True),
    "stability": (lambda r: r.stable_max, True),
    "l1": (lambda r: r.error_at_cells("l1"), False),
    "l2": (lambda r: r.error_at_cells("l2"), False),
    "linf": (lambda r: r.error_at_cells("linf"), False),
    "square": (_m("square_l1"), False),
    "extrema": (_m("new_extrema"), False),
    "drift": (_m("mass_drift"), False),
    "speed": (lambda r: r.speed, True),
    "cost": (lambda r: r.cost.median if r.cost else None, False),
    "peak": (_m("peak_retained"), True),
    "front": (_m("front_width"), False),
    "overshoot": (_m("overshoot"), False),
    "undershoot": (_m("undershoot"), False),
    "measured_stability": (lambda r: r.measures.stability.max if r.measures.stability else None,
                           True),
}


def sort_rows(rows, column):
    if not column:
        return list(rows)
    key, descending = SORT_KEYS[column]
    present = [r for r in rows if key(r) is not None]
    missing = [r for r in rows if key(r) is None]
    return sorted(present, key=key, reverse=descending) + missing


def sorted_comparison(comparison: Comparison, column: str | None) -> Comparison:
    """The same comparison, rows in the order of `column` (families and cheapest follow)."""
    if not column:
        return comparison
    position = {id(r): i for i, r in enumerate(comparison.rows)}
    order = [position[id(r)] for r in sort_rows(comparison.rows, column)]
    where = {old: new for new, old in enumerate(order)}
    rows = tuple(comparison.rows[i] for i in order)
    best = comparison.cheapest
    if best is not None:
        best = Cheapest(where[best.index], best.reach,
                        None if best.runner_up is None else where[best.runner_up], best.noise)
    fams = tuple(Family(f.scheme, f.param, tuple(where[i] for i in f.members), f.values,
                        f.fixed) for f in comparison.families)
    return Comparison(comparison.settings, rows, best, comparison.noise, fams)

