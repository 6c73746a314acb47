"""Reading Zth(t) CSV data and network TOML snippets; writing networks as TOML snippets.

Every problem with a file is reported at ``FILE:LINE:COL`` with the line and a hint.
"""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass

import numpy as np

from heatweave.errors import InputError, Location
from heatweave.networks.base import FORMS, FloatArray, NetworkError, NetworkForm
from heatweave.networks.cauer import Cauer
from heatweave.networks.convert import to_foster
from heatweave.networks.foster import Foster
from heatweave.networks.single import Single
from heatweave.quantities import parse_number
from heatweave.tomlspots import syntax_error, toml_lines


class DataFileError(InputError):
    """A row of a data file cannot be read."""


@dataclass(frozen=True, slots=True)
class ZthData:
    """Zth(t) samples read from a file, with the line each came from."""

    t: FloatArray
    zth: FloatArray
    lines: tuple[int, ...]


def _fields(text: str) -> list[tuple[int, str]]:
    """Comma-separated fields with their 1-based start columns, blanks stripped."""
    out, start = [], 0
    for piece in text.split(","):
        lead = len(piece) - len(piece.lstrip())
        out.append((start + lead + 1, piece.strip()))
        start += len(piece) + 1
    return out


def csv_lines(text: str) -> list[str]:
    """*text*'s lines as the csv module counts them (and an editor counting LF): LF, CR LF
    or a lone CR ends a line.  ``str.splitlines`` also breaks at U+0085, U+2028, U+2029,
    VT, FF and the file separators, and every position after one was a line off."""
    lines = _LINE_END.split(text)
    if lines[-1] == "":
        lines.pop()
    return lines


_LINE_END = re.compile(r"\r\n|\r|\n")


def read_zth_csv(text: str, filename: str) -> ZthData:
    """Two columns, time (s) and Zth (K/W); an optional header row; ``#`` starts a comment.

    Numbers may carry SPICE scale factors (``10u``, ``1m``).  Times must increase from row
    to row: a row out of order or repeated is a slip in the data, not something to sort.
    """
    times: list[float] = []
    values: list[float] = []
    lines: list[int] = []
    seen_row = False
    previous = ""
    for number, raw in enumerate(csv_lines(text), start=1):
        content = raw.split("#", 1)[0]
        if not content.strip():
            continue
        fields = _fields(content)
        where = Location(filename, number, fields[0][0], raw)
        if len(fields) != 2:
            raise DataFileError(
                f"expected 2 columns (time, Zth), found {len(fields)}",
                where,
                "write one 'time, zth' pair per line, separated by a comma",
            )
        parsed = [parse_number(field) if field else None for _, field in fields]
        if not seen_row and all(value is None for value in parsed):
            seen_row = True  # a header row
            continue
        seen_row = True
        for (column, field), value, what in zip(fields, parsed, ("time", "Zth"), strict=True):
            spot = Location(filename, number, column, raw)
            if value is None:
                raise DataFileError(
                    f"{what} {field!r} is not a number", spot,
                    "write a plain number such as 1.5e-3 or one with a SPICE scale factor (1.5m)",
                )
            if value <= 0:
                raise DataFileError(
                    f"{what} {field} is not greater than zero", spot,
                    "times and Zth values must be positive; drop the t = 0 point"
                    if what == "time" else
                    "Zth is the temperature rise per watt after the step; check its sign",
                )
        if times and parsed[0] <= times[-1]:  # type: ignore[operator]
            raise DataFileError(
                f"time {fields[0][1]} is not after {previous} (line {lines[-1]})",
                Location(filename, number, fields[0][0], raw),
                "list the rows in increasing time, each time once",
            )
        previous = fields[0][1]
        times.append(float(parsed[0]))  # type: ignore[arg-type]
        values.append(float(parsed[1]))  # type: ignore[arg-type]
        lines.append(number)
    return ZthData(np.array(times), np.array(values), tuple(lines))


def _line_of(text: str, pattern: str, after: int = 0) -> int | None:
    lines = toml_lines(text)
    for index in range(after, len(lines)):
        if re.match(pattern, lines[index]):
            return index + 1
    return None


def _where(text: str, filename: str, line: int | None) -> Location | None:
    if line is None:
        return None
    lines = toml_lines(text)
    return Location(filename, line, 1, lines[line - 1] if line <= len(lines) else None)


def read_network_toml(text: str, filename: str, part: str | None = None) -> NetworkForm:
    """One network from a TOML snippet.

    The rule: a network key (``foster``, ``cauer``, ``single``) at the top level wins;
    otherwise the ``[part.NAME]`` table named by *part*, or the only part that has one.
    """
    try:
        document = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        # Located as the annotation loader locates it (an unclosed value at its key).
        located = syntax_error(err, filename, text)
        raise DataFileError(
            located.message,
            located.location,
            "see https://toml.io for the syntax; a network is e.g. foster = [[0.5, 1e-3]]",
        ) from None
    table, header_line = _select(document, text, filename, part)
    written_keys = set(table)
    table = _with_single(table)
    keys = [key for key in FORMS if key in table]
    if len(keys) != 1:
        found_keys = ", ".join(keys) if keys else "none"
        raise DataFileError(
            f"expected exactly one network key ({', '.join(sorted(FORMS))}), found {found_keys}",
            _where(text, filename, header_line or 1),
            "keep one of foster = [...], cauer = [...] or single = [...]",
        )
    key = keys[0]
    written = key if key in written_keys else "rth"  # a part's rth stands for single
    key_line = _line_of(text, rf"\s*{written}\s*=", max((header_line or 1) - 1, 0))
    where = _where(text, filename, key_line)
    try:
        network = FORMS[key].from_annotation(_plain(table[key]))
        if isinstance(network, Single):
            to_foster(network)  # a steady-only stage (cth = 0) has neither form: said here
    except NetworkError as err:
        raise err.at(where) from None
    return network


def _plain(value: object) -> object:
    """A value as the annotation loader reads it: a SPICE string ("50m") as its number, a
    tolerance table as its nominal value, lists as tuples; the form rejects anything else."""
    if isinstance(value, dict) and "nominal" in value:
        value = value["nominal"]
    if isinstance(value, str):
        number = parse_number(value)
        return value if number is None else number
    if isinstance(value, list):
        return tuple(_plain(item) for item in value)
    return value


def _with_single(table: dict[str, object]) -> dict[str, object]:
    """An annotation part's ``rth`` (with ``cth``, default 0) as the ``single`` key it means."""
    if "rth" not in table or any(key in table for key in FORMS):
        return table
    return {**table, "single": [table["rth"], table.get("cth", 0.0)]}


def _select(
    document: dict[str, object], text: str, filename: str, part: str | None
) -> tuple[dict[str, object], int | None]:
    if part is None and any(key in document for key in FORMS):
        return document, None
    parts = document.get("part")
    if not isinstance(parts, dict):
        raise DataFileError(
            "no thermal network found", _where(text, filename, 1),
            "write foster = [[rth, tau], ...] or cauer = [[rth, cth], ...] at the top level",
        )
    with_network = sorted(
        name for name, body in parts.items()
        if isinstance(body, dict) and any(key in _with_single(body) for key in FORMS)
    )  # fmt: skip
    if part is None:
        if not with_network:
            raise DataFileError(
                "no part has a thermal network", _where(text, filename, 1),
                "give a part foster = [[rth, tau], ...], cauer = [[rth, cth], ...] or rth "
                "with cth",
            )
        if len(with_network) != 1:
            raise DataFileError(
                f"{len(with_network)} parts hold a network: {', '.join(with_network) or 'none'}",
                _where(text, filename, 1),
                "choose one with --part NAME",
            )
        part = with_network[0]
    assert part is not None
    body = parts.get(part)
    if not isinstance(body, dict):
        raise DataFileError(
            f"there is no [part.{part}] table", _where(text, filename, 1),
            "parts with a network: " + (", ".join(with_network) or "none"),
        )
    header = _line_of(text, rf"\s*\[\s*part\s*\.\s*\"?{re.escape(part)}\"?\s*\]")
    return body, header


def _number(value: float) -> str:
    return repr(float(value))


def network_toml(network: NetworkForm, comments: tuple[str, ...] = ()) -> str:
    """The network as a TOML snippet to paste into an annotation file."""
    out = [f"# {line}" for line in comments]
    if isinstance(network, Single):
        out.append("# rth in K/W, cth in J/K")
        out.append(f"single = [{_number(network.rth)}, {_number(network.cth)}]")
        return "\n".join(out) + "\n"
    if isinstance(network, Foster):
        out.append("# [rth in K/W, tau in s], tau ascending")
        key, pairs = "foster", network.stages
    elif isinstance(network, Cauer):
        out.append("# [rth in K/W, cth in J/K], hot spot first")
        key, pairs = "cauer", network.stages
    else:
        raise NetworkError(f"no TOML form for {network.kind!r} networks")
    out.append(f"{key} = [")
    out.extend(f"  [{_number(a)}, {_number(b)}]," for a, b in pairs)
    out.append("]")
    return "\n".join(out) + "\n"
