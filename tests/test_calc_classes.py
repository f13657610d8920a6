"""Tests of render.calc.classes: presets, the pass/fail check with margins, user class files,
the mesopic adjustment of P classes."""

from __future__ import annotations

import math
from dataclasses import fields

import pytest

from render.calc.classes import (
    CAUTION,
    CRITERIA,
    MESOPIC_LABEL,
    ClassFigures,
    LightingClass,
    builtin_classes,
    check_class,
    lighting_classes,
    mesopic_adjustment,
    read_class_file,
)
from render.errors import InputError

# EN 13201-2:2015, read in a secondary source that quotes the standard (not the standard
# itself): verify against the current edition.
# M: L̄ cd/m², U0, Ul, f_TI %, R_EI
M_CLASSES = {
    "M1": (2.0, 0.40, 0.70, 10, 0.35),
    "M2": (1.5, 0.40, 0.70, 10, 0.35),
    "M3": (1.0, 0.40, 0.60, 15, 0.30),
    "M4": (0.75, 0.40, 0.60, 15, 0.30),
    "M5": (0.5, 0.35, 0.40, 15, 0.30),
    "M6": (0.3, 0.35, 0.40, 20, 0.30),
}
# P: Ē lx, Emin lx, f_TI %
P_CLASSES = {
    "P1": (15.0, 3.0, 20),
    "P2": (10.0, 2.0, 25),
    "P3": (7.5, 1.5, 25),
    "P4": (5.0, 1.0, 30),
    "P5": (3.0, 0.6, 30),
    "P6": (2.0, 0.4, 35),
}
# C: Ē lx, U0, f_TI %
C_CLASSES = {
    "C0": (50.0, 0.40, 10),
    "C1": (30.0, 0.40, 10),
    "C2": (20.0, 0.40, 15),
    "C3": (15.0, 0.40, 15),
    "C4": (10.0, 0.40, 15),
    "C5": (7.5, 0.40, 20),
}


def _criteria(cls: LightingClass) -> dict[str, float]:
    return {c.key: getattr(cls, c.key) for c in CRITERIA if getattr(cls, c.key) is not None}


def test_presets_equal_en13201_2_values():
    # Source: EN 13201-2:2015 via a secondary source (marked so in the data file).
    classes = builtin_classes()
    assert set(classes) == set(M_CLASSES) | set(P_CLASSES) | set(C_CLASSES)
    for name, (lum, u0, ul, ti, rei) in M_CLASSES.items():
        assert classes[name].series == "M"
        assert _criteria(classes[name]) == {
            "mean_luminance_cd_m2": lum,
            "overall_uniformity": u0,
            "longitudinal_uniformity": ul,
            "threshold_increment_pct": ti,
            "edge_illuminance_ratio": rei,
        }
    for name, (e, emin, ti) in P_CLASSES.items():
        assert classes[name].series == "P"
        assert _criteria(classes[name]) == {
            "mean_illuminance_lx": e,
            "min_illuminance_lx": emin,
            "threshold_increment_pct": ti,
        }
    for name, (e, u0, ti) in C_CLASSES.items():
        assert classes[name].series == "C"
        assert _criteria(classes[name]) == {
            "mean_illuminance_lx": e,
            "overall_uniformity": u0,
            "threshold_increment_pct": ti,
        }
    for cls in classes.values():
        # Every preset carries its confidence (project rule: mark secondary values).
        assert "secondary source" in cls.confidence and "verify against the current edition" in cls.confidence
        assert "EN 13201-2:2015" in cls.source


def test_one_list_of_criteria():
    # Own consistency (common practice, no source): the class, the figures and CRITERIA agree.
    keys = {c.key for c in CRITERIA}
    assert {f.name for f in fields(ClassFigures)} == keys
    assert {f.name for f in fields(LightingClass)} - {"name", "series", "source", "confidence"} == keys


def _p4() -> LightingClass:
    return builtin_classes()["P4"]


def test_at_the_limit_passes_with_margin_zero():
    # Definition of the margin (brief): achieved/required − 1 for minima, 1 − achieved/required
    # for maxima; a value at the limit meets it (common practice, no source).
    m2 = builtin_classes()["M2"]
    figures = ClassFigures(
        mean_luminance_cd_m2=1.5,
        overall_uniformity=0.40,
        longitudinal_uniformity=0.70,
        threshold_increment_pct=10.0,
        edge_illuminance_ratio=0.35,
    )
    check = check_class(m2, figures)
    assert check.verdict == "pass"
    assert [c.status for c in check.criteria] == ["pass"] * 5
    assert all(c.margin == 0.0 for c in check.criteria)


def test_just_beyond_the_limit_fails():
    # Same definitions: a minimum just under, a maximum just over the limit fails.
    below = check_class(
        _p4(), ClassFigures(mean_illuminance_lx=5.0 * (1 - 1e-9), min_illuminance_lx=1.0, threshold_increment_pct=30.0)
    )
    by_key = {c.key: c for c in below.criteria}
    assert by_key["mean_illuminance_lx"].status == "fail"
    assert by_key["mean_illuminance_lx"].margin < 0
    assert by_key["min_illuminance_lx"].status == "pass"
    assert below.verdict == "fail"
    above = check_class(
        _p4(), ClassFigures(mean_illuminance_lx=5.0, min_illuminance_lx=1.0, threshold_increment_pct=30.0 * (1 + 1e-9))
    )
    ti = {c.key: c for c in above.criteria}["threshold_increment_pct"]
    assert ti.status == "fail" and ti.margin < 0
    assert above.verdict == "fail"


def test_margins_by_hand():
    # By hand: Ē 6 lx for 5 lx -> 6/5 − 1 = 0.2; Emin 0.75 lx for 1 lx -> −0.25;
    # f_TI 24 % for at most 30 % -> 1 − 24/30 = 0.2.
    check = check_class(
        _p4(), ClassFigures(mean_illuminance_lx=6.0, min_illuminance_lx=0.75, threshold_increment_pct=24.0)
    )
    by_key = {c.key: c for c in check.criteria}
    assert by_key["mean_illuminance_lx"].margin == pytest.approx(0.2, rel=1e-12)
    assert by_key["min_illuminance_lx"].margin == pytest.approx(-0.25, rel=1e-12)
    assert by_key["min_illuminance_lx"].status == "fail"
    assert by_key["threshold_increment_pct"].margin == pytest.approx(0.2, rel=1e-12)
    assert by_key["threshold_increment_pct"].status == "pass"


def test_missing_figure_is_not_computed_never_a_pass():
    # Brief: a missing figure is "not computed", never a pass.
    check = check_class(_p4(), ClassFigures(mean_illuminance_lx=50.0, min_illuminance_lx=10.0))
    ti = {c.key: c for c in check.criteria}["threshold_increment_pct"]
    assert ti.status == "not computed"
    assert ti.achieved is None and ti.margin is None
    assert check.verdict == "not computed"
    # Nothing computed at all.
    assert check_class(_p4(), ClassFigures()).verdict == "not computed"


def test_to_json_carries_the_caution_and_every_number():
    # Brief: the standing caution in every check's JSON.
    assert (
        CAUTION
        == "a design check for discussion, not a certificate; verify against the current edition and local codes"
    )
    out = check_class(_p4(), ClassFigures(mean_illuminance_lx=6.0, min_illuminance_lx=1.0)).to_json()
    assert out["caution"] == CAUTION
    assert out["class"] == "P4" and out["verdict"] == "not computed"
    assert out["criteria"][0] == {
        "key": "mean_illuminance_lx",
        "symbol": "Ē",
        "bound": "min",
        "unit": "lx",
        "required": 5.0,
        "achieved": 6.0,
        "status": "pass",
        "margin": pytest.approx(0.2),
        "photometry": "photopic",
    }


def test_user_file_overrides_one_class_and_adds_one(tmp_path):
    # Brief: a user TOML file of the presets' schema adds or overrides classes.
    path = tmp_path / "local.toml"
    path.write_text(
        '[classes.P4]\nseries = "P"\nmean_illuminance_lx = 6.0\nmin_illuminance_lx = 1.2\n\n'
        '[classes.HOME]\nseries = "local"\nmean_illuminance_lx = 4\nsource = "parish rule"\n',
        encoding="utf-8",
    )
    classes = lighting_classes(path)
    assert _criteria(classes["P4"]) == {"mean_illuminance_lx": 6.0, "min_illuminance_lx": 1.2}
    assert classes["P4"].source == str(path)
    assert classes["HOME"].series == "local" and classes["HOME"].source == "parish rule"
    assert classes["P3"] == builtin_classes()["P3"]
    assert builtin_classes()["P4"].mean_illuminance_lx == 5.0  # the presets are untouched


@pytest.mark.parametrize(
    ("text", "where"),
    [
        ('[classes.P4]\nseries = "P"\nmean_illuminance_lx = \n', "line 3"),  # syntax error
        ('[classes.P4]\nseries = "P"\nmean_ilumination_lx = 6.0\n', "classes.P4.mean_ilumination_lx"),
        ('[classes.P4]\nseries = "P"\nmean_illuminance_lx = -6.0\n', "classes.P4.mean_illuminance_lx"),
        ('[classes.P4]\nseries = "P"\nmean_illuminance_lx = true\n', "classes.P4.mean_illuminance_lx"),
        ("[classes.P4]\nmean_illuminance_lx = 6.0\n", "classes.P4.series"),
        ('[classes.P4]\nseries = "P"\n', "classes.P4"),
        ('[klasses.P4]\nseries = "P"\n', "klasses"),
    ],
)
def test_malformed_user_file_names_line_or_key(tmp_path, text, where):
    # Project rule: bad user input is an InputError naming the file and the line or key.
    path = tmp_path / "bad.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(InputError) as info:
        read_class_file(path)
    wheres = [p.where for p in info.value.problems]
    assert where in wheres
    assert all(p.source == str(path) for p in info.value.problems)


def test_misspelt_key_suggests_the_right_one(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text('[classes.P4]\nseries = "P"\nmean_ilumination_lx = 6.0\n', encoding="utf-8")
    with pytest.raises(InputError, match="did you mean 'mean_illuminance_lx'"):
        read_class_file(path)


def _cie191_iteration(lp: float, ls: float) -> tuple[float, float]:
    # CIE 191:2010 MES2 written out here (secondary, see docs/references.md): V'(555) = 683/1699,
    # m = 0.7670 + 0.3334·log10(L_mes), fixed-point iteration from m = 0.5.
    v0 = 683.0 / 1699.0
    m = 0.5
    for _ in range(200):
        lmes = (m * lp + (1 - m) * ls * v0) / (m + (1 - m) * v0)
        m = min(1.0, max(0.0, 0.7670 + 0.3334 * math.log10(lmes)))
    return (m * lp + (1 - m) * ls * v0) / (m + (1 - m) * v0), m


def test_mesopic_identity_at_sp_one():
    # CIE 191:2010 property: a stimulus with S/P = 1 has L_mes = L_p at every adaptation.
    for e in (0.5, 2.0, 5.0, 15.0, 200.0):
        adj = mesopic_adjustment(e, 1.0)
        assert adj.factor == pytest.approx(1.0, abs=1e-12)
    check = check_class(_p4(), ClassFigures(mean_illuminance_lx=5.0, min_illuminance_lx=1.0), s_p_ratio=1.0)
    by_key = {c.key: c for c in check.criteria}
    assert by_key["mean_illuminance_lx"].achieved == pytest.approx(5.0, rel=1e-12)
    assert by_key["mean_illuminance_lx"].photometry == MESOPIC_LABEL
    assert by_key["min_illuminance_lx"].photometry == MESOPIC_LABEL
    assert by_key["threshold_increment_pct"].photometry == "photopic"


def test_mesopic_raises_mean_illuminance_for_high_sp_at_low_levels():
    # CIE 191:2010: for S/P > 1 in the mesopic range L_mes > L_p; the factor equals the MES2
    # state found by CIE's own iteration (written out above) for L_p = ρ·Ē/π, L_s = S/P·L_p.
    e, sp, rho = 2.0, 1.8, 0.2
    adj = mesopic_adjustment(e, sp, rho)
    lp = rho * e / math.pi
    assert adj.adaptation_luminance_cd_m2 == pytest.approx(lp, rel=1e-12)
    lmes, m = _cie191_iteration(lp, sp * lp)
    assert adj.factor > 1.01
    assert adj.factor == pytest.approx(lmes / lp, rel=1e-3)  # 683/1699 vs 683/1700: 0.06 %
    assert adj.adaptation_coefficient == pytest.approx(m, abs=2e-3)
    check = check_class(
        builtin_classes()["P6"], ClassFigures(mean_illuminance_lx=e, min_illuminance_lx=0.4), s_p_ratio=sp
    )
    by_key = {c.key: c for c in check.criteria}
    assert by_key["mean_illuminance_lx"].achieved == pytest.approx(e * adj.factor, rel=1e-12)
    assert by_key["mean_illuminance_lx"].achieved > e
    assert by_key["min_illuminance_lx"].achieved == pytest.approx(0.4 * adj.factor, rel=1e-12)
    assert check.to_json()["mesopic"]["method"] == MESOPIC_LABEL
    # Photopic adaptation (L ≥ 5 cd/m², m = 1, CIE 191): no change.
    assert mesopic_adjustment(100.0, sp, rho).factor == pytest.approx(1.0, abs=1e-12)


def test_mesopic_only_for_p_classes():
    # Brief: the adjustment is defined here for P classes only.
    with pytest.raises(ValueError, match="P classes"):
        check_class(builtin_classes()["M3"], ClassFigures(mean_luminance_cd_m2=1.0), s_p_ratio=1.5)
