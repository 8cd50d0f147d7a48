"""Reading a workflow file: YAML refused where it is unsafe, and every mistake as ``FILE:LINE: ...``.

The error names the key, says what is wrong and gives the fix (the closest
valid key for a misspelling).

Example
-------
>>> import os, tempfile
>>> from cationcalc.studies.loading import load_workflow
>>> from cationcalc.studies.schema import WorkflowError
>>> path = os.path.join(tempfile.mkdtemp(), "typo.yaml")
>>> _ = open(path, "w").write("study: s\\nspecies: ['C']\\ntasks: [thermo]\\nmethd: {}\\n")
>>> try:
...     load_workflow(path)
... except WorkflowError as exc:
...     print(str(exc).split(": ", 1)[1])
unknown key 'methd' at the top level; did you mean 'method'?
"""

from __future__ import annotations

import dataclasses
import difflib
import hashlib
import inspect
import os
import typing
from pathlib import Path
from typing import Any

import yaml
from pydantic import BaseModel, ValidationError

from cationcalc.studies.schema import Workflow, WorkflowError, workflow_model

@dataclasses.dataclass
class LoadedWorkflow:
    """A validated workflow and where it came from."""

    path: Path
    text: str
    sha256: str
    workflow: Workflow
    node: Any  # the composed YAML node tree (for line numbers)

    def line_of(self, loc: tuple) -> int:
        return _line_of(self.node, loc)


def _mapping_entry(node, part) -> tuple[int, Any] | None:
    """(1-based line of the key, value node) of key ``part`` in a YAML mapping node, or None."""
    for key, value in node.value:
        if isinstance(key, yaml.ScalarNode) and key.value == str(part):
            return key.start_mark.line + 1, value
    return None


def _line_of(node, loc: tuple) -> int:
    """1-based line of the YAML node at a pydantic location (the deepest part that exists)."""
    line = node.start_mark.line + 1 if node is not None else 1
    for part in loc:
        if isinstance(node, yaml.MappingNode):
            if isinstance(part, int):
                continue  # a single mapping written where a list was expected
            found = _mapping_entry(node, part)
            if found is None:
                return line
            line, node = found
        elif isinstance(node, yaml.SequenceNode):
            if isinstance(part, int):
                if part >= len(node.value):
                    return line
                node = node.value[part]
                line = node.start_mark.line + 1
                continue
            for item in node.value:  # a task list written as names: [hia, heterolysis]
                if isinstance(item, yaml.ScalarNode) and item.value == str(part):
                    return item.start_mark.line + 1
                found = _mapping_entry(item, part) if isinstance(item, yaml.MappingNode) else None
                if found is not None:
                    line, node = found
                    break
            else:
                return line
        else:
            return line
    return line


def _model_in(annotation):
    if inspect.isclass(annotation) and issubclass(annotation, BaseModel):
        return annotation
    for arg in typing.get_args(annotation):
        found = _model_in(arg)
        if found is not None:
            return found
    return None


def _model_at(loc: tuple):
    model = workflow_model()
    for part in loc:
        if isinstance(part, int):
            continue
        field = model.model_fields.get(str(part))
        if field is None:
            return None
        model = _model_in(field.annotation)
        if model is None:
            return None
    return model


def _describe(loc: tuple) -> str:
    text = ""
    for part in loc:
        text += f"[{part}]" if isinstance(part, int) else (f".{part}" if text else str(part))
    return text or "the top level"


def _format_validation_error(path: Path, node, exc: ValidationError) -> str:
    # a misspelt key also makes the key it should have been "missing": report the misspelling
    rank = {"extra_forbidden": 0, "missing": 2}
    errors = sorted(exc.errors(include_url=False), key=lambda e: rank.get(e["type"], 1))
    first = errors[0]
    loc = tuple(p for p in first["loc"] if isinstance(p, (str, int)))
    line = _line_of(node, loc)
    kind = first["type"]
    message = str(first["msg"]).removeprefix("Value error, ")
    where = f"{path}:{line}"
    more = f" (and {len(errors) - 1} more problem{'s' if len(errors) > 2 else ''})" if len(errors) > 1 else ""
    if kind == "extra_forbidden":
        key = str(loc[-1])
        parent = loc[:-1]
        model = _model_at(parent)
        valid = list(model.model_fields) if model is not None else []
        close = difflib.get_close_matches(key, valid, n=1, cutoff=0.5)
        hint = f"did you mean {close[0]!r}?" if close else f"valid keys: {', '.join(valid)}"
        section = f"in {_describe(parent)}" if parent else "at the top level"
        return f"{where}: unknown key {key!r} {section}; {hint}{more}"
    if kind == "missing":
        section = f"in {_describe(loc[:-1])}" if loc[:-1] else "at the top level"
        return f"{where}: missing key {loc[-1]!r} {section}; add it{more}"
    got = first.get("input")
    got_text = "" if isinstance(got, (dict, list)) or got is None else f" (got {got!r})"
    return f"{where}: key {_describe(loc)!r}: {message}{got_text}{more}"


def _duplicate_key(node) -> tuple[str, int] | None:
    if isinstance(node, yaml.MappingNode):
        seen = set()
        for key, value in node.value:
            if isinstance(key, yaml.ScalarNode):
                if key.value in seen:
                    return key.value, key.start_mark.line + 1
                seen.add(key.value)
            found = _duplicate_key(value)
            if found:
                return found
    elif isinstance(node, yaml.SequenceNode):
        for item in node.value:
            found = _duplicate_key(item)
            if found:
                return found
    return None


def _refuse_aliases(path: Path, text: str) -> None:
    """Refuse YAML aliases (``*name``) before anything builds a tree from them.

    An alias repeats a whole subtree: nested ones expand exponentially ("billion laughs") and an
    alias inside its own anchor is an endless structure.  A study file never needs them; the
    event stream shows them without expanding anything.
    """
    for event in yaml.parse(text, Loader=yaml.SafeLoader):
        if isinstance(event, yaml.AliasEvent):
            line = event.start_mark.line + 1 if event.start_mark is not None else 1
            raise WorkflowError(f"{path}:{line}: YAML alias *{event.anchor} is not accepted in a study file; "
                                "write the value out where it is needed")


def load_workflow(path: str | os.PathLike) -> LoadedWorkflow:
    """Read and validate a workflow file; raises WorkflowError (FILE:LINE: ...)."""
    path = Path(path)
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise WorkflowError(f"cannot read workflow file {str(path)!r}: {exc.strerror}; give the path of a "
                            ".yaml study file") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise WorkflowError(f"{path}: not UTF-8 text (byte {exc.start}); save it as UTF-8") from None
    try:
        _refuse_aliases(path, text)
        node = yaml.compose(text)
        data = yaml.safe_load(text)
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        line = mark.line + 1 if mark is not None else 1
        problem = getattr(exc, "problem", None) or str(exc).splitlines()[0]
        raise WorkflowError(f"{path}:{line}: YAML syntax: {problem}; check the indentation and quoting") from None
    if not isinstance(data, dict):
        raise WorkflowError(f"{path}:1: a workflow is a YAML mapping (study:, species:, tasks: ...); "
                            "see workflows/ for examples")
    duplicate = _duplicate_key(node)
    if duplicate:
        raise WorkflowError(f"{path}:{duplicate[1]}: key {duplicate[0]!r} appears twice in one mapping; keep one")
    try:
        workflow = workflow_model().model_validate(data)
    except ValidationError as exc:
        raise WorkflowError(_format_validation_error(path, node, exc)) from None
    return LoadedWorkflow(path=path, text=text, sha256=hashlib.sha256(raw).hexdigest(), workflow=workflow,
                          node=node)


__all__ = ["LoadedWorkflow", "load_workflow"]
