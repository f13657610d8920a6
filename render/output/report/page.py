"""The report's content as a view model: tables, cells, images and anchors for the template.

:func:`build_page` turns the comparison's records (:class:`~render.output.metrics.ComparisonMetrics`)
into a :class:`Page`: every number becomes a :class:`NumberCell` that knows its dotted path in
``metrics.json`` (``views.0.luminance_cd_m2.before.mean``), its exact value and its display rule
(:mod:`render.output.report.numbers`); every image an embedded ``data:`` URI; every anchor a
unique, id-safe name. The template (``templates/report.html.j2``) only lays these out and adds
the page's fixed wording; it reads no dictionaries of figures.

The order is fixed (the "before" setup, then the options in order; groups by name; lamps in
the order a setup lists them; footnotes numbered in order of first use), so the same records
give the same page.

References
----------
Display rules: :mod:`render.output.report.numbers`. The lamp figures shown are those of
:mod:`render.colour.lamp_figures` (CIE 13.3-1995 Ra and R9, CIE 224:2017 Rf, ANSI/IES TM-30 Rf
and Rg, CIE S 017 CCT and Duv, S/P ratio).
"""

from __future__ import annotations

import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any, ClassVar

from render.colour.lamp_figures import LampFigures
from render.output.metrics import (
    BEFORE,
    ComparisonMetrics,
    ReportSection,
    SceneInfo,
    SetupDescription,
    ToolInfo,
    ViewMetrics,
)
from render.output.report.images import EmbeddedImage, ImageFolder
from render.output.report.numbers import format_value

__all__ = [
    "LAMP_COLUMNS",
    "LUMINANCE_STATS",
    "OBSERVER_ROWS",
    "SETTINGS_ROWS",
    "STANDING_CAUTION",
    "CalculationPart",
    "ExtraPart",
    "Footnote",
    "Heading",
    "NumberCell",
    "Page",
    "Row",
    "RowHead",
    "SetupImages",
    "SetupPart",
    "Table",
    "TextCell",
    "ViewPart",
    "build_page",
]

#: Shown first among the cautions, whatever the metrics say.
STANDING_CAUTION = (
    "This is an illustrative preview of how the street may look, not a lighting design and not a "
    "compliance calculation. Lighting classes and compliance are decided by local codes and "
    "standards and by qualified, licensed lighting practitioners."
)

#: Lamp figure columns: (figure key, heading, unit, display rule).
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

#: Luminance statistics of a view: (field of LuminanceStats, heading).
LUMINANCE_STATS = (("mean", "mean"), ("min", "minimum"), ("median", "median"), ("p95", "95th percentile"))

#: Observer rows: (field of ObserverInfo, label, display rule, why a value may be missing).
OBSERVER_ROWS = (
    ("age_years", "observer age (years)", "fixed0", "not given"),
    ("pigmentation", "eye pigmentation (0 very dark \u2026 1.2 very light blue; CIE 146)", "fixed2", "not given"),
    ("display_peak_cd_m2", "display peak luminance assumed (cd/m\u00b2)", "sig3", "not given"),
    ("adaptation_cd_m2", "adaptation luminance (cd/m\u00b2)", "sig3", "not set: each view uses its own level"),
)

#: Render setting rows: (field of RenderSettings, label, display rule).
SETTINGS_ROWS = (
    ("samples_per_pixel", "samples per pixel", "int"),
    ("seed", "random seed", "int"),
    ("width_px", "image width (px)", "int"),
    ("height_px", "image height (px)", "int"),
    ("bounces", "interreflections traced (0: direct light only)", "int"),
    ("indirect_samples_per_pixel", "paths per pixel for interreflected light", "int"),
)

_ID_SAFE = re.compile(r"^[A-Za-z][A-Za-z0-9_-]*$")

#: Anchors of the page's own parts (extra sections get others).
_FIXED_ANCHORS = frozenset(
    {
        "main",
        "summary",
        "lamps",
        "observer",
        "cautions-title",
        "summary-title",
        "lamps-title",
        "observer-title",
        "luminance-scale",
        "luminance-scale-title",
        "calculation",
        "calculation-title",
        "calculation-sky",
        "calculation-sky-title",
    }
)


# --- the view model ----------------------------------------------------------------------------


@dataclass(frozen=True)
class Footnote:
    """A numbered note marker (the notes are listed under the lamp tables)."""

    number: int


@dataclass(frozen=True)
class NumberCell:
    """A table cell showing a figure of ``metrics.json``.

    ``path`` is the figure's dotted path in ``metrics.json``, ``value`` its exact value, ``rule``
    the display rule. An undefined value shows a dash with ``reason`` as tooltip and as text
    (visually hidden unless ``show_reason``); ``note`` is a footnote marker after the value.
    """

    path: str
    value: Any
    rule: str
    reason: str | None = None
    show_reason: bool = False
    note: Footnote | None = None
    kind: ClassVar[str] = "number"

    @property
    def text(self) -> str:
        """The value as shown (:func:`~render.output.report.numbers.format_value`)."""
        return format_value(self.value, self.rule)

    @property
    def defined(self) -> bool:
        return self.value is not None

    @property
    def data_value(self) -> str:
        """The exact value as written in ``data-value``: Python ``repr``, or ``null``."""
        return "null" if self.value is None else repr(self.value)


@dataclass(frozen=True)
class TextCell:
    """A table cell of text (``colspan``: columns it spans)."""

    text: str
    colspan: int | None = None
    kind: ClassVar[str] = "text"


@dataclass(frozen=True)
class RowHead:
    """A row heading; ``sub`` is a second, smaller line (a lamp's id under its name)."""

    text: str
    sub: str | None = None


@dataclass(frozen=True)
class Row:
    head: RowHead | None
    cells: tuple[NumberCell | TextCell, ...]


@dataclass(frozen=True)
class Heading:
    """A column heading; ``numeric`` right-aligns it; a ``unit`` (even empty) goes on a line
    of its own."""

    text: str
    numeric: bool = False
    unit: str | None = None


@dataclass(frozen=True)
class Table:
    """A titled table. ``scrolls``: it may be wider than the page and sits in a focusable,
    scrollable region."""

    id: str
    title: str
    rows: tuple[Row, ...]
    head: tuple[Heading, ...] = ()
    css: str = "figures"
    scrolls: bool = False


@dataclass(frozen=True)
class SetupImages:
    """One setup's pictures of a view: ``key`` (``"before"`` or an option's key), its label
    (``"before: NAME"``, ``"after: NAME"`` or ``"option: NAME"``), shared and adapted exposure
    and luminance map; for an option also its side-by-side image and wipe (else ``None``)."""

    key: str
    name: str
    label: str
    shared: EmbeddedImage
    adapted: EmbeddedImage
    luminance: EmbeddedImage
    side_by_side: EmbeddedImage | None = None
    wipe: EmbeddedImage | None = None


@dataclass(frozen=True)
class ViewPart:
    """One view's part of the page: every setup's images (the "before" first; ``right`` is
    the one shown right of the divide at first: the first option), the luminance and
    adaptation tables and the luminance per region (``None`` when the view shows no region)."""

    index: int
    name: str
    notes: str
    setups: tuple[SetupImages, ...]
    luminance: Table
    adaptation: Table
    regions: Table | None = None

    @property
    def left(self) -> SetupImages:
        return self.setups[0]

    @property
    def right(self) -> SetupImages:
        return self.setups[1] if len(self.setups) > 1 else self.setups[0]

    @property
    def options(self) -> tuple[SetupImages, ...]:
        return self.setups[1:]


@dataclass(frozen=True)
class SetupPart:
    """One setup: ``key`` ("before" or an option's key), name, description, its groups and lamp
    figures; ``label`` is how the page names it ("before: NAME", "after: NAME", "option: NAME")."""

    key: str
    name: str
    description: str
    groups: Table | None
    lamps: Table
    label: str = ""
    notes: tuple[str, ...] = ()


@dataclass(frozen=True)
class ExtraPart:
    """A further section (the colour analysis), under a unique anchor."""

    anchor: str
    title: str
    paragraphs: tuple[str, ...]
    tables: tuple[Table, ...]
    figures: tuple[EmbeddedImage, ...]
    #: Alt text of each figure ("TITLE: figure N" where the section gives none).
    alts: tuple[str, ...] = ()


@dataclass(frozen=True)
class SkyPart:
    """The "Light to the sky" part of the calculations: what it shows (``paragraphs``), the
    table of upward light per setup, and the upward exitance map's picture (None when the
    calculation has no map) with its alt text."""

    paragraphs: tuple[str, ...]
    table: Table
    figure: EmbeddedImage | None
    alt: str


@dataclass(frozen=True)
class CalculationPart:
    """The "Calculations" section: what was calculated (``paragraphs``), the standing caution,
    the tables (headline figures per setup, class checks, the footways' face grids per setup
    with their interreflected rows when traced, the night light) and pictures with their alt texts;
    ``absent`` says why there is no calculation (then nothing else is shown); ``sky`` the
    light to the sky (:class:`SkyPart`)."""

    paragraphs: tuple[str, ...]
    caution: str
    tables: tuple[Table, ...]
    figures: tuple[EmbeddedImage, ...]
    alts: tuple[str, ...]
    absent: str | None = None
    sky: SkyPart | None = None


@dataclass(frozen=True)
class Page:
    """Everything the template shows.

    ``nav`` is the table of contents as (anchor, label); ``notes`` the lamp-figure footnotes
    in number order.
    """

    scene: SceneInfo
    tool: ToolInfo
    cautions: tuple[str, ...]
    nav: tuple[tuple[str, str], ...]
    summary: tuple[str, ...]
    setups: tuple[SetupPart, ...]
    views: tuple[ViewPart, ...]
    notes: tuple[str, ...]
    extras: tuple[ExtraPart, ...]
    observer: Table
    settings: Table
    luminance_legend: EmbeddedImage | None = None
    luminance_scale: tuple[NumberCell, NumberCell] | None = None
    calculation: CalculationPart | None = None


# --- building it -------------------------------------------------------------------------------


def _slug(text: str) -> str:
    """An id-safe form of ``text`` (letters, digits, ``_`` and ``-``)."""
    slug = re.sub(r"[^A-Za-z0-9_-]+", "-", str(text)).strip("-")
    return slug if slug and slug[0].isalpha() else f"x{slug}"


class _Footnotes:
    """Numbered notes in order of first use; the same text gets the same number."""

    def __init__(self) -> None:
        self.items: list[str] = []

    def mark(self, text: str) -> Footnote:
        if text not in self.items:
            self.items.append(text)
        return Footnote(self.items.index(text) + 1)


def _setup_name(setup: SetupDescription, key: str) -> str:
    return setup.name or key


def _labels(metrics: ComparisonMetrics) -> dict[str, str]:
    """Setup key -> label: "before: NAME", then "after: NAME" with one option, "option: NAME"
    with several (a name given twice is told apart by its key)."""
    word = "after" if len(metrics.options) == 1 else "option"
    names = [_setup_name(setup, key) for key, setup in metrics.setups.items()]
    return {
        key: f"{'before' if key == BEFORE else word}: {name}" + (f" ({key})" if names.count(name) > 1 else "")
        for key, name in zip(metrics.setups, names)
    }


def _view_part(i: int, view: ViewMetrics, metrics: ComparisonMetrics, images: ImageFolder) -> ViewPart:
    keys = list(metrics.setups)
    labels = _labels(metrics)
    luminance = Table(
        f"luminance-{i}",
        "Luminance of the rendered view (cd/m\u00b2)",
        tuple(
            Row(
                RowHead(label),
                tuple(
                    NumberCell(
                        f"views.{i}.luminance_cd_m2.{key}.{stat}",
                        getattr(view.luminance_cd_m2.get(key), stat, None),
                        "sig3",
                        reason="not given",
                    )
                    for key in keys
                ),
            )
            for stat, label in LUMINANCE_STATS
        ),
        head=(Heading("statistic"), *(Heading(labels[k], numeric=True) for k in keys)),
        scrolls=True,
    )
    levels = view.adaptation_cd_m2
    adaptation = Table(
        f"adaptation-{i}",
        "Adaptation luminance the images were made for (cd/m\u00b2)",
        (
            *(
                Row(
                    RowHead(f"adapted, {labels[key]}"),
                    (
                        NumberCell(
                            f"views.{i}.adaptation_cd_m2.{key}", levels.adapted.get(key), "sig3", reason="not given"
                        ),
                    ),
                )
                for key in keys
            ),
            Row(
                RowHead("shared exposure"),
                (NumberCell(f"views.{i}.adaptation_cd_m2.shared", levels.shared, "sig3", reason="not given"),),
            ),
        ),
    )
    img = view.images
    parts = tuple(
        SetupImages(
            key=key,
            name=_setup_name(metrics.setups[key], key),
            label=labels[key],
            shared=images.get(img.shared[key]),
            adapted=images.get(img.adapted[key]),
            luminance=images.get(img.luminance[key]),
            side_by_side=images.get(img.side_by_side[key]) if key in img.side_by_side else None,
            wipe=images.get(img.wipe[key]) if key in img.wipe else None,
        )
        for key in keys
    )
    return ViewPart(
        index=i,
        name=view.name,
        notes=view.notes or "",
        setups=parts,
        luminance=luminance,
        adaptation=adaptation,
        regions=_region_table(i, view, keys, labels),
    )


def _region_table(i: int, view: ViewMetrics, keys: list[str], labels: Mapping[str, str]) -> Table | None:
    """Mean and minimum luminance per region the view shows (carriageway, footways, fronts,
    tagged objects), one column pair per setup."""
    if not view.regions:
        return None
    stats = (("mean", "mean"), ("min", "minimum"))
    return Table(
        f"regions-{i}",
        "Luminance per region the view shows (cd/m\u00b2; sky, luminaires and edges left out)",
        tuple(
            Row(
                RowHead(region.name),
                tuple(
                    NumberCell(
                        f"views.{i}.regions.{r}.luminance_cd_m2.{key}.{stat}",
                        getattr(region.luminance_cd_m2.get(key), stat, None),
                        "sig3",
                        reason="not given",
                    )
                    for key in keys
                    for stat, _ in stats
                ),
            )
            for r, region in enumerate(view.regions)
        ),
        head=(
            Heading("region"),
            *(Heading(f"{label}, {labels[key]}", numeric=True) for key in keys for _, label in stats),
        ),
        scrolls=True,
    )


def _lamp_row(lamp_id: str, fig: LampFigures | None, notes: _Footnotes) -> Row:
    if fig is None:
        return Row(RowHead(lamp_id), (TextCell("no figures given for this lamp", colspan=len(LAMP_COLUMNS)),))
    undefined = fig.undefined
    warnings = list(fig.warnings)
    cie133 = [w for w in warnings if w.startswith("CIE 13.3")]
    cells = []
    for key, _, _, rule in LAMP_COLUMNS:
        value = getattr(fig, key)
        note = reason = None
        if value is None:
            reason = undefined.get(key, "not given")
            note = notes.mark(f"{lamp_id}: {reason}")
        elif key in ("ra", "r9") and cie133:
            note = notes.mark(f"{lamp_id}: {cie133[0]}")
        cells.append(NumberCell(f"lamps.{lamp_id}.{key}", value, rule, reason=reason, note=note))
    for w in warnings:
        if w not in cie133:
            notes.mark(f"{lamp_id}: {w}")
    return Row(RowHead(fig.name or lamp_id, sub=lamp_id), tuple(cells))


def _groups_table(key: str, setup: SetupDescription, label: str) -> Table | None:
    rows = []
    for group in sorted(setup.groups):
        g = setup.groups[group]
        base = f"setups.{key}.groups.{group}"
        rows.append(
            Row(
                RowHead("all luminaires" if group == "*" else group),
                (
                    TextCell(g.lamp),
                    NumberCell(
                        f"{base}.rated_lamp_lumens",
                        g.rated_lamp_lumens,
                        "fixed0",
                        reason="not given; an absolute photometric file has no lamp lumens",
                    ),
                    NumberCell(
                        f"{base}.lumens",
                        g.lumens,
                        "fixed0",
                        reason="not set: the photometric file's rated flux is used",
                    ),
                    NumberCell(f"{base}.luminaire_lumens", g.luminaire_lumens, "fixed0", reason="not given"),
                    NumberCell(
                        f"{base}.light_output_ratio",
                        g.light_output_ratio,
                        "fixed2",
                        reason="not given; an absolute photometric file has no lamp lumens",
                    ),
                    NumberCell(f"{base}.dimming", g.dimming, "percent0", reason="not set"),
                ),
            )
        )
    if not rows:
        return None
    head = (
        Heading("luminaire group"),
        Heading("lamp"),
        Heading("rated lamp lumens (lm)", numeric=True, unit="photometric file"),
        Heading("lumens used (lm)", numeric=True, unit="lamp; output if absolute"),
        Heading("luminaire output (lm)", numeric=True, unit="as used"),
        Heading("LOR", numeric=True, unit="output / lamp"),
        Heading("output (% of full)", numeric=True),
    )
    return Table(f"groups-{_slug(key)}", f"Luminaire groups, {label}", tuple(rows), head, scrolls=True)


def _setup_parts(metrics: ComparisonMetrics, notes: _Footnotes) -> tuple[SetupPart, ...]:
    lamps = metrics.lamps or {}
    head = (Heading("lamp"), *(Heading(heading, numeric=True, unit=unit) for _, heading, unit, _ in LAMP_COLUMNS))
    parts = []
    labels = _labels(metrics)
    for key, setup in metrics.setups.items():
        rows = tuple(_lamp_row(lamp_id, lamps.get(lamp_id), notes) for lamp_id in dict.fromkeys(setup.lamps))
        lamp_table = Table(
            f"lamps-{_slug(key)}",
            f"Lamp figures, {labels[key]}",
            rows,
            head,
            css="figures lamps",
            scrolls=True,
        )
        parts.append(
            SetupPart(
                key,
                _setup_name(setup, key),
                setup.description,
                _groups_table(key, setup, labels[key]),
                lamp_table,
                labels[key],
                setup.notes,
            )
        )
    return tuple(parts)


def _extra_cell(path: str, value: Any) -> NumberCell | TextCell:
    if value is None:
        return NumberCell(path, None, "sig3", reason="not defined")
    if isinstance(value, (bool, str)):
        return TextCell(str(value))
    return NumberCell(path, value, "int" if isinstance(value, int) else "sig3")


def _extra_parts(
    sections: Sequence[ReportSection], images: ImageFolder, taken: set[str]
) -> tuple[tuple[ExtraPart, ...], list[tuple[str, str]]]:
    parts, nav = [], []
    for s, section in enumerate(sections):
        wanted = section.html_id
        anchor = wanted if _ID_SAFE.match(wanted) else "extra-" + re.sub(r"[^A-Za-z0-9_-]+", "-", wanted).strip("-")
        base, n = anchor, 2
        while anchor in taken or anchor == "extra-":
            anchor, n = f"{base}-{n}", n + 1
        taken.add(anchor)
        tables = tuple(
            Table(
                f"{anchor}-table-{t}",
                spec.caption,
                tuple(
                    Row(
                        None,
                        tuple(
                            _extra_cell(f"extra_sections.{s}.tables.{t}.rows.{r}.{c}", value)
                            for c, value in enumerate(row)
                        ),
                    )
                    for r, row in enumerate(spec.rows)
                ),
                head=tuple(Heading(c) for c in spec.columns),
                scrolls=True,
            )
            for t, spec in enumerate(section.tables)
        )
        given = section.image_alts
        alts = tuple(
            (given[k] if k < len(given) and given[k] else f"{section.title}: figure {k + 1}")
            for k in range(len(section.images))
        )
        parts.append(
            ExtraPart(
                anchor, section.title, section.paragraphs, tables, tuple(images.get(i) for i in section.images), alts
            )
        )
        nav.append((anchor, section.title))
    return tuple(parts), nav


#: What the "Calculations" section says before its tables (the figures' own notes follow).
CALCULATION_TEXT = (
    "Figures an engineer checks, computed from the same scene and the same direct light as the images "
    "(no interreflections): horizontal illuminance on the calculation fields between the first two luminaires "
    "of the first row (grids after EN 13201-3 / CIE 140), road luminance and threshold increment for the "
    "standard observer, upward light, obtrusive light and energy where the scene gives their inputs. "
    "A dash marks a figure that was not computed.",
)


#: What the "Calculations" section adds when the scene has night light (``{night}``: its levels).
NIGHT_TEXT = (
    "The night's other light is stated, not measured on site ({night}). Its illuminance on the same "
    "calculation points is shown in a table of its own, the same for every lighting: it is never added to the "
    "headline figures or the class check, which judge the luminaires' light alone."
)

#: What the "Calculations" section adds when the footway face grids carry interreflected light
#: (``{bounces}``: the interreflections traced; ``{label}``: the rows' label).
INTERREFLECTED_TEXT = (
    "The footway face tables also give, in rows marked \u201c+ interreflected\u201d, the figures with the "
    "luminaires' light that reaches the faces by way of reflections (up to {bounces} bounces): {label}. "
    "The headline figures and the class check stay direct light, except the upward total, which follows the "
    "upward exitance map (\u201cLight to the sky\u201d)."
)

#: The footway face tables' columns, the figures the calculation's text gives per face grid:
#: (heading, key in a face's record and in its "with_interreflected" record).
FACE_COLUMNS: tuple[tuple[str, str], ...] = (
    ("E_sc mean", "semicylindrical_mean_lx"),
    ("E_sc minimum", "semicylindrical_min_lx"),
    ("E_v mean", "vertical_mean_lx"),
    ("E_v minimum", "vertical_min_lx"),
)


def _facing(face: dict[str, Any]) -> str:
    """How the page names a face grid's facing along the street or road (\"+x\" or \"-x\")."""
    return "+x" if (face.get("facing") or [1.0])[0] > 0 else "-x"


def _face_tables(setups: Sequence[dict[str, Any]], names: Sequence[str]) -> list[Table]:
    """Per setup, the semicylindrical and vertical illuminance on the footways' face grids
    (mean and minimum, as the calculation's text gives them), each face grid a row and, when
    its record has interreflected light, a row "+ interreflected" under it with the record's
    label; none for a setup without face grids."""
    tables = []
    for i, s in enumerate(setups):
        faces = [f for f in s.get("faces") or () if isinstance(f, dict)]
        if not faces:
            continue
        rows = []
        for j, f in enumerate(faces):
            base = f"calculation.setups.{i}.faces.{j}"
            grid = f"{f.get('name')}, facing {_facing(f)}"
            rows.append(
                Row(
                    RowHead(grid),
                    tuple(
                        NumberCell(f"{base}.{key}", f.get(key), "sig3", reason="not computed")
                        for _, key in FACE_COLUMNS
                    ),
                )
            )
            bounced = f.get("with_interreflected")
            if isinstance(bounced, dict):
                rows.append(
                    Row(
                        RowHead(f"{grid}: + interreflected", sub=str(bounced.get("label") or "")),
                        tuple(
                            NumberCell(
                                f"{base}.with_interreflected.{key}", bounced.get(key), "sig3", reason="not computed"
                            )
                            for _, key in FACE_COLUMNS
                        ),
                    )
                )
        heights = sorted({float(f["height_m"]) for f in faces if isinstance(f.get("height_m"), (int, float))})
        up = f" {', '.join(f'{h:g}' for h in heights)} m up" if heights else ""
        tables.append(
            Table(
                f"calculation-faces-{i}",
                f"Semicylindrical (E_sc) and vertical (E_v) illuminance on the footway faces{up}, {names[i]}",
                tuple(rows),
                (Heading("face grid"), *(Heading(f"{h} (lx)", numeric=True) for h, _ in FACE_COLUMNS)),
                scrolls=True,
            )
        )
    return tables


#: The night table's columns: (heading, unit, path under a field's "night" record).
NIGHT_COLUMNS: tuple[tuple[str, str], ...] = (
    ("mean", "mean_lx"),
    ("minimum", "min_lx"),
    ("maximum", "max_lx"),
    ("sky glow, mean", "term_mean_lx.sky_glow"),
    ("moonlight, mean", "term_mean_lx.moonlight"),
    ("lit windows, mean", "term_mean_lx.lit_windows"),
    ("lit shop windows, mean", "term_mean_lx.lit_shop_windows"),
)


def _night_table(setups: Sequence[dict[str, Any]], calc: dict[str, Any]) -> Table | None:
    """The night light on the fields and face grids (lx), from the first setup's records (the
    same for every lighting), or None when the calculation has none."""
    if not setups:
        return None
    first = setups[0]
    records: list[tuple[str, str, dict[str, Any]]] = []
    for j, f in enumerate(first.get("fields") or ()):
        if isinstance(f.get("night"), dict):
            records.append((f"{f.get('name')}: horizontal", f"calculation.setups.0.fields.{j}.night", f["night"]))
    for j, f in enumerate(first.get("faces") or ()):
        night = f.get("night")
        if not isinstance(night, dict):
            continue
        for kind in ("semicylindrical", "vertical"):
            if isinstance(night.get(kind), dict):
                path = f"calculation.setups.0.faces.{j}.night.{kind}"
                records.append((f"{f.get('name')}: {kind}, facing {_facing(f)}", path, night[kind]))
    if not records:
        return None
    from render.calc.night import further_window_lamp  # (loaded with the calculation anyway)

    # Further window lamps (terms lit_windows_3, ...) after the two scene-wide ones.
    columns = NIGHT_COLUMNS + tuple(
        (f"window lamp {further_window_lamp(key)}, mean", f"term_mean_lx.{key}")
        for key in (records[0][2].get("term_mean_lx") or {})
        if further_window_lamp(key) is not None
    )
    rows = tuple(
        Row(
            RowHead(label),
            tuple(
                NumberCell(f"{path}.{key}", _json_at(record, key), "sig3", reason="not computed") for _, key in columns
            ),
        )
        for label, path, record in records
    )
    head = (Heading("grid"), *(Heading(f"{h} (lx)", numeric=True) for h, _ in columns))
    return Table(
        "calculation-night", "Night light on the calculation points (lx), beside the figures", rows, head, scrolls=True
    )


#: What the "Light to the sky" part says before its table.
SKY_TEXT = (
    "Light that leaves the street upward, where sky glow begins. The luminaires' direct upward flux is what "
    "their distributions send above the horizontal. The light the street reflects upward is measured on a "
    "horizontal plane just above the scene's highest surface, reaching beyond the scene by the plane's height: "
    "rays go down from every cell of the plane, and the light they find gives the upward exitance through it "
    "(lm/m\u00b2), which the map shows and whose sum is the reflected upward flux: ground, facades, roofs and the "
    "calculation's objects included, the luminaires' own light not. The upward totals and the weighted figures "
    "use it. Beside it, the ground's reflected light counted as if all of it went up: in a street between "
    "houses some of it meets the facades instead, so it can be the larger of the two.",
    "The weighted figures are indicators relative to the first lighting, not a sky-glow model: Rayleigh "
    "weighting (scattering by air goes as the inverse fourth power of the wavelength) and the scotopic weighting "
    "of a dark-adapted eye.",
)

#: The rows of the sky table: (label, unit, path under a setup's JSON, display rule).
SKY_ROWS: tuple[tuple[str, str, str, str], ...] = (
    ("direct upward flux", "lm", "sky.direct_upward_lm", "sig3"),
    (
        "reflected upward through the plane (ground, facades, roofs, objects)",
        "lm",
        "sky.reflected_upward_map_lm",
        "sig3",
    ),
    ("reflected by the ground, counted whole", "lm", "sky.reflected_upward_lm", "sig3"),
    ("largest upward exitance on the map", "lm/m\u00b2", "upward_map.max_exitance_lm_m2", "sig3"),
    ("upward flux per metre of street (direct + reflected through the plane)", "lm/m", "sky.upward_lm_per_m", "sig3"),
    ("Rayleigh-weighted upward, relative", "", "sky_relative_to_before.rayleigh_weighted", "sig3"),
    ("scotopic-weighted upward, relative", "", "sky_relative_to_before.scotopic_weighted", "sig3"),
)


def _json_at(record: Any, path: str) -> Any:
    for key in path.split("."):
        if not isinstance(record, dict):
            return None
        record = record.get(key)
    return record


def _sky_part(
    setups: Sequence[dict[str, Any]], names: Sequence[str], figure: EmbeddedImage | None, alt: str
) -> SkyPart | None:
    """The "Light to the sky" part from the setups' JSON (None when they have no sky figures)."""
    if not setups or not all(isinstance(s.get("sky"), dict) for s in setups):
        return None
    first_map = setups[0].get("upward_map") or {}
    bounces = int(first_map.get("bounces") or 0)
    note = (
        f" The map includes interreflected light (up to {bounces} bounces)."
        if bounces
        else " The map holds light reflected once (no interreflections)."
    )
    rows = tuple(
        Row(
            RowHead(label),
            (
                TextCell(unit),
                *(
                    NumberCell(f"calculation.setups.{i}.{path}", _json_at(s, path), rule, reason="not computed")
                    for i, s in enumerate(setups)
                ),
            ),
        )
        for label, unit, path, rule in SKY_ROWS
    )
    head = (Heading("figure"), Heading("unit"), *(Heading(n, numeric=True) for n in names))
    table = Table("calculation-sky-table", "Light to the sky per lighting", rows, head, scrolls=True)
    return SkyPart((SKY_TEXT[0] + note, *SKY_TEXT[1:]), table, figure, alt)


def _calculation_part(metrics: ComparisonMetrics, images: ImageFolder) -> CalculationPart | None:
    """The "Calculations" section from ``metrics.calculation`` (``None`` when not run)."""
    calc = metrics.calculation
    if calc is None:
        return None
    if "absent" in calc:
        return CalculationPart((), "", (), (), (), absent=str(calc["absent"]))
    labels = _labels(metrics)
    setups = list(calc.get("setups") or ())
    keys = list(calc.get("setup_keys") or ())
    # A calculation stored without the comparison's keys names its setups itself.
    names = [labels.get(k, k) for k in keys] + [str(s.get("setup")) for s in setups[len(keys) :]]
    head = (
        Heading("figure"),
        Heading("unit"),
        *(Heading(n, numeric=True) for n in names),
    )
    rows = tuple(
        Row(
            RowHead(str(f.get("label", f["key"]))),
            (
                TextCell(str(f.get("unit") or "")),
                *(
                    NumberCell(
                        f"calculation.setups.{i}.headline.{f['key']}",
                        (s.get("headline") or {}).get(f["key"]),
                        "sig3",
                        reason="not computed",
                    )
                    for i, s in enumerate(setups)
                ),
            ),
        )
        for f in calc.get("headline_figures") or ()
    )
    tables = [Table("calculation-headline", "Headline figures per lighting", rows, head, scrolls=True)]
    for i, s in enumerate(setups):
        check = s.get("class_check")
        if not check:
            continue
        base = f"calculation.setups.{i}.class_check.criteria"
        tables.append(
            Table(
                f"calculation-class-{i}",
                f"Class {check.get('class')} check, {names[i]}: {check.get('verdict')} "
                f"(class values: {check.get('source')})",
                tuple(
                    Row(
                        RowHead(f"{c.get('symbol')} ({c.get('bound')})"),
                        (
                            TextCell(str(c.get("unit") or "")),
                            NumberCell(f"{base}.{j}.required", c.get("required"), "sig3"),
                            NumberCell(f"{base}.{j}.achieved", c.get("achieved"), "sig3", reason="not computed"),
                            NumberCell(f"{base}.{j}.margin", c.get("margin"), "percent0", reason="not computed"),
                            TextCell(str(c.get("status"))),
                            TextCell(str(c.get("photometry"))),
                        ),
                    )
                    for j, c in enumerate(check.get("criteria") or ())
                ),
                (
                    Heading("criterion"),
                    Heading("unit"),
                    Heading("class value", numeric=True),
                    Heading("achieved", numeric=True),
                    Heading("margin (%)", numeric=True),
                    Heading("result"),
                    Heading("photometry"),
                ),
                scrolls=True,
            )
        )
    pictures = [str(p) for p in calc.get("pictures") or ()]
    given = [str(a) for a in calc.get("picture_alts") or ()]
    alts = tuple(
        given[k] if k < len(given) and given[k] else f"Calculations: figure {k + 1}" for k in range(len(pictures))
    )
    caution = str(calc.get("caution") or "").strip()
    caution = caution[:1].upper() + caution[1:] + ("" if caution.endswith(".") else ".")
    # The upward exitance map's picture goes to the sky part, the others stay together.
    from render.output.calc_pictures import UPWARD_PICTURE  # here: that module imports this package

    upward = [k for k, p in enumerate(pictures) if p.rsplit("/", 1)[-1] == UPWARD_PICTURE]
    sky = _sky_part(
        setups,
        names,
        images.get(pictures[upward[0]]) if upward else None,
        alts[upward[0]] if upward else "",
    )
    kept = [k for k in range(len(pictures)) if k not in upward]
    tables += _face_tables(setups, names)
    night = _night_table(setups, calc)
    if night is not None:
        tables.append(night)
    options = calc.get("options") or {}
    described = options.get("night_light")
    bounced = [
        f["with_interreflected"]
        for s in setups
        for f in s.get("faces") or ()
        if isinstance(f, dict) and isinstance(f.get("with_interreflected"), dict)
    ]
    paragraphs = CALCULATION_TEXT
    if bounced:
        label = str(bounced[0].get("label") or "")
        paragraphs += (INTERREFLECTED_TEXT.format(bounces=options.get("bounces", "?"), label=label),)
    if night is not None:
        paragraphs += (NIGHT_TEXT.format(night=described),)
    return CalculationPart(
        paragraphs=paragraphs,
        caution=caution,
        tables=tuple(tables),
        figures=tuple(images.get(pictures[k]) for k in kept),
        alts=tuple(alts[k] for k in kept),
        sky=sky,
    )


def build_page(metrics: ComparisonMetrics, images: ImageFolder) -> Page:
    """The :class:`Page` of ``metrics``; images are read through ``images`` (whose
    ``problems`` list anything missing)."""
    views = tuple(_view_part(i, v, metrics, images) for i, v in enumerate(metrics.views))
    taken = set(_FIXED_ANCHORS) | {f"view-{i}" for i in range(len(views))}
    extras, extra_nav = _extra_parts(metrics.extra_sections, images, taken)
    nav = [("summary", "In short")]
    if metrics.luminance_legend is not None:
        nav.append(("luminance-scale", "Luminance maps: the scale"))
    nav += [(f"view-{v.index}", f"View: {v.name}") for v in views]
    calculation = _calculation_part(metrics, images)
    nav += [("lamps", "The lamps"), *extra_nav]
    if calculation is not None:
        nav.append(("calculation", "Calculations"))
    nav.append(("observer", "Observer and settings"))
    notes = _Footnotes()
    setups = _setup_parts(metrics, notes)
    observer = Table(
        "observer-table",
        "Observer modelled",
        tuple(
            Row(
                RowHead(label),
                (NumberCell(f"observer.{key}", getattr(metrics.observer, key), rule, reason=reason, show_reason=True),),
            )
            for key, label, rule, reason in OBSERVER_ROWS
        ),
    )
    settings = Table(
        "settings-table",
        "Render settings",
        tuple(
            Row(
                RowHead(label),
                (NumberCell(f"settings.{key}", getattr(metrics.settings, key), rule, reason="not given"),),
            )
            for key, label, rule in SETTINGS_ROWS
            # Interreflection rows only where recorded (older metrics files lack them), and
            # paths per pixel only where interreflected light was traced.
            if key != "bounces" or metrics.settings.bounces is not None
            if key != "indirect_samples_per_pixel" or metrics.settings.bounces
        ),
    )
    cautions = (STANDING_CAUTION, *(c for c in metrics.cautions if c != STANDING_CAUTION))
    return Page(
        scene=metrics.scene,
        tool=metrics.tool,
        cautions=cautions,
        nav=tuple(nav),
        summary=metrics.summary,
        setups=setups,
        views=views,
        notes=tuple(notes.items),
        extras=extras,
        observer=observer,
        settings=settings,
        luminance_legend=None if metrics.luminance_legend is None else images.get(metrics.luminance_legend),
        calculation=calculation,
        luminance_scale=None
        if metrics.luminance_scale_cd_m2 is None
        else tuple(
            NumberCell(f"luminance_scale_cd_m2.{k}", v, "sig3") for k, v in enumerate(metrics.luminance_scale_cd_m2)
        ),
    )
