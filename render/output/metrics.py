"""The comparison's figures as typed records: what ``metrics.json`` holds and the report shows.

:class:`ComparisonMetrics` is the result of :func:`render.output.comparison.run_comparison`:
the tool and scene, the observer and render settings, the "before" setup and the options
compared with it, per view its images,
luminance statistics and adaptation levels, the plain-language summary, the cautions, extra
report sections (the colour analysis' section among them) and the lamp figures.
:meth:`ComparisonMetrics.to_json` gives the content of ``metrics.json``;
:meth:`ComparisonMetrics.from_json` reads it back (so a report can be made again from the
file), and ``from_json(m.to_json()) == m``.

Every figure is held as it is published: the comparison rounds each float (outside the lamp
figures) to :data:`PUBLISHED_DIGITS` significant figures when it makes a record
(:func:`published`), so the report, which shows these records, shows exactly the numbers of
``metrics.json``. The lamp figures are :class:`~render.colour.lamp_figures.LampFigures` as
published (the records of ``lampcast lamps --json``, with their own rounding).

References
----------
The luminance statistics are of the rendered surface luminance (cd/m²); the adaptation levels
are those of :mod:`render.vision.adaptation` (photopic, and CIE 191:2010 MES2 mesopic).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, fields
from typing import TYPE_CHECKING, Any

import numpy as np

from render.analysis.colours import NameChange, PairDifference, SetupDiscrimination
from render.colour.lamp_figures import LampFigures

if TYPE_CHECKING:
    from render.vision.observer import ObserverSettings

__all__ = [
    "PUBLISHED_DIGITS",
    "RESERVED_KEYS",
    "AdaptationLevels",
    "BEFORE",
    "Cell",
    "ColourSummary",
    "ComparisonMetrics",
    "GroupLighting",
    "LuminanceStats",
    "ObserverInfo",
    "RenderSettings",
    "RegionLuminance",
    "ReportSection",
    "ReportTable",
    "SceneInfo",
    "SetupDescription",
    "ToolInfo",
    "ViewImages",
    "ViewMetrics",
    "published",
]

#: Significant figures of every float the comparison publishes (outside the lamp figures).
PUBLISHED_DIGITS = 4

#: A table cell of a report section: text, a number, or ``None`` (not defined).
Cell = str | int | float | bool | None

#: The key of the "before" setup; the options have keys of their own (:data:`RESERVED_KEYS`
#: are never an option's key).
BEFORE = "before"
#: Keys no option may have: the before setup's, and the names used beside setup keys in JSON
#: objects and file names (``shared`` adaptation, ``luminance-legend.png``).
RESERVED_KEYS = frozenset({BEFORE, "shared", "legend"})


def published(value: Any, digits: int = PUBLISHED_DIGITS) -> Any:
    """A value as the comparison publishes it: floats to ``digits`` significant figures
    (NaN and infinities become ``None``), numpy scalars as Python numbers, anything else
    unchanged."""
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        value = float(value)
    if isinstance(value, float):
        return float(f"{value:.{digits}g}") if math.isfinite(value) else None
    return value


def _json(value: Any) -> Any:
    """A record's value in JSON form: records by their ``to_json``, tuples as lists."""
    if hasattr(value, "to_json"):
        return value.to_json()
    if isinstance(value, tuple):
        return [_json(v) for v in value]
    if isinstance(value, Mapping):
        return {str(k): _json(v) for k, v in value.items()}
    return value


def _fields_json(record: Any) -> dict[str, Any]:
    return {f.name: _json(getattr(record, f.name)) for f in fields(record)}


# --- small records ---------------------------------------------------------------------------


@dataclass(frozen=True)
class ToolInfo:
    """The program that made the comparison."""

    name: str
    version: str

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> ToolInfo:
        return cls(str(data.get("name", "lampcast")), str(data.get("version", "")))


@dataclass(frozen=True)
class SceneInfo:
    """The scene compared: name, description, notes, file name and SHA-256 of the file."""

    name: str
    description: str
    notes: str
    file: str
    sha256: str
    #: ``[scene] attribution`` (e.g. a map licence), shown in the report's footer; "" for none.
    attribution: str = ""

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> SceneInfo:
        return cls(*(str(data.get(f.name) or "") for f in fields(cls)))


@dataclass(frozen=True)
class ObserverInfo:
    """The observer the images were made for (``None``: not given)."""

    age_years: float | None
    pigmentation: float | None
    display_peak_cd_m2: float | None
    adaptation_cd_m2: float | None
    glare: bool | None = None
    acuity: bool | None = None

    @classmethod
    def of(cls, observer: ObserverSettings) -> ObserverInfo:
        """The published settings of ``observer``."""
        return cls(
            published(observer.age_years),
            published(observer.pigmentation),
            published(observer.display_peak_cd_m2),
            published(observer.adaptation_cd_m2),
            observer.glare,
            observer.acuity,
        )

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> ObserverInfo:
        return cls(*(data.get(f.name) for f in fields(cls)))


@dataclass(frozen=True)
class RenderSettings:
    """Samples per pixel, random seed and image size of the rendered views; ``bounces`` the
    interreflections traced (0: direct light only) and ``indirect_samples_per_pixel`` their paths
    per pixel (None without them; both None in files written before they were recorded)."""

    samples_per_pixel: int | None
    seed: int | None
    width_px: int | None
    height_px: int | None
    bounces: int | None = None
    indirect_samples_per_pixel: int | None = None

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> RenderSettings:
        return cls(*(data.get(f.name) for f in fields(cls)))


@dataclass(frozen=True)
class GroupLighting:
    """How one luminaire group is lit in a setup: lamp, photometry, flux (lm), dimming (0-1).

    ``lumens`` is the scene's ``lumens`` as used: the lamp lumens for a relative photometric
    file, the luminaire's output for an absolute one (``None``: the file's own flux);
    ``dimming`` ``None``: not set. The flux figures, at full output (before maintenance factor
    and dimming): ``rated_lamp_lumens`` the file's rated lamp lumens (``None`` for absolute
    photometry, which has no lamp), ``luminaire_lumens`` the integrated flux of the
    distribution as used, ``light_output_ratio`` their ratio to the lamp lumens used (LOR;
    ``None`` for absolute photometry).
    """

    lamp: str
    photometry: str | None = None
    lumens: float | None = None
    dimming: float | None = None
    rated_lamp_lumens: float | None = None
    luminaire_lumens: float | None = None
    light_output_ratio: float | None = None

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> GroupLighting:
        return cls(
            str(data.get("lamp", "")),
            *(data.get(f.name) for f in fields(cls) if f.name != "lamp"),
        )


@dataclass(frozen=True)
class SetupDescription:
    """One compared setup: its name, description, the lamps it uses and its groups.

    ``groups`` maps a luminaire group (``"*"``: every luminaire) to its :class:`GroupLighting`;
    ``notes`` say what the reader should know about it (a setup-wide ``lumens`` that changes
    every group).
    """

    name: str
    description: str
    lamps: tuple[str, ...]
    groups: Mapping[str, GroupLighting]
    notes: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> SetupDescription:
        groups = data.get("groups") or {}
        return cls(
            str(data.get("name") or ""),
            str(data.get("description") or ""),
            tuple(data.get("lamps") or ()),
            {str(k): GroupLighting.from_json(v) for k, v in groups.items()},
            tuple(str(n) for n in data.get("notes") or ()),
        )


@dataclass(frozen=True)
class LuminanceStats:
    """Mean, minimum, median and 95th percentile of the luminance of the surfaces seen, cd/m²
    (``None`` when a view shows no surface)."""

    mean: float | None
    min: float | None
    median: float | None
    p95: float | None

    @classmethod
    def of(cls, luminance_cd_m2: np.ndarray) -> LuminanceStats:
        """The published statistics of the luminances given (any shape)."""
        y = np.asarray(luminance_cd_m2, dtype=np.float64).ravel()
        if y.size == 0:
            return cls(None, None, None, None)
        return cls(
            published(float(y.mean())),
            published(float(y.min())),
            published(float(np.median(y))),
            published(float(np.percentile(y, 95))),
        )

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> LuminanceStats:
        return cls(*(data.get(f.name) for f in fields(cls)))


@dataclass(frozen=True)
class AdaptationLevels:
    """The adaptation luminance (cd/m²) of the images: shared exposure, and each setup adapted
    (setup key -> level). In JSON one flat object: ``{"shared": ..., "before": ..., KEY: ...}``
    (``shared`` is never a setup key, :data:`RESERVED_KEYS`)."""

    shared: float | None
    adapted: Mapping[str, float | None]

    def to_json(self) -> dict[str, Any]:
        return {"shared": self.shared, **{str(k): v for k, v in self.adapted.items()}}

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> AdaptationLevels:
        return cls(data.get("shared"), {str(k): v for k, v in data.items() if k != "shared"})


@dataclass(frozen=True)
class ViewImages:
    """The images of one view, as paths relative to the output folder.

    ``shared``, ``adapted`` and ``luminance`` map every setup key (``"before"`` and each
    option) to its shared-exposure image, adapted-exposure image and luminance map;
    ``side_by_side`` and ``wipe`` map each option's key to its image beside / wiping into the
    "before" image. The legend of the luminance maps is the report's
    (:attr:`ComparisonMetrics.luminance_legend`): one scale for every view.
    """

    shared: Mapping[str, str]
    adapted: Mapping[str, str]
    luminance: Mapping[str, str]
    side_by_side: Mapping[str, str]
    wipe: Mapping[str, str]

    @classmethod
    def in_folder(cls, folder: str, keys: Sequence[str]) -> ViewImages:
        """The file names the comparison writes into ``folder`` for setup ``keys`` (the first
        is the "before" setup, the others the options)."""
        options = list(keys[1:])
        return cls(
            shared={k: f"{folder}/shared-{k}.png" for k in keys},
            adapted={k: f"{folder}/adapted-{k}.png" for k in keys},
            luminance={k: f"{folder}/luminance-{k}.png" for k in keys},
            side_by_side={k: f"{folder}/side-by-side-{k}.png" for k in options},
            wipe={k: f"{folder}/wipe-{k}.gif" for k in options},
        )

    def files(self) -> tuple[str, ...]:
        """Every image path, in a fixed order."""
        out: list[str] = []
        for group in (self.shared, self.adapted, self.luminance, self.side_by_side, self.wipe):
            out += group.values()
        return tuple(out)

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> ViewImages:
        def paths(key: str) -> dict[str, str]:
            return {str(k): str(v) for k, v in (data.get(key) or {}).items()}

        return cls(
            paths("shared"),
            paths("adapted"),
            paths("luminance"),
            paths("side_by_side"),
            paths("wipe"),
        )


@dataclass(frozen=True)
class RegionLuminance:
    """The luminance of one region a resident recognises in one view (the carriageway, a
    footway, the house fronts, a tagged object): setup key -> statistics over the pixels that
    show only that region (``pixels`` of them; edges and luminous openings left out)."""

    name: str
    kind: str
    pixels: int
    luminance_cd_m2: Mapping[str, LuminanceStats]

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> RegionLuminance:
        return cls(
            str(data.get("name") or ""),
            str(data.get("kind") or ""),
            int(data.get("pixels") or 0),
            {str(k): LuminanceStats.from_json(v or {}) for k, v in (data.get("luminance_cd_m2") or {}).items()},
        )


@dataclass(frozen=True)
class ViewMetrics:
    """One view: its images, the surface luminance under every setup (setup key -> statistics),
    the adaptation levels and the luminance per region the view shows (:class:`RegionLuminance`)."""

    name: str
    notes: str
    images: ViewImages
    luminance_cd_m2: Mapping[str, LuminanceStats]
    adaptation_cd_m2: AdaptationLevels
    mesopic_adaptation_cd_m2: AdaptationLevels | None = None
    regions: tuple[RegionLuminance, ...] = ()

    def to_json(self) -> dict[str, Any]:
        out = _fields_json(self)
        if self.mesopic_adaptation_cd_m2 is None:
            del out["mesopic_adaptation_cd_m2"]
        return out

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> ViewMetrics:
        lum = data.get("luminance_cd_m2") or {}
        mesopic = data.get("mesopic_adaptation_cd_m2")
        return cls(
            str(data.get("name") or ""),
            str(data.get("notes") or ""),
            ViewImages.from_json(data["images"]),
            {str(k): LuminanceStats.from_json(v or {}) for k, v in lum.items()},
            AdaptationLevels.from_json(data.get("adaptation_cd_m2") or {}),
            None if mesopic is None else AdaptationLevels.from_json(mesopic),
            tuple(RegionLuminance.from_json(r) for r in data.get("regions") or ()),
        )


@dataclass(frozen=True)
class ReportTable:
    """A table of a report section: caption, column headings, rows of :data:`Cell`."""

    caption: str
    columns: tuple[str, ...]
    rows: tuple[tuple[Cell, ...], ...]

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> ReportTable:
        return cls(
            str(data.get("caption") or ""),
            tuple(str(c) for c in data.get("columns") or ()),
            tuple(tuple(row) for row in data.get("rows") or ()),
        )


@dataclass(frozen=True)
class ReportSection:
    """A further section of the report (the colour analysis is one): a title, an anchor name
    (``html_id``; made unique and safe by the report), paragraphs, tables, images (paths
    relative to the output folder) and what each image shows in words (``image_alts``, one per
    image; the report's alt text, a generic one where missing or empty)."""

    title: str
    html_id: str
    paragraphs: tuple[str, ...] = ()
    tables: tuple[ReportTable, ...] = ()
    images: tuple[str, ...] = ()
    image_alts: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> ReportSection:
        return cls(
            str(data.get("title") or ""),
            str(data.get("html_id") or ""),
            tuple(str(p) for p in data.get("paragraphs") or ()),
            tuple(ReportTable.from_json(t) for t in data.get("tables") or ()),
            tuple(str(i) for i in data.get("images") or ()),
            tuple(str(a) for a in data.get("image_alts") or ()),
        )


@dataclass(frozen=True)
class ColourSummary:
    """Where the colour analysis is (view, JSON file) and, per setup label, its pairs that
    become hard to tell apart, its name changes, every pair of visible objects with CIEDE2000
    beside the light-level model's multiple of threshold and verdict
    (:class:`~render.analysis.colours.PairDifference`), and the light level the pairs were
    judged at (:class:`~render.analysis.colours.SetupDiscrimination`)."""

    view: str
    file: str
    confusions: Mapping[str, tuple[PairDifference, ...]]
    name_changes: Mapping[str, tuple[NameChange, ...]]
    pairs: Mapping[str, tuple[PairDifference, ...]] = field(default_factory=dict)
    discrimination: Mapping[str, SetupDiscrimination] = field(default_factory=dict)

    def to_json(self) -> dict[str, Any]:
        return _fields_json(self)

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> ColourSummary:
        def pairs(key: str) -> dict[str, tuple[PairDifference, ...]]:
            return {str(k): tuple(PairDifference.from_json(c) for c in v) for k, v in (data.get(key) or {}).items()}

        return cls(
            str(data.get("view") or ""),
            str(data.get("file") or ""),
            pairs("confusions"),
            {
                str(k): tuple(NameChange(c["object"], c["daylight"], c["seen"]) for c in v)
                for k, v in (data.get("name_changes") or {}).items()
            },
            pairs("pairs"),
            {str(k): SetupDiscrimination.from_json(v) for k, v in (data.get("discrimination") or {}).items()},
        )


# --- the whole ---------------------------------------------------------------------------------


@dataclass(frozen=True)
class ComparisonMetrics:
    """Everything a comparison publishes (the content of ``metrics.json``; module text).

    Attributes
    ----------
    tool, scene, observer, settings
        Provenance: program, scene, observer modelled, render settings.
    setups
        Setup key -> :class:`SetupDescription`: first the "before" setup (key :data:`BEFORE`),
        then every option compared with it, in the order given.
    views
        One :class:`ViewMetrics` per view, in the order rendered.
    summary
        Plain-language statements of what changes (:func:`render.output.comparison.summary_sentences`).
    cautions
        What the images do and do not show.
    extra_sections
        Further report sections, e.g. the colour analysis.
    colours
        Where the colour analysis is and what it found (``None`` without tagged objects).
    lamps
        Lamp id -> :class:`~render.colour.lamp_figures.LampFigures` (as published) of every
        lamp either setup uses.
    calculation
        The calculation of the compared setups as ``lampcast calc --json`` gives it
        (:meth:`render.calc.run.CalculationReport.to_json`) with the report's additions, or why
        it is absent (:func:`render.output.comparison.calculation_json`); ``None``: not run.
    """

    tool: ToolInfo
    scene: SceneInfo
    observer: ObserverInfo
    settings: RenderSettings
    setups: Mapping[str, SetupDescription]
    views: tuple[ViewMetrics, ...]
    summary: tuple[str, ...] = ()
    cautions: tuple[str, ...] = ()
    extra_sections: tuple[ReportSection, ...] = ()
    colours: ColourSummary | None = None
    lamps: Mapping[str, LampFigures] | None = None
    luminance_legend: str | None = None
    luminance_scale_cd_m2: tuple[float, float] | None = None
    calculation: Mapping[str, Any] | None = None

    def to_json(self) -> dict[str, Any]:
        """The content of ``metrics.json`` (JSON-safe; keys in a fixed order)."""
        out = _fields_json(self)
        for key in ("colours", "calculation"):
            if out[key] is None:
                del out[key]
        return out

    @classmethod
    def from_json(cls, data: Mapping[str, Any]) -> ComparisonMetrics:
        """The records of a ``metrics.json`` content (e.g. ``json.load`` of the file)."""
        setups = data.get("setups") or {}
        colours = data.get("colours")
        scale = data.get("luminance_scale_cd_m2")
        return cls(
            tool=ToolInfo.from_json(data.get("tool") or {}),
            scene=SceneInfo.from_json(data.get("scene") or {}),
            observer=ObserverInfo.from_json(data.get("observer") or {}),
            settings=RenderSettings.from_json(data.get("settings") or {}),
            setups={
                str(k): SetupDescription.from_json(v or {})
                for k, v in sorted(setups.items(), key=lambda kv: kv[0] != BEFORE)
            },
            views=tuple(ViewMetrics.from_json(v) for v in data.get("views") or ()),
            summary=tuple(str(s) for s in data.get("summary") or ()),
            cautions=tuple(str(c) for c in data.get("cautions") or ()),
            extra_sections=tuple(ReportSection.from_json(s) for s in data.get("extra_sections") or ()),
            colours=None if colours is None else ColourSummary.from_json(colours),
            lamps={str(k): LampFigures.from_json(v) for k, v in (data.get("lamps") or {}).items()},
            luminance_legend=data.get("luminance_legend"),
            luminance_scale_cd_m2=None if scale is None else (scale[0], scale[1]),
            calculation=data.get("calculation"),
        )

    @property
    def options(self) -> tuple[str, ...]:
        """The keys of the options (every setup but the "before" one), in order."""
        return tuple(k for k in self.setups if k != BEFORE)

    def lamp_figure_mean(self, key: str, setup: str) -> float | None:
        """Mean of lamp figure ``key`` over the lamps of setup ``setup`` (a setup key) that
        define it (``None`` if none does)."""
        lamps = self.lamps or {}
        description = self.setups[setup]
        values = [getattr(lamps[lamp], key) for lamp in description.lamps if lamp in lamps]
        values = [v for v in values if v is not None]
        return float(np.mean(values)) if values else None
