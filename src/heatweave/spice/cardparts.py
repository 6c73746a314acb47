"""Cheap views of ``X`` cards and ``.subckt`` headers: nodes, subcircuit name, ports."""

from __future__ import annotations

from heatweave.spice.deck import Block, Card


def x_card_parts(card: Card) -> tuple[list[str], str, list[str]]:
    """(nodes, subcircuit name, parameter fields) of an ``X`` card.

    The subcircuit name is the last positional field before the first ``key=value`` pair or
    the optional ``params:`` keyword (manual 2.5.3, 2.9.3).
    """
    fields = card.fields()[1:]
    stop = len(fields)
    for i, f in enumerate(fields):
        if f.lower() == "params:" or (i + 1 < len(fields) and fields[i + 1] == "="):
            stop = i
            break
    positional = fields[:stop]
    if not positional:
        return [], "", fields[stop:]
    return positional[:-1], positional[-1], fields[stop:]


def subckt_ports(block: Block) -> list[str]:
    """The port names of a ``.subckt`` header, before ``params:`` or ``key=value``."""
    fields = block.header.fields()[2:]
    ports: list[str] = []
    for i, f in enumerate(fields):
        if f.lower() == "params:" or (i + 1 < len(fields) and fields[i + 1] == "="):
            break
        ports.append(f)
    return ports
