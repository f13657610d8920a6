"""The consultation report (render.output.report), without a browser.

The HTML is checked with Python's own parser (``html.parser`` of the standard library), so what
"renders as text" means here is what an HTML5 tokenizer makes of the page, not what our code
thinks it wrote. Inputs are synthetic (numpy-generated images written with imageio); the lamp
figures are real ones from ``render.colour.lamp_figures`` for built-in lamps and for a 520 nm line lamp,
whose CCT is undefined by CIE S 017:2020, 17-23-068 Note 1 (see tests/test_lamps.py).
"""

from __future__ import annotations

import base64
import copy
import hashlib
import json
import math
import re
from html.parser import HTMLParser
from pathlib import Path

import imageio.v3 as iio
import markupsafe
import numpy as np
import pytest

from render.colour.lamp_figures import lamp_figures
from render.colour.lamps import get_lamp, load_lamp_file
from render.output.metrics import ComparisonMetrics
from render.output.report import DASH, LAMP_COLUMNS, MINUS, RULES, format_value, write_report

HOSTILE_SCRIPT = "<script>alert(1)</script>"
HOSTILE_ATTR = '"><img src=x onerror=alert(1)>'
HOSTILE_AMP = "Tom & Jerry's lane"


# --- synthetic inputs (also used by tests/test_report_browser.py) ------------------------------


def _street_image(width: int, height: int, warm: bool, gain: float, seed: int) -> np.ndarray:
    """An 8-bit sRGB picture of a street-like pattern: dark sky, lit road, two pools of light
    (smooth, so that a sub-pixel shift on screen changes little)."""
    y, x = np.mgrid[0:height, 0:width] / np.array([height, width])[:, None, None]
    road = np.clip((y - 0.45) * 2.0, 0.0, 1.0)
    shift = 0.01 * (seed % 5)
    pools = sum(np.exp(-(((x - cx - shift) / 0.12) ** 2 + ((y - 0.75) / 0.1) ** 2)) for cx in (0.25, 0.75))
    level = np.clip(gain * (0.05 + 0.35 * road + 0.6 * pools), 0.0, 1.0)
    tint = np.array([1.0, 0.62, 0.25]) if warm else np.array([0.78, 0.86, 1.0])
    rgb = level[..., None] * tint
    stripes = (np.floor(x * 16) % 2 == 0) & (y > 0.9)  # kerb pattern, different in each setup
    rgb[stripes] = [0.9, 0.9, 0.9] if warm else [0.2, 0.5, 0.2]
    return (np.clip(rgb, 0.0, 1.0) * 255 + 0.5).astype(np.uint8)


def _luminance(width: int, height: int, scale_cd_m2: float) -> np.ndarray:
    y, x = np.mgrid[0:height, 0:width] / np.array([height, width])[:, None, None]
    pools = sum(np.exp(-(((x - cx) / 0.12) ** 2 + ((y - 0.75) / 0.1) ** 2)) for cx in (0.25, 0.75))
    return scale_cd_m2 * (0.02 + 0.3 * np.clip(y - 0.45, 0, 1) + pools)


def _falsecolour(lum: np.ndarray, lo: float, hi: float) -> np.ndarray:
    t = np.clip((np.log10(lum) - math.log10(lo)) / (math.log10(hi) - math.log10(lo)), 0.0, 1.0)
    rgb = np.stack([t, 0.2 + 0.6 * t * (1 - t), 1.0 - t], axis=-1)
    return (rgb * 255 + 0.5).astype(np.uint8)


def _legend(height: int) -> np.ndarray:
    t = np.linspace(1.0, 0.0, height)[:, None] * np.ones((1, 24))
    strip = np.stack([t, 0.2 + 0.6 * t * (1 - t), 1.0 - t], axis=-1)
    out = np.ones((height, 60, 3))
    out[:, 4:28] = strip
    out[:: max(height // 4, 1), 28:36] = 0.0  # decade ticks
    return (out * 255 + 0.5).astype(np.uint8)


def _write(out_dir: Path, rel: str, pixels: np.ndarray, **kwargs) -> str:
    path = out_dir / rel
    path.parent.mkdir(parents=True, exist_ok=True)
    iio.imwrite(path, pixels, extension=path.suffix, **kwargs)
    return rel


def _stats(lum: np.ndarray) -> dict:
    return {
        "mean": float(lum.mean()),
        "min": float(lum.min()),
        "median": float(np.median(lum)),
        "p95": float(np.percentile(lum, 95)),
    }


def green_line_lamp(tmp_path: Path) -> dict:
    """Figures of a 520 nm line lamp: far above the Planckian locus, so CCT, Ra, R9, Rf, Rg are
    undefined (CIE S 017:2020, 17-23-068 Note 1)."""
    path = tmp_path / "green.csv"
    path.write_text("# name: green line\nline, 520.0, 1.0\n")
    return json.loads(json.dumps(lamp_figures(load_lamp_file(path)).to_json()))


def image_paths(images: dict) -> list[str]:
    """Every image path of a view's ``images`` object in metrics.json."""
    return [p for v in images.values() for p in (v.values() if isinstance(v, dict) else [v])]


def write_report_of(out_dir: Path, metrics: dict) -> Path:
    """The report of a metrics dict as metrics.json holds it (read back into the typed records)."""
    return write_report(out_dir, ComparisonMetrics.from_json(metrics))


def make_inputs(
    out_dir: Path,
    *,
    scene_name: str = "Linden Row, east end",
    view_names=("kerbside", "crossing"),
    width: int = 320,
    height: int = 200,
    green_lamp_dir: Path | None = None,
) -> dict:
    """Write synthetic images for the views into ``out_dir`` and return a metrics dict of the
    compare contract (as metrics.json would hold it)."""
    out_dir.mkdir(parents=True, exist_ok=True)
    views = []
    for i, view_name in enumerate(view_names):
        d = f"views/v{i}"
        before_shared = _street_image(width, height, True, 1.0, 10 + i)
        after_shared = _street_image(width, height, False, 0.7, 20 + i)
        before_adapted = _street_image(width, height, True, 1.3, 30 + i)
        after_adapted = _street_image(width, height, False, 1.3, 40 + i)
        lum_b, lum_a = _luminance(width, height, 1.5), _luminance(width, height, 0.9)
        wipe = np.stack(
            [np.where(np.arange(width)[None, :, None] < k * width // 4, after_shared, before_shared) for k in range(5)]
        )
        images = {
            "shared": {
                "before": _write(out_dir, f"{d}/before_shared.png", before_shared),
                "after": _write(out_dir, f"{d}/after_shared.png", after_shared),
            },
            "adapted": {
                "before": _write(out_dir, f"{d}/before_adapted.png", before_adapted),
                "after": _write(out_dir, f"{d}/after_adapted.png", after_adapted),
            },
            "luminance": {
                "before": _write(out_dir, f"{d}/luminance_before.png", _falsecolour(lum_b, 0.01, 10.0)),
                "after": _write(out_dir, f"{d}/luminance_after.png", _falsecolour(lum_a, 0.01, 10.0)),
            },
            "side_by_side": {
                "after": _write(out_dir, f"{d}/side_by_side.png", np.concatenate([before_shared, after_shared], axis=1))
            },
            "wipe": {"after": _write(out_dir, f"{d}/wipe.gif", wipe, duration=300, loop=0)},
        }
        views.append(
            {
                "name": view_name,
                "notes": f"Eye height 1.6 m, looking along the street ({view_name}).",
                "images": images,
                "luminance_cd_m2": {"before": _stats(lum_b), "after": _stats(lum_a)},
                "adaptation_cd_m2": {
                    "before": float(np.median(lum_b)),
                    "after": float(np.median(lum_a)),
                    "shared": float(np.sqrt(np.median(lum_b) * np.median(lum_a))),
                },
            }
        )
    lamps = {
        lid: json.loads(json.dumps(lamp_figures(get_lamp(lid)).to_json()))
        for lid in ("sodium-high-pressure-cie-hp1", "led-3000k-cie-b2", "led-2700k-cie-b1")
    }
    after_lamps = ["led-3000k-cie-b2", "led-2700k-cie-b1"]
    groups_after = {
        "main road": {
            "lamp": "led-3000k-cie-b2",
            "lumens": 6200.0,
            "dimming": 0.8,
            "rated_lamp_lumens": 8000.0,
            "luminaire_lumens": 4960.0,
            "light_output_ratio": 0.8,
        },
        "footpath": {
            "lamp": "led-2700k-cie-b1",
            "lumens": None,
            "dimming": 1.0,
            "rated_lamp_lumens": None,
            "luminaire_lumens": 1800.0,
            "light_output_ratio": None,
        },
    }
    if green_lamp_dir is not None:
        green = green_line_lamp(green_lamp_dir)
        lamps[green["id"]] = green
        after_lamps.append(green["id"])
        groups_after["feature"] = {
            "lamp": green["id"],
            "lumens": 300.0,
            "dimming": 0.5,
            "rated_lamp_lumens": 300.0,
            "luminaire_lumens": 240.0,
            "light_output_ratio": 0.8,
        }
    return {
        "tool": {"name": "lampcast", "version": "0.1.0"},
        "scene": {
            "name": scene_name,
            "description": "A residential street of terraced houses.",
            "notes": "Demo street of our own.",
            "file": "scenes/demo/linden_row.toml",
            "sha256": hashlib.sha256(b"synthetic scene").hexdigest(),
        },
        "observer": {"age_years": 60.0, "pigmentation": 0.5, "display_peak_cd_m2": 200.0, "adaptation_cd_m2": None},
        "settings": {"samples_per_pixel": 16, "seed": 7, "width_px": width, "height_px": height},
        "setups": {
            "before": {
                "name": "sodium, as built",
                "description": "High-pressure sodium lanterns.",
                "lamps": ["sodium-high-pressure-cie-hp1"],
                "groups": {
                    "*": {
                        "lamp": "sodium-high-pressure-cie-hp1",
                        "lumens": None,
                        "dimming": 1.0,
                        "rated_lamp_lumens": 6600.0,
                        "luminaire_lumens": 5280.0,
                        "light_output_ratio": 0.8,
                    }
                },
            },
            "after": {
                "name": "warm LED proposal",
                "description": "3000 K LED on the road, 2700 K on the path.",
                "lamps": after_lamps,
                "groups": groups_after,
            },
        },
        "lamps": lamps,
        "views": views,
        "luminance_legend": _write(out_dir, "luminance_legend.png", _legend(height)),
        "luminance_scale_cd_m2": [0.01, 10.0],
        "summary": [
            "The street will look about 40% darker to a driver arriving from the main road.",
            "Colours of cars and bins will be easier to tell apart.",
        ],
        "cautions": ["Surface reflectances are library values, not measured on this street."],
        "extra_sections": [
            {
                "title": "Colour differences",
                "html_id": "colour",
                "paragraphs": ["How far selected surfaces move in colour between the two lightings."],
                "tables": [
                    {
                        "caption": "CIEDE2000 between before and after",
                        "columns": ["surface", "ΔE00", "samples"],
                        "rows": [["red car", 12.3456, 40], ["green bin", 3.14159, 12], ["kerb", None, 0]],
                    }
                ],
                "images": [views[0]["images"]["side_by_side"]["after"]],
            }
        ],
    }


# --- a small DOM from the standard-library HTML parser ----------------------------------------

_VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


class Node:
    def __init__(self, tag, attrs, parent=None):
        self.tag, self.attrs, self.parent, self.children = tag, dict(attrs), parent, []

    def text(self) -> str:
        return "".join(c if isinstance(c, str) else c.text() for c in self.children)

    def iter(self):
        for c in self.children:
            if isinstance(c, Node):
                yield c
                yield from c.iter()


class _TreeBuilder(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.root = Node("#root", {})
        self.cur = self.root
        self.raw_text: dict[str, list[str]] = {"script": [], "style": []}

    def handle_starttag(self, tag, attrs):
        node = Node(tag, attrs, self.cur)
        self.cur.children.append(node)
        if tag not in _VOID:
            self.cur = node

    def handle_startendtag(self, tag, attrs):
        self.cur.children.append(Node(tag, attrs, self.cur))

    def handle_endtag(self, tag):
        node = self.cur
        while node is not self.root and node.tag != tag:
            node = node.parent
        assert node is not self.root, f"stray </{tag}>"
        self.cur = node.parent

    def handle_data(self, data):
        self.cur.children.append(data)
        if self.cur.tag in self.raw_text:
            self.raw_text[self.cur.tag].append(data)


def parse(text: str) -> _TreeBuilder:
    builder = _TreeBuilder()
    builder.feed(text)
    builder.close()
    assert builder.cur is builder.root, "unclosed elements"
    return builder


def resolve(metrics: dict, path: str):
    value = metrics
    for part in path.split("."):
        value = value[int(part)] if isinstance(value, list) else value[part]
    return value


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    out = tmp_path_factory.mktemp("report")
    metrics = make_inputs(out, green_lamp_dir=tmp_path_factory.mktemp("lamp"))
    path = write_report_of(out, metrics)
    return out, metrics, path, path.read_text(encoding="utf-8")


# --- tests -------------------------------------------------------------------------------------


def test_write_report_returns_the_report_path(report):
    out, _, path, text = report
    assert path == out / "report.html" and path.is_file()
    assert text.startswith("<!DOCTYPE html>")
    assert not list(out.glob(".report.*"))  # no temporary left behind by the atomic write


def test_scene_text_is_escaped(tmp_path):
    # HTML5 tokenisation (stdlib html.parser): escaped markup must arrive as text, not as tags.
    metrics = make_inputs(tmp_path, scene_name=HOSTILE_SCRIPT, view_names=(HOSTILE_ATTR, HOSTILE_AMP))
    metrics["scene"]["description"] = HOSTILE_ATTR
    metrics["scene"]["notes"] = HOSTILE_AMP + " " + HOSTILE_SCRIPT
    metrics["views"][0]["notes"] = HOSTILE_SCRIPT
    metrics["setups"]["before"]["name"] = HOSTILE_ATTR
    metrics["setups"]["after"]["name"] = HOSTILE_AMP
    groups = metrics["setups"]["after"]["groups"]
    groups[HOSTILE_SCRIPT] = groups.pop("footpath")
    metrics["summary"].append(HOSTILE_SCRIPT)
    metrics["cautions"].append(HOSTILE_ATTR)
    metrics["lamps"]["led-3000k-cie-b2"]["name"] = HOSTILE_ATTR
    extra = metrics["extra_sections"][0]
    extra["title"] = HOSTILE_SCRIPT
    extra["html_id"] = HOSTILE_ATTR
    extra["tables"][0]["rows"][0][0] = HOSTILE_ATTR
    text = write_report_of(tmp_path, metrics).read_text(encoding="utf-8")

    for raw in (HOSTILE_SCRIPT, HOSTILE_ATTR, HOSTILE_AMP):
        assert raw not in text
        assert markupsafe.escape(raw) in text  # & < > " ' as character references
    assert "<img src=x" not in text and "alert(1)</script>" not in text

    doc = parse(text)
    nodes = list(doc.root.iter())
    assert [n.tag for n in nodes].count("script") == 1  # only our own script
    for n in nodes:
        assert not any(name.startswith("on") for name in n.attrs), (n.tag, n.attrs)
        if n.tag == "img":
            assert n.attrs["src"].startswith("data:image/"), n.attrs["src"][:40]
    h1 = [n for n in nodes if n.tag == "h1"]
    assert len(h1) == 1 and h1[0].text() == HOSTILE_SCRIPT  # shown as text, exactly
    headings = [n.text() for n in nodes if n.tag == "h2"]
    assert f"View: {HOSTILE_ATTR}" in headings and f"View: {HOSTILE_AMP}" in headings
    tags = [n.text() for n in nodes if n.tag == "span" and "tag" in n.attrs.get("class", "").split()]
    assert f"before: {HOSTILE_ATTR}" in tags and f"after: {HOSTILE_AMP}" in tags
    ids = [n.attrs["id"] for n in nodes if "id" in n.attrs]
    assert len(ids) == len(set(ids))
    assert all(re.fullmatch(r"[A-Za-z][A-Za-z0-9_-]*", i) for i in ids), ids


def test_output_is_deterministic(tmp_path):
    metrics = make_inputs(tmp_path, view_names=("kerbside",))
    first = write_report_of(tmp_path, metrics).read_bytes()
    second = write_report_of(tmp_path, copy.deepcopy(metrics)).read_bytes()
    assert first == second
    # Key order of the dicts (as another JSON writer might give it) does not matter either.
    shuffled = copy.deepcopy(metrics)
    shuffled["lamps"] = dict(reversed(list(shuffled["lamps"].items())))
    groups = shuffled["setups"]["after"]["groups"]
    shuffled["setups"]["after"]["groups"] = dict(reversed(list(groups.items())))
    shuffled["setups"] = {"after": shuffled["setups"]["after"], "before": shuffled["setups"]["before"]}
    assert write_report_of(tmp_path, shuffled).read_bytes() == first
    # And a metrics.json round trip gives the same page.
    assert write_report_of(tmp_path, json.loads(json.dumps(metrics))).read_bytes() == first


@pytest.mark.parametrize(
    "value, rule, shown",
    [
        # Worked by hand from the definitions of significant figures and decimal rounding
        # (common practice, no source).
        (0.012345, "sig3", "0.0123"),
        (0.09996, "sig3", "0.100"),
        (1234.5, "sig3", "1230"),
        (12.0, "sig3", "12.0"),
        (0.0, "sig3", "0"),
        (-0.5, "sig3", MINUS + "0.500"),
        (-45.378, "fixed0", MINUS + "45"),
        (2.5, "fixed0", "2"),  # 2.5 is exact in binary: ties to even
        (0.00321, "signed4", "+0.0032"),
        (-0.00004, "signed4", "0.0000"),
        (0.4567, "percent1", "45.7"),
        (0.8, "percent0", "80"),
        (16, "int", "16"),
        (None, "fixed2", DASH),
        (float("nan"), "sig3", DASH),
    ],
)
def test_format_value_worked_examples(value, rule, shown):
    assert format_value(value, rule) == shown


def _check_rounding(shown: str, value: float, rule: str):
    """The shown text is a correct rounding of value under rule (independent of format_value)."""
    kind, digits = RULES[rule]
    number = float(shown.replace(MINUS, "-").replace("+", ""))
    if kind == "percent":
        value = value * 100.0
    decimals = len(shown.split(".")[1]) if "." in shown else 0
    if kind in ("fixed", "signed", "percent"):
        assert decimals == digits, (shown, rule)
        assert abs(number - value) <= 0.5 * 10.0**-decimals * (1 + 1e-9), (shown, value)
    elif kind == "sig":
        significant = shown.lstrip(MINUS).replace(".", "").lstrip("0")
        if abs(value) < 10.0**digits and value != 0:
            assert len(significant) == digits, (shown, value)
        unit = 10.0 ** (math.floor(math.log10(abs(number))) - digits + 1) if number else 0.0
        assert abs(number - value) <= 0.5 * unit * (1 + 1e-9), (shown, value)
    else:
        assert number == value


def test_data_metric_cells_reproduce_metrics_json(report):
    _, metrics, _, text = report
    stored = json.loads(json.dumps(metrics, allow_nan=False))  # what metrics.json holds
    cells = [n for n in parse(text).root.iter() if "data-metric" in n.attrs]
    assert cells
    paths = set()
    for cell in cells:
        path, rule = cell.attrs["data-metric"], cell.attrs["data-rule"]
        paths.add(path)
        value = resolve(stored, path)
        assert json.loads(cell.attrs["data-value"]) == value, path  # exact
        shown = cell.children[0] if cell.children and isinstance(cell.children[0], str) else ""
        assert shown == format_value(value, rule), path
        if value is None:
            assert shown == DASH
        else:
            _check_rounding(shown, value, rule)
    # Every luminance statistic, adaptation level, lamp figure, observer and setting is shown.
    for i, _ in enumerate(metrics["views"]):
        for setup in ("before", "after"):
            for stat in ("mean", "min", "median", "p95"):
                assert f"views.{i}.luminance_cd_m2.{setup}.{stat}" in paths
        for key in ("before", "after", "shared"):
            assert f"views.{i}.adaptation_cd_m2.{key}" in paths
    for setup in metrics["setups"].values():
        for lamp_id in setup["lamps"]:
            for key, *_ in LAMP_COLUMNS:
                assert f"lamps.{lamp_id}.{key}" in paths
    for key in metrics["observer"]:
        assert f"observer.{key}" in paths
    for key in metrics["settings"]:
        assert f"settings.{key}" in paths
    assert "extra_sections.0.tables.0.rows.0.1" in paths and "extra_sections.0.tables.0.rows.2.1" in paths


def test_no_external_references(report):
    _, _, _, text = report
    lowered = text.lower()
    for needle in ("http://", "https://", "@import", "url(", 'src="//', 'href="//', "ftp://", '<link rel="stylesheet'):
        assert needle not in lowered, needle
    for n in parse(text).root.iter():
        for name in ("src", "href", "action", "poster", "data"):
            if name in n.attrs and not (n.tag == "object"):
                v = n.attrs[name]
                assert v.startswith("data:") or v.startswith("#"), (n.tag, name, v[:60])
    # A Content-Security-Policy forbids any fetch but data: images and the hashed inline code.
    (csp,) = [
        n.attrs["content"] for n in parse(text).root.iter() if n.attrs.get("http-equiv") == "Content-Security-Policy"
    ]
    assert csp.startswith("default-src 'none'; img-src data:;"), csp


def test_csp_hashes_match_inline_code(report):
    # CSP Level 3: the hash source is base64(SHA-256(UTF-8 text of the element's content)).
    _, _, _, text = report
    doc = parse(text)
    csp = next(n.attrs["content"] for n in doc.root.iter() if n.attrs.get("http-equiv") == "Content-Security-Policy")
    for tag, directive in (("style", "style-src"), ("script", "script-src")):
        (body,) = doc.raw_text[tag]
        digest = base64.b64encode(hashlib.sha256(body.encode("utf-8")).digest()).decode("ascii")
        assert f"{directive} 'sha256-{digest}'" in csp


def test_undefined_figures_shown_as_dash_with_reason(report, tmp_path):
    _, metrics, _, text = report
    green = green_line_lamp(tmp_path)
    nodes = list(parse(text).root.iter())
    notes = {n.attrs["id"]: n.text() for n in nodes if n.tag == "li" and n.attrs.get("id", "").startswith("note-")}
    undefined_keys = [key for key, *_ in LAMP_COLUMNS if green[key] is None]
    assert set(undefined_keys) >= {"cct_K", "ra", "r9", "rf_cie2017", "rf_tm30", "rg_tm30"}
    for key in undefined_keys:
        (cell,) = [n for n in nodes if n.attrs.get("data-metric") == f"lamps.{green['id']}.{key}"]
        reason = green["undefined"][key]
        assert cell.children[0] == DASH
        assert cell.attrs["title"] == reason
        assert reason in cell.text()  # visually hidden text for screen readers
        (link,) = [n for n in cell.iter() if n.tag == "a"]
        assert link.attrs["href"].startswith("#note-") and reason in notes[link.attrs["href"][1:]]
    # Defined figures of the same lamp are numbers, not dashes.
    (sp,) = [n for n in nodes if n.attrs.get("data-metric") == f"lamps.{green['id']}.sp_ratio"]
    assert sp.children[0] == format_value(green["sp_ratio"], "fixed2") != DASH
    # An unset lumens value is a dash with its own reason.
    (lumens,) = [n for n in nodes if n.attrs.get("data-metric") == "setups.after.groups.footpath.lumens"]
    assert lumens.children[0] == DASH and "rated" in lumens.attrs["title"]


def test_controls_are_labelled_and_images_have_alt_text(report):
    _, metrics, _, text = report
    nodes = list(parse(text).root.iter())
    labels = {n.attrs["for"]: n.text() for n in nodes if n.tag == "label"}
    ranges = [n for n in nodes if n.tag == "input" and n.attrs.get("type") == "range"]
    radios = [n for n in nodes if n.tag == "input" and n.attrs.get("type") == "radio"]
    assert len(ranges) == len(metrics["views"]) and len(radios) == 2 * len(metrics["views"])
    for control in ranges + radios:
        assert labels.get(control.attrs["id"], "").strip(), control.attrs
    for img in (n for n in nodes if n.tag == "img"):
        assert img.attrs.get("alt", "").strip()
    # Every image of every view is in the page, each embedded once per use: per view every
    # setup's shared and adapted image (left of the divide), the right-hand pair, a luminance
    # map per setup, and per option a side-by-side image and a wipe; the legend once.
    imgs = [n for n in nodes if n.tag == "img"]
    n_setups = len(metrics["setups"])
    per_view = 2 * n_setups + 2 + n_setups + 2 * (n_setups - 1)
    extra = len(metrics["extra_sections"][0]["images"])
    assert len(imgs) == len(metrics["views"]) * per_view + 1 + extra  # one legend for the report
    # Slider labels name the setups.
    tags = [n.text() for n in nodes if n.tag == "span" and "tag" in n.attrs.get("class", "").split()]
    assert tags.count(f"before: {metrics['setups']['before']['name']}") == len(metrics["views"])
    assert tags.count(f"after: {metrics['setups']['after']['name']}") == len(metrics["views"])


def test_cautions_and_footer(report):
    _, metrics, _, text = report
    nodes = list(parse(text).root.iter())
    (cautions,) = [n for n in nodes if "cautions" in n.attrs.get("class", "")]
    body = cautions.text()
    assert "not a compliance calculation" in body and "licensed" in body
    for c in metrics["cautions"]:
        assert c in body
    (footer,) = [n for n in nodes if n.tag == "footer"]
    assert metrics["scene"]["sha256"] in footer.text() and "lampcast 0.1.0" in footer.text()


def test_embedded_images_are_the_files(report):
    out, metrics, _, text = report
    srcs = {n.attrs["src"] for n in parse(text).root.iter() if n.tag == "img"}
    for rel in image_paths(metrics["views"][0]["images"]):
        data = (out / rel).read_bytes()
        mime = "image/gif" if rel.endswith(".gif") else "image/png"
        assert f"data:{mime};base64,{base64.b64encode(data).decode('ascii')}" in srcs


def test_missing_image_is_an_error_and_leaves_no_report(tmp_path):
    metrics = make_inputs(tmp_path, view_names=("kerbside",))
    (tmp_path / metrics["views"][0]["images"]["wipe"]["after"]).unlink()
    metrics["views"][0]["images"]["side_by_side"]["after"] = "../outside.png"
    with pytest.raises(ValueError) as info:
        write_report_of(tmp_path, metrics)
    assert "wipe.gif" in str(info.value) and "outside.png" in str(info.value)
    assert not (tmp_path / "report.html").exists()
