"""The maximum step of a transient: read from its ``tran`` request, and set.

ngspice 39 takes ``tran TSTEP TSTOP [TSTART [TMAX]] [uic]``; without TMAX its largest step
is TSTEP or (TSTOP - TSTART) / 50, whichever is smaller (manual, ``.tran``).  heatweave sets
TMAX by handing ngspice the analyses as commands (the deck's cards are not changed).
"""

from __future__ import annotations

from dataclasses import dataclass

from heatweave.quantities import parse_number


@dataclass(frozen=True, slots=True)
class Tran:
    """The numbers of a transient request: ``tran TSTEP TSTOP [TSTART [TMAX]] [uic]``."""

    tstep: float
    tstop: float
    tstart: float
    tmax: float | None
    uic: bool

    @property
    def max_step(self) -> float:
        """The largest step ngspice 39 takes: TMAX, else TSTEP or (TSTOP - TSTART) / 50,
        whichever is smaller (manual, ``.tran``)."""
        if self.tmax is not None and self.tmax > 0:
            return self.tmax
        return min(self.tstep, (self.tstop - self.tstart) / 50)

    def command(self, tmax: float) -> str:
        """The ngspice command for this transient with maximum step *tmax*."""
        # 12 digits: 5u stays 5e-06, not the float 4.9999999999999996e-06
        words = ["tran", *(f"{v:.12g}" for v in (self.tstep, self.tstop, self.tstart, tmax))]
        return " ".join([*words, "uic"] if self.uic else words)


def parse_tran(text: str) -> Tran | None:
    """The numbers of a ``tran`` command or ``.tran`` card; ``None`` when *text* is no
    transient or holds something other than plain SPICE numbers (an expression)."""
    if not is_tran(text):
        return None
    words = text.split()
    uic = any(w.lower() == "uic" for w in words[1:])
    numbers = [parse_number(w) for w in words[1:] if w.lower() != "uic"]
    if not 2 <= len(numbers) <= 4 or any(n is None for n in numbers):
        return None
    values = [float(n) for n in numbers if n is not None]
    values += [0.0] * (3 - len(values)) if len(values) < 3 else []
    return Tran(values[0], values[1], values[2], values[3] if len(values) > 3 else None, uic)


def with_max_step(analyses: tuple[str, ...], step: float) -> tuple[str, ...] | None:
    """*analyses* as ngspice commands, the transient's maximum step set to *step*;
    ``None`` when the transient's numbers cannot be read."""
    out = []
    for text in analyses:
        tran = parse_tran(text)
        if is_tran(text):
            if tran is None:
                return None
            out.append(tran.command(step))
        else:
            out.append(text.lstrip(". \t"))
    return tuple(out)


def the_tran(analyses: tuple[str, ...]) -> Tran | None:
    """The last transient of *analyses* (the one results are read from), if readable."""
    trans = [parse_tran(a) for a in analyses if is_tran(a)]
    return trans[-1] if trans else None


def is_tran(text: str) -> bool:
    """True when *text* is a ``tran`` command or ``.tran`` card."""
    words = text.split()
    return bool(words) and words[0].lower().lstrip(".") == "tran"
