"""Field-level rules shared by the card builders: unbraced expressions, pairs, word runs.

ngspice splits a card into fields at blanks, ``,``, ``=``, ``(`` and ``)`` (manual 2.1.4.1),
but a run-time expression may span several such fields (``V(1) < {Vlow} ? {Vlow} : V(1)``,
5.1.1) and ``ic=0.6, 5`` gives one parameter two values.  These helpers put them together.
"""

from __future__ import annotations

from typing import TypeGuard

from heatweave.spice.syntax import Call, Field, Group, Param, Port, Token, Value, ValueKind


class BuildError(Exception):
    """A card that parses as fields but breaks its card type's rules."""

    def __init__(self, offset: int, message: str, hint: str | None = None) -> None:
        super().__init__(message)
        self.offset = offset
        self.message = message
        self.hint = hint


# Short general forms (after Table 2.1 and the chapter sections) used in hints.

OPERATOR_CHARS = frozenset("+-*/^<>!?:&|%\\=")


def is_keyword_colon(field: Field) -> bool:
    return isinstance(field, Value) and field.key in ("params:", "optional:")


def plain(value: Token) -> Token:
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
    if is_keyword_colon(prev) or is_keyword_colon(nxt):
        return False
    if prev.end == nxt.offset:  # glued: v(1)*10k, {a}*2
        return True
    if not across_blanks:
        return False
    if (
        isinstance(prev, Value)
        and prev.kind is not ValueKind.STRING
        and (prev.text[-1] in OPERATOR_CHARS)
    ):
        return True
    return (
        isinstance(nxt, Value)
        and nxt.kind in (ValueKind.NAME, ValueKind.EXPRESSION)
        and nxt.text[0] in OPERATOR_CHARS
    ) or (isinstance(nxt, Call) and nxt.name.text[0] in OPERATOR_CHARS)


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
            params.append(Param(plain(field), fields[i + 1]))
            i += 1
        else:
            leftover.append(field)
        i += 1
    return tuple(params), tuple(leftover)


def split_fields(fields: list[Field]) -> tuple[tuple[Field, ...], tuple[Param, ...]]:
    positional = tuple(f for f in fields if not isinstance(f, Param) and not is_keyword_colon(f))
    return positional, tuple(f for f in fields if isinstance(f, Param))


def is_word(field: Field) -> TypeGuard[Value]:
    return isinstance(field, Value) and field.kind in (
        ValueKind.NAME,
        ValueKind.NUMBER,
        ValueKind.EXPRESSION,
    )


def leading_words(fields: list[Field], drop_last: int) -> tuple[list[Token], list[Field]]:
    """Nodes of variable-count elements: the leading words, less the last *drop_last*."""
    flat: list[Field] = []
    for field in fields:
        if isinstance(field, Group):
            flat.extend(field.items)
        else:
            flat.append(field)
    words = 0
    while words < len(flat) and is_word(flat[words]) and not is_keyword_colon(flat[words]):
        words += 1
    keep = max(words - drop_last, 0)
    nodes = [Token(f.text, f.offset) for f in flat[:keep] if isinstance(f, Token)]
    return nodes, flat[keep:]
