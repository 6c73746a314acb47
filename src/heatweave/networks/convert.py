"""Foster <-> Cauer, both ways exact up to the final rounding to floats.

Foster -> Cauer is the Cauer I continued fraction: Y(s) = 1/Z(s) = D(s)/N(s) is divided
from the highest power down, each division splitting off one capacitance (a pole of Y at
infinity) and then one resistance.  Every step subtracts two nearly equal polynomials, so
in floating point the error grows by orders of magnitude per stage.  We therefore do the
division in exact rational arithmetic (:class:`fractions.Fraction`): every float is a
dyadic rational, the Foster network given is represented exactly, and each Cauer element
comes out correctly rounded.  The cost grows with the stage count but is negligible for the
few to dozen stages thermal networks have.

Cauer -> Foster is partial fractions: the poles of Zth(s) are minus the eigenvalues of the
ladder matrix C^-1 G.  Scaling by C^(1/2) makes it the symmetric tridiagonal
M = C^(-1/2) G C^(-1/2) = Q diag(lam) Q^T, so Zth(s) = sum_i w_i^2 / (s + lam_i) with
w_i = Q[0, i] / sqrt(C1): tau_i = 1/lam_i and R_i = w_i^2 / lam_i.  A symmetric
eigensolver gives real, positive poles and residues by construction (no root finding).
"""

from __future__ import annotations

from fractions import Fraction

from heatweave.networks.base import NetworkError, NetworkForm
from heatweave.networks.cauer import Cauer
from heatweave.networks.foster import Foster
from heatweave.networks.single import Single

Poly = list[Fraction]  # coefficients, lowest power first


def _mul_linear(poly: Poly, tau: Fraction) -> Poly:
    """``poly * (1 + s tau)``."""
    out = [*poly, Fraction(0)]
    for k, coeff in enumerate(poly):
        out[k + 1] += coeff * tau
    return out


def foster_polynomials(foster: Foster) -> tuple[Poly, Poly]:
    """``(N, D)`` exactly, with Zth(s) = N(s)/D(s), deg N = n - 1 and deg D = n."""
    stages = [(Fraction(r), Fraction(tau)) for r, tau in foster.stages]
    den: Poly = [Fraction(1)]
    num: Poly = [Fraction(0)]
    for r, tau in stages:
        # N/D + r/(1 + s tau) = (N (1 + s tau) + r D) / (D (1 + s tau))
        num = _mul_linear(num, tau)
        for k, coeff in enumerate(den):
            num[k] += r * coeff
        den = _mul_linear(den, tau)
    return num[:-1], den


def _strip(poly: Poly) -> Poly:
    while poly and poly[-1] == 0:
        poly = poly[:-1]
    return poly


def foster_to_cauer(foster: Foster) -> Cauer:
    """The Cauer ladder with the Foster network's impedance (Cauer I synthesis)."""
    num, den = foster_polynomials(foster)
    admittance_num, admittance_den = den, num  # Y = D / N
    stages: list[tuple[float, float]] = []
    for _ in foster.stages:
        # Y = s C + Y'  with C the ratio of leading coefficients.
        cap = admittance_num[-1] / admittance_den[-1]
        shifted = [Fraction(0), *(cap * c for c in admittance_den)]
        rest = _strip([a - b for a, b in zip(admittance_num, shifted, strict=True)])
        # 1/Y' = admittance_den / rest = R + Z''.
        res = admittance_den[-1] / rest[-1]
        padded = [*rest, *([Fraction(0)] * (len(admittance_den) - len(rest)))]
        remainder = _strip([a - res * b for a, b in zip(admittance_den, padded, strict=True)])
        if cap <= 0 or res <= 0:
            raise NetworkError(
                "the Foster network does not give a passive Cauer ladder",
                hint="check that every Foster rth and tau is positive",
            )
        stages.append((float(res), float(cap)))
        admittance_num, admittance_den = rest, remainder
    return Cauer(tuple(stages))


def cauer_to_foster(cauer: Cauer) -> Foster:
    """The Foster network with the Cauer ladder's impedance (partial fractions)."""
    return Foster(cauer.foster_pairs())


def to_foster(network: NetworkForm) -> Foster:
    """The equivalent Foster network of any form (same impedance at every frequency)."""
    return network if isinstance(network, Foster) else Foster(network.foster_pairs())


def to_cauer(network: NetworkForm) -> Cauer:
    """The equivalent Cauer ladder of any form (same impedance at every frequency)."""
    if isinstance(network, Cauer):
        return network
    if isinstance(network, Single):
        return network.ladder()
    return foster_to_cauer(to_foster(network))
