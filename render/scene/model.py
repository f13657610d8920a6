"""The scene as lampcast holds it after loading and checking a scene file.

Coordinates: metres, right-handed, **x along the street** (0 at the start, increasing to
``street.length_m``), **y across it** (0 on the carriageway centre line, +y to the left when
looking along +x), **z up** (0 on the carriageway surface).

The dataclasses are plain records of lampcast's own schema (``scenes/README.md``); no published
method is involved.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

__all__ = [
    "CalcSettings",
    "EnergySettings",
    "Frontage",
    "FrontageWindows",
    "GroupSetting",
    "Luminaire",
    "Marking",
    "NightLight",
    "RenderSettings",
    "Road",
    "Scene",
    "Setup",
    "Street",
    "StreetObject",
    "StreetSide",
    "Tag",
    "Vec2",
    "Vec3",
    "View",
    "luminaire_groups",
]

#: A point or vector in the street's plane, m.
Vec2 = tuple[float, float]
#: A point or vector in the world, m.
Vec3 = tuple[float, float, float]


@dataclass
class StreetSide:
    """One side of the street, from the kerb outwards."""

    footway_width_m: float
    verge_width_m: float
    frontage_depth_m: float  # front gardens / forecourts between footway and building line
    footway_material: str
    verge_material: str
    frontage_material: str


@dataclass
class Street:
    """The street's cross-section and length: carriageway, kerbs and the two sides."""

    length_m: float
    carriageway_width_m: float
    lanes: int
    kerb_height_m: float
    kerb_width_m: float
    carriageway_material: str
    kerb_material: str
    centre_line: str  # "none" | "dashed" | "solid"
    line_material: str
    left: StreetSide  # +y
    right: StreetSide  # -y
    wet: bool = False  # water film on carriageway, footways and lines (render.light.gloss)
    #: ``r_table``: the carriageway's r-table file (lampcast's CSV layout, render.light.rtable);
    #: None: the carriageway material's own reflection.
    r_table_file: Path | None = None
    #: ``q0_sr``: the road's average luminance coefficient Q0, scaling the r-table (None: as given).
    q0_sr: float | None = None
    #: ``r_table_views``: which views' images use the r-table: "none", "driver" or "all".
    r_table_views: str = "driver"

    def side(self, name: str) -> StreetSide:
        """The side called ``name`` ("left" is +y, anything else the right)."""
        return self.left if name == "left" else self.right

    def kerb_edge_y(self, side: str) -> float:
        """y of the kerb face on ``side`` ("left" is +y)."""
        return (1.0 if side == "left" else -1.0) * 0.5 * self.carriageway_width_m

    def building_line_y(self, side: str) -> float:
        """y of the building line (back of footway + verge + frontage) on ``side``."""
        s = self.side(side)
        half = (
            0.5 * self.carriageway_width_m
            + self.kerb_width_m
            + s.verge_width_m
            + s.footway_width_m
            + s.frontage_depth_m
        )
        return half if side == "left" else -half

    def ground_z(self, y_m: float) -> float:
        """Height of the walkable surface at across-street position ``y_m``."""
        return 0.0 if abs(y_m) <= 0.5 * self.carriageway_width_m else self.kerb_height_m


@dataclass
class Road:
    """A road along a centreline polyline (``[[roads]]``, render.geometry.roads): the
    cross-section of a :class:`Street` following ``points_m``; ``section.length_m`` is the
    length of the centreline after its corners are rounded."""

    name: str
    points_m: tuple[Vec2, ...]
    section: Street
    corner_radius_m: float | None  # None: sharp (mitred) corners
    max_chord_error_m: float  # arcs drawn as chords within this distance of the true arc
    junction_kerb_radius_m: float  # kerb radius where this road's end meets another road
    where: str  # key path in the scene file, for messages


@dataclass
class Tag:
    """Name and analysis flag of something in the scene ("the blue car", inspect = true).

    ``colour_slot``: the material slot whose colour is the object's colour in the colour
    analysis; ``None`` for the kind's main surface (``ObjectKind.main_slot``).
    """

    name: str
    inspect: bool = False
    notes: str = ""
    colour_slot: str | None = None


@dataclass
class StreetObject:
    """A parametric street object (car, bin, tree ...) or a piece of free geometry."""

    kind: str
    tag: Tag
    position_m: Vec3
    heading_deg: float
    params: dict[str, Any]
    materials: dict[str, str]  # slot -> material id
    where: str  # key path in the scene file, for messages


@dataclass
class Frontage:
    """A row of house or shop fronts along one side of the street."""

    side: str
    kind: str  # "house" | "shop"
    start_m: float
    length_m: float
    units: int
    height_m: float
    depth_m: float
    materials: dict[str, str]
    tag: Tag
    where: str
    #: The road the fronts stand along (``frontages.road``: ``start_m``/``length_m`` along its
    #: centreline, ``side`` its left or right); None: the [street].
    road: str | None = None


@dataclass
class Marking:
    """A painted or surfaced region lying on the street (a thin region with its own material)."""

    kind: str  # "line" | "polygon"
    points_m: list[Vec2]
    width_m: float
    dash_m: float
    gap_m: float
    material: str
    tag: Tag
    where: str
    #: Height of the surface under the marking, m (markings along a road); None: the street's.
    ground_m: float | None = None


@dataclass
class Luminaire:
    """One luminaire as placed in the world (rows are expanded to these)."""

    name: str
    group: str
    position_m: Vec3  # centre of the luminous opening
    column_base_m: Vec3 | None  # foot of the column, or None for no column geometry
    rotation_deg: float  # heading of the photometric C0 axis, anticlockwise from +x
    tilt_deg: float
    photometry: str  # built-in id or path (resolved against the scene file)
    lamp: str  # built-in lamp id or path
    lumens: float | None  # None: the photometry's rated lumens
    maintenance_factor: float
    dimming: float
    where: str
    #: The road a row's luminaire stands along (``luminaire_rows.road``) and its distance
    #: along that road's centreline, m; None for the [street] and single luminaires.
    road: str | None = None
    s_m: float | None = None


@dataclass
class View:
    """A named camera: where it stands, what it looks at, its field of view and image size."""

    name: str
    kind: str  # pedestrian | driver | window | aerial | custom
    position_m: Vec3
    target_m: Vec3
    hfov_deg: float
    width_px: int
    height_px: int
    notes: str = ""


@dataclass
class RenderSettings:
    """Camera samples per pixel, the random seed, and interreflected light of the scene's
    renders: ``bounces`` interreflections at most per path (0: direct light only),
    ``indirect_samples_per_pixel`` paths per pixel (:mod:`render.light.indirect`), and
    ``indirect_denoise``: the images' interreflected light filtered once per view
    (:mod:`render.light.indirect.denoise`; calculations never)."""

    samples_per_pixel: int = 4
    seed: int = 0
    bounces: int = 0
    indirect_samples_per_pixel: int = 8
    indirect_denoise: bool = False


@dataclass
class GroupSetting:
    """What a setup changes for one luminaire group (``None``: keep the scene's value)."""

    lamp: str | None = None
    photometry: str | None = None
    lumens: float | None = None
    dimming: float | None = None
    #: Input power per luminaire, W (None: the photometric file's input watts).
    input_watts: float | None = None


@dataclass
class Setup:
    """A named lighting setup: per group (``"*"`` for all) lamp, photometry, lumens, dimming
    and input watts, and the setup's dimming schedule over the night."""

    name: str
    description: str
    groups: dict[str, GroupSetting]
    #: ``schedule``: (start hour after dusk, end hour, light level) steps; empty: the setup's
    #: dimming all night (render.calc.energy).
    schedule: tuple[tuple[float, float, float], ...] = ()


@dataclass(frozen=True)
class FrontageWindows:
    """``[[night.frontages]]``: one frontage's (or one house or shop object's) own lit windows,
    overriding ``[night]``'s scene-wide share and luminance for its windows alone.

    ``name`` is the frontage's or object's name; ``channel`` the window channel its windows
    light (0: the houses' window lamp, 1: the shops', 2 and on: the further window lamps in the
    order frontages first name them; resolved from ``lamp`` or the frontage's kind) and ``lamp``
    that channel's lamp reference; ``lit_fraction`` the share of its windows lit (``round(fraction · n)``, seeded with
    ``[night] window_seed`` and the frontage), at ``luminance_cd_m2``; windows numbered from 1
    in the order its fronts are built: ``lit`` always lit, ``dark`` never, and
    ``window_luminance_cd_m2`` ((number, cd/m²), ...) lit at a luminance of their own (0: dark).
    ``where`` is the key path and ``source`` the scene file, for messages."""

    name: str
    channel: int
    lit_fraction: float
    luminance_cd_m2: float
    lit: tuple[int, ...] = ()
    dark: tuple[int, ...] = ()
    window_luminance_cd_m2: tuple[tuple[int, float], ...] = ()
    where: str = ""
    source: str = ""
    lamp: str = ""

    @property
    def may_light(self) -> bool:
        """Whether any of its windows can be lit."""
        share = (self.lit_fraction > 0.0 or bool(self.lit)) and self.luminance_cd_m2 > 0.0
        return share or any(level > 0.0 for _, level in self.window_luminance_cd_m2)


@dataclass(frozen=True)
class NightLight:
    """``[night]``: the night's light besides the luminaires (off by default).

    Urban sky glow as a uniform sky dome over the upper hemisphere of luminance
    ``sky_luminance_cd_m2`` with the spectrum of the lamp reference ``sky_spectrum``; moonlight
    as a parallel beam of normal illuminance ``moon_illuminance_lx`` from ``moon_elevation_deg``
    above the horizon and ``moon_azimuth_deg`` (from +y toward +x: clockwise from north where
    +y is north), with a Planckian spectrum at ``moon_cct_k``
    (:mod:`render.light.indirect.night`); lit windows: a share ``window_lit_fraction`` of the
    houses' windows (``shop_window_lit_fraction`` of the shops' windows), chosen with
    ``window_seed``, as Lambertian emitters of luminance ``window_luminance_cd_m2``
    (``shop_window_luminance_cd_m2``) with the spectrum of the lamp reference ``window_lamp``
    (``shop_window_lamp``) (:mod:`render.light.indirect.windows`); ``frontages``: frontages
    with windows of their own (:class:`FrontageWindows`), their luminances stored relative to
    their channel's level. Each distinct window lamp is a window channel of its own
    (:attr:`window_lamps`): the houses' and the shops' scene-wide lamps first, then the lamps
    frontages name besides them, in the order they are first named; a further lamp's level
    (:attr:`window_levels`) is the ``luminance_cd_m2`` of the first frontage naming it."""

    sky_luminance_cd_m2: float = 0.0
    sky_spectrum: str = "sodium-high-pressure-cie-hp1"
    moon_illuminance_lx: float = 0.0
    moon_elevation_deg: float = 30.0
    moon_azimuth_deg: float = 180.0
    moon_cct_k: float = 4100.0
    window_lit_fraction: float = 0.0
    window_luminance_cd_m2: float = 10.0
    window_lamp: str = "led-2700k-cie-b1"
    shop_window_lit_fraction: float = 0.0
    shop_window_luminance_cd_m2: float = 50.0
    shop_window_lamp: str = "led-3000k-cie-b2"
    window_seed: int = 0
    frontages: tuple[FrontageWindows, ...] = ()

    @property
    def sky_on(self) -> bool:
        return self.sky_luminance_cd_m2 > 0.0

    @property
    def moon_on(self) -> bool:
        return self.moon_illuminance_lx > 0.0

    @property
    def windows_on(self) -> bool:
        return any(self.terms[2:])

    @property
    def window_lamps(self) -> tuple[str, ...]:
        """The window channels' lamps: ``window_lamp``, ``shop_window_lamp``, then each further
        lamp a frontage names, in the order of first naming (at least two)."""
        extra = {f.channel: f.lamp for f in reversed(self.frontages) if f.channel >= 2}
        return (self.window_lamp, self.shop_window_lamp) + tuple(extra[c] for c in sorted(extra))

    @property
    def window_levels(self) -> tuple[float, ...]:
        """The window channels' levels (cd/m²), what their windows' luminances are stored
        relative to: the houses' and shops' scene-wide luminances, then for each further lamp
        the ``luminance_cd_m2`` of the first frontage naming it."""
        extra = {f.channel: f.luminance_cd_m2 for f in reversed(self.frontages) if f.channel >= 2}
        return (self.window_luminance_cd_m2, self.shop_window_luminance_cd_m2) + tuple(extra[c] for c in sorted(extra))

    @property
    def terms(self) -> tuple[bool, ...]:
        """Which of its terms are on: sky glow, moonlight, then one per window lamp
        (:attr:`window_lamps`: house windows, shop windows, further lamps), the ambient
        channels a view keeps."""
        levels = self.window_levels
        return (
            self.sky_on,
            self.moon_on,
            self.window_lit_fraction > 0.0 and self.window_luminance_cd_m2 > 0.0 or self._frontage_lights(0),
            self.shop_window_lit_fraction > 0.0 and self.shop_window_luminance_cd_m2 > 0.0 or self._frontage_lights(1),
        ) + tuple(levels[c] > 0.0 and self._frontage_lights(c) for c in range(2, len(levels)))

    def _frontage_lights(self, channel: int) -> bool:
        return any(f.channel == channel and f.may_light for f in self.frontages)

    @property
    def terms_on(self) -> int:
        """How many of its terms are on (the ambient channels a view keeps)."""
        return sum(self.terms)

    @property
    def on(self) -> bool:
        """Whether the scene has any night light besides the luminaires."""
        return self.sky_on or self.moon_on or self.windows_on


@dataclass(frozen=True)
class CalcSettings:
    """``[calc]``: what ``lampcast calc`` checks by default (the command line may override)."""

    #: Lighting class checked (None: no class check).
    lighting_class: str | None = None
    #: A class file adding or replacing classes (None: the shipped presets only).
    classes_file: Path | None = None
    #: Observer age for the threshold increment, years.
    observer_age_years: float = 23.0
    #: "two-way": observers in each lane looking both ways along the street; "one-way": along +x.
    traffic: str = "two-way"
    #: Names of the objects that obstruct light in the calculations ("all": every object).
    #: The default, none, is the empty road the standard's calculation assumes.
    include_objects: tuple[str, ...] = ()
    #: Adjust P-class illuminance for mesopic vision (CIE 191) with the lamp's S/P ratio.
    mesopic: bool = False
    #: Heights above the facade's foot of the obtrusive-light points, m, and their spacing.
    facade_heights_m: tuple[float, ...] = (1.5, 4.5)
    facade_spacing_m: float = 3.0
    #: User-chosen obtrusive-light limits (None: not checked; lampcast claims no defaults).
    max_facade_illuminance_lx: float | None = None
    max_intensity_toward_windows_cd: float | None = None


@dataclass(frozen=True)
class EnergySettings:
    """``[energy]``: the site's figures the energy calculation needs (render.calc.energy)."""

    annual_burning_hours_h: float = 4100.0
    night_hours: float = 12.0
    tariff_per_kwh: float = 0.0
    currency: str = ""
    grid_factor_kg_per_kwh: float = 0.0
    lifetime_h: float | None = None
    constant_light_output: bool = False
    minimum_power_fraction: float = 0.0


@dataclass
class Scene:
    """A loaded and checked scene file (:func:`render.scene.load_scene`)."""

    path: Path
    name: str
    description: str
    street: Street | None
    frontages: list[Frontage] = field(default_factory=list)
    objects: list[StreetObject] = field(default_factory=list)
    markings: list[Marking] = field(default_factory=list)
    luminaires: list[Luminaire] = field(default_factory=list)
    views: list[View] = field(default_factory=list)
    render: RenderSettings = field(default_factory=RenderSettings)
    observer: Any = None  # render.vision.observer.ObserverSettings (None: the defaults)
    setups: dict[str, Setup] = field(default_factory=dict)
    sky_material: str | None = None
    gloss: dict[str, tuple[float, float]] = field(default_factory=dict)  # material -> (F0, GGX alpha)
    #: With strict paths, the folder every referenced file must lie in (the scene's folder,
    #: symbolic links resolved); None when referenced files may lie anywhere.
    reference_root: Path | None = None
    #: ``[colour] view``: the view the colour analysis uses; None: each object's best view.
    colour_view: str | None = None
    #: ``[compare]``: the setup ``compare`` uses as "before" and the options compared with it
    #: (None and empty: the command line says).
    compare_before: str | None = None
    compare_options: tuple[str, ...] = ()
    #: ``[calc]`` and ``[energy]``: calculation defaults and the site's energy figures.
    calc: CalcSettings = field(default_factory=CalcSettings)
    energy: EnergySettings = field(default_factory=EnergySettings)
    #: ``[scene] attribution``: what the scene's data require outputs to carry (e.g. a map
    #: licence), written into image metadata and the report; "" for none.
    attribution: str = ""
    #: ``[[roads]]``: roads along polylines (render.geometry.roads).
    roads: list[Road] = field(default_factory=list)
    #: ``[night]``: sky glow and moonlight (off unless given).
    night: NightLight = field(default_factory=NightLight)

    @property
    def base_dir(self) -> Path:
        """The scene file's folder, against which relative file references resolve."""
        return self.path.parent

    def view(self, name: str | None = None) -> View:
        """The view called ``name`` (default: the first); an unknown name is an InputError."""
        from render.errors import did_you_mean, input_error

        if not self.views:
            raise input_error(self.path, "views", "the scene has no [[views]]")
        if name is None:
            return self.views[0]
        for v in self.views:
            if v.name == name:
                return v
        names = [v.name for v in self.views]
        raise input_error(
            self.path, "views", f"no view named {name!r}{did_you_mean(name, names)}; views: {', '.join(names)}"
        )

    @property
    def groups(self) -> list[str]:
        """The luminaire group names, in order of first appearance."""
        return luminaire_groups(self.luminaires)


def luminaire_groups(luminaires: Iterable[Luminaire]) -> list[str]:
    """Group names of luminaires, in order of first appearance."""
    return list(dict.fromkeys(lum.group for lum in luminaires))
