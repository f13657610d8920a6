"""The report's compact images (render.output.report.images) and the encoders behind them.

Inputs are the synthetic report of tests/test_report.py, its images written again through
lampcast's own writers (render.output.images), which say what kind of picture each is. What the
page embeds is decoded by Pillow (an independent reader) and compared with the files: exact
pixels where the encoding is lossless; for lossy WebP, CIEDE2000 computed by colour-science
(CIE 142-2001) on CIELAB of the sRGB values, where a difference of about 1 is just noticeable
(common practice, no single source) -- the limits below are our own acceptance, not a standard.
The browser check uses Debian's Chromium through Playwright as tests/test_report_browser.py
does (same tolerance: 4 levels of 8 bits on average, common practice, no source).
"""

from __future__ import annotations

import base64
import io
import re
from pathlib import Path

import imageio.v3 as iio
import numpy as np
import pytest
from PIL import Image, ImageSequence
from test_report import make_inputs, parse, write_report_of

from render.output.images import CHART, PICTURE_KEY, RENDERED, gif_bytes, png_bytes, webp_bytes, write_gif, write_png
from render.output.report.images import (
    ANIMATION_QUALITY,
    CHART_MAX_DE00,
    RENDERED_QUALITY,
    ImageFolder,
    compact_image,
)

WIDTH, HEIGHT = 320, 200


def _frames(data: bytes) -> tuple[list[np.ndarray], list[int]]:
    with Image.open(io.BytesIO(data)) as im:
        frames = [(np.asarray(f.convert("RGB")), f.info.get("duration")) for f in ImageSequence.Iterator(im)]
    return [f for f, _ in frames], [d for _, d in frames]


def _de00(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    import colour

    def lab(x):
        return colour.XYZ_to_Lab(colour.sRGB_to_XYZ(x.astype(np.float64) / 255.0))

    return np.asarray(colour.delta_E(lab(a), lab(b), method="CIE 2000"))


def lampcast_inputs(out: Path, **kwargs) -> dict:
    """The synthetic report's inputs with every image rewritten by lampcast's writers: views,
    luminance maps and side-by-side images rendered, the legend a chart, the wipe a lampcast GIF."""
    metrics = make_inputs(out, **kwargs)
    for view in metrics["views"]:
        for slot, by_setup in view["images"].items():
            for rel in by_setup.values():
                if slot == "wipe":
                    frames, _ = _frames((out / rel).read_bytes())
                    write_gif(out / rel, frames, 300, {PICTURE_KEY: RENDERED})
                else:
                    write_png(out / rel, iio.imread(out / rel)[..., :3], {PICTURE_KEY: RENDERED})
    legend = out / metrics["luminance_legend"]
    write_png(legend, iio.imread(legend)[..., :3], {PICTURE_KEY: CHART})
    return metrics


@pytest.fixture(scope="module")
def compact_report(tmp_path_factory):
    out = tmp_path_factory.mktemp("compact")
    metrics = lampcast_inputs(out, width=WIDTH, height=HEIGHT)
    path = write_report_of(out, metrics)
    return out, metrics, path.read_text(encoding="utf-8")


def _srcs(text: str) -> dict[str, str]:
    """alt text -> src of every image of the page."""
    return {n.attrs["alt"]: n.attrs["src"] for n in parse(text).root.iter() if n.tag == "img"}


def _payload(src: str) -> tuple[str, bytes]:
    m = re.fullmatch(r"data:(image/[a-z]+);base64,([A-Za-z0-9+/=]+)", src)
    assert m, src[:60]
    return m.group(1), base64.b64decode(m.group(2))


def test_rendered_views_are_lossy_webp_close_to_the_png(compact_report):
    out, metrics, text = compact_report
    images = metrics["views"][0]["images"]
    for rel in (images["shared"]["before"], images["adapted"]["after"], images["side_by_side"]["after"]):
        file = iio.imread(out / rel)
        assert len(np.unique(file.reshape(-1, 3), axis=0)) > 256  # the lossy case
        c = compact_image((out / rel).read_bytes())
        assert c.mime == "image/webp" and c.how == f"rendered: lossy WebP q{RENDERED_QUALITY}"
        assert (c.width, c.height) == (file.shape[1], file.shape[0])
        (shown,), _ = _frames(c.data)
        de = _de00(file, shown)
        assert de.mean() <= 1.0 and np.percentile(de, 95) <= 3.0, (rel, de.mean(), np.percentile(de, 95))
        assert len(c.data) < (out / rel).stat().st_size
        # The page embeds exactly this encoding.
        assert f"data:image/webp;base64,{base64.b64encode(c.data).decode('ascii')}" in text


def test_maps_with_few_colours_and_charts_keep_their_pixels(compact_report):
    out, metrics, text = compact_report
    lum = metrics["views"][0]["images"]["luminance"]["before"]
    file = iio.imread(out / lum)
    assert len(np.unique(file.reshape(-1, 3), axis=0)) <= 256
    c = compact_image((out / lum).read_bytes())
    assert c.mime == "image/webp" and c.how == "rendered: lossless WebP"
    assert np.array_equal(_frames(c.data)[0][0], file)
    # The legend (202 colours): a palette PNG or the file, whichever is smaller; same pixels.
    legend = out / metrics["luminance_legend"]
    c = compact_image(legend.read_bytes())
    assert c.mime == "image/png" and c.how in ("chart: palette PNG", "chart: as written")
    assert len(c.data) <= legend.stat().st_size
    with Image.open(io.BytesIO(c.data)) as im:
        assert np.array_equal(np.asarray(im.convert("RGB")), iio.imread(legend)[..., :3])
    assert f"data:image/png;base64,{base64.b64encode(c.data).decode('ascii')}" in text
    # A chart of 200 flat colours in blocks: a palette PNG (colour type 3, ISO/IEC 15948), exact.
    rng = np.random.default_rng(3)
    colours = rng.integers(0, 256, (200, 3), dtype=np.uint8)
    chart = np.repeat(np.repeat(colours[rng.integers(0, 200, (30, 40))], 6, axis=0), 6, axis=1)
    data = png_bytes(chart, {PICTURE_KEY: CHART})
    c = compact_image(data)
    assert c.how == "chart: palette PNG" and c.mime == "image/png" and len(c.data) < len(data)
    with Image.open(io.BytesIO(c.data)) as im:
        assert im.mode == "P" and np.array_equal(np.asarray(im.convert("RGB")), chart)


def test_chart_quantised_only_within_a_just_noticeable_difference(tmp_path):
    # 300 colours, 60 of them one level from another: a 256-colour palette keeps every colour
    # within CIEDE2000 1 -> palette PNG. 3000 colours spread over the cube cannot -> the file as written.
    rng = np.random.default_rng(5)
    base = rng.integers(0, 256, (240, 3), dtype=np.uint8)
    near = base[:60].copy()
    near[:, 1] = np.where(near[:, 1] < 255, near[:, 1] + 1, near[:, 1] - 1)
    colours = np.concatenate([base, near])
    chart = colours[rng.integers(0, len(colours), (120, 160))]
    data = png_bytes(chart, {PICTURE_KEY: CHART})
    c = compact_image(data)
    assert c.how == "chart: quantised palette PNG" and c.mime == "image/png"
    with Image.open(io.BytesIO(c.data)) as im:
        shown = np.asarray(im.convert("RGB"))
    assert _de00(chart, shown).max() <= CHART_MAX_DE00
    spread = rng.integers(0, 256, (3000, 3), dtype=np.uint8)
    scattered = spread.reshape(50, 60, 3)  # a palette would be smaller
    data = png_bytes(scattered, {PICTURE_KEY: CHART})
    c = compact_image(data)
    assert c.how == "chart: as written" and c.data == data


def test_wipe_animation_keeps_frames_and_timing(compact_report):
    out, metrics, text = compact_report
    rel = metrics["views"][0]["images"]["wipe"]["after"]
    data = (out / rel).read_bytes()
    c = compact_image(data)
    assert c.mime == "image/webp" and c.how == f"animation: lossy WebP q{ANIMATION_QUALITY}"
    gif, gif_ms = _frames(data)
    webp, webp_ms = _frames(c.data)
    assert len(webp) == len(gif) > 1 and webp_ms == gif_ms == [300] * len(gif)
    for a, b in zip(gif, webp):
        assert np.abs(a.astype(int) - b).mean() < 4.0
    with Image.open(io.BytesIO(c.data)) as im:
        assert im.info.get("loop") == 0  # loops for ever, as the GIF


def test_files_without_a_kind_are_embedded_as_they_are(tmp_path):
    pixels = (np.arange(64 * 48 * 3).reshape(48, 64, 3) % 251).astype(np.uint8)
    for data in (
        png_bytes(pixels),  # lampcast's writer, but no kind given
        gif_bytes([pixels, pixels[::-1]]),
        webp_bytes(pixels),
    ):
        c = compact_image(data)
        assert c.data == data and c.how == "as written"


def test_report_is_deterministic_and_one_copy_per_picture(compact_report, tmp_path):
    out, metrics, text = compact_report
    again = write_report_of(out, metrics).read_text(encoding="utf-8")
    assert again == text
    from render.output.metrics import ComparisonMetrics
    from render.output.report import render_report

    typed = ComparisonMetrics.from_json(metrics)
    assert render_report(typed, out, ImageFolder(out, workers=1)) == text  # one thread or several
    # The first option's pictures are written once (in the right-hand layer); the left layer's
    # hidden copies are filled by the script.
    doc = parse(text)
    copies = [n for n in doc.root.iter() if n.tag == "img" and "data-copy" in n.attrs]
    assert len(copies) == 2 * len(metrics["views"])
    right = {n.attrs["src"] for n in doc.root.iter() if n.tag == "img" and "right" in n.attrs.get("class", "")}
    for view in metrics["views"]:
        for mode in ("shared", "adapted"):
            src = _src_of(out, view["images"][mode]["after"])
            assert src in right and text.count(src) == 1


def _src_of(out: Path, rel: str) -> str:
    c = compact_image((out / rel).read_bytes())
    return f"data:{c.mime};base64,{base64.b64encode(c.data).decode('ascii')}"


def test_compact_report_in_headless_chromium(compact_report):
    # Every embedded WebP and palette PNG decodes in Chromium, the script fills the left layer's
    # copies, and the slider shows the PNG files' pixels within the browser test's tolerance.
    from test_report_browser import CHROMIUM, CHROMIUM_ARGS, _matches, _pixels, _require_browser

    _require_browser()
    from playwright.sync_api import sync_playwright

    out, metrics, _ = compact_report
    view = metrics["views"][0]
    files = {
        (key, mode): iio.imread(out / view["images"][mode][key])[..., :3].astype(np.int16)
        for key in ("before", "after")
        for mode in ("shared", "adapted")
    }
    left, right = slice(10, WIDTH // 2 - 10), slice(WIDTH // 2 + 10, WIDTH - 10)
    report = out / "report.html"
    errors = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 900}, device_scale_factor=1)
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.goto(report.as_uri(), wait_until="load")
            assert page.evaluate("Array.from(document.images).every(i => i.complete && i.naturalWidth > 1)")
            assert page.evaluate("document.querySelectorAll('img[data-copy]').length") == 0  # all filled
            kinds = page.evaluate("Array.from(document.images).map(i => i.src.slice(0, 15))")
            assert {"data:image/webp", "data:image/png;"} <= set(kinds)
            stage = page.locator("#stage-0")
            shot = _pixels(stage.screenshot())
            assert _matches(shot, files["before", "shared"], left) and _matches(shot, files["after", "shared"], right)
            page.locator("#exposure-0-adapted").check()
            shot = _pixels(stage.screenshot())
            assert _matches(shot, files["before", "adapted"], left) and _matches(shot, files["after", "adapted"], right)
        finally:
            browser.close()
    assert not errors, errors
