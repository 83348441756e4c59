"""Building blocks of the spec models: the frozen base model, located errors, name and path checks."""

import difflib
import re
from pathlib import PurePosixPath

from pydantic import BaseModel, ConfigDict

IDENTIFIER = re.compile(r"^[A-Za-z0-9]+$")
NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]*$")


class LocatedError(ValueError):
    """A cross-field problem with the key path (relative to the model) it concerns."""

    def __init__(self, loc: tuple, message: str):
        super().__init__(message)
        self.loc = loc
        self.message = message


class SpecModel(BaseModel):
    """Base of every spec model: unknown keys rejected, frozen."""

    model_config = ConfigDict(extra="forbid", frozen=True)


def check_name(value: str, what: str) -> str:
    if not NAME.match(value):
        raise ValueError(
            f"{what} {value!r} must start with a letter or digit and contain only "
            "letters, digits, '-', '_' and '.' (it becomes a folder name)"
        )
    return value


def check_relative(value: str | None) -> str | None:
    """Relative paths start at the spec's folder and stay inside it; absolute paths are taken as given."""
    if value is None:
        return value
    path = PurePosixPath(value.replace("\\", "/"))
    if not path.is_absolute() and ".." in path.parts:
        raise ValueError(
            f"path {value!r} leaves the study folder; give a path relative to the "
            "spec file's folder without '..', or an absolute path"
        )
    return value


def check_window(value: tuple[float, float] | None, unit: str) -> tuple[float, float] | None:
    if value is not None and not value[0] < value[1]:
        raise ValueError(f"window must be [start, end] with start < end, got [{value[0]}, {value[1]}] {unit}")
    return value


def did_you_mean(value: str, choices) -> str:
    """' (did you mean 'x'?)' for a near miss, else ''."""
    close = difflib.get_close_matches(str(value), [str(c) for c in choices], n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""
