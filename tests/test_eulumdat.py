"""Tests of the EULUMDAT reader (render.light.photometry.eulumdat) and format dispatch.

Sources of the checks:

* Line layout and the stored C-planes per symmetry indicator: EULUMDAT as described by
  P. Bourke, "ldt EULUMDAT file format" (2021), and the field lists of the open-source EULUMDAT
  readers' documentation (see the module's References); the meaning of a negative number of
  lamps **from memory**.
* Flux integrals, analytic: isotropic I → Φ = 4πI; I0·cos γ over the lower hemisphere →
  Φ = πI0 (the table is the piecewise-linear interpolant of cos γ: error ≤ step²/8 · I0
  pointwise, which gives the tolerances used, as in tests/test_photometry.py).
* Cross-check against the LM-63 reader (ANSI/IESNA LM-63-2002, from memory) for the same
  distribution written in both formats, to the printed precision of the files.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from render.errors import InputError
from render.light import photometry as P
from render.limits import MAX_EULUMDAT_ANGLES

DATA = Path(__file__).parent / "data" / "photometry"

#: C-planes stored for each symmetry indicator (index into the Mc planes; Bourke 2021).
_STORED = {
    0: lambda mc: list(range(mc)),
    1: lambda mc: [0],
    2: lambda mc: list(range(mc // 2 + 1)),
    3: lambda mc: [(3 * mc // 4 + j) % mc for j in range(mc // 2 + 1)],
    4: lambda mc: list(range(mc // 4 + 1)),
}


def ldt_text(
    func,
    isym: int,
    mc: int = 24,
    gamma_deg=None,
    flux_lm: float = 1000.0,
    n_lamps: int = 1,
    cfli: float = 1.0,
    decimal_comma: bool = False,
) -> str:
    """EULUMDAT text of I(C, γ) = func(C, γ) in cd/klm (one field per line, Bourke 2021 order)."""
    c = np.arange(mc) * (360.0 / mc)
    g = np.arange(0, 181, 5.0) if gamma_deg is None else np.asarray(gamma_deg, float)

    def num(x: float) -> str:
        s = f"{x:.10g}"
        return s.replace(".", ",") if decimal_comma else s

    lines = [
        "lampcast test data",  # 1 company
        "1",  # 2 Ityp
        str(isym),  # 3 Isym
        str(mc),  # 4 Mc
        num(360.0 / mc),  # 5 Dc
        str(g.size),  # 6 Ng
        num(float(g[1] - g[0])),  # 7 Dg
        "report 1",  # 8
        "test luminaire",  # 9
        "TL-1",  # 10
        "test.ldt",  # 11
        "2026-12-02 test",  # 12
        "500",  # 13 length
        "200",  # 14 width
        "100",  # 15 height
        "400",  # 16 luminous length
        "0",  # 17 luminous width: circular
        "0",  # 18-21 luminous heights
        "0",
        "0",
        "0",
        "50",  # 22 DFF
        "80",  # 23 LORL
        num(cfli),  # 24 CFLI
        "0",  # 25 tilt
        "1",  # 26 lamp sets
        str(n_lamps),  # 26a
        "LED module",  # 26b
        num(flux_lm),  # 26c
        "3000",  # 26d
        "80",  # 26e
        "30",  # 26f
        *["0.5"] * 10,  # 27 direct ratios
        *[num(a) for a in c],
        *[num(a) for a in g],
    ]
    for k in _STORED[isym](mc):
        lines += [num(func(c[k], gg)) for gg in g]
    return "\n".join(lines) + "\n"


def write(tmp_path: Path, text: str, name: str = "made.ldt") -> Path:
    path = tmp_path / name
    path.write_text(text)
    return path


def read_text(tmp_path: Path, text: str, name: str = "made.ldt") -> P.Photometry:
    return P.read_eulumdat(write(tmp_path, text, name))


def cosine(c: float, g: float) -> float:
    return 800.0 * math.cos(math.radians(g)) if g < 90 else 0.0  # exactly 0 from γ = 90°


def road(c: float, g: float) -> float:
    """An asymmetric test distribution (no symmetry), smooth in C and γ."""
    return 300.0 + 100.0 * math.sin(math.radians(c)) * math.sin(math.radians(g)) + 50.0 * math.cos(math.radians(c))


# --------------------------------------------------------------------------------------------
# Hand-written files
# --------------------------------------------------------------------------------------------


def test_hand_written_isotropic_file():
    # 100 cd/klm with 2000 lm of lamps: 200 cd everywhere; Φ = 4π · 200 (analytic).
    ph = P.read_eulumdat(DATA / "isotropic_isym1.ldt")
    assert ph.edition == "EULUMDAT"
    assert ph.symmetry == "rotational"
    assert np.all(ph.candela_cd == 200.0)
    assert P.luminous_flux_lm(ph) == pytest.approx(4 * math.pi * 200.0, rel=1e-12)
    assert ph.rated_lumens_lm == 2000.0 and ph.lamp_count == 2
    assert ph.input_watts == 24.0
    assert ph.keywords["LUMINAIRE"] == "isotropic test source"


def test_hand_written_cosine_file():
    # I = 1000 cd/klm · cos γ (γ ≤ 90) with 1000 lm, Isym 4, 5° steps: Φ = π · 1000 within
    # step²/8 (5° = 0.0873 rad: 9.5e-4 relative).
    ph = P.read_eulumdat(DATA / "cosine_isym4.ldt")
    assert ph.symmetry == "quadrant"
    assert P.luminous_flux_lm(ph) == pytest.approx(math.pi * 1000.0, rel=1e-3)
    assert P.ulor(ph) == 0.0
    assert P.intensity_cd(ph, 200.0, 60.0) == pytest.approx(500.0, rel=1e-4)  # cos 60° = 0.5 (4 digits printed)


# --------------------------------------------------------------------------------------------
# Analytic flux under every symmetry indicator
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize("isym", [0, 1, 2, 3, 4])
def test_isotropic_flux_under_each_symmetry(tmp_path, isym):
    ph = read_text(tmp_path, ldt_text(lambda c, g: 150.0, isym, flux_lm=2000.0))
    assert np.all(ph.candela_cd == 300.0)  # 150 cd/klm × 2000 lm / 1000
    assert P.luminous_flux_lm(ph) == pytest.approx(4 * math.pi * 300.0, rel=1e-12)
    assert ph.symmetry == {0: "none", 1: "rotational", 2: "bilateral-0-180", 3: "bilateral-90-270", 4: "quadrant"}[isym]


@pytest.mark.parametrize("isym", [0, 1, 2, 3, 4])
@pytest.mark.parametrize("step_deg, rel", [(5.0, 1e-3), (1.0, 5e-5)])
def test_cosine_flux_under_each_symmetry(tmp_path, isym, step_deg, rel):
    g = np.linspace(0, 180, int(round(180 / step_deg)) + 1)
    ph = read_text(tmp_path, ldt_text(cosine, isym, gamma_deg=g))
    assert P.luminous_flux_lm(ph) == pytest.approx(math.pi * 800.0, rel=rel)
    assert P.zonal_flux_lm(ph, 90.0, 180.0) == 0.0


@pytest.mark.parametrize("isym", [2, 3])
def test_symmetric_halves_mirror_to_the_whole(tmp_path, isym):
    # A distribution symmetric about the plane of the indicator, written with only the stored
    # planes, must equal the same distribution written in full (Isym 0) everywhere.
    if isym == 2:  # symmetric about C0-C180: I(C) = I(-C)

        def f(c, g):
            return 300.0 + 100.0 * math.cos(math.radians(c)) * math.sin(math.radians(g))
    else:  # symmetric about C90-C270: I(C) = I(180 - C)

        def f(c, g):
            return 300.0 + 100.0 * math.sin(math.radians(c)) * math.sin(math.radians(g))

    half = read_text(tmp_path, ldt_text(f, isym), "half.ldt")
    full = read_text(tmp_path, ldt_text(f, 0), "full.ldt")
    cc, gg = np.meshgrid(np.arange(0, 360, 7.5), np.arange(0, 181, 2.5), indexing="ij")
    np.testing.assert_allclose(P.intensity_cd(half, cc, gg), P.intensity_cd(full, cc, gg), rtol=1e-12)
    assert P.luminous_flux_lm(half) == pytest.approx(P.luminous_flux_lm(full), rel=1e-12)


def test_c90_c270_symmetry_reads_the_c0_side(tmp_path):
    # Isym 3 stores C270 .. C0 .. C90 (Bourke 2021): the C0 value must appear at C0 and C180.
    ph = read_text(tmp_path, ldt_text(lambda c, g: 100.0 + math.cos(math.radians(c)) * 50.0, 3))
    assert P.intensity_cd(ph, 0.0, 45.0) == pytest.approx(150.0)
    assert P.intensity_cd(ph, 180.0, 45.0) == pytest.approx(150.0)
    assert P.intensity_cd(ph, 90.0, 45.0) == pytest.approx(100.0)


def test_decimal_commas_and_factors(tmp_path):
    # CFLI 1.5, 3 lamps with 3000 lm in total: I = 100 × 1.5 × 3000/1000 = 450 cd.
    ph = read_text(tmp_path, ldt_text(lambda c, g: 100.0, 1, cfli=1.5, flux_lm=3000.0, n_lamps=3, decimal_comma=True))
    assert np.all(ph.candela_cd == pytest.approx(450.0))
    assert ph.lumens_per_lamp == pytest.approx(1000.0) and ph.rated_lumens_lm == pytest.approx(3000.0)


def test_negative_number_of_lamps_is_absolute(tmp_path):
    ph = read_text(tmp_path, ldt_text(lambda c, g: 100.0, 1, flux_lm=3000.0, n_lamps=-1))
    assert ph.is_absolute and ph.rated_lumens_lm is None
    assert np.all(ph.candela_cd == 300.0)


# --------------------------------------------------------------------------------------------
# The same distribution as LM-63 and as EULUMDAT
# --------------------------------------------------------------------------------------------


def test_same_distribution_as_lm63_and_eulumdat(tmp_path):
    mc, g = 24, np.arange(0, 181, 5.0)
    c = np.arange(mc) * 15.0
    ldt = read_text(tmp_path, ldt_text(road, 0, mc=mc, gamma_deg=g, flux_lm=1000.0))
    rows = [" ".join(f"{road(cc, gg):.10g}" for gg in g) for cc in c]
    ies = tmp_path / "same.ies"
    ies.write_text(
        "\n".join(
            [
                "IESNA:LM-63-2002",
                "TILT=NONE",
                f"1 1000 1 {g.size} {c.size} 1 2 0 0 0",
                "1 1 30",
                " ".join(f"{a:g}" for a in g),
                " ".join(f"{a:g}" for a in c),
                *rows,
            ]
        )
        + "\n"
    )
    lm = P.read_lm63(ies)
    cc, gg = np.meshgrid(np.arange(0, 360, 3.0), np.arange(0, 181, 1.0), indexing="ij")
    # both files print 10 significant digits
    np.testing.assert_allclose(P.intensity_cd(ldt, cc, gg), P.intensity_cd(lm, cc, gg), rtol=1e-9)
    assert P.luminous_flux_lm(ldt) == pytest.approx(P.luminous_flux_lm(lm), rel=1e-9)
    assert ldt.rated_lumens_lm == lm.rated_lumens_lm


def test_load_photometry_dispatches_on_extension_and_content(tmp_path):
    text = ldt_text(lambda c, g: 100.0, 1)
    assert P.load_photometry(write(tmp_path, text, "a.ldt")).edition == "EULUMDAT"
    assert P.load_photometry(write(tmp_path, text, "a.LDT")).edition == "EULUMDAT"
    assert P.load_photometry(write(tmp_path, text, "a.txt")).edition == "EULUMDAT"  # by content
    assert P.load_photometry(DATA / "rotational_1995.ies").edition == "LM-63-1995"


def test_strict_paths(tmp_path):
    inside = tmp_path / "inside"
    inside.mkdir()
    path = write(tmp_path, ldt_text(lambda c, g: 100.0, 1), "out.ldt")
    with pytest.raises(InputError, match="outside"):
        P.load_photometry(path, allowed_root=inside)


def test_cli_photometry_reads_ldt(tmp_path, capsys):
    from render.cli import main

    path = write(tmp_path, ldt_text(lambda c, g: 100.0, 1, flux_lm=2000.0), "cli.ldt")
    assert main(["photometry", str(path)]) in (0, None)
    out = capsys.readouterr().out
    assert "EULUMDAT" in out and f"{4 * math.pi * 200.0:.1f} lm" in out


# --------------------------------------------------------------------------------------------
# Malformed files: an InputError naming the file and the line
# --------------------------------------------------------------------------------------------


def _lines(isym=1, **kw) -> list[str]:
    return ldt_text(lambda c, g: 100.0, isym, **kw).splitlines()


def _edit(lines: list[str], line: int, value: str) -> str:
    lines = list(lines)
    lines[line - 1] = value
    return "\n".join(lines) + "\n"


@pytest.mark.parametrize(
    "text_of, line, fragment",
    [
        (lambda: _edit(_lines(), 2, "7"), 2, "type indicator"),
        (lambda: _edit(_lines(), 3, "5"), 3, "symmetry indicator"),
        (lambda: _edit(_lines(), 4, "abc"), 4, "number of C-planes"),
        (lambda: _edit(_lines(), 4, "2.5"), 4, "whole number"),
        (lambda: _edit(_lines(isym=4), 4, "22"), 4, "divisible by 4"),
        (lambda: _edit(_lines(), 6, "1"), 6, "γ angles"),
        (lambda: _edit(_lines(), 24, "-1"), 24, "conversion factor"),
        (lambda: _edit(_lines(), 29, "0"), 29, "total luminous flux"),
        (lambda: _edit(_lines(), 27, "0"), 27, "number of lamps"),
        (lambda: _edit(_lines(), 33, "x"), 33, "direct ratios"),
        (lambda: _edit(_lines(), 43, "nan"), 43, "C angles"),
        (lambda: _edit(_lines(), 45, "10"), 45, "C angles must increase"),
        (lambda: _edit(_lines(), 43, "5"), 43, "start at 0"),
        (lambda: _edit(_lines(), 68, "0"), 68, "γ angles must increase"),
        (lambda: _edit(_lines(), 105, "-3"), 105, "negative luminous intensity"),
        (lambda: _edit(_lines(), 105, "1 2"), 105, "one finite number"),
        (lambda: _edit(_lines(), 105, "1e400"), 105, "finite"),
        (lambda: _edit(_lines(isym=2), 55, "170"), 55, "must be 180"),
        (lambda: "\n".join(_lines()[:-3]) + "\n", 137, "the file ends at line 137"),
        (lambda: "\n".join(_lines()[:10]) + "\n", 10, "the file ends before"),
        (lambda: "\n".join(_lines() + ["5", "6"]) + "\n", 141, "left after"),
    ],
)
def test_malformed_files_name_the_line(tmp_path, text_of, line, fragment):
    path = write(tmp_path, text_of())
    with pytest.raises(InputError) as err:
        P.read_eulumdat(path)
    message = str(err.value)
    assert str(path) in message and f"line {line}" in message and fragment in message, message


def test_wrong_count_names_the_count_lines(tmp_path):
    # Mc raised from 24 to 48: the file is then too short for the counts.
    path = write(tmp_path, _edit(_lines(), 4, "48"))
    with pytest.raises(InputError, match=r"24 C angles|48 C angles") as err:
        P.read_eulumdat(path)
    assert "on line 4" in str(err.value)


def test_huge_counts_refused_before_allocating(tmp_path):
    path = write(tmp_path, _edit(_lines(), 4, str(MAX_EULUMDAT_ANGLES + 1)))
    with pytest.raises(InputError, match="line 4.*lampcast allows"):
        P.read_eulumdat(path)


def test_empty_file(tmp_path):
    with pytest.raises(InputError, match="empty"):
        P.read_eulumdat(write(tmp_path, "\n\n"))


@pytest.mark.parametrize(
    "text, fragment",
    [
        ("IESNA:LM-63-2002\n[TEST] x\nTILT=NONE\n1 1000 1 2 1 1 2 0 0 0\n1 1 0\n0 90\n0\n1 1\n", "LM-63"),
        ('<?xml version="1.0"?>\n<LuminaireOpticalData/>\n', "XML"),
    ],
)
def test_other_formats_named_ldt_say_what_they_look_like(tmp_path, text, fragment):
    with pytest.raises(InputError, match=f"looks like .*{fragment}"):
        P.read_eulumdat(write(tmp_path, text, "other.ldt"))


def test_scene_references_an_ldt_file(tmp_path):
    # A scene's luminaire may name an EULUMDAT file; a broken one is reported at its key.
    from render.light.luminaires import luminaire_set
    from render.scene.loader import load_scene

    write(tmp_path, ldt_text(lambda c, g: 100.0, 1, flux_lm=2000.0), "lum.ldt")
    write(tmp_path, "\n".join(_lines()[:20]) + "\n", "broken.ldt")
    base = (
        '[street]\nlength_m = 30.0\ncarriageway_width_m = 6.0\n\n[[views]]\nname = "v"\n'
        "position_m = [1.0, 0.0]\ntarget_m = [20.0, 0.0, 0.0]\nresolution = [16, 9]\n"
        '\n[[luminaires]]\nposition_m = [5.0, 3.0, 6.0]\nlamp = "led-4000k-cie-b3"\nphotometry = "{}"\n'
    )
    scene = load_scene(write(tmp_path, base.format("lum.ldt"), "s.toml"), strict_paths=True)
    lights = luminaire_set(scene)
    # relative file, lumens not given: the rated 2000 lm, i.e. the file's 100 cd/klm × 2 = 200 cd
    assert float(lights.cd_table[0].max()) == pytest.approx(200.0)
    with pytest.raises(InputError) as err:
        load_scene(write(tmp_path, base.format("broken.ldt"), "t.toml"))
    assert "broken.ldt" in str(err.value) and "line 20" in str(err.value)
