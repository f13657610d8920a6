"""Can two objects be told apart at the street's light level? The discrimination model wired into
the colour analysis (render.analysis with render.vision.discrimination), each check naming its
source.

The signals go the way the renderer's go: reflectance × lamp × observer weights in a response
table (render.colour.colorimetry), resolved from light buffers or laid out as patches, averaged
per object, judged by castleCSF (Ashraf et al. 2024) at the object's angular size and the view's
adaptation luminance. The model's own values are checked against its release in
test_discrimination.py; here: its behaviour through the analysis, against physics and published
colour data.
"""

from __future__ import annotations

import itertools
import json

import numpy as np
import pytest
import synthetic
from scenes_for_tests import write_two_objects_scene
from test_colours import patch_cone_rod, patch_view, tcs_reflectances

from render.analysis import SetupView, TaggedObject, colour_analysis, delta_e_matrix, perceived_view, reference_colour
from render.analysis.naming import (
    ACHROMATIC_TERMS,
    COLOUR_NOT_RELIABLE,
    lightness_name_details,
    munsell_to_lab,
    night_name,
)
from render.colour.colorimetry import resolve, resolve_responses, response_table
from render.colour.lamps import get_lamp
from render.colour.materials import d65_on_grid
from render.colour.spectra import N_BINS, WAVELENGTHS_NM
from render.light.integrator import LightBuffers
from render.vision import ObserverSettings, ViewGeometry, ViewLight, render_display
from render.vision.discrimination import SurfaceSignals, cone_rod_weights, discriminate_signals

LED = "led-4000k-violet-cie-v2"


def _analysed(refl, spd, white_cd_m2, observer=None):
    """The colour analysis of ``refl`` as 3.6° patches on a 20 % grey ground lit by ``spd``
    (white diffuser at ``white_cd_m2``), with the cone signals the light buffers would give."""
    observer = observer or ObserverSettings()
    view, oid, geom, wx, ws = patch_view(refl, spd, white_cd_m2)
    res = render_display(view, geom, observer)
    pv = perceived_view(view, geom, observer, state=res.state)
    sv = SetupView.from_view(
        pv,
        oid,
        white_photopic_cd_m2=wx[1],
        white_scotopic_cd_m2=ws,
        cone_rod_cd_m2=patch_cone_rod(refl, spd, white_cd_m2),
        solid_angle_sr=geom.solid_angle_sr(),
    )
    objects = [TaggedObject(k + 1, f"sample {k + 1}", refl[k]) for k in range(refl.shape[0])]
    return colour_analysis(objects, {"night": sv}).setups["night"]


# ------------------------------------------------------------- thresholds rise as light falls


def test_every_pair_gets_harder_as_the_street_gets_darker():
    # Source: castleCSF's behaviour (Ashraf et al. 2024, release v0.2.4: every mechanism's
    # sensitivity falls with background luminance over its data, 0.02-10 000 cd/m²; the disc
    # thresholds of test_discrimination.py). The CIE 13.3 samples (colour-science SDS_TCS) under
    # one LED from a 100 cd/m² white down to 0.1 cd/m²: each pair's multiple of threshold falls
    # at every step and the verdicts move from easy towards hard and cannot.
    refl = tcs_reflectances()
    levels = (100.0, 10.0, 1.0, 0.1)
    seen = [_analysed(refl, get_lamp(LED).spd, white) for white in levels]
    adaptation = [s.discrimination.adaptation_cd_m2 for s in seen]
    assert all(a > b for a, b in itertools.pairwise(adaptation)), adaptation
    multiples = np.array([[p.threshold_multiple for p in s.pairs] for s in seen])  # (level, pair)
    assert multiples.shape == (4, 28)
    assert np.all(np.diff(multiples, axis=0) < 0), multiples
    easy = [sum(p.verdict == "easy" for p in s.pairs) for s in seen]
    assert easy[0] == 28 and easy[-1] < easy[0], easy


# ------------------------------------------------------------- one wavelength: univariance


def _line_lamp(nm: float = 589.0) -> np.ndarray:
    lamp = np.zeros(N_BINS)
    lamp[np.flatnonzero(WAVELENGTHS_NM == nm)[0]] = 1.0
    return lamp


def _equal_luminance_buffers(refl: np.ndarray, spd: np.ndarray, luminance_cd_m2: float, patch_px: int = 6):
    """Light buffers of one pixel row of patches, material k in patch k, each lit so that it has
    ``luminance_cd_m2`` (value = L / luminous reflectance under ``spd``); one sample per pixel."""
    n = refl.shape[0]
    rho_v = response_table(refl, spd[None, :])[:-1, 0, 1]
    cols = 8
    rows = (n + cols - 1) // cols
    ids = np.full((rows * patch_px, cols * patch_px), -1, np.int32)
    for k in range(n):
        r, c = divmod(k, cols)
        ids[r * patch_px : (r + 1) * patch_px, c * patch_px : (c + 1) * patch_px] = k
    flat = ids.reshape(-1)
    value = np.where(flat >= 0, luminance_cd_m2 / rho_v[np.maximum(flat, 0)], 0.0).astype(np.float32)[:, None]
    buffers = LightBuffers(
        width_px=ids.shape[1],
        height_px=ids.shape[0],
        spp=1,
        response=flat.copy(),
        value_cd_m2=value,
        emitter=np.full(flat.size, -1, np.int32),
        object_id=flat.copy(),
        material_names=[f"m{k}" for k in range(n)],
        channels=[],
    )
    return buffers, ids


def _analysed_buffers(refl, spd, luminance_cd_m2):
    """The colour analysis of :func:`_equal_luminance_buffers`: colorimetry and cone signals
    resolved from the buffers (render.colour.colorimetry), the vision stage's perceived colours
    and adaptation of that image."""
    buffers, ids = _equal_luminance_buffers(refl, spd, luminance_cd_m2)
    c = resolve(buffers, [1.0], [spd], refl)
    cone_rod = resolve_responses(buffers, [1.0], [spd], refl, cone_rod_weights())
    geom = ViewGeometry(30.0, buffers.width_px, buffers.height_px)
    observer = ObserverSettings(glare=False, acuity=False)
    light = ViewLight(c.xyz_cd_m2, c.scotopic_cd_m2, white_xyz=c.white_xyz, white_scotopic=c.white_scotopic)
    pv = perceived_view(light, geom, observer)
    sv = SetupView.from_view(pv, ids, cone_rod_cd_m2=cone_rod, solid_angle_sr=geom.solid_angle_sr())
    objects = [TaggedObject(k, f"surface {k}", refl[k]) for k in range(refl.shape[0])]
    return colour_analysis(objects, {"night": sv}, min_pixels=30)


@pytest.mark.parametrize("luminance_cd_m2", [0.05, 1.0, 30.0])
def test_one_wavelength_leaves_equal_luminance_surfaces_indistinguishable(luminance_cd_m2):
    # Source: analytic (the principle of univariance: a cone's response to one wavelength depends
    # on the quantum catch only, so under a 589 nm line every surface has the same L:M:S ratio and
    # two of equal luminance send the same signals). Surfaces: the 24 ColorChecker patches
    # (colour-science "BabelColor Average") and the 14 CIE 13.3 samples, resolved from light
    # buffers through the response tables, every pair judged: all "cannot", whatever their
    # daylight colours (which are up to tens of ΔE00 apart).
    _, checker = synthetic.colour_checker_reflectances("BabelColor Average")
    refl = np.vstack([checker, tcs_reflectances([f"TCS{i:02d}" for i in range(1, 15)])])
    seen = _analysed_buffers(refl, _line_lamp(), luminance_cd_m2).setups["night"]
    assert len(seen.pairs) == 38 * 37 // 2
    assert {p.verdict for p in seen.pairs} == {"cannot"}
    assert max(p.threshold_multiple for p in seen.pairs) < 1e-3
    assert max(p.daylight_delta_e00 for p in seen.pairs) > 50.0
    # The check can fail: the same surfaces at equal luminance under D65 are told apart by
    # colour, nearly all pairs at least "hard" (and most "easy" above 1 cd/m²).
    d65 = _analysed_buffers(refl, d65_on_grid(), luminance_cd_m2).setups["night"]
    assert sum(p.verdict == "cannot" for p in d65.pairs) < 0.1 * len(d65.pairs)
    assert sum(p.verdict == "easy" for p in d65.pairs) > 0.4 * len(d65.pairs)


# ------------------------------------------------ daylight: agreement with CIEDE2000


def _daylight_signals(refl: np.ndarray, white_cd_m2: float = 100.0) -> list[SurfaceSignals]:
    """Cone signals and scotopic luminance of reflectances under D65 with a white diffuser at
    ``white_cd_m2``: the response table's rows with the cone weights (as the renderer)."""
    rows = response_table(refl, d65_on_grid()[None, :], weights=cone_rod_weights())[:-1, 0] * white_cd_m2
    return [SurfaceSignals(tuple(r[:3]), float(r[3])) for r in rows]


def test_daylight_verdicts_agree_with_ciede2000_on_the_colorchecker():
    # Source: colour-science's ColorChecker datasets (BabelColor average and N. Ohta's
    # measurements of the same chart) and its CIEDE2000 (CIE 142-2001), under D65 at 100 cd/m²
    # with 2° objects. Clearly different patches (ΔE00 > 10) are "easy"; the same patch measured
    # twice, where the two measurements are less than 0.4 ΔE00 apart (well under one CIEDE2000
    # unit), is never "easy" (below about three times threshold). Between the two the measures
    # are not expected to agree: castleCSF's threshold for two discs side by side is finer than
    # CIEDE2000's unit (pairs module text).
    names, babel = synthetic.colour_checker_reflectances("BabelColor Average")
    _, ohta = synthetic.colour_checker_reflectances("ColorChecker N Ohta")
    lab_b, lab_o = reference_colour(babel), reference_colour(ohta)
    sig_b, sig_o = _daylight_signals(babel), _daylight_signals(ohta)
    de = delta_e_matrix(lab_b)
    distinct = 0
    for i, j in itertools.combinations(range(24), 2):
        if de[i, j] > 10.0:
            distinct += 1
            assert discriminate_signals(sig_b[i], sig_b[j], 100.0, 2.0).verdict == "easy", (names[i], names[j])
    near = 0
    for k in range(24):
        same = float(delta_e_matrix(np.stack([lab_b[k], lab_o[k]]))[0, 1])
        if same < 0.4:
            near += 1
            result = discriminate_signals(sig_b[k], sig_o[k], 100.0, 2.0)
            assert result.verdict in ("hard", "cannot"), (names[k], same, result.multiple)
    assert distinct > 200 and near >= 4


# --------------------------------------------------- below the fitted range; hue not available


def test_below_the_fitted_range_the_output_says_so_and_names_no_hue():
    # Source: castleCSF's data (release data/data_aggregated_merged.csv: chromatic backgrounds
    # from 0.02 cd/m²) and the hue rule of render.vision.discrimination (CIE 191 MES2 m below that
    # of the dimmest chromatic background). A street whose white diffuser is at 0.02 cd/m²
    # adapts the eye below 0.02 cd/m²: no multiple is extrapolated, the lighting's note and every
    # pair say so, and the night names give no hue.
    from render.output.colour_text import format_confusions, format_pairs

    refl = tcs_reflectances()
    objects = [TaggedObject(k + 1, f"sample {k + 1}", refl[k]) for k in range(8)]
    spd = get_lamp(LED).spd
    observer = ObserverSettings()
    view, oid, geom, wx, ws = patch_view(refl, spd, 0.02)
    res = render_display(view, geom, observer)
    pv = perceived_view(view, geom, observer, state=res.state)
    sv = SetupView.from_view(
        pv,
        oid,
        white_photopic_cd_m2=wx[1],
        white_scotopic_cd_m2=ws,
        cone_rod_cd_m2=patch_cone_rod(refl, spd, 0.02),
        solid_angle_sr=geom.solid_angle_sr(),
    )
    result = colour_analysis(objects, {"dim": sv})
    seen = result.setups["dim"]
    assert seen.discrimination.adaptation_cd_m2 < 0.02
    assert (
        not seen.discrimination.in_range and "below the discrimination model's fitted range" in seen.discrimination.note
    )
    assert all(p.threshold_multiple is None and p.upper_bound is not None for p in seen.pairs)
    assert {p.verdict for p in seen.pairs} <= {"likely cannot", "unknown"}
    assert all("below the model's range" in p.note for p in seen.pairs)
    assert seen.discrimination.hue in ("unreliable", "none")
    for o in seen.objects.values():
        assert o.name == night_name(o.name_term) and o.name_term in ACHROMATIC_TERMS and o.hue != "available"
        assert o.name.endswith(COLOUR_NOT_RELIABLE)
    text = format_pairs(result) + "\n" + format_confusions(result)
    assert "below the discrimination model's fitted range" in text and "(bound)" in text
    # JSON-safe: undefined multiples are null, never NaN.
    json.dumps(result.to_json(), allow_nan=False)


def test_lightness_names_of_neutral_munsell_chips():
    # Source: Munsell renotation (colour-science munsell_colour_to_xyY, ASTM D1535) of neutral
    # chips, named by lightness alone among black, grey and white (the prototypes of
    # render.analysis.naming); a saturated red of value 4 is named by its lightness too (grey),
    # never by its hue.
    assert lightness_name_details(munsell_to_lab("N9.5"))["term"] == "white"
    assert lightness_name_details(munsell_to_lab("N5"))["term"] == "grey"
    assert lightness_name_details(munsell_to_lab("N1"))["term"] == "black"
    assert lightness_name_details(munsell_to_lab("5R 4/14"))["term"] == "grey"
    assert lightness_name_details(np.full(3, np.nan)) is None
    assert night_name("grey") == "looks grey; colour not reliable at this light level"


# ----------------------------------------------------------- end to end through a rendered scene


def test_pairs_reach_colours_json_metrics_json_and_the_report(tmp_path, monkeypatch):
    # Source: the definitions (module texts of render.analysis.colours and render.output.metrics)
    # and the CIE 191 / TN 007 adaptation of render.vision: a comparison of a small rendered
    # scene (a van and a bin in two views) writes each pair's multiple of threshold and verdict
    # beside CIEDE2000 into colours.json, metrics.json and the report; the pair is judged at the
    # lower of the two views' own adaptation luminances under each lighting (the adapted
    # images' levels in metrics.json).
    import html

    from render.output.comparison import run_comparison
    from render.output.metrics import ComparisonMetrics

    def measured_again(*args, **kwargs):
        raise AssertionError("the comparison passes the adapted images' states; nothing is measured again")

    monkeypatch.setattr("render.analysis.view_colours.own_adaptation_state", measured_again)
    scene = write_two_objects_scene(tmp_path)
    out = tmp_path / "cmp"
    result = run_comparison(scene, "old", "new", None, out, progress=False)
    metrics = json.loads((out / "metrics.json").read_text(encoding="utf-8"))
    colours = json.loads((out / "colours" / "colours.json").read_text(encoding="utf-8"))
    labels = list(colours["setups"])
    assert labels == list(metrics["colours"]["pairs"]) == list(metrics["colours"]["discrimination"])
    levels = {v["name"]: v["adaptation_cd_m2"] for v in metrics["views"]}
    for label, key in zip(labels, ("before", "new")):
        (pair,) = metrics["colours"]["pairs"][label]
        assert (pair["a"], pair["b"]) == ("orange van", "green bin")
        assert pair["verdict"] in ("easy", "hard", "cannot") and pair["threshold_multiple"] > 0
        assert pair["daylight_delta_e00"] > 10 and pair["delta_e00"] is not None
        assert pair["adaptation_cd_m2"] == pytest.approx(min(levels["van"][key], levels["bin"][key]), rel=1e-3)
        assert colours["setups"][label]["pairs"][0]["verdict"] == pair["verdict"]
        assert colours["setups"][label]["objects"]["orange van"]["size_deg"] > 0
    assert ComparisonMetrics.from_json(metrics) == result.metrics
    section = next(s for s in result.metrics.extra_sections if s.html_id == "colours")
    every = next(t for t in section.tables if t.caption.startswith("Every pair"))
    assert every.columns[:2] == ("pair", "ΔE00 daylight") and f"× threshold ({labels[0]})" in every.columns
    page = html.unescape((out / "report.html").read_text(encoding="utf-8"))
    assert f"× threshold ({labels[1]})" in page and "castleCSF" in page
    verdicts = [pairs[0]["verdict"] for pairs in metrics["colours"]["pairs"].values()]
    assert all(f"<td>{v}</td>" in page for v in verdicts)


def test_colours_command_prints_each_pair_beside_ciede2000(tmp_path, capsys):
    # Source: the definitions (render.output.colour_text): lampcast colours prints every pair
    # under each lighting with ΔE00 and the multiple of threshold and verdict of colours.json.
    from render.cli import main

    scene = write_two_objects_scene(tmp_path)
    assert main(["colours", str(scene), "--out", str(tmp_path / "out"), "--quiet"]) == 0
    text = capsys.readouterr().out
    data = json.loads(next((tmp_path / "out").glob("*-colours.json")).read_text(encoding="utf-8"))
    assert "Every pair: CIEDE2000 beside the light-level verdict" in text and "Caution:" in text
    rows = [x.split() for x in text.splitlines() if x.startswith("    orange van / green bin ")]
    assert len(rows) == len(data["setups"])
    for (label, seen), row in zip(data["setups"].items(), rows):
        (pair,) = seen["pairs"]
        # pair, ΔE00 daylight, ΔE00 seen, × threshold, verdict
        assert row[-4:] == [
            f"{pair['daylight_delta_e00']:.1f}",
            f"{pair['delta_e00']:.1f}",
            f"{pair['threshold_multiple']:.3g}",
            pair["verdict"],
        ]
        assert f"  {label} (adaptation " in text
