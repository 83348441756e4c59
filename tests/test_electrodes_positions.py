"""Standard 10-20 / 10-10 positions and reading user position files."""

import importlib.util
import json
import re
from pathlib import Path

import numpy as np
import pytest

from famwise.electrodes import Positions, match_channels, read_positions, system_positions
from famwise.errors import FamwiseWarning, UserError

REPO = Path(__file__).resolve().parents[1]
TABLES = ("10-10.tsv", "10-20.tsv")


def _radius_mm():
    text = (REPO / "configs" / "positions" / "10-10.tsv").read_text()
    match = re.search(r"^# units: mm; head radius: ([0-9.]+) mm$", text, flags=re.M)
    assert match, "the table must state its units and head radius"
    return float(match.group(1))


R = _radius_mm()


def _pos(positions, name):
    return positions.xyz[positions.names.index(name)]


def _angle_deg(a, b):
    cos = np.dot(a, b) / (np.linalg.norm(a) * np.linalg.norm(b))
    return np.degrees(np.arccos(np.clip(cos, -1, 1)))


def _unit(polar_deg, azimuth_deg):
    p, a = np.radians(polar_deg), np.radians(azimuth_deg)
    return np.array([np.sin(p) * np.cos(a), np.sin(p) * np.sin(a), np.cos(p)])


# --- geometry of the 10-20 definition (Jasper 1958) on a sphere ---------------------------------
# Model B: the Fpz-T7-Oz-T8 circumference is the equator, so Fpz -> Cz (40 % of the midline) is
# 90 degrees and the whole nasion-inion arc (and preauricular arc) is 90 / 0.4 = 225 degrees.
ARC = 90.0 / 0.4


@pytest.mark.parametrize("system", ["10-20", "10-10"])
def test_all_positions_on_the_sphere_of_the_stated_radius(system):
    # Jasper (1958) rule on a sphere: every position lies on the head surface
    positions = system_positions(system)
    np.testing.assert_allclose(np.linalg.norm(positions.xyz, axis=1), R, atol=1e-5)


def test_cz_at_the_vertex():
    # Jasper (1958): Cz at 50 % of both the midline and the preauricular line
    np.testing.assert_allclose(_pos(system_positions("10-20"), "Cz"), [0, 0, R], atol=1e-6)


def test_midline_20_percent_steps():
    # Jasper (1958): Fpz 10 %, Fz 30 %, Cz 50 %, Pz 70 %, Oz 90 % of nasion-inion
    p = system_positions("10-20")
    midline = ["Fpz", "Fz", "Cz", "Pz", "Oz"]
    for name in midline:
        assert abs(_pos(p, name)[0]) < 1e-6
    for a, b in zip(midline, midline[1:]):
        assert _angle_deg(_pos(p, a), _pos(p, b)) == pytest.approx(0.2 * ARC, abs=1e-5)
    assert [n for n in sorted(midline, key=lambda n: -_pos(p, n)[1])] == midline  # Jasper (1958) ordering
    nz, iz = _pos(system_positions("10-10"), "Nz"), _pos(system_positions("10-10"), "Iz")
    assert _angle_deg(nz, _pos(p, "Fpz")) == pytest.approx(0.1 * ARC, abs=1e-5)
    assert _angle_deg(iz, _pos(p, "Oz")) == pytest.approx(0.1 * ARC, abs=1e-5)
    cz = _pos(p, "Cz")
    assert _angle_deg(nz, cz) + _angle_deg(cz, iz) == pytest.approx(ARC, abs=1e-5)


def test_preauricular_line():
    # Jasper (1958): T7 10 %, C3 30 %, Cz 50 %, C4 70 %, T8 90 % of the preauricular line
    p = system_positions("10-20")
    line = ["T7", "C3", "Cz", "C4", "T8"]
    for name in line:
        assert abs(_pos(p, name)[1]) < 1e-6  # the coronal plane through the preauricular points
    for a, b in zip(line, line[1:]):
        assert _angle_deg(_pos(p, a), _pos(p, b)) == pytest.approx(0.2 * ARC, abs=1e-5)
    assert _pos(p, "T7")[0] < 0 < _pos(p, "T8")[0]
    t9 = _pos(system_positions("10-10"), "T9")  # the preauricular point itself (0 %)
    assert _angle_deg(t9, _pos(p, "T7")) == pytest.approx(0.1 * ARC, abs=1e-5)


def test_circumference_10_percent_steps():
    # Jasper (1958): Fp1 10 %, F7 30 %, T7 50 %, P7 70 %, O1 90 % of the half circumference
    # from Fpz; the circumference is the equator of the sphere
    p = system_positions("10-20")
    for name, fraction in [("Fp1", 0.1), ("F7", 0.3), ("T7", 0.5), ("P7", 0.7), ("O1", 0.9)]:
        expected = R * _unit(90, 90 + fraction * 180)
        np.testing.assert_allclose(_pos(p, name), expected, atol=1e-5)


def test_row_positions_midway():
    # Jasper (1958): F3 midway between F7 and Fz (and P3 between P7 and Pz) along the row
    p = system_positions("10-20")
    for lateral, mid, between in [("F7", "Fz", "F3"), ("P7", "Pz", "P3"), ("F8", "Fz", "F4")]:
        a = _angle_deg(_pos(p, lateral), _pos(p, between))
        b = _angle_deg(_pos(p, between), _pos(p, mid))
        assert a == pytest.approx(b, abs=1e-5)


def test_ten_ten_rows_equally_spaced():
    # common practice, no source: 10-10 rows split the lateral-to-midline arc into equal steps
    p = system_positions("10-10")
    for row in (
        ["F7", "F5", "F3", "F1", "Fz"],
        ["FT7", "FC5", "FC3", "FC1", "FCz"],
        ["TP8", "CP6", "CP4", "CP2", "CPz"],
        ["AF7", "AF3", "AFz"],
        ["PO8", "PO4", "POz"],
    ):
        gaps = [np.linalg.norm(_pos(p, a) - _pos(p, b)) for a, b in zip(row, row[1:])]
        np.testing.assert_allclose(gaps, gaps[0], rtol=1e-6)


@pytest.mark.parametrize("system", ["10-20", "10-10"])
def test_mirror_symmetry(system):
    # Jasper (1958) / Acharya et al. (2016): odd numbers left, even right, homologous pairs mirrored
    p = system_positions(system)
    names = set(p.names)
    for name in p.names:
        stem = name.rstrip("0123456789")
        number = name[len(stem) :]
        if not number:
            assert name.endswith("z") and abs(_pos(p, name)[0]) < 1e-6
        elif int(number) % 2:
            partner = f"{stem}{int(number) + 1}"
            assert partner in names
            assert _pos(p, name)[0] < 0
            np.testing.assert_allclose(_pos(p, partner), _pos(p, name) * [-1, 1, 1], atol=1e-6)


def test_model_b_values():
    # equator through Fpz-T7-Oz-T8, derived by hand from the Jasper (1958) percentages (numpy trigonometry; not a standard)
    p = system_positions("10-20")
    expected = {
        "Fpz": (0, 1, 0),
        "Fz": (0, 0.70711, 0.70711),
        "Cz": (0, 0, 1),
        "Pz": (0, -0.70711, 0.70711),
        "Oz": (0, -1, 0),
        "C3": (-0.70711, 0, 0.70711),
        "C4": (0.70711, 0, 0.70711),
        "T7": (-1, 0, 0),
        "T8": (1, 0, 0),
        "Fp1": (-0.30902, 0.95106, 0),
        "F7": (-0.80902, 0.58779, 0),
        "P7": (-0.80902, -0.58779, 0),
        "O1": (-0.30902, -0.95106, 0),
    }
    for name, unit in expected.items():
        np.testing.assert_allclose(_pos(p, name) / R, unit, atol=1e-5)
    assert _angle_deg(_pos(p, "Fz"), _pos(p, "Cz")) == pytest.approx(45, abs=1e-5)
    assert _angle_deg(_pos(p, "C3"), _pos(p, "C4")) == pytest.approx(90, abs=1e-5)
    assert _angle_deg(_pos(p, "Fpz"), _pos(p, "Oz")) == pytest.approx(180, abs=1e-5)


def test_system_contents():
    # Jasper (1958): 19 scalp positions (plus the Fpz/Oz landmarks here); Acharya et al. (2016):
    # the 10-10 rows AF, FC, CP, PO, FT, TP and the lateral 9/10 positions
    ten_twenty, ten_ten = system_positions("10-20"), system_positions("10-10")
    assert len(ten_twenty.names) == 21 and len(ten_ten.names) == 73
    assert len(set(n.lower() for n in ten_ten.names)) == 73
    for name in ("AF3", "FC5", "CP2", "PO8", "FT7", "TP10", "F9", "T10", "P9", "Nz", "Iz", "C6"):
        assert name in ten_ten.names
    for name in ten_twenty.names:
        np.testing.assert_array_equal(_pos(ten_twenty, name), _pos(ten_ten, name))
    assert ten_ten.source == "the 10-10 system (idealised spherical positions)"


def test_table_copies_identical_and_reproduced_by_the_script(tmp_path):
    # common practice, no source: the shipped data is exactly what the documented generator writes
    spec = importlib.util.spec_from_file_location("make_positions", REPO / "scripts" / "make_positions.py")
    script = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(script)
    script.main(["--out", str(tmp_path)])
    for name in TABLES:
        shipped = (REPO / "configs" / "positions" / name).read_bytes()
        assert shipped == (REPO / "workflow" / "famwise" / "data" / "positions" / name).read_bytes()
        assert shipped == (tmp_path / name).read_bytes(), "run python scripts/make_positions.py"


def test_bad_system():
    with pytest.raises(UserError, match=r"electrode system must be one of 10-10, 10-20, got '10-5'"):
        system_positions("10-5")


# --- matching names ----------------------------------------------------------------------------


def test_aliases_and_case():
    # from memory, high confidence (Acharya et al. 2016 guideline): the 10-10 names replace T3/T4 -> T7/T8, T5/T6 -> P7/P8
    std = system_positions("10-10")
    old = match_channels(std, ["T3", "t4", "T5", "T6", "fz", "CZ"])
    new = match_channels(std, ["T7", "T8", "P7", "P8", "Fz", "Cz"])
    assert old.names == ("T3", "t4", "T5", "T6", "fz", "CZ")
    np.testing.assert_array_equal(old.xyz, new.xyz)
    # and back: a file with old names serves channels named the new way
    legacy = Positions(("T3", "C3"), [[-1, 0, 0], [-0.7, 0, 0.7]], "legacy")
    np.testing.assert_array_equal(match_channels(legacy, ["C3", "T7"]).xyz, [[-0.7, 0, 0.7], [-1, 0, 0]])


def test_match_keeps_order_and_subset():
    std = system_positions("10-10")
    chosen = ["Oz", "Fp1", "Cz"]
    matched = match_channels(std, chosen)
    assert matched.names == tuple(chosen)
    np.testing.assert_array_equal(matched.xyz, [_pos(std, n) for n in chosen])


def test_unknown_channel_name():
    with pytest.raises(
        UserError,
        match=r"no position in the 10-10 system \(idealised spherical positions\) for 2 analysed channels: "
        r"'Fzz' \(did you mean 'Fz'\?\), 'EOG'",
    ):
        match_channels(system_positions("10-10"), ["Cz", "Fzz", "EOG"])


def test_positions_missing_for_analysed_channels(tmp_path):
    path = tmp_path / "caps.tsv"
    path.write_text("name\tx\ty\tz\nFz\t0\t60\t60\nCz\t0\t0\t85\nPz\t0\t-60\t60\n")
    positions = read_positions(path)
    with pytest.raises(
        UserError,
        match=rf"no position in {re.escape(str(path))} for 2 analysed channels: "
        r"'C3', 'C4'",
    ):
        match_channels(positions, ["Fz", "C3", "Cz", "C4"])


def test_duplicate_analysed_channels():
    with pytest.raises(UserError, match=r"analysed channels name the same electrode twice: 'T3' and 'T7'"):
        match_channels(system_positions("10-10"), ["T3", "Cz", "T7"])


# --- reading files -----------------------------------------------------------------------------


def _write_bids(folder, units, rows, stem="sub-01_ses-1_space-CapTrak"):
    tsv = folder / f"{stem}_electrodes.tsv"
    tsv.write_text("name\tx\ty\tz\ttype\n" + "".join(f"{n}\t{x}\t{y}\t{z}\tcup\n" for n, x, y, z in rows))
    if units is not None:
        (folder / f"{stem}_coordsystem.json").write_text(
            json.dumps({"EEGCoordinateSystem": "CapTrak", "EEGCoordinateUnits": units})
        )
    return tsv


ROWS_M = [
    ("Fz", 0.0, 0.06, 0.06),
    ("Cz", 0.0, 0.0, 0.085),
    ("T7", -0.085, 0.0, 0.0),
    ("Oz", 0.0, -0.085, 0.0),
    ("EOG", "n/a", "n/a", "n/a"),
]


@pytest.mark.parametrize(("units", "scale"), [("m", 1.0), ("cm", 100.0), ("mm", 1000.0)])
def test_bids_units_from_coordsystem(tmp_path, units, scale):
    # BIDS specification 1.x (its schema in bidsschematools 2.0.1): EEGCoordinateUnits of _coordsystem.json is m, mm, cm or n/a
    rows = [(n, *(v * scale if v != "n/a" else v for v in xyz)) for n, *xyz in ROWS_M]
    positions = read_positions(_write_bids(tmp_path, units, rows))
    assert positions.names == ("Fz", "Cz", "T7", "Oz")  # the n/a row (no position) is skipped
    np.testing.assert_allclose(_pos(positions, "Cz"), [0, 0, 85])
    np.testing.assert_allclose(_pos(positions, "Fz"), [0, 60, 60])


def test_bids_without_sidecar_assumes_mm(tmp_path):
    rows = [(n, *(v * 1000 if v != "n/a" else v for v in xyz)) for n, *xyz in ROWS_M]
    with pytest.warns(FamwiseWarning, match="assuming the coordinates are in mm"):
        positions = read_positions(_write_bids(tmp_path, None, rows))
    np.testing.assert_allclose(_pos(positions, "T7"), [-85, 0, 0])


def test_units_that_look_wrong_warn(tmp_path):
    rows = [(n, *xyz) for n, *xyz in ROWS_M[:4]]
    with pytest.warns(FamwiseWarning, match=r"span 0\.145 mm .* units may be wrong"):
        read_positions(_write_bids(tmp_path, "mm", rows))


def test_bad_sidecar_units(tmp_path):
    with pytest.raises(
        UserError,
        match=r"coordsystem\.json: EEGCoordinateUnits must be one of "
        r"m, cm, mm, got 'inch'",
    ):
        read_positions(_write_bids(tmp_path, "inch", ROWS_M))


def test_plain_tsv_units_comment_and_override(tmp_path):
    path = tmp_path / "positions.tsv"
    path.write_text("# units: cm\nname\tx\ty\tz\nCz\t0\t0\t8.5\nT7\t-8.5\t0\t0\nFpz\t0\t8.5\t0\n")
    np.testing.assert_allclose(_pos(read_positions(path), "Cz"), [0, 0, 85])
    with pytest.warns(FamwiseWarning, match="units may be wrong"):
        np.testing.assert_allclose(_pos(read_positions(path, units="mm"), "Cz"), [0, 0, 8.5])
    with pytest.raises(UserError, match=r"coordinate units must be one of m, cm, mm, got 'km'"):
        read_positions(path, units="km")


def test_system_table_reads_as_a_plain_file():
    positions = read_positions(REPO / "configs" / "positions" / "10-10.tsv")
    np.testing.assert_array_equal(positions.xyz, system_positions("10-10").xyz)


def test_duplicate_names_in_file(tmp_path):
    path = tmp_path / "dup.tsv"
    path.write_text("name\tx\ty\tz\nFz\t0\t60\t60\nCz\t0\t0\t85\nfz\t0\t61\t60\n")
    with pytest.raises(
        UserError,
        match=r"dup\.tsv, line 4: duplicate electrode 'fz', already given as 'Fz' "
        r"on line 2$",
    ):
        read_positions(path)
    path.write_text("name\tx\ty\tz\nT3\t-85\t0\t0\nCz\t0\t0\t85\nT7\t-85\t0\t0\n")
    with pytest.raises(
        UserError,
        match=r"line 4: duplicate electrode 'T7', already given as 'T3' on line 2 "
        r"\(T3-T6 are the old names",
    ):
        read_positions(path)


def test_non_numeric_coordinates(tmp_path):
    path = tmp_path / "bad.tsv"
    path.write_text("name\tx\ty\tz\nFz\t0\t60\t60\nCz\t0\tzero\t85\n")
    with pytest.raises(
        UserError,
        match=r"bad\.tsv, line 3: coordinate y of 'Cz' must be a finite number, "
        r"found 'zero'",
    ):
        read_positions(path)
    path.write_text("name\tx\ty\tz\nFz\t0\t60\tnan\n")
    with pytest.raises(UserError, match=r"line 2: coordinate z of 'Fz' must be a finite number, found 'nan'"):
        read_positions(path)


def test_bad_header_and_row_length(tmp_path):
    path = tmp_path / "cols.tsv"
    path.write_text("label\tx\ty\tz\nFz\t0\t60\t60\n")
    with pytest.raises(
        UserError,
        match=r"cols\.tsv: expected a header with the columns name, x, y, z "
        r"\(tab-separated\), found: label, x, y, z",
    ):
        read_positions(path)
    path.write_text("name\tx\ty\tz\nFz\t0\t60\n")
    with pytest.raises(UserError, match=r"line 2: expected 4 tab-separated fields as in the header, found 3"):
        read_positions(path)
    with pytest.raises(UserError, match=r"file not found: .*missing\.tsv"):
        read_positions(tmp_path / "missing.tsv")


def test_positions_are_read_only_and_unique():
    positions = system_positions("10-10")
    with pytest.raises(ValueError, match="read-only"):
        positions.xyz[0, 0] = 1.0
    with pytest.raises(ValueError, match="names must be unique"):
        Positions(("T5", "p7"), np.zeros((2, 3)), "code")
