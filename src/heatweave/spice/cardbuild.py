"""From lark's parse tree of one card to the typed syntax of :mod:`heatweave.spice.syntax`.

The grammar splits a card into fields; the transformer here turns tokens into syntax objects
and builds the typed dot cards.  Element cards are built in :mod:`heatweave.spice.element_syntax`,
the field-joining rules live in :mod:`heatweave.spice.cardfields`.
"""

from __future__ import annotations

import threading
from typing import Any

from lark import Token as LarkToken
from lark import Transformer

from heatweave.spice.cardfields import (
    BuildError,
    is_keyword_colon,
    join_fields,
    leading_words,
    pair_up,
    plain,
    span_value,
    split_fields,
)
from heatweave.spice.element_syntax import build_element
from heatweave.spice.syntax import (
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

__all__ = ["BuildError", "ToSyntax", "make_call", "make_group", "use_text"]

_LOCAL = threading.local()


def use_text(text: str) -> None:
    """Set the logical text the (shared, inline) transformer slices; per thread."""
    _LOCAL.text = text


class ToSyntax(Transformer[LarkToken, Any]):
    """The lark Transformer at the boundary: tokens to :mod:`heatweave.spice.syntax` objects.

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
        return make_call(name, group, self.text)

    def group(self, children: list[Any]) -> Group:
        start, end = children[0].start_pos, children[-1].end_pos
        return make_group(start, end, children[1:-1], self.text)

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
            if isinstance(f, Value) and not is_keyword_colon(f)
        )
        for f in fields:
            if not isinstance(f, Value | Param):
                raise BuildError(
                    f.offset, "expected a port name", "write .subckt <name> <ports...>"
                )
        params = tuple(f for f in fields if isinstance(f, Param))
        return SubcktSyntax(keyword, plain(name), ports, params)

    def ends(self, children: list[Any]) -> EndsSyntax:
        return EndsSyntax(children[0], _first_name(children[1:]))

    def endl(self, children: list[Any]) -> EndlSyntax:
        return EndlSyntax(children[0], _first_name(children[1:]))

    def model(self, children: list[Any]) -> ModelSyntax:
        keyword, name, kind, *fields = children
        if isinstance(kind, Call):
            fields = [*kind.args, *kind.params, *fields]
            kind = kind.name
        params, leftover = pair_up(join_fields(fields, self.text))
        return ModelSyntax(keyword, plain(name), plain(kind), params, leftover)

    def func(self, children: list[Any]) -> FuncSyntax:
        keyword, head, *body = children
        args = tuple(Token(a.text, a.offset) for a in head.args)
        return FuncSyntax(keyword, head.name, args, span_value(body, self.text))

    def include(self, children: list[Any]) -> IncludeSyntax:
        return IncludeSyntax(children[0], children[1])

    def lib(self, children: list[Any]) -> LibSyntax:
        keyword, path, *rest = children
        if rest:  # .lib <file> <section>; anything after the section is ignored, as ngspice does
            return LibSyntax(keyword, path, _first_name(rest))
        return LibSyntax(keyword, None, plain(path))

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


def make_call(name: Token, group: Group, text: str) -> Call:
    """``name(args)``: the group's pairs become the call's params, the rest its args."""
    args = tuple(f for f in group.items if not isinstance(f, Param))
    params = tuple(f for f in group.items if isinstance(f, Param))
    return Call(text[name.offset : group.end], name.offset, name, args, params)


def make_group(start: int, end: int, fields: list[Field], text: str) -> Group:
    """The parenthesised group ``text[start:end]`` holding *fields*."""
    return Group(text[start:end], start, tuple(join_fields(fields, text)))


def _first_name(fields: list[Field]) -> Token | None:
    """The first field as a name (``.ends amp``, ``.endl fast``); extra fields are ignored."""
    first = fields[0] if fields else None
    return Token(first.text, first.offset) if isinstance(first, Token) else None


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
    if word.startswith(".param") or word == ".csparam":  # ngspice 39: .params is .param
        return _param_card(keyword, join_fields(fields, text, across_blanks=False))
    fields = join_fields(fields, text)
    positional, params = split_fields(fields)
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
        nodes, _ = leading_words(list(positional), drop_last=0)
        return GlobalSyntax(keyword, tuple(nodes))
    return DotSyntax(keyword, positional, params)
