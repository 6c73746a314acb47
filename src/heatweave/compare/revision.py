"""A deck as it was at a git revision, copied into a private temporary folder.

The deck, its annotation file and every file the deck includes (``.include``, ``.lib``,
followed from file to file) are read with ``git show REV:PATH`` and written under a fresh
temporary folder at the same places relative to the repository's top, so relative includes
resolve as they did.  The working tree and the index are only read, never written.  Any
include outside the repository, or named by an absolute path, is refused: it could not be
taken from the revision, and using today's copy would compare the wrong thing.
"""

from __future__ import annotations

import os
import subprocess
import tempfile
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

from heatweave.errors import UsageError
from heatweave.spice.deck import Block, Card, Node
from heatweave.spice.project import include_target
from heatweave.spice.reader import read

#: The longest git may take for one command before heatweave gives up on it (s).
GIT_TIMEOUT = 60.0


@dataclass(frozen=True, slots=True)
class Checkout:
    """Where a revision's copy of the deck and its annotation file were written."""

    revision: str  # as the user wrote it
    commit: str  # the full commit id it names
    folder: str
    deck: str
    annotations: str
    files: tuple[str, ...]  # every file taken, relative to the repository's top


def _git(args: list[str], cwd: str) -> subprocess.CompletedProcess[bytes]:
    try:
        return subprocess.run(
            ["git", *args], cwd=cwd, capture_output=True, timeout=GIT_TIMEOUT, check=False
        )
    except FileNotFoundError:
        raise UsageError(
            "--against needs git, which is not installed",
            hint="install git, or compare two saved results: heatweave compare OLD.json NEW.json",
        ) from None
    except subprocess.TimeoutExpired:
        raise UsageError(f"git {' '.join(args)} took longer than {GIT_TIMEOUT:g} s") from None


def repository_top(path: str) -> Path:
    """The top folder of the git working tree holding *path*, or a refusal in words."""
    folder = str(Path(path).resolve().parent)
    done = _git(["rev-parse", "--show-toplevel"], folder)
    if done.returncode != 0:
        raise UsageError(
            f"{path} is not in a git repository, so there is no revision to compare against",
            hint="run compare inside the deck's repository, or compare two saved results: "
            "heatweave compare OLD.json NEW.json",
        )
    return Path(done.stdout.decode().strip()).resolve()


def resolve_revision(top: Path, revision: str) -> str:
    """The commit id *revision* names, or a refusal naming it."""
    if revision.startswith("-"):
        raise UsageError(f"--against {revision!r} is not a revision", hint="e.g. --against HEAD~1")
    done = _git(["rev-parse", "--verify", "--quiet", f"{revision}^{{commit}}"], str(top))
    if done.returncode != 0:
        raise UsageError(
            f"git knows no revision {revision!r} in {top}",
            hint="name a commit, branch or tag, e.g. --against HEAD~1 or --against main",
        )
    return done.stdout.decode().strip()


def _inside(top: Path, path: str, role: str) -> str:
    """*path* relative to the repository's top (POSIX form), or a refusal."""
    full = Path(path).resolve()
    try:
        return full.relative_to(top).as_posix()
    except ValueError:
        raise UsageError(
            f"the {role} {path} lies outside the git repository {top}",
            hint="keep the deck, its annotation file and its includes in one repository",
        ) from None


def _show(top: Path, commit: str, revision: str, relative: str, role: str) -> bytes:
    done = _git(["show", f"{commit}:{relative}"], str(top))
    if done.returncode != 0:
        raise UsageError(
            f"the {role} {relative} did not exist at {revision}",
            hint="compare against a revision that has it, or compare two saved results",
        )
    return done.stdout


def _include_cards(body: tuple[Node, ...]) -> Iterator[Card]:
    for node in body:
        if isinstance(node, Block):
            yield from _include_cards(node.body)
        elif isinstance(node, Card) and include_target(node) is not None:
            yield node


def _write(folder: Path, relative: str, data: bytes) -> None:
    target = folder / relative
    target.parent.mkdir(parents=True, exist_ok=True)
    target.write_bytes(data)


def checkout(deck: str, annotations: str, revision: str) -> Checkout:
    """Copy *deck*, *annotations* and the deck's includes as of *revision* into a new
    temporary folder (the caller removes it); refuse in words when that is not possible."""
    if deck == "-":
        raise UsageError(
            "--against reads the deck from git, not from standard input",
            hint="name the deck's file",
        )
    top = repository_top(deck)
    commit = resolve_revision(top, revision)
    deck_rel = _inside(top, deck, "deck")
    annotation_rel = _inside(top, annotations, "annotation file")
    folder = Path(tempfile.mkdtemp(prefix="heatweave-compare-"))
    taken = [deck_rel, annotation_rel]
    _write(folder, annotation_rel, _show(top, commit, revision, annotation_rel, "annotation file"))
    pending = [deck_rel]
    while pending:
        relative = pending.pop()
        data = _show(
            top, commit, revision, relative, "deck" if relative == deck_rel else "included file"
        )
        _write(folder, relative, data)
        text = data.decode("utf-8", errors="surrogateescape")
        parsed = read(text, str(folder / relative), title=relative == deck_rel)
        for card in _include_cards(parsed.body):
            target = include_target(card)
            assert target is not None
            name = os.path.expanduser(target[0])
            if os.path.isabs(name):
                raise UsageError(
                    f"{relative} includes {name} by an absolute path, which cannot be taken "
                    f"from {revision}",
                    card.location(),
                    "include it by a path relative to the including file",
                )
            joined = os.path.normpath(str(Path(relative).parent / name))
            if joined.startswith(".."):
                raise UsageError(
                    f"{relative} includes {name}, which lies outside the git repository",
                    card.location(),
                    "keep included files inside the deck's repository",
                )
            included = Path(joined).as_posix()
            if included not in taken:
                taken.append(included)
                pending.append(included)
    return Checkout(
        revision,
        commit,
        str(folder),
        str(folder / deck_rel),
        str(folder / annotation_rel),
        tuple(taken),
    )
