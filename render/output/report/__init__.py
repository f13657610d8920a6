"""The consultation report: one self-contained HTML page made from the comparison's figures.

:func:`write_report` turns the :class:`~render.output.metrics.ComparisonMetrics` of
``lampcast compare`` (what ``metrics.json`` holds) and the images they name into
``report.html``, a page a lighting designer can put in front of residents:

* a header with the scene's name and description and the cautions (an illustrative preview,
  not a compliance calculation);
* the plain-language summary;
* per view: a before/after slider (a range input moving a CSS clip of the "after" image over
  the "before" image), a shared/adapted exposure switch, the luminance maps with
  their legend, the side-by-side image, the wipe animation and a luminance table;
* per lighting setup: its luminaire groups and the lamp figures (CCT, Duv, Ra, R9, CIE 224 Rf,
  TM-30 Rf/Rg, S/P, luminous efficacy of radiation, blue and notch-filterable fractions);
* further sections (the colour analysis); the calculations (headline figures per setup, the
  class check, the footways' semicylindrical and vertical illuminance per setup (with rows of
  interreflected light, labelled, when the calculation traced it), the isolux plan, grid heat
  map and bar chart, the standing caution) when the comparison ran them; the observer and render settings, and a footer with the tool version
  and the scene hash.

How it is made:

* :mod:`~render.output.report.page` builds a view model from the typed records (tables of
  cells, embedded images, unique anchors); :mod:`~render.output.report.document` fills the
  jinja2 template ``templates/report.html.j2`` with it (package data; autoescaping on, so
  every piece of text from the scene or the metrics is escaped and every attribute is quoted);
* the page is self-contained: every image is a base64 ``data:`` URI of a compact copy of the
  file (:mod:`~render.output.report.images`: lossy WebP for rendered views, lossless WebP for
  luminance maps, animated WebP for the wipes, PNG for figures; the files beside the page stay
  in full quality), each picture once (the slider's hidden copy of the first option is filled
  by the script), the style sheet and the small script
  (``templates/report.css``, ``templates/report.js``) are inline, and a Content-Security-Policy
  with their hashes forbids every network fetch, so the page works offline and from an e-mail
  attachment;
* the output is deterministic: the same metrics and images give byte-identical HTML (no
  timestamps; setups in the order before, after; groups by name);
* every number is shown through the single function :func:`format_value` with a named rule
  (:data:`RULES`, :mod:`~render.output.report.numbers`); each table cell holding a number
  carries ``data-metric`` (its dotted path in ``metrics.json``, e.g.
  ``views.0.luminance_cd_m2.before.mean``), ``data-value`` (the exact value, as Python
  ``repr``) and ``data-rule`` (the rule used), so the shown value can be reproduced from
  ``metrics.json``.

References
----------
W3C Content Security Policy Level 3 (hash sources); RFC 2397 (``data:`` URIs); the lamp
figures' standards are listed in :mod:`render.output.report.page`.
"""

from render.output.report.document import REPORT_NAME, csp_hash, render_report, write_report
from render.output.report.numbers import DASH, MINUS, RULES, format_value
from render.output.report.page import LAMP_COLUMNS, STANDING_CAUTION, build_page

__all__ = [
    "DASH",
    "LAMP_COLUMNS",
    "MINUS",
    "REPORT_NAME",
    "RULES",
    "STANDING_CAUTION",
    "build_page",
    "csp_hash",
    "format_value",
    "render_report",
    "write_report",
]
