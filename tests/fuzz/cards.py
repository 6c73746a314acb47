"""Card families for the lint/ngspice differential check (``tests/fuzz/lintdiff.py``).

Each family writes one construct as designers write it, with a random choice among the
forms and optional keywords the ngspice 39 manual gives for it (sections named beside
each family).  A family returns the lines it adds (its element, the ``.model``,
``.param``, ``.subckt`` it needs) and any file it includes; every name carries the
family's number ``n`` so that two families in one deck never clash.  Node ``in`` is held
at 1 V by the deck's ``V1``; every other node a family makes has a resistor to ground, so
that ngspice's operating point exists.
"""

from __future__ import annotations

import random
from collections.abc import Callable
from dataclasses import dataclass, field


@dataclass
class Part:
    """What one family adds to a deck."""

    lines: list[str]
    files: dict[str, str] = field(default_factory=dict)
    # lines that must stay at the top level (a .param used by the element, a .model)
    tag: str = ""


Family = Callable[[random.Random, int], Part]


def _some(rng: random.Random, options: list[str], most: int) -> list[str]:
    return rng.sample(options, rng.randint(0, min(most, len(options))))


def _join(*words: str) -> str:
    return " ".join(w for w in words if w)


# 2.1.4.2 and 2.1.4.3: numbers with scale factors and trailing letters
RESISTANCES = ["1k", "1K", "2.2k", "1meg", "1Meg", "4.7e3", "1e3ohm", "10kOhm", "1k5", "2K7",
               "100", "470R", "1.5e+3", "1000.0", ".5k", "1Megohm", "330", "1e3k"]  # fmt: skip


def resistor(rng: random.Random, n: int) -> Part:
    """3.3.1 to 3.3.4."""
    lines = [f".param rv{n}=1k"]
    value = rng.choice([*RESISTANCES, f"{{rv{n}}}", f"{{rv{n}*2}}", f"'rv{n}*2'",
                        f"{{ 2 * rv{n} }}", f"{{rv{n}}}k"])  # fmt: skip
    keywords = _some(rng, ["tc1=1m", "tc2=1u", "tc=1m", "tce=0.5", "m=2", "scale=1.5",
                           "temp=50", "dtemp=10", "ac=2k", "noisy=0", "noisy=1", "tc1 = 2m",
                           "TC1=-1m", "bv_max=100", "tc=1m,1u"], 3)  # fmt: skip
    form = rng.randrange(6)
    head = f"R{n} in a{n}"
    if form == 0:
        card = _join(head, value, *keywords)
    elif form == 1:
        card = _join(head, rng.choice(["r=", "r = ", "R=", "resistance="]) + value, *keywords)
    elif form == 2:
        card = _join(head, value, f"rmod{n}", *keywords)
        lines.append(f".model rmod{n} r(tc1=0.5m)")
    elif form == 3:
        card = _join(head, f"rmod{n}", "l=20u w=2u", *keywords)
        lines.append(f".model rmod{n} r(rsh=100 {rng.choice(['', 'defw=2u', 'narrow=0.1u'])})")
    elif form == 4:
        card = _join(head, rng.choice([f"r='rv{n}+1k'", f"R = {{rv{n}/2}}",
                                       f"{{rv{n} + 50*temper}}"]), *keywords)  # fmt: skip
    else:
        card = _join(head, rng.choice(["r='v(in)*1k+1k'", "'1k+v(in)'"]),
                     *_some(rng, ["tc1=1m", "tc2=1u", "noisy=0"], 2))  # fmt: skip
    return Part([*lines, card, f"Rg{n} a{n} 0 1k"])


def capacitor(rng: random.Random, n: int) -> Part:
    """3.3.6 to 3.3.9."""
    value = rng.choice(["10u", "10uF", "1n", "100p", "1e-9", "4.7nF", f"{{cv{n}}}", "c=1n",
                        "C = 2p", f"'cv{n}*2'", f"1p cmod{n}", f"cmod{n} 1p",
                        f"cmod{n} l=10u w=2u"])  # fmt: skip
    keywords = _some(rng, ["ic=0.5", "IC=0", "m=2", "scale=1", "temp=50", "dtemp=5",
                           "tc1=1m", "tc2=1u"], 3)  # fmt: skip
    lines = [f".param cv{n}=1n"]
    if "cmod" in value:
        lines.append(f".model cmod{n} c(cj=1e-4 cjsw=1e-10 {rng.choice(['', 'tc1=1m'])})")
    return Part([*lines, _join(f"C{n} in a{n}", value, *keywords), f"Rg{n} a{n} 0 1k"])


def inductor(rng: random.Random, n: int) -> Part:
    """3.3.10 to 3.3.13, and K (3.3.12)."""
    value = rng.choice(["1m", "1mH", "10u", "l=1u", "L = 2u", f"{{lv{n}}}", f"'lv{n}*2'",
                        f"1u lmod{n}", f"lmod{n} 1u"])  # fmt: skip
    keywords = _some(rng, ["ic=1m", "m=2", "nt=10", "scale=1", "temp=50", "dtemp=5",
                           "tc1=1m", "tc2=1u"], 3)  # fmt: skip
    lines = [f".param lv{n}=1m"]
    if "lmod" in value:
        lines.append(f".model lmod{n} l({rng.choice(['tc1=1m', 'ind=1u', 'tc1=1m tc2=1u'])})")
    lines += [_join(f"L{n} in a{n}", value, *keywords), f"Rg{n} a{n} 0 1k"]
    if rng.random() < 0.4:
        lines += [f"Lk{n} b{n} 0 1m", f"Rk{n} b{n} 0 1k",
                  _join(f"K{n} L{n} Lk{n}",
                        rng.choice(["0.5", "k=0.5", "{0.9}", "0.999"]))]  # fmt: skip
    return Part(lines)


DIODE_MODELS = ["d(is=1e-14 n=1.05 rs=1 cjo=1p bv=100)", "D (IS=1e-14, N=1.05)",
                "d is=2e-14 rs=0.5", "d(level=3 is=1e-14)", "d(is=1e-14 tt=5n vj=0.7 m=0.4)",
                "d(is=1e-14 rth0=10 cth0=1m)", "d(level=1 is=1e-14 ibv=1m)"]  # fmt: skip


def diode(rng: random.Random, n: int) -> Part:
    """7.1."""
    keywords = _some(rng, ["area=2", "2", "m=2", "pj=1e-6", "off", "ic=0.6", "temp=50",
                           "dtemp=5", "AREA = 1.5"], 3)  # fmt: skip
    if "2" in keywords:  # a positional area goes right after the model
        keywords.remove("2")
        keywords.insert(0, "2")
    model = f".model dmod{n} {rng.choice(DIODE_MODELS)}"
    return Part([model, _join(f"D{n} in a{n} dmod{n}", *keywords), f"Rg{n} a{n} 0 1k"])


def bjt(rng: random.Random, n: int) -> Part:
    """8.1, 8.2."""
    kind = rng.choice(["npn", "pnp", "NPN"])
    params = rng.choice(["(bf=100 is=1e-15)", " bf=100 is=1e-15", "(level=1 bf=50 vaf=100)",
                         "(level=4 is=1e-16 bf=80)", "(bf=100, is=1e-15, rb=10)", ""])  # fmt: skip
    keywords = _some(rng, ["area=2", "areac=1", "areab=1", "m=2", "off", "ic=0.7,1",
                           "ic=0.7, 1", "temp=50", "dtemp=5"], 3)  # fmt: skip
    nodes = rng.choice([f"c{n} b{n} 0", f"c{n} b{n} 0 0"])
    if "level=4" in params and rng.random() < 0.5:
        nodes = f"c{n} b{n} 0 0 t{n}"
    lines = [f".model qmod{n} {kind}{params}", _join(f"Q{n} {nodes} qmod{n}", *keywords),
             f"Rc{n} in c{n} 1k", f"Rb{n} in b{n} 100k"]  # fmt: skip
    if f"t{n}" in nodes:
        lines.append(f"Rt{n} t{n} 0 1k")
    return Part(lines)


def jfet(rng: random.Random, n: int) -> Part:
    """9.1, 9.2."""
    kind = rng.choice(["njf", "pjf"])
    params = rng.choice(["(vto=-2 beta=1e-4)", "(level=2 vto=-2 beta=1e-4)", " vto=-2",
                         "(vto=-2 lambda=1e-3 rd=1 rs=1)"])  # fmt: skip
    keywords = _some(rng, ["area=2", "off", "ic=1,0", "temp=50"], 2)
    return Part([f".model jmod{n} {kind}{params}",
                 _join(f"J{n} d{n} g{n} 0 jmod{n}", *keywords),
                 f"Rd{n} in d{n} 1k", f"Rgg{n} g{n} 0 1k"])  # fmt: skip


MOS_MODELS = ["(level=1 vto=0.7 kp=1e-4)", "(level=2 vto=0.7 kp=1e-4)",
              "(level=3 vto=0.7 kp=1e-4)", "(level=8 version=3.3.0)", "(level=49)",
              "(level=14 version=4.8.1)", "(level=54)", " level=1 vto=0.7", "",
              "(vto=0.7 kp=1e-4 lambda=0.02 gamma=0.4 phi=0.6)"]  # fmt: skip


def mosfet(rng: random.Random, n: int) -> Part:
    """11.1, 11.2, 11.3 (VDMOS)."""
    if rng.random() < 0.2:
        keywords = _some(rng, ["m=2", "off", "temp=50"], 2)
        return Part([f".model vmod{n} vdmos(vto=2 kp=1 {rng.choice(['', 'rthjc=1 cthj=1m'])})",
                     _join(f"M{n} d{n} in 0 vmod{n}", *keywords), f"Rd{n} in d{n} 1k"])  # fmt: skip
    kind = rng.choice(["nmos", "pmos", "NMOS"])
    keywords = _some(rng, ["w=10u", "l=1u", "W=2u L=0.5u", "ad=1p", "as=1p", "pd=10u",
                           "ps=10u", "nrd=1", "nrs=1", "m=2", "off", "ic=1,2,0", "temp=50",
                           "dtemp=5"], 4)  # fmt: skip
    return Part([f".model mmod{n} {kind}{rng.choice(MOS_MODELS)}",
                 _join(f"M{n} d{n} in 0 0 mmod{n}", *keywords), f"Rd{n} in d{n} 1k"])  # fmt: skip


def mesfet(rng: random.Random, n: int) -> Part:
    """10.1."""
    keywords = _some(rng, ["area=2", "2", "off", "ic=1,0"], 2)
    if "2" in keywords:
        keywords.remove("2")
        keywords.insert(0, "2")
    return Part([f".model zmod{n} {rng.choice(['nmf', 'pmf'])}(vto=-1.5 beta=1e-3)",
                 _join(f"Z{n} d{n} 0 0 zmod{n}", *keywords), f"Rd{n} in d{n} 1k"])  # fmt: skip


SOURCE_FORMS = ["1", "dc 1", "DC 1V", "dc=1", "1 ac 1", "dc 1 ac 1 90", "ac 1",
                "pulse(0 1 0 1n 1n 1u 2u)", "PULSE 0 1 0 1n 1n 1u 2u",
                "pulse(0 1 0 1n 1n 1u)", "sin(0 1 1k)", "SIN(0 1 1k 0 0 0)",
                "exp(0 1 1u 1u 2u 3u)", "pwl(0 0 1u 1)", "PWL(0 0 1u 1 2u 0) r=0",
                "pwl(0 0 1u 1) td=1n", "sffm(0 1 1k 5 100)", "am(1 0 1k 100 0)",
                "dc 0.5 pulse(0 1 0 1n 1n 1u 2u) ac 1", "{sv%d}", "dc {sv%d}",
                "trnoise(0 1n 0 0)", "pwl(0,0,1u,1)", "sin 0 1 1k"]  # fmt: skip


def source(rng: random.Random, n: int) -> Part:
    """4.1."""
    form = rng.choice(SOURCE_FORMS).replace("%d", str(n))
    lines = [f".param sv{n}=0.5"]
    if rng.random() < 0.5:
        return Part([*lines, f"V{n} a{n} 0 {form}", f"Rg{n} a{n} 0 1k"])
    form = form.replace("1V", "1mA")
    return Part([*lines, f"I{n} 0 a{n} {form}", f"Rg{n} a{n} 0 1k"])


def controlled(rng: random.Random, n: int) -> Part:
    """4.2, 5.2 to 5.5: E, G, F, H."""
    lines = [f"Vs{n} in s{n} 0", f"Rs{n} s{n} 0 1k", f"Rg{n} a{n} 0 1k"]
    letter = rng.choice("EGFH")
    if letter == "E":
        body = rng.choice(["in 0 2", "(in 0) 2", "in 0 -1.5", "vol='v(in)*2'",
                           "value={v(in)*2}", "value = {V(in)/2}", "poly(1) in 0 0 2",
                           f"POLY(2) in 0 s{n} 0 0 1 1", "table {v(in)} = (0,0) (1,2)",
                           "TABLE {V(in)} = (0 0) (2 4)", f"in 0 {{ev{n}}}",
                           "vol = {v(in)}"])  # fmt: skip
        lines.append(f".param ev{n}=3")
    elif letter == "G":
        body = rng.choice(["in 0 1m", "(in 0) 1m", "cur='v(in)*1m'", "value={v(in)*1m}",
                           "poly(1) in 0 0 1m", "in 0 1m m=2", "cur = {v(in)/1k} m=2",
                           "table {v(in)} = (0,0) (1,1m)"])  # fmt: skip
    elif letter == "F":
        body = rng.choice([f"Vs{n} 2", f"vs{n} 0.5 m=2", f"poly(1) Vs{n} 0 2"])
    else:
        body = rng.choice([f"Vs{n} 100", f"poly(1) vs{n} 0 100", f"Vs{n} {{2*50}}"])
    return Part([*lines, f"{letter}{n} a{n} 0 {body}"])


B_EXPRESSIONS = ["v(in)*2", "V(in) > 0.5 ? 1 : 0", "sqrt(abs(v(in)))", "exp(v(in))-1",
                 "ln(1+v(in))", "log10(1+v(in))", "min(v(in), 0.5)", "max(v(in),0.2)",
                 "pwl(v(in), 0,0, 1,2)", "u(v(in)-0.5)", "uramp(v(in))", "{bk%d}*v(in)",
                 "v(in)^2", "v(in)**2", "pow(v(in),2)", "pwr(v(in),2)", "tanh(v(in))",
                 "i(Vb%d)*1k", "sgn(v(in))", "v(in)*(1+0.001*(temper-27))", "time*1k",
                 "ternary_fcn(v(in)>0.5, 1, 0)", "pi*v(in)", "floor(v(in)*3)",
                 "v(in,0)*2", "-v(in)", "!0"]  # fmt: skip


def behavioural(rng: random.Random, n: int) -> Part:
    """5.1."""
    expr = rng.choice(B_EXPRESSIONS).replace("%d", str(n))
    kind = rng.choice(["V=", "v = ", "I=", "i="])
    if kind.strip()[0] in "iI":
        expr = f"({expr})*1m"
    keywords = _some(rng, ["tc1=1m", "tc2=1u", "temp=50", "dtemp=5"], 2)
    lines = [f".param bk{n}=2", f"Vb{n} in b{n} 0", f"Rb{n} b{n} 0 1k", f"Rg{n} a{n} 0 1k",
             _join(f"B{n} a{n} 0 {kind}{expr}", *keywords)]  # fmt: skip
    return Part(lines)


def switch(rng: random.Random, n: int) -> Part:
    """3.3.15."""
    state = rng.choice(["", "on", "off", "OFF"])
    if rng.random() < 0.5:
        model = rng.choice(["sw(vt=0.5 vh=0.1 ron=1 roff=1meg)", "sw vt=0.5 ron=1",
                            "SW(VT=0.5, VH=0.1)", "sw"])  # fmt: skip
        card = _join(f"S{n} a{n} 0 in 0 smod{n}", state)
        return Part([f".model smod{n} {model}", card, f"Ra{n} in a{n} 1k"])
    model = rng.choice(["csw(it=1m ih=0.1m ron=1 roff=1meg)", "csw it=1m", "csw"])
    return Part([f".model smod{n} {model}", f"Vw{n} in w{n} 0", f"Rw{n} w{n} 0 1k",
                 _join(f"W{n} a{n} 0 Vw{n} smod{n}", state), f"Ra{n} in a{n} 1k"])  # fmt: skip


def line(rng: random.Random, n: int) -> Part:
    """6.1 to 6.4: T, O, U, Y."""
    kind = rng.randrange(4)
    load = f"Rg{n} a{n} 0 50"
    if kind == 0:
        extra = rng.choice(["z0=50 td=1n", "Z0=50 TD=10n", "z0=50 f=1meg nl=0.25",
                            "z0=50 f=1meg", "z0=50 td=1n ic=1,0,1,0",
                            "z0 = 50 td = 1n"])  # fmt: skip
        return Part([f"T{n} in 0 a{n} 0 {extra}", load])
    if kind == 1:
        return Part([f".model omod{n} ltra(r=0.1 l=1e-9 c=1e-12 len=1)",
                     f"O{n} in 0 a{n} 0 omod{n}", load])  # fmt: skip
    if kind == 2:
        return Part([f".model umod{n} urc(k=1.2 fmax=1g rperl=1k cperl=1e-15)",
                     _join(f"U{n} in a{n} 0 umod{n} l=10u", rng.choice(["", "n=4"])),
                     load])  # fmt: skip
    return Part([f".model ymod{n} txl(r=12.45 l=8.97e-9 g=0 c=4.68e-13 length=1)",
                 _join(f"Y{n} in 0 a{n} 0 ymod{n}", rng.choice(["", "len=1"])), load])  # fmt: skip


PARAM_EXPRESSIONS = ["2k", "{2k}", "{sqrt(4)*1k}", "{pow(2,3)*100}", "{min(1k,2k)}",
                     "{max(1k, 2k)}", "{abs(-1k)}", "{exp(0)*1k}", "{ln(1)+1k}",
                     "{log10(100)*500}", "{pk%d_a > 1 ? 2k : 3k}", "{pk%d_a*2}",
                     "'pk%d_a*2'", "{pi*1k}", "{int(2.7)*1k}", "{floor(2.7)*1k}",
                     "{ceil(1.2)*1k}", "{nint(1.6)*1k}", "{pk%d_a == 1k ? 1k : 2k}",
                     "{(pk%d_a + 1k) / 2}", "{1e3}", "{1meg/1k}", "{2**3*100}", "{2^3*100}",
                     "{sgn(-1)*-1k}", "{sqr(2)*250}", "{if(1, 2k, 3k)}", "{limit(5k,1k,2k)}",
                     "pk%d_a+1k", "{pk%d_a%%3}", "{agauss(1k, 0, 1)}", "{5k*(1>0)}",
                     "{1k*!0}", "{(1 < 2) && (2 < 3) ? 1k : 2k}", "{1k || 0}"]  # fmt: skip


def parameter(rng: random.Random, n: int) -> Part:
    """2.9: .param with functions and ternaries."""
    expr = rng.choice(PARAM_EXPRESSIONS).replace("%d", str(n)).replace("%%", "%")
    sep = rng.choice(["=", " = ", "= "])
    first = rng.choice([f".param pk{n}_a=1k", f".PARAM pk{n}_a = 1k", f".params pk{n}_a=1k"])
    if rng.random() < 0.3:
        return Part([f"{first} pk{n}_b{sep}{expr}", f"R{n} in 0 {{pk{n}_b}}"])
    return Part([first, f".param pk{n}_b{sep}{expr}", f"R{n} in 0 {{pk{n}_b}}"])


def function(rng: random.Random, n: int) -> Part:
    """2.10: .func."""
    form = rng.choice([".func f%d(x) {x*2}", ".func f%d(x) = {x*2}", ".func f%d(x)={x*2}",
                       ".FUNC F%d(X) {X*2}", ".func f%d(x) x*2", ".func f%d(x) = x*2",
                       ".func f%d(x) '2*x'"]).replace("%d", str(n))  # fmt: skip
    use = rng.choice(["{f%d(1k)}", "{f%d(1k)+1k}", "'f%d(500)'", "{2*f%d(1k)}",
                      "{pf%d > 0 ? f%d(1k) : 1k}"]).replace("%d", str(n))  # fmt: skip
    return Part([form, f".param pf{n}=1", f"R{n} in 0 {use}"])


def subcircuit(rng: random.Random, n: int) -> Part:
    """2.5, 2.9.3: .subckt with parameters and defaults, nesting."""
    params = rng.choice(["", "params: rv=1k", "rv=1k", "PARAMS: rv=1k cv=1n", "rv = 1k"])
    header = _join(f".subckt sub{n} p q", params)
    value = "{rv}" if "rv" in params else "1k"
    body = [f"R1 p m {value}", "R2 m q 1k"]
    if rng.random() < 0.3:
        body.append(".param rin = 2k")
        body.append("R3 m q {rin}")
    if rng.random() < 0.3:
        body += [".model dloc d(is=1e-14)", "D1 m q dloc"]
    if rng.random() < 0.3:
        body += [f".subckt inner{n} a b", "Ri a b 10k", f".ends inner{n}", f"Xi m q inner{n}"]
    end = rng.choice([".ends", f".ends sub{n}", ".ENDS"])
    call = f"X{n} in 0 sub{n}"
    if "rv" in params:
        call = _join(call, rng.choice(["", "rv=2k", "params: rv=2k", "RV = 3k", "rv={2*1k}"]))
    return Part([header, *body, end, call])


def include(rng: random.Random, n: int) -> Part:
    """2.7, 2.8: .include and .lib sections."""
    if rng.random() < 0.5:
        name = rng.choice([f"inc{n}.inc", f"Inc{n}.INC", f"sub/inc{n}.sp"])
        spelled = rng.choice([name, f'"{name}"', f"'{name}'"])
        body = f"* models\n.model dinc{n} d(is=1e-14)\nRinc{n} in 0 10k\n"
        card = rng.choice([".include", ".INCLUDE", ".inc", ".includ"])
        return Part([f"{card} {spelled}", f"D{n} in a{n} dinc{n}", f"Rg{n} a{n} 0 1k"],
                    {name: body})  # fmt: skip
    name = rng.choice([f"lib{n}.lib", f"models{n}.LIB"])
    section = rng.choice(["fast", "Fast", "tt"])
    end = rng.choice([".endl", f".endl {section}", ".ENDL"])
    body = (f"* library\n.lib {section}\n.model dlib{n} d(is=1e-14)\n{end}\n"
            f".lib other\n.model dlib{n} d(is=1e-12)\n.endl other\n")  # fmt: skip
    spelled = rng.choice([name, f'"{name}"', f"'{name}'"])
    return Part([f".lib {spelled} {section}", f"D{n} in a{n} dlib{n}", f"Rg{n} a{n} 0 1k"],
                {name: body})  # fmt: skip


OPTIONS = ["reltol=1e-4", "abstol=1e-12", "vntol=1u", "temp=30", "tnom=25", "noacct",
           "method=gear", "method=trap", "gmin=1e-12", "itl1=200", "itl4=50", "savecurrents",
           "warn=1", "klu", "rshunt=1e12", "trtol=7", "maxord=2", "chgtol=1e-14",
           "pivtol=1e-13", "noopiter", "gminsteps=10", "srcsteps=5", "filetype=ascii",
           "cshunt=1e-15", "sparse", "numdgt=8", "list", "nopage", "node", "opts",
           "interp", "keepopinfo", "seed=5", "defad=1p", "defl=1u", "defw=10u",
           "scale=1", "tnom = 25", "ITL2=50"]  # fmt: skip


def options(rng: random.Random, n: int) -> Part:
    """15.1 (.options), 2.12 (.temp), 15.2 (.ic, .nodeset), 2.6 (.global)."""
    kind = rng.randrange(5)
    if kind == 0:
        card = rng.choice([".options", ".option", ".opt", ".OPTIONS", ".optio"])
        return Part([_join(card, *rng.sample(OPTIONS, rng.randint(1, 3)))])
    if kind == 1:
        return Part([rng.choice([".temp 30", ".TEMP 50", ".temp 27 50", ".temp=30",
                                 ".temp -40"])])  # fmt: skip
    if kind == 2:
        return Part([f"Cn{n} a{n} 0 1n", f"Rg{n} in a{n} 1k",
                     rng.choice([f".ic v(a{n})=0.5", f".IC V(a{n}) = 0.1",
                                 f".nodeset v(a{n})=0.5", ".nodeset all=0.5",
                                 f".ic v(a{n})=0.5 v(in)=1",
                                 f".nodeset v(a{n}) 0.5"])])  # fmt: skip
    if kind == 3:
        return Part([".global gnd", f"Rgl{n} in gnd 1k"])
    return Part([rng.choice([f".csparam cs{n}=3", ".save v(in) i(V1)", ".save all",
                             ".probe v(in)", ".width out=80"])])  # fmt: skip


MODELS = ["r(rsh=50)", "c(cj=1e-4)", "l(ind=1u)", "d(is=1e-14)", "npn(bf=80)", "pnp bf=80",
          "njf(vto=-2)", "pjf", "nmos(level=1)", "pmos(level=2 vto=-0.7)",
          "nmos(level=3)", "nmos(level=8)", "nmos(level=49)", "nmos(level=14)",
          "nmos(level=54)", "nmf", "pmf(vto=1)", "sw(vt=1)", "csw(it=1m)", "ltra(len=1)",
          "urc(k=1.2)", "txl(r=1 l=1n c=1p length=1)", "vdmos(vto=2)", "vdmos pchan",
          "NPN(BF=80 IS=1e-15 VAF=100)", "d(is=1e-14,n=1)", "d ( is = 1e-14 )",
          "npn(level=4)", "nmos(level=9)", "nmos(level=10)", "nmos(level=4)",
          "nmos(level=5)", "nmos(level=6)", "nmos(level=44)", "pmos(level=47)",
          "nmos(level=57)", "nmos(level=60)", "nmos(level=68)", "nmos(level=73)",
          "npn(level=9)", "d(level=3)", "d(level=2)", "r", "c", "l", "d", "npn",
          "nmos", "hfet1", "nhfet(level=5)", "nmos(level=62)"]  # fmt: skip


def model(rng: random.Random, n: int) -> Part:
    """2.4 and the device chapters: a .model of many types and levels, unused."""
    return Part([f".model um{n} {rng.choice(MODELS)}"])


FAMILIES: dict[str, Family] = {
    "resistor": resistor, "capacitor": capacitor, "inductor": inductor, "diode": diode,
    "bjt": bjt, "jfet": jfet, "mosfet": mosfet, "mesfet": mesfet, "source": source,
    "controlled": controlled, "behavioural": behavioural, "switch": switch, "line": line,
    "parameter": parameter, "function": function, "subcircuit": subcircuit,
    "include": include, "options": options, "model": model,
}  # fmt: skip
