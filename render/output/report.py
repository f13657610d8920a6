"""The consultation report: one self-contained HTML page built from the compare metrics.

:func:`write_report` turns the ``metrics`` dict of ``lampcast compare`` (exactly what is
written to ``metrics.json``) and the images it names into ``report.html``, a page a lighting
designer can put in front of residents:

* a header with the scene's name and description and the cautions (an illustrative preview,
  not a compliance calculation);
* the plain-language summary;
* per view: a before/after slider (a range input moving a CSS clip of the "after" image over
  the "before" image), a shared/adapted exposure switch, the false-colour luminance maps with
  their legend, the side-by-side image, the wipe animation and a luminance table;
* per lighting setup: its luminaire groups and the lamp figures (CCT, Duv, Ra, R9, CIE 224 Rf,
  TM-30 Rf/Rg, S/P, luminous efficacy of radiation, blue and notch-filterable fractions);
* the observer and render settings, and a footer with the tool version and the scene hash.

The page is self-contained: every image is embedded as a base64 ``data:`` URI, CSS and the
small script are inline, and a Content-Security-Policy (with hashes of the inline style and
script) forbids every network fetch, so the page works offline and from an e-mail attachment.

Safety and reproducibility:

* every piece of text from the scene or the metrics passes through :func:`html.escape` with
  ``quote=True`` (the :class:`Markup` / :func:`element` helpers make raw interpolation
  impossible by construction) and every attribute value is quoted;
* the output is deterministic: the same metrics and images give byte-identical HTML (no
  timestamps; setups in the order before, after, then by name; groups by name);
* every number is shown through the single function :func:`format_value` with a named rule
  (:data:`RULES`); each table cell holding a number carries ``data-metric`` (its dotted path in
  ``metrics.json``, e.g. ``views.0.luminance_cd_m2.before.mean``), ``data-value`` (the exact
  value, as Python ``repr``) and ``data-rule`` (the rule used), so the shown value can be
  reproduced from ``metrics.json``.
"""

from __future__ import annotations

import base64
import hashlib
import html
import math
import re
from collections.abc import Iterable, Mapping, Sequence
from pathlib import Path
from typing import Any

from render.fileio import atomic_write_text

#: File name of the report inside the output folder.
REPORT_NAME = "report.html"

#: Shown first among the cautions, whatever the metrics say.
STANDING_CAUTION = (
    "This is an illustrative preview of how the street may look, not a lighting design and not a "
    "compliance calculation. Lighting classes and compliance are decided by local codes and "
    "standards and by qualified, licensed lighting practitioners."
)

#: What the two exposures of the slider mean (one sentence each).
EXPOSURE_HELP = {
    "shared": (
        "Shared exposure shows both lightings with one and the same exposure, so the true "
        "brightness relation is kept: a darker street looks darker."
    ),
    "adapted": (
        "Adapted exposure shows each lighting as an eye adapted to it would see it after some "
        "minutes in the street, so overall brightness differences are largely evened out."
    ),
}

#: Shown in place of a number that is not defined or not given.
DASH = "\u2014"
#: Minus sign used for negative numbers (U+2212, not the hyphen).
MINUS = "\u2212"

#: Display rules: name -> (kind, digits). ``sig``: that many significant figures (never
#: exponent notation); ``fixed``: that many decimals; ``signed``: decimals with an explicit
#: sign; ``percent``: the value times 100 with that many decimals (the % sign is in the column
#: heading); ``int``: an integer as it is.
RULES: dict[str, tuple[str, int]] = {
    "sig3": ("sig", 3),
    "fixed0": ("fixed", 0),
    "fixed1": ("fixed", 1),
    "fixed2": ("fixed", 2),
    "signed4": ("signed", 4),
    "percent0": ("percent", 0),
    "percent1": ("percent", 1),
    "int": ("int", 0),
}

#: Lamp figure columns: (figure key, heading, unit, rule).
LAMP_COLUMNS: tuple[tuple[str, str, str, str], ...] = (
    ("cct_K", "CCT", "K", "fixed0"),
    ("duv", "Duv", "", "signed4"),
    ("ra", "Ra", "CIE 13.3", "fixed0"),
    ("r9", "R9", "CIE 13.3", "fixed0"),
    ("rf_cie2017", "Rf", "CIE 224", "fixed0"),
    ("rf_tm30", "Rf", "TM-30", "fixed0"),
    ("rg_tm30", "Rg", "TM-30", "fixed0"),
    ("sp_ratio", "S/P", "", "fixed2"),
    ("ler_lm_per_w", "Efficacy", "lm/W of light", "fixed0"),
    ("blue_fraction", "Blue", "% below 500 nm", "percent1"),
    ("notch_fraction", "Notch", "% within \u00b12 nm", "percent1"),
)

#: Plain-language meaning of the lamp figures, shown under the lamp tables.
LAMP_FIGURE_HELP: tuple[tuple[str, str], ...] = (
    ("CCT", "how warm (low kelvin, yellowish) or cool (high kelvin, bluish) the white of the light looks."),
    (
        "Duv",
        "how far the light's colour lies from the line of ideal warm-to-cool whites; near 0 is neutral, "
        "positive is greenish, negative pinkish.",
    ),
    (
        "Ra, R9, Rf",
        "how faithfully colours look compared with a reference light of the same CCT; 100 is "
        "best. R9 is for strong reds, which some lamps render poorly.",
    ),
    ("TM-30 Rg", "whether colours look more (above 100) or less (below 100) saturated than under the reference."),
    ("S/P", "the lamp's effect on night-time (rod) vision relative to its effect on daytime vision."),
    (
        "Efficacy (of radiation)",
        "lumens per watt of emitted light; this is not the electrical efficiency of a luminaire.",
    ),
    ("Blue", "share of the emitted power below 500 nm, the band that matters most for sky glow and for wildlife."),
    (
        "Notch (filterable fraction)",
        "share of the power in the lamp's strongest 4 nm band, which a narrow "
        "filter (for example at an observatory) could remove.",
    ),
)

#: Luminance statistics of a view: (key, heading).
LUMINANCE_STATS = (("mean", "mean"), ("min", "minimum"), ("median", "median"), ("p95", "95th percentile"))

_SETUP_ORDER = ("before", "after")
_ATTR_NAME = re.compile(r"^[a-z][a-z0-9-]*$")
_ID_SAFE = re.compile(r"^[A-Za-z][A-Za-z0-9_-]*$")


# --- numbers ---------------------------------------------------------------------------------


def format_value(value: Any, rule: str) -> str:
    """The text shown for ``value`` under display rule ``rule`` (see :data:`RULES`).

    The one rounding function of the report. ``None`` (and NaN/inf) gives :data:`DASH`.
    Negative numbers use U+2212 MINUS SIGN; a value that rounds to zero shows no sign, even
    under ``signed``. Rounding is Python's correctly rounded decimal conversion of the binary
    value (``format(value, ".Nf")`` / ``".Ne"``; ties of the exact binary value go to even).

    >>> format_value(0.012345, "sig3"), format_value(1234.5, "sig3"), format_value(-0.00321, "signed4")
    ('0.0123', '1230', '−0.0032')
    >>> format_value(0.4567, "percent1"), format_value(None, "fixed0")
    ('45.7', '—')
    """
    if rule not in RULES:
        raise ValueError(f"unknown display rule {rule!r}; expected one of {sorted(RULES)}")
    if value is None or isinstance(value, bool):
        return DASH if value is None else str(value)
    kind, digits = RULES[rule]
    if kind == "int":
        if isinstance(value, float) and not value.is_integer():
            raise ValueError(f"display rule 'int' needs an integer, got {value!r}")
        return str(int(value)).replace("-", MINUS)
    value = float(value)
    if not math.isfinite(value):
        return DASH
    if kind == "percent":
        value *= 100.0
    if kind == "sig":
        text = _significant(value, digits)
    else:
        text = f"{value:.{digits}f}"
    negative = text.startswith("-")
    text = text.lstrip("-")
    if float(text) == 0.0:
        negative = False
    sign = MINUS if negative else ("+" if kind == "signed" and float(text) != 0.0 else "")
    return sign + text


def _significant(value: float, digits: int) -> str:
    """``value`` to ``digits`` significant figures in plain decimal notation."""
    if value == 0.0:
        return "0"
    rounded = float(f"{value:.{digits - 1}e}")  # correctly rounded to `digits` figures
    exponent = math.floor(math.log10(abs(rounded)))
    decimals = max(0, digits - 1 - exponent)
    return f"{rounded:.{decimals}f}"


# --- HTML building ---------------------------------------------------------------------------


class Markup(str):
    """A string that is already HTML; anything else is escaped when it is put into a page."""

    __slots__ = ()


def esc(text: Any) -> Markup:
    """Text made safe for HTML content and quoted attribute values (``html.escape``, quote=True)."""
    return Markup(html.escape(str(text), quote=True))


def _content(children: Iterable[Any]) -> str:
    parts: list[str] = []
    for child in children:
        if child is None:
            continue
        if isinstance(child, Markup):
            parts.append(child)
        elif isinstance(child, (list, tuple)):
            parts.append(_content(child))
        else:
            parts.append(esc(child))
    return "".join(parts)


def element(tag: str, attrs: Mapping[str, Any] | None = None, *children: Any) -> Markup:
    """``<tag attrs>children</tag>``: attribute values are escaped and double-quoted, children
    that are not :class:`Markup` are escaped. ``None`` attributes are left out, ``True`` ones
    written bare (boolean attributes)."""
    if not _ATTR_NAME.match(tag):
        raise ValueError(f"bad tag name {tag!r}")
    out = [f"<{tag}"]
    for name, value in (attrs or {}).items():
        if not _ATTR_NAME.match(name):
            raise ValueError(f"bad attribute name {name!r}")
        if value is None or value is False:
            continue
        out.append(f" {name}" if value is True else f' {name}="{esc(value)}"')
    out.append(">")
    if tag in _VOID:
        if children:
            raise ValueError(f"<{tag}> takes no content")
        return Markup("".join(out))
    out.append(_content(children))
    out.append(f"</{tag}>")
    return Markup("".join(out))


_VOID = {"img", "input", "meta", "link", "br", "hr"}


def join(*parts: Any) -> Markup:
    """Concatenate children (escaping the non-Markup ones)."""
    return Markup(_content(parts))


def number_cell(
    path: str,
    value: Any,
    rule: str,
    tag: str = "td",
    reason: str | None = None,
    note: Markup | None = None,
    show_reason: bool = False,
) -> Markup:
    """A table cell showing ``value`` under ``rule``, with ``data-metric``/``-value``/``-rule``.

    An undefined value shows :data:`DASH`, with ``reason`` as its tooltip (``title``) and as
    text after the dash (visually hidden, for screen readers, unless ``show_reason``);
    ``note`` (a footnote marker) follows the value.
    """
    text = format_value(value, rule)
    attrs = {
        "class": "num" if value is not None else "num undefined",
        "data-metric": path,
        "data-value": "null" if value is None else repr(value),
        "data-rule": rule,
        "title": reason if value is None else None,
    }
    hidden = None
    if value is None and reason:
        hidden = element("span", {"class": "why" if show_reason else "sr-only"}, f" ({reason})")
    return element(tag, attrs, text, hidden, note)


def table(
    table_id: str,
    title: str,
    rows: Sequence[Markup],
    head: Markup | None = None,
    cls: str = "figures",
    scrolls: bool = False,
) -> Markup:
    """A titled table. The title is a paragraph named by ``aria-labelledby`` (so it wraps at the
    page width, not the table's); a table that may be wider than the page (``scrolls``) sits in
    a focusable region, so that it can be scrolled with the keyboard."""
    title_id = f"{table_id}-title"
    wrap = {"class": "table-wrap"}
    if scrolls:
        wrap.update({"role": "region", "tabindex": "0", "aria-labelledby": title_id})
    return element(
        "div",
        wrap,
        element("p", {"class": "table-title", "id": title_id}, title),
        element(
            "table",
            {"class": cls, "id": table_id, "aria-labelledby": title_id},
            element("thead", {}, head) if head is not None else None,
            element("tbody", {}, rows),
        ),
    )


# --- images ----------------------------------------------------------------------------------


def _image_info(data: bytes) -> tuple[str, int | None, int | None]:
    """(MIME type, width px, height px) from the file's signature and header."""
    if data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR":
        return "image/png", int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")
    if data[:6] in (b"GIF87a", b"GIF89a"):
        return "image/gif", int.from_bytes(data[6:8], "little"), int.from_bytes(data[8:10], "little")
    if data[:3] == b"\xff\xd8\xff":
        return "image/jpeg", None, None
    if data[:4] == b"RIFF" and data[8:12] == b"WEBP":
        return "image/webp", None, None
    raise ValueError("not a PNG, GIF, JPEG or WebP image")


class _Images:
    """Reads the images named by relative path under ``out_dir`` once each, as data URIs."""

    def __init__(self, out_dir: Path):
        self.root = out_dir.resolve()
        self.cache: dict[str, tuple[str, int | None, int | None]] = {}
        self.problems: list[str] = []

    def get(self, relpath: str) -> tuple[str, int | None, int | None]:
        if relpath in self.cache:
            return self.cache[relpath]
        entry = ("data:,", None, None)
        path = (self.root / relpath).resolve()
        if Path(relpath).is_absolute() or not path.is_relative_to(self.root):
            self.problems.append(f"{relpath}: image path must be relative to, and inside, {self.root}")
        elif not path.is_file():
            self.problems.append(f"{relpath}: image file not found in {self.root}")
        else:
            data = path.read_bytes()
            try:
                mime, width, height = _image_info(data)
            except ValueError as exc:
                self.problems.append(f"{relpath}: {exc}")
            else:
                entry = (f"data:{mime};base64,{base64.b64encode(data).decode('ascii')}", width, height)
        self.cache[relpath] = entry
        return entry

    def img(self, relpath: str, alt: str, cls: str | None = None) -> Markup:
        uri, width, height = self.get(relpath)
        return element("img", {"class": cls, "src": uri, "alt": alt, "width": width, "height": height})


# --- page parts ------------------------------------------------------------------------------


def _slug(text: str) -> str:
    """An id-safe form of ``text`` (letters, digits, ``_`` and ``-``)."""
    slug = re.sub(r"[^A-Za-z0-9_-]+", "-", str(text)).strip("-")
    return slug if slug and slug[0].isalpha() else f"x{slug}"


def _ordered_setups(setups: Mapping[str, Any]) -> list[str]:
    first = [key for key in _SETUP_ORDER if key in setups]
    return first + sorted(key for key in setups if key not in _SETUP_ORDER)


def _setup_name(metrics: Mapping, key: str) -> str:
    setup = metrics.get("setups", {}).get(key, {})
    return str(setup.get("name") or key)


def _header(metrics: Mapping, nav: Sequence[tuple[str, str]]) -> Markup:
    scene = metrics.get("scene", {})
    cautions = [STANDING_CAUTION] + [c for c in metrics.get("cautions", []) if c != STANDING_CAUTION]
    return element(
        "header",
        {"class": "page-head"},
        element("p", {"class": "kicker"}, "Street lighting change \u2014 consultation preview"),
        element("h1", {}, scene.get("name", "")),
        element("p", {"class": "lede"}, scene.get("description", "")) if scene.get("description") else None,
        element("p", {"class": "scene-notes"}, scene.get("notes", "")) if scene.get("notes") else None,
        element(
            "section",
            {"class": "cautions", "aria-labelledby": "cautions-title"},
            element("h2", {"id": "cautions-title"}, "Please read first"),
            element("ul", {}, [element("li", {}, c) for c in cautions]),
        ),
        element(
            "nav",
            {"aria-label": "Contents"},
            element(
                "ul", {}, [element("li", {}, element("a", {"href": f"#{anchor}"}, label)) for anchor, label in nav]
            ),
        ),
    )


def _summary(metrics: Mapping) -> Markup:
    setups = metrics.get("setups", {})
    items = []
    for key in _ordered_setups(setups):
        setup = setups[key]
        items.append(
            element(
                "li",
                {},
                element("strong", {}, f"{key.capitalize()}: {setup.get('name', key)}"),
                f" \u2014 {setup.get('description')}" if setup.get("description") else None,
            )
        )
    return element(
        "section",
        {"id": "summary", "aria-labelledby": "summary-title"},
        element("h2", {"id": "summary-title"}, "In short"),
        element("ul", {"class": "summary"}, [element("li", {}, s) for s in metrics.get("summary", [])]),
        element("h3", {}, "The two lightings compared"),
        element("ul", {}, items),
    )


def _compare_figure(i: int, view: Mapping, metrics: Mapping, images: _Images) -> Markup:
    imgs = view.get("images", {})
    name = view.get("name", f"view {i + 1}")
    before, after = _setup_name(metrics, "before"), _setup_name(metrics, "after")
    slider_id, help_id = f"slider-{i}", f"exposure-help-{i}"

    def layer(which: str, setup_name: str) -> list[Markup]:
        return [
            images.img(
                imgs[f"{which}_{exposure}"],
                f"{which.capitalize()} ({setup_name}), view \u201c{name}\u201d, {exposure} exposure",
                cls=f"{which} {exposure}",
            )
            for exposure in ("shared", "adapted")
        ]

    stage = element(
        "div",
        {"class": "stage", "id": f"stage-{i}"},
        layer("before", before),
        element("div", {"class": "after-layer"}, layer("after", after)),
        element("span", {"class": "divider", "aria-hidden": "true"}),
        element("span", {"class": "tag tag-before"}, f"before: {before}"),
        element("span", {"class": "tag tag-after"}, f"after: {after}"),
    )
    # The range sits in the same shrink-to-fit box as the image (its label outside it), so the
    # slider is as wide as the picture and its value is the divide's position.
    slider = element(
        "input",
        {
            "type": "range",
            "id": slider_id,
            "class": "divide",
            "min": "0",
            "max": "100",
            "step": "1",
            "value": "50",
            "aria-valuetext": "divide at 50% of the width",
        },
    )
    slider_label = element(
        "label",
        {"for": slider_id, "class": "slider-label"},
        "Move the divide with the slider or the arrow keys: left of the line is before, right of it is after.",
    )
    radios = []
    for exposure, label in (("shared", "Shared exposure"), ("adapted", "Adapted exposure")):
        rid = f"exposure-{i}-{exposure}"
        radios.append(
            element(
                "span",
                {"class": "choice"},
                element(
                    "input",
                    {
                        "type": "radio",
                        "name": f"exposure-{i}",
                        "id": rid,
                        "value": exposure,
                        "checked": exposure == "shared",
                        "aria-describedby": help_id,
                    },
                ),
                element("label", {"for": rid}, label),
            )
        )
    toggle = element(
        "fieldset",
        {"class": "exposure"},
        element("legend", {}, "Exposure"),
        radios,
        element(
            "div", {"id": help_id, "class": "help"}, [element("p", {}, EXPOSURE_HELP[e]) for e in ("shared", "adapted")]
        ),
    )
    return element(
        "figure",
        {"class": "compare", "data-exposure": "shared", "id": f"compare-{i}"},
        element("div", {"class": "stage-wrap"}, stage, slider),
        slider_label,
        toggle,
        element(
            "figcaption",
            {},
            f"View \u201c{name}\u201d: before ({before}) and after ({after}). "
            "Without scripts the divide stays in the middle.",
        ),
    )


def _luminance_table(i: int, view: Mapping, metrics: Mapping) -> Markup:
    lum = view.get("luminance_cd_m2", {})
    head = element(
        "tr",
        {},
        element("th", {"scope": "col"}, "lighting"),
        [element("th", {"scope": "col", "class": "num"}, label) for _, label in LUMINANCE_STATS],
    )
    rows = []
    for key in ("before", "after"):
        stats = lum.get(key, {})
        rows.append(
            element(
                "tr",
                {},
                element("th", {"scope": "row"}, f"{key}: {_setup_name(metrics, key)}"),
                [
                    number_cell(f"views.{i}.luminance_cd_m2.{key}.{stat}", stats.get(stat), "sig3", reason="not given")
                    for stat, _ in LUMINANCE_STATS
                ],
            )
        )
    adapt = view.get("adaptation_cd_m2", {})
    adapt_rows = [
        element(
            "tr",
            {},
            element("th", {"scope": "row"}, label),
            number_cell(f"views.{i}.adaptation_cd_m2.{key}", adapt.get(key), "sig3", reason="not given"),
        )
        for key, label in (
            ("before", f"adapted, before: {_setup_name(metrics, 'before')}"),
            ("after", f"adapted, after: {_setup_name(metrics, 'after')}"),
            ("shared", "shared exposure"),
        )
    ]
    return join(
        table(f"luminance-{i}", "Luminance of the rendered view (cd/m\u00b2)", rows, head),
        table(f"adaptation-{i}", "Adaptation luminance the images were made for (cd/m\u00b2)", adapt_rows),
    )


def _view_section(i: int, view: Mapping, metrics: Mapping, images: _Images) -> Markup:
    imgs = view.get("images", {})
    name = view.get("name", f"view {i + 1}")
    before, after = _setup_name(metrics, "before"), _setup_name(metrics, "after")
    title_id = f"view-{i}-title"
    falsecolour = element(
        "div",
        {"class": "fc-row"},
        element(
            "figure",
            {},
            images.img(
                imgs["falsecolour_before"], f"False-colour luminance map, before ({before}), view \u201c{name}\u201d"
            ),
            element("figcaption", {}, f"before: {before}"),
        ),
        element(
            "figure",
            {},
            images.img(
                imgs["falsecolour_after"], f"False-colour luminance map, after ({after}), view \u201c{name}\u201d"
            ),
            element("figcaption", {}, f"after: {after}"),
        ),
        element(
            "figure",
            {"class": "legend"},
            images.img(
                imgs["falsecolour_legend"],
                "Legend of both false-colour maps: luminance in cd/m\u00b2 on a logarithmic scale",
            ),
            element("figcaption", {}, "legend (shared)"),
        ),
    )
    return element(
        "section",
        {"class": "view", "id": f"view-{i}", "aria-labelledby": title_id},
        element("h2", {"id": title_id}, f"View: {name}"),
        element("p", {"class": "view-notes"}, view.get("notes")) if view.get("notes") else None,
        _compare_figure(i, view, metrics, images),
        element("h3", {}, "How bright the surfaces are"),
        element(
            "p",
            {},
            "False colour shows luminance (how bright each surface is, in cd/m\u00b2) with one scale for "
            "both lightings: the same colour means the same luminance.",
        ),
        falsecolour,
        _luminance_table(i, view, metrics),
        element("h3", {}, "Side by side"),
        element(
            "figure",
            {"class": "wide"},
            images.img(
                imgs["side_by_side"], f"Before ({before}) and after ({after}) side by side, view \u201c{name}\u201d"
            ),
        ),
        element("h3", {}, "Wipe animation"),
        element(
            "figure",
            {"class": "wide"},
            images.img(
                imgs["wipe"], f"Animation wiping between before ({before}) and after ({after}), view \u201c{name}\u201d"
            ),
            element(
                "figcaption", {}, "The animation repeats; the slider above shows the same comparison at your own pace."
            ),
        ),
    )


class _Footnotes:
    """Numbered notes in order of first use; the same text gets the same number."""

    def __init__(self):
        self.items: list[str] = []

    def mark(self, text: str) -> Markup:
        if text not in self.items:
            self.items.append(text)
        n = self.items.index(text) + 1
        return element("sup", {"class": "fn"}, element("a", {"href": f"#note-{n}", "aria-label": f"note {n}"}, str(n)))

    def render(self) -> Markup:
        if not self.items:
            return Markup("")
        return element(
            "ol",
            {"class": "notes", "aria-label": "Notes on the lamp figures"},
            [element("li", {"id": f"note-{n}"}, text) for n, text in enumerate(self.items, 1)],
        )


def _lamp_row(lamp_id: str, fig: Mapping | None, notes: _Footnotes) -> Markup:
    if fig is None:
        return element(
            "tr",
            {},
            element("th", {"scope": "row"}, lamp_id),
            element("td", {"colspan": str(len(LAMP_COLUMNS))}, "no figures given for this lamp"),
        )
    undefined = fig.get("undefined", {}) or {}
    warnings = list(fig.get("warnings", []) or [])
    cie133 = [w for w in warnings if w.startswith("CIE 13.3")]
    cells = []
    for key, _, _, rule in LAMP_COLUMNS:
        value = fig.get(key)
        note = None
        reason = None
        if value is None:
            reason = undefined.get(key, "not given")
            note = notes.mark(f"{lamp_id}: {reason}")
        elif key in ("ra", "r9") and cie133:
            note = notes.mark(f"{lamp_id}: {cie133[0]}")
        cells.append(number_cell(f"lamps.{lamp_id}.{key}", value, rule, reason=reason, note=note))
    for w in warnings:
        if w not in cie133:
            notes.mark(f"{lamp_id}: {w}")
    head = element(
        "th",
        {"scope": "row"},
        element("span", {"class": "lamp-name"}, fig.get("name") or lamp_id),
        element("br"),
        element("span", {"class": "lamp-id"}, lamp_id),
    )
    return element("tr", {}, head, cells)


def _groups_table(key: str, setup: Mapping) -> Markup:
    groups = setup.get("groups", {}) or {}
    rows = []
    for group in sorted(groups):
        g = groups[group]
        base = f"setups.{key}.groups.{group}"
        rows.append(
            element(
                "tr",
                {},
                element("th", {"scope": "row"}, "all luminaires" if group == "*" else group),
                element("td", {}, g.get("lamp", "")),
                number_cell(
                    f"{base}.lumens",
                    g.get("lumens"),
                    "fixed0",
                    reason="not set: the photometric file's rated flux is used",
                ),
                number_cell(f"{base}.dimming", g.get("dimming"), "percent0", reason="not set"),
            )
        )
    if not rows:
        return Markup("")
    head = element(
        "tr",
        {},
        element("th", {"scope": "col"}, "luminaire group"),
        element("th", {"scope": "col"}, "lamp"),
        element("th", {"scope": "col", "class": "num"}, "luminous flux (lm)"),
        element("th", {"scope": "col", "class": "num"}, "output (% of full)"),
    )
    return table(f"groups-{_slug(key)}", f"Luminaire groups, {key}: {setup.get('name', key)}", rows, head)


def _lamps_section(metrics: Mapping) -> Markup:
    setups = metrics.get("setups", {})
    lamps = metrics.get("lamps", {})
    notes = _Footnotes()
    blocks = []
    head = element(
        "tr",
        {},
        element("th", {"scope": "col"}, "lamp"),
        [
            element(
                "th",
                {"scope": "col", "class": "num"},
                heading,
                element("br"),
                element("span", {"class": "unit"}, unit) if unit else None,
            )
            for _, heading, unit, _ in LAMP_COLUMNS
        ],
    )
    for key in _ordered_setups(setups):
        setup = setups[key]
        lamp_ids = list(dict.fromkeys(setup.get("lamps", []) or []))
        rows = [_lamp_row(lamp_id, lamps.get(lamp_id), notes) for lamp_id in lamp_ids]
        title = f"{key.capitalize()}: {setup.get('name', key)}"
        blocks.append(
            join(
                element("h3", {}, title),
                element("p", {}, setup.get("description")) if setup.get("description") else None,
                _groups_table(key, setup),
                table(
                    f"lamps-{_slug(key)}",
                    f"Lamp figures, {key}: {setup.get('name', key)}",
                    rows,
                    head,
                    cls="figures lamps",
                    scrolls=True,
                ),
            )
        )
    glossary = element(
        "dl",
        {"class": "glossary"},
        [join(element("dt", {}, term), element("dd", {}, text)) for term, text in LAMP_FIGURE_HELP],
    )
    return element(
        "section",
        {"id": "lamps", "aria-labelledby": "lamps-title"},
        element("h2", {"id": "lamps-title"}, "The lamps"),
        element(
            "p",
            {},
            f"Figures of each lamp's spectrum. {DASH} marks a figure that is not defined for that "
            "lamp; the numbered note says why (the reason also shows when the pointer rests on the dash).",
        ),
        blocks,
        notes.render(),
        element("h3", {}, "What the figures mean"),
        glossary,
    )


def _extra_sections(metrics: Mapping, images: _Images, taken: set[str]) -> tuple[list[Markup], list[tuple[str, str]]]:
    out, nav = [], []
    for s, section in enumerate(metrics.get("extra_sections", []) or []):
        wanted = str(section.get("html_id") or "")
        anchor = wanted if _ID_SAFE.match(wanted) else "extra-" + re.sub(r"[^A-Za-z0-9_-]+", "-", wanted).strip("-")
        base, n = anchor, 2
        while anchor in taken or anchor == "extra-":
            anchor, n = f"{base}-{n}", n + 1
        taken.add(anchor)
        title = section.get("title", "")
        tables = []
        for t, spec in enumerate(section.get("tables", []) or []):
            head = element("tr", {}, [element("th", {"scope": "col"}, c) for c in spec.get("columns", [])])
            rows = []
            for r, row in enumerate(spec.get("rows", []) or []):
                cells = []
                for c, value in enumerate(row):
                    path = f"extra_sections.{s}.tables.{t}.rows.{r}.{c}"
                    if value is None:
                        cells.append(number_cell(path, None, "sig3", reason="not defined"))
                    elif isinstance(value, bool) or isinstance(value, str):
                        cells.append(element("td", {}, str(value)))
                    else:
                        rule = "int" if isinstance(value, int) else "sig3"
                        cells.append(number_cell(path, value, rule))
                rows.append(element("tr", {}, cells))
            tables.append(table(f"{anchor}-table-{t}", spec.get("caption", ""), rows, head, scrolls=True))
        figures = [
            element("figure", {"class": "wide"}, images.img(rel, f"{title}: figure {k + 1}"))
            for k, rel in enumerate(section.get("images", []) or [])
        ]
        out.append(
            element(
                "section",
                {"id": anchor, "class": "extra", "aria-labelledby": f"{anchor}-title"},
                element("h2", {"id": f"{anchor}-title"}, title),
                [element("p", {}, p) for p in section.get("paragraphs", []) or []],
                tables,
                figures,
            )
        )
        nav.append((anchor, title))
    return out, nav


def _observer_section(metrics: Mapping) -> Markup:
    obs = metrics.get("observer", {})
    settings = metrics.get("settings", {})
    obs_rows = [
        ("age_years", "observer age (years)", "fixed0", "not given"),
        ("pigmentation", "eye pigmentation (0 very dark \u2026 1 light blue; CIE 146)", "fixed2", "not given"),
        ("display_peak_cd_m2", "display peak luminance assumed (cd/m\u00b2)", "sig3", "not given"),
        ("adaptation_cd_m2", "adaptation luminance (cd/m\u00b2)", "sig3", "not set: each view uses its own level"),
    ]
    set_rows = [
        ("samples_per_pixel", "samples per pixel", "int"),
        ("seed", "random seed", "int"),
        ("width_px", "image width (px)", "int"),
        ("height_px", "image height (px)", "int"),
    ]

    return element(
        "section",
        {"id": "observer", "aria-labelledby": "observer-title"},
        element("h2", {"id": "observer-title"}, "Observer and settings"),
        table(
            "observer-table",
            "Observer modelled",
            [
                element(
                    "tr",
                    {},
                    element("th", {"scope": "row"}, label),
                    number_cell(f"observer.{key}", obs.get(key), rule, reason=reason, show_reason=True),
                )
                for key, label, rule, reason in obs_rows
            ],
        ),
        table(
            "settings-table",
            "Render settings",
            [
                element(
                    "tr",
                    {},
                    element("th", {"scope": "row"}, label),
                    number_cell(f"settings.{key}", settings.get(key), rule, reason="not given"),
                )
                for key, label, rule in set_rows
            ],
        ),
    )


def _footer(metrics: Mapping) -> Markup:
    tool = metrics.get("tool", {})
    scene = metrics.get("scene", {})
    return element(
        "footer",
        {"class": "page-foot"},
        element(
            "div",
            {"class": "foot-rule"},
            element(
                "p",
                {},
                f"Made with {tool.get('name', 'lampcast')} {tool.get('version', '')}. "
                "Every number in this report is in metrics.json next to it.",
            ),
            element(
                "p",
                {},
                "Scene file: ",
                element("code", {}, scene.get("file", "")),
                ", SHA-256 ",
                element("code", {"class": "hash"}, scene.get("sha256", "")),
            ),
        ),
    )


_CSS = """
:root { color-scheme: light; --ink: #1b1b1b; --muted: #4a4a4a; --paper: #ffffff; --line: #c9c9c9;
  --accent: #16427a; --warn-bg: #fff3dc; --warn-line: #a35200; --focus: #0b5ad4; }
* { box-sizing: border-box; }
html { font-size: 100%; }
body { margin: 0; background: var(--paper); color: var(--ink); line-height: 1.5;
  font-family: system-ui, "Segoe UI", "Noto Sans", "DejaVu Sans", Arial, sans-serif; }
.page-head, main, .page-foot { max-width: 72rem; margin: 0 auto; padding: 0 1.25rem; }
.skip { position: absolute; left: -999rem; }
.skip:focus { left: 1rem; top: 1rem; background: var(--paper); padding: .5rem; z-index: 10; }
a { color: var(--accent); }
:focus-visible { outline: 3px solid var(--focus); outline-offset: 2px; }
.kicker { margin: 1.5rem 0 0; color: var(--muted); font-size: .95rem; letter-spacing: .02em; }
h1 { margin: .2rem 0 .4rem; font-size: 2rem; line-height: 1.2; }
h2 { margin: 2.2rem 0 .6rem; font-size: 1.5rem; border-bottom: 2px solid var(--line); padding-bottom: .2rem; }
h3 { margin: 1.6rem 0 .5rem; font-size: 1.15rem; }
.lede { font-size: 1.15rem; margin: 0 0 .5rem; }
.scene-notes, .view-notes { color: var(--muted); }
.cautions { background: var(--warn-bg); border-left: 6px solid var(--warn-line); padding: .6rem 1rem .4rem;
  margin: 1rem 0; }
.cautions h2 { border: 0; margin: 0 0 .3rem; font-size: 1.15rem; padding: 0; }
.cautions ul { margin: 0 0 .4rem; padding-left: 1.2rem; }
nav ul { list-style: none; padding: 0; margin: .5rem 0 0; display: flex; flex-wrap: wrap; gap: .3rem 1.2rem; }
ul.summary li { margin: .3rem 0; font-size: 1.05rem; }
figure { margin: 0; }
img { max-width: 100%; height: auto; display: block; }
.compare { margin: 1rem 0; }
.stage-wrap { display: inline-block; max-width: 100%; vertical-align: top; }
.stage { position: relative; display: inline-block; max-width: 100%; line-height: 0; background: #000; --pos: 50%; }
.stage img { max-width: 100%; height: auto; }
.after-layer { position: absolute; inset: 0; clip-path: inset(0 0 0 var(--pos)); }
.after-layer img { position: absolute; top: 0; left: 0; width: 100%; height: 100%; }
.compare[data-exposure="shared"] .adapted, .compare[data-exposure="adapted"] .shared { display: none; }
.divider { position: absolute; top: 0; bottom: 0; left: var(--pos); width: 2px; margin-left: -1px;
  background: #fff; box-shadow: 0 0 0 1px rgba(0, 0, 0, .7); pointer-events: none; }
.tag { position: absolute; top: .5rem; line-height: 1.3; padding: .15rem .45rem; font-size: .9rem;
  background: rgba(0, 0, 0, .78); color: #fff; border-radius: 3px; max-width: 45%; }
.tag-before { left: .5rem; }
.tag-after { right: .5rem; text-align: right; }
input.divide { display: block; width: 100%; margin: .4rem 0 0; accent-color: var(--accent); }
.slider-label { display: block; font-size: .95rem; margin-top: .2rem; }
fieldset.exposure { border: 1px solid var(--line); margin: .8rem 0 0; padding: .4rem .9rem .2rem; max-width: 48rem; }
fieldset.exposure legend { font-weight: 600; padding: 0 .3rem; }
.choice { display: inline-block; margin-right: 1.4rem; }
.choice input { margin-right: .35rem; accent-color: var(--accent); }
.help p { margin: .3rem 0; font-size: .95rem; color: var(--muted); }
figcaption { font-size: .9rem; color: var(--muted); margin-top: .3rem; }
.fc-row { display: flex; flex-wrap: wrap; gap: 1rem; align-items: flex-start; }
.fc-row figure { flex: 0 1 auto; max-width: 100%; }
figure.wide { margin: .5rem 0; }
.table-wrap { overflow-x: auto; margin: .8rem 0; }
table.figures { border-collapse: collapse; font-size: .95rem; }
.table-title { font-weight: 600; margin: 0 0 .3rem; }
table.figures th, table.figures td { border-bottom: 1px solid var(--line); padding: .3rem .6rem; vertical-align: top; }
table.figures thead th { border-bottom: 2px solid var(--ink); text-align: left; vertical-align: bottom; }
table.figures thead th.num { text-align: right; }
th.num, td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
tbody th { text-align: left; font-weight: 600; }
td.undefined { cursor: help; }
.unit, .lamp-id { font-weight: 400; color: var(--muted); font-size: .85rem; }
table.lamps thead th.num { white-space: normal; min-width: 4.2rem; vertical-align: bottom; }
table.lamps tbody th { min-width: 13rem; }
.lamp-id { white-space: nowrap; }
.why { font-size: .85rem; color: var(--muted); white-space: normal; }
sup.fn { font-size: .75rem; margin-left: .1rem; }
ol.notes { font-size: .9rem; color: var(--ink); }
dl.glossary dt { font-weight: 600; margin-top: .4rem; }
dl.glossary dd { margin: 0 0 0 1.2rem; }
.sr-only { position: absolute; width: 1px; height: 1px; overflow: hidden; clip: rect(0 0 0 0); white-space: nowrap; }
.page-foot { margin-top: 3rem; padding-bottom: 2rem; color: var(--muted); font-size: .9rem; }
.foot-rule { border-top: 2px solid var(--line); padding-top: .8rem; }
code.hash { word-break: break-all; }
@media print { input.divide, .slider-label, fieldset.exposure, nav, .skip { display: none; } }
"""

_JS = """
(function () {
  'use strict';
  var figures = document.querySelectorAll('figure.compare');
  Array.prototype.forEach.call(figures, function (fig) {
    var stage = fig.querySelector('.stage');
    var range = fig.querySelector('input.divide');
    function place() {
      stage.style.setProperty('--pos', range.value + '%');
      range.setAttribute('aria-valuetext', 'divide at ' + range.value + '% of the width');
    }
    range.addEventListener('input', place);
    range.addEventListener('change', place);
    place();
    Array.prototype.forEach.call(fig.querySelectorAll('input[type=radio]'), function (radio) {
      radio.addEventListener('change', function () {
        if (radio.checked) { fig.setAttribute('data-exposure', radio.value); }
      });
      if (radio.checked) { fig.setAttribute('data-exposure', radio.value); }
    });
  });
}());
"""


def _csp_hash(text: str) -> str:
    return "'sha256-" + base64.b64encode(hashlib.sha256(text.encode("utf-8")).digest()).decode("ascii") + "'"


def render_report(metrics: Mapping, out_dir: Path) -> str:
    """The report's HTML text (see :func:`write_report`); images are read from ``out_dir``.

    Raises
    ------
    ValueError
        When an image the metrics name is missing, outside ``out_dir`` or not an image (all
        such problems listed together).
    """
    images = _Images(Path(out_dir))
    views = list(metrics.get("views", []) or [])
    nav = [("summary", "In short")]
    nav += [(f"view-{i}", f"View: {v.get('name', i + 1)}") for i, v in enumerate(views)]
    nav.append(("lamps", "The lamps"))
    taken = {"main", "summary", "lamps", "observer", "cautions-title", "summary-title", "lamps-title", "observer-title"}
    taken |= {f"view-{i}" for i in range(len(views))}
    view_sections = [_view_section(i, v, metrics, images) for i, v in enumerate(views)]
    extras, extra_nav = _extra_sections(metrics, images, taken)
    nav += extra_nav + [("observer", "Observer and settings")]
    body = join(
        element("a", {"class": "skip", "href": "#main"}, "Skip to the content"),
        _header(metrics, nav),
        element(
            "main",
            {"id": "main"},
            _summary(metrics),
            view_sections,
            _lamps_section(metrics),
            extras,
            _observer_section(metrics),
        ),
        _footer(metrics),
        Markup(f"<script>{_JS}</script>"),
    )
    if images.problems:
        raise ValueError("report images:\n" + "\n".join(images.problems))
    csp = (
        f"default-src 'none'; img-src data:; style-src {_csp_hash(_CSS)}; script-src {_csp_hash(_JS)}; "
        "base-uri 'none'; form-action 'none'"
    )
    scene_name = metrics.get("scene", {}).get("name", "")
    head = join(
        Markup('<meta charset="utf-8">'),
        element("meta", {"name": "viewport", "content": "width=device-width, initial-scale=1"}),
        element("meta", {"http-equiv": "Content-Security-Policy", "content": csp}),
        element(
            "meta", {"name": "generator", "content": f"lampcast {metrics.get('tool', {}).get('version', '')}".strip()}
        ),
        element("title", {}, f"{scene_name} \u2014 street lighting preview"),
        element("link", {"rel": "icon", "href": "data:,"}),
        Markup(f"<style>{_CSS}</style>"),
    )
    return f'<!DOCTYPE html>\n<html lang="en">\n<head>\n{head}\n</head>\n<body>\n{body}\n</body>\n</html>\n'


def write_report(out_dir: Path, metrics: dict) -> Path:
    """Write ``out_dir/report.html`` (atomically) from the compare ``metrics``; return its path.

    ``metrics`` is the dict written to ``metrics.json`` (see ``lampcast compare``); its image
    paths are relative to ``out_dir`` and are embedded as data URIs. Same metrics and images
    give byte-identical output.
    """
    out_dir = Path(out_dir)
    text = render_report(metrics, out_dir)
    return atomic_write_text(out_dir / REPORT_NAME, text)
