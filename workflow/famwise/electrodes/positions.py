"""Electrode positions: the 10-20 / 10-10 tables and user files."""

import csv
import difflib
import json
import warnings
from collections.abc import Sequence
from dataclasses import dataclass
from functools import cache
from importlib import resources
from pathlib import Path

import numpy as np

from famwise.errors import FamwiseWarning, UserError

SYSTEMS = ("10-10", "10-20")
UNITS_TO_MM = {"m": 1000.0, "cm": 10.0, "mm": 1.0}
# 10-20 names replaced in the 10-10 system (Acharya et al. 2016)
OLD_NAMES = {"t3": "t7", "t4": "t8", "t5": "p7", "t6": "p8"}


@dataclass(frozen=True)
class Positions:
    """Electrode positions in a head frame.

    Attributes
    ----------
    names : tuple of str, length n
        Electrode (channel) names, unique ignoring case and old/new 10-10 names.
    xyz : ndarray of float, shape (n, 3)
        Coordinates in mm; read-only. The system tables use x right,
        y anterior, z up with the origin at the head centre.
    source : str
        Where the positions come from (a file path or an electrode system).
    """

    names: tuple[str, ...]
    xyz: np.ndarray
    source: str

    def __post_init__(self):
        names = tuple(str(n) for n in self.names)
        xyz = np.array(self.xyz, dtype=float, copy=True).reshape(-1, 3) if len(names) else np.zeros((0, 3))
        if xyz.shape != (len(names), 3):
            raise ValueError(f"xyz must have shape ({len(names)}, 3), got {np.shape(self.xyz)}")
        if not np.all(np.isfinite(xyz)):
            raise ValueError("xyz must be finite")
        if len({channel_key(n) for n in names}) != len(names):
            raise ValueError("names must be unique ignoring case and old/new 10-10 names")
        xyz.setflags(write=False)
        object.__setattr__(self, "names", names)
        object.__setattr__(self, "xyz", xyz)


def channel_key(name: str) -> str:
    """Matching key of a channel name: case-folded, old 10-20 names mapped to 10-10."""
    key = name.strip().lower()
    return OLD_NAMES.get(key, key)


@cache
def system_positions(system: str = "10-10") -> Positions:
    """Idealised spherical positions of an electrode system, from the system's definition.

    Parameters
    ----------
    system : {"10-10", "10-20"}
        The 10-10 system (73 positions, Nz to Iz) or the 10-20 system (its
        19 scalp positions plus Fpz and Oz), with the 10-10 names T7, T8, P7,
        P8 (T3, T4, T5, T6 are accepted when matching).

    Returns
    -------
    Positions
        Coordinates in mm on a sphere of radius 85 mm, computed from the 10 %/20 %
        rule by ``scripts/make_positions.py`` (see ``configs/positions/README.md``).

    References
    ----------
    Jasper HH (1958). Electroencephalogr Clin Neurophysiol 10:371-375.
    Acharya JN et al. (2016). J Clin Neurophysiol 33(4):308-311.
    """
    if system not in SYSTEMS:
        raise UserError(f"electrode system must be one of {', '.join(SYSTEMS)}, got {system!r}")
    path = resources.files("famwise") / "data" / "positions" / f"{system}.tsv"
    with resources.as_file(path) as real:
        names, xyz, _ = _read_table(Path(real))
    return Positions(names, xyz, f"the {system} system (idealised spherical positions)")


def read_positions(path, *, units: str | None = None) -> Positions:
    """Read electrode positions from a BIDS ``_electrodes.tsv`` or a plain TSV.

    Parameters
    ----------
    path : str or Path
        Tab-separated file with a header holding the columns ``name``, ``x``,
        ``y``, ``z`` (others are ignored). Rows whose coordinates are ``n/a``
        (BIDS: position unknown) are skipped. Lines starting with ``#`` are
        comments; a comment ``# units: m|cm|mm`` states the unit of a plain TSV.
    units : {"m", "cm", "mm"}, optional
        Unit of the coordinates, overriding the file. Otherwise the unit is
        ``EEGCoordinateUnits`` of the sibling ``_coordsystem.json`` for
        a BIDS file, the ``# units:`` comment, or mm.

    Returns
    -------
    Positions
        Coordinates converted to mm.
    """
    path = Path(path)
    names, xyz, comment_units = _read_table(path)
    if units is None:
        units = _sidecar_units(path) or comment_units
    if units is None:
        units = "mm"
        if path.name.endswith("_electrodes.tsv"):
            warnings.warn(
                f"{path}: no EEGCoordinateUnits in a sibling _coordsystem.json; assuming the coordinates are in mm",
                FamwiseWarning,
                stacklevel=2,
            )
    if units not in UNITS_TO_MM:
        raise UserError(f"{path}: coordinate units must be one of m, cm, mm, got {units!r}")
    xyz = xyz * UNITS_TO_MM[units]
    if len(names) >= 3:
        extent = float(np.ptp(xyz, axis=0).max())
        if not 20.0 <= extent <= 1000.0:
            warnings.warn(
                f"{path}: the electrodes span {extent:.3g} mm after reading the coordinates "
                f"as {units}; a head spans about 150-200 mm, so the units may be wrong",
                FamwiseWarning,
                stacklevel=2,
            )
    return Positions(names, xyz, str(path))


def match_channels(positions: Positions, channels: Sequence[str]) -> Positions:
    """Positions of exactly the analysed channels, in their order.

    Names match ignoring case, and the old 10-20 names T3, T4, T5, T6 match
    the 10-10 names T7, T8, P7, P8 (and back). The result carries the
    analysed channels' own spelling.

    Parameters
    ----------
    positions : Positions
        Available positions.
    channels : sequence of str, length C
        Analysed channel names.

    Returns
    -------
    Positions
        ``names == tuple(channels)``, ``xyz`` shape (C, 3) in mm.
    """
    channels = [str(c) for c in channels]
    if not channels:
        raise UserError("the list of analysed channels is empty")
    seen = {}
    for name in channels:
        key = channel_key(name)
        if key in seen:
            raise UserError(f"analysed channels name the same electrode twice: {seen[key]!r} and {name!r}")
        seen[key] = name
    index = {channel_key(n): i for i, n in enumerate(positions.names)}
    missing = [c for c in channels if channel_key(c) not in index]
    if missing:
        listed = ", ".join(_with_suggestion(c, positions.names) for c in missing)
        raise UserError(
            f"no position in {positions.source} for {len(missing)} analysed "
            f"channel{'s' if len(missing) > 1 else ''}: {listed}"
        )
    rows = [index[channel_key(c)] for c in channels]
    return Positions(tuple(channels), positions.xyz[rows], positions.source)


def _with_suggestion(name, known):
    close = difflib.get_close_matches(name.lower(), [k.lower() for k in known], n=1, cutoff=0.6)
    if not close:
        return repr(name)
    spelled = next(k for k in known if k.lower() == close[0])
    return f"{name!r} (did you mean {spelled!r}?)"


def read_tsv(path: Path) -> tuple[list[str], list[tuple[int, list[str]]], list[str]]:
    """Header, data rows with their 1-based line numbers, and comment lines of a TSV."""
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise UserError(f"file not found: {path}") from None
    except (OSError, UnicodeDecodeError) as error:
        raise UserError(f"cannot read {path}: {error}") from None
    header, rows, comments = None, [], []
    for number, fields in enumerate(csv.reader(text.splitlines(), delimiter="\t"), start=1):
        if not fields or not "".join(fields).strip():
            continue
        if fields[0].startswith("#"):
            comments.append("\t".join(fields).lstrip("#").strip())
        elif header is None:
            header = [f.strip().lower() for f in fields]
        else:
            if len(fields) != len(header):
                raise UserError(
                    f"{path}, line {number}: expected {len(header)} tab-separated "
                    f"fields as in the header, found {len(fields)}"
                )
            rows.append((number, [f.strip() for f in fields]))
    if header is None:
        raise UserError(f"{path}: the file has no header line")
    return header, rows, comments


def _read_table(path: Path):
    """Names, coordinates (file units) and the ``# units:`` comment of a position TSV."""
    header, rows, comments = read_tsv(path)
    needed = ("name", "x", "y", "z")
    if any(col not in header for col in needed):
        raise UserError(
            f"{path}: expected a header with the columns name, x, y, z (tab-separated), found: {', '.join(header)}"
        )
    cols = [header.index(c) for c in needed]
    names, xyz, first_row = [], [], {}
    for number, fields in rows:
        name, *coords = (fields[c] for c in cols)
        if not name:
            raise UserError(f"{path}, line {number}: the electrode name is empty")
        if all(c.lower() == "n/a" for c in coords):
            continue
        values = []
        for axis, text in zip("xyz", coords):
            try:
                value = float(text)
            except ValueError:
                value = np.nan
            if not np.isfinite(value):
                raise UserError(
                    f"{path}, line {number}: coordinate {axis} of {name!r} must be a finite number, found {text!r}"
                )
            values.append(value)
        key = channel_key(name)
        if key in first_row:
            other, other_line = first_row[key]
            same = "" if other.lower() == name.lower() else " (T3-T6 are the old names of T7, T8, P7, P8)"
            raise UserError(
                f"{path}, line {number}: duplicate electrode {name!r}, already given "
                f"as {other!r} on line {other_line}{same}"
            )
        first_row[key] = (name, number)
        names.append(name)
        xyz.append(values)
    units = None
    for line in comments:
        label, _, value = line.partition(":")
        if label.strip().lower() == "units":
            units = value.split(";")[0].strip()
    return tuple(names), np.array(xyz, dtype=float).reshape(-1, 3), units


def _sidecar_units(path: Path):
    """``EEGCoordinateUnits`` of the BIDS ``_coordsystem.json`` beside an electrodes file."""
    if not path.name.endswith("_electrodes.tsv"):
        return None
    sidecar = path.with_name(path.name.removesuffix("_electrodes.tsv") + "_coordsystem.json")
    if not sidecar.is_file():
        return None
    try:
        meta = json.loads(sidecar.read_text(encoding="utf-8"))
    except (OSError, ValueError) as error:
        raise UserError(f"cannot read {sidecar}: {error}") from None
    units = meta.get("EEGCoordinateUnits") if isinstance(meta, dict) else None
    if units in (None, "n/a"):
        return None
    if units not in UNITS_TO_MM:
        raise UserError(f"{sidecar}: EEGCoordinateUnits must be one of m, cm, mm, got {units!r}")
    return units
