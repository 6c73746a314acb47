"""Element cards: node counts by first letter (manual Table 2.1) and required fields.

Only the first letter decides the type (2.1.3).  Most letters have a fixed node count;
E/G (linear or ``value=``/``POLY``/``TABLE``), D (``thermal``), M (VDMOS), U (URC or digital
gate), and the any-count P/X/N/A cards are decided from the card's own fields.  Q and M
counts that depend on model names are settled later by ``ElementSyntax.split_nodes``.
"""

from __future__ import annotations

from heatweave.spice.cardfields import (
    BuildError,
    is_word,
    join_fields,
    leading_words,
    split_fields,
)
from heatweave.spice.syntax import (
    Call,
    ElementSyntax,
    Field,
    Group,
    Param,
    Port,
    Token,
    Value,
    ValueKind,
    classify,
)

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
DIGITAL_GATES = {
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
_NODE_FORBIDDEN = "<>"


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
        words, _ = leading_words(fields, drop_last=1)
        return 3 if len(words) == 3 else 4
    if letter == "u":
        gate = _head_key(fields[0]) if fields else ""
        if gate in DIGITAL_GATES:  # U<name> <gate>[(n)] <pwr> <gnd> <nodes...> <tmodel> <io>
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
        nodes, rest = leading_words(others, drop_last=2)
        positional, params = split_fields([gate, *join_fields(rest, text)])
        return ElementSyntax(name, letter, tuple(nodes), positional, params)
    if count < 0:
        nodes, rest = leading_words(fields, drop_last=1)
    else:
        nodes, rest = take_nodes(fields, count, letter, text)
    positional, params = split_fields(join_fields(rest, text))
    _check_element(letter, positional, params, len(text.rstrip()))
    return ElementSyntax(name, letter, tuple(nodes), positional, params)


def _check_element(
    letter: str, positional: tuple[Field, ...], params: tuple[Param, ...], end: int
) -> None:
    need = _NEEDS_MODEL.get(letter)
    if letter == "x":
        need = "subcircuit name"
    if letter in "fh" and positional and isinstance(positional[0], Call):
        return  # POLY(n) with its controlling sources
    if letter == "k":  # K L1 L2 value, or K L1 L2 k=value (both read by ngspice 39.3)
        wanted = 2 if any(p.key.key == "k" for p in params) else 3
        if len(positional) < wanted:
            at = positional[-1].end if positional else end
            raise BuildError(
                at, "expected two inductor names and a coupling value", f"write {FORMS['k']}"
            )
        if len(positional) > wanted:  # ngspice 39.3: "unknown parameter (l3)"
            raise BuildError(
                positional[2].offset, "a K card couples exactly two inductors",
                f"write {FORMS['k']}; couple a third inductor with another K card",
            )  # fmt: skip
    if need is not None and not any(is_word(f) for f in positional):
        raise BuildError(end, f"expected a {need}", f"write {FORMS[letter]}")


def _build_xspice(name: Token, fields: list[Field], text: str) -> ElementSyntax:
    """``A<name> <ports...> <model> [params]``: ports with prefixes, vectors, ``~`` (12.1.1)."""
    positional, params = split_fields(fields)
    if not positional or not is_word(positional[-1]):
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
