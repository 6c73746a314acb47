"""Benchmark of the fast run path on a chain of self-heated resistors (one command).

Runs, side by side in one process on one machine:

1. the plain deck (no self-heating) with ``ngspice -b -r`` (the yardstick);
2. the straightforward electrothermal deck ``emit`` writes, with ``ngspice -b -r`` (the
   reference for temperatures; only its hot-spot nodes are saved);
3. the fast path, :func:`heatweave.cosim.run_auto`, in this process;

and prints wall-clock and CPU times, their ratios to the plain deck, the number of
windows, the largest temperature difference to the reference at the co-simulation's
window times, and where the fast path's time went.  CPU times are given beside wall times
because the machine may be shared: the ratio of CPU times is the steadier figure, and the
one the target (``--target``, 3) is judged on; the exit status is 0 only when it is met.
The load average is printed before and after.

The reference at 1 s takes minutes; ``--reference-stop 0.1`` runs it to a shorter time
only, and temperatures are compared at the times both runs cover.  ``--reference-tmax``
gives the reference a smaller maximum step, to see its own discretisation error: at the
deck's 10 us the emitted deck's temperatures sit about 0.4 % of the rise below their
converged values (the error falls as the step squared; measured on the divider fixtures
against brentq), which on this chain is about 0.07 K at 1 s.  With ``--reference-tmax 2u``
that part of the difference goes away.

    .venv/bin/python benchmarks/bench_fastpath.py [--count 300] [--stop 1]
        [--reference-stop 1] [--reference-tmax 2u] [--target 3] [--keep DIR]
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

from chain_deck import write_chain

from heatweave import cosim
from heatweave.emit.emitter import emit_files
from heatweave.quantities import parse_number
from heatweave.simulators.rawfile import read_raw
from heatweave.thermal.circuit import hot_node


@dataclass(frozen=True, slots=True)
class Timing:
    """Wall-clock and CPU seconds of one step."""

    wall: float
    cpu: float


def ngspice_batch(deck: Path, raw: Path) -> Timing:
    """Run ``ngspice -b -r raw deck``; CPU time is the child's user + system time."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    subprocess.run(
        ["ngspice", "-b", "-r", str(raw), str(deck)],
        check=True,
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        cwd=deck.parent,
    )
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return Timing(wall, cpu)


def reference_deck(folder: Path, count: int, stop: float, tmax: float | None) -> Path:
    """The emitted electrothermal deck of the chain run to *stop*, saving the hot spots."""
    deck, annotation = write_chain(folder, count, stop)
    text = emit_files(str(deck), str(annotation)).text
    if tmax is not None:
        text = text.replace(f".tran 10u {stop:g}", f".tran 10u {stop:g} 0 {tmax!r}")
    saves = " ".join(f"v({hot_node(f'R{k}')})" for k in range(1, count + 1))
    text = text.replace("\n.end", f"\n.save {saves}\n.end", 1)
    path = folder / "chain_emitted.cir"
    path.write_text(text)
    return path


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--count", type=int, default=300)
    parser.add_argument("--stop", type=float, default=1.0)
    parser.add_argument("--reference-stop", type=float, default=None)
    parser.add_argument("--reference-tmax", type=str, default=None)
    parser.add_argument("--target", type=float, default=3.0, help="most CPU ratio allowed")
    parser.add_argument("--keep", type=Path, default=None, help="folder to keep the files in")
    args = parser.parse_args(argv)
    ref_stop = args.reference_stop or args.stop
    ref_tmax = parse_number(args.reference_tmax) if args.reference_tmax else None
    with tempfile.TemporaryDirectory(prefix="hw-bench-") as scratch:
        root = args.keep or Path(scratch)
        deck, annotation = write_chain(root / "plain", args.count, args.stop)
        print(f"chain of {args.count} resistors, 1 kHz sine, .tran 10u {args.stop:g}")
        print("load average before: {:.2f} {:.2f} {:.2f}".format(*os.getloadavg()))

        plain = ngspice_batch(deck, root / "plain" / "plain.raw")
        print(f"plain deck, ngspice -b:          wall {plain.wall:7.2f} s  cpu {plain.cpu:7.2f} s")

        start, cpu0 = time.perf_counter(), time.process_time()
        fast = cosim.run_auto(str(deck), str(annotation))
        fast_t = Timing(time.perf_counter() - start, time.process_time() - cpu0)
        print(f"fast path ({fast.method}):            wall {fast_t.wall:7.2f} s  "
              f"cpu {fast_t.cpu:7.2f} s   ratio wall {fast_t.wall / plain.wall:5.2f}  "
              f"cpu {fast_t.cpu / plain.cpu:5.2f}")  # fmt: skip
        print(f"  method: {fast.method}: {fast.reason}")

        ref_path = reference_deck(root / "reference", args.count, ref_stop, ref_tmax)
        ref_raw = root / "reference" / "ref.raw"
        ref = ngspice_batch(ref_path, ref_raw)
        what = f"to {ref_stop:g} s" + (f", tmax {args.reference_tmax}" if ref_tmax else "")
        per = args.stop / ref_stop  # ratios per simulated second
        print(f"emitted deck, ngspice -b ({what}): wall {ref.wall:7.2f} s  cpu {ref.cpu:7.2f} s"
              f"   ratio wall {ref.wall / plain.wall * per:5.1f}"
              f"  cpu {ref.cpu / plain.cpu * per:5.1f} (per simulated second)")  # fmt: skip

        plot = read_raw(ref_raw)[-1]
        ref_time = np.real(np.asarray(plot["time"]))
        times = fast.results.time
        assert times is not None
        common = times <= ref_time[-1] + 1e-12
        worst, worst_part = 0.0, ""
        for part in fast.results.parts:
            ref_temp = np.real(np.asarray(plot[f"v({hot_node(part.path)})"]))
            assert part.temperature_series is not None
            at = np.interp(times[common], ref_time, ref_temp)
            diff = float(np.abs(at - part.temperature_series[common]).max())
            if diff > worst:
                worst, worst_part = diff, part.path
        hottest = max(p.peak_temperature or p.temperature for p in fast.results.parts)
        print(f"max |T_fast - T_reference| over {int(common.sum())} window times up to "
              f"{times[common][-1]:.4g} s: {worst:.4f} K ({worst_part}); hottest part "
              f"{hottest:.2f} degC")  # fmt: skip
        if fast.trace is not None:
            trace = fast.trace
            spent = dict(trace.profile)
            spent["setup (emit, assemble, load)"] = fast_t.wall - sum(spent.values())
            print(f"fast path: {trace.windows} windows; wall time by part:")
            for name, seconds in sorted(spent.items(), key=lambda kv: -kv[1]):
                print(f"  {name:30s} {seconds:7.2f} s  {100 * seconds / fast_t.wall:5.1f} %")
            print("ngspice rusage (co-simulation):")
            for line in trace.stats.splitlines():
                print(f"  {line}")
        print("load average after: {:.2f} {:.2f} {:.2f}".format(*os.getloadavg()))
    ratio = fast_t.cpu / plain.cpu
    verdict = "met" if ratio <= args.target else "NOT met"
    print(f"target (CPU ratio at most {args.target:g}): {verdict}, {ratio:.2f}")
    return 0 if ratio <= args.target else 1


if __name__ == "__main__":
    raise SystemExit(main())
