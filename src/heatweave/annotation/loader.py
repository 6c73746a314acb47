"""Validation of an annotation file's text into an :class:`Annotation`."""

from __future__ import annotations

import hashlib
import itertools
import os
import tomllib
from pathlib import Path

from heatweave import files
from heatweave.annotation.fields import (
    AMBIENT_FIELDS,
    DEFAULT_DERATING_KNEE,
    LIMIT_FIELDS,
    NODE_FIELDS,
    PART_FIELDS,
    PATH_FIELDS,
    REVIEW_FIELDS,
    TOP_FIELDS,
    closest,
    model_fields,
)
from heatweave.annotation.tables import TableReader, TableResult, header
from heatweave.annotation.types import (
    AMBIENT,
    SCHEMA_VERSION,
    Ambient,
    Annotation,
    LimitSpec,
    NetworkSpec,
    NodeSpec,
    PartSpec,
    PathSpec,
    ReviewSpec,
)
from heatweave.errors import AnnotationError, Location, UnreadableInputError
from heatweave.quantities import outside_ambient_range
from heatweave.spice.deck import unprintable
from heatweave.tempmodels import REGISTRY, ParamValue, TempModel
from heatweave.tomlspots import KeyPath, Locator, syntax_error

TOP_TABLES = ("ambient", "node", "part", "path", "limit", "review")


#: How an annotation file's name ends: ``amp.cir`` is annotated by ``amp.thermal.toml``.
ANNOTATION_SUFFIX = ".thermal.toml"
#: The deck file names heatweave looks for beside an annotation file (and the pre-commit
#: hook matches): SPICE netlists as people write them for ngspice.  ``.net`` is left out:
#: schematic editors write their own, non-SPICE netlist formats under that name.
DECK_SUFFIXES = (".cir", ".sp", ".spi", ".spice", ".ckt")


def default_path(deck: str | Path) -> Path:
    """``DECK.thermal.toml`` beside *deck* (``amp.cir`` -> ``amp.thermal.toml``)."""
    deck = Path(deck)
    return deck.with_name(f"{deck.stem}{ANNOTATION_SUFFIX}")


def annotation_beside(deck: str | Path) -> Path | None:
    """``DECK.thermal.toml`` beside *deck* when anything is there (a folder or a broken
    link too, which reading then refuses, rather than taking the deck as unannotated);
    ``None`` when nothing is, or for standard input."""
    if str(deck) == "-":
        return None
    candidate = default_path(deck)
    return candidate if os.path.lexists(candidate) else None


def is_annotation_file(path: str | Path) -> bool:
    """True when *path* is named like an annotation file (``*.thermal.toml``)."""
    return Path(path).name.lower().endswith(ANNOTATION_SUFFIX)


def deck_beside(annotation: str | Path) -> Path | None:
    """The deck *annotation* annotates: ``amp.cir`` (or another of :data:`DECK_SUFFIXES`)
    beside ``amp.thermal.toml``; ``None`` when there is none."""
    path = Path(annotation)
    stem = path.name[: -len(ANNOTATION_SUFFIX)]
    for suffix in DECK_SUFFIXES:
        candidate = path.with_name(stem + suffix)
        if candidate.is_file():
            return candidate
    return None


def load(path: str | Path, deck_name: str | None = None) -> Annotation:
    """Read and validate an annotation file on its own (no deck needed)."""
    file = str(path)
    try:
        data = files.read_bytes(path)
    except OSError as err:
        missing = isinstance(err, FileNotFoundError)
        raise UnreadableInputError(
            f"cannot read the annotation file {file}: {err.strerror or err}",
            None,
            f"create it beside the deck (e.g. {default_path(deck_name or 'deck.cir').name})"
            if missing
            else "it must be a file you may read: check its permissions, or name the file",
        ) from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as err:
        line = data[: err.start].count(b"\n") + 1
        raise AnnotationError(
            "the annotation file is not valid UTF-8",
            Location(file, line, 1),
            "TOML files must be UTF-8; save it again as UTF-8",
        ) from None
    return loads(text, file, deck_name)


def loads(text: str, file: str = "<annotation>", deck_name: str | None = None) -> Annotation:
    """Validate annotation *text* as if read from *file*."""
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as err:
        raise syntax_error(err, file, text) from None
    reader = TableReader(Locator(file, text))
    _check_schema(raw.get("schema"), reader)
    top = reader.read(raw, TOP_FIELDS, (), extra=TOP_TABLES)
    ambient = _ambient(raw.get("ambient"), reader)
    nodes = tuple(_node(name, table, reader) for name, table in reader.tables(raw, "node").items())
    parts = tuple(_part(name, table, reader) for name, table in reader.tables(raw, "part").items())
    paths = tuple(_path(i, table, reader) for i, table in enumerate(reader.array(raw, "path")))
    limits = tuple(
        _limit(name, table, reader) for name, table in reader.tables(raw, "limit").items()
    )
    _check_graph(nodes, parts, paths, reader)
    review = _review(raw.get("review"), reader)
    start = str(top.values.get("start", "cold"))
    assert start in ("cold", "steady")
    return Annotation(
        path=file,
        text=text,
        sha256=hashlib.sha256(text.encode("utf-8")).hexdigest(),
        schema=SCHEMA_VERSION,
        start="steady" if start == "steady" else "cold",
        ambient=ambient,
        nodes=nodes,
        parts=parts,
        paths=paths,
        limits=limits,
        warnings=tuple(reader.warnings),
        deck_name=deck_name,
        review=review,
    )


def _check_schema(value: object, reader: TableReader) -> None:
    if value is None:
        raise AnnotationError(
            "the file does not say which schema it follows",
            Location(reader.locator.file, 1, 1, next(iter(reader.locator.lines), None)),
            f"add `schema = {SCHEMA_VERSION}` as its first line",
        )
    if value != SCHEMA_VERSION:
        written = f"{value:g}" if isinstance(value, float) else str(value)
        raise AnnotationError(
            f"schema = {written} is not supported; this heatweave reads schema = {SCHEMA_VERSION}",
            reader.value_location(("schema",)),
            f"write schema = {SCHEMA_VERSION}, or use the heatweave version that wrote the file",
        )


def _ambient(table: object, reader: TableReader) -> Ambient:
    if table is None:
        return Ambient()
    if not isinstance(table, dict):
        raise AnnotationError(
            "ambient must be a table",
            reader.key_location(("ambient",)),
            "write an [ambient] header",
        )
    got = reader.read(table, AMBIENT_FIELDS, ("ambient",))
    if "temperature" in got.values and "profile" in got.values:
        raise AnnotationError(
            "[ambient] gives both temperature and profile",
            reader.key_location(("ambient", "profile")),
            "keep one: temperature = 25.0 (fixed) or profile = [[0, 25], [600, 40]]",
        )
    profile = got.values.get("profile")
    if isinstance(profile, tuple):
        times = [t for t, _ in profile]
        if times[0] < 0 or any(b <= a for a, b in itertools.pairwise(times)):
            raise AnnotationError(
                "profile times must start at 0 s or later and increase strictly",
                reader.value_location(("ambient", "profile")),
                "write [time s, degC] pairs in time order, e.g. [[0, 25], [600, 40]]",
            )
        worst = [v for _, v in profile if outside_ambient_range(v)]
        if worst:
            raise AnnotationError(
                f"the ambient profile reaches {outside_ambient_range(worst[0])}",
                reader.value_location(("ambient", "profile")),
                "write the profile's temperatures in degC",
            )
        return Ambient(temperature=profile[0][1], profile=profile)
    temperature = got.number("temperature")
    if temperature is not None and outside_ambient_range(temperature):
        raise AnnotationError(
            f"ambient temperature {outside_ambient_range(temperature)}",
            reader.value_location(("ambient", "temperature")),
            "write the ambient in degC, e.g. temperature = 25.0",
        )
    return Ambient(temperature=25.0 if temperature is None else temperature)


def _check_name(name: str, path: KeyPath, reader: TableReader) -> None:
    bad = unprintable(name)
    if bad is not None:
        raise AnnotationError(
            f"the name {name!r} holds the character {bad}, which no deck name may hold",
            reader.key_location(path),
            "write names with printable characters only, on one line",
        )


def _node(name: str, table: dict[str, object], reader: TableReader) -> NodeSpec:
    path: KeyPath = ("node", name)
    _check_name(name, path, reader)
    if name == AMBIENT:
        raise AnnotationError(
            '"ambient" is the name of the surroundings, not a node you can define',
            reader.table_location(path),
            "set the ambient temperature in [ambient]; choose another node name",
        )
    got = reader.read(table, NODE_FIELDS, path)
    return NodeSpec(
        name=name,
        rth=got.number("rth") or 0.0,
        cth=got.number("cth") or 0.0,
        to=str(got.values.get("to", AMBIENT)),
        location=reader.table_location(path),
        tolerances=tuple(got.tolerances.items()),
    )


def _foreign_hints(model: str | None) -> dict[str, str]:
    """Hints for keys that belong to other temperature models."""
    owners: dict[str, list[str]] = {}
    for name, cls in sorted(REGISTRY.items()):
        for spec in cls.params:
            owners.setdefault(spec.key, []).append(name)
    hints = {}
    for key, names in owners.items():
        which = ", ".join(names)
        if model is None:
            hints[key] = f'{key} is a key of model {which}: add model = "{names[0]}"'
        else:
            hints[key] = f"{key} is a key of model {which}, not of {model}"
    return hints


def _network(name: str, got: TableResult, reader: TableReader, path: KeyPath) -> NetworkSpec:
    given = [key for key in ("rth", "foster", "cauer") if key in got.values]
    if not given:
        raise AnnotationError(
            f'part "{name}" has no thermal path',
            reader.table_location(path),
            "add rth (K/W) and cth (J/K), or foster = [[rth, tau], ...], "
            "or cauer = [[rth, cth], ...]",
        )
    if len(given) > 1:
        raise AnnotationError(
            f'part "{name}" gives both {given[0]} and {given[1]}',
            reader.key_location((*path, given[1])),
            "keep one of rth (with cth), foster, cauer",
        )
    if "cth" in got.values and given[0] != "rth":
        raise AnnotationError(
            f"cth goes with rth, not with {given[0]}",
            reader.key_location((*path, "cth")),
            f"the {given[0]} stages carry their own time constants; remove cth",
        )
    if given[0] == "rth":
        return NetworkSpec("single", ((got.number("rth") or 0.0, got.number("cth") or 0.0),))
    stages = got.values[given[0]]
    assert isinstance(stages, tuple)
    return NetworkSpec("foster" if given[0] == "foster" else "cauer", stages)


def _part(name: str, table: dict[str, object], reader: TableReader) -> PartSpec:
    path: KeyPath = ("part", name)
    _check_name(name, path, reader)
    model = table.get("model")
    common = (
        reader.read({k: v for k, v in table.items() if k == "model"}, PART_FIELDS[:1], path)
        if model is not None
        else TableResult()
    )
    model_name = common.values.get("model")
    cls = REGISTRY[str(model_name)] if model_name is not None else None
    extra_fields = model_fields(cls.params) if cls is not None else ()
    own = {f.key for f in PART_FIELDS} | {f.key for f in extra_fields}
    foreign = {k: v for k, v in _foreign_hints(cls.name if cls else None).items() if k not in own}
    got = reader.read(table, PART_FIELDS + extra_fields, path, foreign=foreign)
    params: dict[str, ParamValue] = {}
    if cls is not None:
        params = _model_params(cls, got, reader, path)
    tmax, knee = got.number("tmax"), got.number("derating_knee")
    if knee is not None and "power_rating" not in got.values:
        reader.warn(
            (*path, "derating_knee"),
            "derating_knee has no effect without power_rating: only a rated power is derated",
            "add power_rating (W at or below the knee), or remove derating_knee",
        )
    knee = DEFAULT_DERATING_KNEE if knee is None else knee
    if tmax is not None and "power_rating" in got.values and tmax <= knee:
        raise AnnotationError(
            f"tmax ({tmax:g} degC) must lie above the derating knee ({knee:g} degC)",
            reader.value_location((*path, "tmax")),
            "set derating_knee below tmax (IEC 60115-1 uses 70 degC)",
        )
    spec = PartSpec(
        pattern=name,
        model=cls.name if cls else None,
        params=tuple(params.items()),
        tref=got.number("tref"),
        network=_network(name, got, reader, path),
        to=str(got.values.get("to", AMBIENT)),
        power_rating=got.number("power_rating"),
        tmax=tmax,
        derating_knee=knee,
        location=reader.table_location(path),
        tolerances=tuple(got.tolerances.items()),
    )
    if cls is not None:
        spec.temp_model(1.0)  # checks the parameters that do not depend on the deck's value
    return spec


def _model_params(
    cls: type[TempModel], got: TableResult, reader: TableReader, path: KeyPath
) -> dict[str, ParamValue]:
    groups: dict[str, list[str]] = {}
    for spec in cls.params:
        groups.setdefault(spec.group_name, []).append(spec.key)
    params: dict[str, ParamValue] = {}
    for keys in groups.values():
        written = sorted(
            (k for k in keys if k in got.values),
            key=lambda k: reader.key_location((*path, k)).line,
        )
        required = any(s.required for s in cls.params if s.key in keys)
        if required and not written:
            example = next(f for f in model_fields(cls.params) if f.key == keys[-1]).example
            raise AnnotationError(
                f'model "{cls.name}" needs ' + " or ".join(reversed(keys)),
                reader.table_location(path),
                f"add {keys[-1]} = {example}",
            )
        if len(written) > 1:
            raise AnnotationError(
                f"{written[0]} and {written[1]} give the same quantity",
                reader.key_location((*path, written[1])),
                f"keep one of {written[0]}, {written[1]}",
            )
        for key in written:
            value = got.values[key]
            assert isinstance(value, float | tuple)
            params[key] = value
    for warning in cls.warnings(params):
        reader.warn((*path, warning.key), warning.message, warning.hint)
    return params


def _path(index: int, table: dict[str, object], reader: TableReader) -> PathSpec:
    path: KeyPath = ("path", index)
    got = reader.read(table, PATH_FIELDS, path)
    between = got.values["between"]
    assert isinstance(between, tuple)
    if between[0] == between[1]:
        raise AnnotationError(
            f'path couples "{between[0]}" with itself',
            reader.value_location((*path, "between")),
            "name two different nodes",
        )
    return PathSpec(
        between=(between[0], between[1]),
        rth=got.number("rth") or 0.0,
        location=reader.table_location(path),
        tolerances=tuple(got.tolerances.items()),
    )


def _limit(signal: str, table: dict[str, object], reader: TableReader) -> LimitSpec:
    path: KeyPath = ("limit", signal)
    _check_name(signal, path, reader)
    got = reader.read(table, LIMIT_FIELDS, path)
    if not got.values:
        raise AnnotationError(
            f"{header(path)} sets no limit",
            reader.table_location(path),
            "add max_drift_ppm, min or max",
        )
    low, high = got.number("min"), got.number("max")
    if low is not None and high is not None and low >= high:
        raise AnnotationError(
            f"min ({low:g}) must be below max ({high:g})",
            reader.value_location((*path, "max")),
            "swap them or widen the window",
        )
    return LimitSpec(signal, got.number("max_drift_ppm"), low, high, reader.table_location(path))


def _review(table: object, reader: TableReader) -> ReviewSpec | None:
    """The ``[review]`` table of ``heatweave compare``'s gate, if there is one."""
    if table is None:
        return None
    path: KeyPath = ("review",)
    if not isinstance(table, dict):
        raise AnnotationError(
            "review must be a table", reader.key_location(path), "write a [review] header"
        )
    got = reader.read(table, REVIEW_FIELDS, path)
    return ReviewSpec(
        got.number("max_rise_growth"),
        got.number("max_drift_growth_ppm"),
        got.number("max_margin_loss_percent"),
        reader.table_location(path),
    )


def _check_graph(
    nodes: tuple[NodeSpec, ...],
    parts: tuple[PartSpec, ...],
    paths: tuple[PathSpec, ...],
    reader: TableReader,
) -> None:
    """Every ``to`` and ``between`` names a node; node ``to`` chains end at ambient."""
    names = {node.name for node in nodes}
    known = sorted(names | {AMBIENT})

    def check(name: str, at: KeyPath) -> None:
        if name not in names and name != AMBIENT:
            near = closest(name, known)
            raise AnnotationError(
                f'unknown thermal node "{name}"',
                reader.value_location(at),
                (f'did you mean "{near}"? ' if near else "")
                + f"define it as [node.{name}] or use one of: {', '.join(known)}",
            )

    for node in nodes:
        check(node.to, ("node", node.name, "to"))
    for part in parts:
        check(part.to, ("part", part.pattern, "to"))
    for index, coupling in enumerate(paths):
        for name in coupling.between:
            check(name, ("path", index, "between"))
    successor = {node.name: node.to for node in nodes}
    for node in nodes:
        seen = [node.name]
        current = node.to
        while current != AMBIENT:
            if current in seen:
                loop = " -> ".join([*seen[seen.index(current) :], current])
                raise AnnotationError(
                    f"thermal nodes form a loop: {loop}",
                    reader.value_location(("node", node.name, "to")),
                    "every chain of `to` must end at ambient; couple loops with [[path]] instead",
                )
            seen.append(current)
            current = successor[current]
