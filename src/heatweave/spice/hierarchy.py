"""Subcircuits and instance paths: what a deck's names refer to.

:class:`DeckIndex` indexes subcircuit definitions (with their nesting scopes) and instances
of a :class:`~heatweave.spice.project.Project`, so that a path such as ``X1.X3.R2``
resolves to the card of ``R2`` and the chain of instances that leads to it.
"""

from __future__ import annotations

import operator
import re
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from typing import TypeVar

from heatweave.spice import deckparams
from heatweave.spice.cardparts import subckt_ports, x_card_parts
from heatweave.spice.conditionals import Place, decide, may_have_conditionals
from heatweave.spice.deck import _HEAD, Block, Card, Node, strip_inline_comment
from heatweave.spice.expressions import Func
from heatweave.spice.globmatch import line_numbers, line_starts, matching_heads, matching_paths
from heatweave.spice.project import Project, include_target

_T = TypeVar("_T")
_PARAMS = (".param", ".func")
_TEXT = operator.attrgetter("text")
# Card.head's pattern after a NUL: all cards' texts joined by NULs, one scan finds them all.
_HEADS = re.compile(r"\x00[ \t]*([^ \t\r\n,=()\x00]*)")


def _first_fields(cards: Sequence[Card]) -> list[str]:
    """Each card's first field as :attr:`Card.head` reads it (inline comments aside)."""
    texts = list(map(_TEXT, cards))
    heads: list[str] = _HEADS.findall("\x00" + "\x00".join(texts))
    if len(heads) != len(cards):  # a NUL inside a card: one more match; read one by one
        heads = [_HEAD.match(text).group(1) for text in texts]  # type: ignore[union-attr]
    return heads


def _joined_texts(cards: list[Card]) -> str | None:
    """Every card's text after a NUL, when no first field can hold an inline comment and no
    text a NUL (then the first fields can be read off this text directly); else None."""
    joined = "\x00" + "\x00".join(map(_TEXT, cards)) if cards else ""
    if ";" in joined or "//" in joined or joined.count("\x00") != len(cards):
        return None
    return joined


def _without_texts(joined: str, starts: list[int]) -> str:
    """*joined* (see :func:`_joined_texts`) less the cards whose NULs stand at *starts*."""
    pieces: list[str] = []
    begin = 0
    for start in starts:
        pieces.append(joined[begin:start])
        end = joined.find("\x00", start + 1)
        begin = len(joined) if end < 0 else end
    pieces.append(joined[begin:])
    return "".join(pieces)


def _without(items: list[_T], positions: list[int]) -> list[_T]:
    """*items* less those at *positions* (ascending, few), by slices."""
    if not positions:
        return items
    out: list[_T] = []
    start = 0
    for k in positions:
        out.extend(items[start:k])
        start = k + 1
    out.extend(items[start:])
    return out


# Names that may not start with a letter (checked one by one with str.isalpha): among
# names one to a line, and among cards' texts each after a NUL.
_NOT_LETTER = re.compile(r"\n(?:[^A-Za-z\n]|(?=\n)|\Z)")
_NOT_LETTER_CARD = re.compile(r"\x00[ \t]*+(?![A-Za-z])")
_X_CARD = re.compile(r"\x00[ \t]*+[xX]")


@dataclass(frozen=True, slots=True)
class Scope:
    """The cards visible in one body: the top level or one subcircuit definition.

    Each card's name is read when first asked for (:attr:`heads`): a glob over a flat deck
    is matched on the cards' texts (:attr:`texts`) without cutting a million names out.
    """

    name: str  # "" for the top level
    parent: Scope | None
    cards: tuple[Card, ...]
    subckts: dict[str, Block] = field(default_factory=dict)
    scopes: dict[str, Scope] = field(default_factory=dict)
    instances: bool = False  # True when the body holds an ``X`` card
    texts: str | None = field(default=None, repr=False)  # see _joined_texts
    _heads: list[tuple[str, ...]] = field(default_factory=list, repr=False)
    _by_name: dict[str, Card] = field(default_factory=dict, repr=False)

    @property
    def heads(self) -> tuple[str, ...]:
        """Each card's name as written."""
        if not self._heads:
            self._heads.append(tuple(_first_fields(self.cards)))
        return self._heads[0]

    def walk(self) -> Iterator[Scope]:
        """This scope and every definition's scope inside it, depth first."""
        yield self
        for inner in self.scopes.values():
            yield from inner.walk()

    def card(self, name: str) -> Card | None:
        """The card named *name* (lower case); the first one of that name wins.  The table
        is built on first use: binding a glob needs the names, not the table."""
        if not self._by_name and self.cards:
            lows = "\n".join(reversed(self.heads)).lower().split("\n")
            self._by_name.update(zip(lows, reversed(self.cards), strict=True))
        return self._by_name.get(name)


@dataclass(frozen=True, slots=True)
class Resolved:
    """An element found by instance path: its card and the ``X`` cards leading to it."""

    path: str
    card: Card
    instances: tuple[Card, ...]
    definitions: tuple[Block, ...]


class DeckIndex:
    """Subcircuits, models and elements of a project, by case-insensitive name."""

    def __init__(self, project: Project) -> None:
        self.project = project
        self.deck_file = project.deck.path
        self._models: dict[str, Card] = {}
        self._top: Scope | None = None
        self._scanned: tuple[Sequence[str], str] | None = None  # see matching()
        self.places: dict[int, Place] = {}  # cards in undecided .if branches, by id()
        self._conditions: tuple[dict[str, float], dict[str, Func]] | None = None

    @property
    def top(self) -> Scope:
        """The top-level scope, built on first use (a deck with nothing to rewrite never
        pays for indexing its cards)."""
        if self._top is None:
            nodes = self._expand(self.project.deck.body)
            sources = [self.project.deck, *(inc.deck for inc in self.project.includes)]
            if may_have_conditionals(d.source.text for d in sources if d.source):
                cards = [n for n in nodes if type(n) is Card and n.name.startswith(_PARAMS)]
                self._conditions = deckparams.values(cards)
            self._top = self._scope("", None, self._decide(nodes))
        return self._top

    def _decide(self, nodes: list[Node]) -> list[Node]:
        """*nodes* less the branches of ``.if`` blocks that ngspice drops (2.13)."""
        if self._conditions is None:
            return nodes
        kept, outcome = decide(nodes, *self._conditions)
        self.places.update(outcome.places)
        return kept

    @property
    def models(self) -> dict[str, Card]:
        """``.model`` cards by lower-case name, first definition winning."""
        self.top  # noqa: B018 - building the scopes fills the table
        return self._models

    def _expand(self, body: tuple[Node, ...]) -> list[Node]:
        """Nodes of a body with included bodies put in place of their include cards."""
        if not self.project.includes:
            return list(body)
        out: list[Node] = []
        for node in body:
            out.append(node)
            if isinstance(node, Card) and node.is_dot and include_target(node) is not None:
                inc = self.project.include_for(node)
                if inc is not None:
                    out.extend(self._expand(inc.body))
        return out

    def _scope(self, name: str, parent: Scope | None, nodes: list[Node]) -> Scope:
        # The hot path of indexing a million-card deck, in C-level passes: the cards' texts
        # joined, a regex over them for the few that are not elements (dot cards) and for X
        # cards; the names are cut out later, if at all.  Where a first field may hold an
        # inline comment, every card's first field at once, then the same over those.
        every = [node for node in nodes if type(node) is Card]
        blocks: list[Block] = []
        if len(every) < len(nodes):  # blocks only where something is not a card
            blocks = [node for node in nodes if type(node) is Block and node.kind == "subckt"]
        texts = _joined_texts(every)
        if texts is not None:  # names read off the texts, where a glob finds them too
            odd = line_starts(_NOT_LETTER_CARD, texts, "\x00")
            dropped = [(k, at) for k, at in odd if not every[k].head[:1].isalpha()]
            others = [k for k, _at in dropped]
            self._index_models(every, others, [every[k].head for k in others])
            texts = _without_texts(texts, [at for _k, at in dropped])
            instances = _X_CARD.search(texts) is not None
            scope = Scope(name, parent, tuple(_without(every, others)), instances=instances,
                          texts=texts)  # fmt: skip
        else:
            heads = _first_fields(every)
            joined = "\n".join(heads)
            if ";" in joined or "//" in joined:
                heads = [strip_inline_comment(h) if ";" in h or "//" in h else h for h in heads]
                joined = "\n".join(heads)
            candidates = line_numbers(_NOT_LETTER, "\n" + joined) if heads else []
            others = [k for k in candidates if not heads[k][:1].isalpha()]
            self._index_models(every, others, [heads[k] for k in others])
            # X cards (dot cards never start with x): a name at the start or after a line end.
            instances = joined[:1] in ("x", "X") or "\nx" in joined or "\nX" in joined
            scope = Scope(name, parent, tuple(_without(every, others)), instances=instances,
                          _heads=[tuple(_without(heads, others))])  # fmt: skip
        for block in blocks:
            key = block.label.lower()
            scope.subckts.setdefault(key, block)
            scope.scopes.setdefault(key, self._scope(key, scope, self._decide(list(block.body))))
        return scope

    def _index_models(self, cards: list[Card], others: list[int], heads: list[str]) -> None:
        """Enter the ``.model`` cards among *cards* at *others* (named *heads*)."""
        for k, head in zip(others, heads, strict=True):
            if head.lower() == ".model":
                fields = cards[k].fields()
                if len(fields) > 1:
                    self._models.setdefault(fields[1].lower(), cards[k])

    def lookup_subckt(self, name: str, scope: Scope) -> tuple[Block, Scope] | None:
        """A subcircuit definition visible from *scope* (local first, then outward)."""
        key = name.lower()
        current: Scope | None = scope
        while current is not None:
            if key in current.subckts:
                return current.subckts[key], current.scopes[key]
            current = current.parent
        return None

    def element_paths(self) -> Sequence[str]:
        """Every element of the circuit with its instance path, in the user's spelling."""
        if not self.top.instances:
            return list(self.top.heads)  # a flat deck: the names are the paths
        return list(self._walk(self.top, "", ()))

    def _walk(self, scope: Scope, prefix: str, seen: tuple[str, ...]) -> Iterator[str]:
        for card, head in zip(scope.cards, scope.heads, strict=True):
            path = prefix + head
            yield path
            if head[:1] in "xX":
                _nodes, sub, _params = x_card_parts(card)
                found = self.lookup_subckt(sub, scope)
                if found is None or found[1].name in seen:
                    continue
                yield from self._walk(found[1], path + ".", (*seen, found[1].name))

    def matching(self, pattern: str) -> list[tuple[int, str]]:
        """(position in :meth:`element_paths`, path) of every element whose path the glob
        *pattern* matches, case ignored as SPICE does, in deck order.  In a flat deck the
        names are matched where they stand, in the cards' texts."""
        top = self.top
        flat = not top.instances and top.texts is not None
        if self._scanned is None:  # what a pattern scans, in upper case, made once
            paths = () if flat else self.element_paths()
            upper = top.texts.upper() if flat else "\n".join(paths).upper()  # type: ignore[union-attr]
            self._scanned = (paths, upper)
        paths, upper = self._scanned
        if flat:
            cards = top.cards
            return [(k, cards[k].head) for k in matching_heads(pattern.upper(), upper)]
        return matching_paths(pattern, paths, upper)

    def element_kind(self, path: str) -> str:
        """The type letter of the element at *path* (upper case)."""
        return path.rsplit(".", 1)[-1][:1].upper()

    def element_at(self, position: int, path: str) -> Resolved | None:
        """The element at *path*, which stands at *position* in :meth:`element_paths` (a
        bound part knows its position: in a flat deck that is its card, no lookup)."""
        top = self.top
        if not top.instances and 0 <= position < len(top.cards):
            card = top.cards[position]
            if card.head == path:
                return Resolved(path, card, (), ())
        return self.resolve(path)

    def resolve(self, path: str) -> Resolved | None:
        """The element at an instance path such as ``X1.X3.R2`` (case-insensitive)."""
        if "." not in path:  # a top-level element: the common case, and the fast one
            top_card = self.top.card(path.lower())
            return None if top_card is None else Resolved(path, top_card, (), ())
        parts = path.split(".")
        scope = self.top
        instances: list[Card] = []
        definitions: list[Block] = []
        for depth, part in enumerate(parts):
            key = part.lower()
            card = scope.card(key)
            if card is None:
                return None
            if depth == len(parts) - 1:
                return Resolved(path, card, tuple(instances), tuple(definitions))
            if card.letter != "X":
                return None
            found = self.lookup_subckt(x_card_parts(card)[1], scope)
            if found is None:
                return None
            instances.append(card)
            definitions.append(found[0])
            scope = found[1]
        return None


def global_names(index: DeckIndex) -> set[str]:
    """Nodes that are the same everywhere: ground, ``gnd`` and every ``.global`` node."""
    names = {"0", "gnd"}
    decks = [index.project.deck, *(inc.deck for inc in index.project.includes)]
    for deck in decks:
        for card in deck.cards():
            if card.name == ".global":
                names.update(f.lower() for f in card.fields()[1:])
    return names


def top_level_node(resolved: Resolved, node: str, globals_: set[str]) -> str:
    """The name ngspice gives, at the top level, to *node* of the element at *resolved*.

    Ports are followed up through each instance's connections; other nodes inside an
    instance get the instance path as a prefix (``x1.x3.n5``), as ngspice names them.
    """
    name = node.lower()
    for depth in range(len(resolved.instances) - 1, -1, -1):
        if name in globals_:
            return name
        ports = [p.lower() for p in subckt_ports(resolved.definitions[depth])]
        if name in ports:
            outer_nodes, _sub, _params = x_card_parts(resolved.instances[depth])
            name = outer_nodes[ports.index(name)].lower()
        else:
            path = ".".join(card.name for card in resolved.instances[: depth + 1])
            return f"{path}.{name}"
    return name


def device_name(resolved: Resolved, name: str) -> str:
    """ngspice's name of device *name* placed beside the element at *resolved*:
    ``vx`` at the top level, ``v.x1.x3.vx`` inside instances.

    A definition nested in another one is expanded inside that one's body before the
    instances around it, and each expansion of a device puts its letter before the
    instance name: ``v.x1.v.xl.vx`` for ``XL`` of a cell defined inside ``X1``'s
    definition (ngspice 39, checked with ``show``)."""
    instances = resolved.instances
    if not instances:
        return name.lower()
    names = [card.name for card in instances]
    definitions = resolved.definitions
    owner = [_owner(definitions, k) for k in range(len(definitions))]
    device, letter, last = name.lower(), name[0].lower(), len(names)
    if all(o < 0 for o in owner):
        return f"{letter}.{'.'.join(names)}.{device}"

    def expand(scope: int) -> tuple[int, str]:
        # In the body of instance *scope*'s definition (-1: the top level) once it has
        # expanded the instances it owns: the first card of the path left unexpanded
        # (``last``: the device itself) and its name there.
        k = scope + 1
        current = names[k] if k < last else device
        while k < last and owner[k] == scope:
            k, inner = expand(k)
            current = f"{letter}.{current}.{inner}" if k == last else f"{current}.{inner}"
        return k, current

    return expand(-1)[1]


def _owner(definitions: tuple[Block, ...], k: int) -> int:
    """The index of the definition whose body holds definition *k* (-1: the top level)."""
    for j in range(k - 1, -1, -1):
        if any(node is definitions[k] for node in definitions[j].body):
            return j
    return -1
