"""settle against the brute-force transient on a slow thermal case (wall-clock time).

Run: .venv/bin/python benchmarks/bench_settle.py [--tau 1] [--taus 5]

Case (invented): a 50 ohm heater, tc1 = 0.004/K, driven by 10 V PWM at 10 kHz, 50 % duty,
through one thermal stage of 50 K/W with tau = rth * cth (default 1 s = 10,000 periods).
Both runs use the same largest step (period / 50).  The brute force runs the full
electrothermal deck from cold for --taus time constants and keeps the last two periods;
its last period still carries a residual warm-up, about exp(-taus (1 - g)) of the rise for
loop gain g (printed beside the differences).  Target: settle at least 50 times faster.
"""

from __future__ import annotations

import argparse
import math
import tempfile
import time
from pathlib import Path

import numpy as np

from heatweave.run.prepare import RunOptions
from heatweave.run.runner import run
from heatweave.settle.periodic import SettleOptions, settle

PERIOD = 1e-4
DECK = """PWM heater for the settle benchmark: 10 V, 10 kHz, 50 % duty into 50 ohm
V1 drive 0 PULSE(0 10 0 10n 10n 49.99u 100u)
R1 drive 0 50
.end
"""
ANNOTATION = """schema = 1
[ambient]
temperature = 25.0
[part.R1]
model = "linear"
tc1 = 0.004
rth = 50.0
cth = {cth!r}
"""


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tau", type=float, default=1.0, help="thermal time constant (s)")
    parser.add_argument("--taus", type=float, default=5.0, help="brute force length in tau")
    args = parser.parse_args()
    step = PERIOD / 50
    with tempfile.TemporaryDirectory() as folder:
        deck = Path(folder) / "bench.cir"
        annotation = Path(folder) / "bench.thermal.toml"
        deck.write_text(DECK)
        annotation.write_text(ANNOTATION.format(cth=args.tau / 50.0))

        start = time.perf_counter()
        settled = settle(str(deck), str(annotation), SettleOptions(period=PERIOD, tstep=step))
        settle_time = time.perf_counter() - start
        part = settled.parts[0]

        stop = args.taus * args.tau
        analysis = f"tran {step!r} {stop!r} {stop - 2 * PERIOD!r} {step!r}"
        start = time.perf_counter()
        results = run(str(deck), str(annotation), RunOptions(analyses=(analysis,))).results
        brute_time = time.perf_counter() - start
    assert results.time is not None
    temp = results.parts[0].temperature_series
    assert temp is not None
    last = results.time >= stop - PERIOD - 1e-12
    t, v = results.time[last], temp[last]
    mean = float(np.trapezoid(v, t) / (t[-1] - t[0]))
    rise = part.temperature - settled.ambient
    print(f"case: 10 kHz PWM, tau = {args.tau:g} s = {args.tau / PERIOD:,.0f} periods")
    print(
        f"settle:      {settle_time:8.2f} s  ({settled.iterations} iterations of "
        f"{settled.periods} periods)"
    )
    print(f"brute force: {brute_time:8.2f} s  ({stop / PERIOD:,.0f} periods, {args.taus:g} tau)")
    print(f"speed-up:    {brute_time / settle_time:8.1f} x  (target >= 50)")
    print(
        f"settle      mean {part.temperature:.3f}  peak {part.peak_temperature:.3f}  "
        f"valley {part.valley_temperature:.3f} degC"
    )
    print(f"brute force mean {mean:.3f}  peak {v.max():.3f}  valley {v.min():.3f} degC")
    print(
        f"differences mean {part.temperature - mean:+.3f}  "
        f"peak {part.peak_temperature - v.max():+.3f}  "
        f"valley {part.valley_temperature - v.min():+.3f} K"
    )
    # Linearised about the settled point, the warm-up runs with the closed-loop time
    # constant tau / (1 - g): what is left of the rise after the brute force's run.
    gain = settled.gain or 0.0
    left = math.exp(-args.taus * (1.0 - gain)) * rise
    print(
        f"expected residual warm-up of the brute force: exp(-{args.taus:g} (1 - g)) x rise "
        f"= {left:.3f} K (loop gain g = {gain:+.3f})"
    )


if __name__ == "__main__":
    main()
