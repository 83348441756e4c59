"""Loading a study spec from YAML, with errors that name file, line and key."""

import os
import typing
from dataclasses import dataclass
from pathlib import Path, PurePosixPath

import yaml
from pydantic import BaseModel, ValidationError

from famwise.errors import UserError
from famwise.spec.models import LocatedError, Study, did_you_mean
from famwise.spec.old_keys import refuse_old_names


@dataclass(frozen=True)
class LoadedStudy:
    """A validated spec and where it came from.

    Attributes
    ----------
    study : Study
        The validated, frozen spec.
    path : Path
        Absolute path of the spec file.
    text : str
        The spec file's text (for provenance).
    """

    study: Study
    path: Path
    text: str

    @property
    def folder(self) -> Path:
        """The spec's folder: every relative path in the spec starts here."""
        return self.path.parent

    @property
    def output(self) -> Path:
        """Absolute output folder."""
        return (self.folder / self.study.output).resolve()

    def resolve(self, relative: str) -> Path:
        """Absolute path of a spec path (relative to the spec's folder, or absolute)."""
        return (self.folder / relative).resolve()

    def run_path(self, path: str | Path) -> str:
        """A path as the run's jobs and Snakemake see it (their working folder is the output folder).

        Relative to the output folder when the path and the output folder both
        lie in the spec's folder, so that a study folder moved or copied whole
        (spec, data and results) reruns nothing; absolute otherwise.
        """
        path = Path(path)
        if _inside(path, self.folder) and _inside(self.output, self.folder):
            return Path(os.path.relpath(path, self.output)).as_posix()
        return str(path)

    def outside_paths(self) -> list[str]:
        """The spec's absolute paths (inputs or output): they tie the spec to one machine."""
        s = self.study
        given = [s.output, s.subjects.path, s.channels.positions, s.channels.neighbors.edges_file]
        return [p for p in given if p is not None and PurePosixPath(p.replace("\\", "/")).is_absolute()]


def _inside(path: Path, folder: Path) -> bool:
    return path.resolve().is_relative_to(folder.resolve())


def load_study(path: str | Path) -> LoadedStudy:
    """Read and validate a study spec.

    Raises
    ------
    UserError
        One line ``file:line key.path: message`` for the first problem found.
    """
    path = Path(path).resolve()
    if not path.is_file():
        raise UserError(f"{path}: spec file not found")
    name = path.name
    text = _read_text(path)
    try:
        root = yaml.compose(text)
        data = yaml.safe_load(text)
    except yaml.YAMLError as error:
        mark = getattr(error, "problem_mark", None)
        where = f"{name}:{mark.line + 1}" if mark else name
        problem = getattr(error, "problem", None) or getattr(error, "reason", None) or str(error).splitlines()[0]
        raise UserError(f"{where}: not valid YAML: {problem}") from None
    if not isinstance(data, dict):
        raise UserError(f"{name}:1: a study spec is a YAML mapping of keys (version, name, subjects, ...)")
    _refuse_duplicate_keys(root, name, ())
    refuse_old_names(root, name)
    try:
        study = Study.model_validate(data)
    except ValidationError as error:
        raise UserError(_describe(error, root, name)) from None
    return LoadedStudy(study=study, path=path, text=text)


def _read_text(path: Path) -> str:
    """The spec's text; a binary file (an EDF, a gzip archive, ...) is a user error."""
    raw = path.read_bytes()
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as error:
        raise UserError(
            f"{path.name}: not a text file (byte {error.start} is not UTF-8); give the study's YAML spec"
        ) from None
    if "\0" in text:
        raise UserError(f"{path.name}: not a text file (it holds NUL bytes); give the study's YAML spec")
    return text


def _refuse_duplicate_keys(node, file_name: str, loc: tuple) -> None:
    """A key given twice in one mapping is an error naming both lines (YAML would keep the last silently)."""
    if isinstance(node, yaml.MappingNode):
        seen = {}
        for key, value in node.value:
            here = loc + (key.value,)
            if key.value in seen:
                raise UserError(
                    f"{file_name}:{key.start_mark.line + 1} {_format_loc(here)}: key given twice "
                    f"(lines {seen[key.value]} and {key.start_mark.line + 1}); keep one"
                )
            seen[key.value] = key.start_mark.line + 1
            _refuse_duplicate_keys(value, file_name, here)
    elif isinstance(node, yaml.SequenceNode):
        for index, item in enumerate(node.value):
            _refuse_duplicate_keys(item, file_name, loc + (index,))


def _describe(error: ValidationError, root, file_name: str) -> str:
    """The first validation problem as ``file:line key.path: message``.

    A missing key that sits beside an unknown key is most likely that key
    misspelt: the unknown key (the user's typo, at its own line) is reported.
    """
    errors = error.errors(include_url=False)
    first = errors[0]
    if first["type"] == "missing":
        parent = tuple(first["loc"])[:-1]
        typos = [e for e in errors if e["type"] == "extra_forbidden" and tuple(e["loc"])[:-1] == parent]
        close = [e for e in typos if did_you_mean(e["loc"][-1], [first["loc"][-1]])]
        first = (close or typos or [first])[0]
    loc = tuple(first["loc"])
    message = first["msg"]
    cause = (first.get("ctx") or {}).get("error")
    if isinstance(cause, LocatedError):
        loc = _without_union_tags(loc) + tuple(cause.loc)
        message = cause.message
    else:
        loc = _without_union_tags(loc)
        message = _plain_message(first, loc)
    line = _line_of(root, loc)
    where = f"{file_name}:{line}" if line else file_name
    return f"{where} {_format_loc(loc)}: {message}"


def _without_union_tags(loc: tuple) -> tuple:
    """Drop the discriminator tags pydantic puts in union locations."""
    return tuple(
        part
        for part in loc
        if part not in ("bonferroni", "sidak", "holm", "hochberg", "fdr-bh", "fdr-by", "max-stat", "cluster", "tfce")
    )


def _plain_message(err: dict, loc: tuple) -> str:
    kind = err["type"]
    if kind == "extra_forbidden":
        known = _known_keys(loc[:-1])
        hint = did_you_mean(loc[-1], known) if known else ""
        listing = f" (known: {', '.join(sorted(known))})" if known and not hint else ""
        return f"unknown key '{loc[-1]}'{hint}{listing}"
    if kind == "missing":
        return "required key is missing"
    if kind == "literal_error":
        expected = err.get("ctx", {}).get("expected", "")
        choices = [c.strip().strip("'") for c in expected.replace(" or ", ",").split(",")]
        hint = did_you_mean(err.get("input"), choices)
        return f"got {err.get('input')!r}, expected one of {expected}{hint}"
    if kind == "union_tag_invalid":
        expected = err.get("ctx", {}).get("expected_tags", "")
        tag = err.get("ctx", {}).get("tag", "")
        choices = [c.strip().strip("'") for c in expected.split(",")]
        return f"unknown method '{tag}' (known: {expected}){did_you_mean(tag, choices)}"
    if kind == "union_tag_not_found":
        return "each correction needs a 'method'"
    message = err["msg"]
    if message.startswith("Value error, "):
        message = message[len("Value error, ") :]
    found = err.get("input")
    if kind not in ("value_error", "assertion_error") and not isinstance(found, (dict, list)):
        message = f"{message[0].lower()}{message[1:]}, got {found!r}"
    return message


def _known_keys(loc: tuple) -> list[str]:
    """Field names of the model found at ``loc`` (empty when unknown)."""
    model: typing.Any = Study
    for part in loc:
        if isinstance(part, int):
            continue
        fields = getattr(model, "model_fields", None)
        if fields is None or part not in fields:
            return []
        model = _model_of(fields[part].annotation)
        if model is None:
            return []
    fields = getattr(model, "model_fields", None)
    return list(fields) if fields else []


def _model_of(annotation):
    """The pydantic model inside an annotation (list[Model], Model | None), if one."""
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation
    for arg in typing.get_args(annotation):
        found = _model_of(arg)
        if found is not None:
            return found
    return None


def _format_loc(loc: tuple) -> str:
    text = ""
    for part in loc:
        if isinstance(part, int):
            text += f"[{part}]"
        else:
            text += ("." if text else "") + str(part)
    return text or "(top level)"


def _line_of(node, loc: tuple) -> int | None:
    """1-based line of the YAML node at ``loc`` (or of its nearest parent)."""
    line = node.start_mark.line + 1 if node is not None else None
    for part in loc:
        child = None
        if isinstance(node, yaml.MappingNode):
            for key, value in node.value:
                if key.value == str(part):
                    child = value
                    line = key.start_mark.line + 1
                    break
        elif isinstance(node, yaml.SequenceNode) and isinstance(part, int) and part < len(node.value):
            child = node.value[part]
            line = child.start_mark.line + 1
        if child is None:
            break
        node = child
        if not isinstance(node, (yaml.MappingNode, yaml.SequenceNode)):
            line = node.start_mark.line + 1
    return line
