"""Calculation run: the figures of ``lampcast calc`` for each setup of a scene.

For each setup, :func:`run_calculation` takes the fields between the first two luminaires of
the scene's first luminaire row (:func:`render.calc.fields.row_fields`: the carriageway's lanes
and the footways) and computes

* on every field, the horizontal illuminance grid with Ē, Emin, Emax and U0
  (:func:`render.calc.fields.evaluate_field`);
* on footways, the semicylindrical and vertical illuminance at 1.5 m facing both ways along the
  street (:func:`render.calc.fields.evaluate_face_field`);
* the road luminance seen by the standard observer from each lane's centre
  (:func:`render.calc.road.evaluate_luminance_field`): from the user's r-table when one is
  given, otherwise Lambertian with the carriageway material's photometric reflectance under
  the setup's first lamp (labelled ``"lambertian"``);
* the threshold increment per lane (:func:`render.calc.ti.threshold_increment`, the largest
  over the observer's positions) with the lane's average luminance, and its maximum over lanes;
* the direct upward flux of all the setup's luminaires (:func:`render.calc.sky.direct_upward_flux_lm`)
  and that flux per metre of the modelled street (light reflected upward is not included here);
* with a lighting class, the class check (:func:`render.calc.classes.check_class`) of the
  figures the class's series refers to: for M classes the luminance figures (L̄, U0 and Ul of
  luminance, TI; the worst observer position), otherwise the carriageway's illuminance (Ē,
  Emin and U0 over all its lanes).

Energy figures need inputs the scene does not hold yet and are not part of the run.

Caution: a design check for discussion, not a certificate; verify against the current
edition and local codes.

References
----------
EN 13201-3:2015 and CIE 140-2000 (fields, luminance, TI) and EN 13201-2:2015 (classes): see
:mod:`render.calc.fields`, :mod:`render.calc.road`, :mod:`render.calc.ti` and
:mod:`render.calc.classes`.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import numpy as np

from render.calc.classes import CAUTION, ClassCheck, ClassFigures, LightingClass, check_class
from render.calc.fields import FaceResult, FieldResult, evaluate_face_field, evaluate_field, row_fields
from render.calc.road import LuminanceResult, evaluate_luminance_field
from render.calc.sky import direct_upward_flux_lm, photometric_reflectance
from render.calc.ti import DEFAULT_AGE_YEARS, TIResult, threshold_increment
from render.light.luminaires import channel_factors
from render.light.rtable import RTable

if TYPE_CHECKING:
    from render.study import Study

__all__ = ["CalculationReport", "Headline", "SetupCalculation", "run_calculation", "setup_calculation"]


@dataclass(frozen=True)
class Headline:
    """One headline figure of a setup, for tables and bar charts (``value`` None: not computed)."""

    key: str  # stable identifier, e.g. "carriageway_mean_lx"
    label: str  # short label with the symbol, e.g. "carriageway Ē"
    unit: str  # "lx", "cd/m²", "%", "lm", "kWh/year", "" for ratios
    value: float | None


@dataclass(frozen=True)
class SetupCalculation:
    """The figures of one setup (``setup`` None: the scene's own lamps)."""

    setup: str | None
    fields: tuple[FieldResult, ...]
    faces: tuple[FaceResult, ...]
    luminance: tuple[LuminanceResult, ...]
    luminance_model: str  # "r-table" or "lambertian"
    road_reflectance: float | None  # photometric reflectance of the Lambertian model
    ti: tuple[TIResult, ...]
    ti_max_percent: float | None
    direct_upward_lm: float
    street_length_m: float
    direct_upward_lm_per_m: float
    class_check: ClassCheck | None

    def carriageway_figures(self, series: str = "P") -> ClassFigures:
        """The figures a class check of ``series`` compares (see the module text)."""
        lanes = [f for f in self.fields if f.name.startswith("lane ")]
        grid = np.concatenate([f.illuminance_lx.ravel() for f in lanes])
        mean = float(grid.mean())
        lum = self.luminance
        return ClassFigures(
            mean_luminance_cd_m2=min(r.mean_cd_m2 for r in lum) if lum else None,
            mean_illuminance_lx=mean,
            min_illuminance_lx=float(grid.min()),
            overall_uniformity=(
                (min(r.u0 for r in lum) if lum else None)
                if series == "M"
                else (float(grid.min()) / mean if mean > 0 else 0.0)
            ),
            longitudinal_uniformity=min(r.ul for r in lum) if lum else None,
            threshold_increment_pct=self.ti_max_percent,
        )

    def headline(self) -> tuple[Headline, ...]:
        """The setup's headline figures, in a fixed order (the same keys for every setup)."""
        figures = self.carriageway_figures("P")
        lum = self.luminance
        return (
            Headline("carriageway_mean_lx", "carriageway Ē", "lx", figures.mean_illuminance_lx),
            Headline("carriageway_min_lx", "carriageway Emin", "lx", figures.min_illuminance_lx),
            Headline("carriageway_u0", "carriageway U0 (E)", "", figures.overall_uniformity),
            Headline("road_mean_cd_m2", "road L̄ (worst observer)", "cd/m²", figures.mean_luminance_cd_m2),
            Headline("road_u0", "road U0 (L)", "", min(r.u0 for r in lum) if lum else None),
            Headline("road_ul", "road Ul", "", figures.longitudinal_uniformity),
            Headline("ti_max_percent", "TI (worst)", "%", self.ti_max_percent),
            Headline("direct_upward_lm", "direct upward flux", "lm", self.direct_upward_lm),
        )

    def to_json(self) -> dict[str, Any]:
        """The figures as plain JSON types."""
        return {
            "setup": self.setup,
            "headline": {h.key: h.value for h in self.headline()},
            "fields": [f.to_json() for f in self.fields],
            "faces": [f.to_json() for f in self.faces],
            "luminance_model": self.luminance_model,
            "road_reflectance": self.road_reflectance,
            "luminance": [r.to_json() for r in self.luminance],
            "ti": [t.to_json() for t in self.ti],
            "ti_max_percent": self.ti_max_percent,
            "direct_upward_lm": self.direct_upward_lm,
            "street_length_m": self.street_length_m,
            "direct_upward_lm_per_m": self.direct_upward_lm_per_m,
            "class_check": self.class_check.to_json() if self.class_check is not None else None,
        }


@dataclass(frozen=True)
class CalculationReport:
    """The calculation of a scene for several setups, with the standing caution."""

    scene: str
    setups: tuple[SetupCalculation, ...]
    lighting_class: str | None
    r_table: str | None
    q0_sr: float | None
    age_years: float
    caution: str = CAUTION

    def to_json(self) -> dict[str, Any]:
        """The report as plain JSON types."""
        return {
            "scene": self.scene,
            "lighting_class": self.lighting_class,
            "r_table": self.r_table,
            "q0_sr": self.q0_sr,
            "age_years": self.age_years,
            "energy": "not computed: the scene holds no energy inputs",
            "setups": [s.to_json() for s in self.setups],
            "caution": self.caution,
        }


def _road_reflectance(study: Study, setup) -> float:
    """Photometric reflectance of the carriageway material under the setup's first lamp."""
    from render.colour.materials import get_material, material_library

    street = study.scene.street
    assert street is not None
    material = get_material(street.carriageway_material, material_library(), source=str(study.scene.path))
    _, lamps = channel_factors(study.lights(setup), setup)
    spd = study.lamp_spds(lamps[:1])[0]
    return photometric_reflectance(material.reflectance, spd)


def setup_calculation(
    study: Study,
    setup: str | None = None,
    *,
    lighting_class: LightingClass | None = None,
    r_table: RTable | None = None,
    q0_sr: float | None = None,
    age_years: float = DEFAULT_AGE_YEARS,
) -> SetupCalculation:
    """The figures of one setup (the module text lists them)."""
    s = study.setup(setup)
    lights = study.lights(s)
    fields = row_fields(study.scene)
    results = tuple(evaluate_field(study, f, s) for f in fields)
    faces = tuple(
        evaluate_face_field(study, f, s, facing=facing)
        for f in fields
        if f.name.startswith("footway ")
        for facing in ((1.0, 0.0, 0.0), (-1.0, 0.0, 0.0))
    )
    lanes = [f for f in fields if f.name.startswith("lane ")]
    reflectance = None if r_table is not None else _road_reflectance(study, s)
    luminance = tuple(evaluate_luminance_field(lights, lanes, s, r_table, reflectance, q0_sr))
    ti = tuple(
        threshold_increment(lights, lane, r.mean_cd_m2, s, age_years)
        for lane, r in zip(lanes, luminance, strict=True)
        if r.mean_cd_m2 > 0
    )
    factors, _ = channel_factors(lights, s)
    tilts = [lum.tilt_deg for lum in study.scene.luminaires]
    if len(tilts) != lights.n_luminaires:
        raise RuntimeError("the luminaire set does not follow the scene's luminaires")
    upward = direct_upward_flux_lm(
        [lights.photometries[int(t)] for t in lights.table],
        tilts,
        [float(lights.scale[k]) * float(factors[int(lights.channel[k])]) for k in range(lights.n_luminaires)],
    )
    assert study.scene.street is not None
    length = float(study.scene.street.length_m)
    calc = SetupCalculation(
        setup=s.name if s is not None else None,
        fields=results,
        faces=faces,
        luminance=luminance,
        luminance_model="lambertian" if r_table is None else "r-table",
        road_reflectance=reflectance,
        ti=ti,
        ti_max_percent=max((t.ti_percent for t in ti), default=None),
        direct_upward_lm=upward,
        street_length_m=length,
        direct_upward_lm_per_m=upward / length,
        class_check=None,
    )
    if lighting_class is None:
        return calc
    figures = calc.carriageway_figures(lighting_class.series)
    return replace(calc, class_check=check_class(lighting_class, figures))


def run_calculation(
    study: Study,
    setups: list[str | None],
    *,
    lighting_class: LightingClass | None = None,
    r_table: RTable | None = None,
    q0_sr: float | None = None,
    age_years: float = DEFAULT_AGE_YEARS,
) -> CalculationReport:
    """The calculation of every setup in ``setups`` (``None``: the scene's own lamps)."""
    return CalculationReport(
        scene=str(study.scene.path),
        setups=tuple(
            setup_calculation(
                study, s, lighting_class=lighting_class, r_table=r_table, q0_sr=q0_sr, age_years=age_years
            )
            for s in setups
        ),
        lighting_class=lighting_class.name if lighting_class is not None else None,
        r_table=r_table.source if r_table is not None else None,
        q0_sr=q0_sr,
        age_years=age_years,
    )
