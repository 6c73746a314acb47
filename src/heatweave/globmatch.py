"""Glob patterns of the annotation file over many names at once.

A pattern such as ``RS*`` may be matched against a million instance paths.  Calling a
compiled pattern once per name costs a Python call each; here the names are joined one to
a line and a single multi-line regex scan finds every match, in order.  The regex follows
``fnmatch.fnmatchcase`` exactly (the translation mirrors ``fnmatch.translate`` of Python
3.11), except that no part of it can match a line end, so a match never spans two names.
"""

from __future__ import annotations

import re

_ANY = "[^\n]"
_STAR = "[^\n]*"


def glob_regex(pattern: str) -> str:
    """A regex that matches a line end to end (``re.fullmatch``) exactly where
    ``fnmatchcase(line, pattern)`` does, and never matches a line end."""
    out: list[str] = []
    i, n = 0, len(pattern)
    while i < n:
        ch = pattern[i]
        i += 1
        if ch == "*":
            if not out or out[-1] != _STAR:  # "**" is "*"
                out.append(_STAR)
        elif ch == "?":
            out.append(_ANY)
        elif ch == "[":
            item, i = _set(pattern, i)
            out.append(item)
        else:
            out.append(re.escape(ch))
    return "".join(out)


def _set(pattern: str, i: int) -> tuple[str, int]:
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
        return _ANY, end
    if stuff[0] == "!":
        return "[^" + stuff[1:] + "\n]", end
    if stuff[0] in ("^", "["):
        stuff = "\\" + stuff
    return f"[{stuff}]", end


def matching(pattern: str, names: str) -> list[int]:
    """Line numbers (from 0) of the lines of *names* that match *pattern* whole
    (``fnmatchcase`` rules): *names* holds one name a line, none containing a line end."""
    if not names:
        return []
    # Each name after a line end: a literal first character lets the regex engine skip
    # ahead (several times faster than a multi-line "^").
    regex = re.compile("\n(?:" + glob_regex(pattern) + r")(?=\n|\Z)")
    return line_numbers(regex, "\n" + names)


def line_numbers(regex: re.Pattern[str], text: str) -> list[int]:
    """Numbers (from 0) of the lines of *text* where *regex* matches, *text* starting with
    a line end and every match starting at one: the line end that opens line k is the
    k-th of the text, counted from 0."""
    hits: list[int] = []
    index = 0
    last = 0
    count = text.count
    for found in regex.finditer(text):
        start = found.start()
        index += count("\n", last, start)
        last = start
        hits.append(index)
    return hits
