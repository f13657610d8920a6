"""Before and options: the comparison run behind ``lampcast compare`` and ``lampcast demo``.

For each view the camera rays are cast once; the "before" setup is evaluated on them and every
option (an "after" setup; one or several) re-lights the same buffers (re-evaluating the light
at the kept hit points only if it changes a photometric distribution). All are shown through
the night-vision stage in ``shared`` exposure (one adaptation state: their true brightness
relation), in ``adapted`` exposure (each for an eye adapted to it) and as luminance maps on
one scale for the whole report (every view, every setup), with one legend. Luminance figures
are given per region a resident recognises (:func:`luminance_regions`: the carriageway, each
footway, the house and shop fronts, each tagged object; from the pixels that show only it) as
well as over every surface seen; the summary speaks of the carriageway where a view shows it.

When the scene has a ``[street]`` and a first luminaire row of at least two luminaires, the
setups are also calculated (:func:`render.calc.run.run_calculation`: fields, road luminance,
TI, class check, obtrusive light, sky, energy), with an illuminance plan per setup
(:func:`render.calc.plan.compute_plan`) and the pictures of
:func:`render.output.calc_pictures.write_calc_pictures` in the ``calculation/`` folder; every
number goes into ``metrics.json`` under ``"calculation"`` (:func:`calculation_json`) and the
report's "Calculations" section shows them.

Everything written is listed in ``metrics.json`` together with the figures the report shows:
the typed records of :mod:`render.output.metrics` (:class:`~render.output.metrics.ComparisonMetrics`),
rounded once when they are made, so ``metrics.json`` and the report show the same numbers.

References
----------
* CIE 13.3-1995, colour rendering index (Ra) in the summary sentences; the S/P ratio and the
  blue fraction are the lamp figures of :mod:`render.colour.lamp_figures`.
* The adaptation levels are those of :mod:`render.vision.adaptation` (photopic, and the
  CIE 191:2010 MES2 mesopic luminance).
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Mapping, Sequence
from concurrent.futures import Future
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from render import __version__
from render.analysis.colours import CAVEAT as COLOUR_CAVEAT
from render.analysis.colours import ColourAnalysis, PairDifference
from render.errors import InputError, did_you_mean, input_error
from render.fileio import atomic_write_text, file_stem
from render.output.metrics import (
    BEFORE,
    RESERVED_KEYS,
    AdaptationLevels,
    ColourSummary,
    ComparisonMetrics,
    GroupLighting,
    LuminanceStats,
    ObserverInfo,
    RegionLuminance,
    RenderSettings,
    ReportSection,
    ReportTable,
    SceneInfo,
    SetupDescription,
    ToolInfo,
    ViewImages,
    ViewMetrics,
    published,
)
from render.output.provenance import image_metadata
from render.scene.model import GroupSetting, Scene, Setup

if TYPE_CHECKING:
    from render.calc.run import CalculationReport
    from render.geometry.build import ObjectInfo
    from render.light.indirect import IndirectSettings
    from render.light.luminaires import LuminaireSet
    from render.study import RenderedView, Study
    from render.vision.adaptation import AdaptationState
    from render.vision.observer import ObserverSettings
    from render.vision.pipeline import DisplayResult

__all__ = [
    "CALCULATION_FOLDER",
    "CAUTIONS",
    "INTERREFLECTION_CAUTION",
    "NIGHT_CAUTION",
    "NO_INTERREFLECTION_CAUTION",
    "LUMINANCE_LEGEND",
    "SETUP_KEYS",
    "WIPE_WIDTH_PX",
    "ComparisonResult",
    "calculation_absent_reason",
    "calculation_json",
    "colour_report_section",
    "light_cautions",
    "luminance_legend",
    "luminance_maps",
    "luminance_scale",
    "luminance_regions",
    "luminance_stats",
    "region_luminance",
    "parse_setup",
    "run_comparison",
    "setup_description",
    "setup_keys",
    "side_by_side",
    "unique_stems",
    "summary_sentences",
    "wipe_frames",
]

#: Cautions shown with every comparison (the report adds its standing caution: an illustrative
#: preview, not a design or compliance calculation; local codes and licensed practice decide).
#: The second depends on the light modelled: :func:`light_cautions`.
CAUTIONS = (
    "The images use published average-observer models of night vision, glare and colour appearance.",
    "Only direct light from the luminaires is modelled: light reflected between surfaces and light "
    "from the night sky are left out, so shadowed surfaces show as black and minimum luminances as 0.",
    "Real eyes differ: age, eye conditions, medication and fatigue change how bright, glary and colourful a "
    "street looks. A printed or on-screen image cannot reproduce night-time luminance exactly.",
)

#: The second caution when interreflected light is traced (``{settings}``: its settings).
INTERREFLECTION_CAUTION = (
    "Light reflected between surfaces is included ({settings}): it is a Monte Carlo estimate, so deep "
    "shadows can look grainy, and the calculations' figures stay direct light unless labelled otherwise."
)


#: The second caution with the night light but no interreflection.
NO_INTERREFLECTION_CAUTION = (
    "Light reflected between surfaces is left out, so shadowed surfaces get only the night sky's and the "
    "moon's direct light and minimum luminances read low."
)
#: A caution added when the night's sky glow and moonlight are traced (``{night}``: their levels).
NIGHT_CAUTION = (
    "The night's other light is included at stated levels, not measured on site ({night}): a Monte Carlo "
    "estimate; the moon's disc is not drawn."
)


def light_cautions(indirect: IndirectSettings | None) -> tuple[str, ...]:
    """The comparison's cautions for the light modelled: :data:`CAUTIONS`, with the second
    stating the interreflection settings when ``indirect`` is given (None: direct light only),
    and the night light's levels when it is traced."""
    if indirect is None:
        return CAUTIONS
    second = NO_INTERREFLECTION_CAUTION
    if indirect.bounces > 0:
        settings = indirect.describe().removeprefix("interreflected light: ")
        second = INTERREFLECTION_CAUTION.format(settings=settings)
    night = ()
    if indirect.ambient:
        from render.light.indirect.night import describe_night

        night = (NIGHT_CAUTION.format(night=describe_night(indirect.night).removeprefix("night light: ")),)
    return (CAUTIONS[0], second, *night, CAUTIONS[2])


SETUP_KEYS = ("lamp", "lumens", "dimming", "photometry")

#: The one legend of a report's luminance maps (their scale is shared by every view and setup).
LUMINANCE_LEGEND = "luminance-legend.png"

#: Folder of the calculation's pictures in the output folder (never a view's folder).
CALCULATION_FOLDER = "calculation"


def parse_setup(text: str, scene: Scene, label: str) -> Setup:
    """A setup from the command line.

    ``text`` is one of: a setup named in the scene; a lamp id or spectrum file (every
    luminaire); or ``key=value`` items (``lamp``, ``lumens``, ``dimming``, ``photometry``)
    separated by commas, optionally for one group as ``GROUP:key=value,...``, several groups
    separated by ``;`` (e.g. ``"street:lamp=led-3000k-cie-b2,dimming=0.8;bus stop:lamp=led-2700k-cie-b1"``).
    """
    from render.colour.lamps import get_lamp

    text = text.strip()
    if text in scene.setups:
        return scene.setups[text]
    if "=" not in text:
        try:
            get_lamp(text, base_dir=scene.base_dir, source=label)
        except Exception:
            names = list(scene.setups)
            raise input_error(
                label,
                "",
                f"{text!r} is neither a setup of {scene.path.name} ({', '.join(names) or 'none'})"
                f"{did_you_mean(text, names)} nor a lamp id; `lampcast lamps` lists lamps",
            ) from None
        return Setup(text, f"every luminaire with lamp {text}", {"*": GroupSetting(lamp=text)})
    groups: dict[str, GroupSetting] = {}
    for part in filter(None, (p.strip() for p in text.split(";"))):
        group = "*"
        if ":" in part.split("=", 1)[0]:
            group, part = (x.strip() for x in part.split(":", 1))
            if group not in scene.groups:
                raise input_error(
                    label,
                    group,
                    f"no luminaire group {group!r}{did_you_mean(group, scene.groups)}; groups: {', '.join(scene.groups)}",
                )
        values: dict = {}
        for item in filter(None, (i.strip() for i in part.split(","))):
            if "=" not in item:
                raise input_error(label, item, "expected key=value")
            key, value = (x.strip() for x in item.split("=", 1))
            if key not in SETUP_KEYS:
                raise input_error(
                    label, key, f"unknown setup key{did_you_mean(key, SETUP_KEYS)}; keys: {', '.join(SETUP_KEYS)}"
                )
            if key in ("lumens", "dimming"):
                try:
                    number = float(value)
                except ValueError:
                    raise input_error(label, key, f"expected a number, got {value!r}") from None
                if (
                    not math.isfinite(number)
                    or number < 0
                    or (key == "dimming" and number > 1)
                    or (key == "lumens" and number == 0)
                ):
                    raise input_error(label, key, "lumens must be above 0; dimming within 0-1")
                values[key] = number
            else:
                if key == "lamp":
                    get_lamp(value, base_dir=scene.base_dir, source=label, where=key)
                values[key] = value
        groups[group] = GroupSetting(**values)
    return Setup(text, f"command-line setup {text}", groups)


def _surface_luminance(rendered: RenderedView) -> np.ndarray:
    """Luminance (cd/m²) of the pixels that show a surface (no sky, no luminous openings)."""
    b = rendered.buffers
    surf = ((b.response >= 0) & (b.response != b.emitter_response)).reshape(-1, b.spp).all(axis=1)
    Y = rendered.colorimetry.luminance_cd_m2.reshape(-1)
    return Y[surf]


def luminance_stats(rendered: RenderedView) -> LuminanceStats:
    """Mean, minimum, median and 95th percentile of the luminance of surfaces seen, cd/m²."""
    return LuminanceStats.of(_surface_luminance(rendered))


def luminance_regions(objects: Sequence[ObjectInfo]) -> list[tuple[str, str, list[int]]]:
    """The regions a resident recognises, as (name, kind, object indices): the carriageway (with
    its centre line), each footway, the house fronts and the shop fronts (every frontage of
    that kind), then each tagged object; regions without objects are left out."""
    regions: list[tuple[str, str, list[int]]] = []

    def add(name: str, kind: str, members: list[int]) -> None:
        if members:
            regions.append((name, kind, members))

    street = [(i, o) for i, o in enumerate(objects) if o.kind in ("street", "marking")]
    add("carriageway", "carriageway", [i for i, o in street if o.name in ("carriageway", "centre line")])
    for side in ("left", "right"):
        add(f"footway {side}", "footway", [i for i, o in street if o.kind == "street" and o.name == f"footway {side}"])
    for kind in ("house", "shop"):
        add(f"{kind} fronts", f"{kind} fronts", [i for i, o in enumerate(objects) if o.kind == f"{kind} frontage"])
    for i, o in enumerate(objects):
        if o.inspect:
            add(o.name, "tagged object", [i])
    return regions


def region_luminance(
    object_id: np.ndarray,
    regions: Sequence[tuple[str, str, list[int]]],
    luminances_cd_m2: Mapping[str, np.ndarray],
) -> tuple[RegionLuminance, ...]:
    """Per region the luminance statistics under each setup (setup key -> (H, W) luminance) over
    the pixels whose object (``object_id``, -1: none or mixed) belongs to it; regions the view
    does not show are left out."""
    out = []
    for name, kind, members in regions:
        mask = np.isin(object_id, members)
        n = int(mask.sum())
        if n:
            out.append(
                RegionLuminance(
                    name, kind, n, {k: LuminanceStats.of(np.asarray(y)[mask]) for k, y in luminances_cd_m2.items()}
                )
            )
    return tuple(out)


def setup_description(setup: Setup, lights: LuminaireSet, scene: Scene | None = None) -> SetupDescription:
    """The published description of ``setup`` as evaluated with ``lights``: the lamps it uses
    and, per luminaire group, lamp, photometry, lumens and dimming (the setup's values where it
    sets them, else the scene's) with the flux figures of :class:`GroupLighting` (the file's
    rated lamp lumens need ``scene``, to read the file), and a note when a setup-wide ``lumens``
    changes every group."""
    from render.light.luminaires import channel_factors, setting_for
    from render.light.photometry import load_photometry, luminous_flux_lm

    _, lamps = channel_factors(lights, setup)
    groups: dict[str, GroupLighting] = {}
    for k, ch in enumerate(lights.channels):
        if ch.group in groups:
            continue
        s = setting_for(setup, ch.group)
        lumens = s.lumens if s.lumens is not None else ch.lumens
        # The distribution as evaluated (scaled to the channel's lumens); a lumens change of
        # the setup scales its flux in proportion (as the relighting does).
        (first,) = np.flatnonzero(lights.channel == k)[:1]
        scaled = lights.photometries[int(lights.table[first])]
        luminaire_lm = luminous_flux_lm(scaled) * lumens / ch.lumens
        rated = lor = None
        if not scaled.is_absolute:
            lor = luminaire_lm / lumens
            if scene is not None:
                source = load_photometry(
                    s.photometry or ch.photometry, base_dir=scene.base_dir, allowed_root=scene.reference_root
                )
                rated = source.rated_lumens_lm
        groups[ch.group] = GroupLighting(
            lamp=lamps[k],
            photometry=s.photometry or ch.photometry,
            lumens=published(lumens),
            dimming=published(s.dimming if s.dimming is not None else ch.dimming),
            rated_lamp_lumens=published(rated),
            luminaire_lumens=published(luminaire_lm),
            light_output_ratio=published(lor),
        )
    notes = []
    common = setup.groups.get("*")
    if common is not None and common.lumens is not None:
        changed = sorted(g for g in groups if setup.groups.get(g, GroupSetting()).lumens is None)
        kept = sorted(g for g in groups if g not in changed)
        if changed:
            notes.append(
                f"lumens = {common.lumens:g} is set for the whole setup, so it changes the lumens of every "
                f"luminaire group that does not set its own: {', '.join(changed)}"
                + (f" (groups with their own lumens: {', '.join(kept)})" if kept else "")
                + "."
            )

    return SetupDescription(setup.name, setup.description, tuple(sorted(set(lamps))), groups, tuple(notes))


def _caption(image: np.ndarray, text: str) -> np.ndarray:
    from PIL import Image, ImageDraw, ImageFont

    h = max(28, image.shape[0] // 14)
    band = Image.new("RGB", (image.shape[1], h), (24, 24, 24))
    draw = ImageDraw.Draw(band)
    font = ImageFont.load_default(size=int(h * 0.55))
    draw.text((10, h // 2), text, fill=(240, 240, 240), font=font, anchor="lm")
    return np.concatenate([np.asarray(band), image], axis=0)


def side_by_side(before: np.ndarray, after: np.ndarray, before_label: str, after_label: str) -> np.ndarray:
    """The two 8-bit sRGB images next to each other, each under a caption band."""
    gap = np.full((before.shape[0] + max(28, before.shape[0] // 14), 8, 3), 255, np.uint8)
    return np.concatenate([_caption(before, before_label), gap, _caption(after, after_label)], axis=1)


#: Width of the wipe animations, px (wider views are scaled down to it).
WIPE_WIDTH_PX = 480


def wipe_frames(
    before: np.ndarray, after: np.ndarray, n: int = 16, max_width_px: int = WIPE_WIDTH_PX
) -> list[np.ndarray]:
    """Frames of a wipe from before to after and back, with a white divider; images wider than
    ``max_width_px`` are first scaled down to that width (:func:`render.output.images.fit_width`:
    anti-aliased, in linear light), which keeps the GIF small and quick to write."""
    from render.output.images import fit_width

    before, after = fit_width(before, max_width_px), fit_width(after, max_width_px)
    w = before.shape[1]
    frames = []
    positions = list(np.linspace(0, w, n // 2).astype(int))
    for x in positions + positions[::-1]:
        f = before.copy()
        f[:, :x] = after[:, :x]
        if 0 < x < w:
            f[:, max(x - 1, 0) : x + 1] = 255
        frames.append(f)
    return frames


def summary_sentences(metrics: ComparisonMetrics) -> list[str]:
    """Plain-language statements of what changes, computed from the published figures: each
    option against the "before" setup (with one option it is called "the after" lighting)."""
    out = []
    single = len(metrics.options) == 1
    names = {k: metrics.setups[k].name or k for k in metrics.options}

    def who(key: str) -> str:
        return "after" if single else f"'{names[key]}'"

    for key in metrics.options:
        ra_b, ra_a = metrics.lamp_figure_mean("ra", BEFORE), metrics.lamp_figure_mean("ra", key)
        if ra_b is not None and ra_a is not None:
            better = "better" if ra_a > ra_b + 5 else "worse" if ra_a < ra_b - 5 else "about the same"
            out.append(
                f"Colour rendering: the {who(key)} lamps render colours {better} than the before lamps "
                f"(CIE 13.3 Ra {ra_b:.0f} before, {ra_a:.0f} {who(key)}; 100 matches the reference light, and very low or negative values mean many colours look alike)."
            )
        sp_b, sp_a = metrics.lamp_figure_mean("sp_ratio", BEFORE), metrics.lamp_figure_mean("sp_ratio", key)
        if sp_b and sp_a:
            out.append(
                f"Night-vision effectiveness: the {who(key)} light has an S/P ratio of {sp_a:.2f} against {sp_b:.2f}; "
                "a higher ratio means the eye's rods respond more to it, so the street can look brighter at the same photopic level."
            )
        bf_b, bf_a = metrics.lamp_figure_mean("blue_fraction", BEFORE), metrics.lamp_figure_mean("blue_fraction", key)
        if bf_b is not None and bf_a is not None:
            out.append(
                f"Blue content: {bf_a * 100:.0f} % of the {who(key)} light is below 500 nm ({bf_b * 100:.0f} % before); "
                "blue light scatters more in the sky and matters to wildlife and sleep."
            )
    for v in metrics.views:
        # The carriageway where the view shows it, else every surface seen.
        road = next((r for r in v.regions if r.kind == "carriageway"), None)
        stats, what, verb = (
            (v.luminance_cd_m2, "surfaces", "are") if road is None else (road.luminance_cd_m2, "the carriageway", "is")
        )
        for key in metrics.options:
            lb, la = stats[BEFORE].mean, stats[key].mean
            if lb and la:
                ratio = la / lb
                change = "brighter" if ratio > 1.1 else "darker" if ratio < 0.9 else "about as bright"
                when = "after the change" if single else f"under '{names[key]}'"
                out.append(
                    f"View '{v.name}': {what} {verb} {change} {when} (mean luminance {lb:.3g} → {la:.3g} cd/m², "
                    f"×{ratio:.2f})."
                )
    return out


def unique_stems(names: Sequence[str], reserved: frozenset[str] = frozenset()) -> list[str]:
    """File-name stems (:func:`render.fileio.file_stem`) of ``names``, made unique in order:
    a stem already taken (by an earlier name or in ``reserved``) gets the first free suffix
    ``-2``, ``-3``, ... (compared without regard to case, for case-insensitive file systems).
    The same names give the same stems."""
    taken = {r.lower() for r in reserved}
    out = []
    for name in names:
        base = file_stem(name)
        stem, n = base, 2
        while stem.lower() in taken:
            stem, n = f"{base}-{n}", n + 1
        taken.add(stem.lower())
        out.append(stem)
    return out


def setup_keys(setups: Sequence[Setup]) -> list[str]:
    """The keys of the compared setups: :data:`~render.output.metrics.BEFORE` for the first,
    then a unique file-name stem of each option's name (never a reserved key)."""
    return [BEFORE, *unique_stems([s.name for s in setups[1:]], RESERVED_KEYS)]


def luminance_scale(luminances_cd_m2: Sequence[np.ndarray]) -> tuple[float, float]:
    """The one (lo, hi) luminance-map scale in cd/m² of a report: whole decades
    (:func:`render.vision.falsecolour.shared_range_decades`) over every image given (every view
    under every setup)."""
    from render.vision.falsecolour import shared_range_decades

    return shared_range_decades(luminances_cd_m2)


def luminance_maps(luminances_cd_m2: Sequence[np.ndarray], lo_cd_m2: float, hi_cd_m2: float) -> list[np.ndarray]:
    """Luminance maps (8-bit sRGB) of the images on the log scale [lo, hi] (our own perceptually
    ordered ramp, :func:`render.vision.falsecolour.false_colour`)."""
    from render.vision.display import quantise, srgb_encode
    from render.vision.falsecolour import false_colour

    return [quantise(srgb_encode(false_colour(y, lo_cd_m2, hi_cd_m2)), 8) for y in luminances_cd_m2]


def luminance_legend(height_px: int, lo_cd_m2: float, hi_cd_m2: float) -> np.ndarray:
    """The legend (8-bit sRGB) of luminance maps on the scale [lo, hi]."""
    from render.output.luminance_legend import legend_strip
    from render.vision.display import quantise, srgb_encode

    return quantise(srgb_encode(legend_strip(height_px, lo_cd_m2, hi_cd_m2, "luminance (cd/m²)", 120)), 8)


class _ColourViews:
    """The views the colour analysis will need, kept while the comparison renders view after
    view: with a chosen view only that one; else, per tagged object, the view showing most of
    its main surface so far (the first on a tie, as
    :func:`render.analysis.view_colours.best_views`), every other view dropped as soon as no
    object needs it (memory stays bounded by the number of tagged objects)."""

    def __init__(self, chosen: str | None) -> None:
        self.chosen = chosen
        self.kept: dict[str, tuple[list[RenderedView], list[DisplayResult]]] = {}
        #: Per kept view, each setup's own adaptation state (of its adapted image), when offered.
        self.own_states: dict[str, list[AdaptationState]] = {}
        self._best: dict[int, tuple[int, str]] = {}

    def offer(
        self,
        study: Study,
        name: str,
        rendered: list[RenderedView],
        shared: list[DisplayResult],
        adapted: Sequence[DisplayResult] | None = None,
    ) -> None:
        """Keep the view if the analysis will need it (``adapted``: its adapted images, whose
        states the discrimination model uses; measured again when not given)."""
        from render.analysis.view_colours import main_surface_pixels

        if self.chosen is None:
            for k, n in main_surface_pixels(study, rendered[0]).items():
                if k not in self._best or n > self._best[k][0]:
                    self._best[k] = (n, name)
            wanted = {v for _, v in self._best.values()}
        else:
            wanted = {self.chosen}
        self.kept = {v: x for v, x in self.kept.items() if v in wanted}
        self.own_states = {v: x for v, x in self.own_states.items() if v in wanted}
        if name in wanted:
            self.kept[name] = (rendered, shared)
            if adapted is not None:
                self.own_states[name] = [d.state for d in adapted]


def colour_report_section(
    result: ColourAnalysis, pictures: Mapping[str, Path], out_dir: Path, alts: Mapping[str, str] | None = None
) -> ReportSection:
    """The report section of a colour analysis: the "name it" table, the names that change at
    night (one column per lighting), the pairs that become hard to tell apart (per lighting,
    "none" in words where there are none), the light level each lighting's pairs were judged
    at, every pair with CIEDE2000 beside the light-level model's multiple of threshold and
    verdict, and the pictures (paths relative to ``out_dir``) with their alt texts (``alts``,
    keyed like ``pictures``: :func:`render.output.colour_files.colour_picture_alt_texts`).
    Numbers are published (:func:`render.output.metrics.published`)."""
    from render.analysis.colours import CONFUSED_VERDICTS
    from render.output.colour_text import NONE, setup_light_level

    setups = list(result.setups)
    with_view = any(o.view is not None for o in result.objects)
    rows = []
    views = {o.name: o.view for o in result.objects}
    for name in result.object_names:
        row: list = [name, *([views[name] or ""] if with_view else []), result.daylight.objects[name].name]
        for s in setups:
            seen = result.setups[s].objects[name]
            row += [seen.name if seen.visible else "not visible", published(seen.weber_contrast)]
        rows.append(tuple(row))
    columns = ["object", *(["view"] if with_view else []), "daylight name"]
    for s in setups:
        columns += [f"seen under {s}", f"contrast ({s})"]
    change_rows = []
    for r in result.name_change_rows():
        cells = [r["object"], *([r["view"] or ""] if with_view else []), r["daylight"] or ""]
        for s in setups:
            seen = r["setups"][s]
            cells.append("not visible" if seen is None else (f"{seen} *" if s in r["changed"] else seen))
        change_rows.append(tuple(cells))
    if not change_rows:
        change_rows.append((NONE, *([""] if with_view else []), "", *("" for _ in setups)))
    confusion_rows = []
    for s in setups:
        confusion_rows += [
            (
                s,
                f"{c.a} / {c.b}",
                published(c.daylight_delta_e00),
                published(c.delta_e00),
                *_multiple_cells(c),
                c.verdict,
            )
            for c in result.setups[s].confusions
        ] or [(s, NONE, "", "", "", "")]
    level_rows = tuple(
        (
            s,
            published(result.setups[s].discrimination.adaptation_cd_m2),
            published(result.setups[s].discrimination.mes2_m),
            setup_light_level(result.setups[s], with_level=False),
        )
        for s in setups
    )
    pair_rows = []
    for r in result.pair_rows():
        cells: list = [f"{r['a']} / {r['b']}", published(r["daylight_delta_e00"])]
        for s in setups:
            p = r["setups"][s]
            cells += ["not visible", "", ""] if p is None else [published(p.delta_e00), *_multiple_cells(p), p.verdict]
        pair_rows.append(tuple(cells))
    pair_columns = ["pair", "ΔE00 daylight"]
    for s in setups:
        pair_columns += [f"ΔE00 ({s})", f"× threshold ({s})", f"verdict ({s})"]
    t = result.thresholds
    paragraphs = (
        "Each tagged object's colour as a resident would see it after adapting to the street (night-vision "
        "stage: mesopic luminance, rod intrusion, adaptation) is compared with its colour in daylight. Names are "
        "the eleven basic colour terms predicted from the nearest published colour-name centroid (Centore 2020); "
        "where the light is too low for hue to be seen, the name says 'colour not reliable at this light level' "
        "instead of naming a hue.",
        "Whether two objects can be told apart is judged at each lighting's own light level and at the size at "
        "which the objects are seen, by a published model of contrast sensitivity (castleCSF, Ashraf et al. 2024) "
        "applied to the light the two surfaces send to the eye: the pair's difference as a multiple of the "
        f"threshold of a typical observer. Easy: at least {t.easy_multiple:g} times threshold; hard: "
        f"{t.hard_multiple:g} to {t.easy_multiple:g} times (visible side by side, with attention); cannot: below "
        "threshold. The model was fitted to laboratory data down to 0.02 cd/m²; below that no figure is "
        "extrapolated and the table says so ('likely cannot' when even an upper bound is below threshold). "
        "CIEDE2000 is shown beside it; it has no light-level term.",
        f"Pairs listed as hard to tell apart are at least {t.distinct_in_daylight_delta_e00:g} CIEDE2000 apart in "
        f"daylight and {', '.join(CONFUSED_VERDICTS)} under a lighting. "
        "Contrast is Weber luminance contrast against the object's surroundings: lightness survives where hue does not. "
        + COLOUR_CAVEAT
        + ".",
    )
    alts = alts or {}
    return ReportSection(
        title="Telling colours apart",
        html_id="colours",
        paragraphs=paragraphs,
        tables=(
            ReportTable("Name it: daylight name and predicted night name per object", tuple(columns), tuple(rows)),
            ReportTable(
                "Names that change at night (* the name differs from the daylight name)",
                ("object", *(["view"] if with_view else []), "daylight name", *(f"seen under {s}" for s in setups)),
                tuple(change_rows),
            ),
            ReportTable(
                "Pairs that become hard to tell apart",
                ("setup", "pair", "ΔE00 daylight", "ΔE00 seen", "× threshold", "verdict"),
                tuple(confusion_rows),
            ),
            ReportTable(
                "The light level each lighting's pairs are judged at",
                ("setup", "adaptation (cd/m²)", "MES2 m", "hue and the model's range"),
                level_rows,
            ),
            ReportTable(
                "Every pair: CIEDE2000 beside the light-level verdict (× threshold of a typical observer)",
                tuple(pair_columns),
                tuple(pair_rows),
            ),
        ),
        images=tuple(str(p.relative_to(out_dir)) for p in pictures.values()),
        image_alts=tuple(alts.get(k, "") for k in pictures),
    )


def _multiple_cells(pair: PairDifference) -> tuple:
    """A pair's multiple of threshold as a report cell: the number, or below the model's range
    the bound in words, or "not judged"."""
    if pair.threshold_multiple is not None:
        return (published(pair.threshold_multiple),)
    if pair.upper_bound is not None:
        return (f"below the model's range; at most {published(pair.upper_bound):g}",)
    return (pair.note or "not judged",)


def _published_pair(c: PairDifference) -> PairDifference:
    return replace(
        c,
        daylight_delta_e00=published(c.daylight_delta_e00),
        delta_e00=published(c.delta_e00),
        threshold_multiple=published(c.threshold_multiple),
        upper_bound=published(c.upper_bound),
        size_deg=published(c.size_deg),
        adaptation_cd_m2=published(c.adaptation_cd_m2),
    )


def _labels(setups: Sequence[Setup]) -> list[str]:
    """How the setups are labelled in the colour analysis: "before: NAME", then "after: NAME"
    with one option or "option: NAME" with several."""
    word = "after" if len(setups) == 2 else "option"
    return [f"before: {setups[0].name}", *(f"{word}: {s.name}" for s in setups[1:])]


def _colour_analysis(
    study: Study,
    setups: Sequence[Setup],
    observer: ObserverSettings,
    views: _ColourViews,
    out: Path,
) -> tuple[ReportSection, ColourSummary]:
    """Colour analysis of the tagged objects under every setup, each object in the chosen view
    or in the view showing most of its main surface: the colours/ folder, the report section
    and the summary for ``metrics.json``. The pictures show the view most objects are
    analysed in."""
    from collections import Counter

    from render.analysis.view_colours import analyse_colours
    from render.output.colour_files import colour_picture_alt_texts, write_colour_json, write_colour_pictures

    result = analyse_colours(
        study, views.kept, observer, _labels(setups), views.chosen, setups=setups, own_states=views.own_states
    )
    order = list(views.kept)
    used = Counter(o.view for o in result.objects)
    name = max(order, key=lambda n: (used[n], -order.index(n)))
    rendered, shared = views.kept[name]
    cdir = out / "colours"
    text = image_metadata(
        study, rendered[0], "colour analysis", observer, study.scene.render.seed, rendered[0].buffers.spp
    )
    text["lampcast.setup"] = _comparison_text(setups)
    lamps = study.setup_lamps(list(rendered), list(setups))
    pics = write_colour_pictures(result, list(rendered), shared, lamps, cdir, text=text)
    write_colour_json(result, cdir / "colours.json")
    alts = colour_picture_alt_texts(result, [lamp for lamp, _ in lamps])
    section = colour_report_section(result, pics, out, alts)
    if views.chosen is not None:
        where = f"Analysed in view '{name}' (chosen for the colour analysis), every setup in shared exposure."
    else:
        where = (
            "Each tagged object is analysed in the view showing most of its main surface (the table names it), "
            f"every setup in shared exposure; the outlined picture shows view '{name}'."
        )
    section = replace(section, paragraphs=(where, *section.paragraphs))
    summary = ColourSummary(
        view=name,
        file="colours/colours.json",
        confusions={s: tuple(map(_published_pair, r.confusions)) for s, r in result.setups.items()},
        name_changes={s: r.name_changes for s, r in result.setups.items()},
        pairs={s: tuple(map(_published_pair, r.pairs)) for s, r in result.setups.items()},
        discrimination={s: r.discrimination for s, r in result.setups.items()},
    )
    return section, summary


def _comparison_text(setups: Sequence[Setup]) -> str:
    """The setups compared, as written into image metadata ("before=A; after=B" with one
    option, "before=A; options=B, C" with several)."""
    if len(setups) == 2:
        return f"before={setups[0].name}; after={setups[1].name}"
    return f"before={setups[0].name}; options=" + ", ".join(s.name for s in setups[1:])


def calculation_absent_reason(scene: Scene) -> str | None:
    """Why the comparison cannot calculate ``scene`` (neither a ``[street]`` nor a first
    luminaire row along a road, no luminaire row, fewer than two luminaires in the first row),
    or ``None`` when it can."""
    from render.calc.fields import row_positions, row_road

    if scene.street is None and row_road(scene) is None:
        return (
            "Not calculated: the scene has no [street] and no first luminaire row along a road, "
            "on which the calculation fields lie."
        )
    try:
        n = len(row_positions(scene))
    except InputError:
        return "Not calculated: the scene has no luminaire row; the fields lie between two luminaires of a row."
    if n < 2:
        return (
            "Not calculated: the scene's first luminaire row has fewer than two luminaires; "
            "the fields lie between two luminaires of a row."
        )
    return None


def _json_safe(value: Any) -> Any:
    """``value`` with tuples as lists, numpy numbers as Python numbers and non-finite floats
    as ``None`` (JSON has no NaN), so that it equals what ``metrics.json`` reads back."""
    if isinstance(value, Mapping):
        return {str(k): _json_safe(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json_safe(v) for v in value]
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


#: Keys the report adds beside :meth:`~render.calc.run.CalculationReport.to_json`.
_CALC_REPORT_KEYS = ("setup_keys", "headline_figures", "pictures", "picture_alts")


def calculation_json(
    report: CalculationReport | None,
    keys: Sequence[str] = (),
    pictures: Sequence[str] = (),
    alts: Sequence[str] = (),
    absent: str | None = None,
) -> dict[str, Any]:
    """What ``metrics.json`` holds under ``"calculation"``: the report's
    :meth:`~render.calc.run.CalculationReport.to_json` (every number, non-finite ones as
    ``null``) with ``setup_keys`` (the comparison's key of each setup, in order),
    ``headline_figures`` (key, label and unit of each headline figure, in order), ``pictures``
    (paths relative to the output folder) and ``picture_alts``; or ``{"absent": reason}``."""
    if report is None:
        return {"absent": absent or "Not calculated."}
    data = _json_safe(report.to_json())
    taken = [k for k in _CALC_REPORT_KEYS if k in data]
    if taken:
        raise RuntimeError(f"the calculation's JSON already has the report's keys {taken}")
    heads = report.setups[0].headline() if report.setups else ()
    data.update(
        setup_keys=list(keys),
        headline_figures=[{"key": h.key, "label": h.label, "unit": h.unit} for h in heads],
        pictures=list(pictures),
        picture_alts=list(alts),
    )
    return data


def _calculation(
    study: Study,
    setups: Sequence[Setup],
    keys: Sequence[str],
    out: Path,
    text: Mapping[str, str],
) -> Callable[[], dict[str, Any]]:
    """Calculate every setup (:func:`render.calc.run.run_calculation`) and its plan; returns a
    function that draws the pictures into ``out/calculation`` and gives
    :func:`calculation_json` of it all. The calculation follows the renders' interreflection
    (``[render] bounces`` or ``--bounces``): with bounces its fields and face grids get their
    interreflected light in rows of their own, labelled as not part of the EN 13201
    calculation, and the upward total includes the light bounced upward; the class check and
    the headline figures stay direct light."""
    from render.calc.plan import compute_plan
    from render.calc.run import calc_options, calc_study, run_calculation
    from render.output.calc_pictures import calc_picture_alt_texts, write_calc_pictures

    absent = calculation_absent_reason(study.scene)
    if absent is not None:
        return lambda: calculation_json(None, absent=absent)
    report = run_calculation(study, list(setups), calc_options(study.scene, bounces=study.scene.render.bounces))
    used = calc_study(study, report.options.include_objects)
    plans = {s.name: compute_plan(used, s) for s in setups}
    word = "after" if len(setups) == 2 else "option"
    labels = {s.name: f"{'before' if i == 0 else word}: {s.name}" for i, s in enumerate(setups)}

    def finish() -> dict[str, Any]:
        paths = write_calc_pictures(report, plans, out / CALCULATION_FOLDER, labels=labels, text=text)
        return calculation_json(
            report, keys, [p.relative_to(out).as_posix() for p in paths], calc_picture_alt_texts(report, labels)
        )

    return finish


def _write_option_pictures(
    side_path: Path,
    wipe_path: Path,
    before: np.ndarray,
    before_small: Future,
    after: np.ndarray,
    labels: tuple[str, str],
    side_text: Mapping[str, str],
    wipe_text: Mapping[str, str],
) -> Path:
    """An option's side-by-side image and wipe (``before_small``: the future of the before
    image at the wipe's width, asked of the writer before this); runs on a writer thread."""
    from render.output.images import write_gif, write_png

    write_png(side_path, side_by_side(before, after, *labels), side_text)
    return write_gif(wipe_path, wipe_frames(before_small.result(), after), text=wipe_text)


def _write_luminance_maps(
    paths: Sequence[Path],
    texts: Sequence[Mapping[str, str]],
    luminances_cd_m2: Sequence[np.ndarray],
    lo_cd_m2: float,
    hi_cd_m2: float,
) -> Path:
    """A view's luminance maps on the report's scale; runs on a writer thread."""
    from render.output.images import write_png

    for path, text, lm in zip(paths, texts, luminance_maps(luminances_cd_m2, lo_cd_m2, hi_cd_m2), strict=True):
        write_png(path, lm, text)
    return paths[-1]


class _ReportImages:
    """The report's compact copies of the images written so far: each group of files (a
    view's images, its luminance maps, the legend) is handed to the report's
    :class:`~render.output.report.images.ImageFolder` once the writer has finished it, so that
    its encodings run while later work goes on (``None`` folder: no report)."""

    def __init__(self, out: Path | None) -> None:
        from render.output.report.images import ImageFolder

        self.folder = ImageFolder(out) if out is not None else None
        self._waiting: list[tuple[list[Future], list[str]]] = []

    def add(self, futures: list[Future], relpaths: Sequence[str]) -> None:
        """Files ``relpaths`` (relative to the output folder), being written by ``futures``."""
        if self.folder is not None:
            self._waiting.append((futures, list(relpaths)))

    def hand_over(self, wait: bool = False) -> None:
        """Hand the groups whose files are written (every group with ``wait``) to the folder;
        a writer's error is raised here."""
        still = []
        for futures, relpaths in self._waiting:
            if wait or all(f.done() for f in futures):
                for f in futures:
                    f.result()
                for rel in relpaths:
                    self.folder.get(rel)
            else:
                still.append((futures, relpaths))
        self._waiting = still


@dataclass(frozen=True)
class ComparisonResult:
    """What :func:`run_comparison` made: the output folder, the figures (also in
    ``metrics.json``) and the report's path (``None`` without a report)."""

    out_dir: Path
    metrics: ComparisonMetrics
    report: Path | None


def run_comparison(
    scene: str | Path | Study,
    before: str,
    after: str | Sequence[str],
    views: Sequence[str] | None = None,
    out_dir: str | Path = "outputs/compare",
    *,
    width_px: int | None = None,
    samples_per_pixel: int | None = None,
    observer: ObserverSettings | None = None,
    report: bool = True,
    progress: bool = True,
    extra_sections: Sequence[ReportSection] = (),
    colour: bool = True,
    colour_view: str | None = None,
    calculation: bool = True,
) -> ComparisonResult:
    """Render every view under the "before" setup and relight it under each option (``after``:
    one setup or several), and write images, ``metrics.json`` and ``report.html`` (with the
    colour analysis of the tagged objects, unless ``colour=False``: every object in
    ``colour_view`` if given, else in the scene's ``[colour] view`` if rendered, else each in
    the view showing most of its main surface) and, unless ``calculation=False``, the
    calculation of every setup (module text). ``scene`` is a scene file or a
    :class:`~render.study.Study`.

    The camera rays are cast once per view; every option relights the same buffers."""
    from render.analysis.view_colours import pixel_object_ids
    from render.colour.lamp_figures import LampFigures, lamp_figures
    from render.colour.lamps import get_lamp
    from render.output.images import CHART, PICTURE_KEY, RENDERED, ImageWriter, fit_width
    from render.study import Study

    study = scene if isinstance(scene, Study) else Study(scene)
    scene = study.scene
    options = [after] if isinstance(after, str) else list(after)
    if not options:
        raise input_error("--after", "", "give at least one option to compare with the before setup")
    setups = [parse_setup(before, scene, "--before"), *(parse_setup(o, scene, "--after") for o in options)]
    keys = setup_keys(setups)
    observer = observer or study.observer
    view_names = list(views or [v.name for v in scene.views])
    for name in view_names:
        scene.view(name)  # unknown views fail before any work
    if colour_view is not None and colour_view not in view_names:
        raise input_error(
            "--colour-view",
            colour_view,
            f"{colour_view!r} is not among the compared views ({', '.join(view_names)})"
            f"{did_you_mean(colour_view, view_names)}",
        )
    chosen = colour_view or (scene.colour_view if scene.colour_view in view_names else None)
    analyse = colour and any(o.inspect for o in study.mesh.objects)
    regions = luminance_regions(study.mesh.objects)
    colour_views = _ColourViews(chosen)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    spp = samples_per_pixel or scene.render.samples_per_pixel
    seed = scene.render.seed
    compared = _comparison_text(setups)
    descriptions: dict[str, SetupDescription] | None = None
    camera = None
    view_metrics: list[ViewMetrics] = []
    # Views whose names give one file stem ("a b", "a-b") get distinct folders; "colours" is
    # the colour analysis' folder, "calculation" the calculation's.
    folders = dict(zip(view_names, unique_stems(view_names, frozenset({"colours", CALCULATION_FOLDER}))))
    pending: list[tuple[ViewImages, list[dict[str, str]], list[np.ndarray]]] = []
    # Image files are encoded and written on a thread while the next view renders (the same
    # bytes whenever they are written); the report's compact copies of the views' images are
    # encoded while the colour analysis runs and the colour and calculation figures are drawn
    # (not earlier: beside the render's parallel kernels they would only slow them down).
    writer = ImageWriter()
    report_images = _ReportImages(out if report else None)
    # The calculation's numbers are worked out after the first view (their single-threaded
    # parts beside the writer thread's encoding of that view's images); its pictures are drawn
    # at the end.
    calc_text = {"lampcast.scene_sha256": study.scene_sha256, "lampcast.comparison": compared}
    calc_json: Callable[[], dict[str, Any]] | None = None
    try:
        for name in view_names:
            vdir = out / folders[name]
            vdir.mkdir(exist_ok=True)
            rb = study.render_view(name, setups[0], samples_per_pixel=spp, width_px=width_px, progress=progress)
            rendered = [rb, *(study.relight(rb, s, progress=progress) for s in setups[1:])]
            if descriptions is None:
                descriptions = {k: setup_description(s, r.lights, scene) for k, s, r in zip(keys, setups, rendered)}
            camera = rb.camera
            shared, adapted = study.display_both(rendered, observer)
            images = ViewImages.in_folder(vdir.name, keys)

            def meta(r: RenderedView, mode: str) -> dict[str, str]:
                m = image_metadata(study, r, mode, observer, seed, spp)
                m["lampcast.comparison"] = compared
                m[PICTURE_KEY] = RENDERED
                return m

            # The luminance maps wait for every view: their scale is one for the whole report.
            pending.append(
                (images, [meta(r, "photometric") for r in rendered], [r.colorimetry.luminance_cd_m2 for r in rendered])
            )
            written = []
            for key, r, sh, ad in zip(keys, rendered, shared, adapted):
                written.append(writer.png(out / images.shared[key], sh.srgb8, sh.png_text(meta(r, "shared"))))
                written.append(writer.png(out / images.adapted[key], ad.srgb8, ad.png_text(meta(r, "adapted"))))
            word = "after" if len(setups) == 2 else "option"
            # Scaled once per view on a writer thread; asked for before the options' pictures, so
            # it is under way (the threads take work in order) before any of them waits for it.
            before_small = writer.call(fit_width, shared[0].srgb8, WIPE_WIDTH_PX)
            for key, s, r, sh in zip(keys[1:], setups[1:], rendered[1:], shared[1:]):
                written.append(
                    writer.call(
                        _write_option_pictures,
                        out / images.side_by_side[key],
                        out / images.wipe[key],
                        shared[0].srgb8,
                        before_small,
                        sh.srgb8,
                        (f"before: {setups[0].name}", f"{word}: {s.name}"),
                        meta(r, "shared side by side"),
                        meta(r, "shared wipe"),
                    )
                )
            report_images.add(
                written,
                [
                    *images.shared.values(),
                    *images.adapted.values(),
                    *images.side_by_side.values(),
                    *images.wipe.values(),
                ],
            )
            if analyse:
                colour_views.offer(study, name, rendered, shared, adapted)
            view_metrics.append(
                ViewMetrics(
                    name=name,
                    notes=scene.view(name).notes,
                    images=images,
                    luminance_cd_m2={k: luminance_stats(r) for k, r in zip(keys, rendered)},
                    # Photopic adaptation luminance of the observer (CIE TN 007 field, see render.vision.adaptation).
                    adaptation_cd_m2=AdaptationLevels(
                        published(shared[0].state.photopic_cd_m2),
                        {k: published(a.state.photopic_cd_m2) for k, a in zip(keys, adapted)},
                    ),
                    mesopic_adaptation_cd_m2=AdaptationLevels(
                        published(shared[0].state.mesopic_cd_m2),
                        {k: published(a.state.mesopic_cd_m2) for k, a in zip(keys, adapted)},
                    ),
                    regions=region_luminance(
                        pixel_object_ids(rb.buffers),
                        regions,
                        {k: r.colorimetry.luminance_cd_m2 for k, r in zip(keys, rendered)},
                    ),
                )
            )
            del rendered, shared, adapted, rb
            if calculation and calc_json is None:
                calc_json = _calculation(study, setups, keys, out, calc_text)
        if calculation and calc_json is None:
            calc_json = _calculation(study, setups, keys, out, calc_text)
        lo, hi = luminance_scale([y for *_, ys in pending for y in ys])
        scale_text = {"lampcast.luminance_scale_cd_m2": f"{lo:g} to {hi:g}"}
        for images, metas, ys in pending:
            maps = writer.call(
                _write_luminance_maps,
                [out / images.luminance[key] for key in keys],
                [{**m, **scale_text} for m in metas],
                ys,
                lo,
                hi,
            )
            report_images.add([maps], [images.luminance[key] for key in keys])
        legend_text = {
            **pending[0][1][0],
            "lampcast.mode": "photometric legend",
            "lampcast.setup": compared,
            **scale_text,
            PICTURE_KEY: CHART,
        }
        legend_text.pop("lampcast.view", None)  # one legend for every view
        legend = writer.png(out / LUMINANCE_LEGEND, luminance_legend(pending[0][2][0].shape[0], lo, hi), legend_text)
        report_images.add([legend], [LUMINANCE_LEGEND])
        del pending
        report_images.hand_over()
        sections = tuple(extra_sections)
        colours = None
        if analyse:
            section, colours = _colour_analysis(study, setups, observer, colour_views, out)
            sections += (section,)
            report_images.add([], section.images)  # written already
        del colour_views
        report_images.hand_over(wait=True)
        writer.wait()
        calc = calc_json() if calc_json is not None else None
    finally:
        writer.close()
    lamps: dict[str, LampFigures] = {}
    for description in descriptions.values():
        for lamp_id in description.lamps:
            if lamp_id not in lamps:
                # The same rounding as `lampcast lamps --json`, so both agree exactly.
                f = lamp_figures(get_lamp(lamp_id, base_dir=scene.base_dir))
                lamps[lamp_id] = LampFigures.from_json(f.to_json())
    indirect = study.indirect_settings()
    metrics = ComparisonMetrics(
        tool=ToolInfo("lampcast", __version__),
        scene=SceneInfo(scene.name, scene.description, "", scene.path.name, study.scene_sha256, scene.attribution),
        observer=ObserverInfo.of(observer),
        settings=RenderSettings(
            spp,
            seed,
            camera.width_px,
            camera.height_px,
            indirect.bounces if indirect is not None else 0,
            indirect.samples_per_pixel if indirect is not None else None,
        ),
        setups=descriptions,
        views=tuple(view_metrics),
        cautions=light_cautions(indirect),
        extra_sections=sections,
        colours=colours,
        lamps=lamps,
        luminance_legend=LUMINANCE_LEGEND,
        luminance_scale_cd_m2=(published(lo), published(hi)),
        calculation=calc,
    )
    metrics = replace(metrics, summary=tuple(summary_sentences(metrics)))
    text = json.dumps(metrics.to_json(), indent=2, sort_keys=False, ensure_ascii=False) + "\n"
    atomic_write_text(out / "metrics.json", text)
    report_path = None
    if report:
        from render.output.report import write_report

        report_path = write_report(out, metrics, images=report_images.folder)
    return ComparisonResult(out, metrics, report_path)
