"""Parallel speed-up of ``heatweave sweep``: 20 ambient corners at -j 1 and at -j 2.

Each corner of ``tests/fixtures/sweep/pwm_shunt.cir`` is a 90 ms transient of a pulsed
shunt (about 90000 time steps, 0.6 s of ngspice on an idle core), so process start-up does
not dominate.  Other sessions on the machine take cores away from both workers (the
kernel shares CPU between sessions fairly), so the load average is printed beside the
figures: the 1.7 target assumes an otherwise idle 2-core machine.
Both runs go through :func:`heatweave.sweep.corners.run_sweep` with the executors the command uses
(this process for -j 1, a local process pool for -j 2); pool start-up is included in the
-j 2 time.  Also times one corner with each ngspice back end, the figures behind
:func:`heatweave.sweep.corners.worker_backend`.

Run: ``.venv/bin/python benchmarks/bench_sweep.py``
"""

from __future__ import annotations

import os
import resource
import sys
import time
from pathlib import Path

from heatweave.cli.sweep_cmd import WORKER_MODULES
from heatweave.emit.emitter import load_inputs
from heatweave.run.prepare import RunOptions
from heatweave.run.runner import run
from heatweave.sweep.corners import SweepPlan, run_sweep
from heatweave.sweep.executors import Executor, ProcessExecutor, SerialExecutor

FIXTURES = Path(__file__).resolve().parent.parent / "tests" / "fixtures" / "sweep"
DECK = str(FIXTURES / "pwm_shunt.cir")
ANNOTATION = str(FIXTURES / "pwm_shunt.thermal.toml")
AMBIENTS = tuple(float(a) for a in range(-40, 160, 10))  # 20 corners
ROUNDS = 2
TARGET = 1.7  # speed-up of -j 2 over -j 1 on a 2-core machine


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


def cpu_seconds() -> float:
    """CPU time of this process and of its finished children (ngspice, pool workers)."""
    own = resource.getrusage(resource.RUSAGE_SELF)
    children = resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + children.ru_utime + children.ru_stime


def one_corner(backend: str) -> tuple[float, float]:
    """Wall and CPU seconds for one corner with *backend* (after a warm-up run)."""
    inputs = load_inputs(DECK, ANNOTATION)
    options = RunOptions(backend=backend, ambient=25.0)
    run(DECK, ANNOTATION, options, inputs=inputs)
    start, cpu = time.perf_counter(), cpu_seconds()
    run(DECK, ANNOTATION, options, inputs=inputs)
    return time.perf_counter() - start, cpu_seconds() - cpu


def main() -> int:
    # Other work on the machine takes cores from the workers: say how busy it was.
    print("load average before: {:.2f} {:.2f} {:.2f}".format(*os.getloadavg()))
    for backend in ("batch", "shared"):
        wall, cpu = one_corner(backend)
        print(f"one corner, {backend:6s} back end: {wall:6.3f} s wall, {cpu:6.3f} s CPU")
    serial: list[float] = []
    parallel: list[float] = []
    for _ in range(ROUNDS):  # interleaved, so a change of load hits both alike
        seconds, temps_1 = timed_sweep(SerialExecutor())
        serial.append(seconds)
        seconds, temps_2 = timed_sweep(ProcessExecutor(2, WORKER_MODULES))
        parallel.append(seconds)
        assert temps_1 == temps_2, "results depend on -j"
    best_1, best_2 = min(serial), min(parallel)
    print(
        f"{len(AMBIENTS)} corners, best of {ROUNDS}:  -j 1: {best_1:6.2f} s   -j 2: {best_2:6.2f} s"
    )
    print(f"speed-up -j 2 / -j 1: {best_1 / best_2:.2f}")
    print("load average after: {:.2f} {:.2f} {:.2f}".format(*os.getloadavg()))
    if best_1 / best_2 < TARGET:
        print(f"target not met: speed-up {best_1 / best_2:.2f} < {TARGET}")
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
