"""Spec keys as ``file:line key.path``, for messages of checks that run after loading."""

from dataclasses import dataclass
from functools import cached_property

import yaml

from famwise.spec import LoadedStudy
from famwise.spec.load import _format_loc, _line_of


@dataclass(frozen=True)
class Where:
    """Locates spec keys of one loaded study."""

    loaded: LoadedStudy

    @cached_property
    def _root(self):
        return yaml.compose(self.loaded.text)

    def line(self, *loc) -> int | None:
        """1-based line of the key at ``loc`` (or of its nearest given parent)."""
        return _line_of(self._root, loc)

    def __call__(self, *loc) -> str:
        """``study.yaml:14 subjects.min_epochs`` (the line of the nearest key the spec gives)."""
        line = self.line(*loc)
        name = self.loaded.path.name
        return f"{name}:{line} {_format_loc(loc)}" if line else f"{name} {_format_loc(loc)}"
