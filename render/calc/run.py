"""Calculation run: the figures of ``lampcast calc`` for each setup of a scene.

For each setup, :func:`run_calculation` takes the fields between the first two luminaires of
the scene's first luminaire row (:func:`render.calc.fields.row_fields`: the carriageway's lanes
and the footways) and computes

* on every field, the horizontal illuminance grid with Ē, Emin, Emax and U0
  (:func:`render.calc.fields.evaluate_field`); with ``bounces`` > 0 (``lampcast calc
  --bounces N``) also the interreflected light on the same points and the figures with it,
  beside the direct ones and labelled as not part of the EN 13201 calculation: the headline
  figures, the class check and every other figure stay direct light (the interreflected
  transport of the fields and the footways' face grids is traced once per run and relit per
  setup, :mod:`render.calc.interreflection`);
* with the scene's ``[night]`` on (sky glow, moonlight, lit windows), the illuminance that
  light adds on every field and the footways' face grids (:mod:`render.calc.night`: traced once
  per run for every setup, its direct part with ``bounces`` 0), beside the luminaires' figures
  and labelled; it never enters Ē, Emin, U0, the headline or the class check;
* on footways, the semicylindrical and vertical illuminance at 1.5 m facing both ways along the
  street (:func:`render.calc.fields.evaluate_face_field`), with ``bounces`` > 0 also their
  interreflected light beside them, labelled;
* the edge illuminance ratio on both sides of the carriageway (:mod:`render.calc.edge`);
* the road luminance seen by the standard observer from each lane's centre, for both directions
  of traffic on a two-way street (``[calc] traffic``)
  (:func:`render.calc.road.evaluate_luminance_field`): from the r-table when one is given
  (``[street] r_table`` or the command line), otherwise Lambertian with the carriageway
  material's photometric reflectance under the setup's first lamp (labelled ``"lambertian"``);
* the threshold increment per lane and direction (:func:`render.calc.ti.threshold_increment`,
  the largest over the observer's positions) with that observer's average luminance;
* the worst observer (:func:`render.calc.ti.road_worst_case`): lowest L̄, U0 and Ul and highest
  TI over lanes and directions, the figures a class check uses;
* obtrusive light on the frontages' facades (:mod:`render.calc.obtrusive`) against the limits
  of ``[calc]``;
* light to the sky (:mod:`render.calc.sky`): the luminaires' direct upward flux and the light
  the scene reflects upward, measured by the upward exitance map over the scene
  (:class:`render.calc.sky.UpwardLight`, cast once for the run and relit per setup; facades,
  roofs and the calculation's objects included, with ``bounces`` > 0 also their interreflected
  light): their sum is the upward total, per metre of street too, and the Rayleigh- and
  scotopic-weighted figures relative to the first setup (the "before") use it; beside it the
  lit ground's reflected light counted whole (the ground patches' figure), and the
  notch-filterable share;
* energy (:func:`render.calc.energy.setup_energy`) from the setups' input watts and schedules
  and ``[energy]``, and its difference from the first setup;
* with a lighting class, the class check (:func:`render.calc.classes.check_class`) of the
  figures the class's series refers to: for M classes the luminance figures (L̄, U0 and Ul of
  luminance, TI; the worst observer) and the edge ratio, otherwise the carriageway's illuminance
  (Ē, Emin and U0 over all its lanes), mesopic per CIE 191 where asked (P classes).

**On roads.** When the first row stands along a road (``luminaire_rows.road``) its fields,
edge strips and observers follow that road (:func:`render.calc.fields.road_row_fields`, straight
or curved), the road's r-table and carriageway material serve the luminance, and the sky
figures take the ground of the street and every road (:func:`scene_ground_patches`), per metre
of street and roads together.

The calculation sees the street, the frontages, the markings, the luminaires and their columns,
and of the scene's objects only those ``[calc] include_objects`` names (default none: the empty
road the standard's calculation assumes; parked cars would otherwise shadow grid points).

Caution: a design check for discussion, not a certificate; verify against the current
edition and local codes.

References
----------
EN 13201-3:2015 and CIE 140-2000 (fields, luminance, TI) and EN 13201-2:2015 (classes): see
:mod:`render.calc.fields`, :mod:`render.calc.road`, :mod:`render.calc.ti` and
:mod:`render.calc.classes`. EN 13201-5:2015 (energy): see :mod:`render.calc.energy`.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field, replace
from typing import TYPE_CHECKING, Any

import numpy as np

from render.calc.classes import CAUTION, ClassCheck, ClassFigures, LightingClass, check_class, lighting_classes
from render.calc.edge import EdgeResult, edge_illuminance_ratio
from render.calc.energy import EnergyDifference, LuminairePower, SetupEnergy, energy_difference, setup_energy
from render.calc.fields import (
    FACE_HEIGHT_M,
    FaceResult,
    FieldResult,
    evaluate_face_field,
    evaluate_field,
    row_fields,
    row_road,
    row_section,
)
from render.calc.interreflection import InterreflectedFields, interreflected_on_fields
from render.calc.night import NightFields, night_on_fields
from render.calc.obtrusive import ObtrusiveLimits, ObtrusiveResult, evaluate_obtrusive, facade_fields
from render.calc.road import LuminanceResult, evaluate_luminance_field
from render.calc.sky import (
    GroundPatches,
    SkyFigures,
    SkyGlowRelative,
    UpwardExitanceMap,
    UpwardLight,
    direct_upward_flux_lm,
    ground_patches,
    notch_filterable_fraction,
    sky_figures,
    sky_glow_relative,
)
from render.calc.ti import DEFAULT_AGE_YEARS, RoadWorstCase, TIResult, road_worst_case, threshold_increment
from render.colour.materials import luminous_reflectance
from render.errors import did_you_mean, input_error
from render.light.luminaires import channel_factors, setting_for
from render.light.rtable import RTable, read_r_table
from render.scene.model import EnergySettings, NightLight, Scene, Street

if TYPE_CHECKING:
    from render.study import Study

__all__ = [
    "CalcOptions",
    "CalculationReport",
    "Headline",
    "SetupCalculation",
    "calc_options",
    "calc_study",
    "run_calculation",
    "scene_ground_patches",
    "setup_calculation",
]

#: Start of the calculation's shadow rays above the point's surface, m: road markings lie 2 mm
#: proud of the carriageway (render.geometry.build.MARKING_LIFT_M) and must not shadow the
#: points beneath them; anything thinner than this above a point is not an obstacle (own
#: choice; the points stay where they are, only the shadow test starts higher).
CALC_SHADOW_OFFSET_M = 0.01

#: Patch size of the lit ground whose reflected light goes to the sky, m (own choice; the
#: figure changes by well under 1 % between 0.5 m and 1 m patches on the demo street).
GROUND_PATCH_M = 1.0


@dataclass(frozen=True)
class Headline:
    """One headline figure of a setup, for tables and bar charts (``value`` None: not computed)."""

    key: str  # stable identifier, e.g. "carriageway_mean_lx"
    label: str  # short label with the symbol, e.g. "carriageway Ē"
    unit: str  # "lx", "cd/m²", "%", "lm", "kWh/year", "" for ratios
    value: float | None


@dataclass(frozen=True)
class CalcOptions:
    """Everything a calculation depends on besides the scene's geometry and setups: the scene's
    ``[calc]`` and ``[energy]`` with the command line's overrides (:func:`calc_options`)."""

    lighting_class: LightingClass | None = None
    r_table: RTable | None = None
    q0_sr: float | None = None
    age_years: float = DEFAULT_AGE_YEARS
    traffic: str = "two-way"
    include_objects: tuple[str, ...] = ()
    mesopic: bool = False
    facade_heights_m: tuple[float, ...] = (1.5, 4.5)
    facade_spacing_m: float = 3.0
    obtrusive_limits: ObtrusiveLimits = field(default_factory=ObtrusiveLimits)
    energy: EnergySettings = field(default_factory=EnergySettings)
    # Interreflections for the fields' figures with interreflected light (0: direct light only).
    # Those figures are given beside the direct ones; class checks and headlines stay direct.
    bounces: int = 0
    # The scene's [night] light (None: off or left out), given beside the luminaires' figures
    # on the fields (render.calc.night), never in them.
    night: NightLight | None = None

    @property
    def directions(self) -> tuple[int, ...]:
        """Directions of traffic the observers look in (+1 along +x, −1 along −x)."""
        return (1, -1) if self.traffic == "two-way" else (1,)

    def to_json(self) -> dict[str, Any]:
        """The options as plain JSON types (the class and r-table by name)."""
        return {
            "lighting_class": self.lighting_class.name if self.lighting_class is not None else None,
            "r_table": self.r_table.source if self.r_table is not None else None,
            "q0_sr": self.q0_sr,
            "age_years": self.age_years,
            "traffic": self.traffic,
            "include_objects": list(self.include_objects),
            "mesopic": self.mesopic,
            "facade_heights_m": list(self.facade_heights_m),
            "facade_spacing_m": self.facade_spacing_m,
            "max_facade_illuminance_lx": self.obtrusive_limits.max_vertical_lx,
            "max_intensity_toward_windows_cd": self.obtrusive_limits.max_intensity_cd,
            "energy": dict(vars(self.energy)),
            **({"bounces": self.bounces} if self.bounces > 0 else {}),
            **({"night_light": _describe_night(self.night)} if self.night is not None else {}),
        }


_UNSET: Any = object()


def _describe_night(night: NightLight) -> str:
    from render.light.indirect.night import describe_night

    return describe_night(night)


def calc_options(
    scene: Scene,
    *,
    lighting_class: str | None = _UNSET,
    classes_file: str | None = None,
    r_table_file: str | None = None,
    q0_sr: float | None = None,
    age_years: float | None = None,
    traffic: str | None = None,
    include_objects: tuple[str, ...] | str | None = None,
    mesopic: bool | None = None,
    bounces: int | None = None,
    night: bool | None = None,
) -> CalcOptions:
    """The scene's ``[calc]``, ``[energy]`` and r-table (of the ``[street]``, or of the road the
    first luminaire row stands along) with the given overrides
    (``None``: the scene's value, for ``bounces`` 0; ``night`` False leaves the scene's ``[night]``
    light out of the calculation; ``include_objects`` may be ``"all"``; ``lighting_class``
    given as ``None`` turns the class check off). Unknown class or object names are an
    :class:`~render.errors.InputError` naming the option."""
    c = scene.calc
    where = "command line"
    classes_path = classes_file if classes_file is not None else c.classes_file
    name = c.lighting_class if lighting_class is _UNSET else lighting_class
    cls = None
    if name is not None:
        classes = lighting_classes(classes_path)
        if name not in classes:
            source, key = (scene.path, "calc.lighting_class") if lighting_class is _UNSET else (where, "--class")
            raise input_error(
                source,
                key,
                f"no lighting class {name!r}{did_you_mean(name, list(classes))}; classes: {', '.join(classes)}",
            )
        cls = classes[name]
    road = row_road(scene)
    street = road.section if road is not None else scene.street  # where the fields lie
    table = None
    q0 = q0_sr
    if r_table_file is not None:
        table = read_r_table(r_table_file)
    elif street is not None and street.r_table_file is not None:
        table = read_r_table(street.r_table_file)
        q0 = q0 if q0 is not None else street.q0_sr
    names = [o.tag.name for o in scene.objects]
    if include_objects is None:
        chosen = c.include_objects
    elif include_objects == "all":
        chosen = tuple(names)
    else:
        chosen = tuple(include_objects)
        for n in chosen:
            if n not in names:
                raise input_error(where, "--include-objects", f"no object named {n!r}{did_you_mean(n, names)}")
    return CalcOptions(
        lighting_class=cls,
        r_table=table,
        q0_sr=q0,
        age_years=age_years if age_years is not None else c.observer_age_years,
        traffic=traffic if traffic is not None else c.traffic,
        include_objects=chosen,
        mesopic=mesopic if mesopic is not None else c.mesopic,
        facade_heights_m=c.facade_heights_m,
        facade_spacing_m=c.facade_spacing_m,
        obtrusive_limits=ObtrusiveLimits(c.max_facade_illuminance_lx, c.max_intensity_toward_windows_cd),
        energy=scene.energy,
        bounces=bounces if bounces is not None else 0,
        night=scene.night if scene.night.on and night is not False else None,
    )


def calc_study(study: Study, include_objects: tuple[str, ...]) -> Study:
    """The study the calculation uses: the scene with only the named objects (the street,
    frontages, markings and luminaires stay) and shadow rays starting
    :data:`CALC_SHADOW_OFFSET_M` above the points; with every object included it shares
    ``study``'s compiled geometry."""
    from render.study import Study

    keep = set(include_objects)
    objects = [o for o in study.scene.objects if o.tag.name in keep]
    same = len(objects) == len(study.scene.objects)
    used = Study(
        study.scene if same else replace(study.scene, objects=objects),
        negligible_lx=study.negligible_lx,
        shadow_offset_m=CALC_SHADOW_OFFSET_M,
    )
    if same:
        for name in ("mesh", "bvh", "reflectances", "materials"):
            if name in study.__dict__:
                used.__dict__[name] = study.__dict__[name]
    return used


@dataclass(frozen=True)
class SetupCalculation:
    """The figures of one setup (``setup`` None: the scene's own lamps)."""

    setup: str | None
    fields: tuple[FieldResult, ...]
    faces: tuple[FaceResult, ...]
    edge: tuple[EdgeResult, ...]
    luminance: tuple[LuminanceResult, ...]  # every lane × direction
    luminance_model: str  # "r-table" or "lambertian"
    road_reflectance: float | None  # photometric reflectance of the Lambertian model
    ti: tuple[TIResult, ...]  # every lane × direction
    worst: RoadWorstCase | None
    obtrusive: tuple[ObtrusiveResult, ...]
    sky: SkyFigures
    sky_relative: SkyGlowRelative | None  # to the first setup of the run (1 for that one)
    energy: SetupEnergy | None
    energy_note: str  # why energy is not computed ("" when it is)
    energy_vs_before: EnergyDifference | None
    class_check: ClassCheck | None
    upward_map: UpwardExitanceMap | None = None  # the upward exitance map (render.calc.sky)

    @property
    def ti_max_percent(self) -> float | None:
        """The highest TI over every observer."""
        return self.worst.ti_percent if self.worst is not None else None

    @property
    def direct_upward_lm(self) -> float:
        return self.sky.direct_upward_lm

    def carriageway_figures(self, series: str = "P") -> ClassFigures:
        """The figures a class check of ``series`` compares (see the module text)."""
        lanes = [f for f in self.fields if f.name.startswith("lane ")]
        grid = np.concatenate([f.illuminance_lx.ravel() for f in lanes])
        mean = float(grid.mean())
        w = self.worst
        return ClassFigures(
            mean_luminance_cd_m2=w.mean_cd_m2 if w is not None else None,
            mean_illuminance_lx=mean,
            min_illuminance_lx=float(grid.min()),
            overall_uniformity=(
                (w.u0 if w is not None else None) if series == "M" else (float(grid.min()) / mean if mean > 0 else 0.0)
            ),
            longitudinal_uniformity=w.ul if w is not None else None,
            threshold_increment_pct=self.ti_max_percent,
            edge_illuminance_ratio=min((e.ratio for e in self.edge), default=None),
        )

    def headline(self) -> tuple[Headline, ...]:
        """The setup's headline figures, in a fixed order (the same keys for every setup)."""
        figures = self.carriageway_figures("P")
        w = self.worst
        e = self.energy
        rel = self.sky_relative
        facade = max((o.max_vertical_lx for o in self.obtrusive), default=None)
        toward = max((o.max_intensity_cd for o in self.obtrusive), default=None)
        return (
            Headline("carriageway_mean_lx", "carriageway Ē", "lx", figures.mean_illuminance_lx),
            Headline("carriageway_min_lx", "carriageway Emin", "lx", figures.min_illuminance_lx),
            Headline("carriageway_u0", "carriageway U0 (E)", "", figures.overall_uniformity),
            Headline("road_mean_cd_m2", "road L̄ (worst observer)", "cd/m²", figures.mean_luminance_cd_m2),
            Headline("road_u0", "road U0 (L, worst)", "", w.u0 if w is not None else None),
            Headline("road_ul", "road Ul (worst)", "", figures.longitudinal_uniformity),
            Headline("ti_max_percent", "TI (worst)", "%", self.ti_max_percent),
            Headline("edge_ratio", "edge ratio R_EI (lower side)", "", figures.edge_illuminance_ratio),
            Headline("facade_max_lx", "facade E_v (highest)", "lx", facade),
            Headline("window_intensity_max_cd", "intensity toward windows (highest)", "cd", toward),
            Headline("upward_lm_per_m", "upward flux per metre", "lm/m", self.sky.upward_lm_per_m),
            Headline(
                "rayleigh_relative", "Rayleigh-weighted upward, relative", "", rel.rayleigh_weighted if rel else None
            ),
            Headline("annual_kwh", "annual energy", "kWh/year", e.annual_kwh if e is not None else None),
            Headline("annual_co2_kg", "annual CO₂", "kg/year", e.annual_co2_kg if e is not None else None),
        )

    def to_json(self) -> dict[str, Any]:
        """The figures as plain JSON types."""
        return {
            "setup": self.setup,
            "headline": {h.key: h.value for h in self.headline()},
            "fields": [f.to_json() for f in self.fields],
            "faces": [f.to_json() for f in self.faces],
            "edge": [e.to_json() for e in self.edge],
            "luminance_model": self.luminance_model,
            "road_reflectance": self.road_reflectance,
            "luminance": [r.to_json() for r in self.luminance],
            "ti": [t.to_json() for t in self.ti],
            "worst_observer": self.worst.to_json() if self.worst is not None else None,
            "obtrusive": [o.to_json() for o in self.obtrusive],
            "sky": self.sky.to_json(),
            "sky_relative_to_before": self.sky_relative.to_json() if self.sky_relative is not None else None,
            "energy": self.energy.to_json() if self.energy is not None else None,
            "energy_note": self.energy_note,
            "energy_vs_before": self.energy_vs_before.to_json() if self.energy_vs_before is not None else None,
            "class_check": self.class_check.to_json() if self.class_check is not None else None,
            "upward_map": self.upward_map.to_json() if self.upward_map is not None else None,
        }


@dataclass(frozen=True)
class CalculationReport:
    """The calculation of a scene for several setups (the first is the "before" the others are
    compared with), the options used, and the standing caution."""

    scene: str
    setups: tuple[SetupCalculation, ...]
    options: CalcOptions
    caution: str = CAUTION

    @property
    def lighting_class(self) -> str | None:
        return self.options.lighting_class.name if self.options.lighting_class is not None else None

    @property
    def age_years(self) -> float:
        return self.options.age_years

    def to_json(self) -> dict[str, Any]:
        """The report as plain JSON types."""
        return {
            "scene": self.scene,
            "before": self.setups[0].setup if self.setups else None,
            "options": self.options.to_json(),
            "setups": [s.to_json() for s in self.setups],
            "caution": self.caution,
        }


def _sky(
    study: Study,
    lights,
    setup,
    reflect_lx: dict[str, np.ndarray],
    patches,
    length_m: float,
    upward_map: UpwardExitanceMap | None = None,
) -> SkyFigures:
    """Direct and reflected upward flux per lamp of the setup (module text of render.calc.sky),
    the totals with the upward exitance map's reflected flux when it is given."""
    from render.colour.lamps import get_lamp
    from render.colour.materials import get_material

    factors, lamps = channel_factors(lights, setup)
    order = list(dict.fromkeys(lamps))
    tilts = [lum.tilt_deg for lum in study.scene.luminaires]
    lamp_of = [lamps[int(lights.channel[k])] for k in range(lights.n_luminaires)]
    direct = {
        lamp: direct_upward_flux_lm(
            [lights.photometries[int(lights.table[k])] for k in range(lights.n_luminaires) if lamp_of[k] == lamp],
            [tilts[k] for k in range(lights.n_luminaires) if lamp_of[k] == lamp],
            [
                float(lights.scale[k]) * float(factors[int(lights.channel[k])])
                for k in range(lights.n_luminaires)
                if lamp_of[k] == lamp
            ],
        )
        for lamp in order
    }
    library = study.materials
    reflect = [get_material(m, library, source=str(study.scene.path)).reflectance for m in patches.materials]
    spds = dict(zip(order, study.lamp_spds(order), strict=True))
    reflected = dict.fromkeys(order, 0.0)
    group_lamp = {ch.group: lamps[i] for i, ch in enumerate(lights.channels)}
    for group, e in reflect_lx.items():
        lamp = group_lamp[group]
        rho = np.array([luminous_reflectance(r, spds[lamp]) for r in reflect])[patches.material_index]
        reflected[lamp] += float(np.sum(rho * e * patches.area_m2))
    base = study.scene.base_dir
    notch = [notch_filterable_fraction(get_lamp(ref, base_dir=base, source=str(study.scene.path))) for ref in order]
    return sky_figures(
        [direct[r] for r in order],
        [reflected[r] for r in order],
        [spds[r] for r in order],
        length_m,
        notch,
        reflected_upward_map_lm=upward_map.reflected_upward_lm if upward_map is not None else None,
        reflected_upward_map_bounces=upward_map.bounces if upward_map is not None else 0,
    )


def _energy(study: Study, lights, setup) -> tuple[SetupEnergy | None, str]:
    """The setup's energy, or None and the reason."""
    from render.light.photometry import load_photometry

    scene = study.scene
    settings = scene.energy
    parts: dict[tuple, int] = {}
    missing: list[str] = []
    for lum in scene.luminaires:
        s = setting_for(setup, lum.group)
        dimming = s.dimming if s.dimming is not None else lum.dimming
        if s.input_watts is not None:
            watts, source = float(s.input_watts), "setup"
        else:
            ref = s.photometry or lum.photometry
            p = load_photometry(ref, base_dir=scene.base_dir, allowed_root=scene.reference_root)
            if not (np.isfinite(p.input_watts) and p.input_watts > 0):
                missing.append(lum.group)
                continue
            watts, source = float(p.input_watts), "photometric file"
            lumens = s.lumens if s.lumens is not None else lum.lumens
            rated = p.rated_lumens_lm if not p.is_absolute else None
            if lumens is not None and rated and abs(lumens - rated) > 1e-6 * rated:
                watts, source = watts * lumens / rated, "photometric file scaled to lumens"
        key = (lum.group, watts, source, float(dimming), float(lum.maintenance_factor))
        parts[key] = parts.get(key, 0) + 1
    if missing:
        groups = ", ".join(sorted(set(missing)))
        return None, (
            f"not computed: no input watts for the luminaires of group(s) {groups} "
            "(give input_watts in the setup, or use a photometric file that states them)"
        )
    result = setup_energy(
        [LuminairePower(g, n, w, src, d, mf) for (g, w, src, d, mf), n in parts.items()],
        setup.schedule if setup is not None else (),
        setup=setup.name if setup is not None else None,
        source=str(scene.path),
        **asdict(settings),  # EnergySettings' fields are setup_energy's keywords
    )
    return result, ""


def _road_reflectance(study: Study, setup, street: Street) -> float:
    """Photometric reflectance of the carriageway material of ``street`` (the [street] or the
    cross-section of the road the fields lie on) under the setup's first lamp."""
    from render.colour.materials import get_material

    material = get_material(street.carriageway_material, study.materials, source=str(study.scene.path))
    _, lamps = channel_factors(study.lights(setup), setup)
    spd = study.lamp_spds(lamps[:1])[0]
    return luminous_reflectance(material.reflectance, spd)


def scene_ground_patches(scene: Scene, spacing_m: float = GROUND_PATCH_M) -> tuple[GroundPatches, float]:
    """The ground of the [street] and of every road in patches of about ``spacing_m``
    (:func:`render.calc.sky.ground_patches` of each cross-section, a road's laid along its
    centreline with each patch's area that of its four corners so mapped,
    :meth:`~render.geometry.roads.Centreline.point`), and the length of street and roads
    together, m (the upward flux is given per metre of it). Where roads meet, each road's bands
    are counted whole (the junction mouths are not added, the cut-back corners not removed)."""
    from render.geometry.roads import road_centreline

    parts: list[GroundPatches] = []
    length = 0.0
    if scene.street is not None:
        parts.append(ground_patches(scene.street, spacing_m))
        length += float(scene.street.length_m)
    for road in scene.roads:
        p = ground_patches(road.section, spacing_m)
        cl = road_centreline(road)
        n_x = max(1, math.ceil(road.section.length_m / spacing_m))
        dx = road.section.length_m / n_x
        dy = p.area_m2 / dx
        x, y = p.points_m[:, 0], p.points_m[:, 1]
        corners = [cl.point(x + a * dx / 2, y + b * dy / 2) for a, b in ((-1, -1), (1, -1), (1, 1), (-1, 1))]
        area = 0.5 * np.abs(sum(_cross2(corners[k], corners[(k + 1) % 4]) for k in range(4)))
        points = np.column_stack([cl.point(x, y), p.points_m[:, 2]])
        parts.append(GroundPatches(points, area, p.material_index, p.materials))
        length += float(road.section.length_m)
    materials = tuple(dict.fromkeys(m for p in parts for m in p.materials))
    index = [np.array([materials.index(m) for m in p.materials], np.int64)[p.material_index] for p in parts]
    return (
        GroundPatches(
            np.concatenate([p.points_m for p in parts]),
            np.concatenate([p.area_m2 for p in parts]),
            np.concatenate(index),
            materials,
        ),
        length,
    )


def _cross2(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return a[..., 0] * b[..., 1] - a[..., 1] * b[..., 0]


def _s_p_ratio(study: Study, lights, setup, lanes) -> float:
    """S/P ratio of the light on the carriageway: Σ_g SP_g·E_g / Σ_g E_g over the groups."""
    from render.colour.observers import sp_ratio

    pts = np.concatenate([f.points_m for f in lanes])
    nrm = np.concatenate([f.normals for f in lanes])
    per_group = study.illuminance_lx(pts, nrm, setup, per_group=True)
    _, lamps = channel_factors(lights, setup)
    group_lamp = {ch.group: lamps[i] for i, ch in enumerate(lights.channels)}
    weights = {g: float(np.mean(e)) for g, e in per_group.items()}
    total = sum(weights.values())
    if total <= 0:
        return float(sp_ratio(study.lamp_spds([lamps[0]])[0]))
    return sum(w * float(sp_ratio(study.lamp_spds([group_lamp[g]])[0])) for g, w in weights.items()) / total


def setup_calculation(
    study: Study,
    setup: str | None = None,
    options: CalcOptions | None = None,
    upward: UpwardLight | None = None,
    night: NightFields | None = None,
    interreflected: InterreflectedFields | None = None,
) -> SetupCalculation:
    """The figures of one setup (the module text lists them) on ``study`` as given (see
    :func:`calc_study` for leaving out the scene's objects); ``upward``: the upward exitance
    map's plane already cast on ``study`` (cast here under this setup when not given);
    ``night``: the night light on the fields already traced (traced here when the options
    have night light and it is not given); ``interreflected``: with ``bounces`` > 0, the
    interreflected transport on the fields already traced (traced here when not given)."""
    opts = options if options is not None else CalcOptions()
    s = study.setup(setup)
    lights = study.lights(s)
    scene = study.scene
    street, path, _ = row_section(scene)
    fields = row_fields(scene)
    results = tuple(evaluate_field(study, f, s) for f in fields)
    faces = tuple(
        evaluate_face_field(study, f, s, facing=facing)
        for f in fields
        if f.name.startswith("footway ")
        for facing in ((1.0, 0.0, 0.0), (-1.0, 0.0, 0.0))
    )
    if opts.bounces > 0:
        if interreflected is None:
            interreflected = _interreflected_fields(study, fields, s, opts)
        grids = interreflected.at(s)
        results = tuple(replace(r, interreflected_lx=grids.horizontal[r.name]) for r in results)
        faces = tuple(
            replace(
                f,
                interreflected_vertical_lx=grids.vertical[(f.name, int(np.sign(f.facing[0])))],
                interreflected_semicylindrical_lx=grids.semicylindrical[(f.name, int(np.sign(f.facing[0])))],
            )
            for f in faces
        )
    if night is None and opts.night is not None:
        night = _night_fields(study, fields, opts)
    if night is not None:
        results = tuple(replace(r, night=night.horizontal[r.name]) for r in results)
        faces = tuple(
            replace(
                f,
                night_vertical=night.vertical[(f.name, int(np.sign(f.facing[0])))],
                night_semicylindrical=night.semicylindrical[(f.name, int(np.sign(f.facing[0])))],
            )
            for f in faces
        )
    lanes = [f for f in fields if f.name.startswith("lane ")]
    x0 = float(min(f.along.min() - f.spacing_m[0] / 2 for f in lanes))
    spacing = float(lanes[0].shape[0] * lanes[0].spacing_m[0])
    edge = tuple(edge_illuminance_ratio(study, street, x0, spacing, s, path))
    reflectance = None if opts.r_table is not None else _road_reflectance(study, s, street)
    luminance: list[LuminanceResult] = []
    ti: list[TIResult] = []
    for direction in opts.directions:
        lum = evaluate_luminance_field(lights, lanes, s, opts.r_table, reflectance, opts.q0_sr, direction=direction)
        luminance.extend(lum)
        ti.extend(
            threshold_increment(lights, lane, r.mean_cd_m2, s, opts.age_years, direction=direction)
            for lane, r in zip(lanes, lum, strict=True)
            if r.mean_cd_m2 > 0
        )
    worst = road_worst_case(luminance, ti) if luminance else None
    obtrusive = ()
    if scene.frontages:
        obtrusive = tuple(
            evaluate_obtrusive(study, f, s, opts.obtrusive_limits)
            for f in facade_fields(scene, spacing_m=opts.facade_spacing_m, heights_m=opts.facade_heights_m)
            if f.points_m.size
        )
    patches, length_m = scene_ground_patches(scene, GROUND_PATCH_M)
    ground_lx = study.illuminance_lx(
        patches.points_m, np.tile([0.0, 0.0, 1.0], (len(patches.area_m2), 1)), s, per_group=True
    )
    if upward is None:
        upward = UpwardLight(study, s, bounces=opts.bounces)
    upward_map = upward.exitance(s)
    sky = _sky(study, lights, s, ground_lx, patches, length_m, upward_map)
    energy, note = _energy(study, lights, s)
    calc = SetupCalculation(
        setup=s.name if s is not None else None,
        fields=results,
        faces=faces,
        edge=edge,
        luminance=tuple(luminance),
        luminance_model="lambertian" if opts.r_table is None else "r-table",
        road_reflectance=reflectance,
        ti=tuple(ti),
        worst=worst,
        obtrusive=obtrusive,
        sky=sky,
        sky_relative=None,
        energy=energy,
        energy_note=note,
        energy_vs_before=None,
        class_check=None,
        upward_map=upward_map,
    )
    cls = opts.lighting_class
    if cls is None:
        return calc
    figures = calc.carriageway_figures(cls.series)
    sp = _s_p_ratio(study, lights, s, lanes) if opts.mesopic and cls.series == "P" else None
    return replace(calc, class_check=check_class(cls, figures, s_p_ratio=sp))


def _night_fields(study: Study, fields, opts: CalcOptions) -> NightFields | None:
    """The night light on the calculation's fields (lamp-independent: once per run)."""
    if opts.night is None:
        return None
    return night_on_fields(study, fields, bounces=opts.bounces, face_height_m=FACE_HEIGHT_M)


def _interreflected_fields(study: Study, fields, setup, opts: CalcOptions) -> InterreflectedFields:
    """The luminaires' interreflected transport on the calculation's fields and footway faces
    (traced once under ``setup``, relit per setup)."""
    return interreflected_on_fields(study, fields, setup, bounces=opts.bounces, face_height_m=FACE_HEIGHT_M)


def run_calculation(study: Study, setups: list[str | None], options: CalcOptions | None = None) -> CalculationReport:
    """The calculation of every setup in ``setups`` (``None``: the scene's own lamps); the first
    is the "before" the others' sky-glow and energy are compared with. ``options`` default to
    the scene's own (:func:`calc_options`)."""
    opts = options if options is not None else calc_options(study.scene)
    if opts.mesopic and opts.lighting_class is not None and opts.lighting_class.series != "P":
        raise input_error(
            "calculation options",
            "mesopic",
            f"the mesopic adjustment (CIE 191) applies to P classes, not to {opts.lighting_class.name}",
        )
    used = calc_study(study, opts.include_objects)
    upward = UpwardLight(used, setups[0], bounces=opts.bounces) if setups else None
    night = _night_fields(used, row_fields(used.scene), opts) if setups and opts.night is not None else None
    ir = _interreflected_fields(used, row_fields(used.scene), setups[0], opts) if setups and opts.bounces > 0 else None
    out = [setup_calculation(used, s, opts, upward, night, ir) for s in setups]
    first = out[0] if out else None
    if first is not None:
        out[0] = first = replace(first, sky_relative=sky_glow_relative(first.sky, first.sky))
    for i in range(1, len(out)):
        c = out[i]
        assert first is not None
        out[i] = replace(
            c,
            sky_relative=sky_glow_relative(first.sky, c.sky),
            energy_vs_before=(
                energy_difference(first.energy, c.energy) if first.energy is not None and c.energy is not None else None
            ),
        )
    return CalculationReport(scene=str(study.scene.path), setups=tuple(out), options=opts)
