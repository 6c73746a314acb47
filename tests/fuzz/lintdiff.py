"""Differential check of ``heatweave lint`` against stock ngspice 39, both ways.

Usage::

    .venv/bin/python tests/fuzz/lintdiff.py --seed 1 --count 1500 --out /tmp/lintdiff

Writes ``--count`` decks (deck *i* from ``random.Random(f"{seed}:{i}")`` alone, so any
deck can be written again by its number), each a title, ``V1 in 0 1``, ``Rsense in 0 1k``,
one to three card families of ``tests/fuzz/cards.py`` and one analysis that really runs
(``.op``, or ``.tran``/``.dc``/``.ac`` with a ``.print`` line), dressed as designers
write decks: comments in every position (``*``, ``;``, ``$``, ``//``), continuation lines
(with comment lines between), case mixes, tabs and blanks around ``=``.  Runs ``ngspice
-b`` and ``lint`` on each and prints every disagreement: (a) ngspice ran the analysis and
lint gave an error (a designer's working deck refused), (b) ngspice refused the deck and
lint passed it.  Each disagreement is cut down to the lines it needs (a line is dropped
while both verdicts stay) and written to ``OUT/found/``.  Not part of the test suite: the
cases it found are in ``tests/conformance`` (accept/ and reject/), with stock ngspice run
on each there.

ngspice "ran" a deck when it loaded a circuit (a ``Circuit:`` line), printed no line
holding ``error`` (model dumps' ``<<NAN, error = 7>>`` aside) nor ``aborted``, and exited 0.
"""

from __future__ import annotations

import argparse
import json
import random
import re
import subprocess
import sys
from collections import Counter
from dataclasses import dataclass
from pathlib import Path
from typing import TextIO

sys.path.insert(0, str(Path(__file__).parent))

from cards import FAMILIES, Part

from heatweave.checks.lint import lint_file
from heatweave.errors import HeatweaveError

TITLES = ["Differential deck {i}", "deck {i}: a divider $ with a dollar", "deck {i} ; semi",
          "* deck {i} starting with a star", "DECK {i} IN CAPITALS", "deck {i} R1 1 0 1k",
          "  indented title {i}"]  # fmt: skip
ANALYSES = [[".op"], [".op"], [".op"], [".tran 1u 10u", ".print tran v(in)"],
            [".TRAN 1u 10u uic", ".print tran V(in)"], [".dc V1 0 1 0.5", ".print dc v(in)"],
            [".ac dec 5 1 1meg", ".print ac vm(in)"]]  # fmt: skip
ENDS = [".end", ".END", ".end", "", ".end $ done"]
INLINE = ["  ; note", " $ note", " // note", "\t$ tab note", ";glued", " $", "  ;"]
COMMENT_LINES = ["* note", "  * indented note", "*", "*+ a star then a plus", "\t* tab"]
CONTINUE = ["+ ", "+", "  + ", "+\t"]
_NO_CONTINUE = (".inc", ".lib", ".title", ".endl", ".ends", ".end")
_ERROR = re.compile(r"\berror\b|\baborted\b", re.IGNORECASE)
_MODEL_DUMP = re.compile(r"<<\s*NAN,\s*error\s*=\s*\d+\s*>>")


@dataclass
class Deck:
    lines: list[str]
    files: dict[str, str]
    families: list[str]


def _outside(text: str) -> list[int]:
    """Offsets of blanks in *text* outside braces and quotes (where a card may split)."""
    depth, quote, found = 0, False, []
    for k, ch in enumerate(text):
        if ch == "'" and depth == 0:
            quote = not quote
        elif ch == "{" and not quote:
            depth += 1
        elif ch == "}" and not quote:
            depth = max(0, depth - 1)
        elif ch == " " and depth == 0 and not quote and k > 0:
            found.append(k)
    return found


def _case(rng: random.Random, card: str) -> str:
    if card.lower().startswith((".inc", ".lib")) or rng.random() > 0.25:
        return card
    return rng.choice([str.upper, str.lower, str.swapcase])(card)


def _dress(rng: random.Random, card: str) -> list[str]:
    """*card* as one to three lines, with comments, blanks and continuations."""
    out: list[str] = []
    if rng.random() < 0.1:
        out.append(rng.choice(COMMENT_LINES))
    if rng.random() < 0.04:
        out.append("")
    card = _case(rng, card)
    blanks = _outside(card)
    if rng.random() < 0.1 and blanks:
        spot = rng.choice(blanks)
        card = card[:spot] + rng.choice(["\t", "  ", " \t "]) + card[spot + 1 :]
    blanks = _outside(card)
    if rng.random() < 0.18 and len(blanks) >= 2 and not card.lower().startswith(_NO_CONTINUE):
        spot = rng.choice(blanks[1:])
        head, tail = card[:spot], card[spot + 1 :]
        out.append(head)
        if rng.random() < 0.3:
            out.append(rng.choice(COMMENT_LINES[:3]))
        card = rng.choice(CONTINUE) + tail
    if rng.random() < 0.12:
        card += rng.choice(INLINE)
    out.append(card)
    return out


def make(seed: int, i: int) -> Deck:
    """Deck *i* of *seed*."""
    rng = random.Random(f"{seed}:{i}")
    names = rng.sample(sorted(FAMILIES), rng.randint(1, 3))
    parts: list[Part] = [FAMILIES[name](rng, k + 1) for k, name in enumerate(names)]
    cards = ["V1 in 0 1", "Rsense in 0 1k"]
    for part in parts:
        cards.extend(part.lines)
    analysis = rng.choice(ANALYSES)
    where = rng.randrange(len(cards) + 1) if rng.random() < 0.2 else len(cards)
    cards[where:where] = analysis
    lines = [rng.choice(TITLES).format(i=i)]
    depth = 0
    for card in cards:
        low = card.lower()
        if low.startswith(".subckt"):
            depth += 1
        elif low.startswith(".ends"):
            depth -= 1
        lines.extend(_dress(rng, card) if depth >= 0 else [card])
    end = rng.choice(ENDS)
    if end:
        lines.append(end)
    files: dict[str, str] = {}
    for part in parts:
        files.update(part.files)
    return Deck(lines, files, names)


def write(deck: Deck, folder: Path, lines: list[str] | None = None) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    for name, text in deck.files.items():
        (folder / name).parent.mkdir(parents=True, exist_ok=True)
        (folder / name).write_text(text)
    path = folder / "deck.cir"
    path.write_text("\n".join(deck.lines if lines is None else lines) + "\n")
    return path


def ngspice(path: Path) -> tuple[bool, list[str]]:
    """(ran, its error lines) of ``ngspice -b`` on *path*, in the deck's folder."""
    try:
        done = subprocess.run(
            ["ngspice", "-b", path.name], capture_output=True, text=True, errors="replace",
            timeout=8, cwd=path.parent,
        )  # fmt: skip
    except subprocess.TimeoutExpired:
        return False, ["timed out"]
    out = done.stdout + done.stderr
    loaded = re.search(r"^Circuit: ", out, re.MULTILINE) is not None
    lines = out.splitlines()
    errors = [
        ln.strip() + (" " + lines[k + 2].strip() if ln.startswith("Error on line") and
                      k + 2 < len(lines) else "")
        for k, ln in enumerate(lines)
        if _ERROR.search(ln) and not _MODEL_DUMP.search(ln) and not ln.startswith("Circuit: ")
    ]  # fmt: skip
    if not loaded:
        errors.append("no circuit loaded")
    if done.returncode != 0:
        errors.append(f"exit {done.returncode}")
    return not errors, errors


def lint(path: Path) -> list[str]:
    """lint's errors on *path* (an exception counts as one)."""
    try:
        found = lint_file(str(path), None)
    except HeatweaveError as err:
        return [f"refused: {err.message}"]
    except Exception as err:
        return [f"traceback: {type(err).__name__}: {err}"]
    return [f"{f.location.line if f.location else 0}: {f.message}" for f in found
            if f.severity == "error"]  # fmt: skip


def verdicts(path: Path) -> tuple[bool, list[str], list[str]]:
    ran, said = ngspice(path)
    return ran, said, lint(path)


def disagree(ran: bool, errors: list[str]) -> str | None:
    if ran and errors:
        return "a"
    if not ran and not errors:
        return "b"
    return None


def reduce(deck: Deck, folder: Path, key: str) -> list[str]:
    """The deck's lines with every line dropped that the disagreement (of *key*) does not
    need."""
    lines = list(deck.lines)
    k = 1
    while k < len(lines):
        trial = lines[:k] + lines[k + 1 :]
        ran, said, errors = verdicts(write(deck, folder, trial))
        direction = disagree(ran, errors)
        if direction is not None and _key(direction, said, errors) == key:
            lines = trial
        else:
            k += 1
    write(deck, folder, lines)
    return lines


def _key(direction: str, said: list[str], errors: list[str]) -> str:
    words = errors[0] if direction == "a" else (said[0] if said else "?")
    words = re.sub(r"^\d+: ", "", words)
    words = re.sub(r"^Error on line \d+ or its substitute: ", "", words)
    return direction + ": " + re.sub(r"\b\w*\d\w*\b", "#", words)[:90]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--count", type=int, default=500)
    parser.add_argument("--start", type=int, default=0)
    parser.add_argument("--out", type=Path, default=Path("/tmp/lintdiff"))
    parser.add_argument("--reduce", type=int, default=3, help="decks cut down per kind")
    args = parser.parse_args()
    counts: Counter[str] = Counter()
    kinds: Counter[str] = Counter()
    args.out.mkdir(parents=True, exist_ok=True)
    with (args.out / "found.jsonl").open("w") as log:
        _run(args, log, counts, kinds)
    print(json.dumps(counts, indent=1))
    for key, count in kinds.most_common():
        print(f"{count:5d}  {key}")


def _run(args: argparse.Namespace, log: TextIO, counts: Counter[str], kinds: Counter[str]) -> None:
    for i in range(args.start, args.start + args.count):
        deck = make(args.seed, i)
        folder = args.out / "work"
        for old in sorted(folder.rglob("*"), reverse=True) if folder.exists() else []:
            old.unlink() if old.is_file() else old.rmdir()
        ran, said, errors = verdicts(write(deck, folder))
        counts["decks"] += 1
        counts["ngspice ran" if ran else "ngspice refused"] += 1
        direction = disagree(ran, errors)
        if direction is None:
            continue
        key = _key(direction, said, errors)
        kinds[key] += 1
        counts[f"direction {direction}"] += 1
        lines = deck.lines
        if kinds[key] <= args.reduce and "timed out" not in key:
            lines = reduce(deck, folder, key)
            ran, said, errors = verdicts(write(deck, folder, lines))
            keep = args.out / "found" / f"{i:05d}{direction}"
            write(deck, keep, lines)
        log.write(json.dumps({"i": i, "direction": direction, "key": key, "families":
                              deck.families, "ngspice": said[:3], "lint": errors[:3],
                              "lines": lines}) + "\n")  # fmt: skip
        log.flush()
        print(f"{i} {key}", flush=True)


if __name__ == "__main__":
    main()
