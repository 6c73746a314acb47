"""The thermal network's exact response to power sampled at a simulator's time points.

The co-simulation holds each resistance over a window, but the power inside the window is
whatever ngspice computed at its own time points: a sine's ripple, an inrush, a PWM edge.
Between two samples the input is taken as the straight line through them (the same input
the trapezoid rule integrates for the window's mean), and the linear ODE
``dz/dt = A z + B u`` is solved exactly for it, mode by mode (``A = V diag(rates) V^-1``).
Over a step of ``dt`` with ``x = rate * dt`` and modal forcing ``f`` (``V^-1 B u``)::

    w(t + dt) = e^x w(t) + dt (f(t) (phi1(x) - phi2(x)) + f(t + dt) phi2(x))

with ``phi1(x) = (e^x - 1) / x`` and ``phi2(x) = (e^x - 1 - x) / x^2``: the variation of
constants formula integrated for a linear input.  A window's steps are summed at once,
``w_k = E_k (w_0 + sum_{i<k} beta_i / E_{i+1})`` with ``E_k = e^{rate (t_k - t_0)}``, in
stretches short enough (:data:`SPAN` of the fastest time constant) that ``1 / E`` cannot
overflow.  This is the window mean's response plus the ripple's response, by superposition
(the network is linear), so every temperature at every sample is the network's state for
the power ngspice computed, and its largest value is the instantaneous peak.

For speed the arithmetic runs on arrays of samples x modes (a running sum down the rows
of such an array is a vector add per row), a stretch fitting the processor's cache; a
simulator repeats a few step lengths, so the step weights are computed once per distinct
length in a window, and a stretch of equal steps (most of them) takes ``beta``'s weights
over ``E`` and ``E`` itself from tables kept per step length; the sparse matrices
``V^-1 B`` and ``C V`` are applied as a few column blocks or gathers (:class:`SparseRows`).
The engine asks only for each output's peak and last value (:meth:`SampledResponse.peaks`).
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import numpy.typing as npt

from heatweave.thermal.solver import Propagator

FloatArray = npt.NDArray[np.float64]
IndexArray = npt.NDArray[np.intp]

#: A stretch of one summation spans at most this many of the fastest time constants.
SPAN = 30.0
#: A stretch's arrays (steps x modes) hold about this many numbers (a few 100 kB).
CACHE_WORDS = 32768
#: Below this |x| the phi functions come from their series (their formulas cancel).
SERIES_BELOW = 0.05
#: At most this many step lengths' tables are kept (:meth:`SampledResponse.even`).
EVEN_KEPT = 16

#: A window's distinct step lengths, and per length (rows) and mode: ``e^x``, and the
#: weights of a step's start and end samples.
Weights = tuple[FloatArray, FloatArray, FloatArray, FloatArray]


class SparseRows:
    """A matrix ``M`` with few nonzeros a row, applied to samples in rows: ``X -> X M^T``.

    Row ``r``'s ``k``-th nonzero goes into slot ``k``; a slot is one product and one sum
    over all rows that have that many nonzeros (the rows are taken in the order of
    decreasing count, so each slot's rows are a leading block), on a block of columns of
    ``X`` when the slot's columns run consecutively, on one column when they are all the
    same, else on a gather of them.  The sum of a row runs over its nonzeros in column
    order, from zero, as a CSR product's does.
    """

    def __init__(self, matrix: FloatArray) -> None:
        m = np.asarray(matrix, dtype=np.float64)
        self.rows, self.columns = int(m.shape[0]), int(m.shape[1])
        counts = np.count_nonzero(m, axis=1)
        order = np.argsort(-counts, kind="stable")
        #: Where each row ended up, when the order is not the natural one.
        self.back: IndexArray | None = None
        if np.any(order != np.arange(self.rows)):
            self.back = np.argsort(order)
        where_row, where_col = np.nonzero(m[order])
        starts = np.searchsorted(where_row, np.arange(self.rows))
        rank = np.arange(where_row.shape[0]) - starts[where_row]  # k of each nonzero
        self.slots: list[tuple[slice | int | IndexArray, FloatArray]] = []
        for k in range(int(counts.max(initial=0))):
            pick = rank == k  # rows in order, so these are rows 0 .. size - 1
            cols = where_col[pick]
            values = m[order[where_row[pick]], cols]
            first = int(cols[0])
            if np.all(cols == first):
                self.slots.append((first, values))
            elif np.array_equal(cols, np.arange(first, first + cols.shape[0])):
                self.slots.append((slice(first, first + cols.shape[0]), values))
            else:
                self.slots.append((cols, values))

    def apply(self, x: FloatArray) -> FloatArray:
        """``x M^T`` for *x* of samples x columns: samples x rows."""
        out: FloatArray | None = None
        for cols, values in self.slots:
            if isinstance(cols, int):
                term = np.multiply.outer(x[:, cols], values)
            elif isinstance(cols, slice):
                term = x[:, cols] * values
            else:
                term = np.take(x, cols, axis=1)
                term *= values
            size = values.shape[0]
            if out is None and size == self.rows:
                out = term
                continue
            if out is None:
                out = np.zeros((x.shape[0], self.rows))
            out[:, :size] += term
        if out is None:
            return np.zeros((x.shape[0], self.rows))
        return out if self.back is None else np.take(out, self.back, axis=1)


class SampledResponse:
    """The exact response of a :class:`~heatweave.thermal.solver.ThermalSystem` to
    piecewise-linear inputs, through the modes of its :class:`Propagator`.

    Raises ``ValueError`` when the propagator has no well-conditioned modes
    (:attr:`Propagator.modes` is ``None``)."""

    def __init__(self, propagator: Propagator) -> None:
        modes = propagator.modes
        if modes is None:
            raise ValueError("the thermal network has no well-conditioned modes")
        system = propagator.system
        rates, vectors, inverse = modes
        forcing = inverse @ system.b
        # Modes by decreasing number of inputs, so that the forcing's slots need no
        # reordering (the modes' order is free).
        order = np.argsort(-np.count_nonzero(forcing, axis=1), kind="stable")
        self.rates = np.ascontiguousarray(rates[order])
        self.vectors = np.ascontiguousarray(vectors[:, order])
        self.inverse = np.ascontiguousarray(inverse[order])
        self.forcing = SparseRows(forcing[order])
        self.readout = SparseRows(system.c @ self.vectors)
        self.direct = SparseRows(system.d) if np.any(system.d != 0.0) else None
        self.outputs = int(system.c.shape[0])
        self.fastest = float(np.max(-self.rates)) if self.rates.size else 0.0
        # Steps per stretch: a stretch's arrays stay within the processor's cache.
        self.chunk = max(16, CACHE_WORDS // max(self.rates.size, 1))
        self._even: dict[float, tuple[FloatArray, FloatArray, FloatArray]] = {}

    def run(
        self, z0: FloatArray, times: FloatArray, inputs: FloatArray
    ) -> tuple[FloatArray, FloatArray]:
        """``(state at the last time, outputs at every time)`` from state *z0* at
        ``times[0]``, for *inputs* (one column of ``u`` per time, straight lines between).
        The outputs have one row per output (a view of an array of samples x outputs)."""
        outputs = np.empty((times.shape[0], self.outputs))

        def store(start: int, block: FloatArray) -> None:
            outputs[start : start + block.shape[0]] = block

        return self._sweep(z0, times, inputs, store), outputs.T

    def peaks(
        self, z0: FloatArray, times: FloatArray, inputs: FloatArray
    ) -> tuple[FloatArray, FloatArray, FloatArray]:
        """``(state at the last time, outputs there, each output's largest value at any
        time)``: what :meth:`run` gives, without keeping every output."""
        top = np.full(self.outputs, -np.inf)
        last = [top]

        def note(start: int, block: FloatArray) -> None:
            np.maximum(top, block.max(axis=0), out=top)
            last[0] = block[-1]

        state = self._sweep(z0, times, inputs, note)
        return state, np.array(last[0]), top

    def _sweep(
        self,
        z0: FloatArray,
        times: FloatArray,
        inputs: FloatArray,
        sink: Callable[[int, FloatArray], None],
    ) -> FloatArray:
        """Hand *sink* the outputs stretch by stretch (first sample's index, samples x
        outputs, every sample once); return the state at the last time.  *inputs* may be
        either memory order: a stretch of it is copied into samples x inputs."""
        samples = inputs.T
        w = self.inverse @ np.asarray(z0, dtype=np.float64)
        n = times.shape[0]
        if self.rates.size == 0 or n < 2:
            sink(0, self._outputs(w[None, :], np.ascontiguousarray(samples[:1])))
            return np.asarray(self.vectors @ w)
        lengths, which = np.unique(np.diff(times), return_inverse=True)
        weights = self.weights(lengths)
        start, last = 0, n - 1
        while start < last:
            stop = self.stretch_end(times, start)
            part = np.ascontiguousarray(samples[start : stop + 1])
            forcing = self.forcing.apply(part)
            states = self.stretch(w, times[start : stop + 1], forcing, weights, which[start:stop])
            skip = 0 if start == 0 else 1  # the stretch's first sample ended the last one
            sink(start + skip, self._outputs(states[skip:], part[skip:]))
            w = states[-1]
            start = stop
        return np.asarray(self.vectors @ w)

    def _outputs(self, states: FloatArray, inputs: FloatArray) -> FloatArray:
        """The outputs (samples x outputs) for modal *states* and *inputs* (samples x)."""
        out = self.readout.apply(states)
        if self.direct is not None:
            out += self.direct.apply(inputs)
        return out

    def stretch_end(self, times: FloatArray, start: int) -> int:
        """The last sample of the stretch from *start*: at least one step, at most
        :data:`SPAN` fastest time constants and :attr:`chunk` steps long."""
        last = int(times.shape[0]) - 1
        if start >= last:
            return last
        limit = times[start] + SPAN / self.fastest
        stop = int(np.searchsorted(times, limit, side="right")) - 1
        return int(min(max(stop, start + 1), last, start + self.chunk))

    def weights(self, lengths: FloatArray) -> Weights:
        """Per distinct step length (rows) and mode (columns): the lengths, ``e^x`` and the
        weights of a step's two end samples, ``dt (phi1 - phi2)`` and ``dt phi2``."""
        x = np.multiply.outer(lengths, self.rates)
        first, second = step_weights(x)
        first *= lengths[:, None]
        second *= lengths[:, None]
        return lengths, np.exp(x), first, second

    def even(self, weights: Weights, row: int) -> tuple[FloatArray, FloatArray, FloatArray]:
        """For a run of steps all of length ``lengths[row]``: step ``k``'s end weights
        divided by ``E_{k+1}``, and ``E_{k+1} = e^{rate (k+1) dt}`` itself (steps x modes),
        as far as a stretch can reach.  Kept per step length: a simulator steps mostly at
        a few lengths, so these are made once and each stretch only multiplies and sums."""
        dt = float(weights[0][row])
        found = self._even.get(dt)
        if found is None:
            rows = min(self.chunk, int(SPAN / (self.fastest * dt)) + 1)  # e^x >= e^-2 SPAN
            growth = np.exp(np.multiply.outer(np.arange(1.0, rows + 1.0) * dt, self.rates))
            found = (weights[2][row] / growth, weights[3][row] / growth, growth)
            if len(self._even) >= EVEN_KEPT:
                self._even.clear()
            self._even[dt] = found
        return found

    def stretch(
        self,
        w0: FloatArray,
        times: FloatArray,
        forcing: FloatArray,
        weights: Weights,
        which: IndexArray,
    ) -> FloatArray:
        """Modal states (samples x modes) over one stretch from *w0* at ``times[0]`` (see
        the module docstring); step ``k`` has the weights of row ``which[k]``."""
        _, decay, first, second = weights
        states = np.empty((times.shape[0], w0.shape[0]))
        states[0] = w0
        rest = states[1:]
        steps = which.shape[0]
        if steps == 1:  # one step: no running sum (e^x may underflow to 0)
            k = int(which[0])
            np.multiply(decay[k], w0, out=rest[0])
            rest[0] += first[k] * forcing[0] + second[k] * forcing[1]
            return states
        if which[0] == which[-1] and np.all(which == which[0]):
            early, late_weight, growth = self.even(weights, int(which[0]))
            if growth.shape[0] >= steps:
                np.multiply(forcing[:-1], early[:steps], out=rest)
                rest += forcing[1:] * late_weight[:steps]  # beta_k / E_{k+1}
                np.cumsum(rest, axis=0, out=rest)
                rest += w0
                rest *= growth[:steps]
                return states
        np.take(first, which, axis=0, out=rest)
        rest *= forcing[:-1]
        late = np.take(second, which, axis=0)
        late *= forcing[1:]
        rest += late
        growth = np.multiply.outer(times[1:] - times[0], self.rates, out=late)
        np.exp(growth, out=growth)  # E_k >= e^-SPAN
        rest /= growth  # beta_k / E_{k+1}
        np.cumsum(rest, axis=0, out=rest)
        rest += w0
        rest *= growth
        return states


def step_weights(x: FloatArray) -> tuple[FloatArray, FloatArray]:
    """``phi1(x) - phi2(x)`` and ``phi2(x)`` (1/2 and 1/2 at 0) with
    ``phi1(x) = (e^x - 1) / x`` and ``phi2(x) = (e^x - 1 - x) / x^2``: the weights of a
    step's two end samples.  Their Taylor series where the formulas would cancel, with as
    many terms as the largest ``|x|`` needs for full double precision."""
    small = np.abs(x) < SERIES_BELOW
    top = float(np.max(np.abs(x), where=small, initial=0.0))
    terms = 1
    while terms < 12 and top**terms / math.factorial(terms + 2) > 1e-16:
        terms += 1
    # phi2 = sum x^j / (j+2)!, phi1 - phi2 = sum x^j (j+1) / (j+2)!, by Horner's rule
    first = x * (terms / math.factorial(terms + 1))
    second = x * (1 / math.factorial(terms + 1))
    for j in range(terms - 1, -1, -1):
        first += (j + 1) / math.factorial(j + 2)
        second += 1 / math.factorial(j + 2)
        if j:
            first *= x
            second *= x
    if not small.all():
        big = ~small
        xb = x[big]
        em1 = np.expm1(xb)
        two = (em1 - xb) / (xb * xb)
        first[big] = em1 / xb - two
        second[big] = two
    return first, second
