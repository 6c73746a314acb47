"""Glob patterns of the annotation file over many names at once.

A pattern such as ``RS*`` may be matched against a million instance paths.  Calling a
compiled pattern once per name costs a Python call each; here the names are joined one to
a line and a single multi-line regex scan finds every match, in order.  The regex follows
``fnmatch.fnmatchcase`` exactly (the translation mirrors ``fnmatch.translate`` of Python
3.11), except that no part of it can match a line end, so a match never spans two names.

:func:`matching_heads` does the same over whole cards joined by NULs, each name being its
card's first field: a deck's million names need not be cut out of their cards first.
"""

from __future__ import annotations

import re
from collections.abc import Sequence

#: What ends a card's first field (as ``Card.head`` reads it), and the NUL between cards.
FIELD_END = " \t\r\n,=()\x00"


def glob_regex(pattern: str, stop: str = "\n") -> str:
    """A regex that matches a line end to end (``re.fullmatch``) exactly where
    ``fnmatchcase(line, pattern)`` does, and never matches a character of *stop* (by
    default a line end)."""
    forbid = re.escape(stop)
    star = f"[^{forbid}]*"
    out: list[str] = []
    i, n = 0, len(pattern)
    while i < n:
        ch = pattern[i]
        i += 1
        if ch == "*":
            if not out or out[-1] != star:  # "**" is "*"
                out.append(star)
        elif ch == "?":
            out.append(f"[^{forbid}]")
        elif ch == "[":
            item, i = _set(pattern, i, forbid)
            out.append(item)
        elif ch in stop:  # no name holds it
            out.append("(?!)")
        else:
            out.append(re.escape(ch))
    return "".join(out)


def _set(pattern: str, i: int, forbid: str) -> tuple[str, int]:
    """The regex for a ``[...]`` set starting after the ``[`` at *i*, and where it ends."""
    n = len(pattern)
    j = i
    if j < n and pattern[j] == "!":
        j += 1
    if j < n and pattern[j] == "]":
        j += 1
    while j < n and pattern[j] != "]":
        j += 1
    if j >= n:
        return "\\[", i  # an unclosed "[" stands for itself
    if "-" not in pattern[i:j]:
        stuff = pattern[i:j].replace("\\", r"\\")
    else:
        chunks = []
        k = i + 2 if pattern[i] == "!" else i + 1
        start = i
        while True:
            k = pattern.find("-", k, j)
            if k < 0:
                break
            chunks.append(pattern[start:k])
            start = k + 1
            k = k + 3
        chunk = pattern[start:j]
        if chunk:
            chunks.append(chunk)
        else:
            chunks[-1] += "-"
        for k in range(len(chunks) - 1, 0, -1):  # empty ranges (z-a) are dropped
            if chunks[k - 1][-1] > chunks[k][0]:
                chunks[k - 1] = chunks[k - 1][:-1] + chunks[k][1:]
                del chunks[k]
        stuff = "-".join(s.replace("\\", r"\\").replace("-", r"\-") for s in chunks)
    stuff = re.sub(r"([&~|])", r"\\\1", stuff)  # not set operations
    end = j + 1
    if not stuff:
        return "(?!)", end  # an empty set matches nothing
    if stuff == "!":
        return f"[^{forbid}]", end
    if stuff[0] == "!":
        return f"[^{stuff[1:]}{forbid}]", end
    if stuff[0] in ("^", "["):
        stuff = "\\" + stuff
    return f"(?![{forbid}])[{stuff}]", end


def matching(pattern: str, names: str) -> list[int]:
    """Line numbers (from 0) of the lines of *names* that match *pattern* whole
    (``fnmatchcase`` rules): *names* holds one name a line, none containing a line end."""
    if not names:
        return []
    # Each name after a line end: a literal first character lets the regex engine skip
    # ahead (several times faster than a multi-line "^").
    regex = re.compile("\n(?:" + glob_regex(pattern) + r")(?=\n|\Z)")
    return line_numbers(regex, "\n" + names)


def matching_paths(
    pattern: str, paths: Sequence[str], upper: str | None = None
) -> list[tuple[int, str]]:
    """(position, path) of every one of *paths* that *pattern* matches, case ignored (both
    are compared in upper case, as SPICE names are); *upper* is ``"\\n".join(paths).upper()``
    when the caller keeps it for several patterns."""
    if upper is None:
        upper = "\n".join(paths).upper()
    return [(k, paths[k]) for k in matching(pattern.upper(), upper)]


def matching_heads(pattern: str, cards: str) -> list[int]:
    """Numbers (from 0) of the cards of *cards* whose first field matches *pattern* whole
    (``fnmatchcase`` rules): *cards* holds each card's text after a NUL, none holding a NUL,
    and no first field holding an inline comment (``;``, ``//``)."""
    if not cards:
        return []
    field = glob_regex(pattern, FIELD_END)
    regex = re.compile(rf"\x00[ \t]*+(?:{field})(?=[{re.escape(FIELD_END)}]|\Z)")
    return line_numbers(regex, cards, "\x00")


def line_numbers(regex: re.Pattern[str], text: str, end: str = "\n") -> list[int]:
    """Numbers (from 0) of the lines of *text* where *regex* matches, *text* starting with
    a line end and every match starting at one: the line end that opens line k is the
    k-th of the text, counted from 0.  *end* is the line end (a newline, or the NUL between
    cards)."""
    return [number for number, _start in line_starts(regex, text, end)]


def line_starts(regex: re.Pattern[str], text: str, end: str = "\n") -> list[tuple[int, int]]:
    """As :func:`line_numbers`, each number with the offset of the line end opening it."""
    hits: list[tuple[int, int]] = []
    index = 0
    last = 0
    count = text.count
    for found in regex.finditer(text):
        start = found.start()
        index += count(end, last, start)
        last = start
        hits.append((index, start))
    return hits
