"""The card grammar against the ngspice 39 manual's syntax forms and the ngspice program itself.

Each table row is an example card written for these tests after the general form in the
manual section named beside it (``/usr/share/doc/ngspice-doc/html/manual.html``) or after a
fact in ``shared/reference/ngspice-syntax.md`` marked [verified] (checked with ngspice 39.3).
The corpus in ``tests/decks/`` is checked with the installed ngspice (``ngspice -b``).
"""

from __future__ import annotations

import dataclasses
import os
import re
import shutil
import subprocess
import sys
import textwrap
from collections.abc import Iterator
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from heatweave.files import read_text
from heatweave.spice import grammar
from heatweave.spice.grammar import CardSyntaxError, parse_card
from heatweave.spice.reader import read
from heatweave.spice.syntax import (
    Call,
    DotSyntax,
    ElementSyntax,
    EndlSyntax,
    EndsSyntax,
    Field,
    FuncSyntax,
    GlobalSyntax,
    Group,
    IfSyntax,
    IncludeSyntax,
    InitialSyntax,
    LibSyntax,
    ModelSyntax,
    Param,
    ParamCardSyntax,
    Port,
    SubcktSyntax,
    TitleSyntax,
    Token,
    Value,
    ValueKind,
)

REPO = Path(__file__).resolve().parents[1]
DECKS = REPO / "tests" / "decks"


def texts(items: tuple[Token, ...] | tuple[Field, ...]) -> list[str]:
    return [_text(i) for i in items]


def _text(item: Field) -> str:
    if isinstance(item, Param):
        return f"{item.key.text}={_text(item.value)}"
    if isinstance(item, Port):
        return " ".join(n.text for n in item.nodes)
    return item.text


def pairs(params: tuple[Param, ...]) -> dict[str, str]:
    return {p.key.text: " ".join(_text(v) for v in (p.value, *p.more)) for p in params}


def element(card: str) -> ElementSyntax:
    syntax = parse_card(card)
    assert isinstance(syntax, ElementSyntax)
    return syntax


# ---------------------------------------------------------------------------------------------
# Element cards: (card, letter, nodes, positional fields, params)
ELEMENTS = [
    # R (3.3.1, 3.3.2, 3.3.4) and the separators of 2.1.4.1 [verified: "1,0" and "(1 0)"]
    ("R1 1,0 1k", "r", ["1", "0"], ["1k"], {}),
    ("R2 (1 0) 2k", "r", ["1", "0"], ["2k"], {}),
    (
        "Rload out gnd 4.7k tc1 = 0.01 tc2=1e-5",
        "r",
        ["out", "gnd"],
        ["4.7k"],
        {"tc1": "0.01", "tc2": "1e-5"},
    ),
    ("Rsense a b r=0.1 m=2 dtemp=5", "r", ["a", "b"], [], {"r": "0.1", "m": "2", "dtemp": "5"}),
    ("Rx a b resistance={rnom*2}", "r", ["a", "b"], [], {"resistance": "{rnom*2}"}),
    ("Rq a b 'rnom + 10' noisy=0", "r", ["a", "b"], ["'rnom + 10'"], {"noisy": "0"}),
    ("Rb a b R = 'V(a) > 1 ? 1k : 2k'", "r", ["a", "b"], [], {"R": "'V(a) > 1 ? 1k : 2k'"}),
    ("Rg n1 n2 rpoly l=10u w=1u", "r", ["n1", "n2"], ["rpoly"], {"l": "10u", "w": "1u"}),
    ("Rv n1 n2 v(n1)*10k", "r", ["n1", "n2"], ["v(n1)*10k"], {}),
    ("Rt a b r = {5k + 50*TEMPER}", "r", ["a", "b"], [], {"r": "{5k + 50*TEMPER}"}),
    ("Rnone a b", "r", ["a", "b"], [], {}),
    # C, L (3.3.6, 3.3.10, 3.3.9)
    ("Cload out 0 10p ic=1.2", "c", ["out", "0"], ["10p"], {"ic": "1.2"}),
    ("Cq a 0 C = 'c0*(1+v(a))'", "c", ["a", "0"], [], {"C": "'c0*(1+v(a))'"}),
    ("Lchoke in out 47u ic=0", "l", ["in", "out"], ["47u"], {"ic": "0"}),
    # K (3.3.12): two inductor names and a coupling value, no nodes
    ("Kxf Lpri Lsec 0.98", "k", [], ["Lpri", "Lsec", "0.98"], {}),
    # S, W (3.3.15)
    ("S1 out 0 ctl 0 swmod off", "s", ["out", "0", "ctl", "0"], ["swmod", "off"], {}),
    ("Wsw out 0 Vsense cswmod on", "w", ["out", "0"], ["Vsense", "cswmod", "on"], {}),
    # V, I (4.1)
    ("Vdd vdd 0 dc 3.3", "v", ["vdd", "0"], ["dc", "3.3"], {}),
    ("Iload 0 out 2m ac 1", "i", ["0", "out"], ["2m", "ac", "1"], {}),
    # E, G, F, H (4.2, 5.2, 5.3, 5.5) and node pairs in parentheses (26.1.1.1)
    ("Eamp out 0 inp inn 1e5", "e", ["out", "0", "inp", "inn"], ["1e5"], {}),
    ("E1 (out 0) (inp 0) -10", "e", ["out", "0", "inp", "0"], ["-10"], {}),
    ("Eb o 0 vol='v(a)*2'", "e", ["o", "0"], [], {"vol": "'v(a)*2'"}),
    ("Ev o 0 value={v(a)-v(b)}", "e", ["o", "0"], [], {"value": "{v(a)-v(b)}"}),
    (
        "Ep o 0 poly(2) a 0 b 0 0 1 1",
        "e",
        ["o", "0"],
        ["poly(2)", "a", "0", "b", "0", "0", "1", "1"],
        {},
    ),
    ("Et o 0 table {v(a)} = (0,0) (1,5)", "e", ["o", "0"], ["table", "(1,5)"], {"{v(a)}": "(0,0)"}),
    ("Gm out 0 inp 0 2m m=3", "g", ["out", "0", "inp", "0"], ["2m"], {"m": "3"}),
    ("Gb out 0 cur='v(a)*1m'", "g", ["out", "0"], [], {"cur": "'v(a)*1m'"}),
    ("Fmir 0 out Vref 2", "f", ["0", "out"], ["Vref", "2"], {}),
    ("Fp 0 out poly(2) Va Vb 0 1 1", "f", ["0", "out"], ["poly(2)", "Va", "Vb", "0", "1", "1"], {}),
    ("Htr out 0 Vsense 1k", "h", ["out", "0"], ["Vsense", "1k"], {}),
    # B (5.1.1): unbraced run-time expressions, one field each
    ("B1 0 1 I=cos(v(1))+sin(v(2))", "b", ["0", "1"], [], {"I": "cos(v(1))+sin(v(2))"}),
    (
        "B5 2 0 V = V(1) < {Vlow} ? {Vlow} : V(1)",
        "b",
        ["2", "0"],
        [],
        {"V": "V(1) < {Vlow} ? {Vlow} : V(1)"},
    ),
    ("Bh 0 h i=v(p)*i(Vs) tc1=1m", "b", ["0", "h"], [], {"i": "v(p)*i(Vs)", "tc1": "1m"}),
    # D (7.1, 7.3): the thermal form has the tj node
    ("Dz k a zen area=2 off", "d", ["k", "a"], ["zen", "off"], {"area": "2"}),
    ("Dp a k tj dpow thermal", "d", ["a", "k", "tj"], ["dpow", "thermal"], {}),
    # Q (8.1): without the model names the default is the 3-node form
    (
        "Q1 c b e qnpn area=1.5 ic=0.6, 5",
        "q",
        ["c", "b", "e"],
        ["qnpn"],
        {"area": "1.5", "ic": "0.6 5"},
    ),
    # J, Z (9.1, 10.1)
    ("J1 d g s jmod off", "j", ["d", "g", "s"], ["jmod", "off"], {}),
    ("Z1 d g s mes 1.5", "z", ["d", "g", "s"], ["mes", "1.5"], {}),
    # M (11.1, 11.3)
    ("M1 d g s b nch l=0.5u w=5u", "m", ["d", "g", "s", "b"], ["nch"], {"l": "0.5u", "w": "5u"}),
    ("Mp d g s vdm", "m", ["d", "g", "s"], ["vdm"], {}),
    ("Mt d g s tj tc vdm thermal", "m", ["d", "g", "s", "tj", "tc"], ["vdm", "thermal"], {}),
    # T, O, Y (6.1, 6.2, 6.4.1), U (6.3, 14.1.1), P (6.4.2)
    ("T1 a 0 b 0 z0=50 td=1n", "t", ["a", "0", "b", "0"], [], {"z0": "50", "td": "1n"}),
    ("O1 a 0 b 0 ltramod", "o", ["a", "0", "b", "0"], ["ltramod"], {}),
    ("Y1 a 0 b 0 txlmod len=2", "y", ["a", "0", "b", "0"], ["txlmod"], {"len": "2"}),
    ("U1 a b 0 urcmod l=20u n=5", "u", ["a", "b", "0"], ["urcmod"], {"l": "20u", "n": "5"}),
    (
        "U2 nand(2) vdd 0 in1 in2 out tmod iomod",
        "u",
        ["vdd", "0", "in1", "in2", "out"],
        ["nand(2)", "tmod", "iomod"],
        {},
    ),
    (
        "P1 a1 a2 0 b1 b2 0 cplmod len=1",
        "p",
        ["a1", "a2", "0", "b1", "b2", "0"],
        ["cplmod"],
        {"len": "1"},
    ),
    # X (2.5.3, 2.9.3): "params:" optional [verified]
    ("X1 in out amp", "x", ["in", "out"], ["amp"], {}),
    (
        "Xf in out mid filt params: fc=1k q={qq}",
        "x",
        ["in", "out", "mid"],
        ["filt"],
        {"fc": "1k", "q": "{qq}"},
    ),
    ("Xg a b stage gain=2", "x", ["a", "b"], ["stage"], {"gain": "2"}),
    # N (13.3.1.6)
    ("N1 d g s vamod w=1u", "n", ["d", "g", "s"], ["vamod"], {"w": "1u"}),
    # case is kept as written (2.1.4.4)
    ("RLoad OUT Gnd 1K", "r", ["OUT", "Gnd"], ["1K"], {}),
]


@pytest.mark.parametrize(("card", "letter", "nodes", "positional", "params"), ELEMENTS)
def test_element_cards(
    card: str, letter: str, nodes: list[str], positional: list[str], params: dict[str, str]
) -> None:
    syntax = element(card)
    assert syntax.letter == letter
    assert texts(syntax.nodes) == nodes
    assert texts(syntax.positional) == positional
    assert pairs(syntax.params) == params
    assert syntax.name.text == card.split()[0]


def test_node_keys_are_lower_case() -> None:
    # 2.1.4.4: node names are case insensitive; the text stays as written.
    syntax = element("RLoad OUT Gnd 1K")
    assert [n.key for n in syntax.nodes] == ["out", "gnd"]
    assert syntax.key == "rload"


# (card, which field, kind, number via parse_number) - number scale facts from 2.1.4.2/2.1.4.3
VALUES = [
    ("R1 a b 4.7k", "positional", ValueKind.NUMBER, 4.7e3),
    ("R1 a b 10kOhm", "positional", ValueKind.NUMBER, 1e4),
    ("R1 a b 3.3MOhm", "positional", ValueKind.NUMBER, 3.3e-3),  # M is milli [verified]
    ("R1 a b 1Meg", "positional", ValueKind.NUMBER, 1e6),
    ("R1 a b 2.2e-3k", "positional", ValueKind.NUMBER, 2.2),
    ("R1 a b {rval}", "positional", ValueKind.BRACE, None),
    ("R1 a b '3 * rval'", "positional", ValueKind.QUOTED, None),
    ("R1 a b rmodel", "positional", ValueKind.NAME, None),
    ("R1 a b v(a)*10k", "positional", ValueKind.EXPRESSION, None),
    ("R1 a b r=2k", "r", ValueKind.NUMBER, 2e3),
    ("R1 a b r={ 2 * rval }", "r", ValueKind.BRACE, None),
    ("R1 a b tc1=2m", "tc1", ValueKind.NUMBER, 2e-3),
]


@pytest.mark.parametrize(("card", "where", "kind", "number"), VALUES)
def test_value_kinds(card: str, where: str, kind: ValueKind, number: float | None) -> None:
    syntax = element(card)
    if where == "positional":
        value = syntax.positional[0]
    else:
        found = syntax.param(where)
        assert found is not None
        value = found.value
    assert isinstance(value, Value)
    assert value.kind is kind
    assert value.number == (pytest.approx(number) if number is not None else None)


def test_brace_and_quote_inner_text() -> None:
    # 2.9.1 / 2.9.2: braces and single quotes delimit one expression, blanks included.
    braced = element("R1 a b { 2 * rval }").positional[0]
    quoted = element("R1 a b '3 * rval'").positional[0]
    assert isinstance(braced, Value) and braced.inner == " 2 * rval "
    assert isinstance(quoted, Value) and quoted.inner == "3 * rval"


# Q and M node counts from the deck's model names (8.1, 11.1, 11.3)
SPLITS = [
    ("Q1 c b e qn", {"qn"}, ["c", "b", "e"], ["qn"]),
    ("Q2 c b e sub qn area=2", {"qn"}, ["c", "b", "e", "sub"], ["qn"]),
    ("Q3 c b e s dt vbic4", {"vbic4"}, ["c", "b", "e", "s", "dt"], ["vbic4"]),
    ("Q4 c b e s dt vbic4", set(), ["c", "b", "e"], ["s", "dt", "vbic4"]),
    ("M1 d g s b nch", {"nch"}, ["d", "g", "s", "b"], ["nch"]),
    ("M2 d g s vdm", {"vdm"}, ["d", "g", "s"], ["vdm"]),
    ("M3 d g s tj tc vdm thermal", {"vdm"}, ["d", "g", "s", "tj", "tc"], ["vdm", "thermal"]),
    ("R1 a b rmod", {"rmod", "a"}, ["a", "b"], ["rmod"]),
]


@pytest.mark.parametrize(("card", "models", "nodes", "positional"), SPLITS)
def test_split_nodes_by_model_names(
    card: str, models: set[str], nodes: list[str], positional: list[str]
) -> None:
    syntax = element(card).split_nodes(models)
    assert texts(syntax.nodes) == nodes
    assert texts(syntax.positional) == positional


# Sources (4.1): (card, dc, ac, function name, function args)
SOURCES = [
    ("V1 a 0 1.5", "1.5", [], None, []),
    ("V1 a 0 dc 2 ac 1 45", "2", ["1", "45"], None, []),
    (
        "V1 a 0 pulse(0 5 1n 1n 1n 10n 20n)",
        None,
        [],
        "pulse",
        ["0", "5", "1n", "1n", "1n", "10n", "20n"],
    ),
    ("V1 a 0 PULSE (0 5 1n)", None, [], "PULSE", ["0", "5", "1n"]),
    ("V1 a 0 dc 0 sin(0 1 1meg)", "0", [], "sin", ["0", "1", "1meg"]),
    ("I1 a 0 exp(0 1m 2n 30n 60n 40n)", None, [], "exp", ["0", "1m", "2n", "30n", "60n", "40n"]),
    ("V1 a 0 pwl(0 0 10n 1) r=0 td=5n", None, [], "pwl", ["0", "0", "10n", "1"]),
    ("V1 a 0 sffm(0 1 1meg 2 10k)", None, [], "sffm", ["0", "1", "1meg", "2", "10k"]),
    ("V1 a 0 am(1 0 1k 100k 0)", None, [], "am", ["1", "0", "1k", "100k", "0"]),
    ("V1 a 0 dc 0 trnoise(20n 0.5n 0 0)", "0", [], "trnoise", ["20n", "0.5n", "0", "0"]),
    ("V1 a 0 dc 0 trrandom(2 10m 0 1)", "0", [], "trrandom", ["2", "10m", "0", "1"]),
    # 4.1.11: an RF port; portnum is not an AC phase
    ("V1 in 0 dc 0 ac 1 portnum 1 z0 50", "0", ["1"], None, []),
]


@pytest.mark.parametrize(("card", "dc", "ac", "function", "args"), SOURCES)
def test_source_parts(
    card: str, dc: str | None, ac: list[str], function: str | None, args: list[str]
) -> None:
    parts = element(card).source()
    assert (_text(parts.dc) if parts.dc is not None else None) == dc
    assert texts(parts.ac) == ac
    assert (parts.function.name.text if parts.function else None) == function
    assert (texts(parts.function.args) if parts.function else []) == args


def test_source_pwl_options_and_distortion() -> None:
    # 4.1.4: "PWL(T1 V1 ...) <r=value> <td=value>"; 4.1: DISTOF1/DISTOF2 mag phase.
    pwl = element("V1 a 0 pwl(0 0 10n 1) r=0 td=5n")
    assert pairs(pwl.params) == {"r": "0", "td": "5n"}
    dist = element("V2 a 0 dc 0 distof1 0.1 0 distof2 0.2 90").source()
    assert texts(dist.distof1) == ["0.1", "0"]
    assert texts(dist.distof2) == ["0.2", "90"]


# XSPICE (12.1.1): (card, ports as (prefix, nodes, inverted, vector), model)
XSPICE = [
    (
        "A1 %v(in) %v(out) amp",
        [("%v", ["in"], [False], False), ("%v", ["out"], [False], False)],
        "amp",
    ),
    (
        "A2 %vd(a b) %id (c 0) g2",
        [("%vd", ["a", "b"], [False, False], False), ("%id", ["c", "0"], [False, False], False)],
        "g2",
    ),
    (
        "A3 [d1 ~d2 null] y nand3",
        [(None, ["d1", "d2", "null"], [False, True, False], True), (None, ["y"], [False], False)],
        "nand3",
    ),
    (
        "A4 %d [a b] ~q dff",
        [("%d", ["a", "b"], [False, False], True), (None, ["q"], [True], False)],
        "dff",
    ),
]


@pytest.mark.parametrize(("card", "ports", "model"), XSPICE)
def test_xspice_ports(
    card: str, ports: list[tuple[str | None, list[str], list[bool], bool]], model: str
) -> None:
    syntax = element(card)
    got = [
        (p.prefix.text if p.prefix else None, texts(p.nodes), list(p.inverted), p.vector)
        for p in syntax.ports
    ]
    assert got == ports
    assert texts(syntax.positional) == [model]
    # null is a placeholder, not a node (12.1.1)
    assert "null" not in [n.key for n in syntax.nodes]


# ---------------------------------------------------------------------------------------------
# Dot cards: (card, class, summary)
def summary(syntax: object) -> dict[str, object]:
    """The fields of a dot-card syntax object as plain strings and lists."""
    out: dict[str, object] = {}
    assert dataclasses.is_dataclass(syntax)
    for f in dataclasses.fields(syntax):
        if f.name == "keyword":
            continue
        value = getattr(syntax, f.name)
        if value is None:
            out[f.name] = None
        elif isinstance(value, tuple) and all(isinstance(v, Param) for v in value) and value:
            out[f.name] = pairs(value)
        elif isinstance(value, tuple):
            out[f.name] = [
                summary(v) if not isinstance(v, Token | Param) else _text(v) for v in value
            ]
        elif isinstance(value, Token):
            out[f.name] = value.text
        else:
            out[f.name] = summary(value)
    return out


DOTS = [
    # 2.5.1, 2.9.3: ports, then parameters with or without params:
    (
        ".subckt amp in out vdd params: gain=10 rl={2*r0}",
        SubcktSyntax,
        {"name": "amp", "ports": ["in", "out", "vdd"], "params": {"gain": "10", "rl": "{2*r0}"}},
    ),
    (
        ".SUBCKT filt a b fc=1k",
        SubcktSyntax,
        {"name": "filt", "ports": ["a", "b"], "params": {"fc": "1k"}},
    ),
    (".subckt bare p q", SubcktSyntax, {"name": "bare", "ports": ["p", "q"], "params": []}),
    (".ends amp", EndsSyntax, {"name": "amp"}),
    (".ends", EndsSyntax, {"name": None}),
    (".ends amp trailing", EndsSyntax, {"name": "amp"}),  # ngspice 39.3 accepts and ignores
    # 2.4 and 21.4: parentheses optional, "=" optional
    (
        ".model dfast d (is=2e-14 n=1.05 rs=0.3)",
        ModelSyntax,
        {
            "name": "dfast",
            "type": "d",
            "params": {"is": "2e-14", "n": "1.05", "rs": "0.3"},
            "args": [],
        },
    ),
    (
        ".model nch nmos(level=1 vto=0.6)",
        ModelSyntax,
        {"name": "nch", "type": "nmos", "params": {"level": "1", "vto": "0.6"}, "args": []},
    ),
    (
        ".MODEL qq NPN BF 120 VAF 80",
        ModelSyntax,
        {"name": "qq", "type": "NPN", "params": {"BF": "120", "VAF": "80"}, "args": []},
    ),
    (
        ".model rthin r tc1=1e-3 tnom=25",
        ModelSyntax,
        {"name": "rthin", "type": "r", "params": {"tc1": "1e-3", "tnom": "25"}, "args": []},
    ),
    (
        ".model ampx gain(in_offset=[0.1 -0.2] gain=2)",
        ModelSyntax,
        {
            "name": "ampx",
            "type": "gain",
            "params": {"in_offset": "[0.1 -0.2]", "gain": "2"},
            "args": [],
        },
    ),
    # 2.9.1: unbraced values, strings, several pairs; "c = a+123" is one value
    (".param c = a+123", ParamCardSyntax, {"params": {"c": "a+123"}, "stray": []}),
    (
        ".param rtop=4.7k rbot = {rtop/2}",
        ParamCardSyntax,
        {"params": {"rtop": "4.7k", "rbot": "{rtop/2}"}, "stray": []},
    ),
    (
        ".param label=\"first\" k='2*rtop'",
        ParamCardSyntax,
        {"params": {"label": '"first"', "k": "'2*rtop'"}, "stray": []},
    ),
    (".csparam tstop=2u", ParamCardSyntax, {"params": {"tstop": "2u"}, "stray": []}),
    # 2.10
    (".func f(x,y) {x*y}", FuncSyntax, {"name": "f", "args": ["x", "y"], "body": "{x*y}"}),
    (".func g(x) = {x+1}", FuncSyntax, {"name": "g", "args": ["x"], "body": "{x+1}"}),
    # 2.7, 2.8 [verified: quotes, case kept]
    (".include models/Diodes.inc", IncludeSyntax, {"path": "models/Diodes.inc"}),
    ('.include "my models/bjt.lib"', IncludeSyntax, {"path": '"my models/bjt.lib"'}),
    ('.lib "inner/models.lib" fast', LibSyntax, {"path": '"inner/models.lib"', "section": "fast"}),
    (".lib corner.lib slow", LibSyntax, {"path": "corner.lib", "section": "slow"}),
    (".lib fast", LibSyntax, {"path": None, "section": "fast"}),
    (".endl fast", EndlSyntax, {"name": "fast"}),
    (".endl", EndlSyntax, {"name": None}),
    # 2.3.1: the text is kept as written, parentheses and "=" included
    (".title Amp (gain=10), rev B", TitleSyntax, {"text": "Amp (gain=10), rev B"}),
    # 2.13
    (".if(corner == 1)", IfSyntax, {"condition": "corner == 1"}),
    (".elseif (a>1 && b<=2)", IfSyntax, {"condition": "a>1 && b<=2"}),
    # 2.6
    (".global vdd gnd", GlobalSyntax, {"nodes": ["vdd", "gnd"]}),
    # 15.2
    (
        ".ic v(out)=1.5 v(mid)=0",
        InitialSyntax,
        {
            "settings": [
                {"function": "v", "node": "out", "value": {}},
                {"function": "v", "node": "mid", "value": {}},
            ],
            "params": [],
        },
    ),
    (".nodeset all=0.5", InitialSyntax, {"settings": [], "params": {"all": "0.5"}}),
]


@pytest.mark.parametrize(("card", "kind", "expected"), DOTS)
def test_dot_cards(card: str, kind: type, expected: dict[str, object]) -> None:
    syntax = parse_card(card)
    assert type(syntax) is kind
    got = summary(syntax)
    if kind is InitialSyntax:  # the setting values are checked in test_ic_values
        for setting in got["settings"]:  # type: ignore[attr-defined]
            setting["value"] = {}
    assert got == expected


# .param values end at a blank (2.9.1 "c = a + 123 $ won't work"); ngspice 39.3 read
# ".param a = 123 * 3 b = sqrt(9)" as a = 123, b = 3 and accepted ".param x" (checked).
PARAM_VALUES = [
    (".param a = 123 * 3 b = sqrt(9)", {"a": "123", "b": "sqrt(9)"}, ["*", "3"]),
    (".param c = a+123", {"c": "a+123"}, []),
    (".param c = a + 123", {"c": "a"}, ["+", "123"]),
    ('.param both={str1}" and "str2', {"both": '{str1}" and "str2'}, []),  # 2.9.1 example form
    (".param x", {}, ["x"]),
]


@pytest.mark.parametrize(("card", "params", "stray"), PARAM_VALUES)
def test_param_values_end_at_blanks(card: str, params: dict[str, str], stray: list[str]) -> None:
    syntax = parse_card(card)
    assert isinstance(syntax, ParamCardSyntax)
    assert pairs(syntax.params) == params
    assert texts(syntax.stray) == stray


def test_global_ignores_pairs() -> None:
    syntax = parse_card(".global vdd x=1")  # ngspice 39.3 accepts ".global a=1"
    assert isinstance(syntax, GlobalSyntax)
    assert texts(syntax.nodes) == ["vdd"]


def test_ic_values() -> None:
    syntax = parse_card(".ic v(out)=1.5 v(mid)=0")
    assert isinstance(syntax, InitialSyntax)
    values = [s.value for s in syntax.settings]
    assert [v.number for v in values if isinstance(v, Value)] == [1.5, 0.0]


# Cards kept as generic DotSyntax: (card, name, args, params)
GENERIC = [
    (".options temp=50 noacct", "options", ["noacct"], {"temp": "50"}),  # 15.1
    (".option filetype=ascii", "option", [], {"filetype": "ascii"}),
    (".temp 85", "temp", ["85"], {}),  # 2.12
    (".op", "op", [], {}),  # 15.3.5
    (".tran 1n 10u 0 5n uic", "tran", ["1n", "10u", "0", "5n", "uic"], {}),  # 15.3.10
    (
        ".dc Vin 0 5 0.1 temp 0 100 25",
        "dc",
        ["Vin", "0", "5", "0.1", "temp", "0", "100", "25"],
        {},
    ),  # 15.3.2
    (".ac dec 10 1 1meg", "ac", ["dec", "10", "1", "1meg"], {}),  # 15.3.1
    (".tf v(out) Vin", "tf", ["v(out)", "Vin"], {}),
    (".noise v(out) Vin dec 10 1k 1meg", "noise", ["v(out)", "Vin", "dec", "10", "1k", "1meg"], {}),
    (".pz in 0 out 0 vol pz", "pz", ["in", "0", "out", "0", "vol", "pz"], {}),
    (".sens v(out)", "sens", ["v(out)"], {}),
    (".disto dec 10 1k 100k", "disto", ["dec", "10", "1k", "100k"], {}),
    (".sp lin 10 1meg 10meg", "sp", ["lin", "10", "1meg", "10meg"], {}),
    (
        ".pss 1k 5m out 1024 10 50 5e-3 uic",
        "pss",
        ["1k", "5m", "out", "1024", "10", "50", "5e-3", "uic"],
        {},
    ),
    # 15.4: measurements
    (
        ".meas tran tpk max v(out) from=1n to=2u",
        "meas",
        ["tran", "tpk", "max", "v(out)"],
        {"from": "1n", "to": "2u"},
    ),
    (
        ".measure tran tr when v(out)=0.5 rise=1",
        "measure",
        ["tran", "tr", "when"],
        {"v(out)": "0.5", "rise": "1"},
    ),
    (
        ".meas tran pav avg par('v(a)*i(vs)') from=0",
        "meas",
        ["tran", "pav", "avg", "par('v(a)*i(vs)')"],
        {"from": "0"},
    ),
    # 15.6
    (".save i(vin) node1 v(node2) @m1[id]", "save", ["i(vin)", "node1", "v(node2)", "@m1[id]"], {}),
    (".print tran v(a) v(a)-v(b)", "print", ["tran", "v(a)", "v(a)-v(b)"], {}),
    (".plot ac vdb(out)", "plot", ["ac", "vdb(out)"], {}),
    (".four 1k v(out)", "four", ["1k", "v(out)"], {}),
    (".probe v(out)", "probe", ["v(out)"], {}),
    (".width out=120", "width", [], {"out": "120"}),
    (".else", "else", [], {}),
    (".endif", "endif", [], {}),
    (".end", "end", [], {}),
    # unknown dot cards pass: a deck ngspice accepts must never be rejected
    (".spiceinit_like x=1 y", "spiceinit_like", ["y"], {"x": "1"}),
]


@pytest.mark.parametrize(("card", "name", "args", "params"), GENERIC)
def test_generic_dot_cards(card: str, name: str, args: list[str], params: dict[str, str]) -> None:
    syntax = parse_card(card)
    assert isinstance(syntax, DotSyntax)
    assert syntax.name == name
    assert texts(syntax.args) == args
    assert pairs(syntax.params) == params


def test_calls_keep_their_parts() -> None:
    syntax = parse_card(".tf v(out, ref) Vin")
    assert isinstance(syntax, DotSyntax)
    call = syntax.args[0]
    assert isinstance(call, Call)
    assert call.name.text == "v" and texts(call.args) == ["out", "ref"]


def test_groups_are_kept_for_tables() -> None:
    # 5.3: TABLE pairs stay as groups of two values
    syntax = element("Et o 0 table {v(a)} = (0,0) (1,5)")
    group = syntax.positional[1]
    assert isinstance(group, Group) and texts(group.items) == ["1", "5"]


# ---------------------------------------------------------------------------------------------
# Bad cards: (card, offset, message) - offsets are 0-based in the logical text
BAD = [
    ("R1 a", 4, "expected a node name"),
    ("R1", 2, "expected a node name"),
    ("R1 a {n} 1k", 5, "expected a node name"),  # braces cannot name nodes (2.9.2)
    ("R1 a b<c 1k", 6, "'<' is not allowed in a node name"),  # 2.1.4.4
    ("R1 a b r=", 9, "expected a value after '='"),
    ("R1 a b r= )", 10, "expected a value after '='"),
    ("R1 a b {2*x", 7, "unbalanced '{'"),
    ("R1 a b 2*x}", 10, "a '}' without its '{'"),
    ("R1 a b '2*x", 7, "unbalanced quote"),
    ('.param s="abc', 9, "unbalanced '\"'"),
    ("E1 a 0 poly(1 b 0 0 1", 11, "unbalanced '('"),  # V/I: test_waves_sources
    ("V1 a 0 1 )", 9, "a ')' without its '('"),
    ("A1 [a b y amp", 3, "unbalanced '['"),
    ("R1 = 5", 3, "expected a name before '='"),
    ("D1 a k", 6, "expected a model name"),
    ("Q1 c b e", 8, "expected a model name"),
    ("X1 params: g=1", 14, "expected a subcircuit name"),
    ("X1", 2, "expected a subcircuit name"),
    ("K1 L1 L2", 8, "expected two inductor names and a coupling value"),
    ("F1 a 0", 6, "expected a controlling voltage source"),
    ("A1 %v(a)", 8, "expected a model name"),
    (".subckt", 7, "expected a subcircuit name"),
    (".subckt (a b)", 8, "expected a subcircuit name"),
    (".model", 6, "expected a model name"),
    (".model dx", 9, "expected a model type"),
    (".func", 5, "expected a function name with its arguments"),
    (".func f {x}", 6, "expected a function name with its arguments"),
    (".func f(x)", 10, "expected the function body"),
    (".func f(x) =", 12, "expected the function body"),
    (".include", 8, "expected a file name"),
    (".lib", 4, "expected a file name or a section name"),
    (".if", 3, "expected '(' and a condition"),
    (".if()", 4, "expected a condition inside '( )'"),
]


@pytest.mark.parametrize(("card", "offset", "message"), BAD)
def test_bad_cards(card: str, offset: int, message: str) -> None:
    with pytest.raises(CardSyntaxError) as caught:
        parse_card(card)
    assert (caught.value.offset, caught.value.message) == (offset, message)
    assert caught.value.hint  # every message comes with a fix to try


@pytest.mark.parametrize("card", [c for c, _, _ in BAD])
def test_messages_never_name_lark_terminals(card: str) -> None:
    with pytest.raises(CardSyntaxError) as caught:
        parse_card(card)
    text = f"{caught.value.message} {caught.value.hint}"
    assert not re.search(r"\b[A-Z_]{4,}\b", text), text


# ---------------------------------------------------------------------------------------------
# Offsets: every token of every corpus card is the very text at its offset


def _decks() -> list[Path]:
    return sorted(p for p in DECKS.iterdir() if p.suffix in (".cir", ".sp"))


def _tokens(obj: object) -> Iterator[Token]:
    if isinstance(obj, Token):
        yield obj
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        for f in dataclasses.fields(obj):
            yield from _tokens(getattr(obj, f.name))
    elif isinstance(obj, tuple):
        for item in obj:
            yield from _tokens(item)


def _corpus_cards() -> list[tuple[str, str]]:
    cards: list[tuple[str, str]] = []
    for path in sorted(DECKS.rglob("*")):
        if path.suffix not in (".cir", ".sp", ".inc", ".lib"):
            continue
        deck = read(read_text(path), str(path), title=path.suffix in (".cir", ".sp"))
        cards.extend((path.name, card.logical().text) for card in deck.cards())
    return cards


@pytest.mark.parametrize(("deck", "text"), _corpus_cards())
def test_corpus_cards_parse_and_offsets_hold(deck: str, text: str) -> None:
    syntax = parse_card(text)
    for token in _tokens(syntax):
        assert text[token.offset : token.end] == token.text, (deck, token)


def test_corpus_has_at_least_twelve_decks() -> None:
    assert len(_decks()) >= 12


@pytest.mark.ngspice
@pytest.mark.skipif(shutil.which("ngspice") is None, reason="ngspice is not installed")
@pytest.mark.parametrize("deck", _decks(), ids=lambda p: p.name)
def test_ngspice_accepts_corpus_deck(deck: Path, tmp_path: Path) -> None:
    # The corpus shows layouts ngspice accepts, so ngspice 39 itself must accept each deck.
    run = subprocess.run(
        ["ngspice", "-b", str(deck)],
        cwd=deck.parent,
        capture_output=True,
        text=True,
        errors="replace",
        timeout=120,
        env={**os.environ, "HOME": str(tmp_path)},
    )
    log = run.stdout + run.stderr
    assert run.returncode == 0, log
    problems = [
        line
        for line in log.splitlines()
        if re.search(r"\berror\b", line, re.I) and "error = 7" not in line
    ]
    assert problems == []


# ---------------------------------------------------------------------------------------------
# Where the grammar is loaded from


def test_grammar_from_repository_in_editable_install() -> None:
    # In an editable install heatweave/grammar/ does not exist, so the repo folder is used.
    assert grammar.grammar_dir() == REPO / "grammar"


def test_grammar_from_installed_package(tmp_path: Path) -> None:
    # The wheel's layout (pyproject force-include "grammar" -> "heatweave/grammar"), built by
    # hand: the package copy must win, and parsing must work from it alone.
    site = tmp_path / "site"
    shutil.copytree(
        REPO / "src" / "heatweave", site / "heatweave", ignore=shutil.ignore_patterns("__pycache__")
    )
    shutil.copytree(REPO / "grammar", site / "heatweave" / "grammar")
    script = textwrap.dedent("""
        from heatweave.spice import grammar
        print(grammar.grammar_dir())
        print(grammar.parse_card("R1 a b 1k").nodes[1].text)
    """)
    run = subprocess.run(
        [sys.executable, "-c", script],
        capture_output=True,
        text=True,
        env={**os.environ, "PYTHONPATH": str(site)},
        cwd=tmp_path,
        check=False,
    )
    assert run.returncode == 0, run.stderr
    folder, node = run.stdout.split()
    assert Path(folder) == site / "heatweave" / "grammar"
    assert node == "b"


def test_missing_grammar_is_reported(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    monkeypatch.setattr(grammar, "grammar_dirs", lambda: [tmp_path / "a", tmp_path / "b"])
    with pytest.raises(FileNotFoundError, match=r"spice\.lark"):
        grammar.grammar_dir()


def test_later_param_wins() -> None:
    # A repeated instance parameter overrides the earlier one: checked with ngspice 39.3,
    # "R1 1 0 r=1k r=2k" across 1 V draws 0.5 mA.
    syntax = element("R1 a b 1k TC1=1m tc1=2m")
    found = syntax.param("Tc1")
    assert found is not None and found.value.text == "2m"
    model = parse_card(".model rm r tc1=1m")
    assert isinstance(model, ModelSyntax)
    assert model.param("TC1") is not None and model.param("tc2") is None


# Any text at all gives typed syntax or a CardSyntaxError inside the card: never a traceback.
_PIECES = [*"RrCcVvEeGgXxAaQqMmUuKkDd .,=(){}'\"[]%~+-*/<>!?:01kmu", "%vd", ".model ",
           ".subckt ", ".func ", ".param ", ".if", ".lib ", ".include ", "v(", "poly(2) ",
           "table ", "params: ", " thermal", " null", ".ic ", "\t"]  # fmt: skip


@given(st.lists(st.sampled_from(_PIECES), min_size=1, max_size=16).map("".join))
@settings(max_examples=400, deadline=None)
def test_any_text_parses_or_fails_cleanly(text: str) -> None:
    try:
        parse_card(text)
    except CardSyntaxError as error:
        assert 0 <= error.offset <= len(text)
        assert not re.search(r"\b[A-Z_]{4,}\b", error.message)


@pytest.mark.parametrize(
    "text",
    [
        "V1 a 0 PULSE(0 10 0 1u 1u 5u 10u AC 1 0",
        "I1 a 0 dc 1 sin(0 1 1k distof1 0.1",
        "V1 a 0 PWL(0 0 1u 1",
    ],
)
def test_an_unclosed_source_function_keeps_every_offset(text: str) -> None:
    # ngspice 39 closes it before the next keyword, else at the end (run in
    # tests/test_waves_sources.py); every token still names its place in the card as written.
    syntax = parse_card(text)
    assert isinstance(syntax, ElementSyntax)
    fields = [*syntax.nodes, *syntax.positional]
    function = syntax.source(text).function
    assert function is not None
    fields += list(function.args)
    words = [f for f in fields if isinstance(f, Token) and not isinstance(f, Call)]
    assert len(words) == len(text.replace("(", " ").split()) - 2  # all but name and keyword
    for word in words:
        assert text[word.offset : word.end] == word.text
