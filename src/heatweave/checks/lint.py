"""``lint`` with the annotation file: the plain deck's findings plus what ``check`` and
``emit`` would reject in the annotation (read, bound, limits resolved, deck emitted)."""

from __future__ import annotations

from heatweave.annotation import annotation_beside, bind, load
from heatweave.checks.limits import resolve_limits
from heatweave.emit.emitter import Inputs, emit_inputs
from heatweave.emit.forms import FORMS
from heatweave.emit.placement import refuse_reserved
from heatweave.emit.sections import folded_files
from heatweave.errors import Finding, HeatweaveError, UnreadableInputError
from heatweave.spice.hierarchy import DeckIndex
from heatweave.spice.lint import lint_project, order
from heatweave.spice.project import Project, load_project


def annotation_findings(
    project: Project, index: DeckIndex, annotation: str, known: list[Finding]
) -> list[Finding]:
    """Whatever ``check`` and ``emit`` would reject is an error here too (once: a card the
    grammar already rejected is not reported again)."""
    found: list[Finding] = []
    try:
        loaded = load(annotation, deck_name=project.deck.path)
        found.extend(loaded.warnings)
        bound = bind(loaded, index)
        resolve_limits(loaded, index)
        inputs = Inputs(str(project.deck.path), annotation, project, index, loaded, bound)
        emitted = emit_inputs(inputs)
        found.extend(emitted.findings)
        if emitted.circuit is not None:  # names the other forms add (emit writes switch)
            folded = folded_files(project)
            for form in FORMS:
                refuse_reserved(index, emitted.circuit, folded, form)
    except UnreadableInputError:
        raise  # no finding in the file: it cannot be used at all (exit 2, as elsewhere)
    except HeatweaveError as err:
        error = Finding("error", err.message, err.location, err.hint)
        seen = {(f.location, f.message) for f in known}
        if (error.location, error.message) not in seen:
            found.append(error)
    return found


def lint_file(path: str, annotation: str | None = None) -> list[Finding]:
    """Lint a deck on disk and its annotation file (the one beside it unless named); an
    unreadable include is a finding at its include card.  A deck or annotation file that
    cannot be read at all raises :class:`UnreadableInputError` (exit 2, as elsewhere)."""
    try:
        project = load_project(path)
    except UnreadableInputError:
        raise
    except HeatweaveError as err:
        return [Finding("error", err.message, err.location, err.hint)]
    if annotation is None:
        beside = annotation_beside(path)
        annotation = str(beside) if beside is not None else None
    index = DeckIndex(project)
    findings = lint_project(project, index)
    if annotation is not None:
        findings.extend(annotation_findings(project, index, annotation, findings))
    return sorted(findings, key=order)
