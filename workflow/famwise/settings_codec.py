"""Settings types <-> deterministic JSON text (the Snakemake params of every stage).

A stage's settings are a frozen dataclass. :func:`to_json` writes it as JSON
with sorted keys and no spaces, so equal settings give equal text and
Snakemake reruns a stage exactly when its settings change; :func:`from_json`
turns the text back into the same type (tuples for lists, nested dataclasses
for objects, a union of dataclasses chosen by their ``kind`` field).
"""

import dataclasses
import json
import types
import typing
from functools import cache


def to_plain(settings) -> dict:
    """A settings object as plain JSON values (dicts, lists, numbers, strings)."""
    return json.loads(to_json(settings))


def to_json(settings) -> str:
    """Deterministic JSON text of a settings dataclass."""
    return json.dumps(dataclasses.asdict(settings), sort_keys=True, separators=(",", ":"))


def from_json(kind: type, text: str):
    """The settings of type ``kind`` that :func:`to_json` wrote as ``text``."""
    return _build(kind, json.loads(text))


def from_plain(kind: type, value: dict):
    """Settings of type ``kind`` from plain JSON values (e.g. a spec section's ``model_dump(mode="json")``)."""
    return _build(kind, value)


@cache
def _hints(kind: type) -> dict:
    return typing.get_type_hints(kind)


def _build(annotation, value):
    if value is None:
        return None
    origin, args = typing.get_origin(annotation), typing.get_args(annotation)
    if dataclasses.is_dataclass(annotation):
        hints = _hints(annotation)
        return annotation(
            **{f.name: _build(hints[f.name], value[f.name]) for f in dataclasses.fields(annotation) if f.name in value}
        )
    if origin in (typing.Union, types.UnionType):
        return _build_union([a for a in args if a is not type(None)], value)
    if origin is tuple:
        if len(args) == 2 and args[1] is Ellipsis:
            return tuple(_build(args[0], item) for item in value)
        return tuple(_build(a, item) for a, item in zip(args, value))
    if origin is dict:
        return {key: _build(args[1], item) for key, item in value.items()}
    if origin is typing.Literal:
        return value
    if annotation is float and isinstance(value, int) and not isinstance(value, bool):
        return float(value)
    return value


def _build_union(options: list, value):
    classes = [a for a in options if dataclasses.is_dataclass(a)]
    if classes and isinstance(value, dict):
        for kind in classes:
            if _hints(kind)["kind"] == typing.Literal[value["kind"]]:
                return _build(kind, value)
        raise ValueError(f"no settings type of kind {value['kind']!r}")
    for option in options:
        if option is float and isinstance(value, (int, float)) and not isinstance(value, bool):
            return float(value)
        if typing.get_origin(option) is tuple and isinstance(value, list):
            return _build(option, value)
    return value
