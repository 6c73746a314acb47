"""Brace expressions as ngspice 39's front end evaluates them (manual 2.9.5, 2.10).

``{...}`` and ``'...'`` values are evaluated once, before the simulation, from ``.param``
values and ``.func`` definitions.  The rules here were held against ngspice 39.3 itself
(``tests/test_expressions.py`` runs it): ``-2^2`` is -4 and ``2^3^2`` is 64 (``^``/``**``
bind tighter than unary minus and group from the left), comparisons, ``!``, ``&&`` and
``||`` give 1 or 0, ``c ? a : b`` picks by ``c != 0``, ``nint`` rounds half to even,
``^``, ``**`` and ``pwr`` take ``|x|`` (``(-2)^3`` is 8) while ``pow`` does not,
``log`` is the natural logarithm, ``pi`` is not defined,
a unary ``+`` is not accepted.  Random functions (``gauss``, ``unif``, ``limit``...) and
what follows the circuit (``v()``, ``i()``, ``time``, ``temper``, ``hertz``) have no single
value: they are refused with :class:`ExprError` saying which construct and why.
"""

from __future__ import annotations

import itertools
import math
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass

from heatweave.quantities import parse_number


class ExprError(Exception):
    """An expression heatweave cannot give one value; ``offset`` is 0-based in its text.

    ``kind``: ``syntax`` (ngspice rejects it too), ``undefined`` (a name no ``.param``
    defines), ``runtime`` (follows the circuit), ``random``, ``math`` (no finite value),
    ``unsupported`` (ngspice may accept it; heatweave does not evaluate it).
    """

    def __init__(self, kind: str, offset: int, message: str, hint: str = "") -> None:
        super().__init__(message)
        self.kind = kind
        self.offset = offset
        self.message = message
        self.hint = hint


@dataclass(frozen=True, slots=True)
class Func:
    """A ``.func name(args) {body}`` definition (2.10), names in lower case."""

    name: str
    args: tuple[str, ...]
    body: str


@dataclass(frozen=True, slots=True)
class _Tok:
    kind: str  # num, name, op, end
    text: str
    offset: int
    value: float = 0.0


# Numbers inside braces: the scale factors of 2.9.5 (``mil`` is not one there: 1mil = 1m),
# and letters after a number or a scale factor are ignored (2.1.4.3, checked on 39.3).
_NUMBER = re.compile(r"(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?[A-Za-z]*")
_NAME = re.compile(r"[A-Za-z_][\w!#$\[\]]*")
_OPS = ("**", "==", "!=", "<>", "<=", ">=", "&&", "||", "^", "*", "/", "%", "\\", "+", "-",
        "<", ">", "!", "?", ":", "(", ")", ",")  # fmt: skip
_SCALE = {"t": 1e12, "g": 1e9, "meg": 1e6, "k": 1e3, "m": 1e-3, "u": 1e-6, "n": 1e-9,
          "p": 1e-12, "f": 1e-15}  # fmt: skip


def _brace_number(text: str) -> float:
    match = re.match(r"(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?", text)
    assert match is not None
    value = float(match.group(0))
    rest = text[match.end() :].lower()
    scale = 1e6 if rest.startswith("meg") else _SCALE.get(rest[:1], 1.0)
    return value * scale


def _tokens(text: str) -> list[_Tok]:
    out: list[_Tok] = []
    i = 0
    while i < len(text):
        ch = text[i]
        if ch in " \t\r\n":
            i += 1
            continue
        number = _NUMBER.match(text, i)
        if number is not None:
            out.append(_Tok("num", number.group(0), i, _brace_number(number.group(0))))
            i = number.end()
            continue
        name = _NAME.match(text, i)
        if name is not None:
            out.append(_Tok("name", name.group(0), i))
            i = name.end()
            continue
        op = next((o for o in _OPS if text.startswith(o, i)), None)
        if op is None:
            raise ExprError("syntax", i, f"unexpected {ch!r} in the expression")
        out.append(_Tok("op", op, i))
        i += len(op)
    out.append(_Tok("end", "", len(text)))
    return out


def _round_half_even(x: float) -> float:
    return float(round(x))


def _pow_abs(x: float, y: float) -> float:
    return math.pow(abs(x), y)


def _pow(x: float, y: float) -> float:
    if x < 0 and not float(y).is_integer():
        raise ValueError("negative base")
    return math.pow(x, y)


_FUNCTIONS: dict[str, Callable[..., float]] = {
    "sqrt": math.sqrt, "sin": math.sin, "cos": math.cos, "tan": math.tan,
    "sinh": math.sinh, "cosh": math.cosh, "tanh": math.tanh, "asin": math.asin,
    "acos": math.acos, "atan": math.atan, "arctan": math.atan, "asinh": math.asinh,
    "acosh": math.acosh, "atanh": math.atanh, "exp": math.exp, "ln": math.log,
    "log": math.log, "log10": math.log10, "abs": abs, "nint": _round_half_even,
    "int": lambda x: float(math.trunc(x)), "floor": lambda x: float(math.floor(x)),
    "ceil": lambda x: float(math.ceil(x)), "pow": _pow, "pwr": _pow_abs,
    "min": min, "max": max, "sgn": lambda x: float((x > 0) - (x < 0)),
    "ternary_fcn": lambda c, a, b: a if c != 0 else b,
}  # fmt: skip
RANDOM_FUNCTIONS = frozenset({"gauss", "agauss", "unif", "aunif", "limit"})
RUNTIME_NAMES = frozenset({"time", "temper", "hertz"})
RUNTIME_CALLS = frozenset({"v", "i"})
BUILTIN_FUNCTIONS = frozenset(_FUNCTIONS) | RANDOM_FUNCTIONS


def _div(a: float, b: float) -> float:
    return a / b


def _int_div(a: float, b: float) -> float:
    return float(math.trunc(a / b))


_BINARY: dict[str, Callable[[float, float], float]] = {
    "*": lambda a, b: a * b, "/": _div, "%": math.fmod, "\\": _int_div,
    "+": lambda a, b: a + b, "-": lambda a, b: a - b,
    "==": lambda a, b: float(a == b), "!=": lambda a, b: float(a != b),
    "<>": lambda a, b: float(a != b), "<": lambda a, b: float(a < b),
    ">": lambda a, b: float(a > b), "<=": lambda a, b: float(a <= b),
    ">=": lambda a, b: float(a >= b),
    "&&": lambda a, b: float(a != 0 and b != 0), "||": lambda a, b: float(a != 0 or b != 0),
}  # fmt: skip
# Binary levels from the loosest (2.9.5); ``?:`` is looser still, unary ``-``/``!`` sit
# between the additive and the power level (ngspice 39.3: -2^2 = -4).
_LEVELS: tuple[tuple[str, ...], ...] = (
    ("||",), ("&&",), ("==", "!=", "<>", "<=", ">=", "<", ">"), ("+", "-"),
    ("*", "/", "%", "\\"),
)  # fmt: skip


class _Evaluator:
    """A recursive-descent evaluator over the tokens of one expression."""

    def __init__(
        self, text: str, params: Mapping[str, float], funcs: Mapping[str, Func], depth: int
    ) -> None:
        self.text = text
        self.toks = _tokens(text)
        self.pos = 0
        self.params = params
        self.funcs = funcs
        self.depth = depth

    def peek(self) -> _Tok:
        return self.toks[self.pos]

    def take(self) -> _Tok:
        tok = self.toks[self.pos]
        self.pos += 1
        return tok

    def expect(self, op: str, opening: _Tok | None = None) -> None:
        tok = self.peek()
        if tok.kind == "op" and tok.text == op:
            self.pos += 1
            return
        if op == ")" and opening is not None:
            raise ExprError("syntax", opening.offset, "unbalanced '(' in the expression",
                            "add the missing ')'")  # fmt: skip
        raise ExprError("syntax", tok.offset, f"expected {op!r} in the expression")

    def run(self) -> float:
        value = self.ternary()
        tok = self.peek()
        if tok.kind != "end":
            if tok.text == ")":
                raise ExprError("syntax", tok.offset, "a ')' without its '(' in the expression",
                                "remove the ')' or add the '(' before it")  # fmt: skip
            raise ExprError("syntax", tok.offset, f"unexpected {tok.text!r} in the expression")
        return value

    def ternary(self) -> float:
        cond = self.binary(0)
        tok = self.peek()
        if tok.kind == "op" and tok.text == "?":
            self.take()
            bad = _func_first(self.toks, self.pos, self.funcs)
            if bad is not None:
                raise ExprError("unsupported", bad, FUNC_AFTER_QUESTION, FUNC_AFTER_HINT)
            yes = self.ternary()
            self.expect(":")
            no = self.ternary()
            return yes if cond != 0 else no
        return cond

    def binary(self, level: int) -> float:
        if level == len(_LEVELS):
            return self.unary()
        left = self.binary(level + 1)
        while True:
            tok = self.peek()
            if tok.kind != "op" or tok.text not in _LEVELS[level]:
                return left
            self.take()
            right = self.binary(level + 1)
            try:
                left = _BINARY[tok.text](left, right)
            except (ZeroDivisionError, ValueError):
                raise ExprError("math", tok.offset, "it divides by zero",
                                "check the .param values it uses") from None  # fmt: skip
            except OverflowError:
                raise ExprError("math", tok.offset, f"{tok.text!r} has no finite value here",
                                "check the .param values it uses") from None  # fmt: skip

    def unary(self) -> float:
        tok = self.peek()
        if tok.kind == "op" and tok.text in ("-", "!"):
            self.take()
            value = self.unary()
            return -value if tok.text == "-" else float(value == 0)
        if tok.kind == "op" and tok.text == "+":
            raise ExprError("unsupported", tok.offset, "a unary '+' (ngspice 39 rejects it)",
                            "drop the '+'")  # fmt: skip
        return self.power()

    def power(self) -> float:
        value = self.atom()
        while self.peek().kind == "op" and self.peek().text in ("^", "**"):
            tok = self.take()
            exponent = self.power_operand()
            try:
                value = _pow_abs(value, exponent)  # ngspice 39.3: (-2)^3 = 8, as pwr()
            except (ValueError, OverflowError, ZeroDivisionError):
                raise ExprError("math", tok.offset, "a power with no finite value") from None
        return value

    def power_operand(self) -> float:
        tok = self.peek()
        if tok.kind == "op" and tok.text == "-":  # 2**-1
            self.take()
            return -self.power_operand()
        return self.atom()

    def atom(self) -> float:
        tok = self.take()
        if tok.kind == "num":
            return tok.value
        if tok.kind == "op" and tok.text == "(":
            value = self.ternary()
            self.expect(")", tok)
            return value
        if tok.kind == "name":
            nxt = self.peek()
            if nxt.kind == "op" and nxt.text == "(":
                return self.call(tok)
            return self.name(tok)
        if tok.kind == "end":
            raise ExprError("syntax", tok.offset, "the expression ends too early")
        raise ExprError("syntax", tok.offset, f"unexpected {tok.text!r} in the expression")

    def name(self, tok: _Tok) -> float:
        key = tok.text.lower()
        if key in self.params:
            return self.params[key]
        if key in RUNTIME_NAMES:
            raise ExprError("runtime", tok.offset, f"{tok.text!r} changes during the simulation",
                            "a value before the simulation cannot depend on it")  # fmt: skip
        raise ExprError("undefined", tok.offset, f"{tok.text!r} is not defined by a .param",
                        f"define it (.param {tok.text} = ...) or write a number")  # fmt: skip

    def call(self, tok: _Tok) -> float:
        key = tok.text.lower()
        opening = self.take()
        args: list[float] = []
        if not (self.peek().kind == "op" and self.peek().text == ")"):
            if key in RUNTIME_CALLS:
                raise ExprError("runtime", tok.offset,
                                f"{tok.text}(...) follows the circuit during the simulation",
                                "a value before the simulation cannot depend on it")  # fmt: skip
            args.append(self.ternary())
            while self.peek().kind == "op" and self.peek().text == ",":
                self.take()
                args.append(self.ternary())
        self.expect(")", opening)
        if key in self.funcs:
            return self.user(self.funcs[key], args, tok)
        if key in RANDOM_FUNCTIONS:
            raise ExprError("random", tok.offset,
                            f"{tok.text}() draws a random value (manual 2.9.5)",
                            "give the nominal value instead")  # fmt: skip
        func = _FUNCTIONS.get(key)
        if func is None:
            raise ExprError("undefined", tok.offset, f"{tok.text}() is no function ngspice "
                            "knows in braces, nor a .func", "define it with .func")  # fmt: skip
        try:
            return float(func(*args))
        except (ValueError, OverflowError, ZeroDivisionError):
            raise ExprError("math", tok.offset, f"{tok.text}() has no finite value here",
                            "check its arguments") from None  # fmt: skip
        except TypeError:
            raise ExprError("syntax", tok.offset, f"{tok.text}() takes other arguments") from None

    def user(self, func: Func, args: list[float], tok: _Tok) -> float:
        if len(args) != len(func.args):
            raise ExprError("syntax", tok.offset, f".func {func.name} takes {len(func.args)} "
                            f"argument(s), not {len(args)}")  # fmt: skip
        if self.depth > 50:
            raise ExprError("syntax", tok.offset, f".func {func.name} calls itself")
        scope = dict(self.params)
        scope.update(zip(func.args, args, strict=True))
        try:
            return _Evaluator(func.body, scope, self.funcs, self.depth + 1).run()
        except ExprError as err:
            if self.depth:  # named once, by the outermost call
                raise
            raise ExprError(err.kind, tok.offset, f"in .func {func.name}: {err.message}",
                            err.hint) from None  # fmt: skip


FUNC_AFTER_QUESTION = (
    "a .func call right after '?' (ngspice 39 fails on it with 'Expression err', or with a "
    "sign before it computes another value)"
)
FUNC_AFTER_HINT = "put the call in parentheses: c ? (f(x)) : y"


def _func_first(toks: list[_Tok], pos: int, funcs: Mapping[str, Func]) -> int | None:
    """The offset of a user function called first in the branch after a '?', else None."""
    while toks[pos].kind == "op" and toks[pos].text in ("-", "!"):
        pos += 1
    tok, nxt = toks[pos], toks[pos + 1] if pos + 1 < len(toks) else toks[pos]
    if tok.kind == "name" and tok.text.lower() in funcs and nxt.text == "(":
        return tok.offset
    return None


def func_after_question(text: str, funcs: Mapping[str, Func]) -> int | None:
    """Where *text* (an expression, delimiters allowed) calls a ``.func`` right after a
    '?', which ngspice 39 cannot read (checked on 39.3); ``None`` when it does not."""
    if not funcs or "?" not in text:
        return None
    inner, start = strip_delimiters(text)
    try:
        toks = _tokens(inner)
    except ExprError:
        return None
    for k, tok in enumerate(toks):
        if tok.kind == "op" and tok.text == "?":
            found = _func_first(toks, k + 1, funcs)
            if found is not None:
                return found + start
    return None


def strip_delimiters(text: str) -> tuple[str, int]:
    """The expression inside ``{...}`` or ``'...'`` and where it starts in *text*."""
    stripped = text.strip()
    lead = len(text) - len(text.lstrip())
    if len(stripped) >= 2 and (stripped[0], stripped[-1]) in (("{", "}"), ("'", "'")):
        return stripped[1:-1], lead + 1
    return text, 0


def evaluate(
    text: str, params: Mapping[str, float], funcs: Mapping[str, Func] | None = None
) -> float:
    """The value of a number or a brace/quoted expression, as ngspice computes it before
    the simulation; :class:`ExprError` (offset in *text*) when it has none."""
    number = parse_number(text)
    if number is not None:
        return number
    inner, start = strip_delimiters(text)
    try:
        value = _Evaluator(inner, params, funcs or {}, 0).run()
    except ExprError as err:
        raise ExprError(err.kind, err.offset + start, err.message, err.hint) from None
    if not math.isfinite(value):
        raise ExprError("math", start, "the expression has no finite value",
                        "check the .param values it uses")  # fmt: skip
    return value


def names_used(text: str) -> list[tuple[str, int]]:
    """(lower-case name, offset) of every parameter name an expression reads (function
    names aside), for lint's undefined-parameter check; empty when it does not tokenize."""
    inner, start = strip_delimiters(text)
    try:
        toks = _tokens(inner)
    except ExprError:
        return []
    out = []
    for tok, nxt in itertools.pairwise(toks):
        if tok.kind == "name" and not (nxt.kind == "op" and nxt.text == "("):
            out.append((tok.text.lower(), tok.offset + start))
    return out


def calls_used(text: str) -> list[str]:
    """Lower-case names of the functions an expression calls."""
    inner, _start = strip_delimiters(text)
    try:
        toks = _tokens(inner)
    except ExprError:
        return []
    return [t.text.lower() for t, n in itertools.pairwise(toks)
            if t.kind == "name" and n.kind == "op" and n.text == "("]  # fmt: skip


def unbalanced_paren(text: str) -> int | None:
    """The offset of an unbalanced parenthesis in an expression, else ``None``."""
    stack: list[int] = []
    for i, ch in enumerate(text):
        if ch == "(":
            stack.append(i)
        elif ch == ")":
            if not stack:
                return i
            stack.pop()
    return stack[0] if stack else None
