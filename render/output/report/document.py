"""The report as one HTML document: the jinja2 template filled in, checked and written.

The template, style sheet and script are package data (``templates/``), read with
:class:`jinja2.PackageLoader` so that they are found in an installed wheel as in a checkout.
Autoescaping is on for the whole template. The style sheet and the script are inlined, and the
page's Content-Security-Policy allows exactly them (by hash), ``data:`` images and nothing else.

References
----------
* W3C Content Security Policy Level 3: hash sources, ``'sha256-'`` + base64 of the SHA-256 of
  the UTF-8 text of the inline element.
* WHATWG HTML Living Standard (document structure, ``meta http-equiv``).
"""

from __future__ import annotations

import base64
import hashlib
from functools import lru_cache
from pathlib import Path

import jinja2
from markupsafe import Markup

from render.fileio import atomic_write_text
from render.output.metrics import ComparisonMetrics
from render.output.report.images import ImageFolder
from render.output.report.page import build_page

__all__ = ["REPORT_NAME", "csp_hash", "render_report", "template_environment", "write_report"]

#: File name of the report inside the output folder.
REPORT_NAME = "report.html"

_TEMPLATE = "report.html.j2"
_STYLE = "report.css"
_SCRIPT = "report.js"


@lru_cache(maxsize=1)
def template_environment() -> jinja2.Environment:
    """The jinja2 environment of the packaged templates (autoescaping on, strict undefined)."""
    return jinja2.Environment(
        loader=jinja2.PackageLoader("render.output.report", "templates"),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )


def _inline(name: str, tag: str) -> Markup:
    """The text of a packaged style sheet or script, to be inlined unescaped in ``<tag>``."""
    env = template_environment()
    text, _, _ = env.loader.get_source(env, name)
    if f"</{tag}" in text.lower():
        raise ValueError(f"{name} must not contain </{tag}")
    return Markup(text)


def csp_hash(text: str) -> str:
    """A CSP hash source of inline code: ``'sha256-<base64 of SHA-256 of the UTF-8 text>'``."""
    return "'sha256-" + base64.b64encode(hashlib.sha256(text.encode("utf-8")).digest()).decode("ascii") + "'"


def render_report(metrics: ComparisonMetrics, out_dir: Path, images: ImageFolder | None = None) -> str:
    """The report's HTML text (see :func:`write_report`); images are read from ``out_dir``
    (through ``images`` when given, whose :attr:`~ImageFolder.embedded` then tells how each was
    embedded).

    Raises
    ------
    ValueError
        When an image the metrics name is missing, outside ``out_dir`` or not an image (all
        such problems listed together).
    """
    images = ImageFolder(Path(out_dir)) if images is None else images
    page = build_page(metrics, images)
    if images.problems:
        raise ValueError("report images:\n" + "\n".join(images.problems))
    css, js = _inline(_STYLE, "style"), _inline(_SCRIPT, "script")
    csp = (
        f"default-src 'none'; img-src data:; style-src {csp_hash(css)}; script-src {csp_hash(js)}; "
        "base-uri 'none'; form-action 'none'"
    )
    return template_environment().get_template(_TEMPLATE).render(page=page, css=css, js=js, csp=csp)


def write_report(out_dir: Path, metrics: ComparisonMetrics, images: ImageFolder | None = None) -> Path:
    """Write ``out_dir/report.html`` (atomically) from the comparison's ``metrics``; return its path.

    The image paths in ``metrics`` are relative to ``out_dir`` and are embedded as data URIs,
    compactly (:func:`render.output.report.images.compact_image`); the files stay as they are.
    ``images``: an :class:`ImageFolder` of ``out_dir`` already asked for some of them (their
    encodings under way). The same metrics and images give byte-identical output. To make the
    report again from a ``metrics.json``, pass ``ComparisonMetrics.from_json(json.load(file))``.
    """
    out_dir = Path(out_dir)
    return atomic_write_text(out_dir / REPORT_NAME, render_report(metrics, out_dir, images))
