"""Card forms for an annotated resistor in a standalone electrothermal deck.

An annotated resistor ``R a b R0`` becomes cards that carry the current a -> b through
R(T), with T the voltage of its hot-spot node, and (when heating) inject its dissipation
V(a,b)^2 / R(T) as a current from node 0 into that node.  The forms differ only in how
ngspice evaluates those same equations:

* ``reference``: two behavioural sources per part, ``I = V(a,b)/(R(T))`` and
  ``I = V(a,b)*V(a,b)/(R(T))``; general, and the yardstick for the others;
* ``switch``: the current through an XSPICE ``aswitch`` with ``log=FALSE``, whose
  resistance is linear in its control input and not limited outside the control range
  (ngspice manual 12.2.11), and the dissipation V * I from an XSPICE ``mult`` whose inputs
  are V(a,b) and the element current.  A linear model drives the switch from the hot node
  directly: r = R0 + R0 tc1 (T - tref) is the switch's own line through two points.  When
  heating, a plain resistor Rc in series with a switch of R(T) - Rc (still a line in T)
  carries the current, read as V(a,x)/Rc across the resistor: one node more per part
  instead of a node and the branch of a 0 V sense, which ngspice's matrix factors and
  solves measurably faster (benchmarks/bench_standalone.py).  The switch's resistance is
  zero where R(T) = Rc, so Rc sits on the cold side, away from where self-heating goes:
  R0/8 for tc1 > 0 (exact above tref - 7/(8 tc1), -199 degC for copper's 0.0039 /K), -R0
  for tc1 < 0 (R(T) = -R0 lies beyond the model's own zero R(T) = 0, where the reference
  cards fail as well).  Rc = R0/8 rather than -R0 where it can: the switch then sees less
  than V(a,b), and XSPICE limits each code-model input's change per Newton iteration to
  the larger of 0.1 and a quarter of its value (ngspice's convabsstep and convstep), so
  larger inputs cost iterations near the zero crossings of an AC voltage.  An exponential
  model (R0 exp(k dT), ngspice's ``tce``) drives a ``log=TRUE`` switch, whose logarithm is
  linear in its control, and reads the current with a ``%id`` current input (a 0 V sense).
  A quadratic model drives a unit switch
  (r = control) from a ``POLY(1)`` source of T - tref (compiled, an XSPICE model in ngspice)
  into a 1 ohm resistor; any other model drives it from a behavioural voltage source
  ``V = R(T)`` written with the model's own expression.
  Without a temperature coefficient the current flows in a plain resistor and the
  dissipation is ``mult`` of V(a,b) with itself times 1/R0;
* ``divider``: the three-code-model form (``divide`` for the current, ``mult`` for V^2,
  ``divide`` again for the dissipation), for linear models only; other models get the
  reference cards.

Names: elements ``Ahw_r_<name>``, ``Ahw_p_<name>``, ``Ahw_q_<name>``, ``Bhw_v_<name>``,
``Rhw_c_<name>`` (the constant resistance, or the fixed Rc; never ``Rhw_<name>``,
which a network's ``Rhw_<part>_1`` could equal);
``Ghw_v_<name>``, ``Rhw_g_<name>``, the shared ``Vhw_tref_<digest>``; nodes ``hw_x_<name>``
(between the switch and its current sense or the fixed Rc), ``hw_r_<name>`` (the
resistance as a voltage), ``hw_q_<name>`` (V^2 in the divider form), ``hw_tref_<digest>``;
``.model`` names ``hw_<kind>_<digest>``, a digest of the parameters, so parts with equal
parameters share one card.  Every deck with an XSPICE device runs its transient with
``trtol = 1`` (ngspice sets that itself whatever the deck says, manual 15.1.4).
"""

from __future__ import annotations

import functools
import hashlib
import math
import re
from abc import ABC, abstractmethod
from collections.abc import Iterable
from typing import ClassVar

from heatweave.tempmodels.base import TempModel
from heatweave.tempmodels.exponential import Exponential
from heatweave.tempmodels.linear import Polynomial
from heatweave.thermal.circuit import PREFIX

# Product of the two inputs, the dissipation V * I (or V^2 in the divider form).
PRODUCT_MODEL = f"{PREFIX}vi"
# Resistance equal to the control voltage: r = 0 + (1 - 0) (c - 0) / (1 - 0).
UNIT_SWITCH_MODEL = f"{PREFIX}unit"


def _num(value: float) -> str:
    """A number with full double precision: ``.model`` values are parsed as written."""
    return repr(float(value))


@functools.cache  # the part's cards and the shared .model cards ask for the same digests
def _digest(*values: float) -> str:
    return hashlib.sha256(" ".join(_num(v) for v in values).encode()).hexdigest()[:10]


def _linear(model: TempModel) -> tuple[float, float, float] | None:
    """(R0, tref, tc1) when R(T) is a polynomial of degree at most one in T."""
    if isinstance(model, Polynomial) and model.tc2 == 0.0:
        return model.r0, model.tref, model.tc1
    return None


def _constant(model: TempModel) -> float | None:
    """R when it does not depend on T (no temperature coefficient), else None."""
    if isinstance(model, Polynomial) and model.tc1 == 0.0 and model.tc2 == 0.0:
        return model.r0
    if isinstance(model, Exponential) and model.tce == 0.0:
        return model.r0
    return None


def _direct(model: TempModel) -> tuple[float, float, float, bool] | None:
    """(R0, tref, rate, log) when an ``aswitch`` driven by T itself gives R(T) exactly:
    linear (r = R0 + rate dT, rate = R0 tc1) or exponential (r = R0 exp(rate dT))."""
    line = _linear(model)
    if line is not None:
        return line[0], line[1], line[0] * line[2], False
    if isinstance(model, Exponential):
        return model.r0, model.tref, model.tce * math.log(1.01), True
    return None


# The fixed resistor in series with a linear model's switch, in units of R0 (heating only),
# for tc1 > 0 and tc1 < 0: powers of two, so that R0 * share and R0 * (1 - share) are exact.
SHARE_RISING, SHARE_FALLING = 0.125, -1.0


def _product_name(resistance: float) -> str:
    """The ``mult`` model V * V' / *resistance* (two inputs, unit gains)."""
    return f"{PREFIX}sq_{_digest(resistance)}"


def _product_card(resistance: float) -> str:
    gain = _num(1.0 / resistance)
    return f".model {_product_name(resistance)} mult(in_gain=[1 1] out_gain={gain})"


def _shared(model: TempModel) -> float | None:
    """The fixed resistance Rc (R0 times SHARE_RISING or SHARE_FALLING, by the sign of tc1)
    when the switch form splits *model*'s R(T) into it and a switch (linear, tc1 != 0)."""
    line = _linear(model)
    if line is None or line[2] == 0.0:
        return None
    return line[0] * (SHARE_RISING if line[2] > 0.0 else SHARE_FALLING)


def _switch_card(name: str, r0: float, tref: float, rate: float, log: bool) -> str:
    """An ``aswitch`` model through (tref, R0) and a second point (ngspice manual 12.2.11:
    with log=FALSE r is linear in the control, with log=TRUE its logarithm is; neither is
    limited outside the two points)."""
    if log:
        # Where R doubles (or halves): ln(r_on/r_off) is then ln 2 up to rounding.
        span = math.log(2.0) / abs(rate)
        r_on = r0 * (2.0 if rate > 0 else 0.5)
    else:
        # Where R is 1.5 R0 (or 0.5 R0): far enough for a well-rounded slope.
        span = 0.5 * r0 / abs(rate)
        r_on = r0 + rate * span
    return (
        f".model {name} aswitch(cntl_off={_num(tref)} cntl_on={_num(tref + span)} "
        f"r_off={_num(r0)} r_on={_num(r_on)} log={'TRUE' if log else 'FALSE'})"
    )


def _tref_node(tref: float) -> str:
    """The node a shared source holds at *tref*: a polynomial's argument is T - tref."""
    return f"{PREFIX}tref_{_digest(tref)}"


class CardForm(ABC):
    """One way of writing an annotated resistor's cards."""

    name: ClassVar[str]
    summary: ClassVar[str]

    @abstractmethod
    def cards(
        self, name: str, a: str, b: str, hot: str, model: TempModel, heating: bool
    ) -> list[str]:
        """The element lines replacing ``R a b R0``; *name* is the part's safe name."""

    def models(self, model: TempModel, heating: bool = True) -> list[str]:
        """The ``.model`` cards the part's elements refer to (with or without heating)."""
        return []

    def nodes(self, name: str, model: TempModel, heating: bool) -> tuple[str, ...]:
        """The node names the cards add (the hot node is the caller's)."""
        return ()

    def branches(self, name: str, model: TempModel, heating: bool) -> tuple[str, ...]:
        """The elements of the cards that ngspice gives a branch current (a voltage source,
        a code model driving a voltage output), whose currents a plot holds."""
        return ()

    def handles(self, model: TempModel) -> bool:
        """False when this form writes the reference cards for *model*."""
        return True


class Reference(CardForm):
    """Two behavioural sources per part, as the emitter writes them."""

    name: ClassVar[str] = "reference"
    summary: ClassVar[str] = "two behavioural sources per part: I = V/R(T) and I = V^2/R(T)"

    def cards(
        self, name: str, a: str, b: str, hot: str, model: TempModel, heating: bool
    ) -> list[str]:
        r_expr = model.expression(f"V({hot})")
        v = f"V({a},{b})"
        lines = [f"B{PREFIX}{name} {a} {b} I = {v}/({r_expr})"]
        if heating:
            lines.append(f"B{PREFIX}p_{name} 0 {hot} I = {v}*{v}/({r_expr})")
        return lines


class Switch(CardForm):
    """XSPICE ``aswitch`` for the current, ``mult`` for the dissipation V * I."""

    name: ClassVar[str] = "switch"
    summary: ClassVar[str] = (
        "XSPICE aswitch (R linear in its control) carries I, XSPICE mult injects V*I"
    )

    def cards(
        self, name: str, a: str, b: str, hot: str, model: TempModel, heating: bool
    ) -> list[str]:
        constant = _constant(model)
        if constant is not None:
            lines = [f"R{PREFIX}c_{name} {a} {b} {_num(constant)}"]
            if heating:
                square = _product_name(constant)
                lines.append(f"A{PREFIX}p_{name} [%vd({a} {b}) %vd({a} {b})] %id(0 {hot}) {square}")
            return lines
        share = _shared(model) if heating else None
        if share is not None:
            # I = V(a,x)/Rc through Rc + (R(T) - Rc); the dissipation V(a,b) * I.  For tc1 < 0
            # Rc is -R0, a negative fixed resistor, on purpose: only the sum Rc + switch is a
            # branch of the circuit, and it is R(T) exactly (the switch is R(T) + R0, still a
            # line in T); Rc's own sign never reaches the user.  Checked with stock ngspice 39
            # against the reference form (tc1 = -0.004, 150 K/W: hot-spot temperature and
            # V/I equal to 7 digits over a pulsed 24 s transient and a reversed-polarity .op,
            # 83.92899 degC, as brentq on T = Ta + Rth P(T) gives) and by the STEEP cases of
            # tests/test_emitforms.py.
            x, switch = f"{PREFIX}x_{name}", self._switch_name(self._rest(model))
            product = _product_name(share)
            return [
                f"R{PREFIX}c_{name} {a} {x} {_num(share)}",
                f"A{PREFIX}r_{name} %v({hot}) %gd({x} {b}) {switch}",
                f"A{PREFIX}p_{name} [%vd({a} {b}) %vd({a} {x})] %id(0 {hot}) {product}",
            ]
        direct = _direct(model)
        if direct is not None:
            control, switch = f"%v({hot})", self._switch_name(direct)
            lines = []
        elif isinstance(model, Polynomial):
            node = f"{PREFIX}r_{name}"
            control, switch = f"%v({node})", UNIT_SWITCH_MODEL
            coefficients = " ".join(_num(model.r0 * c) for c in (1.0, model.tc1, model.tc2))
            lines = [
                f"G{PREFIX}v_{name} 0 {node} POLY(1) {hot} {_tref_node(model.tref)} {coefficients}",
                f"R{PREFIX}g_{name} {node} 0 1",
            ]
        else:
            node = f"{PREFIX}r_{name}"
            control, switch = f"%v({node})", UNIT_SWITCH_MODEL
            lines = [f"B{PREFIX}v_{name} {node} 0 V = {model.expression(f'V({hot})')}"]
        if not heating:
            return [*lines, f"A{PREFIX}r_{name} {control} %gd({a} {b}) {switch}"]
        sense = f"{PREFIX}x_{name}"
        return [
            *lines,
            f"A{PREFIX}r_{name} {control} %gd({sense} {b}) {switch}",
            f"A{PREFIX}p_{name} [%vd({a} {b}) %id({a} {sense})] %id(0 {hot}) {PRODUCT_MODEL}",
        ]

    def models(self, model: TempModel, heating: bool = True) -> list[str]:
        constant = _constant(model)
        if constant is not None:
            return [_product_card(constant)] if heating else []
        share = _shared(model) if heating else None
        if share is not None:
            rest = self._rest(model)
            return sorted({_switch_card(self._switch_name(rest), *rest), _product_card(share)})
        product = [f".model {PRODUCT_MODEL} mult(in_gain=[1 1] out_gain=1)"] if heating else []
        direct = _direct(model)
        if direct is not None:
            return [_switch_card(self._switch_name(direct), *direct), *product]
        extra = []
        if isinstance(model, Polynomial):
            held = _tref_node(model.tref)
            extra = [f"V{held} {held} 0 DC {_num(model.tref)}"]
        unit = f".model {UNIT_SWITCH_MODEL} aswitch(cntl_off=0 cntl_on=1 r_off=0 r_on=1 log=FALSE)"
        return [*extra, unit, *product]

    def nodes(self, name: str, model: TempModel, heating: bool) -> tuple[str, ...]:
        if _constant(model) is not None:
            return ()
        if _shared(model) is not None:
            return (f"{PREFIX}x_{name}",) if heating else ()
        added: tuple[str, ...] = ()
        if _direct(model) is None:
            added = (f"{PREFIX}r_{name}",)
            if isinstance(model, Polynomial):
                added = (*added, _tref_node(model.tref))
        return (*added, f"{PREFIX}x_{name}") if heating else added

    @staticmethod
    def _rest(model: TempModel) -> tuple[float, float, float, bool]:
        """The switch beside the fixed resistor: R(T) - Rc, the same slope."""
        line, share = _linear(model), _shared(model)
        assert line is not None and share is not None
        r0, tref, tc1 = line
        return r0 - share, tref, r0 * tc1, False

    @staticmethod
    def _switch_name(direct: tuple[float, float, float, bool]) -> str:
        r0, tref, rate, log = direct
        return f"{PREFIX}sw_{_digest(r0, tref, rate, float(log))}"


class Divider(CardForm):
    """XSPICE ``divide`` for I = V/R(T); ``mult`` and ``divide`` for V^2/R(T)."""

    name: ClassVar[str] = "divider"
    summary: ClassVar[str] = "XSPICE divide for I, mult + divide for V^2/R(T); linear models only"

    def handles(self, model: TempModel) -> bool:
        line = _linear(model)
        return line is not None and line[2] != 0.0

    def cards(
        self, name: str, a: str, b: str, hot: str, model: TempModel, heating: bool
    ) -> list[str]:
        line = _linear(model)
        if line is None or line[2] == 0.0:
            return Reference().cards(name, a, b, hot, model, heating)
        divide = f"{PREFIX}div_{_digest(*line)}"
        lines = [f"A{PREFIX}r_{name} %vd({a} {b}) %v({hot}) %id({a} {b}) {divide}"]
        if heating:
            square = f"{PREFIX}q_{name}"
            lines.append(
                f"A{PREFIX}q_{name} [%vd({a} {b}) %vd({a} {b})] %v({square}) {PRODUCT_MODEL}"
            )
            lines.append(f"A{PREFIX}p_{name} %v({square}) %v({hot}) %id(0 {hot}) {divide}")
        return lines

    def models(self, model: TempModel, heating: bool = True) -> list[str]:
        line = _linear(model)
        if line is None or line[2] == 0.0:
            return []
        r0, tref, tc1 = line
        # The divider forms (den + den_offset) * den_gain: R0 tc1 (T + (1 - tref tc1)/tc1).
        card = (
            f".model {PREFIX}div_{_digest(*line)} divide(num_gain=1 den_gain={_num(r0 * tc1)} "
            f"den_offset={_num((1.0 - tref * tc1) / tc1)} den_lower_limit=1e-12 "
            "den_domain=1e-15 fraction=false out_gain=1)"
        )
        product = f".model {PRODUCT_MODEL} mult(in_gain=[1 1] out_gain=1)"
        return [card, product] if heating else [card]

    def nodes(self, name: str, model: TempModel, heating: bool) -> tuple[str, ...]:
        return (f"{PREFIX}q_{name}",) if heating and self.handles(model) else ()

    def branches(self, name: str, model: TempModel, heating: bool) -> tuple[str, ...]:
        return (f"A{PREFIX}q_{name}",) if heating and self.handles(model) else ()  # %v(square)


_REGISTRY: dict[str, CardForm] = {form.name: form for form in (Reference(), Switch(), Divider())}

#: The available forms, each with a one-line description.
FORMS: dict[str, str] = {name: form.summary for name, form in _REGISTRY.items()}


def get_form(form: str) -> CardForm:
    """The form registered as *form*; ValueError naming the known forms otherwise."""
    try:
        return _REGISTRY[form]
    except KeyError:
        raise ValueError(f"unknown card form {form!r}; known: {', '.join(FORMS)}") from None


def resistor_cards(
    form: str, name: str, a: str, b: str, hot: str, model: TempModel, heating: bool
) -> list[str]:
    """The netlist lines that replace the annotated resistor ``R a b R0`` in *form*."""
    return get_form(form).cards(name, a, b, hot, model, heating)


def preamble(form: str, models: Iterable[TempModel], heating: bool = True) -> list[str]:
    """The shared ``.model`` cards the parts with *models* need, each once, sorted."""
    chosen = get_form(form)
    return sorted({card for model in models for card in chosen.models(model, heating)})


# Any line that starts an XSPICE instance (after blanks, in lower case), and the options
# that set the Newton-step limit on code-model inputs.
_CODE_MODEL_LINE = re.compile(r"\n[ \t]*a")
_STEP_OPTIONS = ("convstep", "convabsstep")
#: The option card that lifts that limit, and the comment line written above it.
STEP_LIMIT_OPTION = ".options convabsstep=1e30"
STEP_LIMIT_NOTE = (
    "* code models of heatweave only (aswitch, mult): no Newton-step limit on their inputs"
)
#: Written above the shared ``.model`` cards of a form that writes code models.
TRTOL_NOTE = (
    "* with code models ngspice runs transients at trtol=1 whatever .options say (manual\n"
    "* 15.1.4): where truncation error sets the step, more time points than the plain deck"
)


def step_limit_options(
    form: str, files: Iterable[tuple[str, bool]], *, folded: bool = False
) -> list[str]:
    """The lines that lift XSPICE's limit on how far a code-model input may move in one
    Newton iteration, when *form* writes code models and the deck's *files* (text, and
    whether its first line is a title) hold none of their own and set neither option.

    ngspice limits each code-model input's change per Newton iteration by an absolute and
    a relative step (options ``convabsstep`` and ``convstep``, manual 15.1.4); as measured
    on ngspice 39 the larger of the two applies.  The switch and divider forms' models are
    linear or bilinear in their inputs, so Newton needs no such limit (the reference form's
    behavioural sources have none); it only costs iterations when an AC drive crosses zero
    (8 % more on the benchmark chain).  Where the deck has code models or step options of
    its own, the option would change them too, so it is left out.  *folded*: the texts
    are in lower case already."""
    if form == "reference":
        return []
    for text, titled in files:
        low = text if folded else text.lower()
        if any(option in low for option in _STEP_OPTIONS) or _CODE_MODEL_LINE.search(low):
            return []
        if not titled and low.lstrip(" \t").startswith("a"):
            return []
    return [STEP_LIMIT_NOTE, STEP_LIMIT_OPTION]


def added_nodes(form: str, name: str, model: TempModel, heating: bool) -> tuple[str, ...]:
    """The nodes :func:`resistor_cards` adds for one part (for the name-collision check)."""
    return get_form(form).nodes(name, model, heating)


def added_branches(form: str, name: str, model: TempModel, heating: bool) -> tuple[str, ...]:
    """The elements :func:`resistor_cards` adds that carry a branch current."""
    return get_form(form).branches(name, model, heating)


def shared_nodes(
    form: str, models: Iterable[TempModel], heating: bool = True
) -> tuple[str, ...]:
    """The top-level nodes :func:`preamble`'s cards drive (``hw_tref_*``), sorted; parts
    inside subcircuit copies reach them only when they are ``.global``."""
    found = {node for card in preamble(form, models, heating) if not card.startswith(".")
             for node in card.split()[1:2]}  # fmt: skip
    return tuple(sorted(found))
