"""Brace expressions (heatweave.spice.expressions) against ngspice 39 itself.

Each accepted expression is put on a voltage source of one deck; ngspice's operating point
gives the value it computes, which heatweave must reproduce to 1e-6 relative.  Each
expression ngspice refuses is run on its own, and heatweave must refuse it too.
"""

from __future__ import annotations

import math
import re
import shutil
import subprocess
from pathlib import Path

import pytest

from heatweave.spice.expressions import ExprError, Func, evaluate, unbalanced_paren

needs_ngspice = pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice")

PARAMS = {"rval": 2000.0, "k1": 3.0, "sel": 1.0}
FUNCS = {
    "half": Func("half", ("x",), "x/2"),
    "pick": Func("pick", ("c", "a", "b"), "c ? a : b"),
    "twice": Func("twice", ("x",), "2*half(x)*2"),
}
DEFINITIONS = (
    ".param rval=2k k1=3 sel=1\n.func half(x) {x/2}\n.func pick(c,a,b) {c ? a : b}\n"
    ".func twice(x) {2*half(x)*2}\n"
)

# Expressions ngspice 39.3 evaluates (precedence, associativity, functions, .func, ?:).
ACCEPTED = [
    "-2^2", "2^3^2", "2**3**2", "2**-1", "7%3", "-7%3", "7\\2", "-7\\2", "nint(2.5)",
    "nint(-2.5)", "nint(3.5)", "int(-2.7)", "log(100)", "ln(100)", "log10(100)",
    "pwr(-2,2)", "pwr(-2,0.5)", "pow(-2,2)", "pow(2,0.5)", "sgn(-3)", "1mil", "1meg",
    "2.5k*2", "1<2", "2==2.0", "1 ? 5 : 6", "0 ? 5 : 6", "!0", "!3", "3&&0", "0||2",
    "1+2*3-4/2", "ternary_fcn(1,7,8)", "atan(1)", "arctan(1)", "min(3,2)", "abs(-3)",
    "floor(-2.5)", "ceil(-2.5)", "exp(1)", "1e3k", "1<>2", "2>=2", "-(3)", "--3",
    "1 - -3", "10kOhm", "3.3MOhm", "1T", "1a", "2*(3+4)", "tanh(0.5)", "asinh(1)",
    "5 > 3 ? 1 : 2", "1+2 == 3", "1 || 0 && 0", "rval*k1", "sel == 1 ? rval : 2*rval",
    "half(rval)", "pick(sel, 10, 20)", "pick(0, 10, 20)", "twice(k1)", "rval/(1+k1)",
    "(-2)^3", "(-8)^(1/3)", "(-2)**2", "pow(-2,3)", "pwr(-2,3)", "-2^3", "1e308*10 > 1",
    "1 ? (half(2)) : 3", "0 ? 3 : half(2)", "half(2) ? 1 : 0", "1 ? 1+half(2) : 3",
]  # fmt: skip
# Expressions ngspice 39.3 refuses, and the kind of refusal heatweave gives.
REFUSED = [
    ("pi", "undefined"), ("nosuch*2", "undefined"), ("(2*(1k)", "syntax"),
    ("2*1k)", "syntax"), ("1/0", "math"), ("sqrt(-4)", "math"), ("pow(-2,0.5)", "math"),
    ("2*+3", "unsupported"), ("temper", "runtime"), ("0^-1", "math"),
    ("pow(-8,1/3)", "math"), ("1 ? half(2) : 3", "unsupported"),
    ("sel ? twice(k1)*1 : 3", "unsupported"),
]  # fmt: skip


def ngspice_values(deck: str, folder: Path) -> tuple[dict[str, float], str]:
    path = folder / "expr.cir"
    path.write_text(deck)
    done = subprocess.run(["ngspice", "-b", str(path)], capture_output=True, text=True,
                          timeout=30, cwd=folder)  # fmt: skip
    out = done.stdout + done.stderr
    values = {m.group(1): float(m.group(2))
              for m in re.finditer(r"^\s*(n\d+)\s+(\S+)\s*$", out, re.M)}  # fmt: skip
    return values, out


@needs_ngspice
def test_accepted_expressions_match_ngspice(tmp_path: Path) -> None:
    lines = [f"V{k} n{k} 0 {{{e}}}\nR{k} n{k} 0 1k\n" for k, e in enumerate(ACCEPTED)]
    values, out = ngspice_values("exprs\n" + DEFINITIONS + "".join(lines) + ".op\n.end\n",
                                 tmp_path)  # fmt: skip
    assert len(values) == len(ACCEPTED), out
    for k, expr in enumerate(ACCEPTED):
        ours = evaluate("{" + expr + "}", PARAMS, FUNCS)
        assert math.isclose(ours, values[f"n{k}"], rel_tol=1e-6, abs_tol=1e-12), expr


@needs_ngspice
@pytest.mark.parametrize(("expr", "kind"), REFUSED)
def test_refused_expressions(tmp_path: Path, expr: str, kind: str) -> None:
    deck = f"refused\n{DEFINITIONS}V1 n1 0 {{{expr}}}\nR1 n1 0 1k\n.op\n.end\n"
    values, out = ngspice_values(deck, tmp_path)
    assert "n1" not in values and re.search(r"(?i)\berror\b", out), out
    with pytest.raises(ExprError) as caught:
        evaluate("{" + expr + "}", PARAMS, FUNCS)
    assert caught.value.kind == kind


def test_refusal_points_at_the_construct() -> None:
    with pytest.raises(ExprError) as caught:
        evaluate("{rval + v(out)}", PARAMS)
    assert caught.value.kind == "runtime" and caught.value.offset == 8
    with pytest.raises(ExprError) as caught:
        evaluate("{gauss(1, 0.1, 3)}", PARAMS)
    assert caught.value.kind == "random" and "gauss" in caught.value.message


@pytest.mark.parametrize(
    ("text", "where"), [("(2*(1k)", 0), ("2*1k)", 4), ("(a)(b)", None), ("((x)", 0)]
)
def test_unbalanced_paren(text: str, where: int | None) -> None:
    assert unbalanced_paren(text) == where
