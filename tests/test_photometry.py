"""Tests for render.light.photometry (LM-63 reading, symmetry, flux, orientation) and its sheet
(render.output.photometry_sheet: summary, text, polar plot).

Sources of the checks:
* LM-63 field order and angle conventions: ANSI/IESNA LM-63-2002 and IES LM-63-2019
  **(from memory)**; the 1986/1991 "ballast-lamp photometric factor" that LM-63-1995 turned into
  a "future use" field set to 1: Ashdown 1998, "Parsing the IESNA LM-63 photometric data file".
* Flux integrals: analytic results, Φ = ∮ I dΩ; isotropic I → 4πI; I0·cos γ on the lower
  hemisphere → πI0; hemispherical constant → 2πI.
* Quadrature of the interpolated table: scipy.integrate.quad (reference library).
* Rotations: elementary vector geometry (orthonormal matrices, known directions).
* Hostile input (counts, tilt references, overflow): the project's input rule (an InputError
  naming the file and the line) and render/limits.py; overflow of binary64 (largest finite
  about 1.8e308): IEEE 754-2019.
The files in tests/data/photometry are hand-written for these tests.
"""

from __future__ import annotations

import dataclasses
import json
import math
from pathlib import Path

import numpy as np
import pytest
from fuzzing import time_limit

from render.errors import InputError, Problem
from render.light import photometry as P
from render.output import photometry_sheet as sheet

DATA = Path(__file__).parent / "data" / "photometry"


def read(name: str) -> P.Photometry:
    return P.read_lm63(DATA / name)


def lm63_from_function(
    tmp_path: Path, func, vertical_deg, horizontal_deg=(0.0,), name="made.ies", lumens=1000.0, ptype=1
) -> P.Photometry:
    """Write an LM-63-2002 file of I = func(h, v) and read it back (exercises the parser)."""
    v = np.asarray(vertical_deg, float)
    h = np.asarray(horizontal_deg, float)
    rows = [" ".join(f"{func(hh, vv):.12g}" for vv in v) for hh in h]
    text = "\n".join(
        [
            "IESNA:LM-63-2002",
            "[TEST] generated in a test",
            "TILT=NONE",
            f"1 {lumens:g} 1 {v.size} {h.size} {ptype} 2 0 0 0",
            "1 1 0",
            " ".join(f"{a:.12g}" for a in v),
            " ".join(f"{a:.12g}" for a in h),
            *rows,
            "",
        ]
    )
    path = tmp_path / name
    path.write_text(text)
    return P.read_lm63(path)


# --------------------------------------------------------------------------------------------
# Header, keywords, editions
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "name, edition",
    [
        ("rotational_1995.ies", "LM-63-1995"),  # first line IESNA:LM-63-1995 (LM-63, from memory)
        ("quadrant_2002_feet.ies", "LM-63-2002"),  # IESNA:LM-63-2002
        ("bilateral_0_180_2019.ies", "LM-63-2019"),  # IES:LM-63-2019
        ("legacy_1986.ies", "LM-63-1986"),  # no edition line in the 1986 form
    ],
)
def test_edition_line(name, edition):
    assert read(name).edition == edition


def test_keywords_more_and_user_keys():
    # [MORE] continues the previous keyword; [_KEY] is a user keyword (LM-63-2002, from memory).
    ph = read("rotational_1995.ies")
    assert ph.keywords["LUMINAIRE"] == "rotationally symmetric, vertical 0-180\nsecond line of the luminaire text"
    assert ph.keywords["_TESTCASE"] == "rotational"
    assert ph.keywords["LUMCAT"] == "rot-1995"
    assert ph.name == "rot-1995"


def test_1986_free_text_header_and_ballast_lamp_factor():
    # 1986/1991: the second field of the electrical line is the ballast-lamp photometric factor,
    # applied to the candela (Ashdown 1998). Written values 100 80 60, factor 0.95.
    ph = read("legacy_1986.ies")
    assert ph.label_lines == ("HAND-WRITTEN TEST FILE IN THE 1986 FORM", "NO EDITION LINE, FREE TEXT LABELS")
    assert ph.ballast_lamp_factor == 0.95
    np.testing.assert_allclose(ph.file_candela_cd[0], [95.0, 76.0, 57.0])


def test_2019_file_generation_type_is_not_a_factor():
    # LM-63-2019 reuses the field as "file generation type" (1.00001 here) (from memory):
    # the written candela are used as they are.
    ph = read("bilateral_0_180_2019.ies")
    assert ph.file_generation_type == 1.00001
    assert ph.ballast_lamp_factor == 1.0
    assert P.intensity_cd(ph, 90.0, 0.0) == 150.0
    assert ph.input_watts == 20.0


def test_1995_future_use_field_read():
    ph = read("rotational_1995.ies")
    assert ph.ballast_lamp_factor == 1.0 and ph.file_generation_type is None
    assert ph.lamp_count == 1 and ph.lumens_per_lamp == 1000.0 and ph.rated_lumens_lm == 1000.0
    assert ph.input_watts == 50.0


def test_feet_converted_to_metres():
    # units type 1 = feet (LM-63); 1 ft = 0.3048 m exactly (international foot).
    ph = read("quadrant_2002_feet.ies")
    assert ph.opening_width_m == pytest.approx(0.3048)
    assert ph.opening_length_m == pytest.approx(0.6096)
    assert ph.opening_height_m == pytest.approx(0.1524)
    assert ph.opening_shape == "rectangular with luminous sides"


def test_negative_opening_sizes_mean_round_shapes():
    # LM-63-2002 sign convention (from memory): width = length < 0, height 0 -> circular.
    ph = read("bilateral_0_180_2019.ies")
    assert ph.opening_shape == "circular"
    assert ph.opening_width_m == pytest.approx(0.3)


def test_wrapped_values_with_commas():
    # LM-63: values separated by commas or white space, lines may wrap anywhere.
    ph = read("wrapped_commas.ies")
    np.testing.assert_array_equal(ph.file_vertical_deg, [0, 45, 90])
    np.testing.assert_array_equal(ph.file_horizontal_deg, [0, 90])
    np.testing.assert_array_equal(ph.file_candela_cd, [[100, 80, 60], [110, 85, 61]])
    assert ph.symmetry == "quadrant"


# --------------------------------------------------------------------------------------------
# Symmetry expansion: the expanded grid reproduces the written values at the written angles
# and their mirror images (LM-63 symmetry cases, from memory).
# --------------------------------------------------------------------------------------------

WRITTEN = {
    "rotational_1995.ies": ("rotational", [0], [0, 45, 90, 135, 180], [[100, 80, 50, 20, 0]]),
    "quadrant_2002_feet.ies": (
        "quadrant",
        [0, 45, 90],
        [0, 30, 60, 90],
        [[200, 180, 120, 10], [210, 190, 130, 15], [220, 200, 140, 20]],
    ),
    "bilateral_0_180_2019.ies": (
        "bilateral-0-180",
        [0, 90, 180],
        [0, 45, 90, 135, 180],
        [[100, 90, 60, 10, 0], [150, 120, 70, 12, 0], [80, 70, 40, 8, 0]],
    ),
    "bilateral_90_270.ies": (
        "bilateral-90-270",
        [90, 135, 180, 225, 270],
        [0, 30, 60, 90],
        [[300, 250, 150, 0], [200, 220, 180, 0], [150, 200, 240, 0], [120, 130, 100, 0], [100, 90, 50, 0]],
    ),
    "full_0_270.ies": (
        "none",
        [0, 90, 180, 270],
        [0, 45, 90],
        [[10, 20, 30], [40, 50, 60], [70, 80, 90], [100, 110, 120]],
    ),
    "full_0_360.ies": (
        "none",
        [0, 90, 180, 270, 360],
        [0, 45, 90],
        [[10, 20, 30], [40, 50, 60], [70, 80, 90], [100, 110, 120], [10, 20, 30]],
    ),
    "upward_only.ies": ("rotational", [0], [90, 120, 150, 180], [[50, 40, 20, 5]]),
}


def _mirrors(symmetry: str, c: float) -> list[float]:
    """Directions that carry the same intensity as C = c under each LM-63 symmetry."""
    if symmetry == "rotational":
        return [0.0, 37.0, 90.0, 200.0, 359.0]
    if symmetry == "quadrant":
        return [c, 180 - c, 180 + c, (360 - c) % 360]
    if symmetry == "bilateral-0-180":
        return [c, (360 - c) % 360]
    if symmetry == "bilateral-90-270":
        return [c, (180 - c) % 360]
    return [c]


@pytest.mark.parametrize("name", sorted(WRITTEN))
def test_expanded_grid_matches_written_values(name):
    symmetry, h, v, cd = WRITTEN[name]
    ph = read(name)
    assert ph.symmetry == symmetry
    assert ph.c_deg[0] == 0.0 and ph.c_deg[-1] == 360.0
    for hi, c in enumerate(h):
        for vi, g in enumerate(v):
            for cm in _mirrors(symmetry, c):
                assert P.intensity_cd(ph, cm, g) == pytest.approx(cd[hi][vi], abs=1e-9), (c, cm, g)


def test_bilateral_90_270_road_like_street_side():
    # Mirror about the C 90-270 plane maps C to 180 - C: C 0 = C 180, C 45 = C 135,
    # C 315 = C 225. Interpolation between written planes is linear in C.
    ph = read("bilateral_90_270.ies")
    assert P.intensity_cd(ph, 0.0, 60.0) == pytest.approx(240.0)
    assert P.intensity_cd(ph, 315.0, 30.0) == pytest.approx(130.0)
    assert P.intensity_cd(ph, 112.5, 0.0) == pytest.approx(250.0)  # midway 300 .. 200


def test_bilateral_90_270_without_a_c180_plane():
    # Bilateral about the C 90-270 plane (LM-63, from memory): I(C) = I(180 - C) for C in 0..90
    # and I(C) = I(540 - C) for C in 270..360. Planes 90, 150, 210, 270 with no C 180: the C 0
    # plane mirrors C 180, which the interpolation in C puts halfway between 20 and 40 cd.
    text = "IESNA:LM-63-2002\nTILT=NONE\n1 1000 1 2 4 1 2 0 0 0\n1 1 0\n0 90\n90 150 210 270\n"
    ph = P.parse_lm63(text + "10 10\n20 20\n40 40\n50 50\n")
    assert ph.symmetry == "bilateral-90-270"
    for c in (0.0, 10.0, 30.0, 60.0, 90.0):
        assert P.intensity_cd(ph, c, 0.0) == pytest.approx(P.intensity_cd(ph, 180.0 - c, 0.0), abs=1e-12)
    for c in (270.0, 300.0, 330.0, 350.0, 360.0):
        assert P.intensity_cd(ph, c, 0.0) == pytest.approx(P.intensity_cd(ph, 540.0 - c, 0.0), abs=1e-12)
    assert P.intensity_cd(ph, 0.0, 0.0) == pytest.approx(30.0)
    assert P.intensity_cd(ph, 30.0, 0.0) == pytest.approx(20.0)  # mirrors the C 150 plane


def test_full_range_wraps_periodically():
    # C 0..270 (no symmetry): between C 270 and C 360 = C 0 the table interpolates linearly.
    ph = read("full_0_270.ies")
    assert P.intensity_cd(ph, 315.0, 0.0) == pytest.approx(55.0)
    assert P.intensity_cd(ph, -45.0, 0.0) == pytest.approx(55.0)
    assert P.intensity_cd(ph, 720.0 + 45.0, 90.0) == pytest.approx(45.0)


def test_missing_hemisphere_is_zero():
    # 90-180 file (upward only): nothing below the horizontal; 0-90 file: nothing above.
    up = read("upward_only.ies")
    assert up.vertical_range == "upward"
    np.testing.assert_array_equal(P.intensity_cd(up, 0.0, [0.0, 45.0, 89.9]), 0.0)
    assert P.intensity_cd(up, 0.0, 90.0) == 50.0
    down = read("quadrant_2002_feet.ies")
    assert down.vertical_range == "downward"
    assert P.intensity_cd(down, 0.0, 90.0) == 10.0
    assert P.intensity_cd(down, 0.0, 90.5) == 0.0


def test_absolute_photometry_factors():
    # -1 lumens = absolute photometry; candela x multiplier (2.0) x ballast factor (0.9).
    ph = read("absolute_2002.ies")
    assert ph.is_absolute and ph.rated_lumens_lm is None
    np.testing.assert_allclose(ph.file_candela_cd[0], [180.0, 144.0, 108.0])
    # lumens override for absolute photometry: scaled to the requested emitted flux.
    scaled = P.scale_to_lumens(ph, 500.0)
    assert P.luminous_flux_lm(scaled) == pytest.approx(500.0, rel=1e-12)
    assert scaled.is_absolute


def test_relative_scale_to_lumens():
    # relative photometry: intensities scale with lumens / rated lumens (here 2000/1000).
    ph = read("rotational_1995.ies")
    scaled = P.scale_to_lumens(ph, 2000.0)
    assert scaled.rated_lumens_lm == 2000.0
    np.testing.assert_allclose(scaled.candela_cd, 2.0 * ph.candela_cd)
    assert P.luminous_flux_lm(scaled) == pytest.approx(2.0 * P.luminous_flux_lm(ph))
    with pytest.raises(ValueError):
        P.scale_to_lumens(ph, 0.0)


# --------------------------------------------------------------------------------------------
# Tilt
# --------------------------------------------------------------------------------------------


def test_tilt_none():
    ph = read("rotational_1995.ies")
    assert ph.tilt is None and P.tilt_factor(ph, 30.0) == 1.0


def test_tilt_include():
    # TILT=INCLUDE: geometry, count, angles, factors inline (LM-63, from memory).
    ph = read("tilt_include.ies")
    assert ph.tilt.geometry == 1 and ph.tilt.origin == "INCLUDE"
    np.testing.assert_array_equal(ph.tilt.angles_deg, [0, 15, 30, 45, 60])
    assert P.tilt_factor(ph, 22.5) == pytest.approx(0.925)  # linear between 0.95 and 0.9
    assert P.tilt_factor(ph, -30.0) == pytest.approx(0.9)
    assert P.tilt_factor(ph, 80.0) == pytest.approx(0.8)  # held at the last value
    tilted = P.apply_tilt(ph, 30.0)
    np.testing.assert_allclose(tilted.candela_cd, 0.9 * ph.candela_cd)
    np.testing.assert_array_equal(ph.file_candela_cd[0], [100, 80, 60])  # data follow the tilt block


def test_tilt_file_relative_to_photometric_file(tmp_path):
    ph = read("tilt_file.ies")
    assert ph.tilt.geometry == 2
    assert Path(ph.tilt.origin) == DATA / "tilt_file.tlt"
    assert P.tilt_factor(ph, 67.5) == pytest.approx(0.8)
    # parse_lm63 with base_dir finds the tilt file the same way
    text = (DATA / "tilt_file.ies").read_text()
    assert P.parse_lm63(text, "x.ies", base_dir=DATA).tilt.geometry == 2


# --------------------------------------------------------------------------------------------
# Malformed files: InputError naming the file and the line
# --------------------------------------------------------------------------------------------

MALFORMED = [
    ("bad_truncated.ies", 10, "truncated"),
    ("bad_nonnumeric.ies", 7, "'9O'"),
    ("bad_negative_cd.ies", 10, "negative candela"),
    ("bad_type_4.ies", 5, "unknown photometric type 4"),
    ("bad_type_a.ies", 5, "type A) is not supported"),
    ("bad_angle_order.ies", 8, "vertical angles must increase"),
    ("bad_vertical_range.ies", 7, "must start at 0 or 90"),
    ("bad_horizontal_range.ies", 8, "not one of the LM-63 symmetry cases"),
    ("bad_extra_values.ies", 12, "do not match the data"),
    ("bad_count_not_integer.ies", 5, "whole number"),
    ("bad_units.ies", 5, "units type 3"),
    ("bad_lumens_zero.ies", 5, "-1 for absolute photometry"),
    ("bad_no_tilt.ies", 8, "no TILT= line"),
    ("bad_tilt_file_missing.ies", 3, "cannot read the tilt file"),
    ("bad_tilt_truncated.ies", 7, "truncated"),
    ("bad_edition.ies", 1, "unknown LM-63 edition"),
    ("bad_type_b_range.ies", 7, "type B horizontal angles must end at 90"),
]


@pytest.mark.parametrize("name, line, fragment", MALFORMED)
def test_malformed_file_names_file_and_line(name, line, fragment):
    with pytest.raises(InputError) as info:
        read(name)
    (problem,) = info.value.problems
    assert problem.source == str(DATA / name)
    assert problem.where == f"line {line}"
    assert fragment in problem.message


def test_missing_file_is_input_error(tmp_path):
    with pytest.raises(InputError) as info:
        P.read_lm63(tmp_path / "absent.ies")
    assert "cannot read" in str(info.value)


# --------------------------------------------------------------------------------------------
# Hostile input: counts, tilt references, overflow (each names the file and the line)
# --------------------------------------------------------------------------------------------


def hostile_lm63(
    tmp_path: Path,
    *,
    tilt: str = "NONE",
    tilt_block: tuple[str, ...] = (),
    counts: str = "3 1",
    multiplier: str = "1",
    ballast: str = "1",
    candela: str = "100 80 60",
    name: str = "hostile.ies",
) -> Path:
    """A small LM-63-2002 file with one field replaced; without tilt_block its lines are
    1 edition, 2 [TEST], 3 TILT=, 4 lamps/lumens/multiplier/counts..., 5 ballast line,
    6 vertical angles, 7 horizontal angles, 8 candela."""
    lines = [
        "IESNA:LM-63-2002",
        "[TEST] hostile input test",
        f"TILT={tilt}",
        *tilt_block,
        f"1 1000 {multiplier} {counts} 1 2 0 0 0",
        f"{ballast} 1 0",
        "0 45 90",
        "0",
        candela,
        "",
    ]
    path = tmp_path / name
    path.write_bytes("\n".join(lines).encode("utf-8"))
    return path


def problem_of(path: Path, **kwargs) -> Problem:
    """The one problem reading ``path`` reports (within 10 s: a hang fails the test)."""
    with time_limit(10.0), pytest.raises(InputError) as info:
        P.read_lm63(path, **kwargs)
    (problem,) = info.value.problems
    return problem


@pytest.mark.parametrize(
    "counts, what",
    [
        ("1e300 1", "vertical angles"),
        ("1000000000000 1", "vertical angles"),
        ("3 1e300", "horizontal angles"),
        ("3 1000000000000", "horizontal angles"),
    ],
)
def test_huge_angle_count_refused_at_its_line_before_allocating(tmp_path, counts, what):
    # Counts above render.limits.MAX_LM63_ANGLES are refused at the count's line (4), before
    # any array is made (formerly "Maximum allowed dimension exceeded" / MemoryError).
    path = hostile_lm63(tmp_path, counts=counts)
    problem = problem_of(path)
    assert (problem.source, problem.where) == (str(path), "line 4")
    assert what in problem.message and "100,000" in problem.message


def test_counts_larger_than_the_data_refused_before_allocating(tmp_path):
    # Both counts within the limit, 2 x 100 000 angles present, but the 10^10 candela values
    # they call for are not: refused before the table is allocated (formerly an 80 GB array).
    path = tmp_path / "counts.ies"
    angles = " ".join(["0"] * 200_000)
    path.write_text(f"IESNA:LM-63-2002\nTILT=NONE\n1 1000 1 100000 100000 1 2 0 0 0\n1 1 0\n{angles}\n")
    problem = problem_of(path)
    assert problem.where == "line 5"  # where the data end
    assert "truncated" in problem.message and "line 3" in problem.message  # the counts' line


def test_tilt_include_huge_count_refused_at_its_line(tmp_path):
    path = hostile_lm63(tmp_path, tilt="INCLUDE", tilt_block=("1", "1e12", "0 90", "1 1"))
    problem = problem_of(path)
    assert (problem.source, problem.where) == (str(path), "line 5")
    assert "tilt angles" in problem.message and "10,000" in problem.message


def test_nul_byte_in_tilt_file_name(tmp_path):
    path = hostile_lm63(tmp_path, tilt="tilt\x00.tlt")
    problem = problem_of(path)
    assert (problem.source, problem.where) == (str(path), "line 3")
    assert "NUL" in problem.message


def test_tilt_file_must_be_a_regular_file(tmp_path):
    # TILT=/dev/zero formerly read without end; a device, a pipe or a folder is refused.
    target = "/dev/zero" if Path("/dev/zero").exists() else str(tmp_path)
    path = hostile_lm63(tmp_path, tilt=target)
    problem = problem_of(path)
    assert (problem.source, problem.where) == (str(path), "line 3")
    assert "not a regular file" in problem.message


def test_tilt_file_size_is_capped(tmp_path):
    # render.limits: a tilt file is read only up to 1 MiB.
    (tmp_path / "big.tlt").write_bytes(b" " * (1024 * 1024 + 1))
    path = hostile_lm63(tmp_path, tilt="big.tlt")
    problem = problem_of(path)
    assert (problem.source, problem.where) == (str(path), "line 3")
    assert "1,048,577 bytes" in problem.message


@pytest.mark.parametrize(
    "content, line",
    [
        ("SECRET-TOKEN:x:0:0:root:/root\n", 1),  # not a number at all
        ("2\nSECRET-TOKEN\n", 2),
        ("2\n3.25\n0 90\n1 1\n", 2),  # a count that is not whole: its value is not shown either
        ("7\n", 1),  # geometry out of range
    ],
)
def test_tilt_file_content_is_never_quoted(tmp_path, content, line):
    # Messages about a tilt file say what was expected and at which line, never what is there:
    # TILT= may name any file (formerly TILT=/etc/passwd printed its first line).
    secret = tmp_path / "elsewhere" / "secret.txt"
    secret.parent.mkdir()
    secret.write_text(content)
    path = hostile_lm63(tmp_path, tilt=str(secret))  # an absolute path: allowed unless strict
    problem = problem_of(path)
    assert (problem.source, problem.where) == (str(secret), f"line {line}")
    assert f"line 3 of {path}" in problem.message  # where the tilt file was named
    for text in ("SECRET", "root", "3.25", "7"):
        assert text not in problem.message.replace(str(path), "").replace(str(secret), "")


@pytest.mark.skipif(not Path("/etc/passwd").is_file(), reason="no /etc/passwd on this system")
def test_tilt_etc_passwd_is_not_echoed(tmp_path):
    path = hostile_lm63(tmp_path, tilt="/etc/passwd")
    problem = problem_of(path)
    assert "root:" not in str(problem) and problem.where.startswith("line ")


def test_strict_paths_keep_tilt_files_inside_the_allowed_root(tmp_path):
    scene_dir = tmp_path / "scene"
    scene_dir.mkdir()
    tilt_text = "1\n2\n0 90\n1 0.5\n"
    (tmp_path / "outside.tlt").write_text(tilt_text)
    (scene_dir / "inside.tlt").write_text(tilt_text)
    (scene_dir / "link.tlt").symlink_to(tmp_path / "outside.tlt")
    outside = hostile_lm63(scene_dir, tilt="../outside.tlt", name="outside.ies")
    absolute_inside = hostile_lm63(scene_dir, tilt=str(scene_dir / "inside.tlt"), name="abs.ies")
    link = hostile_lm63(scene_dir, tilt="link.tlt", name="link.ies")
    # By default (not strict) a tilt file may be anywhere, relative or absolute.
    for path in (outside, absolute_inside, link):
        assert P.read_lm63(path).tilt.factors[-1] == 0.5
    # Strict: the resolved tilt file must lie inside allowed_root (a symlink out does not count).
    assert P.read_lm63(absolute_inside, allowed_root=scene_dir).tilt.geometry == 1
    for path in (outside, link):
        problem = problem_of(path, allowed_root=scene_dir)
        assert (problem.source, problem.where) == (str(path), "line 3")
        assert "outside" in problem.message and str(scene_dir.resolve()) in problem.message
    # The photometric file itself is held to the same root.
    problem = problem_of(absolute_inside, allowed_root=tmp_path / "elsewhere")
    assert problem.source == str(absolute_inside) and "outside" in problem.message


def test_candela_overflowing_after_the_multiplier(tmp_path):
    # 1e308 is a finite double, x 10 is not (IEEE 754): refused at the value's line, after scaling.
    path = hostile_lm63(tmp_path, multiplier="10", candela="100 1e308 60")
    problem = problem_of(path)
    assert (problem.source, problem.where) == (str(path), "line 8")
    assert "1e+308" in problem.message and "finite" in problem.message


def test_factors_overflowing_together(tmp_path):
    # multiplier x ballast factor overflows although each is finite: the multiplier's line.
    path = hostile_lm63(tmp_path, multiplier="1e300", ballast="1e10", candela="0 0 0")
    problem = problem_of(path)
    assert (problem.source, problem.where) == (str(path), "line 4")
    assert "finite" in problem.message


def test_candela_too_large_for_a_finite_flux(tmp_path):
    # A finite table whose flux (about 4 pi x peak) is not a finite double cannot be scaled or
    # integrated: refused at the peak's line.
    path = hostile_lm63(tmp_path, candela="100 1e308 60")
    problem = problem_of(path)
    assert (problem.source, problem.where) == (str(path), "line 8")
    assert "flux" in problem.message


@pytest.mark.parametrize(
    "field, value, line, fragment",
    [
        # LM-63 (from memory): the candela multiplier and the ballast factor are positive
        # factors, candela values are intensities (>= 0); zero candela is allowed.
        ("multiplier", "0", 4, "candela multiplier > 0"),
        ("multiplier", "-1", 4, "candela multiplier > 0"),
        ("ballast", "0", 5, "ballast factor > 0"),
        ("ballast", "-0.9", 5, "ballast factor > 0"),
        ("candela", "100 -1 60", 8, "negative candela"),
        ("candela", "100 nan 60", 8, "finite number"),
        ("candela", "100 -inf 60", 8, "finite number"),
    ],
)
def test_factor_and_candela_signs(tmp_path, field, value, line, fragment):
    path = hostile_lm63(tmp_path, **{field: value})
    problem = problem_of(path)
    assert (problem.source, problem.where) == (str(path), f"line {line}")
    assert fragment in problem.message


@pytest.mark.parametrize("angles", ["0 5e-324 90", "0 1e-9 90", "0 90 90.0000001"])
def test_angles_closer_than_the_angle_tolerance(tmp_path, angles):
    # Found by the fuzz suite: vertical angles 0 and 5e-324 (distinct doubles, equal in
    # radians) gave a NaN flux. Angles closer than model.ANGLE_TOL_DEG are the same angle.
    path = hostile_lm63(tmp_path)
    path.write_text(path.read_text().replace("0 45 90", angles))
    problem = problem_of(path)
    assert (problem.source, problem.where) == (str(path), "line 6")
    assert "vertical angles must increase" in problem.message


def test_scale_to_lumens_refuses_a_scale_that_overflows(tmp_path):
    # Rated flux 1e-300 lm scaled to 1e10 lm: a factor of 1e310 is not a finite double (IEEE 754).
    ph = P.read_lm63(hostile_lm63(tmp_path, candela="100 80 60"))
    tiny = dataclasses.replace(ph, lumens_per_lamp=1e-300)
    with pytest.raises(ValueError, match="finite"):
        P.scale_to_lumens(tiny, 1e10)
    assert np.all(np.isfinite(P.scale_to_lumens(ph, 1e10).candela_cd))


def test_zero_candela_values_are_allowed(tmp_path):
    assert P.read_lm63(hostile_lm63(tmp_path, candela="0 0 0")).candela_cd.max() == 0.0


def test_load_photometry_passes_strict_paths_down(tmp_path):
    path = hostile_lm63(tmp_path)
    assert P.load_photometry(path.name, base_dir=tmp_path, allowed_root=tmp_path).edition == "LM-63-2002"
    with pytest.raises(InputError, match="outside"):
        P.load_photometry(path.name, base_dir=tmp_path, allowed_root=tmp_path / "sub")
    assert P.load_photometry("generic-isotropic", allowed_root=tmp_path).symmetry == "rotational"


_HEAD = "IESNA:LM-63-2002\n[TEST] x\nTILT=NONE\n"


@pytest.mark.parametrize(
    "body, line, fragments",
    [
        # 5 vertical angles declared (line 4), 3 written on line 6: the angle line is named.
        ("1 1000 1 5 1 1 2 0 0 0\n1 1 0\n0 45 90\n0\n100 90 80 70 60\n", 6, ["3 vertical angles", "line 4 declares 5"]),
        # 3 horizontal angles declared, 2 written on line 7 (the next value, 1000, is above 360°).
        (
            "1 1000 1 3 3 1 2 0 0 0\n1 1 0\n0 45 90\n0 90\n1000 800 600\n1100 850 610\n",
            7,
            ["2 horizontal angles", "line 4 declares 3"],
        ),
    ],
)
def test_fewer_angles_than_declared_names_the_angle_line(tmp_path, body, line, fragments):
    # The angle lines' own count is the mistake; the old message named only the end of the file
    # and the count line (project rule: errors name the line at fault; no outside source).
    path = tmp_path / "short.ies"
    path.write_text(_HEAD + body)
    with pytest.raises(InputError) as err:
        P.read_lm63(path)
    message = str(err.value)
    assert f"line {line}:" in message and all(f in message for f in fragments), message


@pytest.mark.parametrize(
    "text, looks_like",
    [
        # EULUMDAT head: company, Ityp, Isym, Mc, Dc, Ng, Dg, ... (P. Bourke, "ldt EULUMDAT file format")
        ("maker\n1\n1\n1\n0\n3\n45\nreport\nname\n" + "0\n" * 30, "EULUMDAT"),
        ('<?xml version="1.0"?>\n<LuminaireOpticalData/>\n', "XML"),
        ("CIBSE TM14 photometric data\n1 2 3\n", "TM14"),
    ],
)
def test_other_formats_given_to_the_lm63_reader_are_named(tmp_path, text, looks_like):
    path = tmp_path / "other.ies"
    path.write_text(text)
    with pytest.raises(InputError, match=f"line 1: this looks like .*{looks_like}.*not an LM-63 file"):
        P.read_lm63(path)


@pytest.mark.parametrize("ref", ["/dev/zero", "folder", "bad\x00name.ies"])
def test_load_photometry_explains_files_it_will_not_read(tmp_path, ref):
    (tmp_path / "folder").mkdir()
    if ref == "/dev/zero" and not Path(ref).exists():
        pytest.skip("no /dev/zero on this system")
    with time_limit(10.0), pytest.raises(InputError) as info:
        P.load_photometry(ref, base_dir=tmp_path)
    assert "not a regular file" in str(info.value) or "NUL" in str(info.value)


def test_many_more_lines_do_not_hang(tmp_path):
    # A hang guard, not a speed test: each [MORE] line formerly copied the whole keyword value
    # read so far (quadratic; 200 000 lines ran past the 10 s guard).
    path = tmp_path / "more.ies"
    more = "[MORE] abcdefgh\n" * 200_000
    path.write_text(f"IESNA:LM-63-2002\n[TEST] x\n{more}TILT=NONE\n1 1000 1 3 1 1 2 0 0 0\n1 1 0\n0 45 90\n0\n1 2 3\n")
    with time_limit(10.0):
        ph = P.read_lm63(path)
    assert ph.keywords["TEST"] == "x" + "\nabcdefgh" * 200_000


# --------------------------------------------------------------------------------------------
# Flux, ULOR, peak
# --------------------------------------------------------------------------------------------


def test_isotropic_flux_is_4_pi_i(tmp_path):
    # analytic: Φ = ∮ I dΩ = 4π I for constant I; half of it above the horizontal.
    ph = lm63_from_function(tmp_path, lambda h, v: 123.0, np.arange(0, 181, 7.5))
    assert P.luminous_flux_lm(ph) == pytest.approx(4 * math.pi * 123.0, rel=1e-12)
    assert P.ulor(ph) == pytest.approx(0.5, abs=1e-12)


def test_builtin_isotropic():
    ph = P.load_photometry("generic-isotropic")
    i_cd = float(ph.candela_cd[0, 0])
    assert np.all(ph.candela_cd == i_cd)
    assert P.luminous_flux_lm(ph) == pytest.approx(4 * math.pi * i_cd, rel=1e-12)  # analytic 4πI
    assert P.ulor(ph) == pytest.approx(0.5, abs=1e-12)
    assert P.luminous_flux_lm(ph) == pytest.approx(ph.rated_lumens_lm, rel=1e-6)


@pytest.mark.parametrize("step_deg, rel", [(5.0, 1e-3), (2.5, 2.5e-4), (0.5, 1e-5)])
def test_lambertian_flux_is_pi_i0(tmp_path, step_deg, rel):
    # analytic: ∫0^2π ∫0^π/2 I0 cos γ sin γ dγ dC = π I0. The table is the piecewise-linear
    # interpolant of cos γ, so the error falls as step²: |error| ≤ step²/8 · I0 pointwise
    # (linear interpolation bound), which gives the tolerances used.
    i0 = 800.0
    ph = lm63_from_function(
        tmp_path,
        lambda h, v: i0 * math.cos(math.radians(v)),
        np.linspace(0, 90, int(round(90 / step_deg)) + 1),
        horizontal_deg=(0, 90),
    )
    assert P.luminous_flux_lm(ph) == pytest.approx(math.pi * i0, rel=rel)
    assert P.ulor(ph) == 0.0


def test_flux_matches_scipy_quadrature_of_the_interpolant():
    # scipy.integrate.quad over the interpolated table must agree with the exact cell formula.
    from scipy.integrate import dblquad

    ph = read("bilateral_90_270.ies")
    ref, _ = dblquad(
        lambda g, c: P.intensity_cd(ph, math.degrees(c), math.degrees(g)) * math.sin(g),
        0.0,
        2 * math.pi,
        0.0,
        math.pi / 2,
        epsabs=1e-6,
        epsrel=1e-9,
    )
    assert P.luminous_flux_lm(ph) == pytest.approx(ref, rel=1e-6)


def test_zonal_flux_with_a_split_inside_a_cell():
    # a zone limit inside a table cell (60° in the 45..90 cell): the partial-cell formula must
    # agree with scipy.integrate.quad of the interpolated table (times 2π: one C plane).
    import scipy.integrate

    ph = read("rotational_1995.ies")
    lower, _ = scipy.integrate.quad(
        lambda g: P.intensity_cd(ph, 0.0, math.degrees(g)) * math.sin(g),
        0.0,
        math.radians(60.0),
        points=[math.radians(45.0)],
    )
    assert P.zonal_flux_lm(ph, 0.0, 60.0) == pytest.approx(2 * math.pi * lower, rel=1e-9)


def test_builtin_full_cutoff_has_no_uplight():
    # ULOR = Φ(γ > 90°)/Φ: a table that ends at γ = 90° with I(90°) = 0 has none.
    ph = P.load_photometry("generic-full-cutoff")
    assert ph.vertical_range == "downward"
    assert np.all(ph.candela_cd[:, -1] == 0.0)
    assert P.ulor(ph) == 0.0
    assert ph.symmetry == "quadrant"


def test_builtin_post_top_has_some_uplight():
    ph = P.load_photometry("generic-post-top")
    assert ph.symmetry == "rotational"
    assert 0.05 < P.ulor(ph) < 0.3


def test_builtin_road_optic_properties():
    # Properties the README states for the road model: cut off above 80°, more flux to the
    # street side (C 0..180, y > 0) than to the house side, symmetric along the road.
    ph = P.load_photometry("generic-road-asymmetric")
    assert np.all(P.intensity_cd(ph, np.arange(0, 360, 5.0), 80.0) == 0.0)
    assert P.ulor(ph) == 0.0
    c = np.arange(0.0, 360.0, 1.0)
    g = np.arange(0.0, 90.0, 1.0)
    cc, gg = np.meshgrid(c, g, indexing="ij")
    dense = P.intensity_cd(ph, cc, gg) * np.sin(np.radians(gg))
    street = dense[(cc > 0) & (cc < 180)].sum()
    house = dense[cc > 180].sum()
    assert street > 1.5 * house
    np.testing.assert_allclose(P.intensity_cd(ph, 30.0, g), P.intensity_cd(ph, 150.0, g), rtol=1e-6)


@pytest.mark.parametrize(
    "ident", ["generic-road-asymmetric", "generic-post-top", "generic-full-cutoff", "generic-isotropic"]
)
def test_builtin_files_are_generic_and_integrate_to_rated_lumens(ident):
    ph = P.load_photometry(ident)
    assert "not a product" in ph.keywords["TEST"] and "not a product" in ph.keywords["MANUFAC"]
    # the README's convention: rated lumens = emitted flux (values rounded to 1e-5 cd)
    assert P.luminous_flux_lm(ph) == pytest.approx(ph.rated_lumens_lm, rel=1e-6)


def test_builtin_files_regenerate_identically(monkeypatch):
    # provenance: the shipped files are exactly what the documented models produce
    import importlib.util
    import sys

    spec = importlib.util.spec_from_file_location(
        "make_generic_photometry", Path(__file__).parents[1] / "tools" / "make_generic_photometry.py"
    )
    tool = importlib.util.module_from_spec(spec)
    monkeypatch.setitem(sys.modules, spec.name, tool)  # dataclasses look their module up there
    spec.loader.exec_module(tool)
    for ident, text in tool.build_all().items():
        assert (P.BUILTIN_PHOTOMETRY_DIR / f"{ident}.ies").read_text() == text, ident


def test_peak_intensity():
    ph = read("bilateral_90_270.ies")
    assert P.peak_intensity(ph) == (300.0, 90.0, 0.0)


# --------------------------------------------------------------------------------------------
# Orientation
# --------------------------------------------------------------------------------------------


def test_rotation_matrix_is_proper_orthonormal():
    for rot, tilt in [(0, 0), (37, 12), (-120, -25), (180, 90)]:
        r = P.luminaire_rotation(rot, tilt)
        np.testing.assert_allclose(r @ r.T, np.eye(3), atol=1e-14)
        assert np.linalg.det(r) == pytest.approx(1.0)


def test_world_to_c_gamma_basic_directions():
    r = P.luminaire_rotation(0.0, 0.0)
    c, g = P.world_to_c_gamma([[0, 0, -1], [0, 1, 0], [1, 0, 0], [0, 0, 1], [-1, 0, -1]], r)
    np.testing.assert_allclose(g, [0, 90, 90, 180, 45], atol=1e-12)  # straight down = γ 0
    np.testing.assert_allclose(c[1:3], [90, 0], atol=1e-12)  # local +y = C 90, γ 90
    assert c[4] == pytest.approx(180.0)


def test_rotation_about_vertical():
    # rotation 90° anticlockwise: the luminaire's C 90 (street side) points to world -x.
    r = P.luminaire_rotation(90.0, 0.0)
    c, g = P.world_to_c_gamma([[-1.0, 0.0, 0.0], [0.0, 1.0, 0.0]], r)
    np.testing.assert_allclose(c, [90.0, 0.0], atol=1e-9)
    np.testing.assert_allclose(g, [90.0, 90.0], atol=1e-9)


def test_tilt_raises_the_street_side():
    # tilt 20°: the optic's nadir axis swings toward C 90 (world +y); world straight down is
    # then 20° from the axis on the house side (C 270).
    r = P.luminaire_rotation(0.0, 20.0)
    axis = r @ np.array([0.0, 0.0, -1.0])
    assert axis[1] > 0 and axis[2] == pytest.approx(-math.cos(math.radians(20)))
    c, g = P.world_to_c_gamma([axis, [0.0, 0.0, -1.0]], r)
    assert g[0] == pytest.approx(0.0, abs=1e-9)
    assert (c[1], g[1]) == (pytest.approx(270.0), pytest.approx(20.0))
    # the street-side edge of the opening (local +y) rises
    assert (r @ np.array([0.0, 1.0, 0.0]))[2] > 0


def test_rotation_and_tilt_combined():
    # tilt is about the luminaire's own x axis, then the whole luminaire turns: with rotation
    # 90° the street side is world -x, so a 20° tilt swings the nadir axis toward -x.
    s, c = math.sin(math.radians(20)), math.cos(math.radians(20))
    r = P.luminaire_rotation(90.0, 20.0)
    np.testing.assert_allclose(r @ np.array([0.0, 0.0, -1.0]), [-s, 0.0, -c], atol=1e-12)
    cc, gg = P.world_to_c_gamma([[-s, 0.0, -c], [0.0, 1.0, 0.0]], r)
    assert gg[0] == pytest.approx(0.0, abs=1e-9)
    # the tilt axis (local x, C 0) is untouched by the tilt and turned to world +y
    assert (cc[1], gg[1]) == (pytest.approx(0.0, abs=1e-9), pytest.approx(90.0))


def test_numba_kernels_agree_with_numpy():
    rng = np.random.default_rng(4)
    d = rng.normal(size=(200, 3))
    r = P.luminaire_rotation(33.0, 17.0)
    c, g = P.world_to_c_gamma(d, r)
    ph = read("bilateral_90_270.ies")
    tables = P.lookup_tables(ph)
    ref = P.intensity_cd(ph, c, g)
    for k in range(len(d)):
        ck, gk = P.direction_to_c_gamma(r, *d[k])
        assert (ck, gk) == (pytest.approx(c[k], abs=1e-9), pytest.approx(g[k], abs=1e-9))
        assert P.intensity_lookup(*tables, ck, gk) == pytest.approx(ref[k], abs=1e-9)
        assert P.intensity_toward(r, *tables, *d[k]) == pytest.approx(ref[k], abs=1e-9)


# --------------------------------------------------------------------------------------------
# Type B
# --------------------------------------------------------------------------------------------


def test_type_b_values_on_the_axes():
    # H = V = 0 is the beam axis (γ 0); V toward C 90, H toward C 0 (lampcast's placement).
    ph = read("type_b_2002.ies")
    assert ph.photometric_type == "B" and ph.symmetry == "b-h"
    assert P.intensity_cd(ph, 0.0, 0.0) == pytest.approx(100.0)
    assert P.intensity_cd(ph, 90.0, 45.0) == pytest.approx(60.0)  # H 0, V +45
    assert P.intensity_cd(ph, 270.0, 45.0) == pytest.approx(50.0)  # H 0, V -45
    assert P.intensity_cd(ph, 0.0, 30.0) == pytest.approx(80.0)  # H +30, V 0
    assert P.intensity_cd(ph, 180.0, 30.0) == pytest.approx(80.0)  # H -30 mirrored
    assert P.intensity_cd(ph, 0.0, 120.0) == 0.0  # behind the floodlight


def test_type_b_angle_conversion_round_trip():
    h = np.array([0.0, 30.0, -60.0, 10.0, 89.0])
    v = np.array([0.0, 45.0, -20.0, -80.0, 5.0])
    c, g = P.type_b_to_c_gamma(h, v)
    h2, v2 = P.c_gamma_to_type_b(c, g)
    np.testing.assert_allclose(h2, h, atol=1e-9)
    np.testing.assert_allclose(v2, v, atol=1e-9)


def test_type_b_floodlight_at_tilt_90_is_in_its_test_position():
    # aimed with tilt 90°, the beam is horizontal toward world +y and V = +30° points 30° up.
    c, g = P.type_b_to_c_gamma(0.0, 30.0)
    d_local = P.c_gamma_to_direction(c, g)
    d_world = P.luminaire_rotation(0.0, 90.0) @ d_local
    np.testing.assert_allclose(d_world, [0.0, math.cos(math.radians(30)), math.sin(math.radians(30))], atol=1e-12)


def test_type_b_hemisphere_fluxes(tmp_path):
    # constant I over the front hemisphere -> 2πI; I0 cos H cos V = I0 cos(angle from the beam)
    # -> π I0 (analytic). The resampled table must keep these within the interpolation error.
    v = np.arange(-90.0, 90.1, 5.0)
    const = lm63_from_function(
        tmp_path, lambda h, vv: 50.0, v, horizontal_deg=np.arange(-90.0, 90.1, 5.0), name="b1.ies", ptype=2
    )
    assert P.luminous_flux_lm(const) == pytest.approx(2 * math.pi * 50.0, rel=1e-9)
    lam = lm63_from_function(
        tmp_path,
        lambda h, vv: 50.0 * math.cos(math.radians(h)) * math.cos(math.radians(vv)),
        np.arange(0.0, 90.1, 2.5),
        horizontal_deg=np.arange(0.0, 90.1, 2.5),
        name="b2.ies",
        ptype=2,
    )
    assert lam.symmetry == "b-hv"
    assert P.luminous_flux_lm(lam) == pytest.approx(math.pi * 50.0, rel=2e-3)


# --------------------------------------------------------------------------------------------
# Loading by id, summary, plot
# --------------------------------------------------------------------------------------------


def test_builtin_ids_and_loading(tmp_path):
    ids = P.builtin_photometry_ids()
    assert ids == ["generic-full-cutoff", "generic-isotropic", "generic-post-top", "generic-road-asymmetric"]
    assert P.load_photometry("rotational_1995.ies", base_dir=DATA).edition == "LM-63-1995"
    assert P.load_photometry(DATA / "upward_only.ies").vertical_range == "upward"
    with pytest.raises(InputError) as info:
        P.load_photometry("generic-road-asymetric")
    assert "did you mean 'generic-road-asymmetric'" in str(info.value)


def test_summary_and_text():
    summary = sheet.summarise(P.load_photometry("generic-isotropic"))
    s = summary.to_json()
    assert json.loads(json.dumps(s)) == s  # plain JSON values (common practice, no source)
    assert s["flux_ratio"] == pytest.approx(1.0, abs=1e-6)
    assert s["ulor"] == pytest.approx(0.5)
    assert s["symmetry"] == "rotational" and s["photometric_type"] == "C"
    text = sheet.format_summary(summary)
    assert "ULOR" in text and "1000.0 lm" in text
    absolute = sheet.format_summary(sheet.summarise(read("absolute_2002.ies")))
    assert "absolute photometry" in absolute


@pytest.mark.parametrize(
    "ref", ["generic-road-asymmetric", "generic-isotropic", "absolute_2002.ies", "bilateral_90_270.ies"]
)
def test_polar_plot_outer_ring_above_the_peak_and_planes_named(ref):
    # The whole curve must lie inside the outer ring (the peak below or on the outermost radial
    # tick), the rings at round values, and the legend must name the C-planes drawn; the title
    # and alt text state the file and the peak (common practice for data sheets, no source).
    ph = P.load_photometry(ref, base_dir=DATA)
    fig, alt = sheet.polar_figure(ph)
    ax = fig.axes[0]
    k = 1.0 if ph.is_absolute else 1000.0 / ph.rated_lumens_lm
    peak = P.peak_intensity(ph)[0] * k
    ticks = [t for t in ax.get_yticks() if t <= ax.get_ylim()[1] + 1e-9]
    assert ticks[-1] >= peak and ax.get_ylim()[1] == ticks[-1]
    step = ticks[1] - ticks[0]
    mantissa = step / 10 ** math.floor(math.log10(step))
    assert any(abs(mantissa - m) < 1e-9 for m in (1, 2, 2.5, 5))  # a round ring step
    assert ticks[-1] / step == pytest.approx(round(ticks[-1] / step), abs=1e-9)  # rings at its multiples
    assert [t.get_text() for t in ax.get_legend().get_texts()] == ["C0–C180", "C90–C270"]
    assert Path(ph.source).name in alt and f"{peak:.4g}" in alt and "C0–C180" in alt
    assert f"{peak:.4g}" in ax.get_title()


def test_round_ring_above():
    # round values (1, 2, 2.5, 5 × 10^k steps) strictly above the value; arithmetic, no source
    assert sheet.round_ring_above(1234.0) == (1400.0, 200.0)
    assert sheet.round_ring_above(100.0) == (120.0, 20.0)
    assert sheet.round_ring_above(0.0) == (1.0, 0.25)


def test_plot_polar_writes_png_atomically(tmp_path):
    out = tmp_path / "plots" / "road.png"
    sheet.plot_polar(P.load_photometry("generic-road-asymmetric"), out)
    assert out.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert [p.name for p in out.parent.iterdir()] == ["road.png"]  # no temporary file left
    text = sheet.describe_photometry_file("absolute_2002.ies", base_dir=DATA, plot_path=tmp_path / "abs.png")
    assert (tmp_path / "abs.png").is_file() and "polar plot" in text
