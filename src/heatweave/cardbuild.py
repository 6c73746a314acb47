"""From lark's parse tree of one card to the typed syntax of :mod:`heatweave.syntax`.

The grammar splits a card into fields; this module does what only knowledge of the card
type can: the node count of each element letter (manual Table 2.1), which fields form one
unbraced expression (``cos(v(1))+sin(v(2))``, ``V(1) < {Vlow} ? {Vlow} : V(1)``), which
values belong to one ``ic=0.6, 5`` pair, and the typed dot cards.
"""

from __future__ import annotations

import threading
from typing import Any, TypeGuard

from lark import Token as LarkToken
from lark import Transformer

from heatweave.syntax import (
    Call,
    CardSyntax,
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
    NodeSetting,
    Param,
    ParamCardSyntax,
    Port,
    SubcktSyntax,
    TitleSyntax,
    Token,
    Value,
    ValueKind,
    classify,
)


class BuildError(Exception):
    """A card that parses as fields but breaks its card type's rules."""

    def __init__(self, offset: int, message: str, hint: str | None = None) -> None:
        super().__init__(message)
        self.offset = offset
        self.message = message
        self.hint = hint


# Short general forms (after Table 2.1 and the chapter sections) used in hints.
FORMS: dict[str, str] = {
    "r": "R<name> <n+> <n-> <value>",
    "c": "C<name> <n+> <n-> <value>",
    "l": "L<name> <n+> <n-> <value>",
    "v": "V<name> <n+> <n-> [dc] <value>",
    "i": "I<name> <n+> <n-> [dc] <value>",
    "b": "B<name> <n+> <n-> v=<expr> (or i=<expr>)",
    "d": "D<name> <n+> <n-> <model>",
    "k": "K<name> <L1> <L2> <coupling>",
    "s": "S<name> <n+> <n-> <nc+> <nc-> <model>",
    "w": "W<name> <n+> <n-> <vsource> <model>",
    "e": "E<name> <n+> <n-> <nc+> <nc-> <gain>",
    "g": "G<name> <n+> <n-> <nc+> <nc-> <gain>",
    "f": "F<name> <n+> <n-> <vsource> <gain>",
    "h": "H<name> <n+> <n-> <vsource> <gain>",
    "q": "Q<name> <nc> <nb> <ne> <model>",
    "j": "J<name> <nd> <ng> <ns> <model>",
    "z": "Z<name> <nd> <ng> <ns> <model>",
    "m": "M<name> <nd> <ng> <ns> <nb> <model>",
    "t": "T<name> <n1> <n2> <n3> <n4> z0=<value> td=<value>",
    "o": "O<name> <n1> <n2> <n3> <n4> <model>",
    "y": "Y<name> <n1> <n2> <n3> <n4> <model>",
    "u": "U<name> <n1> <n2> <n3> <model> l=<length>",
    "p": "P<name> <inputs...> <gnd1> <outputs...> <gnd2> <model>",
    "x": "X<name> <nodes...> <subcircuit>",
    "a": "A<name> <ports...> <model>",
    "n": "N<name> <nodes...> <model>",
}

FIXED_NODES: dict[str, int] = {
    "r": 2,
    "c": 2,
    "l": 2,
    "v": 2,
    "i": 2,
    "b": 2,
    "k": 0,
    "s": 4,
    "w": 2,
    "f": 2,
    "h": 2,
    "q": 3,
    "j": 3,
    "z": 3,
    "t": 4,
    "o": 4,
    "y": 4,
}
# Letters whose card must name a model (or a source / subcircuit) after the nodes.
_NEEDS_MODEL = {
    "d": "model name",
    "s": "model name",
    "q": "model name",
    "j": "model name",
    "z": "model name",
    "m": "model name",
    "o": "model name",
    "y": "model name",
    "n": "model name",
    "p": "model name",
    "w": "controlling voltage source",
    "f": "controlling voltage source",
    "h": "controlling voltage source",
}
_NONLINEAR_KEYS = {"value", "vol", "cur", "table", "poly"}
_DIGITAL_GATES = {
    "buf",
    "inv",
    "and",
    "nand",
    "or",
    "nor",
    "xor",
    "nxor",
    "bufa",
    "inva",
    "anda",
    "nanda",
    "ora",
    "nora",
    "xora",
    "nxora",
    "ao",
    "oa",
    "aoi",
    "oai",
    "pullup",
    "pulldown",
    "dff",
    "jkff",
    "srff",
    "dltch",
    "pindly",
    "logicexp",
    "constraint",
    "tristate",
    "buf3",
    "inv3",
}
_OPERATOR_CHARS = frozenset("+-*/^<>!?:&|%\\=")
_NODE_FORBIDDEN = "<>"


def _is_keyword_colon(field: Field) -> bool:
    return isinstance(field, Value) and field.key in ("params:", "optional:")


def _end_of(fields: list[Field], default: int) -> int:
    return fields[-1].end if fields else default


_LOCAL = threading.local()


def use_text(text: str) -> None:
    """Set the logical text the (shared, inline) transformer slices; per thread."""
    _LOCAL.text = text


class ToSyntax(Transformer[LarkToken, Any]):
    """The lark Transformer at the boundary: tokens to :mod:`heatweave.syntax` objects.

    It runs inside the LALR parser (``Lark(transformer=...)``), so no parse tree is built;
    :func:`use_text` gives it the card's text for the slices of calls and groups.
    """

    @property
    def text(self) -> str:
        """The card being parsed."""
        text: str = _LOCAL.text
        return text

    # -- terminals ------------------------------------------------------------------------
    def WORD(self, tok: LarkToken) -> Value:
        return classify(str(tok), tok.start_pos or 0)

    BRACE = SQUOTE = DQUOTE = WORD

    def PATH(self, tok: LarkToken) -> Value:
        text = str(tok)
        kind = {'"': ValueKind.STRING, "'": ValueKind.QUOTED}.get(text[0], ValueKind.NAME)
        return Value(text, tok.start_pos or 0, kind)

    def _plain(self, tok: LarkToken) -> Token:
        return Token(str(tok), tok.start_pos or 0)

    CALLNAME = ELEMENT_NAME = PORT_PREFIX = REST = DOT_NAME = _plain
    SUBCKT_KW = ENDS_KW = MODEL_KW = FUNC_KW = INCLUDE_KW = LIB_KW = ENDL_KW = _plain
    TITLE_KW = IF_KW = _plain

    # -- field rules ----------------------------------------------------------------------
    def call(self, children: list[Any]) -> Call:
        name, group = children
        args = tuple(f for f in group.items if not isinstance(f, Param))
        params = tuple(f for f in group.items if isinstance(f, Param))
        return Call(self.text[name.offset : group.end], name.offset, name, args, params)

    def group(self, children: list[Any]) -> Group:
        start, end = children[0].start_pos, children[-1].end_pos
        items = join_fields(children[1:-1], self.text)
        return Group(self.text[start:end], start, tuple(items))

    def vector(self, children: list[Any]) -> Port:
        nodes: list[Token] = []
        inverted: list[bool] = []
        for item in children[1:-1]:
            if isinstance(item, Port):
                nodes.extend(item.nodes)
                inverted.extend(item.inverted)
            elif isinstance(item, Value):
                nodes.append(Token(item.text, item.offset))
                inverted.append(False)
        start, end = children[0].start_pos, children[-1].end_pos
        return Port(None, tuple(nodes), tuple(inverted), True, start, end)

    def port(self, children: list[Any]) -> Port:
        prefix, inner = children
        if isinstance(inner, Port):
            return Port(prefix, inner.nodes, inner.inverted, inner.vector, prefix.offset, inner.end)
        items = inner.items if isinstance(inner, Group) else (inner,)
        nodes = tuple(Token(i.text, i.offset) for i in items if isinstance(i, Value))
        return Port(prefix, nodes, (False,) * len(nodes), False, prefix.offset, inner.end)

    def inverted(self, children: list[Any]) -> Port:
        tilde, word = children
        node = Token(word.text, word.offset)
        return Port(None, (node,), (True,), False, tilde.start_pos, word.end)

    def pair(self, children: list[Any]) -> Param:
        key, value = children
        if isinstance(value, Port):  # an XSPICE vector value: in_offset=[0.1 -0.2]
            value = Value(self.text[value.offset : value.end], value.offset, ValueKind.VECTOR)
        if isinstance(key, Value):
            key = Token(key.text, key.offset) if key.kind is not ValueKind.BRACE else key
        return Param(key, value)

    # -- cards ----------------------------------------------------------------------------
    def start(self, children: list[CardSyntax]) -> CardSyntax:
        return children[0]

    def element(self, children: list[Any]) -> ElementSyntax:
        return build_element(children[0], list(children[1:]), self.text)

    def subckt(self, children: list[Any]) -> SubcktSyntax:
        keyword, name, *fields = children
        fields = join_fields(fields, self.text)
        ports = tuple(
            Token(f.text, f.offset)
            for f in fields
            if isinstance(f, Value) and not _is_keyword_colon(f)
        )
        for f in fields:
            if not isinstance(f, Value | Param):
                raise BuildError(
                    f.offset, "expected a port name", "write .subckt <name> <ports...>"
                )
        params = tuple(f for f in fields if isinstance(f, Param))
        return SubcktSyntax(keyword, _name(name), ports, params)

    def ends(self, children: list[Any]) -> EndsSyntax:
        return EndsSyntax(children[0], _name(children[1]) if len(children) > 1 else None)

    def endl(self, children: list[Any]) -> EndlSyntax:
        return EndlSyntax(children[0], _name(children[1]) if len(children) > 1 else None)

    def model(self, children: list[Any]) -> ModelSyntax:
        keyword, name, kind, *fields = children
        if isinstance(kind, Call):
            fields = [*kind.args, *kind.params, *fields]
            kind = kind.name
        params, leftover = pair_up(join_fields(fields, self.text))
        return ModelSyntax(keyword, _name(name), _name(kind), params, leftover)

    def func(self, children: list[Any]) -> FuncSyntax:
        keyword, head, *body = children
        args = tuple(Token(a.text, a.offset) for a in head.args)
        return FuncSyntax(keyword, head.name, args, span_value(body, self.text))

    def include(self, children: list[Any]) -> IncludeSyntax:
        return IncludeSyntax(children[0], children[1])

    def lib(self, children: list[Any]) -> LibSyntax:
        if len(children) == 3:
            return LibSyntax(children[0], children[1], _name(children[2]))
        return LibSyntax(children[0], None, _name(children[1]))

    def title(self, children: list[Any]) -> TitleSyntax:
        return TitleSyntax(children[0], children[1] if len(children) > 1 else None)

    def if_card(self, children: list[Any]) -> IfSyntax:
        keyword, group = children
        inner = group.text[1:-1]
        lead = len(inner) - len(inner.lstrip())
        condition = Value(inner.strip(), group.offset + 1 + lead, ValueKind.EXPRESSION)
        if not condition.text:
            raise BuildError(
                group.offset + 1,
                "expected a condition inside '( )'",
                "write .if(<expression>), e.g. .if(corner == 1)",
            )
        return IfSyntax(keyword, condition)

    def other_dot(self, children: list[Any]) -> CardSyntax:
        keyword, *fields = children
        return build_dot(keyword, fields, self.text)


def _name(value: Token) -> Token:
    return Token(value.text, value.offset)


def span_value(fields: list[Field], text: str) -> Value:
    """Several fields that form one value, as one EXPRESSION value (a single value as is)."""
    if len(fields) == 1 and isinstance(fields[0], Value):
        return fields[0]
    start, end = fields[0].offset, fields[-1].end
    return Value(text[start:end], start, ValueKind.EXPRESSION)


def _last_value(field: Field) -> Field:
    if isinstance(field, Param):
        return field.more[-1] if field.more else field.value
    return field


def _linked(prev: Field, nxt: Field, across_blanks: bool) -> bool:
    """Whether *nxt* continues the unbraced expression that *prev* ends (2.9.7, 5.1)."""
    if isinstance(prev, Port) or isinstance(nxt, Param | Port):
        return False
    if _is_keyword_colon(prev) or _is_keyword_colon(nxt):
        return False
    if prev.end == nxt.offset:  # glued: v(1)*10k, {a}*2
        return True
    if not across_blanks:
        return False
    if (
        isinstance(prev, Value)
        and prev.kind is not ValueKind.STRING
        and (prev.text[-1] in _OPERATOR_CHARS)
    ):
        return True
    return (
        isinstance(nxt, Value)
        and nxt.kind in (ValueKind.NAME, ValueKind.EXPRESSION)
        and nxt.text[0] in _OPERATOR_CHARS
    ) or (isinstance(nxt, Call) and nxt.name.text[0] in _OPERATOR_CHARS)


def join_fields(fields: list[Field], text: str, across_blanks: bool = True) -> list[Field]:
    """Merge the pieces of unbraced expressions, and ``k=a, b`` values, into single fields.

    Run-time expressions (B, E, G, R values) may hold blanks around operators (5.1.1,
    ``V(1) < {Vlow} ? ...``); ``.param`` values may not (*across_blanks* false, 2.9.1).
    """
    out: list[Field] = []
    for field in fields:
        if out:
            prev = out[-1]
            last = _last_value(prev)
            if _linked(last, field, across_blanks):
                merged = Value(text[last.offset : field.end], last.offset, ValueKind.EXPRESSION)
                out[-1] = _replace_last(prev, merged)
                continue
            if (
                isinstance(prev, Param)
                and not isinstance(field, Param | Port)
                and "," in text[prev.end : field.offset]
            ):
                out[-1] = Param(prev.key, prev.value, (*prev.more, field))
                continue
        out.append(field)
    return out


def _replace_last(prev: Field, merged: Value) -> Field:
    if isinstance(prev, Param):
        if prev.more:
            return Param(prev.key, prev.value, (*prev.more[:-1], merged))
        return Param(prev.key, merged)
    return merged


def pair_up(fields: list[Field]) -> tuple[tuple[Param, ...], tuple[Field, ...]]:
    """Model parameters with or without ``=``: ``BF 20 RB 100`` pairs as ``BF=20 RB=100``."""
    params: list[Param] = []
    leftover: list[Field] = []
    i = 0
    while i < len(fields):
        field = fields[i]
        if isinstance(field, Param):
            params.append(field)
        elif (
            isinstance(field, Value)
            and field.kind is ValueKind.NAME
            and i + 1 < len(fields)
            and not isinstance(fields[i + 1], Param)
        ):
            params.append(Param(_name(field), fields[i + 1]))
            i += 1
        else:
            leftover.append(field)
        i += 1
    return tuple(params), tuple(leftover)


def take_nodes(
    fields: list[Field], count: int, letter: str, text: str
) -> tuple[list[Token], list[Field]]:
    """The first *count* node names, looking inside ``(a 0)`` groups; the rest of the fields."""
    nodes: list[Token] = []
    rest = list(fields)
    while len(nodes) < count:
        if not rest:
            raise BuildError(len(text.rstrip()), "expected a node name", _node_hint(letter))
        field = rest.pop(0)
        if isinstance(field, Group):
            rest[0:0] = field.items
        elif isinstance(field, Call):  # "0 (b 0)" is a node and a group, not a function
            rest[0:0] = [classify(field.name.text, field.name.offset), *field.args, *field.params]
        elif isinstance(field, Value) and field.kind in (
            ValueKind.NAME,
            ValueKind.NUMBER,
            ValueKind.EXPRESSION,
        ):
            bad = next((ch for ch in field.text if ch in _NODE_FORBIDDEN), None)
            if bad is not None:
                raise BuildError(
                    field.offset + field.text.index(bad),
                    f"'{bad}' is not allowed in a node name",
                    "node names may not contain = % ( ) , [ ] < > ~",
                )
            nodes.append(Token(field.text, field.offset))
        else:
            hint = _node_hint(letter)
            if isinstance(field, Value) and field.kind is ValueKind.BRACE:
                hint = "braces cannot name nodes (manual 2.9.2); " + hint
            raise BuildError(field.offset, "expected a node name", hint)
    return nodes, rest


def _node_hint(letter: str) -> str:
    return f"write {FORMS[letter]}"


def _split(fields: list[Field]) -> tuple[tuple[Field, ...], tuple[Param, ...]]:
    positional = tuple(f for f in fields if not isinstance(f, Param) and not _is_keyword_colon(f))
    return positional, tuple(f for f in fields if isinstance(f, Param))


def _is_word(field: Field) -> TypeGuard[Value]:
    return isinstance(field, Value) and field.kind in (
        ValueKind.NAME,
        ValueKind.NUMBER,
        ValueKind.EXPRESSION,
    )


def _head_key(field: Field) -> str:
    """The lower-case word a field starts with: key of a pair, name of a call, a word."""
    if isinstance(field, Param):
        return field.key.key
    if isinstance(field, Call):
        return field.name.key
    return field.key if isinstance(field, Value) else ""


def _node_count(letter: str, fields: list[Field], text: str) -> int:
    """How many leading fields are nodes, for the letters whose count depends on the card."""
    if letter in "eg":
        _, rest = take_nodes(fields, 2, letter, text)
        return 2 if rest and _head_key(rest[0]) in _NONLINEAR_KEYS else 4
    thermal = any(isinstance(f, Value) and f.key == "thermal" for f in fields)
    if letter == "d":
        return 3 if thermal else 2
    if letter == "m":  # MOSFET d g s b; VDMOS d g s, or d g s tj tc with "thermal" (11.3)
        if thermal:
            return 5
        words, _ = _leading_words(fields, drop_last=1)
        return 3 if len(words) == 3 else 4
    if letter == "u":
        gate = _head_key(fields[0]) if fields else ""
        if gate in _DIGITAL_GATES:  # U<name> <gate>[(n)] <pwr> <gnd> <nodes...> <tmodel> <io>
            return -2
        return 3
    return -1  # all words but the last: P, X, N


def build_element(name: Token, fields: list[Field], text: str) -> ElementSyntax:
    """An element card from its name and fields, by its first letter (manual 2.1.3)."""
    letter = name.key[0]
    if letter == "a":
        return _build_xspice(name, join_fields(fields, text), text)
    count = FIXED_NODES.get(letter)
    if count is None:
        count = _node_count(letter, fields, text)
    if letter == "u" and count == -2:
        gate, *others = fields
        nodes, rest = _leading_words(others, drop_last=2)
        positional, params = _split([gate, *join_fields(rest, text)])
        return ElementSyntax(name, letter, tuple(nodes), positional, params)
    if count < 0:
        nodes, rest = _leading_words(fields, drop_last=1)
    else:
        nodes, rest = take_nodes(fields, count, letter, text)
    positional, params = _split(join_fields(rest, text))
    _check_element(letter, positional, params, len(text.rstrip()))
    return ElementSyntax(name, letter, tuple(nodes), positional, params)


def _leading_words(fields: list[Field], drop_last: int) -> tuple[list[Token], list[Field]]:
    """Nodes of variable-count elements: the leading words, less the last *drop_last*."""
    flat: list[Field] = []
    for field in fields:
        if isinstance(field, Group):
            flat.extend(field.items)
        else:
            flat.append(field)
    words = 0
    while words < len(flat) and _is_word(flat[words]) and not _is_keyword_colon(flat[words]):
        words += 1
    keep = max(words - drop_last, 0)
    nodes = [Token(f.text, f.offset) for f in flat[:keep] if isinstance(f, Token)]
    return nodes, flat[keep:]


def _check_element(
    letter: str, positional: tuple[Field, ...], params: tuple[Param, ...], end: int
) -> None:
    need = _NEEDS_MODEL.get(letter)
    if letter == "x":
        need = "subcircuit name"
    if letter in "fh" and positional and isinstance(positional[0], Call):
        return  # POLY(n) with its controlling sources
    if letter == "k" and len(positional) < 3:
        at = positional[-1].end if positional else end
        raise BuildError(
            at, "expected two inductor names and a coupling value", f"write {FORMS['k']}"
        )
    if need is not None and not any(_is_word(f) for f in positional):
        raise BuildError(end, f"expected a {need}", f"write {FORMS[letter]}")


def _build_xspice(name: Token, fields: list[Field], text: str) -> ElementSyntax:
    """``A<name> <ports...> <model> [params]``: ports with prefixes, vectors, ``~`` (12.1.1)."""
    positional, params = _split(fields)
    if not positional or not _is_word(positional[-1]):
        raise BuildError(len(text.rstrip()), "expected a model name", f"write {FORMS['a']}")
    ports: list[Port] = []
    for field in positional[:-1]:
        if isinstance(field, Port):
            ports.append(field)
        elif isinstance(field, Value | Group):
            items = field.items if isinstance(field, Group) else (field,)
            nodes = tuple(Token(i.text, i.offset) for i in items if isinstance(i, Token))
            ports.append(Port(None, nodes, (False,) * len(nodes), False, field.offset, field.end))
        else:
            raise BuildError(field.offset, "expected a port", f"write {FORMS['a']}")
    nodes = tuple(n for p in ports for n in p.nodes if n.key != "null")
    return ElementSyntax(name, "a", nodes, positional[-1:], params, tuple(ports))


def _param_card(keyword: Token, fields: list[Field]) -> ParamCardSyntax:
    """``.param``: an unbraced value ends at a blank (2.9.1: ``.param c = a + 123 $ won't
    work``); what follows it up to the next pair is kept as ``stray`` for lint to report.
    ngspice 39.3 accepts even ``.param x`` without a value, so nothing here is an error."""
    params = tuple(f for f in fields if isinstance(f, Param))
    stray = tuple(f for f in fields if not isinstance(f, Param))
    return ParamCardSyntax(keyword, params, stray)


def build_dot(keyword: Token, fields: list[Field], text: str) -> CardSyntax:
    """Dot cards whose head is a plain keyword: typed where it matters, else DotSyntax."""
    word = keyword.key
    if word in (".param", ".csparam"):
        return _param_card(keyword, join_fields(fields, text, across_blanks=False))
    fields = join_fields(fields, text)
    positional, params = _split(fields)
    if word in (".ic", ".nodeset"):
        settings: list[NodeSetting] = []
        others: list[Param] = []
        for p in params:
            key = p.key
            node = key.args[0] if isinstance(key, Call) and len(key.args) == 1 else None
            if isinstance(key, Call) and key.name.key == "v" and isinstance(node, Value):
                settings.append(NodeSetting(key.name, Token(node.text, node.offset), p.value))
            else:
                others.append(p)
        return InitialSyntax(keyword, tuple(settings), tuple(others))
    if word == ".global":  # ngspice 39.3 accepts ".global a=1" too; the pairs are ignored
        nodes, _ = _leading_words(list(positional), drop_last=0)
        return GlobalSyntax(keyword, tuple(nodes))
    return DotSyntax(keyword, positional, params)
