"""The files a result was computed from, each with the SHA-256 of its bytes.

A reviewer reading a page or a comparison can then tell exactly which deck, includes and
annotation file stand behind its numbers (``sha256sum FILE`` gives the same digest).
"""

from __future__ import annotations

import hashlib
import os
from dataclasses import dataclass
from pathlib import Path

from heatweave.emit.emitter import Inputs


@dataclass(frozen=True, slots=True)
class InputFile:
    """One input: its role (deck, include, annotation file), its path and its digest."""

    role: str
    path: str
    sha256: str


def _digest(path: str, fallback: str) -> str:
    try:
        data = Path(path).read_bytes()
    except OSError:
        data = fallback.encode("utf-8", errors="surrogateescape")
    return hashlib.sha256(data).hexdigest()


def _shown(path: str) -> str:
    """An included file as people read it: relative to the current folder when inside it."""
    relative = os.path.relpath(path)
    return path if relative.startswith("..") else relative


def input_files(inputs: Inputs) -> tuple[InputFile, ...]:
    """The deck (standard input: the text read), every included file once, and the
    annotation file, in that order."""
    deck = inputs.project.deck
    source = deck.source.text if deck.source is not None else deck.write()
    if inputs.deck_path == "-":
        files = [
            InputFile(
                "deck", "-", hashlib.sha256(source.encode("utf-8", "surrogateescape")).hexdigest()
            )
        ]
    else:
        files = [InputFile("deck", inputs.deck_path, _digest(inputs.deck_path, source))]
    seen: set[str] = set()
    for include in inputs.project.includes:
        if include.path not in seen:
            seen.add(include.path)
            files.append(InputFile("include", _shown(include.path), _digest(include.path, "")))
    files.append(InputFile("annotation file", inputs.annotation_path, inputs.annotation.sha256))
    return tuple(files)
