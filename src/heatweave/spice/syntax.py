"""Typed syntax of one logical ngspice card, as :func:`heatweave.spice.grammar.parse_card`
returns it.

Every token keeps its text exactly as written and its offset (0-based) in the card's logical
text, so lint can point at a column and the emitter can splice a new value in place.  Names
are case-insensitive in SPICE (manual 2.1.4.4): each token offers ``key``, its lower-case form,
for comparisons; the original spelling stays in ``text``.
"""

from __future__ import annotations

import re
from collections.abc import Container
from dataclasses import dataclass, replace
from enum import Enum

from heatweave.quantities import parse_number


class ValueKind(Enum):
    """What a value field is, as far as syntax can tell."""

    NUMBER = "number"  # 4.7k, 1e-3, 10kOhm (quantities.parse_number reads it)
    BRACE = "brace"  # {expr}, evaluated once before the simulation (2.9.2)
    QUOTED = "quoted"  # 'expr', the alternative expression delimiter (2.9.1)
    STRING = "string"  # "text", string parameters and XSPICE file names
    NAME = "name"  # a model, source, node or parameter name, a keyword such as dc/off
    EXPRESSION = "expression"  # an unbraced expression: a+123, v(1)*10k, V(1) < {Vt} ? 1 : 2
    VECTOR = "vector"  # an XSPICE vector value: in_offset=[0.1 -0.2]


@dataclass(frozen=True, slots=True)
class Token:
    """A piece of the card as written, at ``offset`` in the logical text."""

    text: str
    offset: int

    @property
    def key(self) -> str:
        """The lower-case text, for case-insensitive comparison."""
        return self.text.lower()

    @property
    def end(self) -> int:
        """The offset just past the token."""
        return self.offset + len(self.text)


@dataclass(frozen=True, slots=True)
class Value(Token):
    """A value field: a token plus what kind of value it is."""

    kind: ValueKind

    @property
    def number(self) -> float | None:
        """The number for a NUMBER value, else ``None`` (expressions are not evaluated)."""
        return parse_number(self.text) if self.kind is ValueKind.NUMBER else None

    @property
    def inner(self) -> str:
        """The text inside the delimiters of a brace, quoted or string value."""
        if self.kind in (ValueKind.BRACE, ValueKind.QUOTED, ValueKind.STRING):
            return self.text[1:-1]
        return self.text


@dataclass(frozen=True, slots=True)
class Call(Token):
    """A function form ``name(args)``: ``pulse(0 1 0 1n)``, ``poly(2)``, ``v(a,b)``, ``sin(x)``.

    ``text`` is the whole form as written; ``name`` and ``args`` its parts.
    """

    name: Token
    args: tuple[Field, ...]
    params: tuple[Param, ...]


@dataclass(frozen=True, slots=True)
class Group(Token):
    """A bare parenthesised group, e.g. the node pair ``(a 0)`` of ``E1 (a 0) (b 0) -10``."""

    items: tuple[Field, ...]


@dataclass(frozen=True, slots=True)
class Param:
    """``key=value``; ``more`` holds further values after commas, as in ``ic=0.6, 5``."""

    key: Token
    value: Field
    more: tuple[Field, ...] = ()

    @property
    def offset(self) -> int:
        """Where the key starts."""
        return self.key.offset

    @property
    def end(self) -> int:
        """Just past the last value."""
        return (self.more[-1] if self.more else self.value).end


@dataclass(frozen=True, slots=True)
class Port:
    """One XSPICE connection (12.1.1): ``%vd(a b)``, ``~en``, ``null``, or a ``[ ]`` vector.

    ``inverted`` has one flag per node (``~`` before it); ``vector`` is true inside ``[ ]``.
    """

    prefix: Token | None
    nodes: tuple[Token, ...]
    inverted: tuple[bool, ...]
    vector: bool
    offset: int
    end: int


Field = Value | Call | Group | Param | Port


def last_param(params: tuple[Param, ...], key: str) -> Param | None:
    """The last pair named *key* (case-insensitive) in *params*, or ``None``."""
    low = key.lower()
    found = None
    for p in params:
        if p.key.key == low:
            found = p
    return found


@dataclass(frozen=True, slots=True)
class ElementSyntax:
    """An element card: ``R1 a b 1k tc1=0.01`` and every other letter of Table 2.1.

    ``nodes`` holds the node tokens by the element type's node count, ``positional`` the other
    fields before, between and after the params (value, model or subcircuit name, keywords
    such as ``dc``, ``ac``, ``off``, ``thermal``, source functions), ``params`` the
    ``key=value`` pairs.  For Q and M (and VDMOS) the node count depends on the model names:
    see :meth:`split_nodes`.  ``ports`` is filled for XSPICE ``A`` cards only.
    """

    name: Token
    letter: str
    nodes: tuple[Token, ...]
    positional: tuple[Field, ...]
    params: tuple[Param, ...]
    ports: tuple[Port, ...] = ()

    @property
    def key(self) -> str:
        """The element's lower-case name."""
        return self.name.key

    def param(self, key: str) -> Param | None:
        """The last ``key=`` pair (case-insensitive), as ngspice lets a later one win."""
        return last_param(self.params, key)

    def source(self, text: str | None = None) -> SourceParts:
        """The parts of an independent source's value (manual 4.1), for V and I cards.
        With the card's logical *text*, a function written without parentheses
        (``PULSE 0 1 0 1n 1n 5u 10u``, ``EXTERNAL``: ngspice 39 reads them) is read too."""
        return SourceParts.of(self.positional, text)

    def split_nodes(self, model_names: Container[str]) -> ElementSyntax:
        """Decide Q/M node counts from the deck's (lower-case) model names.

        ``Q c b e [ns] [tj] model`` (8.1) has 3 to 5 nodes and ``M d g s [b]`` / VDMOS
        ``M d g s [tj tc] model`` (11.1, 11.3) 3 to 5: the first word that names a model
        ends the nodes.  Other letters, or no matching model, give the element unchanged.
        """
        counts = _FLEXIBLE_NODES.get(self.letter)
        if counts is None:
            return self
        words: list[Token] = list(self.nodes)
        for field in self.positional:
            if not (isinstance(field, Value) and field.kind in _NODE_KINDS):
                break
            words.append(field)
        used = len(words) - len(self.nodes)
        for count in counts:
            if count < len(words) and words[count].key in model_names:
                nodes = tuple(Token(w.text, w.offset) for w in words[:count])
                moved = tuple(classify(w.text, w.offset) for w in words[count:])
                return replace(self, nodes=nodes, positional=moved + self.positional[used:])
        return self


TRANSIENT_FUNCTIONS = frozenset(
    {"pulse", "sin", "exp", "pwl", "sffm", "am", "trnoise", "trrandom"}
)  # manual 4.1.1-4.1.9
#: A source whose value the program driving ngspice's shared library sets (manual 4.1.10).
EXTERNAL = "external"


@dataclass(frozen=True, slots=True)
class SourceParts:
    """``[dc] v  ac mag [phase]  distof1 mag [phase]  distof2 ...  pulse(...)`` split up."""

    dc: Field | None = None
    ac: tuple[Field, ...] = ()
    function: Call | None = None
    distof1: tuple[Field, ...] = ()
    distof2: tuple[Field, ...] = ()

    @classmethod
    def of(cls, fields: tuple[Field, ...], text: str | None = None) -> SourceParts:
        """Read the positional fields of a V or I card; with the card's logical *text*, a
        function keyword without parentheses takes the values after it as its arguments
        (up to the next keyword), its :class:`Call` spanning them as written."""
        parts: dict[str, list[Field]] = {"dc": [], "ac": [], "distof1": [], "distof2": []}
        function: Call | None = None
        current = "dc"
        k = 0
        while k < len(fields):
            field = fields[k]
            k += 1
            if isinstance(field, Call) and field.name.key in TRANSIENT_FUNCTIONS:
                function = field
                current = ""
            elif text is not None and isinstance(field, Value) and field.key in _BARE:
                args: list[Field] = []
                while k < len(fields) and _is_argument(fields[k]):
                    args.append(fields[k])
                    k += 1
                end = args[-1].end if args else field.end
                name = Token(field.text, field.offset)
                function = Call(text[field.offset : end], field.offset, name, tuple(args), ())
                current = ""
            elif isinstance(field, Value) and field.key in parts:
                current = field.key
            elif isinstance(field, Value) and field.kind is ValueKind.NAME:
                current = ""  # another keyword, e.g. portnum (4.1.11)
            elif current and len(parts[current]) < (1 if current == "dc" else 2):
                parts[current].append(field)
        dc = parts["dc"][0] if parts["dc"] else None
        return cls(
            dc, tuple(parts["ac"]), function, tuple(parts["distof1"]), tuple(parts["distof2"])
        )


_BARE = TRANSIENT_FUNCTIONS | {EXTERNAL}


def _is_argument(field: Field) -> bool:
    """A value a bare function keyword takes: anything but a keyword (``ac``, ``dc``)."""
    return isinstance(field, Value) and field.kind is not ValueKind.NAME


_NODE_KINDS = (ValueKind.NAME, ValueKind.NUMBER, ValueKind.EXPRESSION)
_FLEXIBLE_NODES: dict[str, tuple[int, ...]] = {"q": (3, 4, 5), "m": (4, 3, 5)}


_NUMBER_START = frozenset("0123456789.+-")
_KEYWORD_COLON = re.compile(r"[A-Za-z_]\w*:")  # params:, optional:
_OPERATOR = re.compile(r"[-+*/^<>!?:&|%\\]")


def classify(text: str, offset: int) -> Value:
    """A bare word or delimited field as a :class:`Value` of the right kind."""
    first = text[:1]
    if first == "{":
        kind = ValueKind.BRACE
    elif first == "'":
        kind = ValueKind.QUOTED
    elif first == '"':
        kind = ValueKind.STRING
    elif first in _NUMBER_START and parse_number(text) is not None:
        kind = ValueKind.NUMBER
    elif _OPERATOR.search(text) and not _KEYWORD_COLON.fullmatch(text):
        kind = ValueKind.EXPRESSION
    else:
        kind = ValueKind.NAME
    return Value(text, offset, kind)


@dataclass(frozen=True, slots=True)
class DotSyntax:
    """A dot card without a more specific class: ``.tran 1n 1u``, ``.options temp=50``, any
    unknown card.  ``args`` are the positional fields, ``params`` the ``key=value`` pairs."""

    keyword: Token
    args: tuple[Field, ...]
    params: tuple[Param, ...]

    @property
    def name(self) -> str:
        """The lower-case keyword without its dot: ``tran``, ``options``."""
        return self.keyword.key[1:]


@dataclass(frozen=True, slots=True)
class SubcktSyntax:
    """``.subckt name ports... [params:] k=v ...`` (2.5.1, 2.9.3)."""

    keyword: Token
    name: Token
    ports: tuple[Token, ...]
    params: tuple[Param, ...]


@dataclass(frozen=True, slots=True)
class EndsSyntax:
    """``.ends [name]``; without a name it closes all open definitions (2.5.2)."""

    keyword: Token
    name: Token | None


@dataclass(frozen=True, slots=True)
class ModelSyntax:
    """``.model name type (params)``: parentheses optional, params with or without ``=`` (2.4).

    ``args`` holds fields that pair with nothing (normally empty).
    """

    keyword: Token
    name: Token
    type: Token
    params: tuple[Param, ...]
    args: tuple[Field, ...] = ()

    def param(self, key: str) -> Param | None:
        """The last ``key=`` pair (case-insensitive), as ngspice lets a later one win."""
        return last_param(self.params, key)


@dataclass(frozen=True, slots=True)
class ParamCardSyntax:
    """``.param k=v ...`` and ``.csparam k=v ...`` (2.9.1, 2.11); values may be unbraced.

    An unbraced value ends at a blank, as in ngspice: ``.param a = 123 * 3`` gives a = 123
    (2.9.1, and ngspice 39.3 does so); the ignored rest (``*``, ``3``) is in ``stray``.
    """

    keyword: Token
    params: tuple[Param, ...]
    stray: tuple[Field, ...] = ()


@dataclass(frozen=True, slots=True)
class FuncSyntax:
    """``.func f(x,y) {expr}`` or ``.func f(x) = {expr}`` (2.10)."""

    keyword: Token
    name: Token
    args: tuple[Token, ...]
    body: Value


@dataclass(frozen=True, slots=True)
class IncludeSyntax:
    """``.include file``; the path keeps its case and quotes (``path.inner`` drops them)."""

    keyword: Token
    path: Value


@dataclass(frozen=True, slots=True)
class LibSyntax:
    """``.lib file name`` (use a section) or ``.lib name`` (a section starts, 2.8)."""

    keyword: Token
    path: Value | None
    section: Token | None

    @property
    def starts_section(self) -> bool:
        """True for ``.lib name`` inside a library file."""
        return self.path is None


@dataclass(frozen=True, slots=True)
class EndlSyntax:
    """``.endl [name]``: the end of a library section."""

    keyword: Token
    name: Token | None


@dataclass(frozen=True, slots=True)
class TitleSyntax:
    """``.title text``: the text as written, or ``None``."""

    keyword: Token
    text: Token | None


@dataclass(frozen=True, slots=True)
class IfSyntax:
    """``.if(cond)`` / ``.elseif(cond)`` (2.13); ``condition`` is the text inside the parens."""

    keyword: Token
    condition: Value


@dataclass(frozen=True, slots=True)
class NodeSetting:
    """``v(node)=value`` on ``.ic`` / ``.nodeset`` (15.2)."""

    function: Token
    node: Token
    value: Field


@dataclass(frozen=True, slots=True)
class InitialSyntax:
    """``.ic`` / ``.nodeset``: node settings and other pairs (``all=val``)."""

    keyword: Token
    settings: tuple[NodeSetting, ...]
    params: tuple[Param, ...]


@dataclass(frozen=True, slots=True)
class GlobalSyntax:
    """``.global node ...`` (2.6)."""

    keyword: Token
    nodes: tuple[Token, ...]


CardSyntax = (
    ElementSyntax
    | DotSyntax
    | SubcktSyntax
    | EndsSyntax
    | ModelSyntax
    | ParamCardSyntax
    | FuncSyntax
    | IncludeSyntax
    | LibSyntax
    | EndlSyntax
    | TitleSyntax
    | IfSyntax
    | InitialSyntax
    | GlobalSyntax
)
