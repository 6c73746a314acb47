"""Reader of ngspice raw files: binary or ASCII, any number of plots, real or complex.

A raw file is a sequence of plots.  Each has a text header (``Title:``, ``Plotname:``,
``Flags:``, ``No. Variables:``, ``No. Points:``, ``Variables:`` with one line per vector)
followed by ``Binary:`` and little-endian float64 data, point by point (two doubles per
value for complex plots), or by ``Values:`` and one number (``re,im`` for complex) per line.
Binary data are mapped with :func:`numpy.frombuffer` and copied once into contiguous
columns.  A file cut short (a run that stopped) yields the complete points it holds.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from heatweave.errors import SimulatorError

from .base import Array, Plot
from .naming import is_scale_name, kind_from_title, number_plots, vector_name

_HEADER_END = (b"Binary:", b"Values:")


@dataclass(frozen=True, slots=True)
class _Header:
    title: str
    points: int
    complex: bool
    names: tuple[str, ...]
    types: tuple[str, ...]
    binary: bool


def read_raw(path: str | os.PathLike[str]) -> tuple[Plot, ...]:
    """All plots of the raw file at *path*, in file order, with normalised names."""
    return parse_raw(Path(path).read_bytes())


def parse_raw(data: bytes) -> tuple[Plot, ...]:
    """All plots in the bytes of a raw file."""
    found: list[tuple[_Header, dict[str, Array]]] = []
    offset = data.find(b"Title:")
    while offset >= 0:
        header, offset = _parse_header(data, offset)
        if header.binary:
            columns, offset = _binary_columns(data, offset, header)
        else:
            columns, offset = _ascii_columns(data, offset, header)
        found.append((header, columns))
        offset = data.find(b"Title:", offset)
    kinds = [kind_from_title(header.title) for header, _ in found]
    return tuple(
        _make_plot(name, kind, header, columns)
        for name, kind, (header, columns) in zip(number_plots(kinds), kinds, found, strict=True)
    )


def _make_plot(name: str, kind: str, header: _Header, columns: dict[str, Array]) -> Plot:
    scale = None
    if header.names and is_scale_name(header.names[0], header.types[0]):
        scale = vector_name(header.names[0], header.types[0], scale=True)
    vectors: dict[str, Array] = {}
    for index, (raw, vtype) in enumerate(zip(header.names, header.types, strict=True)):
        values = columns[raw]
        if index == 0 and scale is not None:
            # ngspice stores the frequency scale of complex plots as complex; it is real.
            vectors[scale] = np.ascontiguousarray(values.real, dtype=np.float64)
        else:
            vectors[vector_name(raw, vtype)] = values
    return Plot(name=name, kind=kind, scale=scale, vectors=vectors)


def _parse_header(data: bytes, offset: int) -> tuple[_Header, int]:
    fields: dict[str, str] = {}
    names: list[str] = []
    types: list[str] = []
    in_variables = False
    while True:
        end = data.find(b"\n", offset)
        if end < 0:
            raise SimulatorError("the raw file ends inside a plot header")
        line = data[offset:end].rstrip(b"\r")
        offset = end + 1
        if line.startswith(_HEADER_END):
            binary = line.startswith(b"Binary:")
            break
        text = line.decode("utf-8", "replace")
        if in_variables and text[:1] in ("\t", " ") and text.strip():
            parts = text.split()
            names.append(parts[1])
            types.append(parts[2] if len(parts) > 2 else "")
            continue
        key, _, value = text.partition(":")
        in_variables = key == "Variables"
        fields[key.strip().lower()] = value.strip()
    count = int(fields.get("no. variables", len(names)))
    if count != len(names):
        raise SimulatorError(f"the raw file announces {count} vectors but lists {len(names)}")
    return (
        _Header(
            title=fields.get("plotname", ""),
            points=int(fields.get("no. points", "0").split()[0]),
            complex="complex" in fields.get("flags", "").lower(),
            names=tuple(names),
            types=tuple(types),
            binary=binary,
        ),
        offset,
    )


def _binary_columns(data: bytes, offset: int, header: _Header) -> tuple[dict[str, Array], int]:
    width = len(header.names)
    dtype = np.dtype("<c16") if header.complex else np.dtype("<f8")
    row = width * dtype.itemsize
    points = min(header.points, (len(data) - offset) // row) if row else 0
    table = np.frombuffer(data, dtype=dtype, count=points * width, offset=offset)
    columns = table.reshape(points, width).T.astype(dtype.newbyteorder("="), copy=True)
    return dict(zip(header.names, columns, strict=True)), offset + points * row


def _ascii_columns(data: bytes, offset: int, header: _Header) -> tuple[dict[str, Array], int]:
    end = data.find(b"\nTitle:", offset)
    stop = len(data) if end < 0 else end + 1
    tokens = data[offset:stop].split()
    width = len(header.names) + 1
    points = min(header.points, len(tokens) // width)
    table = np.array(tokens[: points * width], dtype=object).reshape(points, width)[:, 1:]
    columns: dict[str, Array] = {}
    for index, name in enumerate(header.names):
        cells = table[:, index]
        if header.complex:
            pairs = np.array([cell.split(b",") for cell in cells], dtype=np.float64)
            pairs = pairs.reshape(points, 2)
            columns[name] = pairs[:, 0] + 1j * pairs[:, 1]
        else:
            columns[name] = cells.astype(np.float64)
    return columns, stop
