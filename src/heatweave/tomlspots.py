"""Positions in an annotation file: Python's ``tomllib`` reports none, so we find them.

:class:`Locator` scans the TOML text once for table headers (``[part."X2.R4"]``,
``[[path]]``) and ``key = value`` lines (bare, quoted and dotted keys, values spanning
lines), and maps each key path to its line and column.  :func:`syntax_error` turns a
``tomllib`` error into an :class:`AnnotationError` with a file:line:col.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass, field

from heatweave.errors import AnnotationError, Location

KeyPath = tuple[str | int, ...]

_BARE = re.compile(r"[A-Za-z0-9_-]+")
_POSITION = re.compile(r"\s*\(at line (\d+), column (\d+)\)$")
_END = " (at end of document)"


@dataclass(frozen=True, slots=True)
class Spot:
    """Where a key (or table header) and its value start: 1-based line and columns."""

    line: int
    key_column: int
    value_column: int


def _read_key(text: str, pos: int) -> tuple[list[tuple[str, int]], int] | None:
    """Parse a dotted key at *pos*: its parts with their 0-based columns, and the end index."""
    parts: list[tuple[str, int]] = []
    while True:
        while pos < len(text) and text[pos] in " \t":
            pos += 1
        start = pos
        if pos < len(text) and text[pos] in "\"'":
            quote = text[pos]
            pos += 1
            chars: list[str] = []
            while pos < len(text) and text[pos] != quote:
                if quote == '"' and text[pos] == "\\" and pos + 1 < len(text):
                    char, pos = _escape(text, pos + 1)
                    chars.append(char)
                else:
                    chars.append(text[pos])
                pos += 1
            if pos >= len(text):
                return None
            pos += 1
            parts.append(("".join(chars), start))
        else:
            m = _BARE.match(text, pos)
            if m is None:
                return None
            parts.append((m.group(), start))
            pos = m.end()
        while pos < len(text) and text[pos] in " \t":
            pos += 1
        if pos < len(text) and text[pos] == ".":
            pos += 1
            continue
        return parts, pos


_ESCAPES = {"b": "\b", "t": "\t", "n": "\n", "f": "\f", "r": "\r"}


def _escape(text: str, pos: int) -> tuple[str, int]:
    """The character a basic string's escape stands for (*pos* just after the backslash),
    and the index of the escape's last character: ``\\n``, ``\\u0007``, ``\\U0001F600``."""
    letter = text[pos]
    width = {"u": 4, "U": 8}.get(letter)
    if width is not None:
        digits = text[pos + 1 : pos + 1 + width]
        try:
            return chr(int(digits, 16)), pos + width
        except ValueError:
            return letter, pos
    return _ESCAPES.get(letter, letter), pos


def _skip_value(lines: list[str], row: int, col: int) -> int:
    """The last row of a value starting at (*row*, *col*): arrays and strings may span lines."""
    depth = 0
    in_string: str | None = None
    while row < len(lines):
        text = lines[row]
        while col < len(text):
            ch = text[col]
            if in_string is not None:
                if in_string in ('"""', "'''") and text.startswith(in_string, col):
                    in_string = None
                    col += 3
                    continue
                if in_string == '"' and ch == "\\":
                    col += 2
                    continue
                if ch == in_string:
                    in_string = None
            elif text.startswith('"""', col) or text.startswith("'''", col):
                in_string = text[col : col + 3]
                col += 3
                continue
            elif ch in "\"'":
                in_string = ch
            elif ch in "[{":
                depth += 1
            elif ch in "]}":
                depth -= 1
            elif ch == "#":
                break
            col += 1
        if depth <= 0 and in_string not in ('"""', "'''"):
            return row
        row += 1
        col = 0
    return len(lines) - 1


def toml_lines(text: str) -> list[str]:
    """*text*'s lines as TOML (and ``tomllib``'s line numbers) count them: only LF or CR LF
    ends a line.  ``str.splitlines`` also breaks at U+0085, U+2028, U+2029, VT, FF and the
    file separators, which a quoted key may hold: every position after one was off."""
    lines = text.split("\n")
    if lines[-1] == "":
        lines.pop()
    return [line.removesuffix("\r") for line in lines]


@dataclass(slots=True)
class Locator:
    """Key paths of one TOML text mapped to their positions."""

    file: str
    text: str
    lines: list[str] = field(init=False)
    spots: dict[KeyPath, Spot] = field(init=False)

    def __post_init__(self) -> None:
        self.lines = toml_lines(self.text)
        self.spots = {}
        self._scan()

    def _scan(self) -> None:
        table: KeyPath = ()
        arrays: dict[KeyPath, int] = {}
        row = 0
        while row < len(self.lines):
            text = self.lines[row]
            stripped = text.lstrip(" \t")
            indent = len(text) - len(stripped)
            if stripped.startswith("["):
                double = stripped.startswith("[[")
                parsed = _read_key(text, indent + (2 if double else 1))
                if parsed is not None:
                    names: KeyPath = tuple(name for name, _ in parsed[0])
                    if double:
                        index = arrays.get(names, -1) + 1
                        arrays[names] = index
                        names = (*names, index)
                    table = names
                    last_col = parsed[0][-1][1] + 1
                    self.spots[table] = Spot(row + 1, last_col, indent + 1)
            elif stripped and not stripped.startswith("#"):
                parsed = _read_key(text, indent)
                if parsed is not None and parsed[1] < len(text) and text[parsed[1]] == "=":
                    keys, end = parsed
                    value_col = end + 1
                    while value_col < len(text) and text[value_col] in " \t":
                        value_col += 1
                    path = table + tuple(name for name, _ in keys)
                    self.spots.setdefault(path, Spot(row + 1, keys[-1][1] + 1, value_col + 1))
                    row = _skip_value(self.lines, row, value_col)
            row += 1

    def _location(self, line: int, column: int) -> Location:
        source = self.lines[line - 1] if 0 < line <= len(self.lines) else None
        return Location(self.file, line, column, source)

    def _find(self, path: KeyPath) -> Spot | None:
        while path:
            spot = self.spots.get(path)
            if spot is not None:
                return spot
            path = path[:-1]
        return None

    def table(self, path: KeyPath) -> Location:
        """The header of table *path* (column of its last key), or its nearest known parent."""
        spot = self._find(path)
        return self._location(spot.line, spot.key_column) if spot else self._location(1, 1)

    def key(self, path: KeyPath) -> Location:
        """The key *path* (table path + key), falling back to its table."""
        spot = self.spots.get(path)
        if spot is None:
            return self.table(path[:-1])
        return self._location(spot.line, spot.key_column)

    def value(self, path: KeyPath) -> Location:
        """The value of key *path*, falling back to the key's table."""
        spot = self.spots.get(path)
        if spot is None:
            return self.table(path[:-1])
        return self._location(spot.line, spot.value_column)


def syntax_error(err: tomllib.TOMLDecodeError, file: str, text: str) -> AnnotationError:
    """A ``tomllib`` error as an :class:`AnnotationError` pointing at its line and column."""
    message = str(err)
    lines = toml_lines(text)
    m = _POSITION.search(message)
    if m is not None:
        line, column = int(m.group(1)), int(m.group(2))
        message = message[: m.start()]
    else:
        message = message.removesuffix(_END)
        line, column = _first_failing_line(lines, str(err)), 1
        if 0 < line <= len(lines):
            column = len(lines[line - 1]) - len(lines[line - 1].lstrip(" \t")) + 1
        opened = [spot for spot in Locator(file, text).spots.values() if spot.line <= line]
        if message.startswith(("Unclosed", "Unterminated")) and opened:
            # The value that never ends starts at the last key before the failure.
            last = max(opened, key=lambda spot: spot.line)
            line, column = last.line, last.value_column
    source = lines[line - 1] if 0 < line <= len(lines) else None
    return AnnotationError(
        f"TOML syntax: {message[:1].lower()}{message[1:]}",
        Location(file, line, column, source),
        "check the quoting, brackets and `key = value` form on this line (TOML 1.0)",
    )


def _first_failing_line(lines: list[str], message: str) -> int:
    """For errors reported "at end of document": the first line whose prefix fails alike."""
    for end in range(1, len(lines) + 1):
        try:
            tomllib.loads("\n".join(lines[:end]))
        except tomllib.TOMLDecodeError as err:
            if str(err) == message:
                return end
    return max(len(lines), 1)
