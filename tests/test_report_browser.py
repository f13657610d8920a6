"""The consultation report in a real browser: headless Chromium driven by Playwright.

The report is served over HTTP from a folder that holds nothing but ``report.html`` (so a
stray fetch of an image file or anything else would show up in the request log and fail),
then the slider is moved with the keyboard and by filling the range, and the exposure switch
is flipped with the keyboard. What is on screen is checked as pixels: screenshots of the
slider region must change, and the parts left and right of the divide must match the "before"
and "after" image files (untagged PNGs are shown as sRGB, so an 8-bit match within a few
levels is expected -- common practice, no source).

Needs Debian's ``/usr/bin/chromium`` and ``pip install playwright`` (its driver only; no
``playwright install``). Without them the test is skipped -- unless the environment variable
``CI`` is set, where a missing browser fails the run. Set ``LAMPCAST_SCREENSHOTS`` to a folder
to keep the screenshots.
"""

from __future__ import annotations

import functools
import http.server
import io
import os
import shutil
import threading
from pathlib import Path

import imageio.v3 as iio
import numpy as np
import pytest
from test_report import make_inputs, write_report_of

from render.fileio import atomic_write_bytes

CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]
WIDTH, HEIGHT = 320, 200


def _in_ci() -> bool:
    return os.environ.get("CI", "").strip().lower() not in ("", "0", "false", "no")


def _require_browser():
    missing = []
    if not CHROMIUM.exists():
        missing.append(f"{CHROMIUM} not found (apt-get install chromium)")
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        missing.append("Python package playwright not installed (pip install playwright)")
    if missing:
        reason = "; ".join(missing)
        if _in_ci():
            pytest.fail(f"CI is set, so the browser test may not be skipped: {reason}")
        pytest.skip(reason)


class _Handler(http.server.SimpleHTTPRequestHandler):
    seen: list[str]

    def log_message(self, format, *args):  # keep pytest output clean
        pass

    def do_GET(self):
        self.seen.append(self.path)
        super().do_GET()


@pytest.fixture()
def served_report(tmp_path):
    """(url, metrics, source folder, server log) of a report served from 127.0.0.1."""
    source = tmp_path / "out"
    metrics = make_inputs(source, width=WIDTH, height=HEIGHT, green_lamp_dir=tmp_path)
    report = write_report_of(source, metrics)
    site = tmp_path / "site"
    site.mkdir()
    shutil.copyfile(report, site / "report.html")
    seen: list[str] = []
    handler = type("Handler", (_Handler,), {"seen": seen})
    server = http.server.ThreadingHTTPServer(("127.0.0.1", 0), functools.partial(handler, directory=str(site)))
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.server_address[1]}/report.html", metrics, source, seen
    finally:
        server.shutdown()
        server.server_close()
        thread.join()


def _pixels(png: bytes) -> np.ndarray:
    """The screenshot's top-left image-sized part (an element at a fractional position gives a
    screenshot one pixel taller or wider)."""
    return iio.imread(io.BytesIO(png), extension=".png")[:HEIGHT, :WIDTH, :3].astype(np.int16)


def _matches(shot: np.ndarray, reference: np.ndarray, cols: slice, rows=slice(40, None)) -> bool:
    """Screenshot region equals the image file region within 4 levels on average (8-bit)."""
    return float(np.abs(shot[rows, cols] - reference[rows, cols]).mean()) < 4.0


def test_report_in_headless_chromium(served_report, tmp_path):
    _require_browser()
    from playwright.sync_api import sync_playwright

    url, metrics, source, seen = served_report
    shots_dir = tmp_path / "screenshots"
    shots_dir.mkdir()
    keep = Path(os.environ["LAMPCAST_SCREENSHOTS"]) if os.environ.get("LAMPCAST_SCREENSHOTS") else None
    if keep is not None:
        keep.mkdir(parents=True, exist_ok=True)

    def save(name: str, png: bytes) -> bytes:
        atomic_write_bytes(shots_dir / name, png)
        if keep is not None:
            atomic_write_bytes(keep / name, png)
        return png

    view_images = metrics["views"][0]["images"]
    images = {
        f"{key}_{mode}": iio.imread(source / view_images[mode][key])[..., :3].astype(np.int16)
        for mode in ("shared", "adapted")
        for key in ("before", "after")
    }
    left, right = slice(10, WIDTH // 2 - 10), slice(WIDTH // 2 + 10, WIDTH - 10)

    console, errors, requests = [], [], []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 900}, device_scale_factor=1)
            page.set_default_timeout(30_000)
            page.on("console", lambda m: console.append((m.type, m.text)))
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.on("request", lambda r: requests.append(r.url))
            page.goto(url, wait_until="load")
            # Every embedded image decodes (a broken data URI would give naturalWidth 0).
            assert page.evaluate("Array.from(document.images).every(i => i.complete && i.naturalWidth > 0)")
            # Per view: before and after in both exposures left of the divide, the right-hand
            # pair, two luminance maps, one side-by-side image and one wipe; one legend for all.
            assert page.evaluate("document.images.length") == len(metrics["views"]) * 10 + 1 + 1
            save("report_full_page.png", page.screenshot(full_page=True))

            stage = page.locator("#stage-0")
            slider = page.locator("#slider-0")
            assert stage.bounding_box()["width"] == WIDTH  # shown at its own size, so pixels compare
            assert slider.input_value() == "50"

            # Initial state: before left of the divide, after right of it (shared exposure).
            mid = _pixels(save("slider_50_shared.png", stage.screenshot()))
            assert mid.shape[:2] == (HEIGHT, WIDTH)
            assert _matches(mid, images["before_shared"], left) and _matches(mid, images["after_shared"], right)
            assert not _matches(mid, images["after_shared"], left)

            # Keyboard: reach the slider with Tab, then Home puts the divide at the left edge.
            page.locator("body").focus()
            for _ in range(60):
                page.keyboard.press("Tab")
                if page.evaluate("document.activeElement && document.activeElement.id") == "slider-0":
                    break
            else:
                pytest.fail("the slider cannot be reached with the Tab key")
            page.keyboard.press("Home")
            assert slider.input_value() == "0"
            all_after = _pixels(save("slider_0_shared.png", stage.screenshot()))
            assert not np.array_equal(all_after, mid)
            assert _matches(all_after, images["after_shared"], left) and _matches(
                all_after, images["after_shared"], right
            )
            page.keyboard.press("ArrowRight")
            assert slider.input_value() == "1"
            assert slider.get_attribute("aria-valuetext") == "divide at 1% of the width"

            # Filling the range moves the divide as well.
            slider.fill("100")
            assert slider.input_value() == "100"
            all_before = _pixels(save("slider_100_shared.png", stage.screenshot()))
            assert not np.array_equal(all_before, all_after)
            assert _matches(all_before, images["before_shared"], right)
            slider.fill("50")
            assert np.array_equal(_pixels(stage.screenshot()), mid)

            # Exposure switch, by keyboard: arrow keys move within the radio group.
            page.locator("#exposure-0-shared").focus()
            page.keyboard.press("ArrowRight")
            assert page.locator("#exposure-0-adapted").is_checked()
            assert page.locator("#compare-0").get_attribute("data-exposure") == "adapted"
            adapted = _pixels(save("slider_50_adapted.png", stage.screenshot()))
            assert not np.array_equal(adapted, mid)
            assert _matches(adapted, images["before_adapted"], left) and _matches(
                adapted, images["after_adapted"], right
            )
            assert page.locator('#stage-0 img.left.adapted[data-setup="before"]').is_visible()
            assert not page.locator('#stage-0 img.left.shared[data-setup="before"]').is_visible()
            save("view_0_section.png", page.locator("#view-0").screenshot())
            save("lamps_section.png", page.locator("#lamps").screenshot())
            page.keyboard.press("ArrowLeft")
            assert page.locator("#exposure-0-shared").is_checked()
            assert np.array_equal(_pixels(stage.screenshot()), mid)

            # The other view's controls are independent.
            assert page.locator("#slider-1").input_value() == "50"
            assert page.locator("#compare-1").get_attribute("data-exposure") == "shared"

            # Undefined figures carry their reason as a tooltip.
            green = next(k for k, v in metrics["lamps"].items() if v["cct_K"] is None)
            cell = page.locator(f'td[data-metric="lamps.{green}.cct_K"]')
            assert cell.get_attribute("title") == metrics["lamps"][green]["undefined"]["cct_K"]
        finally:
            browser.close()

    assert not errors, errors
    assert not [m for m in console if m[0] == "error"], console
    external = [u for u in requests if not u.startswith("data:") and u != url]
    assert not external, external
    assert seen == ["/report.html"], seen  # the server saw the page and nothing else
    for name in ("report_full_page.png", "slider_50_shared.png", "slider_0_shared.png", "slider_50_adapted.png"):
        assert (shots_dir / name).stat().st_size > 0


def test_choosing_the_two_lightings_shown(tmp_path):
    # Issue 12, "choices, not just a pair": with a third lighting the reader picks which two the
    # slider shows (before and any option, or two options); pixels left and right of the divide
    # must then be those of the chosen image files (same tolerance as above).
    _require_browser()
    from playwright.sync_api import sync_playwright
    from test_report import _street_image, _write

    source = tmp_path / "out"
    metrics = make_inputs(source, view_names=("kerbside",), width=WIDTH, height=HEIGHT)
    view = metrics["views"][0]
    third = {
        "shared": _street_image(WIDTH, HEIGHT, False, 0.4, 77),
        "adapted": _street_image(WIDTH, HEIGHT, True, 0.5, 78),
    }
    for mode in ("shared", "adapted", "luminance"):
        pixels = third.get(mode, third["shared"])
        view["images"][mode]["dim"] = _write(source, f"views/v0/{mode}_dim.png", pixels)
    view["images"]["side_by_side"]["dim"] = view["images"]["side_by_side"]["after"]
    view["images"]["wipe"]["dim"] = view["images"]["wipe"]["after"]
    view["luminance_cd_m2"]["dim"] = view["luminance_cd_m2"]["after"]
    view["adaptation_cd_m2"]["dim"] = view["adaptation_cd_m2"]["after"]
    metrics["setups"]["dim"] = {**metrics["setups"]["after"], "name": "warm LED at half output"}
    report = write_report_of(source, metrics)
    files = {
        (key, mode): iio.imread(source / view["images"][mode][key])[..., :3].astype(np.int16)
        for key in ("before", "after", "dim")
        for mode in ("shared", "adapted")
    }
    left, right = slice(10, WIDTH // 2 - 10), slice(WIDTH // 2 + 10, WIDTH - 10)
    errors = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=CHROMIUM_ARGS)
        try:
            page = browser.new_page(viewport={"width": 1280, "height": 900}, device_scale_factor=1)
            page.on("pageerror", lambda e: errors.append(str(e)))
            page.goto(report.as_uri(), wait_until="load")
            stage = page.locator("#stage-0")
            shot = _pixels(stage.screenshot())
            assert _matches(shot, files["before", "shared"], left) and _matches(shot, files["after", "shared"], right)
            page.select_option("#right-0", "dim")
            shot = _pixels(stage.screenshot())
            assert _matches(shot, files["before", "shared"], left) and _matches(shot, files["dim", "shared"], right)
            assert page.locator("#stage-0 .tag-after").text_content() == "option: warm LED at half output"
            page.select_option("#left-0", "after")
            shot = _pixels(stage.screenshot())
            assert _matches(shot, files["after", "shared"], left) and _matches(shot, files["dim", "shared"], right)
            assert not _matches(shot, files["before", "shared"], left)
            page.locator("#exposure-0-adapted").check()
            shot = _pixels(stage.screenshot())
            assert _matches(shot, files["after", "adapted"], left) and _matches(shot, files["dim", "adapted"], right)
        finally:
            browser.close()
    assert not errors, errors
