"""Parallel speed-up of ``heatweave sweep``: 20 ambient corners at -j 1 and at -j 2.

Each corner of ``tests/fixtures/sweep/pwm_shunt.cir`` is a 30 ms transient of a pulsed shunt
(about 30000 time steps, 0.5 to 1 s of ngspice), so process start-up does not dominate.
Both runs go through :func:`heatweave.sweep.run_sweep` with the executors the command uses
(this process for -j 1, a local process pool for -j 2); pool start-up is included in the
-j 2 time.  Also times one corner with each ngspice back end, the figures behind
:func:`heatweave.sweep.worker_backend`.

Run: ``.venv/bin/python benchmarks/bench_sweep.py``
"""

from __future__ import annotations

import time
from pathlib import Path

from heatweave.emitter import load_inputs
from heatweave.executors import Executor, ProcessExecutor, SerialExecutor
from heatweave.runner import RunOptions, run
from heatweave.sweep import SweepPlan, run_sweep

FIXTURES = Path(__file__).resolve().parent.parent / "tests" / "fixtures" / "sweep"
DECK = str(FIXTURES / "pwm_shunt.cir")
ANNOTATION = str(FIXTURES / "pwm_shunt.thermal.toml")
AMBIENTS = tuple(float(a) for a in range(-40, 160, 10))  # 20 corners


def timed_sweep(executor: Executor) -> tuple[float, list[float]]:
    """Wall time of the sweep and the final part temperatures, corner by corner."""
    inputs = load_inputs(DECK, ANNOTATION)
    start = time.perf_counter()
    try:
        result = run_sweep(inputs, SweepPlan(ambients=AMBIENTS), RunOptions(), executor)
    finally:
        executor.close()
    elapsed = time.perf_counter() - start
    assert not result.failed, [o.error for o in result.failed]
    temps = [o.data["parts"]["RSH"]["temperature"] for o in result.outcomes if o.data]
    return elapsed, temps


def one_corner(backend: str) -> float:
    """Seconds for one corner with *backend* (after a warm-up run)."""
    inputs = load_inputs(DECK, ANNOTATION)
    options = RunOptions(backend=backend, ambient=25.0)
    run(DECK, ANNOTATION, options, inputs=inputs)
    start = time.perf_counter()
    run(DECK, ANNOTATION, options, inputs=inputs)
    return time.perf_counter() - start


def main() -> None:
    for backend in ("batch", "shared"):
        print(f"one corner, {backend:6s} back end: {one_corner(backend):6.3f} s")
    serial, temps_1 = timed_sweep(SerialExecutor())
    parallel, temps_2 = timed_sweep(ProcessExecutor(2))
    assert temps_1 == temps_2, "results depend on -j"
    print(f"{len(AMBIENTS)} corners  -j 1: {serial:6.2f} s   -j 2: {parallel:6.2f} s")
    print(f"speed-up -j 2 / -j 1: {serial / parallel:.2f}")


if __name__ == "__main__":
    main()
