"""Sweeps: the same electrothermal run at many corners, in parallel worker processes.

A sweep is the full factorial grid of

* **parameter values** (``--param NAME=START:STOP:STEP``, each a top-level ``.param`` of the
  deck, rewritten per corner by :mod:`heatweave.sweep.grid`),
* **Monte Carlo draws** (``--monte-carlo N``): draw *k* is one annotation drawn with
  :func:`heatweave.annotation.sample` from the *k*-th child of
  ``numpy.random.SeedSequence(seed).spawn(N)``, so draw *k* is the same numbers whatever
  the number of workers, the executor or the order corners finish in.  One draw stands
  for one manufactured unit: it is run at every ambient and every parameter corner;
* **ambient temperatures** (``--ambient START:STOP:STEP``), innermost.

Corners are numbered in that order (parameters outer, ambient inner).  Each corner is one
:func:`heatweave.run.runner.run` in a worker (:mod:`heatweave.sweep.executors`), reduced there
to the plain data the reports need, so only small dictionaries travel back.  A corner that fails
(no convergence, thermal runaway, ...) is recorded with its error message and the others
go on; :func:`exit_status` says what the command then returns.

With limits to check (``sweep --check``), each worker also holds its corner to the
annotation's limits with :func:`heatweave.checks.limits.evaluate`, exactly as ``check`` does for
one run; a drift limit needs the corner's own run without self-heating, which the same
worker runs right after the corner (same parameters, draw and ambient).
"""

from __future__ import annotations

import itertools
import shutil
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from heatweave.annotation import Annotation, sample
from heatweave.checks.limits import LimitResult, Signal, evaluate, needs_baseline
from heatweave.emit.emitter import Inputs
from heatweave.errors import EXIT_CHECK_FAILED, EXIT_OK, HeatweaveError
from heatweave.reports import build_report
from heatweave.reports.json_report import as_dict
from heatweave.reports.model import Probe
from heatweave.run.prepare import RunOptions, deck_folder, with_deadline
from heatweave.run.runner import run, run_baseline
from heatweave.sweep.executors import Executor
from heatweave.sweep.grid import check_params, with_params

#: Percentiles the Monte Carlo summary reports.
PERCENTILES = (1.0, 50.0, 99.0)
#: Per-part quantities the summary describes (keys of the ``parts`` objects).
SUMMARISED = ("temperature", "resistance_change_ppm")

Drawn = dict[str, dict[str, float]]


@dataclass(frozen=True, slots=True)
class SweepPlan:
    """What to vary: ambients (``None``: the annotation's own), parameter grids by name, and
    the number of Monte Carlo draws (0: none) with their seed."""

    ambients: tuple[float | None, ...] = (None,)
    params: tuple[tuple[str, tuple[float, ...]], ...] = ()
    draws: int = 0
    seed: int | None = None

    @property
    def size(self) -> int:
        """The number of corners."""
        count = len(self.ambients) * max(self.draws, 1)
        for _, values in self.params:
            count *= len(values)
        return count


@dataclass(frozen=True, slots=True)
class Corner:
    """One point of the sweep: its number, ambient, parameter values and Monte Carlo draw."""

    index: int
    ambient: float | None
    params: dict[str, float] = field(default_factory=dict)
    draw: int | None = None
    drawn: Drawn | None = None


def describe(corner: Corner, ambient: float | None = None) -> str:
    """``corner 3 (ambient 85 degC, vsup=12, draw 4)``: which corner, in the user's terms."""
    shown = corner.ambient if ambient is None else ambient
    what = [] if shown is None else [f"ambient {shown:g} degC"]
    what += [f"{name}={value:g}" for name, value in corner.params.items()]
    if corner.draw is not None:
        what.append(f"draw {corner.draw}")
    return f"corner {corner.index}" + (f" ({', '.join(what)})" if what else "")


@dataclass(frozen=True, slots=True)
class CornerJob:
    """Everything a worker needs for one corner (picklable)."""

    corner: Corner
    inputs: Inputs
    annotation: Annotation | None
    options: RunOptions
    #: The signal limits to check the corner against (``None``: no checking at all).
    limits: tuple[Signal, ...] | None = None
    #: ``--probe`` signals (node voltages, branch currents) to report, as ``run`` does.
    probes: tuple[Probe, ...] = ()


@dataclass(frozen=True, slots=True)
class CornerOutcome:
    """What came back from one corner: the report data of ``run``, or why it failed.

    ``data`` holds ``analysis``, ``backend``, ``ambient``, ``parts``, ``nodes`` and
    ``voltages`` exactly as :func:`heatweave.reports.json_report.as_dict` writes them;
    ``limits`` every limit checked (``None`` when the sweep checks none or the corner failed).
    """

    corner: Corner
    data: dict[str, Any] | None
    error: str | None = None
    exit_code: int = EXIT_OK
    warnings: tuple[str, ...] = ()
    limits: tuple[LimitResult, ...] | None = None
    seconds: float = 0.0  # wall-clock time the corner took in its worker

    @property
    def ok(self) -> bool:
        return self.error is None

    @property
    def violated(self) -> tuple[LimitResult, ...]:
        """The limits this corner violates."""
        return tuple(r for r in self.limits or () if not r.passed)


@dataclass(frozen=True, slots=True)
class SweepResult:
    """A finished sweep: the plan, the seed used, every corner's outcome in corner order."""

    plan: SweepPlan
    inputs: Inputs
    options: RunOptions
    outcomes: tuple[CornerOutcome, ...]
    executor: str
    #: True when the corners were held to the annotation's limits (``--check``).
    checked: bool = False

    @property
    def failed(self) -> tuple[CornerOutcome, ...]:
        return tuple(o for o in self.outcomes if not o.ok)

    @property
    def part_names(self) -> list[str]:
        """Annotated parts in the order the reports show them."""
        for outcome in self.outcomes:
            if outcome.data is not None:
                return list(outcome.data["parts"])
        return []


# ------------------------------------------------------------------------------- plan


def corner_ambient(result: SweepResult, outcome: CornerOutcome) -> float:
    """The ambient a corner ran at (degC): the value asked for when the sweep set one (the
    simulator reads some decimals back a bit off, 0.3 as 0.30000000000000004), else the
    final ambient the run reported, else the annotation's."""
    if outcome.corner.ambient is not None:
        return outcome.corner.ambient
    if outcome.data is not None:
        return float(outcome.data["ambient"])
    return result.inputs.annotation.ambient.at(0.0)


def worker_backend(name: str) -> str:
    """The back end workers use for ``--backend NAME``: ``auto`` means the batch program
    when it is installed.  Measured with ``benchmarks/bench_sweep.py`` (a 90 ms transient
    of about 90000 steps): 0.51 s a corner in batch against 1.42 s through the shared
    library, whose per-step callbacks run in Python; an operating point takes about 50 ms
    either way."""
    if name == "auto" and shutil.which("ngspice"):
        return "batch"
    return name


def seed_of(plan: SweepPlan) -> SweepPlan:
    """The plan with a seed: a fresh random one when Monte Carlo has none, so that every
    report can name the seed that reproduces it."""
    if plan.draws and plan.seed is None:
        entropy = np.random.SeedSequence().entropy
        assert isinstance(entropy, int)
        return replace(plan, seed=entropy % 2**63)
    return plan


def draws(annotation: Annotation, count: int, seed: int) -> list[Annotation]:
    """*count* independent Monte Carlo draws of *annotation* from *seed*."""
    children = np.random.SeedSequence(seed).spawn(count)
    return [sample(annotation, np.random.default_rng(child)) for child in children]


def drawn_values(nominal: Annotation, drawn: Annotation) -> Drawn:
    """The values a draw gave each toleranced key: by part pattern, ``@node`` for shared
    nodes and ``A~B`` for thermal paths."""
    out: Drawn = {}
    for part, got in zip(nominal.parts, drawn.parts, strict=True):
        if not part.tolerances:
            continue
        params = got.param_map
        stage: dict[str, float] = {}
        if got.network.kind == "single":  # sample() draws rth/cth of single stages only
            stage = dict(zip(("rth", "cth"), got.network.stages[0], strict=True))
        values: dict[str, float] = {}
        for key, _ in part.tolerances:
            value = params.get(key, stage.get(key))
            if isinstance(value, int | float):
                values[key] = float(value)
        out[part.pattern] = values
    for node, got_node in zip(nominal.nodes, drawn.nodes, strict=True):
        if node.tolerances:
            out[f"@{node.name}"] = {
                key: float(getattr(got_node, key)) for key, _ in node.tolerances
            }
    for path, got_path in zip(nominal.paths, drawn.paths, strict=True):
        if path.tolerances:
            out["~".join(path.between)] = {"rth": float(got_path.rth)}
    return out


def jobs_for(
    inputs: Inputs,
    plan: SweepPlan,
    options: RunOptions,
    limits: tuple[Signal, ...] | None = None,
    probes: tuple[Probe, ...] = (),
) -> list[CornerJob]:
    """Every corner of *plan* as a job, numbered in corner order; with *limits* (the
    resolved signal limits, possibly none) every job also checks the annotation's limits;
    each reports *probes*."""
    check_params(inputs, [name for name, _ in plan.params])
    annotations: list[tuple[int | None, Annotation | None]] = [(None, None)]
    if plan.draws:
        assert plan.seed is not None
        drawn = draws(inputs.annotation, plan.draws, plan.seed)
        annotations = list(enumerate(drawn))
    names = [name for name, _ in plan.params]
    # The folder is fixed here: a worker's own current folder may be another one.
    quiet = replace(
        options,
        progress=None,
        backend=worker_backend(options.backend),
        cwd=options.cwd or deck_folder(inputs),
    )
    jobs: list[CornerJob] = []
    for combo in itertools.product(*(values for _, values in plan.params)):
        values = dict(zip(names, combo, strict=True))
        corner_inputs = with_params(inputs, values)
        for draw, annotation in annotations:
            recorded = None if annotation is None else drawn_values(inputs.annotation, annotation)
            for ambient in plan.ambients:
                corner = Corner(len(jobs), ambient, values, draw, recorded)
                run_options = replace(quiet, ambient=ambient)
                job = CornerJob(corner, corner_inputs, annotation, run_options, limits, probes)
                jobs.append(job)
    return jobs


# ----------------------------------------------------------------------------- worker


def run_corner(job: CornerJob) -> CornerOutcome:
    """Run one corner (in a worker process) and reduce it to report data; check its limits
    when the job has some to check (with the corner's baseline for a drift limit)."""

    inputs = job.inputs
    started = time.monotonic()
    options = with_deadline(job.options)  # the corner's limit starts when the corner does
    try:
        outcome = run(
            inputs.deck_path,
            inputs.annotation_path,
            options,
            inputs=inputs,
            annotation=job.annotation,
        )
        # A probe the run lacks is left out here and refused once, by the command.
        probes = tuple(p for p in job.probes if p.known(outcome.results))
        report = as_dict(build_report(inputs, outcome, probes))
        limits = None
        if job.limits is not None:
            baseline = None
            if needs_baseline(job.limits):
                baseline = run_baseline(inputs, options, job.annotation)
            limits = evaluate(outcome, job.limits, baseline)
    except HeatweaveError as err:
        seconds = time.monotonic() - started
        return CornerOutcome(job.corner, None, err.render(), err.exit_code, seconds=seconds)
    keys = ("analysis", "backend", "ambient", "parts", "nodes", "voltages", "currents", "probes")
    data = {key: report[key] for key in keys}
    return CornerOutcome(
        job.corner, data, warnings=tuple(report["warnings"]), limits=limits,
        seconds=time.monotonic() - started,
    )  # fmt: skip


# ----------------------------------------------------------------------------- driver


def run_sweep(
    inputs: Inputs,
    plan: SweepPlan,
    options: RunOptions,
    executor: Executor,
    progress: Callable[[int, int, int], None] | None = None,
    worker: Callable[[CornerJob], CornerOutcome] = run_corner,
    limits: tuple[Signal, ...] | None = None,
    probes: tuple[Probe, ...] = (),
) -> SweepResult:
    """Run every corner of *plan* on *executor*; *progress* hears (done, total, failed)
    after each corner.  Results come back in corner order whatever order they finish in.
    With *limits* (:func:`heatweave.checks.limits.resolve_limits`, possibly empty) every corner is
    also held to the annotation's limits.  Each corner reports *probes* as ``run`` does."""
    plan = seed_of(plan)
    jobs = jobs_for(inputs, plan, options, limits, probes)
    outcomes: list[CornerOutcome | None] = [None] * len(jobs)
    failed = 0
    for done, (position, outcome) in enumerate(executor.run(worker, jobs), start=1):
        outcomes[position] = outcome
        failed += not outcome.ok
        if progress is not None:
            progress(done, len(jobs), failed)
    finished = tuple(o for o in outcomes if o is not None)
    assert len(finished) == len(jobs)
    return SweepResult(plan, inputs, options, finished, executor.name, limits is not None)


def exit_status(result: SweepResult) -> int:
    """0 when every corner ran (and, when checked, kept every limit); 1 when some failed or
    violated a limit; when all failed, the exit status of the first corner's error (3 no
    convergence, 4 timestep too small, 7 thermal runaway, ...)."""
    failed = result.failed
    if not failed:
        if any(o.violated for o in result.outcomes):
            return EXIT_CHECK_FAILED
        return EXIT_OK
    if len(failed) == len(result.outcomes):
        return failed[0].exit_code
    return EXIT_CHECK_FAILED


# ---------------------------------------------------------------------------- summary


def _stats(values: Sequence[float]) -> dict[str, float]:
    data = np.asarray(values, dtype=np.float64)
    low, mid, high = np.percentile(data, PERCENTILES)
    return {
        "mean": float(data.mean()),
        "std": float(data.std(ddof=1)) if len(data) > 1 else 0.0,
        "p1": float(low),
        "p50": float(mid),
        "p99": float(high),
    }


def _values(outcomes: Sequence[CornerOutcome], part: str, key: str) -> list[float]:
    out = []
    for outcome in outcomes:
        if outcome.data is None:
            continue
        value = outcome.data["parts"][part].get(key)
        if value is not None:
            out.append(float(value))
    return out


def summary(result: SweepResult) -> dict[str, Any]:
    """Per part, over the corners that ran: for Monte Carlo, mean, standard deviation
    (n - 1) and the 1/50/99 percentiles (numpy's linear interpolation) of temperature and
    drift at each ambient and parameter corner; otherwise their range and where it lies."""
    parts = result.part_names
    if not result.plan.draws:
        ranges: dict[str, Any] = {}
        for part in parts:
            entry: dict[str, Any] = {}
            for key in SUMMARISED:
                ran = [
                    (float(o.data["parts"][part][key]), o.corner.index)
                    for o in result.outcomes
                    if o.data is not None and o.data["parts"][part].get(key) is not None
                ]
                if ran:
                    entry[key] = {
                        "min": min(ran)[0], "min_corner": min(ran)[1],
                        "max": max(ran)[0], "max_corner": max(ran)[1],
                    }  # fmt: skip
            ranges[part] = entry
        return {"kind": "corners", "parts": ranges}
    groups: dict[tuple[Any, ...], list[CornerOutcome]] = {}
    for outcome in result.outcomes:
        corner = outcome.corner
        groups.setdefault((tuple(corner.params.items()), corner.ambient), []).append(outcome)
    out = []
    for (params, asked), members in groups.items():
        good = [m for m in members if m.ok]
        stats: dict[str, Any] = {}
        for part in parts:
            stats[part] = {
                key: _stats(values) for key in SUMMARISED if (values := _values(good, part, key))
            }
        # The ambient asked for, as the corners report it; else what the runs reported.
        ambient = asked
        if ambient is None:
            ambient = next((m.data["ambient"] for m in good if m.data is not None), None)
        out.append({"ambient": ambient, "params": dict(params), "draws": len(good), "parts": stats})
    return {"kind": "monte_carlo", "seed": result.plan.seed, "groups": out}
