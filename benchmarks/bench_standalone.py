"""Benchmark of the standalone card forms on a chain of self-heated resistors (one command).

A chain of ``--count`` ten-ohm resistors in series across a 1 kHz sine (``.tran 10u
100m``); every resistor has a linear model (tc1 0.004/K) and Rth 100 K/W, Cth 1 mJ/K to a
25 V ambient source.  The circuit is an invented scenario for timing, not a real design.

Runs side by side, ``--repeat`` times each in turn (the median is kept): the plain deck
(the yardstick) and the chain written in every form of :mod:`heatweave.emit.forms`, each
with ``ngspice -b`` on a copy of the deck whose ``.control`` block runs the analysis and
``rusage all``.  CPU time (the child's user + system) is the figure compared, since the
machine may be shared; wall time is printed beside it.  A second run of each form writes
the hot-spot temperatures to a raw file; the largest difference to the reference form over
all parts and time points is printed.  Also printed: what ngspice says dominated (load,
factor, solve, truncation; iterations and time points).

With ``--tight`` the comparison is repeated with reltol 1e-9 (vntol 1e-12, abstol 1e-15):
the forms solve the same equations, so their differences at default tolerances must
shrink with the tolerance.  (The time points then differ: a deck with an XSPICE device
runs with trtol 1, ngspice manual 15.1.4; temperatures are compared on the reference's.)

Exits 0 only when the ``switch`` form's CPU time is at most ``--target`` (10) times the
plain deck's.

    .venv/bin/python benchmarks/bench_standalone.py [--count 300] [--amplitude 600]
        [--repeat 3] [--target 10] [--tight] [--keep DIR]
"""

from __future__ import annotations

import argparse
import re
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from heatweave.emit.forms import FORMS, preamble, resistor_cards, step_limit_options
from heatweave.simulators.rawfile import read_raw
from heatweave.tempmodels import get

OHMS, TC1, RTH, CTH, AMBIENT = 10.0, 0.004, 100.0, 1e-3, 25.0
TIGHT = "reltol=1e-9 vntol=1e-12 abstol=1e-15"
STATS = (
    "Transient iterations",
    "Transient timepoints",
    "Transient load time",
    "Transient factor time",
    "Transient solve time",
    "Transient trunc time",
    "Total analysis time (seconds)",
)


def chain(
    form: str | None, count: int, amplitude: float, control: list[str], options: str = ""
) -> str:
    """The chain deck: plain (*form* None) or with every resistor in *form*."""
    model = get("linear").from_params({"tc1": TC1}, OHMS)
    lines = [f"chain of {count} self-heated resistors", f"V1 n0 0 SIN(0 {amplitude:g} 1k)"]
    hot = [f"hw_t_r{k}" for k in range(1, count + 1)]
    for k in range(1, count + 1):
        a, b = f"n{k - 1}", "0" if k == count else f"n{k}"
        if form is None:
            lines.append(f"R{k} {a} {b} {OHMS:g}")
            continue
        lines += resistor_cards(form, f"r{k}", a, b, hot[k - 1], model, heating=True)
        lines += [f"Rhw_r{k}_1 {hot[k - 1]} hw_amb {RTH:g}", f"Chw_r{k}_1 {hot[k - 1]} 0 {CTH:g}"]
    if form is not None:
        lines += preamble(form, [model])
        # As emit writes it: judged on the plain deck, which has no code models.
        lines += step_limit_options(form, [(chain(None, count, amplitude, control), True)])
        lines.append(f"Vhw_amb hw_amb 0 DC {AMBIENT:g}")
        lines.append(".ic " + " ".join(f"V({n})={AMBIENT:g}" for n in hot))
    if options:
        lines.append(f".options {options}")
    lines += [".tran 10u 100m", ".control", *control, "quit", ".endc", ".end"]
    return "\n".join(lines) + "\n"


@dataclass(frozen=True, slots=True)
class Run:
    """One ngspice run: CPU and wall seconds, and its rusage lines."""

    cpu: float
    wall: float
    stats: dict[str, float]


def ngspice(deck: Path) -> Run:
    """``ngspice -b deck``; CPU time is the child's user + system time."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    start = time.perf_counter()
    done = subprocess.run(["ngspice", "-b", str(deck)], capture_output=True, text=True)
    wall = time.perf_counter() - start
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime
    stats = {}
    for key in STATS:
        found = re.search(rf"^{re.escape(key)}\s*=\s*(\S+)", done.stdout, re.M)
        if found:
            stats[key] = float(found.group(1))
    if done.returncode != 0 or "Transient timepoints" not in stats:
        raise SystemExit(f"ngspice failed on {deck}:\n{done.stdout[-2000:]}{done.stderr[-2000:]}")
    return Run(cpu, wall, stats)


def temperatures(
    folder: Path, form: str, count: int, amplitude: float, options: str = ""
) -> np.ndarray:
    """Hot-spot temperatures at every time point (time first), from a raw file."""
    tag = "-tight" if options else ""
    raw = folder / f"{form}{tag}.raw"
    nodes = " ".join(f"v(hw_t_r{k})" for k in range(1, count + 1))
    deck = folder / f"{form}{tag}-temps.cir"
    control = ["run", "rusage all", f"write {raw} time {nodes}"]
    deck.write_text(chain(form, count, amplitude, control, options))
    ngspice(deck)
    plot = read_raw(raw)[-1]
    columns = [plot["time"], *(plot[f"v(hw_t_r{k})"] for k in range(1, count + 1))]
    return np.real(np.asarray(columns))


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--count", type=int, default=300)
    parser.add_argument("--amplitude", type=float, default=600.0)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--target", type=float, default=10.0)
    parser.add_argument("--keep", type=Path, default=None)
    parser.add_argument(
        "--tight", action="store_true", help="also compare temperatures at tight tolerances"
    )
    args = parser.parse_args()
    forms = list(FORMS)
    with tempfile.TemporaryDirectory() as scratch:
        folder = args.keep or Path(scratch)
        folder.mkdir(parents=True, exist_ok=True)
        decks = {}
        for form in [None, *forms]:
            label = form or "plain"
            decks[label] = folder / f"{label}.cir"
            decks[label].write_text(chain(form, args.count, args.amplitude, ["run", "rusage all"]))
        runs: dict[str, list[Run]] = {label: [] for label in decks}
        for _ in range(args.repeat):
            for label, deck in decks.items():
                runs[label].append(ngspice(deck))
        print(
            f"chain of {args.count} resistors, {args.amplitude:g} V 1 kHz sine, .tran 10u 100m,"
            f" median of {args.repeat} (CPU = user + system of ngspice)"
        )
        plain = statistics.median(r.cpu for r in runs["plain"])
        ratios = {}
        for label, done in runs.items():
            cpu = statistics.median(r.cpu for r in done)
            wall = statistics.median(r.wall for r in done)
            ratios[label] = cpu / plain
            print(f"  {label:10s} cpu {cpu:7.3f} s  wall {wall:7.3f} s  ratio {cpu / plain:6.2f}")
        print("what ngspice reports (last run; its timers are wall clock):")
        for label, done in runs.items():
            s = done[-1].stats
            print(
                f"  {label:10s} iterations {s.get(STATS[0], 0):7.0f}  time points"
                f" {s.get(STATS[1], 0):6.0f}  load {s.get(STATS[2], 0):6.3f}  factor"
                f" {s.get(STATS[3], 0):6.3f}  solve {s.get(STATS[4], 0):6.3f}  trunc"
                f" {s.get(STATS[5], 0):6.3f}  analysis {s.get(STATS[6], 0):6.3f}"
            )
        tolerances = [("default tolerances", "")]
        if args.tight:
            tolerances.append(("reltol 1e-9, vntol 1e-12, abstol 1e-15", TIGHT))
        for what, options in tolerances:
            reference = temperatures(folder, "reference", args.count, args.amplitude, options)
            hottest = reference[1:, -1].max()
            print(f"{what}: hottest part at the end (reference form) {hottest:.6f} degC")
            for form in forms[1:]:
                other = temperatures(folder, form, args.count, args.amplitude, options)
                at = np.array([np.interp(reference[0], other[0], row) for row in other[1:]])
                worst = float(np.abs(at - reference[1:]).max())
                end = float(np.abs(other[1:, -1] - reference[1:, -1]).max())
                print(
                    f"  max |T_{form} - T_reference|: {worst:.3g} K over time,"
                    f" {end:.3g} K at the end"
                )
    ok = ratios["switch"] <= args.target
    verdict = "within" if ok else "NOT within"
    print(f"switch form: {ratios['switch']:.2f} x the plain deck, {verdict} {args.target:g} x")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
