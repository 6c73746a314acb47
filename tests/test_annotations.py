"""The annotation file: good files load to the expected objects, bad ones fail precisely."""

from __future__ import annotations

import json
import math
import re
import tomllib
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from jsonschema import Draft202012Validator

from heatweave.annotation import (
    Ambient,
    Annotation,
    DeckCatalog,
    Distribution,
    NetworkSpec,
    bind,
    default_path,
    load,
    loads,
    sample,
    schema,
)
from heatweave.cli.schema_cmd import schema as schema_command
from heatweave.errors import AnnotationError, UnreadableInputError
from heatweave.spice.globmatch import matching_paths
from heatweave.tempmodels import REGISTRY

FIXTURES = Path(__file__).parent / "fixtures" / "annotations"
FILE = "bad.thermal.toml"
HEAD = "schema = 1\n"
LINEAR = HEAD + '[part.R1]\nmodel = "linear"\ntc1_ppm = 50\n'
TOML_HINT = "check the quoting, brackets and `key = value` form on this line (TOML 1.0)"
TOL_HINT = "write {nominal = 25, sigma = 5} (normal) or {nominal = 25, min = 20, max = 30}"


@dataclass(frozen=True)
class Catalog:
    """A stand-in deck: element paths and their kinds by first letter."""

    elements: tuple[str, ...]
    deck_file: str = "deck.cir"

    def element_paths(self) -> Sequence[str]:
        return self.elements

    def element_kind(self, path: str) -> str:
        return path.rsplit(".", 1)[-1][0].upper()

    def matching(self, pattern: str) -> Sequence[tuple[int, str]]:
        return matching_paths(pattern, self.elements)

    @property
    def top(self) -> TopScope:
        return TopScope(instances=any("." in path for path in self.elements))


@dataclass(frozen=True)
class TopScope:
    """The stand-in's top-level scope: whether it holds subcircuit instances."""

    instances: bool


CONTRACT_DECK = Catalog(("V1", "RSENSE", "X2.R4", "RDIV1", "RDIV2", "X2.RDIV3", "Q1", "C1"))


def test_catalog_satisfies_protocol() -> None:
    catalog: DeckCatalog = CONTRACT_DECK
    assert catalog.element_kind("X2.R4") == "R"


# --------------------------------------------------------------------------- good files


def test_contract_file_loads() -> None:
    path = FIXTURES / "contract.thermal.toml"
    ann = load(path, deck_name="deck.cir")
    assert ann.schema == 1 and ann.start == "cold" and ann.warnings == ()
    assert ann.ambient == Ambient(temperature=25.0)
    assert ann.text == path.read_text() and len(ann.sha256) == 64
    board = ann.node("board")
    assert (board.rth, board.cth, board.to, board.location.line) == (30.0, 5.0, "ambient", 6)
    parts = {p.pattern: p for p in ann.parts}
    sense = parts["RSENSE"]
    assert sense.model == "linear" and sense.param_map == {"tc1_ppm": 50.0}
    assert sense.tref == 25.0 and sense.to == "board"
    assert sense.network == NetworkSpec("single", ((60.0, 0.05),))
    assert (sense.power_rating, sense.tmax, sense.derating_knee) == (1.0, 155.0, 70.0)
    assert (sense.location.line, sense.location.column) == (15, 7)
    ntc = parts["X2.R4"]
    assert ntc.network == NetworkSpec("foster", ((12.0, 0.01), (40.0, 0.4)))
    assert ntc.param_map == {"r25": 10e3, "beta": 3435.0} and ntc.tref is None
    assert parts["RDIV*"].is_glob and parts["RDIV*"].to == "ambient"
    assert parts["Q1"].model is None and parts["Q1"].temp_model(1.0) is None
    assert [(p.between, p.rth) for p in ann.paths] == [(("board", "sink"), 4.0)]


def test_contract_file_binds() -> None:
    ann = load(FIXTURES / "contract.thermal.toml")
    bound = bind(ann, CONTRACT_DECK)
    assert [(b.element, b.kind, b.spec.pattern) for b in bound] == [
        ("RSENSE", "R", "RSENSE"),
        ("X2.R4", "R", "X2.R4"),
        ("RDIV1", "R", "RDIV*"),
        ("RDIV2", "R", "RDIV*"),  # X2.RDIV3 is not matched: a glob covers the whole path
        ("Q1", "Q", "Q1"),
    ]


def test_every_model_file() -> None:
    ann = load(FIXTURES / "every_model.thermal.toml")
    assert ann.start == "steady"
    assert ann.ambient.profile == ((0.0, 20.0), (300.0, 45.5), (900.0, 45.5))
    assert ann.ambient.at(150.0) == pytest.approx(32.75)  # halfway along the ramp
    assert ann.ambient.at(2000.0) == 45.5
    parts = {p.pattern: p for p in ann.parts}
    assert {p.model for p in parts.values()} == set(REGISTRY)
    assert parts["RHEAT"].network.kind == "cauer"
    assert parts["RHEAT"].network.rth_total == 20.0
    assert parts["RPT2"].param_map == {"r0": 1000.0, "a": 3.85e-3}  # "1k" read as SPICE does
    shunt = parts["RSHUNT"]
    assert shunt.rated_power(100.0) == 2.0
    assert shunt.rated_power(135.0) == pytest.approx(1.0)  # IEC 60115-1: linear to zero
    assert shunt.rated_power(170.0) == 0.0
    assert ann.limits[0].signal == "V(out)"
    assert (ann.limits[0].max_drift_ppm, ann.limits[0].min, ann.limits[0].max) == (500, 2.4, 2.6)
    # Every model builds from its validated keys: RTAB's shape scaled to the deck's value.
    model = parts["RTAB"].temp_model(2000.0)
    assert model is not None and model.resistance(25.0) == pytest.approx(2000.0)


def test_tolerances_loaded_and_sampled() -> None:
    ann = load(FIXTURES / "tolerances.thermal.toml")
    part = ann.parts[0]
    assert part.param_map == {"tc1_ppm": 25.0}  # the nominal in ordinary runs
    assert dict(part.tolerances) == {"tc1_ppm": Distribution(25.0, sigma=5.0)}
    assert dict(ann.nodes[0].tolerances) == {"rth": Distribution(30.0, low=27.0, high=33.0)}
    draws = [sample(ann, np.random.default_rng(seed)) for seed in range(2000)]
    tc1 = np.array([dict(d.parts[0].params)["tc1_ppm"] for d in draws])
    rth = np.array([d.nodes[0].rth for d in draws])
    path = np.array([d.paths[0].rth for d in draws])
    # Sample statistics of 2000 draws: mean within 4 standard errors, sd within 10 %.
    assert abs(tc1.mean() - 25.0) < 4 * 5.0 / math.sqrt(2000)
    assert tc1.std() == pytest.approx(5.0, rel=0.1)
    assert rth.min() >= 27.0 and rth.max() <= 33.0
    assert rth.std() == pytest.approx(6.0 / math.sqrt(12), rel=0.1)  # uniform: width/sqrt(12)
    assert path.mean() == pytest.approx(100.0, abs=4 * 10.0 / math.sqrt(2000))
    assert draws[0].parts[0].tolerances == part.tolerances  # distributions kept for re-draws
    assert sample(ann, np.random.default_rng(7)) == sample(ann, np.random.default_rng(7))


def test_sample_draws_from_numpy_generator() -> None:
    ann = loads(
        HEAD + '[part.R1]\nmodel = "linear"\ntc1_ppm = 5\nrth = {nominal = 10, sigma = 2}\n'
    )
    drawn = sample(ann, np.random.default_rng(11)).parts[0].network.stages[0][0]
    assert drawn == np.random.default_rng(11).normal(10.0, 2.0)


def test_unit_slips_are_warnings() -> None:
    ann = load(FIXTURES / "units.thermal.toml")
    found = [(w.severity, w.location.line if w.location else 0, w.hint) for w in ann.warnings]
    assert found == [
        ("warning", 6, "write tc1_ppm = 3900"),
        ("warning", 11, "beta is in kelvin, e.g. beta = 3435"),
    ]


def test_default_path() -> None:
    assert default_path("boards/amp.cir") == Path("boards/amp.thermal.toml")


# --------------------------------------------------------------------------- bad files

BAD = [
    # (name, text, line, column, message, hint)
    (
        "syntax-string",
        HEAD + '[part.R1]\nmodel = "linear\nrth = 3\n',
        3,
        16,
        "TOML syntax: illegal character '\\n'",
        TOML_HINT,
    ),
    (
        "syntax-duplicate",
        HEAD + "[part.R1]\nrth = 1\nrth = 2\n",
        4,
        8,
        "TOML syntax: cannot overwrite a value",
        TOML_HINT,
    ),
    (
        "syntax-unclosed",
        HEAD + "[part.R1]\nfoster = [[1, 2],\n  [3, 4]\n",
        3,
        10,
        "TOML syntax: unclosed array",
        TOML_HINT,
    ),
    (
        "syntax-header",
        HEAD + "[part.R1\nrth = 1\n",
        2,
        9,
        "TOML syntax: expected ']' at the end of a table declaration",
        TOML_HINT,
    ),
    # A comment may hold U+2028 (and a quoted key U+0085): characters of their line in
    # TOML, line breaks to str.splitlines, which shifted every position after them.
    (
        "syntax-after-a-line-separator",
        HEAD + "# one\u2028two, \u0085three\n[part.R1\nrth = 1\n",
        3,
        9,
        "TOML syntax: expected ']' at the end of a table declaration",
        TOML_HINT,
    ),
    (
        "value-after-a-line-separator",
        HEAD + '# one\u2028two\n[part.R1]\nmodel = "linear"\ntc1_ppm = 50\nrth = -3\n',
        6,
        7,
        "rth must be a positive number in K/W, not -3",
        "for example rth = 30.0",
    ),
    (
        "rth-abc",
        LINEAR + 'rth = "abc"\n',
        5,
        7,
        'rth must be a positive number in K/W, not "abc"',
        "for example rth = 30.0",
    ),
    (
        "rth-negative",
        LINEAR + "rth = -3\n",
        5,
        7,
        "rth must be a positive number in K/W, not -3",
        "for example rth = 30.0",
    ),
    (
        "unknown-key",
        LINEAR + "rht = 3\n",
        5,
        1,
        'unknown key "rht" in [part.R1]',
        'did you mean "rth"?',
    ),
    (
        "key-of-other-model",
        LINEAR + "rth = 3\ntc2 = 1e-6\n",
        6,
        1,
        'unknown key "tc2" in [part.R1]',
        "tc2 is a key of model quadratic, not of linear",
    ),
    (
        "model-key-without-model",
        HEAD + "[part.R1]\ntc1_ppm = 50\nrth = 3\n",
        3,
        1,
        'unknown key "tc1_ppm" in [part.R1]',
        'tc1_ppm is a key of model linear, quadratic: add model = "linear"',
    ),
    (
        "review-unknown-key",
        HEAD + "[review]\nmax_rise_grow = 2\n",
        3,
        1,
        'unknown key "max_rise_grow" in [review]',
        'did you mean "max_rise_growth"?',
    ),
    (
        "review-negative",
        HEAD + "[review]\nmax_drift_growth_ppm = -5\n",
        3,
        24,
        "max_drift_growth_ppm must be zero or a positive number in ppm, not -5",
        "for example max_drift_growth_ppm = 50",
    ),
    (
        "review-not-a-table",
        HEAD + "review = 3\n",
        2,
        1,
        "review must be a table",
        "write a [review] header",
    ),
    (
        "schema-2",
        "schema = 2\n",
        1,
        10,
        "schema = 2 is not supported; this heatweave reads schema = 1",
        "write schema = 1, or use the heatweave version that wrote the file",
    ),
    (
        "schema-missing",
        "[ambient]\ntemperature = 25\n",
        1,
        1,
        "the file does not say which schema it follows",
        "add `schema = 1` as its first line",
    ),
    (
        "top-unknown",
        HEAD + "ambiant = 3\n",
        2,
        1,
        'unknown key "ambiant" in the top level',
        'did you mean "ambient"?',
    ),
    (
        "start-warm",
        HEAD + 'start = "warm"\n',
        2,
        9,
        'start = "warm" is unknown',
        "one of cold | steady",
    ),
    (
        "unknown-to",
        HEAD + '[node.board]\nrth = 30\n[part.R1]\nmodel = "linear"\ntc1_ppm = 5\n'
        'rth = 3\nto = "bord"\n',
        8,
        6,
        'unknown thermal node "bord"',
        'did you mean "board"? define it as [node.bord] or use one of: ambient, board',
    ),
    (
        "node-loop",
        HEAD + '[node.a]\nrth = 1\nto = "b"\n[node.b]\nrth = 1\nto = "a"\n',
        4,
        6,
        "thermal nodes form a loop: a -> b -> a",
        "every chain of `to` must end at ambient; couple loops with [[path]] instead",
    ),
    (
        "path-unknown",
        HEAD + '[node.board]\nrth = 30\n[[path]]\nbetween = ["board", "sink"]\nrth = 4\n',
        5,
        11,
        'unknown thermal node "sink"',
        "define it as [node.sink] or use one of: ambient, board",
    ),
    (
        "path-itself",
        HEAD + '[node.board]\nrth = 30\n[[path]]\nbetween = ["board", "board"]\nrth = 4\n',
        5,
        11,
        'path couples "board" with itself',
        "name two different nodes",
    ),
    (
        "node-ambient",
        HEAD + "[node.ambient]\nrth = 1\n",
        2,
        7,
        '"ambient" is the name of the surroundings, not a node you can define',
        "set the ambient temperature in [ambient]; choose another node name",
    ),
    (
        "node-needs-rth",
        HEAD + "[node.board]\ncth = 5\n",
        2,
        7,
        "[node.board] needs rth (K/W)",
        "add rth = 30.0",
    ),
    (
        "model-unknown",
        HEAD + '[part.R1]\nmodel = "lineer"\n',
        3,
        9,
        'model = "lineer" is unknown',
        'did you mean "linear"? one of exponential | linear | ntc-beta | ntc-sh | ptc | quadratic'
        " | rtd | table",
    ),
    (
        "model-needs-key",
        HEAD + '[part.R1]\nmodel = "linear"\nrth = 3\n',
        2,
        7,
        'model "linear" needs tc1_ppm or tc1',
        "add tc1_ppm = 50",
    ),
    (
        "two-aliases",
        LINEAR + "tc1 = 5e-5\nrth = 3\n",
        5,
        1,
        "tc1_ppm and tc1 give the same quantity",
        "keep one of tc1_ppm, tc1",
    ),
    (
        "no-thermal-path",
        LINEAR,
        2,
        7,
        'part "R1" has no thermal path',
        "add rth (K/W) and cth (J/K), or foster = [[rth, tau], ...], or cauer = [[rth, cth], ...]",
    ),
    (
        "rth-and-foster",
        LINEAR + "rth = 3\nfoster = [[1, 2]]\n",
        6,
        1,
        'part "R1" gives both rth and foster',
        "keep one of rth (with cth), foster, cauer",
    ),
    (
        "cth-with-cauer",
        LINEAR + "cauer = [[1, 2]]\ncth = 3\n",
        6,
        1,
        "cth goes with rth, not with cauer",
        "the cauer stages carry their own time constants; remove cth",
    ),
    (
        "foster-negative",
        LINEAR + "foster = [[12.0, 0.01], [-4, 0.4]]\n",
        5,
        10,
        "foster must be an array of positive [K/W, s] pairs, not [-4, 0.4]",
        "for example foster = [[12.0, 0.01]]",
    ),
    (
        "tolerance-key",
        HEAD + '[part.R1]\nmodel = "linear"\ntc1_ppm = {nominal = 25, sd = 5}\nrth = 3\n',
        4,
        11,
        'unknown key "sd" in the tolerance of tc1_ppm',
        TOL_HINT,
    ),
    (
        "tolerance-neither",
        HEAD + '[part.R1]\nmodel = "linear"\ntc1_ppm = {nominal = 25}\nrth = 3\n',
        4,
        11,
        "the tolerance of tc1_ppm needs either sigma or both min and max",
        TOL_HINT,
    ),
    (
        "tolerance-range",
        HEAD + '[part.R1]\nmodel = "linear"\n'
        "tc1_ppm = {nominal = 25, min = 30, max = 40}\nrth = 3\n",
        4,
        11,
        "the tolerance of tc1_ppm needs min <= nominal <= max, not 30 .. 25 .. 40",
        TOL_HINT,
    ),
    (
        "ambient-both",
        HEAD + "[ambient]\ntemperature = 25\nprofile = [[0, 25]]\n",
        4,
        1,
        "[ambient] gives both temperature and profile",
        "keep one: temperature = 25.0 (fixed) or profile = [[0, 25], [600, 40]]",
    ),
    (
        "ambient-profile-order",
        HEAD + "[ambient]\nprofile = [[0, 25], [600, 40], [300, 30]]\n",
        3,
        11,
        "profile times must start at 0 s or later and increase strictly",
        "write [time s, degC] pairs in time order, e.g. [[0, 25], [600, 40]]",
    ),
    (
        "tmax-below-knee",
        LINEAR + "rth = 3\npower_rating = 0.25\ntmax = 60\n",
        7,
        8,
        "tmax (60 degC) must lie above the derating knee (70 degC)",
        "set derating_knee below tmax (IEC 60115-1 uses 70 degC)",
    ),
    (
        "limit-window",
        HEAD + '[limit."V(out)"]\nmin = 5\nmax = 1\n',
        4,
        7,
        "min (5) must be below max (1)",
        "swap them or widen the window",
    ),
    (
        "limit-empty",
        HEAD + '[limit."V(out)"]\n',
        2,
        8,
        '[limit."V(out)"] sets no limit',
        "add max_drift_ppm, min or max",
    ),
    (
        "sh-negative-c",
        HEAD + '[part.RT1]\nmodel = "ntc-sh"\na = 1e-3\nb = 2.3e-4\nc = -1e-7\nrth = 100\n',
        2,
        7,
        'part "RT1": c must be zero or positive for a unique real R(T)',
        "check the keys of model ntc-sh",
    ),
    (
        "quoted-dotted-header",
        HEAD + '[part."X2.R4"]\nmodel = "rtd"\nrth = "hot"\n',
        4,
        7,
        'rth must be a positive number in K/W, not "hot"',
        "for example rth = 30.0",
    ),
    (
        "indented-header",
        HEAD + '  [ part . "X1.R2" ]\n  model = "rtd"\n',
        2,
        12,
        'part "X1.R2" has no thermal path',
        "add rth (K/W) and cth (J/K), or foster = [[rth, tau], ...], or cauer = [[rth, cth], ...]",
    ),
]


@pytest.mark.parametrize(
    ("text", "line", "column", "message", "hint"),
    [case[1:] for case in BAD],
    ids=[case[0] for case in BAD],
)
def test_bad_file(
    tmp_path: Path, text: str, line: int, column: int, message: str, hint: str
) -> None:
    path = tmp_path / FILE
    path.write_text(text)
    with pytest.raises(AnnotationError) as caught:
        load(path)
    err = caught.value
    assert err.location is not None
    assert (err.location.file, err.location.line, err.location.column) == (str(path), line, column)
    assert err.location.source_line == text.split("\n")[line - 1]  # lines as TOML counts
    assert (err.message, err.hint) == (message, hint)
    assert err.exit_code == 2


def test_missing_file(tmp_path: Path) -> None:
    with pytest.raises(UnreadableInputError) as caught:
        load(tmp_path / "amp.thermal.toml", deck_name="amp.cir")
    assert caught.value.message.startswith("cannot read the annotation file")
    assert caught.value.hint == "create it beside the deck (e.g. amp.thermal.toml)"


def test_not_utf8(tmp_path: Path) -> None:
    path = tmp_path / FILE
    path.write_bytes(b"schema = 1\n# caf\xe9\n")
    with pytest.raises(AnnotationError) as caught:
        load(path)
    assert caught.value.location is not None and caught.value.location.line == 2


# --------------------------------------------------------------------------- binding

BIND_BAD = [
    # (name, text, deck elements, line, message, hint)
    (
        "not-in-deck",
        HEAD + '[part.RSENS]\nmodel = "linear"\ntc1 = 1e-4\nrth = 5\n',
        ("RSENSE", "R2"),
        2,
        'part "RSENS" is not in deck.cir',
        'did you mean "RSENSE"?',
    ),
    (
        "not-in-deck-leaf",
        HEAD + '[part.R4]\nmodel = "linear"\ntc1 = 1e-4\nrth = 5\n',
        ("X2.R4", "Q1"),
        2,
        'part "R4" is not in deck.cir',
        'did you mean "X2.R4"?',
    ),
    (
        "glob-nothing",
        HEAD + '[part."RDIV*"]\nmodel = "linear"\ntc1 = 1e-4\nrth = 5\n',
        ("R1", "X1.RDIV1"),
        2,
        'pattern "RDIV*" matches no element of deck.cir',
        "check the spelling; a pattern covers the whole instance path, so reach elements inside "
        "subcircuit instance X1 with X1.*",
    ),
    (
        "glob-nothing-flat",
        HEAD + '[part."D*"]\nrth = 5\n',
        ("R1", "Q2", "r3", "V1"),
        2,
        'pattern "D*" matches no element of deck.cir',
        "check the spelling and the element letter the pattern starts with; the names in "
        "deck.cir start with Q, R, V",
    ),
    (
        "glob-nothing-no-elements",
        HEAD + '[part."R*"]\nmodel = "linear"\ntc1 = 1e-4\nrth = 5\n',
        (),
        2,
        'pattern "R*" matches no element of deck.cir',
        "check the deck: deck.cir has no element cards",
    ),
    (
        "two-globs",
        HEAD + '[part."R*"]\nmodel = "linear"\ntc1 = 1e-4\nrth = 5\n'
        '[part."*1"]\nmodel = "linear"\ntc1 = 2e-4\nrth = 5\n',
        ("R1", "R2"),
        6,
        'element "R1" matches both "R*" and "*1"',
        'make the patterns disjoint, or add [part."R1"], which takes precedence over patterns',
    ),
    (
        "resistor-without-model",
        HEAD + "[part.R1]\nrth = 5\n",
        ("R1",),
        2,
        'resistor "R1" has no temperature model',
        'add model = "linear" and tc1_ppm = ..., or another model: exponential, linear, '
        "ntc-beta, ntc-sh, ptc, quadratic, rtd, table",
    ),
    (
        "model-on-transistor",
        HEAD + '[part."Q*"]\nmodel = "linear"\ntc1 = 1e-4\nrth = 5\n',
        ("Q1",),
        2,
        'model "linear" is for resistors; "Q1" (matched by "Q*") is a Q element',
        "remove model and its keys: the element is then heat only, its V*I heats `to`",
    ),
    (
        "same-element-twice",
        HEAD + "[part.q1]\nrth = 5\n[part.Q1]\nrth = 6\n",
        ("Q1",),
        4,
        'parts "q1" and "Q1" name the same element (SPICE names ignore case)',
        "merge the two tables",
    ),
]


@pytest.mark.parametrize(
    ("text", "elements", "line", "message", "hint"),
    [case[1:] for case in BIND_BAD],
    ids=[case[0] for case in BIND_BAD],
)
def test_bind_errors(
    text: str, elements: tuple[str, ...], line: int, message: str, hint: str
) -> None:
    ann = loads(text, FILE)
    with pytest.raises(AnnotationError) as caught:
        bind(ann, Catalog(elements))
    err = caught.value
    assert err.location is not None and (err.location.file, err.location.line) == (FILE, line)
    assert (err.message, err.hint) == (message, hint)


def test_exact_name_beats_glob_and_case_is_ignored() -> None:
    ann = loads(
        HEAD + '[part."r*"]\nmodel = "linear"\ntc1 = 1e-4\nrth = 5\n'
        '[part.rload]\nmodel = "rtd"\nrth = 9\n'
        '[part."X1.*"]\nmodel = "linear"\ntc1 = 3e-4\nrth = 7\n'
    )
    bound = bind(ann, Catalog(("RLOAD", "R7", "X1.R2", "V1")))
    got = [(b.element, b.spec.pattern, b.spec.model) for b in bound]
    assert got == [("RLOAD", "rload", "rtd"), ("R7", "r*", "linear"), ("X1.R2", "X1.*", "linear")]


def test_a_name_twice_binds_its_first_card() -> None:
    # ngspice 39 on a second card of a name: "device already exists, existing one being
    # used" (seen here with ngspice -b; lint reports the duplicate as an error).
    ann = loads(HEAD + '[part."R*"]\nmodel = "linear"\ntc1 = 1e-4\nrth = 5\n')
    bound = bind(ann, Catalog(("R1", "R2", "V1", "r1", "R3", "R2")))
    assert [(b.element, b.position) for b in bound] == [("R1", 0), ("R2", 1), ("R3", 4)]


# --------------------------------------------------------------------------- JSON Schema


def _keys_described(node: object) -> set[str]:
    found: set[str] = set()
    if isinstance(node, dict):
        for key, value in node.items():
            if key == "properties" and isinstance(value, dict):
                found |= set(value)
            found |= _keys_described(value)
    elif isinstance(node, list):
        for item in node:
            found |= _keys_described(item)
    return found


def test_schema_describes_every_key() -> None:
    doc = schema()
    assert doc["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    described = _keys_described(doc)
    model_keys = {spec.key for cls in REGISTRY.values() for spec in cls.params}
    contract_keys = {
        "schema",
        "ambient",
        "temperature",
        "profile",
        "node",
        "rth",
        "cth",
        "to",
        "part",
        "model",
        "tref",
        "power_rating",
        "tmax",
        "foster",
        "cauer",
        "path",
        "between",
        "derating_knee",
        "start",
        "limit",
        "max_drift_ppm",
        "min",
        "max",
        "nominal",
        "sigma",
    }
    assert model_keys | contract_keys <= described
    models = [b["if"]["properties"]["model"]["const"] for b in doc["$defs"]["part"]["allOf"][:-1]]
    assert sorted(models) == sorted(REGISTRY)


def test_schema_id_and_defaults_agree_with_the_loader() -> None:
    """``$id`` is an absolute URI (RFC 3986: a scheme, here the urn: of RFC 8141); each
    ``default`` is what the loader takes when the key is absent."""
    doc = schema()
    assert re.fullmatch(r"urn:heatweave:annotation-schema:\d+", doc["$id"])
    assert doc["properties"]["start"]["default"] == "cold"
    part = doc["$defs"]["part"]["properties"]
    ann = loads(LINEAR + "rth = 60\npower_rating = 0.25\ntmax = 155\n", FILE)
    (bound,) = ann.parts
    assert ann.start == doc["properties"]["start"]["default"]
    assert bound.to == part["to"]["default"] == "ambient"
    assert bound.derating_knee == part["derating_knee"]["default"] == 70.0
    assert doc["$defs"]["node"]["properties"]["to"]["default"] == "ambient"
    # a model key with a default in its group's unit (Callendar-Van Dusen A of IEC 60751)
    rtd = next(b["then"] for b in doc["$defs"]["part"]["allOf"][:-1]
               if b["if"]["properties"]["model"]["const"] == "rtd")  # fmt: skip
    assert rtd["properties"]["a"]["default"] == pytest.approx(3.9083e-3, rel=1e-12)


def test_schema_command_prints_json(tmp_path: Path) -> None:
    runner = CliRunner()
    result = runner.invoke(schema_command, [])
    assert result.exit_code == 0 and json.loads(result.output) == schema()
    out = tmp_path / "schema.json"
    assert runner.invoke(schema_command, ["-o", str(out)]).exit_code == 0
    assert json.loads(out.read_text()) == schema()


_DECKS = Path(__file__).parent.parent / "decks"
_PART = HEAD + "[part.R1]\n"
# (text, whether the loader accepts it): the schema must agree with the loader on each.
# Rules that tie one value to another (profile order, min < max, a node defined elsewhere)
# are beyond JSON Schema and left out.
SCHEMA_AGREEMENT = [
    *(
        pytest.param(path.read_text(), True, id=path.name)
        for path in [*sorted(FIXTURES.glob("*.toml")), *sorted(_DECKS.glob("*/*.thermal.toml"))]
    ),
    pytest.param(_PART + 'rth = 60\ncolour = "red"\n', False, id="unknown key"),
    pytest.param(LINEAR.replace("50", '"fifty"') + "rth = 60\n", False, id="wrong type"),
    pytest.param(_PART + "rth = -60\n", False, id="negative rth"),
    pytest.param(_PART + 'rth = "-60"\n', False, id="negative rth as a string"),
    pytest.param(_PART + 'rth = "0k"\n', False, id="zero rth with a scale factor"),
    pytest.param(_PART + 'rth = 60\ncth = "-5m"\n', False, id="negative cth as a string"),
    pytest.param(_PART + 'rth = 60\ncth = "-0"\n', True, id="minus zero is zero"),
    pytest.param(_PART + 'rth = "1k5"\n', True, id="digits after the scale factor"),
    pytest.param(_PART + "rth = {nominal = -60, sigma = 1}\n", False, id="negative nominal"),
    pytest.param(_PART + 'rth = {nominal = "60", sigma = "1"}\n', True, id="string tolerance"),
    pytest.param(_PART + 'rth = {nominal = 60, sigma = "-1"}\n', False, id="negative sigma"),
    pytest.param(_PART + 'foster = [["12", "10m"]]\n', True, id="string stages"),
    pytest.param(_PART + 'foster = [["12", "-10m"]]\n', False, id="negative string tau"),
    pytest.param(HEAD + '[ambient]\nprofile = [[0, "25"], ["10m", 40]]\n', True, id="profile"),
    pytest.param(HEAD + "[node.ambient]\nrth = 3\n", False, id="node named ambient"),
    pytest.param(HEAD + "[review]\nmax_rise_growth = 2\n", True, id="review"),
    pytest.param(HEAD + '[review]\nmax_drift_growth_ppm = "50"\n', True, id="review string"),
    pytest.param(HEAD + "[review]\nmax_rise_growth = -2\n", False, id="review negative"),
    pytest.param(HEAD + "[review]\nrise = 2\n", False, id="review unknown key"),
    # the pointer editors read (a TOML key may be quoted; heatweave reads nothing from it)
    pytest.param('"$schema" = "thermal.schema.json"\n' + HEAD, True, id="$schema key"),
    pytest.param('"$schema" = 3\n' + HEAD, False, id="$schema not a string"),
    pytest.param("#:schema ./thermal.schema.json\n" + HEAD, True, id="schema comment"),
]


@pytest.mark.parametrize(("text", "accepted"), SCHEMA_AGREEMENT)
def test_schema_agrees_with_loader(text: str, accepted: bool) -> None:
    # The reference is the jsonschema package's draft 2020-12 validator (python-jsonschema,
    # which implements the JSON Schema specification, json-schema.org draft 2020-12).
    try:
        loads(text, FILE)
        loaded = True
    except AnnotationError:
        loaded = False
    assert loaded == accepted
    printed = json.loads(json.dumps(schema()))
    Draft202012Validator.check_schema(printed)  # the schema itself is valid draft 2020-12
    assert Draft202012Validator(printed).is_valid(tomllib.loads(text)) == accepted


def test_annotation_is_immutable() -> None:
    ann = load(FIXTURES / "contract.thermal.toml")
    assert isinstance(ann, Annotation)
    with pytest.raises(AttributeError):
        ann.start = "steady"  # type: ignore[misc]


@pytest.mark.parametrize(
    ("table", "warned"),
    [
        ("rth = 50\nderating_knee = 70\n", True),  # nothing to derate
        ("rth = 50\npower_rating = 0.25\ntmax = 155\nderating_knee = 70\n", False),
        ("rth = 50\npower_rating = 0.25\n", False),
    ],
)
def test_a_derating_knee_without_a_rating_is_warned(table: str, warned: bool) -> None:
    ann = loads(LINEAR + table, FILE)
    found = [w for w in ann.warnings if "derating_knee has no effect" in w.message]
    assert bool(found) is warned
    if warned:
        assert found[0].location is not None and found[0].location.line == 6


def test_review_thresholds_are_read() -> None:
    text = HEAD + "[review]\nmax_rise_growth = 2\nmax_margin_loss_percent = \"25\"\n"
    review = loads(text, FILE).review
    assert review is not None
    assert (review.max_rise_growth, review.max_drift_growth_ppm) == (2.0, None)
    assert review.max_margin_loss_percent == 25.0
    assert loads(HEAD, FILE).review is None
