"""Before and after: the comparison run behind ``lampcast compare`` and ``lampcast demo``.

For each view the camera rays are cast once; the "before" setup is evaluated on them and the
"after" setup re-lights the same buffers (re-evaluating the light at the kept hit points only if
it changes a photometric distribution). Both are shown through the night-vision stage in
``shared`` exposure (one adaptation state: their true brightness relation), in ``adapted``
exposure (each for an eye adapted to it) and as false-colour luminance with one shared legend.

Everything written is listed in ``metrics.json`` together with the figures the report shows.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from render import __version__
from render.errors import did_you_mean, input_error
from render.fileio import atomic_path, atomic_write_text, file_stem
from render.output.provenance import image_metadata
from render.scene.model import GroupSetting, Setup

#: Cautions shown with every comparison (the report adds its standing caution: an illustrative
#: preview, not a design or compliance calculation; local codes and licensed practice decide).
CAUTIONS = [
    "The images use published average-observer models of night vision, glare and colour appearance.",
    "Only direct light from the luminaires is modelled so far: light reflected between surfaces and light "
    "from the night sky are left out, so shadowed surfaces show as black and minimum luminances as 0.",
    "Real eyes differ: age, eye conditions, medication and fatigue change how bright, glary and colourful a "
    "street looks. A printed or on-screen image cannot reproduce night-time luminance exactly.",
]

SETUP_KEYS = ("lamp", "lumens", "dimming", "photometry")


def parse_setup(text: str, scene, label: str) -> Setup:
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


def _surface_luminance(rendered) -> np.ndarray:
    """Luminance (cd/m²) of the pixels that show a surface (no sky, no luminous openings)."""
    b = rendered.buffers
    surf = ((b.response >= 0) & (b.response != b.emitter_response)).reshape(-1, b.spp).all(axis=1)
    Y = rendered.colorimetry.luminance_cd_m2.reshape(-1)
    return Y[surf]


def luminance_stats(rendered) -> dict:
    """Mean, minimum, median and 95th percentile of the luminance of surfaces seen, cd/m²."""
    y = _surface_luminance(rendered)
    if y.size == 0:
        return {"mean": None, "min": None, "median": None, "p95": None}
    return {
        "mean": float(y.mean()),
        "min": float(y.min()),
        "median": float(np.median(y)),
        "p95": float(np.percentile(y, 95)),
    }


def setup_description(study, setup: Setup, lights) -> dict:
    from render.light.luminaires import channel_factors, setting_for

    factors, lamps = channel_factors(lights, setup)
    groups: dict[str, dict] = {}
    for k, ch in enumerate(lights.channels):
        s = setting_for(setup, ch.group)
        groups.setdefault(
            ch.group,
            {
                "lamp": lamps[k],
                "photometry": s.photometry or ch.photometry,
                "lumens": s.lumens if s.lumens is not None else ch.lumens,
                "dimming": s.dimming if s.dimming is not None else ch.dimming,
            },
        )
    return {"name": setup.name, "description": setup.description, "lamps": sorted(set(lamps)), "groups": groups}


def _caption(image: np.ndarray, text: str) -> np.ndarray:
    from PIL import Image, ImageDraw, ImageFont

    h = max(28, image.shape[0] // 14)
    band = Image.new("RGB", (image.shape[1], h), (24, 24, 24))
    draw = ImageDraw.Draw(band)
    font = ImageFont.load_default(size=int(h * 0.55))
    draw.text((10, h // 2), text, fill=(240, 240, 240), font=font, anchor="lm")
    return np.concatenate([np.asarray(band), image], axis=0)


def side_by_side(before: np.ndarray, after: np.ndarray, before_label: str, after_label: str) -> np.ndarray:
    gap = np.full((before.shape[0] + max(28, before.shape[0] // 14), 8, 3), 255, np.uint8)
    return np.concatenate([_caption(before, before_label), gap, _caption(after, after_label)], axis=1)


def wipe_frames(before: np.ndarray, after: np.ndarray, n: int = 16, max_width_px: int = 640) -> list[np.ndarray]:
    """Frames of a wipe from before to after and back, with a white divider; images wider than
    ``max_width_px`` are halved (box filter) first, which keeps the GIF small and quick to write."""
    while before.shape[1] > max_width_px:
        h2, w2 = before.shape[0] // 2 * 2, before.shape[1] // 2 * 2
        before, after = (
            x[:h2, :w2].reshape(h2 // 2, 2, w2 // 2, 2, 3).mean(axis=(1, 3)).round().astype(np.uint8)
            for x in (before, after)
        )
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


def write_gif(path: Path, frames: list[np.ndarray], duration_ms: int = 90) -> Path:
    import imageio.v3 as iio

    with atomic_path(path) as tmp:
        iio.imwrite(tmp, np.stack(frames), extension=".gif", duration=duration_ms, loop=0)
    return path


def _round(x, digits=4):
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return None
    if isinstance(x, float):
        return float(f"{x:.{digits}g}")
    return x


def _clean(obj):
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        return _round(float(obj))
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.ndarray):
        return _clean(obj.tolist())
    return obj


def summary_sentences(metrics: dict) -> list[str]:
    """Plain-language statements of what changes, computed from the figures."""
    out = []
    before, after = metrics["setups"]["before"], metrics["setups"]["after"]
    lamps = metrics["lamps"]

    def fig(setup, key):
        vals = [lamps[l].get(key) for l in setup["lamps"] if lamps.get(l) and lamps[l].get(key) is not None]
        return float(np.mean(vals)) if vals else None

    ra_b, ra_a = fig(before, "ra"), fig(after, "ra")
    if ra_b is not None and ra_a is not None:
        better = "better" if ra_a > ra_b + 5 else "worse" if ra_a < ra_b - 5 else "about the same"
        out.append(
            f"Colour rendering: the after lamps render colours {better} than the before lamps "
            f"(CIE 13.3 Ra {ra_b:.0f} before, {ra_a:.0f} after; 100 matches the reference light, and very low or negative values mean many colours look alike)."
        )
    sp_b, sp_a = fig(before, "sp_ratio"), fig(after, "sp_ratio")
    if sp_b and sp_a:
        out.append(
            f"Night-vision effectiveness: the after light has an S/P ratio of {sp_a:.2f} against {sp_b:.2f}; "
            "a higher ratio means the eye's rods respond more to it, so the street can look brighter at the same photopic level."
        )
    bf_b, bf_a = fig(before, "blue_fraction"), fig(after, "blue_fraction")
    if bf_b is not None and bf_a is not None:
        out.append(
            f"Blue content: {bf_a * 100:.0f} % of the after light is below 500 nm ({bf_b * 100:.0f} % before); "
            "blue light scatters more in the sky and matters to wildlife and sleep."
        )
    for v in metrics["views"]:
        lb, la = v["luminance_cd_m2"]["before"]["mean"], v["luminance_cd_m2"]["after"]["mean"]
        if lb and la:
            ratio = la / lb
            change = "brighter" if ratio > 1.1 else "darker" if ratio < 0.9 else "about as bright"
            out.append(
                f"View '{v['name']}': surfaces are {change} after the change (mean luminance {lb:.3g} → {la:.3g} cd/m², "
                f"×{ratio:.2f})."
            )
    return out


def false_colour_pair(before, after) -> tuple[list[np.ndarray], np.ndarray]:
    """False-colour luminance images (8-bit sRGB) of two views on one log scale, and the legend.

    The scale is :func:`render.vision.falsecolour.shared_range_decades` (whole decades) on our
    own perceptually ordered ramp."""
    from render.vision.display import quantise, srgb_encode
    from render.vision.falsecolour import false_colour, legend_strip, shared_range_decades

    ys = [r.colorimetry.luminance_cd_m2 for r in (before, after)]
    lo, hi = shared_range_decades(ys)
    images = [quantise(srgb_encode(false_colour(y, lo, hi)), 8) for y in ys]
    legend = quantise(srgb_encode(legend_strip(ys[0].shape[0], lo, hi, "luminance (cd/m²)", 120)), 8)
    return images, legend


def _tagged_objects_visible(study, rendered, min_pixels: int = 20) -> int:
    from render.analysis.run import pixel_object_ids

    ids = pixel_object_ids(rendered.buffers)
    tagged = [i for i, o in enumerate(study.mesh.objects) if o.inspect]
    counts = np.bincount(ids[ids >= 0].ravel(), minlength=len(study.mesh.objects))
    return int(sum(counts[i] >= min_pixels for i in tagged))


def _colour_section(study, setups, observer, colour_view, out: Path, metrics: dict) -> None:
    """Colour analysis of the tagged objects in one view: colours/ folder and a report section."""
    from render.analysis.run import analyse_view_colours, colour_pictures, colour_report_section, write_colour_json

    _, name, rb, ra, shared = colour_view
    labels = [f"before: {setups['before'].name}", f"after: {setups['after'].name}"]
    result = analyse_view_colours(study, [rb, ra], shared, observer, labels)
    cdir = out / "colours"
    text = image_metadata(study, rb, "colour analysis", observer, study.scene.render.seed, rb.buffers.spp)
    text["lampcast.setup"] = f"before={setups['before'].name}; after={setups['after'].name}"
    pics = colour_pictures(
        result, [rb, ra], shared, study.setup_lamps([rb, ra], [setups["before"], setups["after"]]), cdir, text=text
    )
    write_colour_json(result, cdir / "colours.json")
    section = colour_report_section(result, pics, out)
    section["paragraphs"].insert(
        0, f"Analysed in view '{name}' (the view showing most tagged objects), both setups in shared exposure."
    )
    metrics["extra_sections"].append(section)
    metrics["colours"] = {
        "view": name,
        "file": "colours/colours.json",
        "confusions": {s: result["setups"][s]["confusions"] for s in result["setups"]},
        "name_changes": {s: result["setups"][s]["name_changes"] for s in result["setups"]},
    }


@dataclass
class ComparisonResult:
    out_dir: Path
    metrics: dict
    report: Path | None


def run_comparison(
    scene,
    before: str,
    after: str,
    views: list[str] | None = None,
    out_dir: str | Path = "outputs/compare",
    *,
    width_px: int | None = None,
    samples_per_pixel: int | None = None,
    observer=None,
    report: bool = True,
    progress: bool = True,
    extra_sections: list | None = None,
    colour: bool = True,
) -> ComparisonResult:
    """Render every view before and after and write images, ``metrics.json`` and ``report.html``
    (with the colour analysis of the tagged objects in the view showing most of them, unless
    ``colour=False``). ``scene`` is a scene file or a :class:`~render.study.Study`."""
    from render.colour.lamp_figures import lamp_figures
    from render.colour.lamps import get_lamp
    from render.study import Study

    study = scene if isinstance(scene, Study) else Study(scene)
    scene = study.scene
    setups = {"before": parse_setup(before, scene, "--before"), "after": parse_setup(after, scene, "--after")}
    observer = observer or study.observer
    view_names = views or [v.name for v in scene.views]
    for name in view_names:
        scene.view(name)  # unknown views fail before any work
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    spp = samples_per_pixel or scene.render.samples_per_pixel
    seed = scene.render.seed
    metrics: dict = {
        "tool": {"name": "lampcast", "version": __version__},
        "scene": {
            "name": scene.name,
            "description": scene.description,
            "notes": "",
            "file": scene.path.name,
            "sha256": study.scene_sha256,
        },
        "observer": {
            "age_years": observer.age_years,
            "pigmentation": observer.pigmentation,
            "display_peak_cd_m2": observer.display_peak_cd_m2,
            "adaptation_cd_m2": observer.adaptation_cd_m2,
            "glare": observer.glare,
            "acuity": observer.acuity,
        },
        "settings": {"samples_per_pixel": spp, "seed": seed, "width_px": None, "height_px": None},
        "setups": {},
        "lamps": {},
        "views": [],
        "summary": [],
        "cautions": list(CAUTIONS),
        "extra_sections": list(extra_sections or []),
    }
    colour_view = None
    for name in view_names:
        vdir = out / file_stem(name)
        vdir.mkdir(exist_ok=True)
        rb = study.render_view(name, setups["before"], samples_per_pixel=spp, width_px=width_px, progress=progress)
        ra = study.relight(rb, setups["after"], progress=progress)
        for key, r in (("before", rb), ("after", ra)):
            metrics["setups"].setdefault(key, setup_description(study, setups[key], r.lights))
        metrics["settings"]["width_px"] = rb.camera.width_px
        metrics["settings"]["height_px"] = rb.camera.height_px
        shared, adapted = study.display_both([rb, ra], observer)
        false, legend = false_colour_pair(rb, ra)
        images: dict[str, str] = {}

        def meta(r, mode):
            m = image_metadata(study, r, mode, observer, seed, spp)
            m["lampcast.comparison"] = f"before={setups['before'].name}; after={setups['after'].name}"
            return m

        from render.vision.display import write_png

        for key, r, sh, ad, fc in (
            ("before", rb, shared[0], adapted[0], false[0]),
            ("after", ra, shared[1], adapted[1], false[1]),
        ):
            sh.write_png(vdir / f"{key}.png", 8, meta(r, "shared"))
            ad.write_png(vdir / f"{key}-adapted.png", 8, meta(r, "adapted"))
            write_png(vdir / f"{key}-falsecolour.png", fc, meta(r, "photometric"))
            images[f"{key}_shared"] = f"{vdir.name}/{key}.png"
            images[f"{key}_adapted"] = f"{vdir.name}/{key}-adapted.png"
            images[f"falsecolour_{key}"] = f"{vdir.name}/{key}-falsecolour.png"
        write_png(
            vdir / "falsecolour-legend.png",
            legend,
            {
                **meta(rb, "photometric legend"),
                "lampcast.setup": f"before={setups['before'].name}; after={setups['after'].name}",
            },
        )
        sbs = side_by_side(
            shared[0].srgb8, shared[1].srgb8, f"before: {setups['before'].name}", f"after: {setups['after'].name}"
        )
        write_png(vdir / "side-by-side.png", sbs, meta(rb, "shared side by side"))
        images["side_by_side"] = f"{vdir.name}/side-by-side.png"
        write_gif(vdir / "wipe.gif", wipe_frames(shared[0].srgb8, shared[1].srgb8))
        images["wipe"] = f"{vdir.name}/wipe.gif"
        images["falsecolour_legend"] = f"{vdir.name}/falsecolour-legend.png"
        if colour and any(o.inspect for o in study.mesh.objects):
            # Keep the view that shows the most tagged objects for the colour analysis.
            seen = _tagged_objects_visible(study, rb)
            if colour_view is None or seen > colour_view[0]:
                colour_view = (seen, name, rb, ra, shared)
        states = [shared[0].state, adapted[0].state, adapted[1].state]
        metrics["views"].append(
            {
                "name": name,
                "notes": scene.view(name).notes,
                "images": images,
                "luminance_cd_m2": {"before": luminance_stats(rb), "after": luminance_stats(ra)},
                # Photopic adaptation luminance of the observer (CIE TN 007 field, see render.vision.adaptation).
                "adaptation_cd_m2": {
                    "shared": states[0].photopic_cd_m2,
                    "before": states[1].photopic_cd_m2,
                    "after": states[2].photopic_cd_m2,
                },
                "mesopic_adaptation_cd_m2": {
                    "shared": states[0].mesopic_cd_m2,
                    "before": states[1].mesopic_cd_m2,
                    "after": states[2].mesopic_cd_m2,
                },
            }
        )
    if colour_view is not None:
        _colour_section(study, setups, observer, colour_view, out, metrics)
    for key in ("before", "after"):
        for lamp_id in metrics["setups"][key]["lamps"]:
            if lamp_id not in metrics["lamps"]:
                # The same rounding as `lampcast lamps --json`, so both agree exactly.
                f = lamp_figures(get_lamp(lamp_id, base_dir=scene.base_dir))
                metrics["lamps"][lamp_id] = f.to_json()
    lamps = metrics.pop("lamps")
    metrics = _clean(metrics)
    metrics["lamps"] = lamps
    metrics["summary"] = summary_sentences(metrics)
    atomic_write_text(out / "metrics.json", json.dumps(metrics, indent=2, sort_keys=False, ensure_ascii=False) + "\n")
    report_path = None
    if report:
        from render.output.report import write_report

        report_path = write_report(out, metrics)
    return ComparisonResult(out, metrics, report_path)
