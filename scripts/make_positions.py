"""Generate the 10-20 and 10-10 electrode position tables (idealised spherical positions).

The positions are computed from the geometric definition of the systems
(Jasper 1958; the 10-10 extension, Acharya et al. 2016): steps of 10 % and
20 % along the nasion-inion midline, along the line between the preauricular
points, and along the head circumference, on an idealised spherical head.

Spherical idealisation: the equator through Fpz, T7, Oz and T8
--------------------------------------------------------------
* Head frame: x to the right, y anterior (towards the nasion), z up (towards
  the vertex); origin at the centre of a sphere of radius 85 mm.
* The circumference through Fpz, T7, Oz and T8 is the equator (z = 0); Cz is
  the vertex (0, 0, 85).  The nasion, inion and preauricular points lie 10 %
  below it, so the nasion-inion midline and the preauricular line are arcs of
  225 degrees and one 10 % step on them is 22.5 degrees.
* Midline (10 % steps from the nasion): Nz 0 %, Fpz 10 %, AFz 20 %, Fz 30 %,
  FCz 40 %, Cz 50 %, CPz 60 %, Pz 70 %, POz 80 %, Oz 90 %, Iz 100 %.
* Preauricular line (left to right): T9 0 %, T7 10 %, C5 20 %, C3 30 %, C1 40 %,
  Cz 50 %, and mirrored on the right.
* Equator (steps of 10 % of the half circumference from Fpz, i.e. 18 degrees):
  Fp1, AF7, F7, FT7, T7, TP7, P7, PO7, O1, then Oz; mirrored on the right.
* Lower ring 10 % below the equator, at the azimuths of F7 ... P7: F9, FT9,
  T9, TP9, P9 (F10 ... P10 on the right), with Nz and Iz at its ends.
* The remaining positions divide the arc between the lateral equator point and
  the midline point of their row into equal steps (F7-F5-F3-F1-Fz,
  FT7-FC5-FC3-FC1-FCz, T7-C5-C3-C1-Cz, TP7-CP5-CP3-CP1-CPz, P7-P5-P3-P1-Pz;
  AF3 midway on AF7-AFz, PO3 midway on PO7-POz).  The arc is the circle in
  which the plane through the row's left end, midline point and right end
  cuts the sphere (a great circle for the central row).
* Odd numbers on the left, even numbers on the right, mirrored in x.

The 10-20 table holds the 19 scalp positions of the 10-20 system (with the
10-10 names T7, T8, P7, P8 for T3, T4, T5, T6) plus the midline points Fpz and
Oz; the ear-lobe positions A1/A2 are not on the scalp and are left out.  Its
coordinates are those of the same names in the 10-10 table.

This is one idealisation among several (another puts the nasion, inion and
preauricular points on the equator); real heads are not spheres.

Usage::

    python scripts/make_positions.py            # writes both copies
    python scripts/make_positions.py --out DIR  # writes into DIR only
"""

import argparse
from pathlib import Path

import numpy as np

HEAD_RADIUS_MM = 85.0
STEP_DEG = 22.5  # 10 % of the 225-degree midline and preauricular arcs
RING_DEG = 18.0  # 10 % of the half circumference
REPO = Path(__file__).resolve().parents[1]
OUT_DIRS = (REPO / "configs" / "positions", REPO / "workflow" / "famwise" / "data" / "positions")

TEN_TWENTY = (
    "Fp1",
    "Fpz",
    "Fp2",
    "F7",
    "F3",
    "Fz",
    "F4",
    "F8",
    "T7",
    "C3",
    "Cz",
    "C4",
    "T8",
    "P7",
    "P3",
    "Pz",
    "P4",
    "P8",
    "O1",
    "Oz",
    "O2",
)


def _unit(polar_deg, azimuth_deg):
    """Unit vector from the polar angle (from +z) and azimuth (from +x towards +y)."""
    p, a = np.deg2rad(polar_deg), np.deg2rad(azimuth_deg)
    return np.array([np.sin(p) * np.cos(a), np.sin(p) * np.sin(a), np.cos(p)])


def _arc_points(left, middle, right, fractions):
    """Points at ``fractions`` of the arc from ``left`` to ``middle``.

    The arc lies on the circle cut from the unit sphere by the plane through
    the three unit vectors.
    """
    normal = np.cross(middle - left, right - left)
    normal /= np.linalg.norm(normal)
    centre = np.dot(normal, left) * normal
    a, m = left - centre, middle - centre
    radius = np.linalg.norm(a)
    angle = np.arccos(np.clip(np.dot(a, m) / (radius * np.linalg.norm(m)), -1.0, 1.0))
    perp = m - np.dot(m, a) / radius**2 * a
    perp *= radius / np.linalg.norm(perp)
    points = [centre + np.cos(t * angle) * a + np.sin(t * angle) * perp for t in fractions]
    return [p / np.linalg.norm(p) for p in points]


def _mirror(name):
    """Name of the right-hemisphere homologue of a left (odd) name."""
    stem = name.rstrip("0123456789")
    return f"{stem}{int(name[len(stem) :]) + 1}"


def ten_ten_positions():
    """Unit vectors of the 10-10 positions, row by row front to back, left to right."""
    left = {}
    midline = {
        "Nz": _unit(5 * STEP_DEG, 90),
        "Fpz": _unit(4 * STEP_DEG, 90),
        "AFz": _unit(3 * STEP_DEG, 90),
        "Fz": _unit(2 * STEP_DEG, 90),
        "FCz": _unit(STEP_DEG, 90),
        "Cz": _unit(0, 0),
        "CPz": _unit(STEP_DEG, 270),
        "Pz": _unit(2 * STEP_DEG, 270),
        "POz": _unit(3 * STEP_DEG, 270),
        "Oz": _unit(4 * STEP_DEG, 270),
        "Iz": _unit(5 * STEP_DEG, 270),
    }
    equator = ("Fp1", "AF7", "F7", "FT7", "T7", "TP7", "P7", "PO7", "O1")
    for k, name in enumerate(equator, start=1):
        left[name] = _unit(90, 90 + k * RING_DEG)
    for k, name in zip(range(3, 8), ("F9", "FT9", "T9", "TP9", "P9")):
        left[name] = _unit(90 + STEP_DEG, 90 + k * RING_DEG)
    rows = {
        "AF": ("AF7", "AFz", ("AF3",)),
        "F": ("F7", "Fz", ("F5", "F3", "F1")),
        "FC": ("FT7", "FCz", ("FC5", "FC3", "FC1")),
        "C": ("T7", "Cz", ("C5", "C3", "C1")),
        "CP": ("TP7", "CPz", ("CP5", "CP3", "CP1")),
        "P": ("P7", "Pz", ("P5", "P3", "P1")),
        "PO": ("PO7", "POz", ("PO3",)),
    }
    for end, mid, names in rows.values():
        lv, mv = left[end], midline[mid]
        rv = lv * np.array([-1.0, 1.0, 1.0])
        fractions = np.arange(1, len(names) + 1) / (len(names) + 1)
        left.update(zip(names, _arc_points(lv, mv, rv, fractions)))
    positions = dict(midline)
    for name, vec in left.items():
        positions[name] = vec
        positions[_mirror(name)] = vec * np.array([-1.0, 1.0, 1.0])
    return dict(sorted(positions.items(), key=lambda kv: (_ROW_ORDER[_row(kv[0])], _lateral(kv[0]))))


_ROW_ORDER = {
    "Nz": 0,
    "Fp": 1,
    "AF": 2,
    "F": 3,
    "FT": 4,
    "FC": 4,
    "T": 5,
    "C": 5,
    "TP": 6,
    "CP": 6,
    "P": 7,
    "PO": 7.5,
    "O": 8,
    "Iz": 9,
}


def _lateral(name):
    """Left-to-right rank: odd numbers descending, midline, even numbers ascending."""
    digits = name[len(name.rstrip("0123456789")) :]
    if not digits:
        return 0
    return -int(digits) if int(digits) % 2 else int(digits)


def _row(name):
    """Row label of a name: its letters without the trailing number or 'z' (Nz, Iz kept)."""
    return name if name in ("Nz", "Iz") else name.rstrip("0123456789").removesuffix("z")


def _table(system, positions):
    lines = [
        f"# famwise electrode positions: {system} system, idealised spherical positions from the system's definition",
        "# generated by scripts/make_positions.py from the 10 %/20 % rule on a sphere whose equator is the",
        "# Fpz-T7-Oz-T8 circumference (nasion, inion and ear points 10 % below it); do not edit by hand",
        "# frame: x right, y anterior (nasion), z up (vertex); origin at the sphere centre",
        f"# units: mm; head radius: {HEAD_RADIUS_MM:g} mm",
        "name\tx\ty\tz",
    ]
    for name, vec in positions.items():
        x, y, z = (HEAD_RADIUS_MM * np.where(np.abs(vec) < 1e-12, 0.0, vec)).tolist()
        lines.append(f"{name}\t{x:.6f}\t{y:.6f}\t{z:.6f}")
    return "\n".join(lines) + "\n"


def tables():
    """The two tables as ``{file name: text}``."""
    ten_ten = ten_ten_positions()
    ten_twenty = {name: vec for name, vec in ten_ten.items() if name in TEN_TWENTY}
    return {"10-10.tsv": _table("10-10", ten_ten), "10-20.tsv": _table("10-20", ten_twenty)}


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, help="write into this folder only")
    args = parser.parse_args(argv)
    out_dirs = (args.out,) if args.out else OUT_DIRS
    for folder in out_dirs:
        folder.mkdir(parents=True, exist_ok=True)
        for name, text in tables().items():
            (folder / name).write_text(text, encoding="utf-8")
            print(f"wrote {folder / name}")


if __name__ == "__main__":
    main()
