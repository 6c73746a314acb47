"""Generator of the fast-path benchmark deck: a long chain of self-heated resistors.

``N`` equal resistors in series across a 1 kHz sine source; every one has a linear
temperature model and its own single-stage thermal network to ambient.  The heat
capacities cycle through three values so the chain has three thermal time constants.
The circuit is an invented scenario for timing, not a real design.
"""

from __future__ import annotations

from pathlib import Path

#: Heat capacities (J/K) the resistors cycle through; with rth = 100 K/W: tau 0.1 .. 0.4 s.
CTH_CYCLE = (1e-3, 2e-3, 4e-3)


def chain_deck(count: int, stop: float, amplitude: float = 600.0, ohms: float = 10.0) -> str:
    """The plain deck: *count* resistors of *ohms* in series, ``.tran 10u stop``."""
    lines = [f"chain of {count} self-heated resistors", f"V1 n0 0 SIN(0 {amplitude:g} 1k)"]
    for k in range(1, count + 1):
        after = "0" if k == count else f"n{k}"
        lines.append(f"R{k} n{k - 1} {after} {ohms:g}")
    lines += [f".tran 10u {stop:g}", ".end"]
    return "\n".join(lines) + "\n"


def chain_annotation(count: int, tc1: float = 0.004, rth: float = 100.0) -> str:
    """The annotation: a linear model and a single RC stage for every resistor."""
    lines = ["schema = 1", "", "[ambient]", "temperature = 25.0"]
    for k in range(1, count + 1):
        cth = CTH_CYCLE[(k - 1) % len(CTH_CYCLE)]
        lines += ["", f"[part.R{k}]", 'model = "linear"', f"tc1 = {tc1:g}"]
        lines += [f"rth = {rth:g}", f"cth = {cth:g}"]
    return "\n".join(lines) + "\n"


def write_chain(folder: Path, count: int, stop: float) -> tuple[Path, Path]:
    """Write ``chain.cir`` and ``chain.thermal.toml`` into *folder*; return their paths."""
    folder.mkdir(parents=True, exist_ok=True)
    deck = folder / "chain.cir"
    annotation = folder / "chain.thermal.toml"
    deck.write_text(chain_deck(count, stop))
    annotation.write_text(chain_annotation(count))
    return deck, annotation
