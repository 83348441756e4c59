"""The three-file `.vhdr` format: a header (``.vhdr``), markers (``.vmrk``) and binary samples (``.eeg``).

Written against the format's published specification (the vendor's Core Data
Format document, version 1.0). The header and marker files are INI-like text:
``;`` starts a comment, ``[Section]`` lines open a section, ``Key=Value`` lines fill it; the
``Codepage`` key names their encoding (``UTF-8``, or ``ANSI`` when absent).
Read here: ``[Common Infos]`` (data file, orientation, channel count, sampling
interval in µs), ``[Binary Infos]`` (``INT_16``, ``INT_32`` or
``IEEE_FLOAT_32``, little-endian unless ``UseBigEndianOrder=YES``) and
``[Channel Infos]`` (``Ch<n>=<name>,<reference>,<resolution>,<unit>``; a
stored sample times the resolution is the value in the unit, µV when empty).
Commas inside names are stored as ``\\1``.
"""

from dataclasses import dataclass, replace
from pathlib import Path
from typing import NamedTuple

import numpy as np

from famwise.errors import UserError

_DTYPES = {"INT_16": "i2", "INT_32": "i4", "IEEE_FLOAT_32": "f4"}
_CODEPAGES = {"UTF-8": "utf-8-sig", "ANSI": "cp1252"}
_HEADER_MAGIC = "DataExchangeHeaderFile"
_MARKER_MAGIC = "DataExchangeMarkerFile"


class Channel(NamedTuple):
    """One channel of the header: its name, reference name, resolution (unit per stored step) and unit."""

    name: str
    reference: str
    resolution: float
    unit: str


@dataclass(frozen=True)
class Header:
    """What a ``.vhdr`` file says about its recording.

    Attributes
    ----------
    path : Path
        The header file.
    data_file, marker_file : Path, Path or None
        The binary samples and the markers, resolved beside the header.
    sample_rate_hz : float
        Sampling rate in Hz (10^6 / ``SamplingInterval`` in µs).
    orientation : {"MULTIPLEXED", "VECTORIZED"}
        Sample order: all channels of one time point together, or all time
        points of one channel together.
    binary_format : {"INT_16", "INT_32", "IEEE_FLOAT_32"}
    big_endian : bool
    channels : tuple of Channel
    n_samples : int
        Time points per channel, from the data file's size (checked against
        ``DataPoints`` when the header gives it).
    """

    path: Path
    data_file: Path
    marker_file: Path | None
    sample_rate_hz: float
    orientation: str
    binary_format: str
    big_endian: bool
    channels: tuple[Channel, ...]
    n_samples: int

    @property
    def dtype(self) -> np.dtype:
        """The stored sample type, with its byte order."""
        return np.dtype(("<" if not self.big_endian else ">") + _DTYPES[self.binary_format])


class Marker(NamedTuple):
    """One ``Mk<n>`` entry: type (e.g. ``Stimulus``), description, first sample (0-based), size in samples, channel (0 = all)."""

    type: str
    description: str
    position: int
    size: int
    channel: int


def read_header(path: Path) -> Header:
    """Parse a ``.vhdr`` file and check its data file against it.

    Raises
    ------
    UserError
        Naming the file: not a .vhdr-format header, a missing or unsupported
        key, a data file that is missing or whose size does not fit the
        header's channels and sample format.
    """
    path = Path(path)
    sections = _read_sections(path, _HEADER_MAGIC)
    common = sections.get("Common Infos", {})
    binary = sections.get("Binary Infos", {})
    data_format = common.get("DataFormat", "BINARY").upper()
    if data_format != "BINARY":
        raise UserError(
            f"{path}: DataFormat={data_format} is not read; only BINARY data are "
            "(convert the recording to EDF or to binary .vhdr)"
        )
    if common.get("DataType", "TIMEDOMAIN").upper() != "TIMEDOMAIN":
        raise UserError(f"{path}: DataType={common['DataType']} is not read; only TIMEDOMAIN data are")
    orientation = common.get("DataOrientation", "MULTIPLEXED").upper()
    if orientation not in ("MULTIPLEXED", "VECTORIZED"):
        raise UserError(f"{path}: DataOrientation must be MULTIPLEXED or VECTORIZED, got {orientation}")
    binary_format = binary.get("BinaryFormat", "").upper()
    if binary_format not in _DTYPES:
        raise UserError(f"{path}: BinaryFormat must be one of {', '.join(_DTYPES)}, got {binary_format or 'nothing'}")
    n_channels = _positive(common, "NumberOfChannels", path, int)
    interval_us = _positive(common, "SamplingInterval", path, float)
    channels = tuple(_channel(sections.get("Channel Infos", {}), number, path) for number in range(1, n_channels + 1))
    header = Header(
        path=path,
        data_file=_beside(path, common.get("DataFile"), "DataFile"),
        marker_file=_beside(path, common["MarkerFile"], "MarkerFile") if common.get("MarkerFile") else None,
        sample_rate_hz=1e6 / interval_us,
        orientation=orientation,
        binary_format=binary_format,
        big_endian=binary.get("UseBigEndianOrder", "NO").upper() == "YES",
        channels=channels,
        n_samples=0,
    )
    return replace(header, n_samples=_count_samples(header, common.get("DataPoints")))


def read_samples(header: Header, indices: list[int] | None = None) -> np.ndarray:
    """Samples of some channels in each channel's unit (stored value times resolution).

    Parameters
    ----------
    header : Header
    indices : list of int, optional
        0-based channel positions in the header; all channels if None.

    Returns
    -------
    ndarray, shape (len(indices), n_samples), float64
    """
    indices = list(range(len(header.channels))) if indices is None else list(indices)
    stored = np.fromfile(header.data_file, dtype=header.dtype)
    if header.orientation == "MULTIPLEXED":
        stored = stored.reshape(header.n_samples, len(header.channels)).T
    else:
        stored = stored.reshape(len(header.channels), header.n_samples)
    resolution = np.array([header.channels[i].resolution for i in indices])
    return stored[indices].astype(np.float64) * resolution[:, None]


def read_markers(path: Path) -> list[Marker]:
    """The ``Mk<n>`` entries of a ``.vmrk`` file, in marker-number order.

    Raises
    ------
    UserError
        Naming the file: missing, not a `.vmrk` marker file, or an entry
        without a whole-number position.
    """
    path = Path(path)
    entries = _read_sections(path, _MARKER_MAGIC).get("Marker Infos", {})
    numbered = sorted(
        (int(key[2:]), value) for key, value in entries.items() if key.startswith("Mk") and key[2:].isdigit()
    )
    markers = []
    for number, value in numbered:
        fields = [field.replace("\\1", ",") for field in value.split(",")] + ["", "", "", ""]
        try:
            markers.append(
                Marker(fields[0].strip(), fields[1], int(fields[2]) - 1, int(fields[3] or 1), int(fields[4] or 0))
            )
        except ValueError:
            raise UserError(
                f"{path}: marker Mk{number}={value} needs whole-number position, size and channel fields"
            ) from None
    return markers


def write(
    path: Path,
    data: np.ndarray,
    *,
    sample_rate_hz: float,
    channels: list[str],
    markers: list[tuple[int, str]],
    resolution: float | None = None,
) -> None:
    """Write a recording in the core format: ``path`` (``.vhdr``) with its ``.vmrk`` and ``.eeg`` beside it.

    Parameters
    ----------
    path : Path
        The header file to write, ending in ``.vhdr``.
    data : ndarray, shape (n_channels, n_samples)
        Values in µV; with ``resolution``, whole multiples of it.
    sample_rate_hz : float
        Sampling rate in Hz.
    channels : list of str
    markers : list of (sample, description)
        Stimulus markers at 0-based samples.
    resolution : float, optional
        µV per stored step. Given: samples stored as integers (``INT_16`` when
        they fit, else ``INT_32``), multiplexed. None: ``IEEE_FLOAT_32`` with
        resolution 1.

    Raises
    ------
    ValueError
        With ``resolution``: a sample that is not finite or beyond 32 bits.
    """
    path = Path(path)
    if resolution is None:
        stored, binary_format, resolution = np.asarray(data, dtype="<f4"), "IEEE_FLOAT_32", 1.0
    else:
        steps = np.round(np.asarray(data, dtype=float) / resolution)
        largest = np.abs(steps).max(initial=0)
        if not largest <= 2**31 - 1:
            raise ValueError(
                f"samples must be finite and within ±{(2**31 - 1) * resolution:g} µV at {resolution:g} µV per step"
            )
        binary_format = "INT_16" if largest <= 32767 else "INT_32"
        stored = steps.astype("<" + _DTYPES[binary_format])
    names = [name.replace(",", "\\1") for name in channels]
    descriptions = [text.replace(",", "\\1") for _, text in markers]
    header = [
        "Brain Vision Data Exchange Header File Version 1.0",
        "",
        "[Common Infos]",
        "Codepage=UTF-8",
        f"DataFile={path.stem}.eeg",
        f"MarkerFile={path.stem}.vmrk",
        "DataFormat=BINARY",
        "DataOrientation=MULTIPLEXED",
        f"NumberOfChannels={len(channels)}",
        f"SamplingInterval={1e6 / sample_rate_hz!r}",
        "",
        "[Binary Infos]",
        f"BinaryFormat={binary_format}",
        "",
        "[Channel Infos]",
        *(f"Ch{n}={name},,{resolution!r},µV" for n, name in enumerate(names, start=1)),
        "",
    ]
    marker_lines = [
        "Brain Vision Data Exchange Marker File Version 1.0",
        "",
        "[Common Infos]",
        "Codepage=UTF-8",
        f"DataFile={path.stem}.eeg",
        "",
        "[Marker Infos]",
        *(
            f"Mk{n}=Stimulus,{text},{sample + 1},1,0"
            for n, ((sample, _), text) in enumerate(zip(markers, descriptions), start=1)
        ),
        "",
    ]
    path.write_text("\n".join(header), encoding="utf-8")
    path.with_suffix(".vmrk").write_text("\n".join(marker_lines), encoding="utf-8")
    stored.T.tofile(path.with_suffix(".eeg"))


def _read_sections(path: Path, magic: str) -> dict[str, dict[str, str]]:
    """Key-value pairs by section of a header or marker file, decoded with its Codepage."""
    if not path.is_file():
        raise UserError(f"{path}: file not found")
    raw = path.read_bytes()
    lines = raw.decode("latin-1").splitlines()
    if not lines or magic not in lines[0].replace(" ", ""):
        kind = "header" if magic == _HEADER_MAGIC else "marker"
        raise UserError(
            f"{path}: not a .vhdr-format {kind} file (its first line should name the "
            f"'Data Exchange {kind.title()} File')"
        )
    codepage = next(
        (
            line.split("=", 1)[1].strip().upper()
            for line in lines
            if line.replace(" ", "").lower().startswith("codepage=")
        ),
        "ANSI",
    )
    if codepage not in _CODEPAGES:
        raise UserError(f"{path}: Codepage must be UTF-8 or ANSI, got {codepage}")
    try:
        text = raw.decode(_CODEPAGES[codepage])
    except UnicodeDecodeError as exc:
        raise UserError(
            f"{path}: the file says Codepage={codepage} but byte {exc.start} is not valid {codepage}"
        ) from None
    sections: dict[str, dict[str, str]] = {}
    current = None
    for line in text.splitlines()[1:]:
        line = line.strip()
        if not line or line.startswith(";"):
            continue
        if line.startswith("[") and line.endswith("]"):
            current = sections.setdefault(line[1:-1].strip(), {})
        elif current is not None and "=" in line:
            key, value = line.split("=", 1)
            current[key.strip()] = value.strip()
    return sections


def _positive(common: dict[str, str], key: str, path: Path, kind: type):
    """A positive number from ``[Common Infos]``."""
    try:
        value = kind(common[key])
    except (KeyError, ValueError):
        raise UserError(
            f"{path}: [Common Infos] needs {key} as a {kind.__name__}, got {common.get(key, 'nothing')!r}"
        ) from None
    if value <= 0:
        raise UserError(f"{path}: {key} must be positive, got {value}")
    return value


def _channel(infos: dict[str, str], number: int, path: Path) -> Channel:
    """``Ch<number>`` of ``[Channel Infos]``: empty resolution means 1, empty unit µV."""
    value = infos.get(f"Ch{number}")
    if value is None:
        raise UserError(f"{path}: [Channel Infos] has no Ch{number} entry, but NumberOfChannels is at least {number}")
    fields = [field.replace("\\1", ",").strip() for field in value.split(",")] + ["", "", ""]
    try:
        resolution = float(fields[2]) if fields[2] else 1.0
    except ValueError:
        raise UserError(f"{path}: Ch{number} resolution {fields[2]!r} is not a number") from None
    return Channel(fields[0], fields[1], resolution, fields[3] or "µV")


def _beside(header: Path, name: str | None, key: str) -> Path:
    """A file named in the header, beside it; ``$b`` stands for the header's base name."""
    if not name:
        raise UserError(f"{header}: [Common Infos] needs {key}")
    return header.parent / name.replace("$b", header.stem)


def _count_samples(header: Header, data_points: str | None) -> int:
    """Time points per channel from the data file's size; UserError when the file does not fit the header."""
    if not header.data_file.is_file():
        raise UserError(f"{header.data_file}: data file named by {header.path.name} (DataFile) not found")
    size = header.data_file.stat().st_size
    frame = len(header.channels) * header.dtype.itemsize
    expected = f"{len(header.channels)} channels x {header.dtype.itemsize} bytes ({header.binary_format})"
    if data_points not in (None, ""):
        if not data_points.isdigit() or size != int(data_points) * frame:
            raise UserError(
                f"{header.data_file}: holds {size} bytes, but {header.path.name} describes "
                f"DataPoints={data_points} of {expected} = "
                f"{int(data_points) * frame if data_points.isdigit() else '?'} bytes"
            )
        return int(data_points)
    if size == 0 or size % frame:
        raise UserError(
            f"{header.data_file}: holds {size} bytes, not a whole number of time points "
            f"of {expected} as {header.path.name} describes"
        )
    return size // frame
