"""The `.vhdr` reader: files from a general-purpose writer, hand-built files of each variant, bad files."""

import numpy as np
import pytest
from vhdr_writer import write_with_pybv

from famwise import vhdr
from famwise.errors import UserError

NAMES = ["Fz", "Cz", "Pz"]


def _hand_built(
    folder,
    *,
    stored: np.ndarray,
    binary_format: str,
    orientation: str = "MULTIPLEXED",
    channel_lines: list[str] | None = None,
    codepage: str = "UTF-8",
    encoding: str = "utf-8",
    extra: str = "",
    data_file: str = "rec.eeg",
    big_endian: bool = False,
):
    """A header written line by line as the specification lays it out, and the samples ``stored`` (n_channels, n)."""
    channel_lines = channel_lines or [f"Ch{n}={name},,1,µV" for n, name in enumerate(NAMES, start=1)]
    header = "\n".join(
        [
            "Brain Vision Data Exchange Header File Version 1.0",
            "; written by hand for a test",
            "",
            "[Common Infos]",
            f"Codepage={codepage}",
            f"DataFile={data_file}",
            "MarkerFile=rec.vmrk",
            "DataFormat=BINARY",
            f"DataOrientation={orientation}",
            f"NumberOfChannels={stored.shape[0]}",
            "; Sampling interval in microseconds",
            "SamplingInterval=2000",
            extra,
            "",
            "[Binary Infos]",
            f"BinaryFormat={binary_format}",
            "UseBigEndianOrder=YES" if big_endian else "",
            "",
            "[Channel Infos]",
            "; Each entry: Ch<Channel number>=<Name>,<Reference channel name>,",
            *channel_lines,
            "",
            "[Comment]",
            "free text = with an equals sign",
            "",
        ]
    )
    path = folder / "rec.vhdr"
    path.write_bytes(header.encode(encoding))
    dtype = {"INT_16": "i2", "INT_32": "i4", "IEEE_FLOAT_32": "f4"}[binary_format]
    dtype = (">" if big_endian else "<") + dtype
    order = stored.T if orientation == "MULTIPLEXED" else stored
    np.ascontiguousarray(order).astype(dtype).tofile(folder / data_file.replace("$b", "rec"))
    return path


@pytest.mark.parametrize(
    ("fmt", "resolution", "tolerance_uv"), [("binary_float32", 1.0, 1e-4), ("binary_int16", 0.1, 0.1)]
)
def test_reads_files_of_a_general_purpose_writer(tmp_path, fmt, resolution, tolerance_uv):
    rng = np.random.default_rng(3)
    data = rng.normal(scale=40e-6, size=(3, 1000))  # volts
    # Source: pybv (a maintained general-purpose writer), multiplexed.
    write_with_pybv(
        tmp_path,
        "rec",
        data,
        500.0,
        NAMES,
        fmt=fmt,
        resolution=resolution,
        unit="µV",
        events=np.array([[100, 1], [600, 2]]),
    )
    header = vhdr.read_header(tmp_path / "rec.vhdr")
    assert [c.name for c in header.channels] == NAMES and header.sample_rate_hz == 500.0 and header.n_samples == 1000
    assert [c.unit for c in header.channels] == ["µV"] * 3
    values = vhdr.read_samples(header)
    # int16 stores truncated steps of 0.1 µV; float32 keeps about 7 digits
    np.testing.assert_allclose(values, data * 1e6, rtol=0, atol=tolerance_uv)
    assert vhdr.read_samples(header, [2, 0]).tolist() == values[[2, 0]].tolist()
    markers = vhdr.read_markers(header.marker_file)
    assert [(m.type, m.position) for m in markers] == [("Stimulus", 100), ("Stimulus", 600)]


def test_reads_per_channel_units_and_resolutions_of_a_general_purpose_writer(tmp_path):
    data = np.array([[1e-6, -2e-6, 3e-6], [4e-9, 5e-9, -6e-9], [0.5, -0.25, 0.125]])
    # Source: pybv (a maintained general-purpose writer) with one unit and resolution per channel.
    with pytest.warns(UserWarning):  # the writer notes that units other than µV are rarely read
        write_with_pybv(
            tmp_path,
            "rec",
            data,
            250.0,
            NAMES,
            unit=["µV", "nV", "V"],
            resolution=np.array([0.5, 0.25, 1.0]),
        )
    header = vhdr.read_header(tmp_path / "rec.vhdr")
    assert [(c.unit, c.resolution) for c in header.channels] == [("µV", 0.5), ("nV", 0.25), ("V", 1.0)]
    np.testing.assert_allclose(vhdr.read_samples(header), data * np.array([[1e6], [1e9], [1.0]]), rtol=1e-6)


@pytest.mark.parametrize("orientation", ["MULTIPLEXED", "VECTORIZED"])
@pytest.mark.parametrize(
    ("binary_format", "big_endian"), [("INT_16", False), ("INT_32", False), ("IEEE_FLOAT_32", False), ("INT_32", True)]
)
def test_hand_built_variants(tmp_path, orientation, binary_format, big_endian):
    stored = np.array([[1, -2, 3, 30000, -5], [7, 8, -9, 10, 11], [-100, 0, 100, 200, 300]])
    if binary_format == "INT_32":
        stored = stored * 70000
    lines = ["Ch1=Fz,Ref,0.1,µV", "Ch2=Cz,Ref,,nV", "Ch3=Pz,Ref,2,V"]  # empty resolution means 1
    path = _hand_built(
        tmp_path,
        stored=stored,
        binary_format=binary_format,
        orientation=orientation,
        channel_lines=lines,
        big_endian=big_endian,
    )
    header = vhdr.read_header(path)
    assert header.n_samples == 5 and header.sample_rate_hz == 500.0 and header.orientation == orientation
    # Source: the format specification (Core Data Format document 1.0): value = stored x resolution, in the unit.
    expected = stored * np.array([[0.1], [1.0], [2.0]])
    np.testing.assert_array_equal(vhdr.read_samples(header), expected)
    assert [(c.name, c.reference, c.unit) for c in header.channels] == [
        ("Fz", "Ref", "µV"),
        ("Cz", "Ref", "nV"),
        ("Pz", "Ref", "V"),
    ]


def test_header_encoding_placeholders_and_escaped_commas(tmp_path):
    stored = np.arange(6).reshape(2, 3)
    lines = ["Ch1=Fp1\\1left,,0.5,\xb5V", "Ch2=Fz\u00e4,,0.5"]  # "\1" codes a comma; no unit means µV
    path = _hand_built(
        tmp_path,
        stored=stored,
        binary_format="INT_16",
        channel_lines=lines,
        codepage="ANSI",
        encoding="cp1252",
        data_file="$b.eeg",
        extra="DataPoints=3",
    )
    header = vhdr.read_header(path)
    assert [c.name for c in header.channels] == ["Fp1,left", "Fz\u00e4"]
    assert [c.unit for c in header.channels] == ["\xb5V", "µV"]
    assert header.data_file == tmp_path / "rec.eeg"
    np.testing.assert_array_equal(vhdr.read_samples(header), stored * 0.5)


def test_utf8_header_with_a_byte_order_mark(tmp_path):
    path = _hand_built(tmp_path, stored=np.ones((3, 2)), binary_format="INT_16", encoding="utf-8-sig")
    header = vhdr.read_header(path)
    assert [(c.name, c.unit) for c in header.channels] == [(name, "µV") for name in NAMES]


def test_missing_data_file_is_one_error_naming_it(tmp_path):
    path = _hand_built(tmp_path, stored=np.zeros((3, 4)), binary_format="INT_16")
    (tmp_path / "rec.eeg").unlink()
    with pytest.raises(UserError, match=r"rec.eeg: data file named by rec.vhdr \(DataFile\) not found"):
        vhdr.read_header(path)


def test_data_file_size_must_fit_the_header(tmp_path):
    path = _hand_built(tmp_path, stored=np.zeros((3, 4)), binary_format="INT_32")
    with (tmp_path / "rec.eeg").open("ab") as stream:
        stream.write(b"\0\0")
    with pytest.raises(
        UserError,
        match=r"rec.eeg: holds 50 bytes, not a whole number of time points of "
        r"3 channels x 4 bytes \(INT_32\) as rec.vhdr describes",
    ):
        vhdr.read_header(path)
    path = _hand_built(tmp_path, stored=np.zeros((3, 4)), binary_format="INT_16", extra="DataPoints=5")
    with pytest.raises(
        UserError,
        match=r"rec.eeg: holds 24 bytes, but rec.vhdr describes DataPoints=5 of "
        r"3 channels x 2 bytes \(INT_16\) = 30 bytes",
    ):
        vhdr.read_header(path)


def test_header_errors(tmp_path):
    path = _hand_built(tmp_path, stored=np.zeros((3, 4)), binary_format="INT_16")
    text = path.read_text(encoding="utf-8")
    cases = [
        (text.replace("BINARY", "ASCII"), r"DataFormat=ASCII is not read"),
        (text.replace("MULTIPLEXED", "SIDEWAYS"), r"DataOrientation must be MULTIPLEXED or VECTORIZED, got SIDEWAYS"),
        (text.replace("INT_16", "UINT_8"), r"BinaryFormat must be one of INT_16, INT_32, IEEE_FLOAT_32, got UINT_8"),
        (text.replace("SamplingInterval=2000", "SamplingInterval=0"), r"SamplingInterval must be positive"),
        (text.replace("NumberOfChannels=3", "NumberOfChannels=4"), r"\[Channel Infos\] has no Ch4 entry"),
        (text.replace("Ch2=Cz,,1", "Ch2=Cz,,fine"), r"Ch2 resolution 'fine' is not a number"),
        (text.replace("Codepage=UTF-8", "Codepage=EBCDIC"), r"Codepage must be UTF-8 or ANSI, got EBCDIC"),
        ("Some other file\n" + text, r"not a .vhdr-format header file"),
    ]
    for content, message in cases:
        path.write_text(content, encoding="utf-8")
        with pytest.raises(UserError, match=message):
            vhdr.read_header(path)
    path.write_bytes(text.replace("Cz", "C\xe4").encode("cp1252"))
    with pytest.raises(UserError, match=r"rec.vhdr: the file says Codepage=UTF-8 but byte \d+ is not valid UTF-8"):
        vhdr.read_header(path)


def test_markers(tmp_path):
    path = tmp_path / "rec.vmrk"
    path.write_text(
        "Brain Vision Data Exchange Marker File, Version 1.0\n\n[Common Infos]\nCodepage=UTF-8\n"
        "DataFile=rec.eeg\n\n[Marker Infos]\n; Mk<n>=<Type>,<Description>,<Position>,<Size>,<Channel>\n"
        "Mk1=New Segment,,1,1,0,20260101120000000000\nMk2=Stimulus,S  1,251,1,0\n"
        "Mk10=Stimulus,a\\1b,1001,1,0\nMk3=Response,R  2,300,,\n",
        encoding="utf-8",
    )
    markers = vhdr.read_markers(path)
    assert markers == [
        vhdr.Marker("New Segment", "", 0, 1, 0),
        vhdr.Marker("Stimulus", "S  1", 250, 1, 0),
        vhdr.Marker("Response", "R  2", 299, 1, 0),
        vhdr.Marker("Stimulus", "a,b", 1000, 1, 0),
    ]
    path.write_text(path.read_text().replace("Mk2=Stimulus,S  1,251", "Mk2=Stimulus,S  1,later"))
    with pytest.raises(UserError, match=r"rec.vmrk: marker Mk2=Stimulus,S  1,later,1,0 needs whole-number"):
        vhdr.read_markers(path)
    with pytest.raises(UserError, match=r"other.vmrk: file not found"):
        vhdr.read_markers(tmp_path / "other.vmrk")


def test_written_files_read_back(tmp_path):
    data = np.array([[0.5, -1.0, 40000.25], [2.0, 3.0, -4.0]])  # µV
    vhdr.write(
        tmp_path / "a.vhdr",
        data,
        sample_rate_hz=250.0,
        channels=["F,z", "Cz"],
        markers=[(1, "go, now")],
        resolution=0.25,
    )
    header = vhdr.read_header(tmp_path / "a.vhdr")
    assert header.binary_format == "INT_32"  # 40000.25 / 0.25 does not fit 16 bits
    assert [c.name for c in header.channels] == ["F,z", "Cz"]
    np.testing.assert_array_equal(vhdr.read_samples(header), data)
    assert vhdr.read_markers(header.marker_file) == [vhdr.Marker("Stimulus", "go, now", 1, 1, 0)]
    for bad in (np.nan, 1e9):
        with pytest.raises(ValueError, match=r"samples must be finite and within ±5.36871e\+08 µV at 0.25 µV per step"):
            vhdr.write(
                tmp_path / "c.vhdr",
                data + [[0, 0, bad], [0, 0, 0]],
                sample_rate_hz=250.0,
                channels=["Fz", "Cz"],
                markers=[],
                resolution=0.25,
            )
    vhdr.write(tmp_path / "b.vhdr", data, sample_rate_hz=250.0, channels=["Fz", "Cz"], markers=[])
    header = vhdr.read_header(tmp_path / "b.vhdr")
    assert header.binary_format == "IEEE_FLOAT_32"
    np.testing.assert_array_equal(vhdr.read_samples(header), data.astype(np.float32))
