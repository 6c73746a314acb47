"""Power ratings of resistors: the derating rule and the margins reports print.

A resistor's rated dissipation holds only up to an ambient temperature, the derating knee;
above it the allowed dissipation falls linearly to zero at the upper category temperature.
This is the derating curve of IEC 60115-1 (Fixed resistors for use in electronic equipment,
Part 1: Generic specification), whose usual knee is 70 degC.  ``run`` prints the margins and
``check`` judges them with the same function, so both always agree.
"""

from __future__ import annotations

from dataclasses import dataclass

#: The knee IEC 60115-1 uses when a datasheet names none (degC).
IEC_60115_KNEE = 70.0


def derated_power(
    rating: float, ambient: float, knee: float = IEC_60115_KNEE, tmax: float | None = None
) -> float:
    """The dissipation (W) a part rated *rating* W may carry at *ambient* degC.

    IEC 60115-1 derating: the full rating up to *knee*, then linear down to zero at *tmax*
    (the upper category temperature), and zero above it.  Without *tmax* there is no curve
    to follow and the full rating applies at every ambient.
    """
    if tmax is None or ambient <= knee:
        return rating
    if tmax <= knee:
        raise ValueError(f"tmax ({tmax:g} degC) must lie above the derating knee ({knee:g} degC)")
    share = (tmax - ambient) / (tmax - knee)
    return rating * min(max(share, 0.0), 1.0)


@dataclass(frozen=True, slots=True)
class Margins:
    """How far one part stays from its ratings; ``None`` where no rating was given.

    ``temperature`` is ``tmax`` minus the hottest temperature reached (K); ``allowed`` the
    derated dissipation at the part's local ambient (W); ``power`` is ``allowed`` minus the
    highest dissipation (W); ``load`` the highest dissipation as a fraction of ``allowed``.
    Negative margins mean the rating is exceeded.
    """

    temperature: float | None
    allowed: float | None
    power: float | None
    load: float | None


def margins(
    *,
    hottest: float,
    power: float,
    local_ambient: float,
    rating: float | None,
    tmax: float | None,
    knee: float = IEC_60115_KNEE,
) -> Margins:
    """The margins of a part that reached *hottest* degC and dissipated up to *power* W while
    the cold end of its thermal path (its local ambient) was at *local_ambient* degC."""
    temperature = None if tmax is None else tmax - hottest
    if rating is None:
        return Margins(temperature, None, None, None)
    allowed = derated_power(rating, local_ambient, knee, tmax)
    load = power / allowed if allowed > 0 else (float("inf") if power > 0 else 0.0)
    return Margins(temperature, allowed, allowed - power, load)


def derating_limit(
    rating: float, power: float, knee: float = IEC_60115_KNEE, tmax: float | None = None
) -> float | None:
    """The highest local ambient (degC) at which *power* W stays within the IEC 60115-1
    derated *rating*: the inverse of :func:`derated_power` on its sloping part.  ``None``
    without *tmax* (no curve) or when *power* exceeds the rating even below the knee."""
    if tmax is None or power > rating:
        return None
    if power <= 0:
        return tmax
    return knee + (tmax - knee) * (1.0 - power / rating)
